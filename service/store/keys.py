"""API keys: a project, scopes, and the SHA-256 of the secret (never the secret).

A secret is ``clk_<id>_<43 random URL-safe characters>`` (256 bits from
``secrets``). Its id is public (listed, revoked by); the rest is shown once,
when the key is made. A plain SHA-256 is the right store for a random
secret of that length: there is nothing to guess that a slow hash would
protect (a slow hash matters for passwords people choose).
"""

from __future__ import annotations

import hashlib
import math
import re
import secrets

from .sqlite import new_id, now, write

#: Scopes in order: each includes the ones before it.
SCOPES = ("read", "write", "admin")
SECRET_PREFIX = "clk_"
PROJECT_NAME = re.compile(r"^[A-Za-z0-9][A-Za-z0-9_.\-]{0,63}$")


def digest(secret: str) -> str:
    return hashlib.sha256(secret.encode("utf-8", "surrogatepass")).hexdigest()


def scopes_up_to(scope: str) -> list[str]:
    """``admin`` -> read, write, admin (the scopes a key of that level holds)."""
    if scope not in SCOPES:
        raise ValueError(f"scope must be one of {', '.join(SCOPES)}, not {scope!r}")
    return list(SCOPES[:SCOPES.index(scope) + 1])


def create(con, project: str, scope: str, name: str | None = None,
           rate_per_s: float | None = None) -> tuple[dict, str]:
    """Make a key; returns ``(row, secret)``. The secret is not kept."""
    if not isinstance(project, str) or not PROJECT_NAME.match(project):
        raise ValueError("a project name is 1-64 letters, digits, '_', '.' or '-', starting "
                         "with a letter or digit")
    if rate_per_s is not None and not (math.isfinite(rate_per_s) and rate_per_s >= 0):
        raise ValueError("a key's rate must be a finite number of requests a second, >= 0")
    scopes = scopes_up_to(scope)
    key_id = new_id("k")
    secret = f"{SECRET_PREFIX}{key_id}_{secrets.token_urlsafe(32)}"
    with write(con):
        con.execute("INSERT INTO api_keys (id, project, name, scopes, secret_hash, created_at, "
                    "rate_per_s) VALUES (?, ?, ?, ?, ?, ?, ?)",
                    (key_id, project, name, " ".join(scopes), digest(secret), now(),
                     rate_per_s))
    return get(con, key_id), secret


def _row(r) -> dict | None:
    if r is None:
        return None
    out = dict(r)
    out.pop("secret_hash", None)
    out["scopes"] = out["scopes"].split()
    return out


def get(con, key_id: str) -> dict | None:
    return _row(con.execute("SELECT * FROM api_keys WHERE id = ?", (key_id,)).fetchone())


def list_keys(con, project: str | None = None) -> list[dict]:
    sql, args = "SELECT * FROM api_keys", ()
    if project is not None:
        sql, args = sql + " WHERE project = ?", (project,)
    return [_row(r) for r in con.execute(sql + " ORDER BY project, rowid", args)]


def revoke(con, key_id: str) -> bool:
    """Revoke a key for good; False if there is no such active key."""
    with write(con):
        return con.execute("UPDATE api_keys SET revoked_at = ? WHERE id = ? AND "
                           "revoked_at IS NULL", (now(), key_id)).rowcount > 0


def find(con, secret: str) -> dict | None:
    """The active key whose secret this is, or None."""
    if not secret.startswith(SECRET_PREFIX) or len(secret) > 200:
        return None
    return _row(con.execute("SELECT * FROM api_keys WHERE secret_hash = ? AND "
                            "revoked_at IS NULL", (digest(secret),)).fetchone())


def any_active(con) -> bool:
    """Whether at least one key is active (then every request needs one)."""
    return con.execute("SELECT 1 FROM api_keys WHERE revoked_at IS NULL LIMIT 1"
                       ).fetchone() is not None
