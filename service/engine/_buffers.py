"""Memory the counting reuses between calls instead of asking the system.

Fresh pages are dear on the virtual machines this service runs on: the first
write to each 4 KiB page costs about 2 us (a page fault, measured on the
project's 2-core machine; see DEVELOPERS.md, "Benchmarks"), so a
cycle table of 300,000 rows (12 MB) spent 6 ms of a 10 ms count just
faulting its pages in. Two kinds of memory are therefore kept:

* turning-point codes, scratch that never leaves the engine: one buffer per
  thread, reused whenever it is large enough (:func:`codes_buffer`);
* cycle-table columns and per-cycle damage, which *do* leave the engine
  (inside a :class:`~service.engine.rainflow.CycleTable` or an assessment):
  sets of columns kept in a process-wide :class:`ColumnPool` and handed out
  again only once no array that views them is alive (counted by reference,
  so a table, a column or a slice of one that anybody still holds keeps its
  set out of use).

A third kind is scratch that a caller takes and gives back when done
(:class:`ScratchShelf`): the batch path's per-run cycle buffers, which no
result keeps. All are bounded; larger needs are served fresh and not kept.
"""

from __future__ import annotations

import sys
import threading

import numpy as np

#: Turning-point scratch kept per thread between calls, up to this many bytes.
SCRATCH_MAX_BYTES = 32 * 2**20
#: Column sets kept for reuse, in all, up to this many bytes.
POOL_MAX_BYTES = 64 * 2**20
#: Tables smaller than this many rows are left to the allocator (its free
#: lists reuse small blocks already; a pool would only add lookups).
POOL_MIN_ROWS = 1 << 14
#: A kept set serves a request for ``rows`` if it has at most this much more.
POOL_SLACK = 0.125

_scratch = threading.local()


def codes_buffer(n: int) -> np.ndarray:
    """A buffer for ``n`` turning-point codes, this thread's own, reused when
    small enough (int32 while indices fit, else int64)."""
    dtype = np.int32 if n < 2**31 - 2 else np.int64
    if n * np.dtype(dtype).itemsize > SCRATCH_MAX_BYTES:
        return np.empty(n, dtype)
    buf = getattr(_scratch, "codes", None)
    if buf is None or buf.shape[0] < n or buf.dtype != dtype:
        buf = np.empty(max(n, 4096), dtype)
        _scratch.codes = buf
    return buf


#: A cycle table's columns: from, to, count; start and end index.
TABLE = (np.float64, np.float64, np.float64, np.int64, np.int64)
#: One float column (per-cycle damage).
FLOATS = (np.float64,)


def fresh_columns(rows: int, layout: tuple = TABLE) -> list[np.ndarray]:
    """Fresh columns of ``rows`` rows, one per dtype of ``layout``.

    Separate arrays, not one block: above 4 MB numpy asks the kernel for
    huge pages, and on this kind of machine (THP defrag on madvise) that
    stalled some calls for tens of milliseconds while memory was compacted.
    """
    return [np.empty(rows, dtype) for dtype in layout]


def _refs(entry: list) -> int:
    """The largest reference count among a set's arrays."""
    return max(sys.getrefcount(c) for c in entry)


def _baseline() -> int:
    # What _refs reports for a set that only the pool holds, measured the
    # same way (so it holds on any interpreter's counting of references).
    keep = [fresh_columns(1)]
    return _refs(keep[0])


class ColumnPool:
    """Column sets kept after use and handed out again when nothing views
    them. Thread-safe; at most ``max_bytes`` kept."""

    def __init__(self, max_bytes: int = POOL_MAX_BYTES, min_rows: int = POOL_MIN_ROWS):
        self.max_bytes = max_bytes
        self.min_rows = min_rows
        self._sets: list[list[np.ndarray]] = []
        self._lock = threading.Lock()
        self._idle_refs = _baseline()

    @staticmethod
    def _bytes(entry: list) -> int:
        return sum(c.nbytes for c in entry)

    def columns(self, rows: int, layout: tuple = TABLE) -> list[np.ndarray]:
        """Columns of at least ``rows`` rows, one per dtype of ``layout``: a
        kept set of that layout nothing views (the smallest that fits within
        the slack) or a fresh one, which is kept for later if there is room."""
        if rows < self.min_rows:
            return fresh_columns(rows, layout)
        dtypes = [np.dtype(t) for t in layout]
        with self._lock:
            best = None
            for entry in self._sets:
                size = entry[0].shape[0]
                if rows <= size <= rows + int(rows * POOL_SLACK) and (
                        best is None or size < best[0].shape[0]) and (
                        [c.dtype for c in entry] == dtypes) and (
                        _refs(entry) <= self._idle_refs):
                    best = entry
            if best is not None:
                return list(best)  # a new list: the arrays count one more holder
        cols = fresh_columns(rows, layout)
        self._keep(cols)
        return cols

    def _keep(self, cols: list) -> None:
        need = self._bytes(cols)
        if need > self.max_bytes:
            return
        with self._lock:
            kept = sum(self._bytes(e) for e in self._sets)
            if kept + need > self.max_bytes:
                # Make room from sets nothing views, the largest first.
                idle = sorted((e for e in self._sets if _refs(e) <= self._idle_refs),
                              key=self._bytes, reverse=True)
                for entry in idle:
                    if kept + need <= self.max_bytes:
                        break
                    self._sets = [e for e in self._sets if e is not entry]
                    kept -= self._bytes(entry)
                if kept + need > self.max_bytes:
                    return
            self._sets.append(list(cols))

    def kept_bytes(self) -> int:
        """Bytes held by the pool, in use or not."""
        with self._lock:
            return sum(self._bytes(e) for e in self._sets)


#: The pool the counting draws its cycle tables from.
POOL = ColumnPool()


class ScratchShelf:
    """Sets of arrays a caller takes for a while and gives back, kept for the
    next caller (at most ``max_sets``, each at most ``max_bytes``).

    Unlike the pool nothing is counted: a set is only ever in the hands of
    the caller that took it, and that caller promises that no array viewing
    it outlives the give-back.
    """

    def __init__(self, max_sets: int = 2, max_bytes: int = 64 * 2**20):
        self.max_sets = max_sets
        self.max_bytes = max_bytes
        self._shelf: list[tuple[tuple, list[np.ndarray]]] = []
        self._lock = threading.Lock()

    def take(self, shape: tuple, layout: tuple) -> list[np.ndarray]:
        """Arrays of ``shape``, one per dtype of ``layout`` (contents undefined)."""
        key = (tuple(shape), tuple(np.dtype(t).str for t in layout))
        with self._lock:
            for i, (k, arrays) in enumerate(self._shelf):
                if k == key:
                    del self._shelf[i]
                    return arrays
        return [np.empty(shape, dtype) for dtype in layout]

    def give_back(self, arrays: list[np.ndarray]) -> None:
        key = (arrays[0].shape, tuple(a.dtype.str for a in arrays))
        if sum(a.nbytes for a in arrays) > self.max_bytes:
            return
        with self._lock:
            if len(self._shelf) >= self.max_sets:
                self._shelf.pop(0)
            self._shelf.append((key, arrays))


#: The shelf the batch path keeps its per-run cycle buffers on.
SHELF = ScratchShelf()
