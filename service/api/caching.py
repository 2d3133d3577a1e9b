"""Conditional requests for what never changes once made.

An assessment, its summary, report page and plots are fixed once the
assessment is stored (its results are never rewritten, and rendering is
deterministic: plots draw with fixed SVG ids). Their strong ETag is a hash
of the service's version, the request's path and query and the negotiated
representation, so a repeat with ``If-None-Match`` is answered 304 before
anything is read or drawn. ``Cache-Control: private`` (results belong to a
project: shared caches must not keep them) with a long ``max-age`` and
``immutable``; ``Vary: Accept, Authorization``.
"""

from __future__ import annotations

import functools
import hashlib

from flask import Response, request

import service

#: How long a client may keep an immutable result without asking. [s]
MAX_AGE_S = 7 * 24 * 3600


def etag_of(*parts: str) -> str:
    """The strong ETag of this request's representation (``parts``: the
    representation chosen, e.g. the format)."""
    key = "\n".join([service.__version__, request.path,
                     "&".join(sorted(f"{k}={v}" for k, v in request.args.items(multi=True))),
                     *parts])
    return hashlib.sha256(key.encode("utf-8")).hexdigest()[:32]


def not_modified(etag: str) -> Response | None:
    """A 304 when the client holds this representation already, else None."""
    if etag in request.if_none_match:
        return immutable(Response(status=304), etag)
    return None


def immutable(resp: Response, etag: str) -> Response:
    """``resp`` with its ETag and the cache headers of an immutable result."""
    resp.set_etag(etag)
    resp.headers["Cache-Control"] = f"private, max-age={MAX_AGE_S}, immutable"
    resp.vary.add("Accept")
    resp.vary.add("Authorization")
    return resp


def by_content(view):
    """A view's 200 answers get a strong ETag from their bytes and
    ``Cache-Control: private, no-cache``: a client revalidates every time and
    gets 304 without the body when nothing changed. For resources that are
    fixed in practice but could change (an assessment whose history was
    deleted loses that link), where a path-based ETag would be wrong."""

    @functools.wraps(view)
    def wrapped(*args, **kwargs):
        resp = view(*args, **kwargs)
        if not isinstance(resp, Response) or resp.status_code != 200 or resp.is_streamed:
            return resp
        etag = hashlib.sha256(resp.get_data()).hexdigest()[:32]
        if etag in request.if_none_match:
            resp = Response(status=304)
        resp.set_etag(etag)
        resp.headers["Cache-Control"] = "private, no-cache"
        resp.vary.add("Accept")
        resp.vary.add("Authorization")
        return resp

    return wrapped
