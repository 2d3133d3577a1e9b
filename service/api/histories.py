"""Load histories: upload (CSV, Parquet, Arrow IPC, JSON), list, read, delete."""

from __future__ import annotations

import hashlib
import sys
import threading
from pathlib import Path

import numpy as np

from flask import Blueprint, jsonify, request, url_for

from service.store import parquet, sqlite

from . import created, data_dir, db, idempotency, uploads
from .access import project
from .problems import NotFound

bp = Blueprint("histories", __name__)


def resource(row: dict) -> dict:
    """The JSON form of a stored history, with its links."""
    out = {k: row[k] for k in ("id", "name", "created_at", "sample_count", "sample_rate_hz",
                               "duration_s", "channels")}
    out["links"] = {"self": url_for("histories.get_one", history_id=row["id"])}
    return out


def load(history_id: str) -> dict:
    row = sqlite.get_history(db(), project(), history_id)
    if row is None:
        raise NotFound(f"no history {history_id!r}", field="history_id")
    return row


@bp.post("/v1/histories")
def upload():
    """Store one recording: every channel checked and converted to MPa."""
    uploads.check_media_type(request.content_type)
    idem_key = idempotency.key()
    folder = data_dir() / parquet.HISTORIES
    # The body's hash only serves a retry with a key: none is taken without.
    digest = hashlib.sha256() if idem_key is not None else None
    body = receive_body(folder, digest)
    try:
        request_hash = idempotency.request_hash(digest.hexdigest()) if digest else ""
        again = idempotency.replay(idem_key, request_hash)
        if again is not None:
            return again
        up = uploads.parse(body, request.content_type, request.args.to_dict())
        hid = sqlite.new_id("h")
        if up.stored_as_sent:
            rel = parquet.adopt(data_dir(), parquet.HISTORIES, hid, body)
        else:
            rel = parquet.write_columns(data_dir(), parquet.HISTORIES, hid, up.channels)
    finally:
        discard(body)
    channels = [{"name": name, "unit": up.source_units[name], "stored_unit": "MPa",
                 "min_mpa": up.ranges[name][0], "max_mpa": up.ranges[name][1]}
                for name in up.channels]
    row = {"id": hid, "project": project(), "name": up.name, "created_at": sqlite.now(),
           "sample_count": up.sample_count, "sample_rate_hz": up.sample_rate_hz,
           "duration_s": up.duration_s, "channels": channels, "file": rel}
    sqlite.insert_owning_file(db(), sqlite.insert_history, row, data_dir(), rel)
    return idempotency.remember(idem_key, request_hash, created(resource(row), 201))


@bp.get("/v1/histories")
def list_all():
    limit, offset = page_args()
    rows = sqlite.list_histories(db(), project(), limit, offset)
    return jsonify(items=[resource(r) for r in rows], limit=limit, offset=offset)


@bp.get("/v1/histories/<history_id>")
def get_one(history_id: str):
    return jsonify(resource(load(history_id)))


@bp.delete("/v1/histories/<history_id>")
def delete(history_id: str):
    row = load(history_id)
    con = db()
    with sqlite.write(con):
        sqlite.delete_history(con, project(), history_id)
        keep = sqlite.file_in_use(con, row["file"])
    if not keep:
        # Assessments made from it keep its samples (their cycle tables are
        # recounted from them), so the file goes only with the last user.
        parquet.remove(data_dir(), row["file"])
    return "", 204


def receive_body(folder, digest=None) -> memoryview | Path:
    """The request body: its bytes, held in memory, when its declared length
    is within ``MEMORY_BODY_MB``; else (larger, or sent without a length)
    spooled to a temporary file in ``folder`` (:func:`spool_body`).

    Writing a body to disk and reading it back cost more than parsing it
    (bench_inputs: a 150 MB CSV spent longer spooled than parsed), so only
    a body too large to hold goes through a file. ``digest`` as in
    :func:`spool_body`; :func:`discard` removes a spooled file and hands
    the memory back for the next body (:class:`SpareBuffer`).
    """
    expected = request.content_length
    if expected is None or expected > uploads.memory_body_limit():
        return spool_body(folder, digest)
    # One buffer of the declared length, filled as the body arrives: the
    # chunks are transient, so the body's bytes land in the buffer once.
    buf, got = SPARE.take(expected), 0
    for chunk in _chunks(digest):
        buf[got:got + len(chunk)] = chunk
        got += len(chunk)
    return buf


class SpareBuffer:
    """One large receive buffer kept from one body to the next.

    On this machine the first touch of new memory costs more than the
    bytes' transfer: a 150 MB CSV body took 60-430 ms to land in a new
    buffer (page faults, and ``bytearray`` zero-filling it first), 25-70 ms
    in one already touched. So the buffer of a body of at least
    :data:`SMALLEST` bytes is kept once the request is done, if nothing
    reads it any more (no view of it left: a reader's zero-copy arrays
    would otherwise see the next body), and the next large body that fits
    takes it. At most one, of at most ``MEMORY_BODY_MB``; a body arriving
    while it is taken gets new memory.
    """

    SMALLEST = 1 << 20

    def __init__(self):
        self._lock = threading.Lock()
        self._array: np.ndarray | None = None

    def take(self, n: int) -> memoryview:
        """A writable buffer of ``n`` bytes (not zeroed)."""
        arr = None
        if n >= self.SMALLEST:
            with self._lock:
                if self._array is not None and self._array.shape[0] >= n:
                    arr, self._array = self._array, None
        if arr is None:
            arr = np.empty(n, np.uint8)
        return memoryview(arr)[:n]

    def give_back(self, view: memoryview, limit: int) -> bool:
        """Release ``view`` (from :meth:`take`) and keep its memory if
        nothing else refers to it. Returns whether it was kept."""
        arr = view.obj
        try:
            view.release()
        except BufferError:
            return False        # exported still (a pyarrow buffer, np.frombuffer)
        # Referred to by ``arr`` and getrefcount's argument alone: no array,
        # memoryview or reader over it is left.
        if sys.getrefcount(arr) > 2 or not self.SMALLEST <= arr.shape[0] <= limit:
            return False
        with self._lock:
            if self._array is None or self._array.shape[0] < arr.shape[0]:
                self._array = arr
        return True


#: The service's receive buffer kept between bodies.
SPARE = SpareBuffer()


def _chunks(digest=None):
    """The request body in blocks of up to 4 MiB as they arrive, ``digest``
    fed on the way; a body shorter than its declared length is a 400."""
    from .problems import MalformedBody

    expected = request.content_length
    got = 0
    while True:
        chunk = request.stream.read(1 << 22)
        if not chunk:
            break
        if digest is not None:
            digest.update(chunk)
        got += len(chunk)
        yield chunk
    if expected is not None and got < expected:
        raise MalformedBody(f"the body ended after {got} of {expected} bytes")


def discard(body) -> None:
    """Remove a body spooled to a file; hand a body held in memory back to
    :data:`SPARE`."""
    if isinstance(body, Path):
        body.unlink(missing_ok=True)
    elif isinstance(body, memoryview):
        SPARE.give_back(body, uploads.memory_body_limit())


def spool_body(folder, digest=None) -> Path:
    """Write the request body to a temporary file in ``folder`` as it arrives.

    Under gunicorn the body is read from the socket while this runs, so a
    large upload is on its way to disk before its last byte is in; the
    caller parses the file (memory-mapped) and either keeps it or removes it.
    ``digest`` (a hashlib object) is fed the bytes on the way. Werkzeug's
    stream enforces the upload limit (413).
    """
    import uuid

    Path(folder).mkdir(parents=True, exist_ok=True)
    tmp = Path(folder) / f"{parquet.TMP_PREFIX}{uuid.uuid4().hex}.upload"
    try:
        with open(tmp, "wb") as f:
            for chunk in _chunks(digest):
                f.write(chunk)
    except BaseException:
        tmp.unlink(missing_ok=True)
        raise
    return tmp


def page_args() -> tuple[int, int]:
    from .problems import ApiProblem

    try:
        limit = int(request.args.get("limit", 100))
        offset = int(request.args.get("offset", 0))
    except ValueError:
        raise ApiProblem("limit and offset must be whole numbers", field="limit") from None
    if not (1 <= limit <= 1000) or not (0 <= offset <= 10**12):
        raise ApiProblem("limit must be 1..1000 and offset 0..1e12", field="limit")
    return limit, offset
