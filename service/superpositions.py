"""Finite-element superposition runs: unit-load stresses x measured loads.

Between the HTTP layer and the engine, like ``runs.py``: checks a set of
unit-load stresses (per node and load case, from a linear FE model) and a
superposition request, runs it (in this process, or as Dask tasks over node
chunks when a scheduler is configured), and stores the damage of every node
(Parquet) with the worst nodes assessed in full (JSON).
"""

from __future__ import annotations

import math

import numpy as np
import pyarrow as pa

from service.engine import multiaxial
from service.engine import cautions as _cautions
from service.engine.errors import InvalidLoadHistory, InvalidParameter, unknown
from service.engine.settings import point_from_dict
from service.runs import json_safe
from service.store import parquet, sqlite

PLANE = ("sxx", "syy", "sxy")
SOLID = ("sxx", "syy", "szz", "sxy", "syz", "szx")
REQUEST_KEYS = {"unit_stresses_id", "loads", "sample_rate_hz", "settings", "reduction", "top",
                "gate", "plane_step_deg", "shear_settings"}
MAX_TOP = 1000


def unit_stress_table(table: pa.Table) -> tuple[pa.Table, dict]:
    """Check a long table of unit stresses; returns it in a fixed column order
    and its shape ``{"nodes", "load_cases", "components"}``.

    Columns: ``node`` (integer or text), ``load_case`` (text) and the
    components, ``sxx, syy, sxy`` (plane stress) or all six; every node has
    exactly one row per load case. [MPa per unit of the load]
    """
    names = set(table.column_names)
    if not {"node", "load_case"} <= names:
        raise InvalidParameter("unit stresses need columns node and load_case",
                               field="node")
    comps = SOLID if set(SOLID) <= names else PLANE if set(PLANE) <= names else None
    if comps is None:
        raise InvalidParameter("unit stresses need components sxx, syy, sxy (plane stress) or "
                               "sxx, syy, szz, sxy, syz, szx", field="components")
    t = table.select(["node", "load_case", *comps])
    if t.num_rows == 0:
        raise InvalidParameter("no rows of unit stresses", field="node")
    node_type = t.schema.field("node").type
    if not (pa.types.is_integer(node_type) or pa.types.is_string(node_type)
            or pa.types.is_large_string(node_type)):
        raise InvalidParameter(f"node must be integers or text, not {node_type}", field="node")
    for c in comps:
        if not (pa.types.is_floating(t.schema.field(c).type)
                or pa.types.is_integer(t.schema.field(c).type)):
            raise InvalidParameter(f"{c} must be numbers", field=c)
        vals = t.column(c).to_numpy(zero_copy_only=False).astype(np.float64)
        bad = np.flatnonzero(~np.isfinite(vals))
        if bad.size:
            raise InvalidParameter(f"{c} of row {int(bad[0])} is not a finite number", field=c,
                                   value=int(bad[0]))
    if t.column("node").null_count or t.column("load_case").null_count:
        raise InvalidParameter("node and load_case may not be empty", field="node")
    cases = [str(v) for v in dict.fromkeys(t.column("load_case").to_pylist())]
    nodes = list(dict.fromkeys(t.column("node").to_pylist()))
    if t.num_rows != len(nodes) * len(cases):
        raise InvalidParameter(f"{t.num_rows} rows for {len(nodes)} nodes x {len(cases)} load "
                               f"cases: every node needs exactly one row per load case",
                               field="load_case")
    pairs = set(zip(t.column("node").to_pylist(), t.column("load_case").to_pylist()))
    if len(pairs) != t.num_rows:
        raise InvalidParameter("a node has two rows for one load case", field="load_case")
    return t, {"nodes": len(nodes), "load_cases": cases, "components": len(comps)}


def unit_stress_array(table: pa.Table) -> tuple[np.ndarray, list, list]:
    """``(unit (nodes, cases, components), node ids, load cases)`` from a
    checked table, nodes and cases in order of first appearance."""
    comps = [c for c in SOLID if c in table.column_names] if "szz" in table.column_names \
        else list(PLANE)
    node_ids = list(dict.fromkeys(table.column("node").to_pylist()))
    cases = list(dict.fromkeys(str(v) for v in table.column("load_case").to_pylist()))
    ni = {n: i for i, n in enumerate(node_ids)}
    ci = {c: i for i, c in enumerate(cases)}
    rows = np.array([ni[n] for n in table.column("node").to_pylist()])
    cols = np.array([ci[str(c)] for c in table.column("load_case").to_pylist()])
    unit = np.empty((len(node_ids), len(cases), len(comps)))
    for k, c in enumerate(comps):
        unit[rows, cols, k] = table.column(c).to_numpy(zero_copy_only=False).astype(np.float64)
    return unit, node_ids, cases


def check_request(body: dict, unit_set: dict) -> dict:
    """A superposition request checked in full (before any work is queued)."""
    extra = set(body) - REQUEST_KEYS
    if extra:
        raise InvalidParameter(f"unknown field(s): {', '.join(sorted(extra))}",
                               field=sorted(extra)[0])
    loads = body.get("loads")
    if not isinstance(loads, dict) or set(loads) != set(unit_set["load_cases"]):
        raise InvalidParameter("loads must give a history for every load case: "
                               f"{', '.join(unit_set['load_cases'])}", field="loads")
    arrays = []
    for case in unit_set["load_cases"]:
        v = loads[case]
        if not isinstance(v, list) or len(v) < 2 or not all(
                isinstance(x, (int, float)) and not isinstance(x, bool) for x in v):
            raise InvalidLoadHistory(f"load {case!r} must be a list of at least two numbers",
                                     field="loads", channel=case)
        a = np.asarray(v, dtype=np.float64)
        bad = np.flatnonzero(~np.isfinite(a))
        if bad.size:
            raise InvalidLoadHistory(f"load {case!r} sample {int(bad[0])} is not finite",
                                     field="loads", channel=case, sample_index=int(bad[0]))
        arrays.append(a)
    if len({a.shape[0] for a in arrays}) != 1:
        raise InvalidLoadHistory("load histories differ in length", field="loads")
    rate = body.get("sample_rate_hz")
    if rate is not None and (isinstance(rate, bool) or not isinstance(rate, (int, float))
                             or not math.isfinite(rate) or rate <= 0):
        raise InvalidParameter("sample_rate_hz must be a positive number", field="sample_rate_hz")
    settings = body.get("settings") or {}
    if not isinstance(settings, dict):
        raise InvalidParameter("settings must be an object", field="settings")
    point_from_dict(settings)
    reduction = body.get("reduction", "signed_von_mises")
    if reduction not in multiaxial.REDUCTION_NAMES:
        raise unknown("reduction", reduction, multiaxial.REDUCTION_NAMES)
    step = body.get("plane_step_deg", 15.0)
    multiaxial.plane_normals(np.zeros((1, 3)), step)  # checks the step
    shear_settings = body.get("shear_settings")
    if shear_settings is not None:
        if not isinstance(shear_settings, dict):
            raise InvalidParameter("shear_settings must be an object", field="shear_settings")
        point_from_dict(shear_settings)
    if reduction == "critical_plane_shear" and shear_settings is None:
        raise InvalidParameter("critical_plane_shear needs shear_settings (a shear S-N curve)",
                               field="shear_settings")
    top = body.get("top", 10)
    if isinstance(top, bool) or not isinstance(top, int) or not 0 <= top <= MAX_TOP:
        raise InvalidParameter(f"top must be a whole number 0..{MAX_TOP}", field="top")
    gate = body.get("gate", 0.0)
    if isinstance(gate, bool) or not isinstance(gate, (int, float)) or not (
            math.isfinite(gate) and gate >= 0):
        raise InvalidParameter("gate must be a number >= 0 (MPa)", field="gate")
    return {"loads": np.stack(arrays), "sample_rate_hz": rate, "settings": settings,
            "reduction": reduction, "top": top, "gate": float(gate),
            "plane_step_deg": float(step), "shear_settings": shear_settings}


def run(con, data_dir, project: str, unit_set: dict, checked: dict, progress=None,
        client=None) -> dict:
    """Superpose, assess every node, store; returns the stored row."""
    from service.engine.multiaxial import assess_superposition

    table = parquet.read_table(data_dir, unit_set["file"])
    unit, node_ids, _ = unit_stress_array(table)
    curve, opts, _ = point_from_dict(checked["settings"])
    loads = checked["loads"]
    rate = checked["sample_rate_hz"]
    duration = loads.shape[1] / rate if rate else None
    kwargs = dict(reduction=checked["reduction"], top=checked["top"], gate=checked["gate"],
                  duration_s=duration, plane_step_deg=checked.get("plane_step_deg", 15.0))
    if checked.get("shear_settings") is not None and checked["reduction"] in (
            "critical_plane", "critical_plane_shear"):
        shear_curve, shear_opts, _ = point_from_dict(checked["shear_settings"])
        kwargs.update(shear_curve=shear_curve, shear_options=shear_opts)
    if client is not None:
        from service.batch.run import superpose_on_cluster

        nd = superpose_on_cluster(client, unit, loads, curve, opts, node_ids=node_ids,
                                  progress=progress, **kwargs)
    else:
        nd = assess_superposition(unit, loads, curve, opts, node_ids=np.array(node_ids,
                                                                              dtype=object),
                                  progress=progress, **kwargs)
    sid = sqlite.new_id("s")
    node_col = pa.array(node_ids)
    rel = parquet.write_table(data_dir, parquet.SUPERPOSITIONS, sid, pa.table({
        "node": node_col, "damage": nd.damage, "max_abs_equivalent": nd.max_abs_equivalent}))
    finite = nd.damage[np.isfinite(nd.damage)]
    allowable = opts.allowable_damage
    result = {
        "nodes": len(node_ids), "load_cases": unit_set["load_cases"],
        "samples": int(loads.shape[1]), "duration_s": duration,
        "reduction": checked["reduction"],
        "damage_max": float(nd.damage.max()) if nd.damage.size else 0.0,
        "nodes_over_allowable": int((nd.damage >= allowable).sum()),
        "damage_median": float(np.median(finite)) if finite.size else None,
        "top": [{"node": _plain(n), **json_safe(r.summary()), "top_cycles": r.top_cycles,
                 "runout": math.isinf(r.life_repeats), **_node_extras(nd, n)}
                for n, r in nd.top],
        "units": {"stress": "MPa", "damage": "-", "life_hours": "h"},
        "cautions": superposition_cautions(nd),
    }
    row = {"id": sid, "project": project, "unit_stress_id": unit_set["id"],
           "created_at": sqlite.now(),
           "request": {k: v for k, v in checked.items() if k != "loads"} | {
               "unit_stresses_id": unit_set["id"]},
           "result": json_safe(result), "nodes_file": rel}
    sqlite.insert_owning_file(con, sqlite.insert_superposition, row, data_dir, row["nodes_file"])
    return row


def _plain(v):
    return v.item() if hasattr(v, "item") else v


def superposition_cautions(nd) -> list[dict]:
    """The cautions of a superposition: the general ones, linearity, and one
    for the top nodes whose signed equivalent's sign is ambiguous for a
    noticeable share of their damage (naming them, with the largest share)."""
    out = _cautions.general() + [{**_cautions.caution("superposition_linear").as_dict(),
                                  "points": []}]
    shares = {str(n): v for n, v in (nd.sign_ambiguous_share or {}).items() if v > 0.05}
    if shares:
        c = _cautions.caution("sign_ambiguous", share=max(shares.values()),
                              reduction=nd.reduction)
        out.append({**c.as_dict(), "points": sorted(shares)})
    return out


def _node_extras(nd, node) -> dict:
    """What a top node's entry adds for its reduction: the governing plane of
    a scan, or the share of damage whose sign is ambiguous."""
    if nd.planes is not None:
        k = list(nd.node_ids).index(node)
        return {"plane": nd.planes[int(nd.plane_index[k])]}
    share = (nd.sign_ambiguous_share or {}).get(node)
    return {"sign_ambiguous_share": None if share is None else float(share)}
