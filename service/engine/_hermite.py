"""Tables of a smooth one-variable solution for compiled lookups.

A table is an ``(n + 1, 2)`` array: row 0 holds ``(u0, 1/h)`` (the first
node and the nodes per unit of ``u``), rows 1.. the nodes ``(v, dv/du)`` at
``u0 + i h`` (``(n + 1, 4)`` for two functions on one grid, rows ``(v,
dv/du, w, dw/du)``). :func:`table_value` interpolates by the cubic Hermite
polynomial through the two nodes around ``u`` with their exact slopes
(error of order ``h^4 v''''/384``); the strain-life kernels use it for the
first-loading solution of a notch rule and for the life of a loop, where
solving at every turning point or loop cost an order of magnitude more.
"""

from __future__ import annotations

import numpy as np

from ._numba import kernel


def empty_table(u0: float, u1: float, nodes: int, functions: int = 1
                ) -> tuple[np.ndarray, float]:
    """``(table, h)``: a table of ``functions`` (1 or 2) over ``[u0, u1]``
    with row 0 filled and the ``nodes`` rows left to fill."""
    h = (u1 - u0) / (nodes - 1)
    out = np.zeros((nodes + 1, 2 * functions))
    out[0, 0], out[0, 1] = u0, 1.0 / h
    return out, h


@kernel
def _basis(tab, u):
    """``(inside, row, h00, h10, h01, h11)``: the node row below ``u`` and
    the cubic Hermite basis there, the slope weights already times h."""
    t = (u - tab[0, 0]) * tab[0, 1]
    if not (t >= 0.0 and t < tab.shape[0] - 2):
        return False, 0, 0.0, 0.0, 0.0, 0.0
    i = int(t)
    f = t - i
    h = 1.0 / tab[0, 1]
    f2 = f * f
    f3 = f2 * f
    return (True, i + 1, 2.0 * f3 - 3.0 * f2 + 1.0, (f3 - 2.0 * f2 + f) * h,
            -2.0 * f3 + 3.0 * f2, (f3 - f2) * h)


@kernel
def table_value(tab, u):
    """``(inside, v)``: the interpolated value at ``u`` and True, or
    ``(False, 0.0)`` outside the table's span (the caller solves there)."""
    inside, r, h00, h10, h01, h11 = _basis(tab, u)
    if not inside:
        return False, 0.0
    return True, (h00 * tab[r, 0] + h10 * tab[r, 1] + h01 * tab[r + 1, 0]
                  + h11 * tab[r + 1, 1])


@kernel
def table_values(tab, u):
    """``(inside, v, w)``: as :func:`table_value` for a table of two
    functions on one grid (rows ``(v, dv/du, w, dw/du)``)."""
    inside, r, h00, h10, h01, h11 = _basis(tab, u)
    if not inside:
        return False, 0.0, 0.0
    return (True, h00 * tab[r, 0] + h10 * tab[r, 1] + h01 * tab[r + 1, 0]
            + h11 * tab[r + 1, 1],
            h00 * tab[r, 2] + h10 * tab[r, 3] + h01 * tab[r + 1, 2] + h11 * tab[r + 1, 3])
