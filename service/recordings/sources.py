"""What a recording is read from: a file, or bytes held in memory.

A file on disk is a :class:`~pathlib.Path`; a request body small enough to
hold is read in memory without copying it (:class:`BytesReader`,
:func:`arrow_input`).
"""

from __future__ import annotations

import io


def in_memory(source) -> bool:
    """Whether ``source`` is bytes held in memory rather than a file."""
    return isinstance(source, (bytes, bytearray, memoryview))


def binary(source):
    """``source`` opened as a binary file object: the file, or a reader over
    the bytes in memory that does not copy them (:class:`BytesReader`)."""
    return BytesReader(source) if in_memory(source) else open(source, "rb")


class BytesReader(io.BufferedIOBase):
    """A read-only, seekable binary file over bytes held in memory.

    ``io.BytesIO`` copies a ``bytearray`` (an upload's body) whole before the
    first read: 150 MB of new memory for a CSV whose head alone is read,
    measured at 0.27 s of a 0.44 s parse. This reads through a view of the
    bytes, copying only what each read returns.
    """

    def __init__(self, data):
        super().__init__()
        self._view = memoryview(data).cast("B")
        self._pos = 0

    def readable(self) -> bool:
        return True

    def seekable(self) -> bool:
        return True

    def tell(self) -> int:
        return self._pos

    def seek(self, offset: int, whence: int = io.SEEK_SET) -> int:
        base = {io.SEEK_SET: 0, io.SEEK_CUR: self._pos, io.SEEK_END: len(self._view)}[whence]
        if base + offset < 0:
            raise ValueError("negative seek position")
        self._pos = base + offset
        return self._pos

    def read(self, size: int | None = -1) -> bytes:
        end = len(self._view) if size is None or size < 0 else min(self._pos + size,
                                                                     len(self._view))
        out = self._view[self._pos:end].tobytes() if end > self._pos else b""
        self._pos = max(self._pos, end)
        return out

    read1 = read

    def readinto(self, buffer) -> int:
        target = memoryview(buffer).cast("B")
        n = max(0, min(len(target), len(self._view) - self._pos))
        target[:n] = self._view[self._pos:self._pos + n]
        self._pos += n
        return n

    readinto1 = readinto

    def close(self) -> None:
        if not self.closed:
            self._view.release()
        super().close()


def arrow_input(source, *, memory_map: bool = False):
    """``source`` as pyarrow reads it: a buffer over the bytes (no copy), or the
    file's path (memory-mapped when ``memory_map``)."""
    import pyarrow as pa

    if in_memory(source):
        return pa.BufferReader(pa.py_buffer(source))
    return pa.memory_map(str(source)) if memory_map else str(source)


def head(source, n: int = 16) -> bytes:
    """The first ``n`` bytes of ``source``."""
    if in_memory(source):
        return bytes(source[:n])
    with open(source, "rb") as f:
        return f.read(n)

