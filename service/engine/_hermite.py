"""Tables of a smooth one-variable solution for compiled lookups.

A table is an ``(n + 1, 2)`` array: row 0 holds ``(u0, 1/h)`` (the first
node and the nodes per unit of ``u``), rows 1.. the nodes ``(v, dv/du)`` at
``u0 + i h``. :func:`table_value` interpolates by the cubic Hermite
polynomial through the two nodes around ``u`` with their exact slopes
(error of order ``h^4 v''''/384``); the strain-life kernels use it for the
first-loading solution of a notch rule and for the life of a loop, where
solving at every turning point or loop cost an order of magnitude more.
"""

from __future__ import annotations

import numpy as np

from ._numba import kernel


def empty_table(u0: float, u1: float, nodes: int) -> tuple[np.ndarray, float]:
    """``(table, h)``: a table over ``[u0, u1]`` with row 0 filled and the
    ``nodes`` rows left to fill."""
    h = (u1 - u0) / (nodes - 1)
    out = np.empty((nodes + 1, 2))
    out[0, 0], out[0, 1] = u0, 1.0 / h
    return out, h


@kernel
def table_value(tab, u):
    """``(inside, v)``: the interpolated value at ``u`` and True, or
    ``(False, 0.0)`` outside the table's span (the caller solves there)."""
    t = (u - tab[0, 0]) * tab[0, 1]
    if not (t >= 0.0 and t < tab.shape[0] - 2):
        return False, 0.0
    i = int(t)
    f = t - i
    h = 1.0 / tab[0, 1]
    v0 = tab[i + 1, 0]
    v1 = tab[i + 2, 0]
    d0 = tab[i + 1, 1] * h
    d1 = tab[i + 2, 1] * h
    f2 = f * f
    f3 = f2 * f
    return True, ((2.0 * f3 - 3.0 * f2 + 1.0) * v0 + (f3 - 2.0 * f2 + f) * d0
                  + (-2.0 * f3 + 3.0 * f2) * v1 + (f3 - f2) * d1)
