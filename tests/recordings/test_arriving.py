"""A body read as it arrives (``recordings.Arriving``) reads as the same
bytes held whole do: pyarrow's CSV reader is the reference for the values
(the same bytes read through ``pa.BufferReader``), over dialects and block
sizes down to one byte, and the errors of a body that ends early or runs
long reach the caller."""

import numpy as np
import pytest

from service import recordings
from service.recordings import Arriving, UnreadableRecording


def blocks(data: bytes, sizes, stop_at=None, error=None):
    """``data`` in blocks of the given sizes (cycled), as a network delivers
    it; ending after ``stop_at`` bytes with ``error`` raised."""
    pos, k = 0, 0
    end = len(data) if stop_at is None else stop_at
    while pos < end:
        n = min(sizes[k % len(sizes)], end - pos)
        yield data[pos:pos + n]
        pos, k = pos + n, k + 1
    if error is not None:
        raise error


def arriving(data: bytes, sizes=(65536,), **kw) -> Arriving:
    return Arriving(memoryview(np.empty(len(data), np.uint8)), blocks(data, sizes, **kw))


def csv_text(n=30_000, seed=3, delimiter=",", decimal="."):
    rng = np.random.default_rng(seed)
    x = rng.normal(0, 50, (n, 2))
    rows = "".join(f"{i / 500:.4f}{delimiter}{a:.3f}{delimiter}{b:.3f}\n"
                   for i, (a, b) in enumerate(x))
    if decimal == ",":
        rows = rows.replace(".", ",")
    return f"# rig 7, run 12\ntime{delimiter}g1{delimiter}g2\ns{delimiter}MPa{delimiter}MPa\n" + rows


@pytest.mark.parametrize("delimiter, decimal", [(",", "."), (";", ","), ("\t", ".")])
@pytest.mark.parametrize("sizes", [(1 << 22,), (65536,), (7, 1, 4093), (1,)])
def test_a_csv_read_as_it_arrives_equals_the_csv_held_whole(delimiter, decimal, sizes):
    data = csv_text(3_000 if sizes == (1,) else 30_000, delimiter=delimiter,
                    decimal=decimal).encode()
    ref = recordings.read(data, "text/csv")
    body = arriving(data, sizes)
    got = recordings.read(body, "text/csv")
    assert got.details == ref.details and got.units == ref.units
    for name, values in ref.columns.items():
        assert np.array_equal(got.columns[name], values), name
    assert bytes(body.whole()) == data        # every byte landed, once, in the buffer


def test_other_formats_wait_for_the_whole_body():
    import io

    import pyarrow as pa
    import pyarrow.parquet as pq

    sink = io.BytesIO()
    pq.write_table(pa.table({"g1": np.arange(5000.0)}), sink)
    data = sink.getvalue()
    got = recordings.read(arriving(data, (333,)), "application/vnd.apache.parquet")
    assert got.format == "parquet" and np.array_equal(got.columns["g1"], np.arange(5000.0))


def test_a_cell_that_is_not_a_number_is_named_from_the_whole_body():
    text = csv_text(20_000)
    lines = text.splitlines(keepends=True)
    lines[15_003] = lines[15_003].replace(",", ",x", 1)      # deep in the body
    data = "".join(lines).encode()
    with pytest.raises(Exception) as ref:
        recordings.read(data, "text/csv")
    with pytest.raises(type(ref.value)) as got:
        recordings.read(arriving(data, (4096,)), "text/csv")
    assert str(got.value) == str(ref.value) and "row 15000" in str(got.value)


class EndedEarly(Exception):
    pass


def test_a_body_that_ends_early_raises_its_error_to_every_reader():
    data = csv_text(20_000).encode()
    body = arriving(data, (65536,), stop_at=len(data) // 2, error=EndedEarly("cut"))
    with pytest.raises(EndedEarly):
        recordings.read(body, "text/csv")
    with pytest.raises(EndedEarly):
        body.whole()
    # A body that stops short without an error is refused whole.
    short = arriving(data, (65536,), stop_at=1000)
    assert short.head(10) == data[:10]
    with pytest.raises(UnreadableRecording, match="ended after 1000"):
        short.whole()


def test_a_body_longer_than_declared_is_refused():
    data = b"a,b\n1,2\n3,4\n"
    body = Arriving(memoryview(np.empty(len(data) - 3, np.uint8)), blocks(data, (5,)))
    with pytest.raises(UnreadableRecording, match="longer than"):
        body.whole()


def test_head_waits_for_its_bytes_and_release_lets_the_buffer_go():
    data = bytes(range(256)) * 40
    body = arriving(data, (3,))
    assert body.head(100) == data[:100] and len(body) == len(data)
    r = body.reader()
    assert r.read(10) == data[:10] and r.tell() == 10
    into = bytearray(50)
    assert r.readinto(into) == 50 and bytes(into) == data[10:60]
    buf = body.release()
    assert buf.obj.shape == (len(data),)
    assert r.read(10) == b""                  # nothing is read from a released body
