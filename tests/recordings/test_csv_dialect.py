"""The CSV dialect found in hand-made exports of each common form (issue 16).

Each case is a file as an acquisition system writes it (common practice of
DAQ exports: delimiter, decimal mark, preamble, units row); the dialect
found must be the one it was written in, and pyarrow must read the values.
"""

import pytest

from service.recordings import read
from service.recordings.csv_dialect import DialectError, sniff


@pytest.mark.parametrize("text, delimiter, decimal, header_row, units_row", [
    ("t,a,b\n0,1.5,2\n0.1,2.5,3\n", ",", ".", 0, False),
    ("t;a;b\n0;1,5;2\n0,1;2,5;3\n", ";", ",", 0, False),
    ("t\ta\tb\n0\t1.5\t2\n0.1\t2.5\t3\n", "\t", ".", 0, False),
    ("t|a|b\n0|1.5|2\n0.1|2.5|3\n", "|", ".", 0, False),
    # A preamble line with as many fields as the table (Rate;500;Hz) and a
    # units row whose cells are units the engine knows.
    ("Test;run 42;\nRate;500;Hz\ntime;g1;g2\ns;MPa;µm/m\n0;1,5;2\n0,002;2,5;3\n", ";", ",", 2,
     True),
    # Short column names that could pass for unit symbols, over real units.
    ("t;a;b\ns;MPa;MPa\n0;1;2\n1;2;3\n", ";", ".", 0, True),
    # Comments and an empty line before the header.
    ("# exported 2026-12-01\n# gain 1000\n\ntime_s,g1\n0,1\n0.5,2\n", ",", ".", 3, False),
    # One column with a decimal comma.
    ("g1\n1,5\n2,5\n", ";", ",", 0, False),
])
def test_dialects_are_found(text, delimiter, decimal, header_row, units_row):
    d = sniff(text, complete=True)
    assert (d.delimiter, d.decimal, d.header_row, d.units_row) == (
        delimiter, decimal, header_row, units_row)


def test_units_in_names_and_in_a_units_row():
    d = sniff("time [ms];g1 [µm/m];g2 (N/mm²)\n0;1;2\n1;2;3\n", complete=True)
    assert d.names == ["time", "g1", "g2"] and d.units == ["ms", "µm/m", "N/mm²"]
    d = sniff("time;g1;g2\n[s];[um/m];[MPa]\n0;1;2\n1;2;3\n", complete=True)
    assert d.units_row and d.units == ["s", "um/m", "MPa"]


def test_ragged_or_headless_files_are_refused():
    with pytest.raises(DialectError):
        sniff("a,b\n1,2\n3\n", complete=True)
    with pytest.raises(DialectError):
        sniff("1,2\n3,4\n", complete=True)


def test_explicit_options_override(tmp_path):
    # "1,5" alone is ambiguous (a decimal comma, or two columns): the file
    # says two columns with a header of two names; the request can say so.
    path = tmp_path / "x.csv"
    path.write_text("a,b\n1,5\n2,5\n")
    rec = read(path)
    assert list(rec.columns) == ["a", "b"] and rec.columns["b"].tolist() == [5.0, 5.0]
    path.write_text("a\n1,5\n2,5\n")
    rec = read(path, options={"delimiter": ";", "decimal": ","})
    assert rec.columns["a"].tolist() == [1.5, 2.5]


def test_time_column_in_milliseconds_is_read_in_seconds(tmp_path):
    path = tmp_path / "x.csv"
    path.write_text("Zeit;g1\nms;MPa\n0;1\n2;2\n4;3\n", encoding="utf-8")
    rec = read(path, options={"time_column": "Zeit"})
    assert rec.time_column == "Zeit" and rec.columns["Zeit"].tolist() == [0.0, 0.002, 0.004]
    assert rec.units["g1"] == "MPa"
