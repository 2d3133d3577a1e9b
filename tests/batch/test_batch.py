"""Scale-out on Dask: datasets, partitions, failures, the CLI and the API's jobs.

A LocalCluster of two worker processes on loopback must give exactly what the
single-process path gives, and both what the engine gives on each point's
whole history (common practice: a distributed run must not change a number).
"""

from __future__ import annotations

import json
import os
import tempfile

import numpy as np
import pyarrow as pa
import pyarrow.parquet as pq
import pytest

from service.batch import tasks
from service.batch.cluster import connect
from service.batch.dataset import DatasetError, open_dataset
from service.batch.run import run_batch, write_results
from service.engine.damage import AssessmentOptions, assess_history
from service.engine.sn_catalogue import catalogue_curve

EN71 = catalogue_curve("EN1993-1-9:71")
SETTINGS = {"curve": "EN1993-1-9:71", "mean_stress_method": "goodman",
            "ultimate_strength": 600.0}
OPTS = AssessmentOptions(mean_stress_method="goodman", ultimate_strength=600.0)


def histories(n_points=12, n=3000, seed=5):
    rng = np.random.default_rng(seed)
    return {f"p{i:02d}": np.cumsum(rng.normal(0, 12, n)) for i in range(n_points)}


def write_wide(folder, full, pieces=3, rate=100.0):
    n = len(next(iter(full.values())))
    cuts = np.linspace(0, n, pieces + 1).astype(int)
    for k in range(pieces):
        sl = slice(cuts[k], cuts[k + 1])
        cols = {p: x[sl] for p, x in full.items()}
        cols["time_s"] = np.arange(cuts[k], cuts[k + 1]) / rate
        pq.write_table(pa.table(cols), os.path.join(folder, f"run_{k:03d}.parquet"))


def write_long(folder, full, pieces=2):
    n = len(next(iter(full.values())))
    cuts = np.linspace(0, n, pieces + 1).astype(int)
    for k in range(pieces):
        names, values = [], []
        for p, x in full.items():
            names += [p] * (cuts[k + 1] - cuts[k])
            values.append(x[cuts[k]:cuts[k + 1]])
        pq.write_table(pa.table({"point": names, "value": np.concatenate(values)}),
                       os.path.join(folder, f"part_{k}.parquet"))


@pytest.fixture(scope="module")
def two_workers():
    # Two worker processes on loopback (TOOLING: start 1-3 s); stopped here.
    from distributed import Client, LocalCluster

    os.environ.setdefault("DASK_TEMPORARY_DIRECTORY", tempfile.mkdtemp(prefix="cl-dask-"))
    cluster = LocalCluster(n_workers=2, threads_per_worker=1, processes=True,
                           host="127.0.0.1", dashboard_address="127.0.0.1:0")
    client = Client(cluster)
    yield client
    client.close()
    cluster.close()


def test_two_worker_processes_give_the_single_process_results(tmp_path, two_workers):
    full = histories()
    write_wide(tmp_path, full)
    ds = open_dataset(tmp_path)
    assert ds.layout == "wide" and ds.points == tuple(full) and ds.sample_rate_hz == 100.0
    seen = []
    dist = run_batch(ds, SETTINGS, two_workers, partition_points=5,
                     progress=lambda d, t: seen.append((d, t)))
    with connect(threads=2) as local:
        single = run_batch(ds, SETTINGS, local, partition_points=5)
    assert dist.rows == single.rows  # bitwise: the same function on the same bytes
    assert len(dist.peak_memory) == 2  # both worker processes took partitions
    assert seen[-1] == (12, 12) and len(seen) == 3
    for r in dist.rows:
        # Counting across the file joins is exact: the engine on the whole
        # history (sums in another order: 1e-12).
        ref = assess_history(full[r["point"]], EN71, OPTS, duration_s=30.0)
        assert r["status"] == "ok" and r["samples"] == 3000
        assert r["damage"] == pytest.approx(ref.damage, rel=1e-12)
        assert r["life_hours"] == pytest.approx(ref.life_hours, rel=1e-12)
        assert r["reserve_factor"] == pytest.approx(ref.reserve_factor, rel=1e-9)


def test_long_layout_gives_the_same_numbers(tmp_path):
    full = histories(5, 2000)
    write_long(tmp_path, full)
    ds = open_dataset(tmp_path, sample_rate_hz=50.0)
    assert ds.layout == "long" and set(ds.points) == set(full)
    with connect(threads=2) as c:
        res = run_batch(ds, SETTINGS, c, partition_points=2)
    for r in res.rows:
        ref = assess_history(full[r["point"]], EN71, OPTS)
        assert r["damage"] == pytest.approx(ref.damage, rel=1e-12)


def test_a_failed_partition_is_reported_and_the_rest_kept(tmp_path, monkeypatch):
    full = histories(9, 1000)
    full["p04"][500] = np.nan  # a bad sample: this point fails, its partition goes on
    write_wide(tmp_path, full, pieces=2)
    ds = open_dataset(tmp_path)
    real = tasks.read_group

    def flaky(file, layout, points):  # one partition's reads fail (a broken disk, say)
        if "p06" in points:
            raise OSError("read error on the test's purpose")
        return real(file, layout, points)

    monkeypatch.setattr(tasks, "read_group", flaky)
    with connect(threads=2) as c:  # in-process workers: the patch applies
        res = run_batch(ds, SETTINGS, c, partition_points=3)
    status = {r["point"]: r for r in res.rows}
    assert res.failures == [{"points": ["p06", "p07", "p08"],
                             "reason": "OSError: read error on the test's purpose"}]
    assert all(status[p]["status"] == "failed" for p in ("p06", "p07", "p08"))
    assert status["p04"]["status"] == "failed"
    assert "run_001.parquet row 0: sample 500 is nan" in status["p04"]["error"]
    ok = [p for p in full if p not in ("p04", "p06", "p07", "p08")]
    assert all(status[p]["status"] == "ok" for p in ok)
    summary = write_results(res, ds, SETTINGS, tmp_path / "out")
    assert summary["points_ok"] == 5 and summary["points_failed"] == 4
    table = pq.read_table(tmp_path / "out" / "points.parquet")
    assert table.num_rows == 9 and table.column("status").to_pylist().count("failed") == 4
    assert json.loads((tmp_path / "out" / "summary.json").read_text())["failed_partitions"]


def test_datasets_that_cannot_be_read(tmp_path):
    with pytest.raises(DatasetError):
        open_dataset(tmp_path / "nothing")
    with pytest.raises(DatasetError):
        open_dataset(tmp_path)  # an empty folder
    pq.write_table(pa.table({"g": ["a", "b"]}), tmp_path / "t.parquet")
    with pytest.raises(DatasetError, match="not numbers"):
        open_dataset(tmp_path)
    (tmp_path / "t.parquet").write_bytes(b"not parquet")
    with pytest.raises(DatasetError, match="not a readable"):
        open_dataset(tmp_path)


def test_cli_batch_writes_results_and_names_failures(tmp_path, capsys):
    from service.cli import main

    full = histories(6, 1500)
    data = tmp_path / "data"
    data.mkdir()
    write_wide(data, full, pieces=2)
    out = tmp_path / "out"
    code = main(["batch", str(data), "--out", str(out), "--curve", "EN1993-1-9:71",
                 "--partition-points", "4", "--threads", "2", "--json"])
    assert code == 0
    summary = json.loads(capsys.readouterr().out)
    assert summary["points_ok"] == 6 and summary["dataset"]["files"] == 2
    rows = pq.read_table(out / "points.parquet").to_pylist()
    ref = assess_history(full["p03"], EN71, duration_s=15.0)
    got = next(r for r in rows if r["point"] == "p03")
    assert got["damage"] == pytest.approx(ref.damage, rel=1e-12)
    assert main(["batch", str(tmp_path / "missing"), "--out", str(out)]) == 2


def test_cli_batch_gate_fraction_gates_each_point_on_its_own_range(tmp_path, capsys):
    # The gate of a point is the fraction of its range over the whole dataset
    # (max - min across every file), as the API's gate_fraction does for one
    # history; the result equals the engine on the whole history with that
    # absolute gate (common practice: a gate in per cent of the range).
    from service.cli import main

    full = histories(4, 1500)
    full["p02"] *= 3.0  # ranges differ: one gate for all would not do
    data = tmp_path / "data"
    data.mkdir()
    write_wide(data, full, pieces=3)
    out = tmp_path / "out"
    assert main(["batch", str(data), "--out", str(out), "--curve", "EN1993-1-9:71",
                 "--gate-fraction", "0.05", "--threads", "2", "--json"]) == 0
    capsys.readouterr()
    rows = {r["point"]: r for r in pq.read_table(out / "points.parquet").to_pylist()}
    for p, x in full.items():
        g = 0.05 * (x.max() - x.min())
        ref = assess_history(x, EN71, gate=g, duration_s=15.0)
        assert rows[p]["gate_mpa"] == pytest.approx(g, rel=1e-12)
        assert rows[p]["cycles_counted"] == ref.cycles_counted
        assert rows[p]["damage"] == pytest.approx(ref.damage, rel=1e-12)
    ungated = assess_history(full["p02"], EN71, duration_s=15.0)
    assert rows["p02"]["cycles_counted"] < ungated.cycles_counted  # the gate did act
    # Both at once is a usage error (argparse), a fraction of 1 or more is refused.
    with pytest.raises(SystemExit):
        main(["batch", str(data), "--out", str(out), "--gate", "1", "--gate-fraction", "0.1"])
    with connect(threads=1) as c, pytest.raises(Exception, match="gate_fraction"):
        run_batch(open_dataset(data), SETTINGS, c, gate_fraction=1.5)


def test_cli_batch_assesses_hot_spot_points_from_their_gauges(tmp_path, capsys):
    # Gauges at the quadratic rule's reference points (IIW recommendations
    # 2016 sec. 2.2.3: 0.4t, 0.9t, 1.4t) on a quadratic field scaled by the
    # toe's history h: the extrapolation is exact, so the batch's hot-spot
    # point equals the engine on h with FAT 90; across file joins too.
    from service.cli import main

    rng = np.random.default_rng(31)
    h = np.cumsum(rng.normal(0, 9.0, 3000))
    t = 16.0
    field = [1.0 - 0.02 * x + 0.0003 * x * x for x in (0.4 * t, 0.9 * t, 1.4 * t)]
    full = {f"hs{i + 1}": h * f for i, f in enumerate(field)}
    full["other"] = np.cumsum(rng.normal(0, 5.0, 3000))
    data = tmp_path / "data"
    data.mkdir()
    write_wide(data, full, pieces=3)
    points = tmp_path / "points.json"
    points.write_text(json.dumps({"toe": {"curve": "IIW:FAT90", "hot_spot": {
        "gauges": ["hs1", "hs2", "hs3"], "extrapolation": "quadratic", "thickness_mm": t}}}))
    out = tmp_path / "out"
    assert main(["batch", str(data), "--out", str(out), "--curve", "EN1993-1-9:71",
                 "--points", str(points), "--threads", "2", "--json"]) == 0
    capsys.readouterr()
    rows = {r["point"]: r for r in pq.read_table(out / "points.parquet").to_pylist()}
    assert set(rows) == {"other", "toe"}          # gauges are not points of their own
    ref = assess_history(h, catalogue_curve("IIW:FAT90"), duration_s=30.0)
    assert rows["toe"]["damage"] == pytest.approx(ref.damage, rel=1e-9)
    assert rows["toe"]["cycles_counted"] == ref.cycles_counted
    # A gauge missing from the dataset is refused before any task runs.
    points.write_text(json.dumps({"toe": {"hot_spot": {
        "gauges": ["hs1", "hs9", "hs3"], "extrapolation": "quadratic", "thickness_mm": t}}}))
    assert main(["batch", str(data), "--out", str(out), "--curve", "IIW:FAT90",
                 "--points", str(points), "--threads", "1"]) == 2
    assert "hs9" in capsys.readouterr().err


def test_batch_strain_life_points_equal_the_whole_history(tmp_path):
    # Issue 20: a strain-life point read file by file (memory and residue
    # states carried across the file joins) gives the whole history's
    # damage; stress-life points beside it are untouched.
    from service.engine import strain_life as sl

    full = histories(3, 2400, seed=13)
    write_wide(tmp_path, full, pieces=3)
    material = {"youngs_modulus": 206000.0, "cyclic_strength_coefficient": 1150.0,
                "cyclic_hardening_exponent": 0.16, "fatigue_strength_coefficient": 1050.0,
                "fatigue_strength_exponent": -0.085, "fatigue_ductility_coefficient": 0.45,
                "fatigue_ductility_exponent": -0.6}
    overrides = {"p01": {"method": "strain_life", "strain_life": {
        "material": material, "kt": 3.0, "mean_stress_method": "smith_watson_topper"}}}
    with connect(threads=2) as c:
        res = run_batch(open_dataset(tmp_path), SETTINGS, c, partition_points=2,
                        overrides=overrides)
    rows = {r["point"]: r for r in res.rows}
    ref = sl.assess_strain_life(full["p01"], sl.StrainLifeMaterial(**material), kt=3.0,
                                mean_stress_method="smith_watson_topper", reserve_factor=False)
    assert rows["p01"]["status"] == "ok", rows["p01"]
    assert rows["p01"]["damage"] == pytest.approx(ref.damage, rel=1e-12)
    assert rows["p01"]["cycles_counted"] == ref.cycles_counted
    other = assess_history(full["p00"], EN71, OPTS)
    assert rows["p00"]["damage"] == pytest.approx(other.damage, rel=1e-12)


def test_api_jobs_run_on_the_cluster(tmp_path, two_workers):
    # The API's async jobs use the configured scheduler: same results as
    # the in-process job, and progress from the cluster's tasks.
    from tests.api.conftest import make_app

    x = histories(4, 20_000, seed=9)
    body = {"samples": {k: v.tolist() for k, v in x.items()}, "unit": "MPa",
            "sample_rate_hz": 200.0, "settings": {"curve": "EN1993-1-9:71"}}
    results = []
    for name, sched in (("dask", two_workers.scheduler.address), ("local", None)):
        app = make_app(tmp_path / name, DASK_SCHEDULER=sched, WARM_KERNELS=False)
        try:
            c = app.test_client()
            r = c.post("/v1/assessments", json=body, headers={"Prefer": "respond-async"})
            assert r.status_code == 202
            job = r.get_json()
            import time
            for _ in range(600):
                job = c.get(job["links"]["self"]).get_json()
                if job["state"] in ("done", "failed"):
                    break
                time.sleep(0.05)
            assert job["state"] == "done", job
            assert job["progress"]["points_done"] == 4
            a = c.get(job["links"]["result"]).get_json()
            results.append(a["points"])
        finally:
            app.extensions["cycleledger.jobs"].shutdown()
    assert results[0] == results[1]


def test_fe_superposition_on_the_cluster_equals_one_process(two_workers, tmp_path):
    # Node chunks as tasks on two worker processes: node for node the numbers
    # of one process, and the same worst nodes in the same order.
    from service.batch.run import superpose_on_cluster
    from service.engine.multiaxial import assess_superposition

    rng = np.random.default_rng(12)
    unit = rng.normal(0, 30, size=(230, 3, 6))
    t = np.arange(1500)
    loads = np.stack([np.sin(t / 5.0), np.cos(t / 13.0), rng.normal(0, 0.4, t.size)])
    ids = [f"n{i}" for i in range(230)]
    seen = []
    dist = superpose_on_cluster(two_workers, unit, loads, EN71, OPTS, node_ids=ids,
                                reduction="signed_von_mises", top=7, chunk_nodes=50,
                                progress=lambda d, n: seen.append(d))
    one = assess_superposition(unit, loads, EN71, OPTS, node_ids=np.array(ids, dtype=object),
                               top=7)
    assert np.array_equal(dist.damage, one.damage)
    assert [n for n, _ in dist.top] == [n for n, _ in one.top]
    assert [r.damage for _, r in dist.top] == [r.damage for _, r in one.top]
    assert sorted(seen)[-1] == 230 and len(seen) == 5


def test_api_superposition_job_runs_on_the_cluster(tmp_path, two_workers):
    from tests.api.conftest import make_app
    from tests.api.test_superpositions import PARQUET, loads, run_superposition, unit_table

    raw, _, _ = unit_table(nodes=120)
    L = loads(800)
    out = []
    for name, sched in (("dask", two_workers.scheduler.address), ("local", None)):
        app = make_app(tmp_path / name, DASK_SCHEDULER=sched, WARM_KERNELS=False)
        try:
            c = app.test_client()
            u = c.post("/v1/unit-stresses", data=raw, content_type=PARQUET).get_json()
            res = run_superposition(c, {"unit_stresses_id": u["id"],
                                        "loads": {"lift": L[0].tolist(), "slew": L[1].tolist()},
                                        "settings": {"curve": "EN1993-1-9:71"}, "top": 4})
            nodes = c.get(res["links"]["nodes"] + "?limit=1000").get_json()["items"]
            out.append((res["top"], nodes))
        finally:
            app.extensions["cycleledger.jobs"].shutdown()
    assert out[0] == out[1]
