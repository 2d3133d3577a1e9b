"""Backups, restores and integrity checks of a data directory.

A backup is taken while the service runs: SQLite's online backup API copies
a consistent snapshot of the database (pages copied under its own read
transaction), then every data file that snapshot names is copied beside it.
Data files never change once written (they are written under a temporary
name and renamed), and a file is removed only after no committed row names
it, so the snapshot's files are whole and present unless they were removed
after the snapshot (listed, never silently dropped). A manifest records each
file's size and SHA-256; :func:`check` verifies a directory against the rows
(and a backup against its manifest).
"""

from __future__ import annotations

import hashlib
import json
import os
import shutil
import sqlite3
from pathlib import Path

from . import sqlite as store

MANIFEST = "backup-manifest.json"


def _sha256(path: Path) -> str:
    h = hashlib.sha256()
    with open(path, "rb") as f:
        for chunk in iter(lambda: f.read(1 << 20), b""):
            h.update(chunk)
    return h.hexdigest()


def _fsync_dir(path: Path) -> None:
    fd = os.open(path, os.O_RDONLY)
    try:
        os.fsync(fd)
    finally:
        os.close(fd)


def backup(data_dir, dest) -> dict:
    """Copy ``data_dir`` (in use or not) into the new folder ``dest``.

    Returns the manifest: ``files`` {relative path: {size, sha256}},
    ``missing`` (files the snapshot names that were removed meanwhile),
    ``schema_version``.
    """
    src, out = Path(data_dir), Path(dest)
    if out.exists() and any(out.iterdir()):
        raise FileExistsError(f"{out} is not empty: back up into a new folder")
    out.mkdir(parents=True, exist_ok=True)
    live = store.connect(src)
    snap = sqlite3.connect(out / store.DB_NAME)
    try:
        live.backup(snap)
    finally:
        snap.close()
        live.close()
    con = sqlite3.connect(out / store.DB_NAME)
    try:
        con.execute("PRAGMA journal_mode=DELETE")  # one self-contained file
        files = sorted(store.referenced_files(con))
        version = con.execute("PRAGMA user_version").fetchone()[0]
    finally:
        con.close()
    manifest = {"schema_version": version, "files": {}, "missing": []}
    for rel in files:
        source = src / rel
        target = out / rel
        target.parent.mkdir(parents=True, exist_ok=True)
        try:
            shutil.copyfile(source, target)
        except FileNotFoundError:
            manifest["missing"].append(rel)
            continue
        with open(target, "rb") as f:
            os.fsync(f.fileno())
        manifest["files"][rel] = {"size": target.stat().st_size, "sha256": _sha256(target)}
    (out / MANIFEST).write_text(json.dumps(manifest, indent=1))
    for folder in {out} | {(out / rel).parent for rel in manifest["files"]}:
        _fsync_dir(folder)
    return manifest


def check(data_dir) -> dict:
    """Integrity of a data directory (or a backup).

    ``integrity`` is SQLite's ``integrity_check`` answer ("ok" when sound);
    ``missing`` the files rows name that are not there; ``mismatched`` the
    files whose size or SHA-256 differ from a backup manifest (when the
    folder has one); ``unreadable`` files that are not Parquet; ``orphans``
    data files no row names. ``ok`` is true when all of them are empty.
    """
    import pyarrow.parquet as pq

    root = Path(data_dir)
    con = sqlite3.connect(f"file:{root / store.DB_NAME}?mode=ro", uri=True)
    try:
        integrity = con.execute("PRAGMA integrity_check").fetchone()[0]
        named = store.referenced_files(con)
    finally:
        con.close()
    manifest = {}
    if (root / MANIFEST).exists():
        manifest = json.loads((root / MANIFEST).read_text()).get("files", {})
    missing, mismatched, unreadable = [], [], []
    for rel in sorted(named):
        path = root / rel
        if not path.is_file():
            missing.append(rel)
            continue
        want = manifest.get(rel)
        if want and (path.stat().st_size != want["size"] or _sha256(path) != want["sha256"]):
            mismatched.append(rel)
            continue
        try:
            pq.read_metadata(path)
        except Exception:  # any damage pyarrow finds in a footer
            unreadable.append(rel)
    present = {str(p.relative_to(root)) for p in root.rglob("*.parquet")
               if not p.name.startswith(".tmp-")}  # a write in progress
    orphans = sorted(present - named)
    report = {"integrity": integrity, "files": len(named), "missing": missing,
              "mismatched": mismatched, "unreadable": unreadable, "orphans": orphans}
    report["ok"] = integrity == "ok" and not (missing or mismatched or unreadable or orphans)
    return report


def restore(backup_dir, data_dir) -> dict:
    """Restore a backup into the new data directory ``data_dir`` (checked
    first: a damaged backup is refused); returns the check of the result."""
    src, out = Path(backup_dir), Path(data_dir)
    found = check(src)
    if not found["ok"]:
        raise ValueError(f"the backup in {src} does not check: {found}")
    if out.exists() and any(out.iterdir()):
        raise FileExistsError(f"{out} is not empty: restore into a new folder")
    out.mkdir(parents=True, exist_ok=True)
    for path in sorted(src.rglob("*")):
        if path.is_file() and path.name != MANIFEST:
            target = out / path.relative_to(src)
            target.parent.mkdir(parents=True, exist_ok=True)
            shutil.copyfile(path, target)
            with open(target, "rb") as f:
                os.fsync(f.fileno())
    for folder in {out} | {p.parent for p in out.rglob("*") if p.is_file()}:
        _fsync_dir(folder)
    return check(out)
