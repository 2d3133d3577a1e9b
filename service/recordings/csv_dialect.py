"""CSV as acquisition systems write it: the dialect found, pyarrow reads it.

Exports differ in their delimiter (comma, semicolon, tab, pipe), their
decimal mark (a decimal comma with a semicolon or tab delimiter in much of
Europe), lines before the header (a preamble of test name, date and rate, or
comment lines), a row of units under the header or units in the column
names (``g1 [µm/m]``, ``g1 (MPa)``), and a time column. This module looks at
the first lines to find all of that, then hands the whole file to pyarrow's
reader with those options: no hand-written parser touches the samples.

The rule, on the first ``SNIFF_LINES`` lines, is in :func:`sniff`.
Explicit ``delimiter``, ``decimal`` and ``header_row`` options override
what is found.
"""

from __future__ import annotations

import csv
import re
from dataclasses import dataclass, field

#: Lines read to find the dialect (a preamble rarely runs past a few dozen).
SNIFF_LINES = 200
#: Bytes read to find the dialect.
SNIFF_BYTES = 1 << 16

DELIMITERS = (";", "\t", ",", "|")
_NUMBER = {
    ".": re.compile(r"^[+-]?(\d+\.?\d*|\.\d+)([eE][+-]?\d+)?$"),
    ",": re.compile(r"^[+-]?(\d+,?\d*|,\d+)([eE][+-]?\d+)?$"),
}
_NOT_A_NUMBER = {"nan", "-nan", "+nan", "inf", "-inf", "+inf"}
_UNIT_IN_NAME = re.compile(r"^(?P<name>.*?)\s*[\[(](?P<unit>[^\])]*)[\])]\s*$")


class DialectError(ValueError):
    """The first lines do not look like a table of numbers."""


@dataclass
class Dialect:
    """What was found (or given) about a CSV export.

    ``header_row`` is the 0-based line of the column names; ``units_row``
    whether a row of units follows it; ``names`` the column names with any
    unit in brackets removed and ``units`` the unit spelt for each column
    (``None`` where none is given).
    """

    delimiter: str
    decimal: str
    header_row: int
    units_row: bool
    names: list = field(default_factory=list)
    units: list = field(default_factory=list)

    def describe(self) -> dict:
        return {"delimiter": self.delimiter, "decimal": self.decimal,
                "header_row": self.header_row, "units_row": self.units_row}


def _split(line: str, delimiter: str) -> list[str]:
    return next(csv.reader([line], delimiter=delimiter), [])


def _numeric(cells: list[str], decimal: str) -> bool:
    pattern = _NUMBER[decimal]
    return all(c.strip().lower() in _NOT_A_NUMBER or pattern.match(c.strip())
               for c in cells)


def _known_unit(cell: str) -> bool:
    """A unit the engine knows (as acquisition systems spell it), a time
    unit, or anything in brackets."""
    from service.engine.units import unit_from_spelling

    from . import TIME_UNITS

    c = cell.strip()
    if not c:
        return False
    if (c[0] in "[(" and c[-1] in "])") or c.lower() in TIME_UNITS:
        return True
    try:
        unit_from_spelling(c)
        return True
    except ValueError:
        return False


def _unit_like(cell: str) -> bool:
    """A cell a units row may hold: empty, a known unit (:func:`_known_unit`)
    or a short symbol of another quantity (V, mV/V, degC, bar ...)."""
    c = cell.strip()
    return (not c or _known_unit(c)
            or (len(c) <= 6 and not any(ch.isdigit() for ch in c) and " " not in c))


def _tail(lines: list[str], delimiter: str, decimal: str):
    """``(k, block_top)`` when the last lines are numeric rows of k fields
    under this dialect: k, and the first line of the run of k-field lines
    that ends the sample; else None."""
    # The last line must be numbers; the two before it (when they are not the
    # only other line, the header) must have as many fields.
    last = [_split(ln, delimiter) for ln in lines[-min(3, len(lines) - 1):]]
    k = len(last[-1])
    if any(len(c) != k for c in last) or not _numeric(last[-1], decimal):
        return None
    top = len(lines) - 1
    while top > 0 and len(_split(lines[top - 1], delimiter)) == k:
        top -= 1
    return k, top


def sniff(text: str, *, delimiter: str | None = None, decimal: str | None = None,
          header_row: int | None = None, complete: bool = False) -> Dialect:
    """Find the dialect of the CSV whose beginning is ``text``.

    ``complete``: ``text`` is the whole file (its last line is whole);
    otherwise the last, possibly cut, line is dropped. The data's delimiter
    and decimal mark come from the last lines (all numbers, k fields each);
    going up through the lines of k fields, a line with some numbers among
    its cells is a row of data (a bad cell is reported by the reader, with
    its row), a line of unit symbols under another is the units row, and
    the first line of names above the numbers is the header; what is above
    it is preamble.
    """
    lines = text.splitlines()
    if not complete and len(lines) > 1:
        lines = lines[:-1]
    lines = lines[:SNIFF_LINES]
    while lines and not lines[-1].strip():
        lines.pop()
    if len(lines) < 2:
        raise DialectError("a CSV recording needs a header line and at least one row of "
                           "numbers")
    best = None
    for d in ((delimiter,) if delimiter else DELIMITERS):
        for dec in ((decimal,) if decimal else (".", ",")):
            if d == "," and dec == ",":
                continue  # a comma cannot be both
            found = _tail(lines, d, dec)
            if found is None:
                continue
            k, top = found
            if k == 1 and any(o in ln for ln in lines[top:] for o in DELIMITERS
                              if o != d and not (o == "," and dec == ",")):
                # One column, yet another delimiter in its lines: a ragged
                # file under that delimiter, not one column under this one.
                continue
            if dec == "," and header_row is None and "," in lines[top]:
                # "1,2" under a header "a,b" is two columns, not one decimal:
                # a decimal-comma export does not put commas in its header.
                continue
            # More columns, then more rows that read as numbers (this is what
            # tells "1,5" in a decimal-comma file), a taller block, the point.
            numeric = sum(_numeric(_split(ln, d), dec) for ln in lines[top:])
            if numeric == len(lines) - top and header_row is None:
                continue  # no line of names above the numbers under this dialect
            key = (k, numeric, len(lines) - top, dec == ".")
            if best is None or key > best[0]:
                best = (key, d, dec, k, top)
    if best is None:
        raise DialectError(
            "the last lines are not rows of numbers under any of the delimiters "
            f"{', '.join(repr(x) for x in DELIMITERS)} with a decimal point or comma; give "
            "delimiter and decimal")
    _, d, dec, k, top = best
    rows = [_split(ln, d) for ln in lines]
    if header_row is None:
        # The first row of numbers; rows below it that are not all numbers
        # are data with a bad cell (the reader reports it with its row).
        first = next(i for i in range(top, len(lines)) if _numeric(rows[i], dec))
        i = first - 1
        # Rows with some numbers among their cells are data with a bad cell.
        while i >= top and any(_NUMBER[dec].match(c.strip()) for c in rows[i]):
            i -= 1
        if i < top:
            raise DialectError("the CSV has no header line above its numbers: the first "
                               "line must name the columns")
        units_row = False
        if i - 1 >= top and all(_unit_like(c) for c in rows[i]):
            known = sum(_known_unit(c) for c in rows[i])
            units_row = known > 0 and known > sum(_known_unit(c) for c in rows[i - 1])
        header_row = i - 1 if units_row else i
    else:
        if not 0 <= header_row < len(lines) or len(rows[header_row]) != k:
            raise DialectError(f"header_row {header_row} is not a line of {k} fields")
        nxt = header_row + 1
        units_row = (nxt < len(lines) and not _numeric(rows[nxt], dec)
                     and all(_unit_like(c) for c in rows[nxt]))
    raw_names = [c.strip() for c in rows[header_row]]
    names, units = [], []
    for c in raw_names:
        m = _UNIT_IN_NAME.match(c)
        if m and m.group("name"):
            names.append(m.group("name").strip())
            units.append(m.group("unit").strip() or None)
        else:
            names.append(c)
            units.append(None)
    if units_row:
        for j, u in enumerate(rows[header_row + 1]):
            u = u.strip().strip("[]()").strip()
            if u:
                units[j] = u
    if any("\ufffd" in x for x in names + [u for u in units if u]):
        raise DialectError("the header is not UTF-8 text: save the CSV as UTF-8")
    return Dialect(d, dec, header_row, units_row, names, units)


def read(source, dialect: Dialect):
    """The table pyarrow reads with ``dialect`` from ``source`` (a file's
    path or a pyarrow input stream; uncompressed). Every column is read
    as float64 (empty cells are nulls); a column that is not numbers raises
    ``pyarrow.ArrowInvalid`` naming it and the row."""
    import pyarrow as pa
    from pyarrow import csv as pacsv

    read_opts = pacsv.ReadOptions(skip_rows=dialect.header_row + 1 + int(dialect.units_row),
                                  column_names=dialect.names)
    parse_opts = pacsv.ParseOptions(delimiter=dialect.delimiter)
    convert = pacsv.ConvertOptions(
        decimal_point=dialect.decimal,
        column_types={n: pa.float64() for n in dialect.names},
        null_values=["", "NaN", "nan", "NAN", "-nan"], strings_can_be_null=False)
    return pacsv.read_csv(source, read_options=read_opts, parse_options=parse_opts,
                          convert_options=convert)


def head_text(stream) -> tuple[str, bool]:
    """The first ``SNIFF_BYTES`` of a binary stream as text, and whether
    that is the whole stream. A UTF-8 byte-order mark is dropped."""
    data = stream.read(SNIFF_BYTES + 1)
    complete = len(data) <= SNIFF_BYTES
    data = data[:SNIFF_BYTES]
    if data.startswith(b"\xef\xbb\xbf"):
        data = data[3:]
    # Replacement characters only where the text is not UTF-8 (a preamble
    # in a legacy code page, or a character cut at the end): the samples
    # themselves are checked by pyarrow's reader.
    return data.decode("utf-8", errors="replace"), complete
