"""A small Python client for rig pipelines: upload, assess, wait, fetch as pandas.

Standard library HTTP only (``http.client``, one kept-alive connection per
thread), so a pipeline needs nothing beyond this package. DataFrames go up
as Parquet, the fast path of the service; files are streamed as they are
(the service reads rig formats itself). Every POST carries an
``Idempotency-Key``, so a request whose answer was lost (a
timeout, a dropped connection, a 429 or 503) is retried with back-off
(``Retry-After`` honoured) and counted once.

Example::

    from service.client import Client
    c = Client("http://127.0.0.1:8350")
    h = c.upload_history(df, unit="microstrain", youngs_modulus=206000, sample_rate_hz=500)
    a = c.assess(history_id=h["id"], settings={"curve": "EN1993-1-9:71"})
    table = c.summary(a["id"])          # one row per point (DataFrame)
"""

from __future__ import annotations

import http.client
import io
import json
import os
import pathlib
import socket
import threading
import time
import urllib.parse
import warnings

PARQUET = "application/vnd.apache.parquet"


class ServiceError(Exception):
    """The service answered with problem details (or could not be reached)."""

    def __init__(self, status: int, problem: dict):
        self.status = status
        self.problem = problem
        self.retry_after_s: float | None = None  # the service's Retry-After, if it said
        super().__init__(f"{status} {problem.get('title', '')}: {problem.get('detail', '')}")


#: Environment variable a client reads its API key from when none is given.
API_KEY_ENV = "CYCLELEDGER_API_KEY"


def _body(data) -> tuple[bytes | pathlib.Path, str]:
    """A file as its path (streamed as it is when sent: the service recognises
    the format), or a DataFrame / ``{channel: array}`` as Parquet bytes; with
    its content type."""
    if isinstance(data, (str, bytes)) or hasattr(data, "__fspath__"):
        path = pathlib.Path(os.fsdecode(data))
        if not path.is_file():
            raise FileNotFoundError(f"no file {path}")
        return path, "application/octet-stream"
    import pandas as pd

    df = data if isinstance(data, pd.DataFrame) else pd.DataFrame(dict(data))
    buf = io.BytesIO()
    df.to_parquet(buf, index=False)
    return buf.getvalue(), PARQUET


class Client:
    """Talk to one cycleledger service at ``base_url``.

    ``api_key`` (default: ``$CYCLELEDGER_API_KEY``) is sent as a bearer
    token; without one the service answers only in its open mode.
    """

    def __init__(self, base_url: str = "http://127.0.0.1:8350", timeout_s: float = 300.0,
                 api_key: str | None = None, retries: int = 3, backoff_s: float = 0.5):
        self.base_url = base_url.rstrip("/")
        self.timeout_s = timeout_s
        self.api_key = api_key if api_key is not None else os.environ.get(API_KEY_ENV) or None
        self.retries = retries
        self.backoff_s = backoff_s
        # A path prefix (a service behind a proxy at /something) and one
        # kept-alive connection per thread (http.client is not thread-safe).
        self._prefix = urllib.parse.urlsplit(self.base_url).path.rstrip("/")
        self._local = threading.local()
        self._open: set = set()
        self._lock = threading.Lock()

    # ------------------------------------------------------------------ plumbing

    #: Answers worth another try: the connection failed or the service was
    #: busy (its 429 and 503 say when, in Retry-After).
    RETRY_STATUSES = (0, 429, 502, 503, 504)

    def request(self, method: str, path: str, *, body: bytes | None = None,
                content_type: str | None = None, params: dict | None = None,
                headers: dict | None = None, accept: str = "application/json"):
        """``(status, headers, body bytes)``; raises ServiceError on 4xx/5xx.

        A POST gets an ``Idempotency-Key`` (unless one is given) so that it
        can be retried safely; failed connections and 429/502/503/504 are
        tried again up to ``retries`` times, waiting ``Retry-After`` when the
        service says, else ``backoff_s`` doubled each time.
        """
        import uuid

        headers = dict(headers or {})
        if method == "POST" and "Idempotency-Key" not in headers:
            headers["Idempotency-Key"] = f"client-{uuid.uuid4().hex}"
        for attempt in range(self.retries + 1):
            try:
                return self._once(method, path, body=body, content_type=content_type,
                                  params=params, headers=headers, accept=accept)
            except ServiceError as exc:
                if exc.status not in self.RETRY_STATUSES or attempt == self.retries:
                    raise
                wait = exc.retry_after_s
                time.sleep(wait if wait is not None else self.backoff_s * 2 ** attempt)
        raise AssertionError("unreachable")

    def _connection(self) -> tuple[http.client.HTTPConnection, bool]:
        """This thread's connection to the service (kept alive between
        requests), and whether it has served a request before."""
        conn = getattr(self._local, "conn", None)
        if conn is None:
            u = urllib.parse.urlsplit(self.base_url)
            cls = http.client.HTTPSConnection if u.scheme == "https" else \
                http.client.HTTPConnection
            conn = cls(u.hostname, u.port, timeout=self.timeout_s)
            self._local.conn, self._local.used = conn, False
        with self._lock:
            self._open.add(conn)  # again after close(): http.client reconnects on use
        return conn, self._local.used

    def _drop(self) -> None:
        """Close this thread's connection (the next request opens another)."""
        conn = getattr(self._local, "conn", None)
        if conn is not None:
            conn.close()
            self._local.conn = None
            with self._lock:
                self._open.discard(conn)

    def close(self) -> None:
        """Close every connection of this client, of every thread."""
        with self._lock:
            conns, self._open = list(self._open), set()
        for conn in conns:
            conn.close()
        self._local.conn = None

    def __del__(self):
        # Connections are closed with the client, not left to the collector.
        if getattr(self, "_open", None):
            self.close()

    def __enter__(self):
        return self

    def __exit__(self, *exc) -> None:
        self.close()

    def _once(self, method: str, path: str, *, body, content_type, params, headers, accept):
        """One try of :meth:`request`, on this thread's kept-alive connection.

        A connection the service closed while it sat idle fails on its next
        use before any answer: that is not the service failing, so one new
        connection is tried at once (without a back-off)."""
        target = self._prefix + path
        if params:
            target += "?" + urllib.parse.urlencode({k: v for k, v in params.items()
                                                    if v is not None})
        send = {"Accept": accept}
        if self.api_key:
            send["Authorization"] = f"Bearer {self.api_key}"
        if content_type:
            send["Content-Type"] = content_type
        send.update(headers or {})
        for _ in range(2):
            conn, reused = self._connection()
            # A file goes up from disk in blocks, never whole in memory; each
            # try reads it again from the start.
            stream = open(body, "rb") if isinstance(body, pathlib.PurePath) else None
            if stream is not None:
                send["Content-Length"] = str(os.fstat(stream.fileno()).st_size)
            try:
                conn.request(method, target, body=stream or body, headers=send)
                resp = conn.getresponse()
                raw = resp.read()
            except (OSError, http.client.HTTPException) as exc:
                self._drop()
                if reused and isinstance(exc, (http.client.RemoteDisconnected,
                                               ConnectionResetError, BrokenPipeError)):
                    continue  # an idle connection the service had closed
                if isinstance(exc, (ConnectionRefusedError, socket.gaierror)):
                    raise ServiceError(0, {"title": "Unreachable", "detail": str(exc)}) from None
                # The connection broke mid-request: the answer (if any) is lost;
                # a pipeline retries, and the service counts a retry once.
                raise ServiceError(0, {"title": "Connection lost", "detail": str(exc)}) from None
            finally:
                if stream is not None:
                    stream.close()
            self._local.used = True
            if resp.will_close:
                self._drop()
            if resp.status < 400:
                return resp.status, dict(resp.headers), raw
            try:
                problem = json.loads(raw)
            except ValueError:
                problem = {"title": resp.reason, "detail": raw[:200].decode("utf-8", "replace")}
            err = ServiceError(resp.status, problem)
            try:
                err.retry_after_s = float(resp.headers.get("Retry-After"))
            except (TypeError, ValueError):
                pass
            raise err
        raise ServiceError(0, {"title": "Connection lost",
                               "detail": "the service closed the connection twice"})

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

    def upload_history(self, data, *, unit: str | None = None, units: dict | None = None,
               youngs_modulus: float | None = None, sample_rate_hz: float | None = None,
               name: str | None = None, time_column: str | None = None, **options) -> dict:
        """Upload a DataFrame or ``{channel: array}`` (sent as Parquet), or a
        file by its path, sent as it is: the service recognises CSV in its
        dialects, Parquet, Arrow, MDF 4, HDF5 and gzip from the bytes.
        ``options`` are the reader's (``delimiter``, ``decimal``,
        ``header_row``, ``channels``, ``group``, ``gauge_factor_set``,
        ``gauge_factor``)."""
        body, content_type = _body(data)
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

    def samples(self, assessment_id: str, point: str):
        """The history a point was counted from as a DataFrame: ``samples``
        [MPa] as counted, ``recorded`` [MPa] when it was cleaned first, and
        ``time_s`` when the duration is known."""
        import pandas as pd

        path = (f"/v1/assessments/{assessment_id}/points/"
                f"{urllib.parse.quote(point, safe='')}/samples")
        _, _, raw = self.request("GET", path, accept=PARQUET)
        return pd.read_parquet(io.BytesIO(raw))

    def curves(self) -> list[dict]:
        return self.get_json("/v1/curves")["items"]

    # ------------------------------------------------------------------ duty cycles

    def create_duty_cycle(self, events: list[dict], *, target: dict | None = None,
                          settings: dict | None = None, name: str | None = None,
                          **fields) -> dict:
        """Combine stored events into a design life and check it against
        ``target`` (``{"hours": ...}``, ``{"repeats": ...}`` or
        ``{"distance": ...}``); each event names ``assessment_id``,
        ``history_id`` or ``ledger`` and its ``repeats``, ``hours``,
        ``distance`` or ``share``. ``fields``: ``points``, ``gate``,
        ``variants``. Returns the stored duty cycle."""
        doc = {"events": events, **fields}
        for key, value in (("target", target), ("settings", settings), ("name", name)):
            if value is not None:
                doc[key] = value
        return self.post_json("/v1/duty-cycles", doc)[1]

    def duty_cycle(self, duty_id: str) -> dict:
        return self.get_json(f"/v1/duty-cycles/{urllib.parse.quote(duty_id, safe='')}")

    def duty_cycle_summary(self, duty_id: str):
        """Per point: verdict, design damage, reserve factor, lives and the
        dominant event, as a DataFrame (index: point)."""
        import pandas as pd

        res = self.duty_cycle(duty_id)["result"]
        cols = ("passed", "damage", "allowable_damage", "reserve_factor",
                "damage_per_duty_cycle", "life_duty_cycles", "life_hours", "life_distance",
                "dominant_event", "between_events_share")
        return pd.DataFrame([{"point": p, **{k: r.get(k) for k in cols}}
                             for p, r in res["points"].items()]).set_index("point")

    def what_if(self, duty_id: str, variants: list[dict]) -> dict:
        """The stored duty cycle under ``variants`` (``{name, settings?,
        load_scale?}``), side by side with its baseline; nothing is stored."""
        return self.post_json(f"/v1/duty-cycles/{urllib.parse.quote(duty_id, safe='')}"
                              "/what-if", {"variants": variants})[1]

    def compare_rig_field(self, rig: dict, field: dict, *, settings: dict | None = None,
                          **fields) -> dict:
        """A rig run against a field span (each ``{"history_id": ...}``,
        ``{"assessment_id": ...}`` or ``{"ledger": {...}}``): per point the
        damage ratio and the acceleration factor. Nothing is stored."""
        doc = {"rig": rig, "field": field, **fields}
        if settings is not None:
            doc["settings"] = settings
        return self.post_json("/v1/rig-comparisons", doc)[1]

    # ------------------------------------------------------------------ spectra

    def assess_spectrum(self, load_cases: list[dict], *, settings: dict,
                        methods: list[str] | None = None, name: str | None = None) -> dict:
        """Assess a vibration test profile: each load case a ``psd``
        (``{"frequency_hz": [...], "psd": [...]}`` in MPa^2/Hz), an
        ``acceleration_psd`` with its ``transfer``, or a ``history_id`` (and
        ``channel``), with its ``exposure_s``. Returns the stored result."""
        doc = {"load_cases": load_cases, "settings": settings}
        if methods is not None:
            doc["methods"] = methods
        if name is not None:
            doc["name"] = name
        return self.post_json("/v1/spectra", doc)[1]

    def spectrum_summary(self, spectrum_id: str):
        """Per method: damage, lives, reserve factor and the difference to
        time-domain counting, as a DataFrame (index: method)."""
        import pandas as pd

        res = self.get_json(f"/v1/spectra/{urllib.parse.quote(spectrum_id, safe='')}")["result"]
        cols = ("damage", "life_repeats", "life_hours", "reserve_factor", "equivalent_range",
                "relative_to_time_domain")
        return pd.DataFrame([{"method": m, **{k: r.get(k) for k in cols}}
                             for m, r in res["methods"].items()]).set_index("method")

    # ------------------------------------------------------------------ edits

    def edit(self, history_id: str, **fields) -> dict:
        """Shorten a stored recording keeping its damage (fields as in the
        API: ``settings``, ``keep`` or ``length``, ``window_s``,
        ``protect_range``, ``method``, ``channels``, ``gate``)."""
        return self.post_json("/v1/edits", {"history_id": history_id, **fields})[1]

    def edited_signal(self, edit_id: str):
        """The edited drive signal as a DataFrame (``source_index``,
        ``time_s``, ``source_time_s``, one column per channel [MPa])."""
        import pandas as pd

        path = f"/v1/edits/{urllib.parse.quote(edit_id, safe='')}/signal"
        _, _, raw = self.request("GET", path, accept=PARQUET)
        return pd.read_parquet(io.BytesIO(raw))

    # ------------------------------------------------------------------ ledger

    def create_asset(self, name: str, description: str | None = None) -> dict:
        """Register an asset (the thing under test)."""
        return self.post_json("/v1/assets", {"name": name, "description": description})[1]

    def create_point(self, asset: str, name: str, *, unit: str, settings: dict,
                  youngs_modulus: float | None = None) -> dict:
        """Register a measured point of ``asset`` with its unit and settings."""
        doc = {"name": name, "unit": unit, "settings": settings}
        if youngs_modulus is not None:
            doc["youngs_modulus"] = youngs_modulus
        return self.post_json(f"/v1/assets/{urllib.parse.quote(asset, safe='')}/points",
                              doc)[1]

    def post_block(self, asset: str, seq: int, data, *, sample_rate_hz: float | None = None,
                   recorded_at: str | None = None, idempotency_key: str | None = None,
                   **options) -> dict:
        """Post one block (a DataFrame, ``{point: array}`` or a file path) for
        the asset's points; a retry is counted once (the key, and ``seq``)."""
        body, content_type = _body(data)
        headers = {"Idempotency-Key": idempotency_key} if idempotency_key else None
        _, _, raw = self.request(
            "POST", f"/v1/assets/{urllib.parse.quote(asset, safe='')}/blocks", body=body,
            content_type=content_type, headers=headers,
            params={"seq": seq, "sample_rate_hz": sample_rate_hz, "recorded_at": recorded_at,
                    **options})
        return json.loads(raw)

    # Names before the glossary pass (issue 17): the resources' nouns now.
    def upload(self, *args, **kwargs) -> dict:
        """Deprecated name of :meth:`upload_history`."""
        warnings.warn("Client.upload is now Client.upload_history", DeprecationWarning,
                      stacklevel=2)
        return self.upload_history(*args, **kwargs)

    def add_point(self, *args, **kwargs) -> dict:
        """Deprecated name of :meth:`create_point`."""
        warnings.warn("Client.add_point is now Client.create_point", DeprecationWarning,
                      stacklevel=2)
        return self.create_point(*args, **kwargs)

    def point(self, asset: str, point: str) -> dict:
        """A ledger point's running figures and projections."""
        return self.get_json(f"/v1/assets/{urllib.parse.quote(asset, safe='')}/points/"
                             f"{urllib.parse.quote(point, safe='')}")

    def feed(self, asset: str | None = None, since: str | None = None):
        """The dashboard feed as a DataFrame (one row per point)."""
        import pandas as pd

        doc = self.get_json("/v1/feeds/points", **{k: v for k, v in
                                                   (("asset", asset), ("since", since)) if v})
        return pd.DataFrame(doc["items"], columns=doc["columns"])
