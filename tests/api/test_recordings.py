"""Recordings as rigs write them (issue 16): each reader against files made
by the library that owns the format (pyarrow, asammdf, h5py) or by hand in
an acquisition system's CSV dialect; the stored samples and the damage must
equal the same data sent as Parquet, bit for bit."""

from __future__ import annotations

import gzip
import io
from pathlib import Path

import numpy as np
import pyarrow as pa
import pyarrow.parquet as pq
import pytest

from service.engine.sn_catalogue import catalogue_curve
from tests.api.conftest import assert_problem

PARQUET = "application/vnd.apache.parquet"
E = 206000.0


def signals(n=400, seed=3):
    rng = np.random.default_rng(seed)
    t = np.arange(n) / 500.0
    g1 = np.round(np.cumsum(rng.normal(0, 40, n)), 3)      # microstrain
    g2 = np.round(60 * np.sin(t * 40) + rng.normal(0, 5, n), 3)
    return t, g1, g2


def parquet_bytes(columns: dict) -> bytes:
    sink = io.BytesIO()
    pq.write_table(pa.table(columns), sink)
    return sink.getvalue()


def stored(client, hid):
    """The history's channels as stored (MPa), through the assessment of each."""
    r = client.post("/v1/assessments", json={"history_id": hid,
                                             "settings": {"curve": "EN1993-1-9:71"}})
    assert r.status_code == 201, r.get_json()
    return {k: v["damage"] for k, v in r.get_json()["points"].items()}


def reference(client, t, g1, g2):
    """The same data as Parquet with units stated in the request."""
    r = client.post(f"/v1/histories?units=g1:microstrain,g2:MPa&youngs_modulus={E}",
                    data=parquet_bytes({"time_s": t, "g1": g1, "g2": g2}), content_type=PARQUET)
    assert r.status_code == 201, r.get_json()
    return r.get_json()


def same_as_reference(client, r, t, g1, g2):
    assert r.status_code == 201, r.get_json()
    got = r.get_json()
    ref = reference(client, t, g1, g2)
    assert got["sample_count"] == ref["sample_count"]
    assert got["sample_rate_hz"] == pytest.approx(ref["sample_rate_hz"], rel=1e-12)
    assert [(c["name"], c["min_mpa"], c["max_mpa"]) for c in got["channels"]] == [
        (c["name"], c["min_mpa"], c["max_mpa"]) for c in ref["channels"]]
    assert stored(client, got["id"]) == stored(client, ref["id"])   # bit for bit
    return got


def _fmt(x: float, decimal: str) -> str:
    s = repr(float(x))
    return s.replace(".", ",") if decimal == "," else s


def test_european_csv_with_preamble_units_row_and_decimal_comma(client):
    # A semicolon-delimited export with decimal commas, a preamble, a units
    # row under the header (µm/m, N/mm², time in ms): common in German DAQ
    # software (common practice).
    t, g1, g2 = signals()
    lines = ["Prüfstand 3;Lauf 42", "Datum;2026-12-01", "",
             "Zeit;g1;g2", "ms;µm/m;N/mm²"]
    lines += [f"{_fmt(a * 1000, ',')};{_fmt(b, ',')};{_fmt(c, ',')}"
              for a, b, c in zip(t, g1, g2)]
    body = ("\r\n".join(lines) + "\r\n").encode("utf-8")
    r = client.post(f"/v1/histories?youngs_modulus={E}&time_column=Zeit", data=body,
                    content_type="text/csv")
    got = same_as_reference(client, r, t, g1, g2)
    assert {c["name"]: c["unit"] for c in got["channels"]} == {"g1": "microstrain",
                                                               "g2": "N/mm2"}


def test_tab_csv_with_units_in_names_and_comment_lines_gzipped(client):
    # Tab-delimited with units in brackets in the names and '#' comments,
    # gzip-compressed (file magic 1f 8b, RFC 1952).
    t, g1, g2 = signals(seed=8)
    lines = ["# rig 7, run 3", "# gain 1000", "time [s]\tg1 [um/m]\tg2 (MPa)"]
    lines += [f"{float(a)!r}\t{float(b)!r}\t{float(c)!r}" for a, b, c in zip(t, g1, g2)]
    body = gzip.compress(("\n".join(lines) + "\n").encode())
    r = client.post(f"/v1/histories?youngs_modulus={E}", data=body,
                    content_type="application/gzip")
    same_as_reference(client, r, t, g1, g2)


def test_file_unit_that_contradicts_the_request_is_refused(client):
    body = b"time_s,g1 [MPa]\n0,1\n0.1,2\n0.2,3\n"
    r = client.post("/v1/histories?unit=microstrain&youngs_modulus=206000", data=body,
                    content_type="text/csv")
    assert_problem(r, 422, "invalid-parameter", field="unit", channel="g1")
    r = client.post("/v1/histories?units=g1:microstrain&youngs_modulus=206000", data=body,
                    content_type="text/csv")
    assert r.status_code == 201, r.get_json()            # units= overrides the file


def test_mdf4_file_written_by_asammdf(client, tmp_path):
    # ASAM MDF 4: one channel group is one time base; names and units from
    # the file's metadata.
    from asammdf import MDF, Signal

    t, g1, g2 = signals(seed=5)
    mdf = MDF(version="4.10")
    mdf.append([Signal(g1, t, name="g1", unit="µm/m"), Signal(g2, t, name="g2", unit="MPa")])
    path = tmp_path / "run.mf4"
    mdf.save(path, overwrite=True)
    mdf.close()
    r = client.post(f"/v1/histories?youngs_modulus={E}", data=path.read_bytes(),
                    content_type="application/octet-stream")
    same_as_reference(client, r, t, g1, g2)
    # Two groups at their own rates: choose one (nothing is resampled).
    mdf = MDF(version="4.10")
    mdf.append([Signal(g1, t, name="g1", unit="µm/m"), Signal(g2, t, name="g2", unit="MPa")])
    mdf.append([Signal(np.arange(50.0), np.arange(50) / 100.0, name="press", unit="MPa")])
    path2 = tmp_path / "two.mf4"
    mdf.save(path2, overwrite=True)
    mdf.close()
    r = client.post(f"/v1/histories?youngs_modulus={E}", data=path2.read_bytes(),
                    content_type="application/octet-stream")
    body = assert_problem(r, 422, "invalid-upload", field="group")
    assert body["groups"] == {"0": ["g1", "g2"], "1": ["press"]}
    r = client.post("/v1/histories?channels=press", data=path2.read_bytes(),
                    content_type="application/x-mdf")
    assert r.status_code == 201, r.get_json()
    h = r.get_json()
    assert h["sample_count"] == 50 and h["sample_rate_hz"] == pytest.approx(100.0)
    r = client.post(f"/v1/histories?channels=g1,press&youngs_modulus={E}",
                    data=path2.read_bytes(), content_type="application/x-mdf")
    assert_problem(r, 422, "invalid-upload", field="channels")


def test_hdf5_file_written_by_h5py(client, tmp_path):
    # HDF5: datasets by path; the rate and units from attributes.
    import h5py

    t, g1, g2 = signals(seed=11)
    path = tmp_path / "run.h5"
    with h5py.File(path, "w") as f:
        grp = f.create_group("rig/run42")
        grp.attrs["sample_rate_hz"] = 500.0
        grp.create_dataset("g1", data=g1).attrs["unit"] = "µm/m"
        grp.create_dataset("g2", data=g2).attrs["unit"] = b"MPa"
        f.create_dataset("other/temperature", data=np.ones(7))
    r = client.post(f"/v1/histories?youngs_modulus={E}&group=/rig/run42", data=path.read_bytes(),
                    content_type="application/x-hdf5")
    same_as_reference(client, r, t, g1, g2)
    r = client.post(f"/v1/histories?youngs_modulus={E}&channels=/rig/run42/g2",
                    data=path.read_bytes(), content_type="application/x-hdf5")
    assert r.status_code == 201 and [c["name"] for c in r.get_json()["channels"]] == ["g2"]
    r = client.post("/v1/histories?channels=/rig/nothing", data=path.read_bytes(),
                    content_type="application/x-hdf5")
    assert_problem(r, 422, "invalid-upload", field="channels")


def test_gauge_factor_correction(client):
    # K. Hoffmann, An Introduction to Measurements using Strain Gages (HBM,
    # 1989): the amplifier set to k = 2.00 reads a gauge of k = 2.10 low by
    # 2.00 / 2.10; eps_true = eps_read * k_set / k_gauge.
    body = b"g1\n0\n1000\n-500\n"
    r = client.post(f"/v1/histories?unit=microstrain&youngs_modulus={E}"
                    "&gauge_factor_set=2.00&gauge_factor=2.10", data=body, content_type="text/csv")
    assert r.status_code == 201, r.get_json()
    ch = r.get_json()["channels"][0]
    assert ch["max_mpa"] == pytest.approx(1000e-6 * E * 2.00 / 2.10, rel=1e-12)
    r = client.post("/v1/histories?unit=MPa&gauge_factor_set=2&gauge_factor=2.1", data=body,
                    content_type="text/csv")
    assert_problem(r, 422, "invalid-parameter", field="gauge_factor")


@pytest.mark.parametrize("body, slug, members", [
    (b"a;b\n1,5;2\n3,x;4\n5;6\n", "invalid-load-history", {"channel": "a", "sample_index": 1}),
    (b"\x1f\x8bnot gzip at all", "malformed-body", {}),
    (b"MDF     not an mdf file", "malformed-body", {}),
])
def test_unreadable_files_name_what_is_wrong_and_store_nothing(client, app, body, slug,
                                                               members):
    folder = Path(app.config["DATA_DIR"]) / "histories"
    before = sorted(p.name for p in folder.iterdir()) if folder.exists() else []
    r = client.post("/v1/histories?unit=MPa", data=body, content_type="text/csv")
    assert_problem(r, 400 if slug == "malformed-body" else 422, slug, **members)
    after = sorted(p.name for p in folder.iterdir()) if folder.exists() else []
    assert after == before


@pytest.mark.parametrize("key", [None, "retry-7"])
def test_a_body_shorter_than_its_declared_length_is_malformed_and_stores_nothing(
        tmp_path, key):
    # With or without an idempotency key (whose hash is taken as the body
    # arrives), a body that ends before its declared length is a 400 that
    # says so, and nothing is kept. (The app without the contract check of
    # the fixture, which reads the short body again.)
    from service.api import create_app

    app = create_app({"DATA_DIR": str(tmp_path / "data"), "TESTING": True})
    client = app.test_client()
    t, g1, g2 = signals(n=3000)
    body = ("time_s,g1,g2\n" + "".join(f"{a},{b},{c}\n" for a, b, c in zip(t, g1, g2))
            ).encode()
    folder = Path(app.config["DATA_DIR"]) / "histories"
    before = sorted(p.name for p in folder.iterdir()) if folder.exists() else []
    headers = {"Idempotency-Key": key} if key else {}
    r = client.post("/v1/histories?unit=MPa", data=body, content_type="text/csv",
                    headers=headers,
                    environ_overrides={"CONTENT_LENGTH": str(len(body) + 5000)})
    assert_problem(r, 400, "malformed-body")
    assert f"ended after {len(body)} of {len(body) + 5000} bytes" in r.get_json()["detail"]
    after = sorted(p.name for p in folder.iterdir()) if folder.exists() else []
    assert after == before
    # The whole body, declared rightly, is stored.
    r = client.post("/v1/histories?unit=MPa", data=body, content_type="text/csv",
                    headers=headers)
    assert r.status_code == 201 and r.get_json()["sample_count"] == 3000
    app.extensions["cycleledger.jobs"].shutdown(wait=True)


def _spiky(n=4000, seed=2):
    rng = np.random.default_rng(seed)
    x = 80 * np.sin(np.arange(n) / 40.0) + rng.normal(0, 0.5, n)
    x[1500] += 700.0                                   # electrical interference
    return x


def test_screening_report_refuse_and_clean(client):
    x = _spiky()
    r = client.post("/v1/histories?unit=MPa&sample_rate_hz=500",
                    data=parquet_bytes({"g1": x}), content_type=PARQUET)
    hid = r.get_json()["id"]
    # report (default): assessed as is, the finding and its damage share said.
    a = client.post("/v1/assessments", json={"history_id": hid,
                                             "settings": {"curve": "EN1993-1-9:71"}})
    assert a.status_code == 201, a.get_json()
    p = a.get_json()["points"]["g1"]
    spike = p["screening"]["findings"][0]
    assert (spike["kind"], spike["events"]) == ("spike", [[1500, 1500]])
    assert spike["damage_share"] > 0.5
    assert any(c["code"] == "signal_findings" for c in p["cautions"])
    # refuse: a problem naming the channel and the sample.
    a = client.post("/v1/assessments", json={"history_id": hid, "settings": {
        "curve": "EN1993-1-9:71", "screening": "refuse"}})
    assert_problem(a, 422, "invalid-load-history", channel="g1", sample_index=1500)
    # clean: the spike interpolated away, the damage before cleaning kept.
    a = client.post("/v1/assessments", json={"history_id": hid, "settings": {
        "curve": "EN1993-1-9:71", "screening": "clean"}})
    assert a.status_code == 201, a.get_json()
    c = a.get_json()["points"]["g1"]
    assert c["screening"]["cleaned"]["damage_before_cleaning"] == pytest.approx(p["damage"])
    assert c["damage"] < p["damage"] / 3
    # The cycles served later are those of the cleaned signal.
    rows = client.get(a.get_json()["links"]["points"]["g1"]["cycles"]).get_json()
    assert sum(rows["damage"]) == pytest.approx(c["damage"], rel=1e-9)
    a = client.post("/v1/assessments", json={"history_id": hid, "settings": {
        "curve": "EN1993-1-9:71", "screening": "sometimes"}})
    assert_problem(a, 422, "unknown-name", field="screening")


def test_the_cleaned_signal_can_be_downloaded_and_recounted(client):
    # Issue 16: what a cleaned point was counted from, with the recording,
    # as CSV and Parquet. Recounted independently by the reference package
    # (`rainflow`, ASTM E1049-85), the cleaned samples give the cycles and
    # damage the assessment states; the recorded column is the upload.
    import rainflow

    x = _spiky()
    hid = client.post("/v1/histories?unit=MPa&sample_rate_hz=500",
                      data=parquet_bytes({"g1": x}), content_type=PARQUET).get_json()["id"]
    a = client.post("/v1/assessments", json={"history_id": hid, "settings": {
        "curve": "EN1993-1-9:71", "screening": "clean"}}).get_json()
    link = a["links"]["points"]["g1"]["samples"]
    r = client.get(link, headers={"Accept": PARQUET})
    assert r.status_code == 200 and r.mimetype == PARQUET
    assert 'filename="' in r.headers["Content-Disposition"]
    table = pq.read_table(io.BytesIO(r.data))
    assert table.column_names == ["time_s", "samples", "recorded"]
    got = table.to_pydict()
    np.testing.assert_array_equal(got["recorded"], x)
    assert got["time_s"][1] == pytest.approx(1 / 500.0)
    cleaned = np.asarray(got["samples"])
    assert abs(cleaned[1500]) < 100 and np.array_equal(cleaned[:1499], x[:1499])
    curve = catalogue_curve("EN1993-1-9:71")
    d = sum(n / float(curve.cycles_to_failure(rng)) for rng, mean, n, i0, i1 in
            rainflow.extract_cycles(cleaned))
    assert d == pytest.approx(a["points"]["g1"]["damage"], rel=1e-9)
    csv_text = client.get(link + "?format=csv").get_data(as_text=True)
    header, first = csv_text.splitlines()[:2]
    assert header == "time_s,samples,recorded"
    assert float(first.split(",")[1]) == cleaned[0]
    # A point that was not cleaned has no recorded column; an unknown point 404.
    plain = client.post("/v1/assessments", json={"history_id": hid, "settings": {
        "curve": "EN1993-1-9:71"}}).get_json()
    r = client.get(plain["links"]["points"]["g1"]["samples"] + "?format=csv")
    assert r.get_data(as_text=True).splitlines()[0] == "time_s,samples"
    assert client.get(f"/v1/assessments/{plain['id']}/points/nope/samples").status_code == 404


def test_rate_from_a_time_column_is_rounded_to_what_it_can_say(client):
    # Issue 17: 0.002 s steps written to 0.1 ms over 240 s say 500 Hz to
    # seven digits, not 500.0000000002771.
    n = 120_000
    lines = ["time_s,g"] + [f"{i / 500:.4f},{(i % 7) - 3}" for i in range(n)]
    r = client.post("/v1/histories?unit=MPa", data="\n".join(lines).encode(),
                    content_type="text/csv")
    assert r.status_code == 201, r.get_json()
    h = r.get_json()
    assert h["sample_rate_hz"] == 500.0 and h["duration_s"] == 240.0


def _bodies(tmp_path) -> list[tuple[str, bytes, str, str]]:
    """One file of each kind: (label, body, content type, query)."""
    import h5py
    from asammdf import MDF, Signal

    t, g1, g2 = signals(seed=21)
    csv = ("Zeit;g1;g2\nms;µm/m;N/mm²\n" + "".join(
        f"{_fmt(a * 1000, ',')};{_fmt(b, ',')};{_fmt(c, ',')}\n"
        for a, b, c in zip(t, g1, g2))).encode()
    mdf = MDF(version="4.10")
    mdf.append([Signal(g1, t, name="g1", unit="µm/m"), Signal(g2, t, name="g2", unit="MPa")])
    mdf.save(tmp_path / "m.mf4", overwrite=True)
    mdf.close()
    with h5py.File(tmp_path / "h.h5", "w") as f:
        f.attrs["sample_rate_hz"] = 500.0
        f.create_dataset("g1", data=g1).attrs["unit"] = "µm/m"
        f.create_dataset("g2", data=g2).attrs["unit"] = "MPa"
    q = f"youngs_modulus={E}"
    return [("csv", csv, "text/csv", q + "&time_column=Zeit"),
            ("gzip csv", gzip.compress(csv), "application/gzip", q + "&time_column=Zeit"),
            ("mdf4", (tmp_path / "m.mf4").read_bytes(), "application/octet-stream", q),
            ("hdf5", (tmp_path / "h.h5").read_bytes(), "application/x-hdf5", q),
            ("parquet", parquet_bytes({"time_s": t, "g1": g1 * E * 1e-6, "g2": g2}), PARQUET,
             "unit=MPa"),
            ("bad cell", b"a;b\n1,5;2\n3,x;4\n5;6\n", "text/csv", "unit=MPa")]


def test_bodies_read_in_memory_or_through_a_file_give_the_same_history(tmp_path):
    # Bodies within MEMORY_BODY_MB are read from memory, larger ones through
    # a temporary file (and a gzip body unpacks into memory only while it
    # fits): the same bytes must give the same stored samples, damage and
    # problems either way, and leave no temporary file behind.
    from tests.api.conftest import make_app

    packed = len(_bodies(tmp_path)[1][1])
    answers = {}
    # "gzip spilled": the gzip body is held in memory, its CSV is not.
    for label, mb in (("memory", 256), ("file", 0), ("gzip spilled", packed / 2**20)):
        app = make_app(tmp_path / label, MEMORY_BODY_MB=mb)
        try:
            c = app.test_client()
            got = []
            for kind, body, ctype, q in _bodies(tmp_path):
                r = c.post(f"/v1/histories?{q}", data=body, content_type=ctype)
                j = r.get_json()
                if r.status_code != 201:
                    got.append((kind, r.status_code, j["type"], j.get("channel"),
                                j.get("sample_index")))
                    continue
                got.append((kind, j["sample_count"], j["sample_rate_hz"],
                            [(x["name"], x["min_mpa"], x["max_mpa"]) for x in j["channels"]],
                            stored(c, j["id"])))
            answers[label] = got
            data = Path(app.config["DATA_DIR"])
            assert not [p for p in data.rglob("*") if p.name.startswith(".tmp-")]
            assert not app.config["contract_errors"], app.config["contract_errors"]
        finally:
            app.extensions["cycleledger.jobs"].shutdown(wait=True)
    assert answers["memory"] == answers["file"] == answers["gzip spilled"]
    assert answers["memory"][-1][1:] == (422, answers["memory"][-1][2], "a", 1)


def test_gzip_in_memory_spills_to_a_file_beyond_the_limit(tmp_path):
    # A small, highly compressed body must not unpack into unbounded memory.
    from service import recordings

    text = b"g\n" + b"1.5\n-2.5\n" * 200_000
    packed = gzip.compress(text)
    assert recordings.unpacked(packed, folder=tmp_path, memory_limit=len(text)) == text
    out = recordings.unpacked(packed, folder=tmp_path, memory_limit=1 << 16)
    assert isinstance(out, Path) and out.parent == tmp_path and out.read_bytes() == text
    out.unlink()
    with pytest.raises(recordings.UnreadableRecording):
        recordings.unpacked(packed[:-9] + b"\0" * 9, folder=tmp_path, memory_limit=1 << 16)
    assert list(tmp_path.iterdir()) == []


def _large_bodies(tmp_path, n, seed) -> list[tuple[str, bytes, str, str]]:
    """Bodies over ``SpareBuffer.SMALLEST`` of each kind read from memory."""
    import h5py
    from asammdf import MDF, Signal

    t, g1, g2 = signals(n=n, seed=seed)
    csv = ("time_s,g1,g2\n" + "".join(f"{a:.4f},{b:.3f},{c:.3f}\n"
                                      for a, b, c in zip(t, g1, g2))).encode()
    mdf = MDF(version="4.10")
    mdf.append([Signal(g1, t, name="g1", unit="MPa"), Signal(g2, t, name="g2", unit="MPa")])
    mdf.save(tmp_path / f"m{seed}.mf4", overwrite=True)
    mdf.close()
    with h5py.File(tmp_path / f"h{seed}.h5", "w") as f:
        f.attrs["sample_rate_hz"] = 500.0
        f.create_dataset("g1", data=g1)
        f.create_dataset("g2", data=g2)
    return [("csv", csv, "text/csv", "unit=MPa"),
            ("mdf4", (tmp_path / f"m{seed}.mf4").read_bytes(), "application/octet-stream",
             "unit=MPa"),
            ("hdf5", (tmp_path / f"h{seed}.h5").read_bytes(), "application/x-hdf5", "unit=MPa"),
            ("parquet", parquet_bytes({"time_s": t, "g1": g1, "g2": g2}), PARQUET, "unit=MPa")]


def test_a_kept_receive_buffer_never_shows_one_body_in_another(tmp_path):
    # Large bodies land in one buffer kept from request to request (new
    # memory costs more to touch than the bytes to receive). Each history
    # must still be its own body's, as read through a file, whatever body
    # the buffer held before (a longer one first, then shorter ones).
    import weakref

    from service.api import bodies
    from tests.api.conftest import make_app

    sends = [b for n, seed in ((110_000, 5), (90_000, 6), (80_000, 7))
             for b in _large_bodies(tmp_path, n, seed)]
    assert min(len(b[1]) for b in sends) >= bodies.SpareBuffer.SMALLEST
    answers, kept = {}, []
    for label, mb in (("memory", 256), ("file", 0)):
        app = make_app(tmp_path / label, MEMORY_BODY_MB=mb)
        try:
            c = app.test_client()
            got = []
            for kind, body, ctype, q in sends:
                r = c.post(f"/v1/histories?{q}", data=body, content_type=ctype)
                assert r.status_code == 201, (kind, r.get_json())
                j = r.get_json()
                got.append((kind, j["sample_count"],
                            [(x["name"], x["min_mpa"], x["max_mpa"]) for x in j["channels"]],
                            stored(c, j["id"])))
                if label == "memory":
                    # Weakly: a strong reference would itself keep it from reuse.
                    kept.append(weakref.ref(bodies.SPARE._array))
            answers[label] = got
        finally:
            app.extensions["cycleledger.jobs"].shutdown(wait=True)
    assert answers["memory"] == answers["file"]
    # Each body that fits the kept buffer was received in it.
    largest = len(sends[0][1])
    for i in range(1, len(sends)):
        if len(sends[i][1]) <= largest:
            assert kept[i]() is not None and kept[i]() is kept[i - 1](), sends[i][0]
        largest = max(largest, len(sends[i][1]))


def test_the_spare_buffer_is_kept_only_when_nothing_reads_it():
    import weakref

    from service.api.bodies import SpareBuffer

    spare, n = SpareBuffer(), SpareBuffer.SMALLEST
    first = spare.take(2 * n)
    base = weakref.ref(first.obj)        # a strong reference would itself keep it from reuse
    assert spare.give_back(first, limit=4 * n)
    again = spare.take(n + 10)                                     # fits: the same memory
    assert again.obj is base() and len(again) == n + 10
    view = np.frombuffer(again, np.uint8)                         # a reader's view, still alive
    assert not spare.give_back(again, limit=4 * n)
    del view
    other = spare.take(n)
    assert other.obj is not base()                                 # not kept: new memory
    arrow = pa.py_buffer(other)
    assert not spare.give_back(other, limit=4 * n)                 # exported: refused
    del arrow
    big = spare.take(8 * n)
    assert not spare.give_back(big, limit=4 * n)                   # over the limit
    small = spare.take(1000)
    assert not spare.give_back(small, limit=4 * n)                 # too small to be worth it
