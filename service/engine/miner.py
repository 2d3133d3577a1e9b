"""Palmgren-Miner damage and the damage-equivalent range: the model functions.

Pure numpy definitions; the compiled passes in ``_damage_kernels.py`` evaluate
the same formulas and ``tests/engine/test_damage.py`` holds them equal.
"""

from __future__ import annotations

import functools

import numpy as np

def palmgren_miner(count, cycles_to_failure):
    r"""
    Miner damage of each cycle, :math:`d_i = n_i / N_i`.

    Parameters
    ----------
    count : array-like
        Cycles counted (0.5 or 1.0 per row). [cycles]
    cycles_to_failure : array-like
        :math:`N_i` from the S-N curve; ``inf`` for no damage, ``0`` for a
        static failure. [cycles]

    Returns
    -------
    ndarray
        Damage of each row, :math:`D = \sum d_i`. [-]

    References
    ----------
    .. [1] A. Palmgren, "Die Lebensdauer von Kugellagern," *Z. Ver. Dtsch.
       Ing.*, vol. 68, pp. 339-341, 1924.
    .. [2] M. A. Miner, "Cumulative damage in fatigue," *J. Appl. Mech.*,
       vol. 12, no. 3, pp. A159-A164, 1945.
    """
    n = np.asarray(count, dtype=np.float64)
    nf = np.asarray(cycles_to_failure, dtype=np.float64)
    with np.errstate(divide="ignore"):
        return np.where(np.isinf(nf), 0.0, n / nf)


def equivalent_range(stress_range, count, slope: float = 3.0,
                     reference_cycles: float = 2e6) -> float:
    r"""
    Damage-equivalent constant range at ``reference_cycles``.

    :math:`\Delta\sigma_{eq} = (\sum n_i \Delta\sigma_i^m / N_{ref})^{1/m}`;
    infinite ranges (overloads) are left out. [MPa]

    References
    ----------
    .. [1] EN 1993-1-9:2005, sec. 6.3 and Annex A (damage equivalent range
       at 2e6 cycles).
    """
    r = np.asarray(stress_range, dtype=np.float64)
    n = np.asarray(count, dtype=np.float64)
    ok = np.isfinite(r) & (r > 0)
    total = float(np.sum(n[ok] * r[ok] ** slope))
    return float((total / reference_cycles) ** (1.0 / slope))



def equivalent_range_from_damage(damage: float, curve, reference_cycles: float = 2e6,
                                 slope: float | None = None,
                                 range_factor: float = 1.0) -> tuple[float, float]:
    r"""
    Damage-equivalent constant range at ``reference_cycles`` on the point's curve.

    Parameters
    ----------
    damage : float
        Miner damage of the spectrum on ``curve`` (every factor included). [-]
    curve : SNCurve
        The curve the damage was computed on (unfactored).
    reference_cycles : float
        :math:`N_{ref}`, 2e6 for the codes' equivalent range. [cycles]
    slope : float, optional
        :math:`m`; default: the curve's own slope at ``reference_cycles``.
    range_factor : float
        What multiplies a measured range before it enters the curve
        (:math:`\gamma_{Ff}\,\gamma_{Mf}` times any thickness factor). [-]

    Returns
    -------
    (range, slope) : (float, float)
        :math:`\Delta\sigma_E` [MPa] (0 for no damage, ``inf`` for a static
        overload) and the slope used [-].

    Notes
    -----
    :math:`\Delta\sigma_E = \Delta\sigma_{ref}\,D^{1/m} / f` with
    :math:`\Delta\sigma_{ref}` the curve's range at :math:`N_{ref}`:
    :math:`N_{ref}` cycles of :math:`\Delta\sigma_E` (times the factors) on the
    curve's segment through :math:`N_{ref}` give the damage :math:`D`. For an
    EN 1993-1-9 curve this is :math:`\Delta\sigma_{E,2}`, and
    :math:`\gamma_{Ff}\Delta\sigma_{E,2} \le \Delta\sigma_C/\gamma_{Mf}` holds
    exactly when :math:`D \le 1`. Cycles below a cut-off, which do no damage,
    add nothing, and cycles on other segments enter with the slope they
    have there (through their damage), unlike the power sum of
    :func:`equivalent_range` with one slope for every cycle.

    References
    ----------
    .. [1] EN 1993-1-9:2005, sec. 6.3, 8 and Annex A (damage-equivalent range
       at 2e6 cycles; verification with partial factors).
    """
    s_ref, m_curve = _reference_point(curve, float(reference_cycles))
    m = m_curve if slope is None else float(slope)
    if not damage > 0.0:
        return 0.0, m
    if damage == float("inf"):
        return float("inf"), m
    return s_ref * damage ** (1.0 / m) / range_factor, m


@functools.lru_cache(maxsize=256)
def _reference_point(curve, reference_cycles: float) -> tuple[float, float]:
    """The curve's range and slope at ``reference_cycles`` (once per curve)."""
    return float(curve.range_at(reference_cycles)), float(curve.slope_at(reference_cycles))

