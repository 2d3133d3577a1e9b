"""The installed wheel runs the service: run by the wheel's own Python, from a
folder outside the checkout (so nothing of the checkout can be imported).

Starts ``cycleledger serve`` on 127.0.0.1 with a fresh data directory, then
checks readiness, that the contract served is the package's, a demo
assessment posted with ``cycleledger post`` and its report page; stops the
service at the end, whatever happens. Exits non-zero on any failure.
"""

from __future__ import annotations

import json
import os
import socket
import subprocess
import sys
import tempfile
import time
import urllib.request
from importlib import resources
from pathlib import Path


def free_port() -> int:
    with socket.socket() as s:
        s.bind(("127.0.0.1", 0))
        return s.getsockname()[1]


def get(url: str) -> tuple[int, bytes]:
    with urllib.request.urlopen(url, timeout=30) as r:
        return r.status, r.read()


def main() -> int:
    import service
    from service import demo

    here = Path.cwd()
    checkout = Path(sys.argv[1]).resolve()
    installed = Path(service.__file__).resolve().parent
    assert checkout not in installed.parents, f"service imported from the checkout: {installed}"
    print(f"service imported from {installed}")
    bin_dir = Path(sys.executable).parent
    port = free_port()
    url = f"http://127.0.0.1:{port}"
    data = Path(tempfile.mkdtemp(prefix="cycleledger-wheel-data-"))
    env = {**os.environ, "NUMBA_CACHE_DIR": str(here / "numba-cache"),
           "MPLCONFIGDIR": str(here / "mpl")}
    # The log goes to a file: a pipe nobody reads fills and stalls the service.
    log_path = data.parent / f"{data.name}.log"
    with open(log_path, "wb") as log:
        proc = subprocess.Popen([str(bin_dir / "cycleledger"), "serve", "--host", "127.0.0.1",
                                 "--port", str(port), "--data-dir", str(data)], env=env,
                                stdout=subprocess.DEVNULL, stderr=log)
    try:
        deadline = time.monotonic() + 180
        while True:
            try:
                if get(f"{url}/v1/ready")[0] == 200:
                    break
            except OSError:
                pass
            if proc.poll() is not None or time.monotonic() > deadline:
                print(log_path.read_text(errors="replace")[-3000:], file=sys.stderr)
                raise SystemExit("the service did not become ready")
            time.sleep(0.5)
        print("ready")
        status, body = get(f"{url}/openapi.yaml")
        packaged = resources.files("service.api").joinpath("openapi.yaml").read_bytes()
        assert status == 200 and body == packaged, "the contract served is not the package's"
        print("contract served from package data")
        status, body = get(f"{url}/")
        assert status == 200 and b"Assess a recording" in body, "no start page at /"
        print("start page served from package data")
        csv = demo.write(here / "demo.csv")
        points = here / "points.json"
        points.write_text(json.dumps(demo.points()))
        out = subprocess.run([str(bin_dir / "cycleledger"), "post", str(csv), "--points",
                              str(points), "--url", url, "--json"], env=env,
                             capture_output=True, text=True, timeout=600)
        if out.returncode not in (0, 1):
            raise SystemExit(f"cycleledger post failed: {out.stderr[-2000:]}")
        report = json.loads(out.stdout)
        assert set(report["points"]) == {"weld_toe_upper", "weld_toe_lower", "pin_lug",
                                         "cylinder_mount"}, report["points"].keys()
        aid = report["assessment_id"]
        print(f"demo assessed: {aid}")
        status, page = get(f"{url}/v1/assessments/{aid}/report")
        assert status == 200 and b"<svg" in page and b"qualified engineer" in page
        print(f"report page: {len(page) // 1024} kB")
    finally:
        proc.terminate()
        try:
            proc.wait(timeout=30)
        except subprocess.TimeoutExpired:
            proc.kill()
    print("wheel check passed")
    return 0


if __name__ == "__main__":
    sys.exit(main())
