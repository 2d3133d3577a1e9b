"""One name per concept (issue 17): the glossary in DEVELOPERS.md holds the
names, and the outputs that carry them (the dashboard feed, the batch result
table, the Prometheus metrics) use no name the glossary does not define.

Common practice: a project's glossary is only worth its name if something
fails when a layer invents a new word for an old thing.
"""

from __future__ import annotations

import re
from pathlib import Path

import numpy as np

ROOT = Path(__file__).resolve().parents[1]


def glossary() -> set[str]:
    text = (ROOT / "DEVELOPERS.md").read_text()
    table = text.split("## Glossary", 1)[1].split("\n## ", 1)[0]
    names = set()
    for line in table.splitlines():
        if not line.startswith("| ") or line.startswith("| name") or line.startswith("| ---"):
            continue
        first = line.split("|")[1]
        names |= {n.strip(" `") for n in first.split(",")}
    return names


def test_the_feed_columns_are_glossary_names():
    from service.api.ledger import FEED_COLUMNS

    missing = [c for c in FEED_COLUMNS if c not in glossary()]
    assert not missing, f"feed columns without a glossary row: {missing}"


def test_the_batch_result_columns_are_glossary_names():
    from service.batch.tasks import RESULT_COLUMNS

    missing = [c for c in RESULT_COLUMNS if c not in glossary()]
    assert not missing, f"batch columns without a glossary row: {missing}"


#: Prometheus names carry their unit in base units (the exposition format's
#: convention: seconds, not hours); each stands for one glossary name.
METRIC_NAMES = {
    "cycleledger_point_damage": "damage",
    "cycleledger_point_damage_if_ended": "damage_if_ended",
    "cycleledger_point_allowable_damage": "allowable_damage",
    "cycleledger_point_recorded_seconds": "recorded_hours",
    "cycleledger_point_last_block_timestamp_seconds": "last_block_at",
    "cycleledger_jobs": "state",
}


def test_every_point_metric_stands_for_a_glossary_name(tmp_path):
    from service.api import create_app

    app = create_app({"DATA_DIR": str(tmp_path / "data"), "TESTING": True})
    c = app.test_client()
    c.post("/v1/assets", json={"name": "rig"})
    c.post("/v1/assets/rig/points", json={"name": "a", "unit": "MPa",
                                          "settings": {"curve": "EN1993-1-9:71"}})
    import io

    import pyarrow as pa
    import pyarrow.parquet as pq

    buf = io.BytesIO()
    pq.write_table(pa.table({"a": np.sin(np.arange(400) / 3.0) * 90}), buf)
    r = c.post("/v1/assets/rig/blocks?seq=1&sample_rate_hz=10", data=buf.getvalue(),
               content_type="application/vnd.apache.parquet")
    assert r.status_code == 201, r.get_json()
    text = c.get("/metrics").get_data(as_text=True)
    ours = set(re.findall(r"^# TYPE (cycleledger_(?:point_\w+|jobs)) ", text, re.M))
    assert ours == set(METRIC_NAMES), "a metric was added or renamed: name it here and in " \
                                      "the glossary"
    names = glossary()
    assert all(v in names for v in METRIC_NAMES.values())
    doc = (ROOT / "DEVELOPERS.md").read_text()
    for metric in METRIC_NAMES:
        assert metric in doc, f"{metric} is not in DEVELOPERS.md"
