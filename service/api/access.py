"""Who is asking: API keys, their project and scopes, and a request rate per key.

Every request but the public ones (health, readiness, version, the lists of
names, the contract) needs ``Authorization: Bearer <secret>`` of an active
key. The key's project is the namespace every view reads and writes in
(:func:`project`); its scope must reach the route's (:data:`ROUTE_SCOPES`):

``read``  everything a GET answers;
``write`` adding data: histories, assessments, ledger blocks;
``admin`` changing or removing: assets and points, point settings, voiding
          blocks, deleting histories, the project's curves and materials.

A key of a scope holds the ones before it (admin > write > read).

Open mode: while no key is active the service answers without one, as
project ``default`` with every scope, but only to clients on loopback whose
request carries no proxy header (``Forwarded``, ``X-Forwarded-For``,
``X-Real-IP``), and ``cycleledger serve`` refuses any other address then. The first key made
ends open mode for the running service at its next request.
"""

from __future__ import annotations

import ipaddress
import math
import threading
import time

from flask import Flask, current_app, g, request

from service.store import keys

from . import db
from .problems import Forbidden, TooManyRequests, Unauthorized

#: The project of open mode (and of data made before any key existed).
OPEN_PROJECT = "default"

#: Routes anyone may call, key or not.
PUBLIC = frozenset({"meta.start", "meta.health", "meta.ready", "meta.version", "meta.methods",
                    "meta.openapi"})

#: Routes that need more than ``read`` (every other route is a GET needing read).
ROUTE_SCOPES = {
    "histories.upload": "write",
    "assessments.create": "write",
    "ledger.post_block": "write",
    "superpositions.upload_unit_stresses": "write",
    "superpositions.create": "write",
    "duty_cycles.create": "write",
    "duty_cycles.what_if": "write",
    "duty_cycles.delete": "admin",
    "edits.create": "write",
    "spectra.create": "write",
    "spectra.delete": "admin",
    "duty_cycles.rig_comparison": "write",
    "edits.delete": "admin",
    "superpositions.delete_unit_stresses": "admin",
    "histories.delete": "admin",
    "library.create_curve": "admin",
    "library.delete_curve": "admin",
    "library.create_material": "admin",
    "library.delete_material": "admin",
    "ledger.create_asset": "admin",
    "ledger.create_point": "admin",
    "ledger.put_settings": "admin",
    "ledger.void_block": "admin",
    "audit.audit_trail": "admin",
}


def required_scope(endpoint: str, method: str) -> str | None:
    """The scope ``endpoint`` needs (None: public)."""
    if endpoint in PUBLIC:
        return None
    scope = ROUTE_SCOPES.get(endpoint)
    if scope is None and method not in ("GET", "HEAD", "OPTIONS"):
        return "admin"  # a route not classified yet is closed, not open
    return scope or "read"


def project() -> str:
    """The project of the request's key (``default`` in open mode)."""
    return g.project


class RateLimiter:
    """A token bucket per key: ``rate`` requests a second, bursts of ``burst``."""

    def __init__(self, rate: float, burst: float):
        self.rate, self.burst = float(rate), float(burst)
        self.buckets: dict[str, tuple[float, float]] = {}
        self.lock = threading.Lock()

    def take(self, key: str, rate: float | None = None) -> float:
        """Spend a token; 0 if allowed, else the seconds until one is free.

        ``rate`` overrides the default for this key; its burst scales with
        it. A rate of 0 means no limit.
        """
        rate = self.rate if rate is None else float(rate)
        if rate <= 0:
            return 0.0
        burst = max(rate * self.burst / self.rate if self.rate > 0 else self.burst, 1.0)
        now = time.monotonic()
        with self.lock:
            tokens, at = self.buckets.get(key, (burst, now))
            tokens = min(burst, tokens + (now - at) * rate)
            if tokens >= 1.0:
                self.buckets[key] = (tokens - 1.0, now)
                return 0.0
            self.buckets[key] = (tokens, now)
            return (1.0 - tokens) / rate


#: Headers a proxy adds: a proxied request is not a local client, whatever
#: its socket address says.
_PROXY_HEADERS = ("Forwarded", "X-Forwarded-For", "X-Real-IP")


def _is_loopback(addr: str | None) -> bool:
    try:
        return addr is not None and ipaddress.ip_address(addr).is_loopback
    except ValueError:
        return False


def install(app: Flask) -> None:
    """Check every request's key, scope and rate before its view runs."""
    rate = float(app.config["RATE_PER_S"])
    app.extensions["cycleledger.rate"] = RateLimiter(rate, float(app.config["RATE_BURST"]))

    @app.before_request
    def _authorize():
        if request.url_rule is None:
            return None  # 404 / 405: Flask answers, nothing is read
        need = required_scope(request.endpoint, request.method)
        if need is None:
            return None
        con = db()
        header = request.headers.get("Authorization", "")
        if not header and not keys.any_active(con):
            proxied = any(h in request.headers for h in _PROXY_HEADERS)
            if (current_app.config["OPEN_ACCESS"] and _is_loopback(request.remote_addr)
                    and not proxied):
                g.project, g.scopes, g.key_id = OPEN_PROJECT, list(keys.SCOPES), None
                return None
            raise Unauthorized("this service has no API keys yet and answers without one "
                               "only on loopback; make a key with `cycleledger keys create`")
        scheme, _, secret = header.partition(" ")
        if scheme.lower() != "bearer" or not secret.strip():
            raise Unauthorized("send an API key as `Authorization: Bearer <key>`")
        key = keys.find(con, secret.strip())
        if key is None:
            raise Unauthorized("the API key is not valid (unknown or revoked)")
        if need not in key["scopes"]:
            raise Forbidden(f"this route needs the {need!r} scope; the key has "
                            f"{', '.join(key['scopes'])}", scope=need)
        wait = current_app.extensions["cycleledger.rate"].take(key["id"], key["rate_per_s"])
        if wait > 0:
            raise TooManyRequests(f"more than the key's request rate; retry in {wait:.2f} s",
                                  retry_after_s=max(1, math.ceil(min(wait, 3600))))
        g.project, g.scopes, g.key_id = key["project"], key["scopes"], key["id"]
        return None
