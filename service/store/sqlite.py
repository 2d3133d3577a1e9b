"""The metadata database: one SQLite file in WAL mode in the data directory.

Every write runs in ``BEGIN IMMEDIATE`` with a busy timeout, so two
processes (or waitress threads) writing at once queue instead of failing
with "database is locked". SQL lives here and in ``schema.sql`` only.
"""

from __future__ import annotations

import json
import sqlite3
import uuid
from contextlib import contextmanager
from datetime import datetime, timezone
from importlib import resources
from pathlib import Path

DB_NAME = "cycleledger.sqlite3"
BUSY_TIMEOUT_S = 10.0


def now() -> str:
    """The current UTC time as an ISO 8601 string (seconds)."""
    return datetime.now(timezone.utc).isoformat(timespec="seconds").replace("+00:00", "Z")


def utc_text(value: str) -> str | None:
    """An RFC 3339 time (with its offset) as the UTC text this store writes
    (seconds, ``Z``), so stored times compare as text in time order; None
    when ``value`` is not such a time."""
    if not isinstance(value, str) or len(value) < 20 or value[10] not in "Tt ":
        return None
    try:
        t = datetime.fromisoformat(value.replace("z", "Z"))
    except ValueError:
        return None
    if t.tzinfo is None:
        return None  # RFC 3339 times carry their offset
    return t.astimezone(timezone.utc).isoformat(timespec="seconds").replace("+00:00", "Z")


def new_id(prefix: str) -> str:
    """A fresh, URL-safe identifier such as ``h_3f9c0e2b1a7d``."""
    return f"{prefix}_{uuid.uuid4().hex[:16]}"


def connect(data_dir: str | Path) -> sqlite3.Connection:
    """Open (creating if needed) the database of ``data_dir``."""
    path = Path(data_dir)
    path.mkdir(parents=True, exist_ok=True)
    con = sqlite3.connect(path / DB_NAME, timeout=BUSY_TIMEOUT_S, isolation_level=None,
                          check_same_thread=False)
    con.row_factory = sqlite3.Row
    con.execute("PRAGMA journal_mode=WAL")
    # FULL: a commit is on disk before the service answers (NORMAL in WAL
    # mode may lose the last commits on power loss).
    con.execute("PRAGMA synchronous=FULL")
    con.execute("PRAGMA foreign_keys=ON")
    return con


#: Version of schema.sql (its PRAGMA user_version).
SCHEMA_VERSION = 11


class IncompatibleStore(RuntimeError):
    """The data directory was written by another version of the schema."""


def init(data_dir: str | Path) -> list[int]:
    """Create the tables if they are missing and upgrade a directory of an
    earlier schema in place (``migrations``); refuse one this service cannot
    read. Returns the migrations applied."""
    from .migrations import OLDEST, migrate

    con = connect(data_dir)
    try:
        version = con.execute("PRAGMA user_version").fetchone()[0]
        has_tables = con.execute("SELECT count(*) FROM sqlite_master WHERE type = 'table'"
                                 ).fetchone()[0]
        applied = []
        if has_tables and version != SCHEMA_VERSION:
            if version > SCHEMA_VERSION or version < OLDEST:
                raise IncompatibleStore(
                    f"{Path(data_dir) / DB_NAME} has schema version {version}; this service "
                    f"reads {OLDEST} to {SCHEMA_VERSION} ("
                    + ("a newer service wrote it" if version > SCHEMA_VERSION else
                       "a pre-release data directory: move it away or start with another "
                       "--data-dir") + ")")
            # New tables first (CREATE IF NOT EXISTS), then the steps that
            # change existing ones; the version is set by the steps.
            script = resources.files(__package__).joinpath("schema.sql").read_text()
            con.executescript(script.replace(f"PRAGMA user_version = {SCHEMA_VERSION};", ""))
            applied = migrate(con, version, SCHEMA_VERSION)
        con.executescript(resources.files(__package__).joinpath("schema.sql").read_text())
        return applied
    finally:
        con.close()


def insert_owning_file(con, insert, row: dict, data_dir, rel: str) -> None:
    """``insert(con, row)`` in its own write transaction; if it fails, remove
    the file ``rel`` that was written for the row (nothing half-stored)."""
    from . import parquet

    try:
        with write(con):
            insert(con, row)
    except BaseException:
        parquet.remove(data_dir, rel)
        raise


@contextmanager
def write(con: sqlite3.Connection):
    """A write transaction taken up front (``BEGIN IMMEDIATE``)."""
    con.execute("BEGIN IMMEDIATE")
    try:
        yield con
    except BaseException:
        con.execute("ROLLBACK")
        raise
    con.execute("COMMIT")


# ---------------------------------------------------------------- histories


def insert_history(con, row: dict) -> None:
    con.execute(
        "INSERT INTO histories (id, project, name, created_at, sample_count, sample_rate_hz, "
        "duration_s, channels, file) VALUES (?, ?, ?, ?, ?, ?, ?, ?, ?)",
        (row["id"], row["project"], row.get("name"), row["created_at"], row["sample_count"],
         row.get("sample_rate_hz"), row.get("duration_s"), json.dumps(row["channels"]),
         row["file"]))


def _history(r: sqlite3.Row | None) -> dict | None:
    if r is None:
        return None
    out = dict(r)
    out["channels"] = json.loads(out["channels"])
    return out


def get_history(con, project: str, history_id: str) -> dict | None:
    return _history(con.execute("SELECT * FROM histories WHERE id = ? AND project = ?",
                                (history_id, project)).fetchone())


def list_histories(con, project: str, limit: int = 100, offset: int = 0) -> list[dict]:
    rows = con.execute("SELECT * FROM histories WHERE project = ? "
                       "ORDER BY created_at DESC, id LIMIT ? OFFSET ?",
                       (project, limit, offset)).fetchall()
    return [_history(r) for r in rows]


def delete_history(con, project: str, history_id: str) -> bool:
    return con.execute("DELETE FROM histories WHERE id = ? AND project = ?",
                       (history_id, project)).rowcount > 0


def file_in_use(con, rel: str) -> bool:
    """Whether an assessment still reads its samples from ``rel``."""
    return con.execute("SELECT 1 FROM assessments WHERE samples_file = ? LIMIT 1",
                       (rel,)).fetchone() is not None


# ---------------------------------------------------------------- assessments


def insert_assessment(con, row: dict) -> None:
    con.execute(
        "INSERT INTO assessments (id, project, history_id, created_at, state, request, "
        "result, samples_file) VALUES (?, ?, ?, ?, ?, ?, ?, ?)",
        (row["id"], row["project"], row.get("history_id"), row["created_at"], row["state"],
         json.dumps(row["request"]), json.dumps(row.get("result")), row.get("samples_file")))


def insert_samples(con, assessment_id: str, channels: dict) -> None:
    """Keep an assessment's inline samples (float64 arrays, MPa)."""
    con.executemany("INSERT INTO assessment_samples (assessment_id, point, samples) "
                    "VALUES (?, ?, ?)",
                    [(assessment_id, name, memoryview(x)) for name, x in channels.items()])


def get_samples(con, assessment_id: str, point: str):
    """One point's inline samples as a float64 array, or None (the caller
    has checked the assessment belongs to its project)."""
    import numpy as np

    r = con.execute("SELECT samples FROM assessment_samples WHERE assessment_id = ? AND "
                    "point = ?", (assessment_id, point)).fetchone()
    return None if r is None else np.frombuffer(r[0], dtype=np.float64)


def get_assessment(con, project: str, assessment_id: str) -> dict | None:
    r = con.execute("SELECT * FROM assessments WHERE id = ? AND project = ?",
                    (assessment_id, project)).fetchone()
    if r is None:
        return None
    out = dict(r)
    out["request"] = json.loads(out["request"])
    out["result"] = json.loads(out["result"]) if out["result"] else None
    return out


def list_assessments(con, project: str, limit: int = 100, offset: int = 0) -> list[dict]:
    rows = con.execute("SELECT id, history_id, created_at, state FROM assessments "
                       "WHERE project = ? ORDER BY created_at DESC, id LIMIT ? OFFSET ?",
                       (project, limit, offset)).fetchall()
    return [dict(r) for r in rows]


# ---------------------------------------------------------------- jobs

JOB_STATES = ("queued", "running", "done", "failed")


def insert_job(con, project: str, job_id: str, kind: str, points_total: int,
               request: dict | None = None, input_file: str | None = None) -> None:
    """A queued job, with what re-runs it after a restart (``request``, JSON,
    and the Parquet ``input_file`` of inline inputs)."""
    t = now()
    con.execute("INSERT INTO jobs (id, project, kind, state, created_at, updated_at, "
                "points_total, request, input_file) VALUES (?, ?, ?, 'queued', ?, ?, ?, ?, ?)",
                (job_id, project, kind, t, t, points_total,
                 None if request is None else json.dumps(request), input_file))


def update_job(con, job_id: str, **fields) -> None:
    """Set some of state, points_done, assessment_id, error (a dict)."""
    allowed = {"state", "points_done", "assessment_id", "superposition_id", "error"}
    if set(fields) - allowed:
        raise ValueError(f"not job fields: {set(fields) - allowed}")
    if "error" in fields and fields["error"] is not None:
        fields["error"] = json.dumps(fields["error"])
    cols = ", ".join(f"{k} = ?" for k in fields)
    with write(con):
        con.execute(f"UPDATE jobs SET {cols}, updated_at = ? WHERE id = ?",
                    (*fields.values(), now(), job_id))


def count_jobs(con, states) -> int:
    marks = ", ".join("?" for _ in states)
    return con.execute(f"SELECT count(*) FROM jobs WHERE state IN ({marks})",
                       tuple(states)).fetchone()[0]


def get_job(con, project: str, job_id: str) -> dict | None:
    r = con.execute("SELECT * FROM jobs WHERE id = ? AND project = ?",
                    (job_id, project)).fetchone()
    if r is None:
        return None
    out = dict(r)
    out["error"] = json.loads(out["error"]) if out["error"] else None
    return out


def referenced_files(con) -> set[str]:
    """Every data file a row names (relative to the data directory)."""
    out = set()
    for sql in ("SELECT file FROM histories", "SELECT file FROM blocks",
                "SELECT samples_file FROM assessments WHERE samples_file IS NOT NULL",
                "SELECT file FROM unit_stress_sets", "SELECT nodes_file FROM superpositions",
                "SELECT input_file FROM jobs WHERE input_file IS NOT NULL",
                "SELECT file FROM edits"):
        out.update(r[0] for r in con.execute(sql))
    return out


def record_audit(con, project: str, action: str, *, key_id=None, method=None, path=None,
                 status=None, target=None) -> None:
    """Append one entry to the project's audit trail."""
    with write(con):
        con.execute("INSERT INTO audit (project, at, key_id, action, method, path, status, "
                    "target) VALUES (?, ?, ?, ?, ?, ?, ?, ?)",
                    (project, now(), key_id, action, method, path, status, target))


def list_audit(con, project: str, limit: int, offset: int) -> list[dict]:
    """The project's audit trail, newest first."""
    return [dict(r) for r in con.execute(
        "SELECT * FROM audit WHERE project = ? ORDER BY seq DESC LIMIT ? OFFSET ?",
        (project, limit, offset))]


def idempotent_answer(con, project: str, route: str, key: str) -> dict | None:
    """The stored answer to an earlier POST with this Idempotency-Key."""
    r = con.execute("SELECT * FROM idempotency WHERE project = ? AND route = ? AND key = ?",
                    (project, route, key)).fetchone()
    return None if r is None else dict(r) | {"body": json.loads(r["body"])}


def keep_idempotent_answer(con, project: str, route: str, key: str, request_hash: str,
                           status: int, body: dict, location: str | None) -> None:
    """Remember the answer to a POST made with an Idempotency-Key (the first
    answer wins when two arrive together)."""
    with write(con):
        con.execute("INSERT OR IGNORE INTO idempotency (project, route, key, request_hash, "
                    "status, body, location, created_at) VALUES (?, ?, ?, ?, ?, ?, ?, ?)",
                    (project, route, key, request_hash, status, json.dumps(body), location,
                     now()))


def interrupted_jobs(con) -> list[dict]:
    """Jobs a stopped process left queued or running: those that kept their
    request are queued again (returned, oldest first, to be resubmitted);
    the others (made before jobs kept it) are failed with a reason."""
    err = json.dumps({"title": "Interrupted", "detail": "the service stopped before the "
                      "job finished; post the assessment again"})
    with write(con):
        con.execute("UPDATE jobs SET state = 'failed', error = ?, updated_at = ? "
                    "WHERE state IN ('queued', 'running') AND request IS NULL", (err, now()))
        con.execute("UPDATE jobs SET state = 'queued', points_done = 0, updated_at = ? "
                    "WHERE state IN ('queued', 'running')", (now(),))
    rows = con.execute("SELECT * FROM jobs WHERE state = 'queued' ORDER BY created_at"
                       ).fetchall()
    out = []
    for r in rows:
        job = dict(r)
        job["request"] = json.loads(job["request"])
        out.append(job)
    return out


# ---------------------------------------------------------------- FE superposition


def insert_unit_stress_set(con, row: dict) -> None:
    con.execute("INSERT INTO unit_stress_sets (id, project, name, created_at, nodes, load_cases, "
                "components, file) VALUES (?, ?, ?, ?, ?, ?, ?, ?)",
                (row["id"], row["project"], row.get("name"), row["created_at"], row["nodes"],
                 json.dumps(row["load_cases"]), row["components"], row["file"]))


def _unit_set(r) -> dict | None:
    if r is None:
        return None
    out = dict(r)
    out["load_cases"] = json.loads(out["load_cases"])
    return out


def get_unit_stress_set(con, project: str, set_id: str) -> dict | None:
    return _unit_set(con.execute("SELECT * FROM unit_stress_sets WHERE id = ? AND project = ?",
                                 (set_id, project)).fetchone())


def list_unit_stress_sets(con, project: str) -> list[dict]:
    return [_unit_set(r) for r in con.execute(
        "SELECT * FROM unit_stress_sets WHERE project = ? ORDER BY created_at DESC, id",
        (project,))]


def delete_unit_stress_set(con, project: str, set_id: str) -> bool:
    return con.execute("DELETE FROM unit_stress_sets WHERE id = ? AND project = ?",
                       (set_id, project)).rowcount > 0


def insert_superposition(con, row: dict) -> None:
    con.execute("INSERT INTO superpositions (id, project, unit_stress_id, created_at, request, "
                "result, nodes_file) VALUES (?, ?, ?, ?, ?, ?, ?)",
                (row["id"], row["project"], row["unit_stress_id"], row["created_at"],
                 json.dumps(row["request"]), json.dumps(row["result"]), row["nodes_file"]))


def get_superposition(con, project: str, sup_id: str) -> dict | None:
    return _doc(con.execute("SELECT * FROM superpositions WHERE id = ? AND project = ?",
                            (sup_id, project)).fetchone())


# ---------------------------------------------------------------- duty cycles, spectra
# Documents computed once and kept: a request, its result, a name.

_DOCS = ("duty_cycles", "spectra")


def _docs(table: str) -> str:
    if table not in _DOCS:
        raise ValueError(f"{table!r} is not a table of documents")
    return table


def _insert_doc(con, table: str, row: dict) -> None:
    con.execute(f"INSERT INTO {_docs(table)} (id, project, name, created_at, request, result) "
                "VALUES (?, ?, ?, ?, ?, ?)",
                (row["id"], row["project"], row["name"], row["created_at"],
                 json.dumps(row["request"]), json.dumps(row["result"])))


def _doc(r) -> dict | None:
    """A row with its JSON ``request`` and ``result`` read."""
    if r is None:
        return None
    out = dict(r)
    out["request"] = json.loads(out["request"])
    out["result"] = json.loads(out["result"])
    return out


def get_doc(con, table: str, project: str, doc_id: str) -> dict | None:
    return _doc(con.execute(f"SELECT * FROM {_docs(table)} WHERE id = ? AND project = ?",
                            (doc_id, project)).fetchone())


def list_docs(con, table: str, project: str, limit: int = 100, offset: int = 0) -> list[dict]:
    return [_doc(r) for r in con.execute(
        f"SELECT * FROM {_docs(table)} WHERE project = ? ORDER BY created_at DESC, id "
        "LIMIT ? OFFSET ?", (project, limit, offset))]


def delete_doc(con, table: str, project: str, doc_id: str) -> bool:
    return con.execute(f"DELETE FROM {_docs(table)} WHERE id = ? AND project = ?",
                       (doc_id, project)).rowcount > 0


def store_doc(con, table: str, prefix: str, project: str, name, request: dict,
              result: dict) -> dict:
    """Store a new document (a fresh id with ``prefix``) in one write
    transaction; the row stored."""
    row = {"id": new_id(prefix), "project": project, "name": name, "created_at": now(),
           "request": request, "result": result}
    with write(con):
        _insert_doc(con, table, row)
    return row


# ---------------------------------------------------------------- edits


def insert_edit(con, row: dict) -> None:
    con.execute("INSERT INTO edits (id, project, history_id, created_at, request, result, "
                "file) VALUES (?, ?, ?, ?, ?, ?, ?)",
                (row["id"], row["project"], row["history_id"], row["created_at"],
                 json.dumps(row["request"]), json.dumps(row["result"]), row["file"]))


def get_edit(con, project: str, edit_id: str) -> dict | None:
    return _doc(con.execute("SELECT * FROM edits WHERE id = ? AND project = ?",
                            (edit_id, project)).fetchone())


def delete_edit(con, project: str, edit_id: str) -> str | None:
    """Remove an edit's row; the file it named (for the caller to remove), or None."""
    r = con.execute("SELECT file FROM edits WHERE id = ? AND project = ?",
                    (edit_id, project)).fetchone()
    if r is None:
        return None
    con.execute("DELETE FROM edits WHERE id = ?", (edit_id,))
    return r[0]


# ---------------------------------------------------------------- user curves, materials

_NAMED = {"user_curves": "definition", "materials": "properties"}


def insert_named(con, project: str, table: str, name: str, doc: dict) -> bool:
    """Store ``doc`` under ``name`` in ``project``; False if the name is taken."""
    col = _NAMED[table]
    try:
        con.execute(f"INSERT INTO {table} (project, name, created_at, {col}) "
                    f"VALUES (?, ?, ?, ?)", (project, name, now(), json.dumps(doc)))
    except sqlite3.IntegrityError:
        return False
    return True


def get_named(con, project: str, table: str, name: str) -> dict | None:
    col = _NAMED[table]
    r = con.execute(f"SELECT name, created_at, {col} FROM {table} WHERE project = ? AND "
                    f"name = ?", (project, name)).fetchone()
    if r is None:
        return None
    return {"name": r["name"], "created_at": r["created_at"], **json.loads(r[col])}


def list_named(con, project: str, table: str) -> list[dict]:
    col = _NAMED[table]
    rows = con.execute(f"SELECT name, created_at, {col} FROM {table} WHERE project = ? "
                       f"ORDER BY name", (project,)).fetchall()
    return [{"name": r["name"], "created_at": r["created_at"], **json.loads(r[col])}
            for r in rows]


def delete_named(con, project: str, table: str, name: str) -> bool:
    return con.execute(f"DELETE FROM {table} WHERE project = ? AND name = ?",
                       (project, name)).rowcount > 0
