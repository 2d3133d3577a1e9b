"""Load histories: upload (CSV, Parquet, Arrow IPC, JSON), list, read, delete."""

from __future__ import annotations

from flask import Blueprint, jsonify, request, url_for

from service import digests
from service.store import parquet, sqlite

from . import created, data_dir, db, idempotency, uploads
from .access import project
from .bodies import discard, receive_body
from .problems import NotFound

bp = Blueprint("histories", __name__)


def resource(row: dict) -> dict:
    """The JSON form of a stored history, with its links."""
    out = {k: row[k] for k in ("id", "name", "created_at", "sample_count", "sample_rate_hz",
                               "duration_s", "channels")}
    out["links"] = {"self": url_for("histories.get_one", history_id=row["id"])}
    return out


def load(history_id: str) -> dict:
    row = sqlite.get_history(db(), project(), history_id)
    if row is None:
        raise NotFound(f"no history {history_id!r}", field="history_id")
    return row


@bp.post("/v1/histories")
def upload():
    """Store one recording: every channel checked and converted to MPa."""
    uploads.check_media_type(request.content_type)
    idem_key = idempotency.key()
    folder = data_dir() / parquet.HISTORIES
    # The body's hash only serves a retry with a key: none is taken without.
    digest = digests.Fingerprint() if idem_key is not None else None
    body = receive_body(folder, digest)
    try:
        request_hash = idempotency.request_hash(digest.hexdigest()) if digest else ""
        again = idempotency.replay(idem_key, request_hash, body)
        if again is not None:
            return again
        up = uploads.parse(body, request.content_type, request.args.to_dict())
        hid = sqlite.new_id("h")
        if up.stored_as_sent:
            rel = parquet.adopt(data_dir(), parquet.HISTORIES, hid, body)
        else:
            rel = parquet.write_columns(data_dir(), parquet.HISTORIES, hid, up.channels)
    finally:
        discard(body)
    channels = [{"name": name, "unit": up.source_units[name], "stored_unit": "MPa",
                 "min_mpa": up.ranges[name][0], "max_mpa": up.ranges[name][1]}
                for name in up.channels]
    row = {"id": hid, "project": project(), "name": up.name, "created_at": sqlite.now(),
           "sample_count": up.sample_count, "sample_rate_hz": up.sample_rate_hz,
           "duration_s": up.duration_s, "channels": channels, "file": rel}
    sqlite.insert_owning_file(db(), sqlite.insert_history, row, data_dir(), rel)
    return idempotency.remember(idem_key, request_hash, created(resource(row), 201))


@bp.get("/v1/histories")
def list_all():
    limit, offset = page_args()
    rows = sqlite.list_histories(db(), project(), limit, offset)
    return jsonify(items=[resource(r) for r in rows], limit=limit, offset=offset)


@bp.get("/v1/histories/<history_id>")
def get_one(history_id: str):
    return jsonify(resource(load(history_id)))


@bp.delete("/v1/histories/<history_id>")
def delete(history_id: str):
    row = load(history_id)
    con = db()
    with sqlite.write(con):
        sqlite.delete_history(con, project(), history_id)
        keep = sqlite.file_in_use(con, row["file"])
    if not keep:
        # Assessments made from it keep its samples (their cycle tables are
        # recounted from them), so the file goes only with the last user.
        parquet.remove(data_dir(), row["file"])
    return "", 204


def page_args() -> tuple[int, int]:
    from .problems import ApiProblem

    try:
        limit = int(request.args.get("limit", 100))
        offset = int(request.args.get("offset", 0))
    except ValueError:
        raise ApiProblem("limit and offset must be whole numbers", field="limit") from None
    if not (1 <= limit <= 1000) or not (0 <= offset <= 10**12):
        raise ApiProblem("limit must be 1..1000 and offset 0..1e12", field="limit")
    return limit, offset
