"""Reused memory: a cycle table's columns are never handed out while in use."""

import threading

import numpy as np
import pytest

from service.engine import astm_e1049
from service.engine._buffers import POOL, ColumnPool

ROWS = 1 << 15  # at or above the pool's smallest kept set


def _signal(seed, n=200_000):
    return np.random.default_rng(seed).standard_normal(n)


def _copy(table):
    return [c.copy() for c in (table.stress_from, table.stress_to, table.count,
                               table.start_index, table.end_index)]


def _same(table, saved):
    cols = (table.stress_from, table.stress_to, table.count, table.start_index,
            table.end_index)
    return all(np.array_equal(a, b) for a, b in zip(cols, saved))


def test_a_held_table_is_not_overwritten_by_later_counts():
    first = astm_e1049(_signal(1))
    saved = _copy(first)
    for seed in range(2, 6):
        astm_e1049(_signal(seed))
    assert _same(first, saved)


def test_a_held_column_slice_keeps_its_set_in_use():
    first = astm_e1049(_signal(1))
    part = first.stress_from[10:20].copy()
    view = first.stress_from[10:20]
    saved_end = first.end_index[:50].copy()
    end_view = first.end_index[:50]
    del first
    for seed in range(2, 6):
        astm_e1049(_signal(seed))
    assert np.array_equal(view, part)
    assert np.array_equal(end_view, saved_end)


def test_columns_of_a_dropped_table_are_reused():
    # The reason the pool exists (fresh pages cost a fault each): a table of
    # the same size, counted after the last one was dropped, gets its memory.
    pool = ColumnPool()
    cols = pool.columns(ROWS)
    address = cols[0].ctypes.data
    del cols
    again = pool.columns(ROWS - 100)
    assert again[0].ctypes.data == address
    # ... but never while it is held.
    other = pool.columns(ROWS - 100)
    assert other[0].ctypes.data != address


def test_pool_only_serves_sets_within_its_slack_and_below_its_bound():
    pool = ColumnPool(max_bytes=3 * ROWS * 40)
    a = pool.columns(ROWS)
    addr = a[0].ctypes.data
    del a
    # A much smaller request is not served from a large set.
    assert ROWS // 2 >= pool.min_rows
    small = pool.columns(ROWS // 2)
    assert small[0].ctypes.data != addr and small[0].shape[0] == ROWS // 2
    del small
    big = pool.columns(2 * ROWS)
    del big
    assert pool.kept_bytes() <= pool.max_bytes
    # A set larger than the bound is served fresh and not kept.
    before = pool.kept_bytes()
    huge = pool.columns(4 * ROWS)
    assert pool.kept_bytes() == before
    del huge
    # Small requests never touch the pool.
    assert pool.columns(100)[0].shape[0] == 100 and pool.kept_bytes() == before


def test_concurrent_counts_from_several_threads_are_each_correct():
    # Four threads count different signals at once, each many times; every
    # result must equal the same count done alone (the pool is shared).
    signals = [_signal(10 + i, 120_000) for i in range(4)]
    expected = [_copy(astm_e1049(s)) for s in signals]
    errors = []

    def work(i):
        try:
            for _ in range(5):
                if not _same(astm_e1049(signals[i]), expected[i]):
                    errors.append(i)
        except Exception as exc:  # noqa: BLE001  (reported below)
            errors.append(exc)

    threads = [threading.Thread(target=work, args=(i,)) for i in range(4)]
    for t in threads:
        t.start()
    for t in threads:
        t.join(120)
    assert not any(t.is_alive() for t in threads)
    assert errors == []


@pytest.fixture(autouse=True)
def _bounded_pool():
    yield
    assert POOL.kept_bytes() <= POOL.max_bytes


def test_scratch_shelf_hands_a_set_to_one_taker_at_a_time():
    from service.engine._buffers import ScratchShelf

    shelf = ScratchShelf(max_sets=1, max_bytes=10**6)
    a = shelf.take((4, 8), (np.float64, np.int64))
    b = shelf.take((4, 8), (np.float64, np.int64))
    assert a[0] is not b[0]  # both out at once: two sets
    shelf.give_back(a)
    again = shelf.take((4, 8), (np.float64, np.int64))
    assert again[0] is a[0]  # handed out again only after the give-back
    assert shelf.take((4, 8), (np.float64, np.int64))[0] is not a[0]
    # Another shape or layout never gets it; sets above the bound are not kept.
    shelf.give_back(again)
    assert shelf.take((4, 9), (np.float64, np.int64))[0] is not a[0]
    assert shelf.take((4, 8), (np.int64, np.int64))[0] is not a[0]
    big = shelf.take((1000, 1000), (np.float64,))
    shelf.give_back(big)
    assert shelf.take((1000, 1000), (np.float64,))[0] is not big[0]
