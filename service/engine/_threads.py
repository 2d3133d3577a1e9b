"""One helper thread the engine hands half of a long pass to.

The compiled kernels release the GIL, so a long pass split in two halves runs
on both cores: the calling thread takes one half, this thread the other.
Callers combine the halves in a fixed order, so results never depend on
which thread finished first.

A thread that already runs beside others of the same job (the planes of a
critical-plane scan, the points of a request) should not also ask for the
helper: on two cores the threads would only queue behind it. Inside
:func:`one_thread` the engine runs such halves on the calling thread, one
after the other and combined the same way, so the figures are the same to
the last bit.
"""

from __future__ import annotations

import threading
from concurrent.futures import Future, ThreadPoolExecutor
from contextlib import contextmanager

_POOL: list[ThreadPoolExecutor] = []
_LOCK = threading.Lock()
_local = threading.local()


def helper() -> ThreadPoolExecutor:
    """The engine's helper thread (made on first use)."""
    with _LOCK:
        if not _POOL:
            _POOL.append(ThreadPoolExecutor(1, thread_name_prefix="cycleledger-engine"))
        return _POOL[0]


def helper_allowed() -> bool:
    """False inside :func:`one_thread` on this thread."""
    return not getattr(_local, "alone", False)


@contextmanager
def one_thread():
    """Keep the engine's work in this block on the calling thread."""
    before = getattr(_local, "alone", False)
    _local.alone = True
    try:
        yield
    finally:
        _local.alone = before


def in_one_thread(fn):
    """``fn`` wrapped to run inside :func:`one_thread` (for ``pool.map``)."""
    def run(*args, **kwargs):
        with one_thread():
            return fn(*args, **kwargs)
    return run


def beside(fn, *args) -> Future:
    """``fn(*args)`` on the helper thread, or at once on this one inside
    :func:`one_thread`; either way a future to take the result from."""
    if helper_allowed():
        return helper().submit(fn, *args)
    done: Future = Future()
    try:
        done.set_result(fn(*args))
    except BaseException as exc:  # handed to whoever takes the result
        done.set_exception(exc)
    return done


def take_back(future: Future, fn, *args):
    """The result of ``fn(*args)`` handed out with :func:`beside`: computed
    here instead if the helper has not begun it (a busy helper never makes
    the caller wait)."""
    if future.cancel():
        return fn(*args)
    return future.result()
