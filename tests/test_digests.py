"""Body fingerprints (service/digests.py): XXH3-128 as the xxhash library
computes it, fed in pieces as a body arrives, and the SHA-256 of fingerprints
stored before they carried a scheme still recognised."""

import hashlib

import numpy as np

from service import digests


def test_fingerprint_is_xxh3_128_with_its_scheme():
    # XXH3-128 of empty input, seed 0: 99aa06d3014798d86001c324468d497f
    # (the xxHash reference's value, from memory; the library agrees).
    assert digests.Fingerprint().hexdigest() == "xxh3-128:99aa06d3014798d86001c324468d497f"


def test_pieces_as_they_arrive_give_the_whole_body_fingerprint():
    body = np.random.default_rng(3).integers(0, 256, 3_000_001, dtype=np.uint8).tobytes()
    whole = digests.Fingerprint(body).hexdigest()
    f = digests.Fingerprint()
    view, at = memoryview(body), 0
    for size in (1, 7, 4096, 1 << 20, 65535) * 3:
        f.update(view[at:at + size])
        at += size
    f.update(view[at:])
    assert f.hexdigest() == whole
    last_byte = bytearray(body)
    last_byte[-1] ^= 1
    assert digests.Fingerprint(bytes(last_byte)).hexdigest() != whole


def test_fingerprints_stored_before_the_scheme_are_recognised(tmp_path):
    body = b"time_s,g1\n0,1.5\n0.01,-2.5\n"
    path = tmp_path / "body.upload"
    path.write_bytes(body)
    new = digests.Fingerprint(body).hexdigest()
    old = hashlib.sha256(body).hexdigest()                 # what was stored before
    assert digests.legacy(body) == digests.legacy(path) == old
    for source in (body, memoryview(body), path):
        assert digests.same_body(new, new, source)
        assert digests.same_body(old, new, source)
    other = digests.Fingerprint(body + b"1,2\n").hexdigest()
    assert not digests.same_body(other, new, body)          # a new fingerprint of other bytes
    assert not digests.same_body(hashlib.sha256(b"x").hexdigest(), new, body)
    assert not digests.same_body(old, new, None)            # no bytes to take it from
