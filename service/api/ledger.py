"""The ledger over HTTP: assets, points, blocks, totals, dashboard feeds."""

from __future__ import annotations

import math
import time

from flask import Blueprint, jsonify, request, url_for

from service import digests, ledger, runs
from service.engine import units as engine_units
from service.engine.errors import InvalidParameter, unknown
from service.engine.plausibility import check_modulus
from service.store import ledger as sql
from service.store import sqlite

from . import created, data_dir, db, json_object, uploads
from .access import project
from .assessments import _csv, _format
from .bodies import discard, receive_body
from .histories import page_args
from .library import NameTaken, _NAME
from .problems import ApiProblem, NotFound

bp = Blueprint("ledger", __name__)

#: Columns of the dashboard feed, in order (JSON fields and CSV header alike).
FEED_COLUMNS = ("asset", "point", "damage", "consumed_percent", "projected_hours_remaining",
                "damage_rate_per_hour", "recorded_hours", "residue_damage", "last_block_at",
                "runout", "settings_version", "flags", "signal_findings")


class SequenceConflict(ApiProblem):
    status, slug, title = 409, "sequence-conflict", "Block does not follow the sequence"


def _name(value, field: str) -> str:
    if not isinstance(value, str) or not _NAME.match(value):
        raise ApiProblem(f"{field} must be 1-64 letters, digits, '_', '.' or '-', starting "
                         f"with a letter or digit", field=field)
    return value


def _asset(asset: str) -> dict:
    """The asset of this name in the request's project, or 404."""
    row = sql.get_asset(db(), project(), asset)
    if row is None:
        raise NotFound(f"no asset {asset!r}", field="asset")
    return row


def _point(asset: str, point: str) -> dict:
    row = sql.get_point(db(), _asset(asset)["id"], point)
    if row is None:
        raise NotFound(f"asset {asset!r} has no point {point!r}", field="point")
    return row


def _point_resource(row: dict) -> dict:
    out = ledger.status(row)
    out["settings"] = row["settings"]
    out["settings_used"] = row["resolved"]
    out["youngs_modulus"] = row["youngs_modulus"]
    out["links"] = {
        "self": url_for("ledger.get_point", asset=row["asset"], point=row["point"]),
        "history": url_for("ledger.point_history", asset=row["asset"], point=row["point"]),
        "settings": url_for("ledger.put_settings", asset=row["asset"], point=row["point"])}
    return out


def _asset_resource(row: dict) -> dict:
    points = [ledger.status(p) for p in sql.list_points(db(), project(), row["id"])]
    return {"name": row["name"], "created_at": row["created_at"],
            "description": row["description"], "points": points,
            "links": {"self": url_for("ledger.get_asset", asset=row["name"]),
                      "blocks": url_for("ledger.list_blocks", asset=row["name"])}}


# ---------------------------------------------------------------- assets, points


@bp.post("/v1/assets")
def create_asset():
    body = json_object()
    name = _name(body.get("name"), "name")
    desc = body.get("description")
    if desc is not None and not isinstance(desc, str):
        raise ApiProblem("description must be text", field="description")
    con = db()
    with sqlite.write(con):
        if not sql.insert_asset(con, project(), name, desc):
            raise NameTaken(f"an asset named {name!r} exists", field="name")
    return created(_asset_resource(sql.get_asset(con, project(), name)))


@bp.get("/v1/assets")
def list_assets():
    return jsonify(items=[_asset_resource(a) for a in sql.list_assets(db(), project())])


@bp.get("/v1/assets/<asset>")
def get_asset(asset: str):
    return jsonify(_asset_resource(_asset(asset)))


@bp.post("/v1/assets/<asset>/points")
def create_point(asset: str):
    """Register a point with its unit and assessment settings (version 1)."""
    asset_id = _asset(asset)["id"]
    body = json_object()
    name = _name(body.get("name"), "name")
    unit = body.get("unit")
    if unit not in engine_units.UNITS:
        raise unknown("unit", unit, engine_units.UNITS)
    e = body.get("youngs_modulus")
    if engine_units.is_strain(unit):
        if isinstance(e, bool) or not isinstance(e, (int, float)) or not (
                math.isfinite(e) and e > 0):
            raise InvalidParameter(f"unit {unit!r} is a strain: youngs_modulus (MPa) must be "
                                   f"a positive number", field="youngs_modulus")
        check_modulus(e)
    elif e is not None:
        raise InvalidParameter("youngs_modulus applies to strain units only",
                               field="youngs_modulus")
    settings, resolved = ledger.check_settings(body.get("settings", {}),
                                               runs.store_lookup(db(), project()))
    con = db()
    with sqlite.write(con):
        if not sql.insert_point(con, asset_id, name, unit, e, settings, resolved):
            raise NameTaken(f"asset {asset!r} has a point named {name!r}", field="name")
    return created(_point_resource(sql.get_point(con, asset_id, name)))


@bp.get("/v1/assets/<asset>/points/<point>")
def get_point(asset: str, point: str):
    return jsonify(_point_resource(_point(asset, point)))


@bp.put("/v1/assets/<asset>/points/<point>/settings")
def put_settings(asset: str, point: str):
    """New settings version; the point's totals are recounted under it."""
    asset_id = _point(asset, point)["asset_id"]
    body = json_object()
    settings, resolved = ledger.check_settings(body.get("settings"),
                                               runs.store_lookup(db(), project()))
    ledger.new_settings(db(), data_dir(), asset_id, point, settings, resolved)
    return jsonify(_point_resource(sql.get_point(db(), asset_id, point)))


@bp.get("/v1/assets/<asset>/points/<point>/history")
def point_history(asset: str, point: str):
    """Every change of the point's totals, oldest first (JSON or CSV)."""
    fmt = _format(("json", "csv"))
    asset_id = _point(asset, point)["asset_id"]
    rows = [runs.json_safe(r) for r in sql.point_history(db(), asset_id, point)]
    cols = ("at", "reason", "block_id", "settings_version", "damage", "residue_damage",
            "hours", "cycles_counted")
    if fmt == "csv":
        return _csv(cols, [["" if r[c] is None else r[c] for c in cols] for r in rows])
    return jsonify(asset=asset, point=point, items=rows)


# ---------------------------------------------------------------- blocks


def _flag(name: str) -> bool:
    v = request.args.get(name, "false").lower()
    if v not in ("true", "false", "1", "0"):
        raise ApiProblem(f"{name} must be true or false", field=name)
    return v in ("true", "1")


def _block_resource(block: dict, asset: str) -> dict:
    return {"id": block["id"], "asset": asset} | {
        k: block[k] for k in ("seq", "created_at", "recorded_at", "sample_rate_hz",
                              "sample_count", "points")} | {
        "voided": bool(block.get("voided_at")), "voided_at": block.get("voided_at"),
        "links": {"self": url_for("ledger.get_block", asset=asset, block_id=block["id"])}}


@bp.post("/v1/assets/<asset>/blocks")
def post_block(asset: str):
    """Count a block of samples for some of the asset's points (``seq`` per point)."""
    asset_id = _asset(asset)["id"]
    try:
        seq = int(request.args["seq"])
    except (KeyError, ValueError):
        raise ApiProblem("seq (a whole number) is required", field="seq") from None
    if not 0 <= seq <= 2**62:
        raise ApiProblem("seq must be 0..2^62", field="seq")
    recorded_at = _time_arg("recorded_at")
    key = request.headers.get("Idempotency-Key")
    if key is not None and not (0 < len(key) <= 200 and key.isprintable()):
        raise ApiProblem("Idempotency-Key must be 1-200 printable characters",
                         field="Idempotency-Key")
    allow_gap, allow_late = _flag("allow_gap"), _flag("allow_late")
    uploads.check_media_type(request.content_type)
    con = db()
    registered = ledger.registered_channels(sql.list_points(con, project(), asset_id))
    # The content hash (a retry carries the same bytes) is taken while the
    # body is received, so it costs no second pass over the bytes.
    digest = digests.Fingerprint()
    t0 = time.perf_counter()
    body = receive_body(data_dir() / ledger.BLOCKS, digest)
    t1 = time.perf_counter()
    try:
        params = {k: v for k, v in request.args.items()
                  if k not in ("seq", "recorded_at", "allow_gap", "allow_late")}
        up = uploads.parse(body, request.content_type, params, registered)
        ledger.check_block(con, asset, up, {n: {"unit": u} for n, (u, _) in registered.items()})
        t2 = time.perf_counter()

        def respond(block, statuses):
            return {"block": _block_resource(block, asset), "points": statuses}

        try:
            answer, _replayed = ledger.post_block(
                con, data_dir(), asset_id, seq, up, body, recorded_at=recorded_at,
                idempotency_key=key, content_hash=digest.hexdigest(), allow_gap=allow_gap,
                allow_late=allow_late, respond=respond)
        except ledger.LedgerConflict as exc:
            raise SequenceConflict(exc.detail, **exc.extra) from None
    finally:
        discard(body)
    t3 = time.perf_counter()
    resp = jsonify(answer)
    resp.status_code = 201
    resp.headers["Location"] = answer["block"]["links"]["self"]
    # W3C Server-Timing: where the time of a block went, for pipelines and us.
    resp.headers["Server-Timing"] = (f"receive;dur={(t1 - t0) * 1e3:.1f}, "
                                     f"parse;dur={(t2 - t1) * 1e3:.1f}, "
                                     f"count;dur={(t3 - t2) * 1e3:.1f}")
    return resp


@bp.get("/v1/assets/<asset>/blocks")
def list_blocks(asset: str):
    asset_id = _asset(asset)["id"]
    limit, offset = page_args()
    return jsonify(items=[_block_resource(b, asset)
                          for b in sql.list_blocks(db(), asset_id, limit, offset)],
                   limit=limit, offset=offset)


def _block(asset: str, block_id: str) -> dict:
    b = sql.get_block(db(), _asset(asset)["id"], block_id)
    if b is None:
        raise NotFound(f"asset {asset!r} has no block {block_id!r}", field="block_id")
    return b


@bp.get("/v1/assets/<asset>/blocks/<block_id>")
def get_block(asset: str, block_id: str):
    return jsonify(_block_resource(_block(asset, block_id), asset))


@bp.post("/v1/assets/<asset>/blocks/<block_id>/void")
def void_block(asset: str, block_id: str):
    """Take a block out of the totals; its points are recounted without it."""
    asset_id = _block(asset, block_id)["asset_id"]
    try:
        statuses = ledger.void(db(), data_dir(), asset_id, block_id)
    except ledger.LedgerConflict as exc:
        raise SequenceConflict(exc.detail, **exc.extra) from None
    return jsonify(block=_block_resource(sql.get_block(db(), asset_id, block_id), asset),
                   points=statuses)


# ---------------------------------------------------------------- feeds


def _time_arg(name: str) -> str | None:
    """A query parameter that is a time: RFC 3339 with its offset (for
    example 2026-12-01T08:00:00Z), kept as UTC text; refused (400) otherwise."""
    value = request.args.get(name)
    if value is None:
        return None
    utc = sqlite.utc_text(value)
    if utc is None:
        raise ApiProblem(f"{name} {value[:40]!r} is not an RFC 3339 time with its offset "
                         "(for example 2026-12-01T08:00:00Z)", field=name)
    return utc


def _last_findings(point: dict) -> list[str]:
    """Kinds of the faults the screening found in the point's last block."""
    if point["last_seq"] is None:
        return []
    block = sql.block_at(db(), point["asset_id"], point["point"], point["last_seq"])
    answer = ((block or {}).get("response") or {}).get("points", {}).get(point["point"], {})
    return sorted({f["kind"] for f in (answer.get("screening") or {}).get("findings", [])})


@bp.get("/v1/feeds/points")
def feed():
    """One flat row per point for dashboards (JSON or CSV); ``asset`` and
    ``since`` (ISO time: points updated at or after it) filter."""
    fmt = _format(("json", "csv"))
    asset = request.args.get("asset")
    since = _time_arg("since")
    if asset is None:
        points = sql.list_points(db(), project())
    else:
        row = sql.get_asset(db(), project(), asset)
        points = sql.list_points(db(), project(), row["id"]) if row else []
    rows = [ledger.status(p) | {"signal_findings": _last_findings(p)} for p in points]
    if since:
        rows = [r for r in rows if (r["updated_at"] or "") >= since]
    rows = [{c: r[c] for c in FEED_COLUMNS} for r in rows]
    if fmt == "csv":
        return _csv(FEED_COLUMNS, [[";".join(r[c]) if c in ("flags", "signal_findings") else
                                    ("" if r[c] is None else r[c]) for c in FEED_COLUMNS]
                                   for r in rows])
    return jsonify(items=rows, columns=list(FEED_COLUMNS),
                   units={"damage": "-", "consumed_percent": "%",
                          "projected_hours_remaining": "h", "damage_rate_per_hour": "1/h",
                          "recorded_hours": "h"})

