"""Range-mean and from-to matrices and the exceedance spectrum."""

import numpy as np
import pytest
from hypothesis import given
from hypothesis import strategies as st

from service.engine import (InvalidParameter, astm_e1049, exceedance, from_to_matrix,
                            range_mean_matrix)

ASTM_HISTORY = [-2, 1, -3, 5, -1, 3, -4, 4, -2]


def test_exceedance_of_astm_example():
    # Source: ASTM E1049-85 sec. 5.4.4 example counts (3: 0.5, 4: 1.5, 6: 0.5,
    # 8: 1.0, 9: 0.5), accumulated from the largest range down.
    levels, cycles = exceedance(astm_e1049(ASTM_HISTORY))
    assert levels.tolist() == [9.0, 8.0, 6.0, 4.0, 3.0]
    assert cycles.tolist() == [0.5, 1.5, 2.0, 3.5, 4.0]


def test_range_mean_matrix_of_astm_example_with_edges():
    # Regression pin from the same example's rows: ranges and means are
    # (3, -0.5) (4, -1) (4, 1) (8, 1) (9, 0.5) (8, 0) (6, 1).
    m = range_mean_matrix(astm_e1049(ASTM_HISTORY), range_bins=[0, 5, 10],
                          mean_bins=[-2, 0, 2])
    assert m.counts.tolist() == [[1.0, 1.0], [0.0, 2.0]]
    assert m.outside == 0.0 and m.row_quantity == "stress_range"


def test_matrix_reports_what_falls_outside_user_edges():
    m = range_mean_matrix(astm_e1049(ASTM_HISTORY), range_bins=[0, 5], mean_bins=[-2, 2])
    assert m.counts.sum() == 2.0 and m.outside == 2.0


def test_from_to_matrix_keeps_direction():
    # A rise from -3 to 5 sits above the diagonal (row of "from" below the
    # column of "to"); a fall below it.
    m = from_to_matrix(astm_e1049([-3.0, 5.0]), bins=[-4, 0, 6])
    assert m.counts.tolist() == [[0.0, 0.5], [0.0, 0.0]]
    m = from_to_matrix(astm_e1049([5.0, -3.0]), bins=[-4, 0, 6])
    assert m.counts.tolist() == [[0.0, 0.0], [0.5, 0.0]]


@given(st.lists(st.integers(-50, 50), min_size=3, max_size=100), st.integers(1, 20),
       st.integers(1, 20))
def test_matrices_hold_every_cycle(x, nr, nm):
    table = astm_e1049(x)
    rm = range_mean_matrix(table, nr, nm)
    ft = from_to_matrix(table, nr)
    assert rm.counts.shape == (nr, nm)
    assert np.isclose(rm.counts.sum(), table.total_count)
    assert np.isclose(ft.counts.sum(), table.total_count)
    assert rm.outside == 0.0 and ft.outside == 0.0


@pytest.mark.parametrize("bins", [0, -3, 2.5, [1.0], [0, 2, 1], [0, np.inf]])
def test_bad_bins(bins):
    with pytest.raises(InvalidParameter) as err:
        range_mean_matrix(astm_e1049(ASTM_HISTORY), range_bins=bins)
    assert err.value.field == "range_bins"


def test_empty_table_gives_empty_spectrum_and_zero_matrix():
    table = astm_e1049([1.0, 1.0, 1.0])
    levels, cycles = exceedance(table)
    assert levels.size == 0 and cycles.size == 0
    assert range_mean_matrix(table, 4, 4).counts.sum() == 0.0
