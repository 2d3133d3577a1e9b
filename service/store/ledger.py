"""SQL of the ledger: assets, their points, settings versions, blocks, totals.

Plain functions over a connection; the caller holds the transaction
(``sqlite.write``). Nothing here counts or judges; ``service.ledger`` does.

Assets are found by (project, name); everything below them by the asset's
id, which never leaves the service: rows read back carry the asset's name
as ``asset`` and its id as ``asset_id``.
"""

from __future__ import annotations

import json

from .sqlite import new_id, now


def insert_asset(con, project: str, name: str, description: str | None) -> bool:
    """A new asset; False if ``project`` already has one by that name."""
    cur = con.execute("INSERT OR IGNORE INTO assets (id, project, name, created_at, "
                      "description) VALUES (?, ?, ?, ?, ?)",
                      (new_id("as"), project, name, now(), description))
    return cur.rowcount > 0


def get_asset(con, project: str, name: str) -> dict | None:
    r = con.execute("SELECT * FROM assets WHERE project = ? AND name = ?",
                    (project, name)).fetchone()
    return dict(r) if r else None


def list_assets(con, project: str) -> list[dict]:
    return [dict(r) for r in con.execute("SELECT * FROM assets WHERE project = ? ORDER BY name",
                                         (project,))]


def insert_point(con, asset_id: str, point: str, unit: str, youngs_modulus,
                 settings: dict, resolved: dict) -> bool:
    t = now()
    cur = con.execute(
        "INSERT OR IGNORE INTO ledger_points (asset_id, point, created_at, unit, "
        "youngs_modulus, settings_version, updated_at) VALUES (?, ?, ?, ?, ?, 1, ?)",
        (asset_id, point, t, unit, youngs_modulus, t))
    if cur.rowcount == 0:
        return False
    con.execute("INSERT INTO point_settings (asset_id, point, version, created_at, settings, "
                "resolved) VALUES (?, ?, 1, ?, ?, ?)",
                (asset_id, point, t, json.dumps(settings), json.dumps(resolved)))
    return True


def add_settings_version(con, asset_id: str, point: str, settings: dict,
                         resolved: dict) -> int:
    v = con.execute("SELECT max(version) FROM point_settings WHERE asset_id = ? AND point = ?",
                    (asset_id, point)).fetchone()[0] + 1
    con.execute("INSERT INTO point_settings (asset_id, point, version, created_at, settings, "
                "resolved) VALUES (?, ?, ?, ?, ?, ?)",
                (asset_id, point, v, now(), json.dumps(settings), json.dumps(resolved)))
    con.execute("UPDATE ledger_points SET settings_version = ? WHERE asset_id = ? AND "
                "point = ?", (v, asset_id, point))
    return v


_POINT_SQL = (
    "SELECT p.*, a.name AS asset, s.settings, s.resolved FROM ledger_points p "
    "JOIN assets a ON a.id = p.asset_id JOIN point_settings s ON s.asset_id = p.asset_id "
    "AND s.point = p.point AND s.version = p.settings_version")


def get_point(con, asset_id: str, point: str) -> dict | None:
    return _point(con.execute(_POINT_SQL + " WHERE p.asset_id = ? AND p.point = ?",
                              (asset_id, point)).fetchone())


def list_points(con, project: str, asset_id: str | None = None) -> list[dict]:
    """The points of ``project`` (of one of its assets if ``asset_id``)."""
    sql, args = _POINT_SQL + " WHERE a.project = ?", (project,)
    if asset_id is not None:
        sql, args = sql + " AND p.asset_id = ?", (project, asset_id)
    return [_point(r) for r in con.execute(sql + " ORDER BY a.name, p.point", args)]


def asset_points(con, asset_id: str) -> list[dict]:
    """Every point of one asset, by name."""
    return [_point(r) for r in con.execute(_POINT_SQL + " WHERE p.asset_id = ? ORDER BY p.point",
                                           (asset_id,))]


def _point(r) -> dict | None:
    if r is None:
        return None
    out = dict(r)
    out["settings"] = json.loads(out["settings"])
    out["resolved"] = json.loads(out["resolved"])
    out["counting_state"] = json.loads(out["counting_state"]) if out["counting_state"] else None
    return out


def save_totals(con, asset_id: str, point: str, totals: dict, reason: str,
                block_id: str | None) -> None:
    """Write a point's running totals and append them to its history."""
    t = now()
    con.execute(
        "UPDATE ledger_points SET last_seq = ?, counting_state = ?, damage = ?, "
        "residue_damage = ?, cycles = ?, hours = ?, overload = ?, last_block_at = ?, "
        "updated_at = ? WHERE asset_id = ? AND point = ?",
        (totals["last_seq"], json.dumps(totals["counting_state"]), totals["damage"],
         totals["residue_damage"], totals["cycles"], totals["hours"], int(totals["overload"]),
         totals["last_block_at"], t, asset_id, point))
    con.execute(
        "INSERT INTO point_totals (asset_id, point, at, reason, block_id, settings_version, "
        "damage, residue_damage, hours, cycles) VALUES (?, ?, ?, ?, ?, "
        "(SELECT settings_version FROM ledger_points WHERE asset_id = ? AND point = ?), "
        "?, ?, ?, ?)",
        (asset_id, point, t, reason, block_id, asset_id, point, totals["damage"],
         totals["residue_damage"], totals["hours"], totals["cycles"]))


def point_history(con, asset_id: str, point: str) -> list[dict]:
    return [dict(r) for r in con.execute(
        "SELECT at, reason, block_id, settings_version, damage, residue_damage, hours, "
        "cycles AS cycles_counted "
        "FROM point_totals WHERE asset_id = ? AND point = ? ORDER BY rowid",
        (asset_id, point))]


def insert_block(con, row: dict) -> None:
    con.execute(
        "INSERT INTO blocks (id, asset_id, seq, created_at, recorded_at, idempotency_key, "
        "content_hash, sample_rate_hz, sample_count, points, file, response) "
        "VALUES (?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?)",
        (row["id"], row["asset_id"], row["seq"], row["created_at"], row.get("recorded_at"),
         row.get("idempotency_key"), row["content_hash"], row["sample_rate_hz"],
         row["sample_count"], json.dumps(row["points"]), row["file"],
         json.dumps(row.get("response"))))
    con.executemany("INSERT INTO block_points (asset_id, point, seq, block_id) "
                    "VALUES (?, ?, ?, ?)",
                    [(row["asset_id"], p, row["seq"], row["id"]) for p in row["points"]])


def set_block_response(con, block_id: str, response: dict) -> None:
    con.execute("UPDATE blocks SET response = ? WHERE id = ?", (json.dumps(response), block_id))


def _block(r) -> dict | None:
    if r is None:
        return None
    out = dict(r)
    out["points"] = json.loads(out["points"])
    out["response"] = json.loads(out["response"]) if out["response"] else None
    return out


def get_block(con, asset_id: str, block_id: str) -> dict | None:
    return _block(con.execute("SELECT * FROM blocks WHERE id = ? AND asset_id = ?",
                              (block_id, asset_id)).fetchone())


def block_by_key(con, asset_id: str, key: str) -> dict | None:
    return _block(con.execute("SELECT * FROM blocks WHERE asset_id = ? AND "
                              "idempotency_key = ?", (asset_id, key)).fetchone())


def block_at(con, asset_id: str, point: str, seq: int) -> dict | None:
    """The block that holds ``point`` at sequence number ``seq``."""
    return _block(con.execute(
        "SELECT b.* FROM block_points bp JOIN blocks b ON b.id = bp.block_id "
        "WHERE bp.asset_id = ? AND bp.point = ? AND bp.seq = ?",
        (asset_id, point, seq)).fetchone())


def list_blocks(con, asset_id: str, limit: int = 100, offset: int = 0) -> list[dict]:
    return [_block(r) for r in con.execute(
        "SELECT * FROM blocks WHERE asset_id = ? ORDER BY seq DESC, created_at DESC "
        "LIMIT ? OFFSET ?", (asset_id, limit, offset))]


def point_blocks(con, asset_id: str, point: str) -> list[dict]:
    """Blocks that count for ``point`` (not voided), in sequence order."""
    return [_block(r) for r in con.execute(
        "SELECT b.* FROM block_points bp JOIN blocks b ON b.id = bp.block_id "
        "WHERE bp.asset_id = ? AND bp.point = ? AND b.voided_at IS NULL ORDER BY bp.seq",
        (asset_id, point))]


def void_block(con, block_id: str) -> bool:
    return con.execute("UPDATE blocks SET voided_at = ? WHERE id = ? AND voided_at IS NULL",
                       (now(), block_id)).rowcount > 0
