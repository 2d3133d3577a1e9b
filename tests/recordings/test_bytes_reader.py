"""The reader over an upload held in memory behaves as a binary file (Python's
own ``io.BytesIO`` is the reference) without copying the bytes."""

import io

import numpy as np
import pytest

from service.recordings import BytesReader, binary


def test_reads_seeks_and_reads_into_as_bytesio_does():
    data = bytes(np.random.default_rng(4).integers(0, 256, 10_000, dtype=np.uint8))
    ours, ref = BytesReader(bytearray(data)), io.BytesIO(data)
    rng = np.random.default_rng(5)
    for _ in range(400):
        op = rng.integers(0, 4)
        if op == 0:
            n = int(rng.integers(-1, 3000))
            assert ours.read(n) == ref.read(n)
        elif op == 1:
            # Any position from the start to past the end, from each origin.
            whence = int(rng.integers(0, 3))
            origin = (0, ref.tell(), len(data))[whence]
            off = int(rng.integers(0, 12_000)) - origin
            assert ours.seek(off, whence) == ref.seek(off, whence)
        elif op == 2:
            a = bytearray(int(rng.integers(0, 2000)))
            b = bytearray(len(a))
            assert ours.readinto(a) == ref.readinto(b)
            assert a == b
        else:
            assert ours.tell() == ref.tell()
    ours.seek(0)
    ref.seek(0)
    assert ours.read() == ref.read()
    assert ours.read(5) == b"" == ref.read(5)
    with pytest.raises(ValueError):
        ours.seek(-1)


def test_it_reads_through_a_view_and_lets_go_on_close():
    body = bytearray(b"MDF     4.10    ")
    with binary(body) as f:
        body[0:3] = b"XYZ"          # seen through the view: nothing was copied
        assert f.read(3) == b"XYZ"
    body.extend(b"more")            # the view is released: the buffer may grow again
    assert isinstance(binary(bytes(4)), BytesReader)
