"""A small Python client for rig pipelines: upload, assess, wait, fetch as pandas.

Standard library HTTP only (``urllib``), so a pipeline needs nothing beyond
this package. Recordings go up as Parquet, the fast path of the service.

Example::

    from service.client import Client
    c = Client("http://127.0.0.1:8350")
    h = c.upload(df, unit="microstrain", youngs_modulus=206000, sample_rate_hz=500)
    a = c.assess(history_id=h["id"], settings={"curve": "EN1993-1-9:71"})
    table = c.summary(a["id"])          # one row per point (DataFrame)
"""

from __future__ import annotations

import http.client
import io
import json
import os
import time
import urllib.error
import urllib.parse
import urllib.request

PARQUET = "application/vnd.apache.parquet"


class ServiceError(Exception):
    """The service answered with problem details (or could not be reached)."""

    def __init__(self, status: int, problem: dict):
        self.status = status
        self.problem = problem
        super().__init__(f"{status} {problem.get('title', '')}: {problem.get('detail', '')}")


#: Environment variable a client reads its API key from when none is given.
API_KEY_ENV = "CYCLELEDGER_API_KEY"


class Client:
    """Talk to one cycleledger service at ``base_url``.

    ``api_key`` (default: ``$CYCLELEDGER_API_KEY``) is sent as a bearer
    token; without one the service answers only in its open mode.
    """

    def __init__(self, base_url: str = "http://127.0.0.1:8350", timeout_s: float = 300.0,
                 api_key: str | None = None):
        self.base_url = base_url.rstrip("/")
        self.timeout_s = timeout_s
        self.api_key = api_key if api_key is not None else os.environ.get(API_KEY_ENV) or None

    # ------------------------------------------------------------------ plumbing

    def request(self, method: str, path: str, *, body: bytes | None = None,
                content_type: str | None = None, params: dict | None = None,
                headers: dict | None = None, accept: str = "application/json"):
        """``(status, headers, body bytes)``; raises ServiceError on 4xx/5xx."""
        url = self.base_url + path
        if params:
            url += "?" + urllib.parse.urlencode({k: v for k, v in params.items()
                                                 if v is not None})
        req = urllib.request.Request(url, data=body, method=method)
        req.add_header("Accept", accept)
        if self.api_key:
            req.add_header("Authorization", f"Bearer {self.api_key}")
        if content_type:
            req.add_header("Content-Type", content_type)
        for k, v in (headers or {}).items():
            req.add_header(k, v)
        try:
            with urllib.request.urlopen(req, timeout=self.timeout_s) as resp:
                return resp.status, dict(resp.headers), resp.read()
        except urllib.error.HTTPError as exc:
            raw = exc.read()
            try:
                problem = json.loads(raw)
            except ValueError:
                problem = {"title": exc.reason, "detail": raw[:200].decode("utf-8", "replace")}
            raise ServiceError(exc.code, problem) from None
        except urllib.error.URLError as exc:
            raise ServiceError(0, {"title": "Unreachable", "detail": str(exc.reason)}) from None
        except (OSError, http.client.HTTPException) as exc:
            # The connection broke mid-request: the answer (if any) is lost;
            # a pipeline retries, and the service counts a retry once.
            raise ServiceError(0, {"title": "Connection lost", "detail": str(exc)}) from None

    def get_json(self, path: str, **params) -> dict:
        return json.loads(self.request("GET", path, params=params)[2])

    def post_json(self, path: str, doc: dict, headers: dict | None = None):
        status, hdrs, raw = self.request("POST", path, body=json.dumps(doc).encode(),
                                         content_type="application/json", headers=headers)
        return status, json.loads(raw)

    # ------------------------------------------------------------------ resources

    def ready(self) -> bool:
        try:
            return self.get_json("/v1/ready").get("status") == "ready"
        except ServiceError:
            return False

    def upload(self, data, *, unit: str | None = None, units: dict | None = None,
               youngs_modulus: float | None = None, sample_rate_hz: float | None = None,
               name: str | None = None, time_column: str | None = None, **options) -> dict:
        """Upload a DataFrame or ``{channel: array}`` (sent as Parquet), or a
        file by its path, sent as it is: the service recognises CSV in its
        dialects, Parquet, Arrow, MDF 4, HDF5 and gzip from the bytes.
        ``options`` are the reader's (``delimiter``, ``decimal``,
        ``header_row``, ``channels``, ``group``, ``gauge_factor_set``,
        ``gauge_factor``)."""
        if isinstance(data, (str, bytes)) or hasattr(data, "__fspath__"):
            with open(data, "rb") as f:
                body = f.read()
            content_type = "application/octet-stream"
        else:
            import pandas as pd

            df = data if isinstance(data, pd.DataFrame) else pd.DataFrame(dict(data))
            buf = io.BytesIO()
            df.to_parquet(buf, index=False)
            body, content_type = buf.getvalue(), PARQUET
        params = {"unit": unit, "youngs_modulus": youngs_modulus,
                  "sample_rate_hz": sample_rate_hz, "name": name, "time_column": time_column,
                  **options}
        if units:
            params["units"] = ",".join(f"{k}:{v}" for k, v in units.items())
        _, _, raw = self.request("POST", "/v1/histories", body=body,
                                 content_type=content_type, params=params)
        return json.loads(raw)

    def assess(self, *, wait: bool = True, progress=None, respond_async: bool = False,
               **request) -> dict:
        """Post an assessment (fields as in the API); wait for a job if one is made.

        ``progress(job)`` is called on each poll of a job. Returns the
        assessment, or the job when ``wait`` is false and a job was made.
        """
        headers = {"Prefer": "respond-async"} if respond_async else None
        status, doc = self.post_json("/v1/assessments", request, headers)
        if status == 202 and wait:
            return self.wait(doc["links"]["self"], progress=progress)
        return doc

    def wait(self, job_path: str, *, progress=None, poll_s: float = 0.2,
             timeout_s: float | None = None) -> dict:
        """Poll a job until it ends; the assessment, or ServiceError if it failed."""
        deadline = time.monotonic() + (timeout_s or self.timeout_s)
        while True:
            job = self.get_json(job_path)
            if progress is not None:
                progress(job)
            if job["state"] == "done":
                return self.get_json(job["links"]["result"])
            if job["state"] == "failed":
                raise ServiceError(422, job.get("error") or {"title": "Job failed"})
            if time.monotonic() > deadline:
                raise ServiceError(0, {"title": "Timeout",
                                       "detail": f"job still {job['state']}"})
            time.sleep(poll_s)

    def summary(self, assessment_id: str):
        """Per-point summary as a DataFrame (index: point)."""
        import pandas as pd

        doc = self.get_json(f"/v1/assessments/{assessment_id}/summary")
        return pd.DataFrame(doc["items"]).set_index("point")

    def cycles(self, assessment_id: str, point: str):
        """A point's cycle table with per-cycle damage, as a DataFrame."""
        import pandas as pd

        path = f"/v1/assessments/{assessment_id}/points/{urllib.parse.quote(point, safe='')}/cycles"
        _, _, raw = self.request("GET", path, accept=PARQUET)
        return pd.read_parquet(io.BytesIO(raw))

    def curves(self) -> list[dict]:
        return self.get_json("/v1/curves")["items"]
