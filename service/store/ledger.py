"""SQL of the ledger: assets, their points, settings versions, blocks, totals.

Plain functions over a connection; the caller holds the transaction
(``sqlite.write``). Nothing here counts or judges; ``service.ledger`` does.
"""

from __future__ import annotations

import json

from .sqlite import now


def insert_asset(con, name: str, description: str | None) -> bool:
    cur = con.execute("INSERT OR IGNORE INTO assets (name, created_at, description) "
                      "VALUES (?, ?, ?)", (name, now(), description))
    return cur.rowcount > 0


def get_asset(con, name: str) -> dict | None:
    r = con.execute("SELECT * FROM assets WHERE name = ?", (name,)).fetchone()
    return dict(r) if r else None


def list_assets(con) -> list[dict]:
    return [dict(r) for r in con.execute("SELECT * FROM assets ORDER BY name")]


def insert_point(con, asset: str, point: str, unit: str, youngs_modulus,
                 settings: dict, resolved: dict) -> bool:
    t = now()
    cur = con.execute(
        "INSERT OR IGNORE INTO ledger_points (asset, point, created_at, unit, youngs_modulus, "
        "settings_version, updated_at) VALUES (?, ?, ?, ?, ?, 1, ?)",
        (asset, point, t, unit, youngs_modulus, t))
    if cur.rowcount == 0:
        return False
    con.execute("INSERT INTO point_settings (asset, point, version, created_at, settings, "
                "resolved) VALUES (?, ?, 1, ?, ?, ?)",
                (asset, point, t, json.dumps(settings), json.dumps(resolved)))
    return True


def add_settings_version(con, asset: str, point: str, settings: dict, resolved: dict) -> int:
    v = con.execute("SELECT max(version) FROM point_settings WHERE asset = ? AND point = ?",
                    (asset, point)).fetchone()[0] + 1
    con.execute("INSERT INTO point_settings (asset, point, version, created_at, settings, "
                "resolved) VALUES (?, ?, ?, ?, ?, ?)",
                (asset, point, v, now(), json.dumps(settings), json.dumps(resolved)))
    con.execute("UPDATE ledger_points SET settings_version = ? WHERE asset = ? AND point = ?",
                (v, asset, point))
    return v


def get_point(con, asset: str, point: str) -> dict | None:
    r = con.execute("SELECT p.*, s.settings, s.resolved FROM ledger_points p JOIN "
                    "point_settings s ON s.asset = p.asset AND s.point = p.point AND "
                    "s.version = p.settings_version WHERE p.asset = ? AND p.point = ?",
                    (asset, point)).fetchone()
    return _point(r)


def list_points(con, asset: str | None = None) -> list[dict]:
    sql = ("SELECT p.*, s.settings, s.resolved FROM ledger_points p JOIN point_settings s "
           "ON s.asset = p.asset AND s.point = p.point AND s.version = p.settings_version")
    args: tuple = ()
    if asset is not None:
        sql += " WHERE p.asset = ?"
        args = (asset,)
    return [_point(r) for r in con.execute(sql + " ORDER BY p.asset, p.point", args)]


def _point(r) -> dict | None:
    if r is None:
        return None
    out = dict(r)
    out["settings"] = json.loads(out["settings"])
    out["resolved"] = json.loads(out["resolved"])
    out["counting_state"] = json.loads(out["counting_state"]) if out["counting_state"] else None
    return out


def save_totals(con, asset: str, point: str, totals: dict, reason: str,
                block_id: str | None) -> None:
    """Write a point's running totals and append them to its history."""
    t = now()
    con.execute(
        "UPDATE ledger_points SET last_seq = ?, counting_state = ?, damage = ?, "
        "residue_damage = ?, cycles = ?, hours = ?, overload = ?, last_block_at = ?, "
        "updated_at = ? WHERE asset = ? AND point = ?",
        (totals["last_seq"], json.dumps(totals["counting_state"]), totals["damage"],
         totals["residue_damage"], totals["cycles"], totals["hours"], int(totals["overload"]),
         totals["last_block_at"], t, asset, point))
    con.execute(
        "INSERT INTO point_totals (asset, point, at, reason, block_id, settings_version, "
        "damage, residue_damage, hours, cycles) VALUES (?, ?, ?, ?, ?, "
        "(SELECT settings_version FROM ledger_points WHERE asset = ? AND point = ?), "
        "?, ?, ?, ?)",
        (asset, point, t, reason, block_id, asset, point, totals["damage"],
         totals["residue_damage"], totals["hours"], totals["cycles"]))


def point_history(con, asset: str, point: str) -> list[dict]:
    return [dict(r) for r in con.execute(
        "SELECT at, reason, block_id, settings_version, damage, residue_damage, hours, cycles "
        "FROM point_totals WHERE asset = ? AND point = ? ORDER BY rowid", (asset, point))]


def insert_block(con, row: dict) -> None:
    con.execute(
        "INSERT INTO blocks (id, asset, seq, created_at, recorded_at, idempotency_key, "
        "content_hash, sample_rate_hz, sample_count, points, file, response) "
        "VALUES (?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?)",
        (row["id"], row["asset"], row["seq"], row["created_at"], row.get("recorded_at"),
         row.get("idempotency_key"), row["content_hash"], row["sample_rate_hz"],
         row["sample_count"], json.dumps(row["points"]), row["file"],
         json.dumps(row.get("response"))))
    con.executemany("INSERT INTO block_points (asset, point, seq, block_id) VALUES (?, ?, ?, ?)",
                    [(row["asset"], p, row["seq"], row["id"]) for p in row["points"]])


def set_block_response(con, block_id: str, response: dict) -> None:
    con.execute("UPDATE blocks SET response = ? WHERE id = ?", (json.dumps(response), block_id))


def _block(r) -> dict | None:
    if r is None:
        return None
    out = dict(r)
    out["points"] = json.loads(out["points"])
    out["response"] = json.loads(out["response"]) if out["response"] else None
    return out


def get_block(con, block_id: str) -> dict | None:
    return _block(con.execute("SELECT * FROM blocks WHERE id = ?", (block_id,)).fetchone())


def block_by_key(con, asset: str, key: str) -> dict | None:
    return _block(con.execute("SELECT * FROM blocks WHERE asset = ? AND idempotency_key = ?",
                              (asset, key)).fetchone())


def block_at(con, asset: str, point: str, seq: int) -> dict | None:
    """The block that holds ``point`` at sequence number ``seq``."""
    return _block(con.execute(
        "SELECT b.* FROM block_points bp JOIN blocks b ON b.id = bp.block_id "
        "WHERE bp.asset = ? AND bp.point = ? AND bp.seq = ?", (asset, point, seq)).fetchone())


def list_blocks(con, asset: str, limit: int = 100, offset: int = 0) -> list[dict]:
    return [_block(r) for r in con.execute(
        "SELECT * FROM blocks WHERE asset = ? ORDER BY seq DESC, created_at DESC "
        "LIMIT ? OFFSET ?", (asset, limit, offset))]


def point_blocks(con, asset: str, point: str) -> list[dict]:
    """Blocks that count for ``point`` (not voided), in sequence order."""
    return [_block(r) for r in con.execute(
        "SELECT b.* FROM block_points bp JOIN blocks b ON b.id = bp.block_id "
        "WHERE bp.asset = ? AND bp.point = ? AND b.voided_at IS NULL ORDER BY bp.seq",
        (asset, point))]


def void_block(con, block_id: str) -> bool:
    return con.execute("UPDATE blocks SET voided_at = ? WHERE id = ? AND voided_at IS NULL",
                       (now(), block_id)).rowcount > 0
