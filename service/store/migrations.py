"""Forward migrations of the embedded store, numbered by schema version.

``MIGRATIONS[v]`` takes a database of version ``v - 1`` to ``v``. At start
the missing ones are applied in order, in one transaction with the new
``PRAGMA user_version`` (all or nothing: a failed upgrade leaves the data
directory as it was). A directory newer than this service, or older than the
oldest migration, is refused with a message.
"""

from __future__ import annotations

import json
import sqlite3


def _columns(con, table: str) -> set[str]:
    return {r[1] for r in con.execute(f"PRAGMA table_info({table})")}


def _to_7(con) -> None:
    """Jobs keep what re-runs them after a restart (``request``, ``input_file``).

    Schema 6 gained ``jobs.superposition_id`` (and the superposition tables,
    made by ``schema.sql`` itself) after directories of version 6 existed,
    without a version of its own: such a directory gets the column here.
    """
    have = _columns(con, "jobs")
    for column in ("superposition_id", "request", "input_file"):
        if column not in have:
            con.execute(f"ALTER TABLE jobs ADD COLUMN {column} TEXT")


def _to_8(con) -> None:
    """Idempotency keys on histories and assessments: a new table, made by
    ``schema.sql`` itself; nothing to change in the existing ones."""


def _to_9(con) -> None:
    """The audit trail: a new table, made by ``schema.sql`` itself."""


def _to_10(con) -> None:
    """Stored assessment results in the names of issue 17: a point's full
    options ``settings`` -> ``options`` (``settings`` now always means what a
    user sent), and a multiaxial point's echo in the request's names
    (``layout``/``channels`` -> ``rosette``/``gauges``, or ``components`` as
    ``{component: channel}``). Written out here, not imported: a migration is
    a fixed step, whatever the code does later."""
    rows = con.execute("SELECT id, result FROM assessments WHERE result IS NOT NULL").fetchall()
    for aid, text in rows:
        result = json.loads(text)
        for p in (result.get("points") or {}).values():
            if "settings" in p and "options" not in p:
                p["options"] = p.pop("settings")
            m = p.get("multiaxial")
            if m and "channels" in m:
                channels = m.pop("channels")
                if m.get("kind") == "rosette":
                    m["rosette"], m["gauges"] = m.pop("layout"), channels
                else:
                    m["components"] = dict(zip(m["components"], channels))
        con.execute("UPDATE assessments SET result = ? WHERE id = ?", (json.dumps(result), aid))


def _to_11(con) -> None:
    """Duty cycles, spectral assessments and edited drive signals: new tables, made by
    ``schema.sql`` itself."""


#: version -> the step from the version before it.
MIGRATIONS = {7: _to_7, 8: _to_8, 9: _to_9, 10: _to_10, 11: _to_11}
#: The oldest version a directory may have to be upgraded.
OLDEST = min(MIGRATIONS) - 1


def migrate(con: sqlite3.Connection, have: int, want: int) -> list[int]:
    """Apply migrations ``have + 1 .. want`` in one transaction; the
    versions applied. ``con`` is in autocommit mode (isolation_level None)."""
    steps = list(range(have + 1, want + 1))
    if not steps:
        return []
    con.execute("BEGIN IMMEDIATE")
    try:
        for v in steps:
            MIGRATIONS[v](con)
        con.execute(f"PRAGMA user_version = {int(want)}")
        con.execute("COMMIT")
    except BaseException:
        con.execute("ROLLBACK")
        raise
    return steps
