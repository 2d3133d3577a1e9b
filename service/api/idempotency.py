"""``Idempotency-Key`` on the POSTs that create (histories, assessments).

A pipeline that lost an answer (a timeout, a dropped connection) posts again
with the same key: the service answers as the first time and creates
nothing more. The same key with another request (query or body) is a 409.
Keys are per project and route; blocks have their own (the ledger's, which
also knows sequence numbers).
"""

from __future__ import annotations

import hashlib

from flask import Response, jsonify, request

from service import digests
from service.store import sqlite

from . import db
from .access import project
from .problems import ApiProblem


class IdempotencyConflict(ApiProblem):
    status, slug, title = 409, "idempotency-conflict", "Idempotency-Key used for another request"


def key() -> str | None:
    """The request's Idempotency-Key (checked), or None."""
    value = request.headers.get("Idempotency-Key")
    if value is not None and not (0 < len(value) <= 200 and value.isprintable()):
        raise ApiProblem("Idempotency-Key must be 1-200 printable characters",
                         field="Idempotency-Key")
    return value


def request_hash(body_digest: str) -> str:
    """A hash of what makes the request this request: its query and body."""
    query = "&".join(sorted(f"{k}={v}" for k, v in request.args.items(multi=True)))
    return hashlib.sha256(f"{request.path}?{query}\n{body_digest}".encode()).hexdigest()


def replay(idem_key: str | None, digest: str, body=None) -> Response | None:
    """The stored answer for a repeat, a 409 for a reused key, else None.

    ``digest`` is :func:`request_hash` of the body's fingerprint; ``body``
    (its bytes or spooled file) serves an answer stored before fingerprints
    had a scheme, whose hash was of the body's SHA-256
    (:func:`service.digests.same_body`)."""
    if idem_key is None:
        return None
    held = sqlite.idempotent_answer(db(), project(), request.url_rule.rule, idem_key)
    if held is None:
        return None
    if held["request_hash"] != digest and not (
            body is not None and held["request_hash"] == request_hash(digests.legacy(body))):
        raise IdempotencyConflict(f"Idempotency-Key {idem_key!r} was used for another request",
                                  field="Idempotency-Key")
    resp = jsonify(held["body"])
    resp.status_code = held["status"]
    if held["location"]:
        resp.headers["Location"] = held["location"]
    resp.headers["Idempotent-Replayed"] = "true"
    return resp


def remember(idem_key: str | None, digest: str, resp: Response) -> Response:
    """Keep ``resp`` as the answer to ``idem_key`` (when one was given)."""
    if idem_key is not None:
        sqlite.keep_idempotent_answer(db(), project(), request.url_rule.rule, idem_key, digest,
                                      resp.status_code, resp.get_json(),
                                      resp.headers.get("Location"))
    return resp
