"""Request bodies as they arrive: held in memory or spooled to a file; and
the one receive buffer kept between large bodies.

Used by every route that takes a recording (histories, ledger blocks, unit
stress fields).
"""

from __future__ import annotations

import sys
import threading
from pathlib import Path

import numpy as np
from flask import request

from service.store import parquet

from . import uploads


def receive_body(folder, digest=None) -> memoryview | Path:
    """The request body: its bytes, held in memory, when its declared length
    is within ``MEMORY_BODY_MB``; else (larger, or sent without a length)
    spooled to a temporary file in ``folder`` (:func:`spool_body`).

    Writing a body to disk and reading it back cost more than parsing it
    (bench_inputs: a 150 MB CSV spent longer spooled than parsed), so only
    a body too large to hold goes through a file. Parsing a CSV as it
    arrives (pyarrow pulling the body's blocks from its own thread) was
    built and measured no faster here: an A/B in one service, 12 posts of
    150 MB each way, gave a median 576 ms against 532 ms received whole
    (two cores: receiving and parsing compete for them rather than
    overlap). ``digest`` as in :func:`spool_body`;
    :func:`discard` removes a spooled file and hands the memory back for
    the next body (:class:`SpareBuffer`).
    """
    expected = request.content_length
    if expected is None or expected > uploads.memory_body_limit():
        return spool_body(folder, digest)
    # One buffer of the declared length, filled as the body arrives: the
    # bytes land in it once, read straight into it.
    buf = SPARE.take(expected)
    for _ in _chunks(digest, into=buf):
        pass
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


def _chunks(digest=None, into: memoryview | None = None):
    """The request body in blocks of up to 4 MiB as they arrive, ``digest``
    fed on the way; a body shorter than its declared length is a 400. With
    ``into`` (a buffer of the declared length) each block is read straight
    into it (the stream's ``readinto``: no bytes object between, ~10 ms
    less for 150 MB) and the blocks are views of it."""
    from werkzeug.exceptions import ClientDisconnected

    from .problems import MalformedBody

    expected = request.content_length
    stream = request.stream
    got = 0
    while True:
        try:
            if into is None:
                chunk = stream.read(1 << 22)
            else:
                chunk = into[got:got + stream.readinto(into[got:got + (1 << 22)])]
        except ClientDisconnected:
            # Werkzeug's stream, at the end of a body shorter than declared:
            # say what happened rather than its generic 400.
            chunk = b""
        if not len(chunk):
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
    ``digest`` (a :class:`~service.digests.Fingerprint`) is fed the bytes
    on the way. Werkzeug's stream enforces the upload limit (413).
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
