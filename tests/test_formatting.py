"""The one number policy for text outputs (service.formatting)."""

import math

from service import formatting


def test_four_significant_digits_in_the_plain_range():
    assert formatting.number(0.123456) == "0.1235"
    assert formatting.number(1949.44) == "1949"
    assert formatting.number(12.3456) == "12.35"


def test_scientific_outside_the_plain_range():
    assert formatting.number(123456.0) == "1.235e+05"
    assert formatting.number(0.000123456) == "1.235e-04"


def test_unknown_and_infinite_never_look_the_same():
    assert formatting.number(None) == "-"
    assert formatting.number(math.nan) == "-"
    assert formatting.number(math.inf) == "inf"
    assert formatting.number(-math.inf) == "-inf"
    assert formatting.number(0.0) == "0"


def test_counts_show_half_cycles_only_when_there_are_some():
    assert formatting.count(1949.0) == "1949"
    assert formatting.count(1949.5) == "1949.5"
    assert formatting.count(None) == "-"


def test_booleans_and_integers():
    assert formatting.number(True) == "yes"
    assert formatting.number(7) == "7"
