r"""The notch root's local stress and strain (the local strain approach's
first half; the life is ``strain_life.py``'s).

The cyclic stress-strain curve (Ramberg-Osgood) and its Masing branches;
the elastic-to-local rules of Neuber and Glinka; the material's memory
followed turning point by turning point. References in ``strain_life.py``.

Each rule's first-loading relation is solved by Newton's method
(:func:`_first_loading`); for a history the solution is read from a table
of it over the logarithm of the input (cubic Hermite interpolation with
exact slopes, :func:`inverse_table`), which is ~1e-12 of the solved value
and an order of magnitude faster than solving at every turning point.
"""

from __future__ import annotations

import functools
import math
from dataclasses import dataclass

import numpy as np

from ._hermite import empty_table, table_value, table_values
from ._numba import kernel
from .strain_life_material import StrainLifeMaterial

__all__ = ["RULE_CODES", "cyclic_strain", "masing_strain_range", "inverse_table",
           "state_table", "loop_states", "Memory", "origins", "Notch", "follow",
           "local_states"]

#: Codes inside the kernels: the notch rules and a strain input.
RULE_CODES = {"neuber": 0, "glinka": 1, "strain": 2}


# ---------------------------------------------------------------------------- the curves


def cyclic_strain(stress, material: StrainLifeMaterial) -> np.ndarray:
    r""":math:`\varepsilon = \sigma/E + \mathrm{sign}(\sigma)(|\sigma|/K')^{1/n'}`. [-]"""
    s = np.asarray(stress, dtype=np.float64)
    m = material
    return s / m.youngs_modulus + np.sign(s) * (np.abs(s) / m.cyclic_strength_coefficient) ** (
        1.0 / m.cyclic_hardening_exponent)


def masing_strain_range(stress_range, material: StrainLifeMaterial) -> np.ndarray:
    r""":math:`\Delta\varepsilon = \Delta\sigma/E + 2(\Delta\sigma/2K')^{1/n'}`. [-]"""
    return 2.0 * cyclic_strain(0.5 * np.asarray(stress_range, dtype=np.float64), material)


@kernel
def _first_loading(x, rule, e_mod, k, inv_n, n):
    """Local stress [MPa] >= 0 on the first-loading curve for a pseudo
    stress (Neuber, Glinka) or a strain (rule 2) ``x`` >= 0.

    Each equation f(s) = 0 is increasing and convex in s, and each of its
    two terms alone (elastic, plastic) reaches the target at an s above the
    root; Newton's method started from the smaller of those two falls
    monotonically onto the root (no overshoot, no bracket needed) and is
    stopped at round-off.
    """
    if x <= 0.0:
        return 0.0
    if rule == 0:
        target = x * x / e_mod
        s_el = x
        s_pl = (target * k ** inv_n) ** (1.0 / (1.0 + inv_n))
    elif rule == 1:
        target = 0.5 * x * x / e_mod
        s_el = x
        s_pl = ((1.0 + n) * target * k ** inv_n) ** (1.0 / (1.0 + inv_n))
    else:
        target = x
        s_el = e_mod * x
        s_pl = k * x ** n
    s = min(s_el, s_pl)
    for _ in range(100):
        plast = (s / k) ** inv_n
        if rule == 0:
            f = s * s / e_mod + s * plast - target
            df = 2.0 * s / e_mod + plast * (1.0 + inv_n)
        elif rule == 1:
            f = 0.5 * s * s / e_mod + s * plast / (1.0 + n) - target
            df = s / e_mod + plast * (1.0 + inv_n) / (1.0 + n)
        else:
            f = s / e_mod + plast - target
            df = 1.0 / e_mod + inv_n * plast / s
        step = f / df
        s_new = s - step
        if s_new <= 0.0:
            s_new = 0.5 * s
        # Quadratic convergence: after a step of 1e-8 s the error left is
        # of order (1e-8)^2, below round-off.
        if abs(step) <= 1e-8 * s:
            return s_new
        s = s_new
    return s


#: Nodes of an inverse table, and the span of local stress it covers as
#: multiples of K' (beyond it, and below, the equation is solved directly).
_TABLE_NODES = 16384
_TABLE_SPAN = (1e-4, 4.0)


@kernel
def _forward(s, rule, e_mod, k, inv_n, n):
    """``(x, dx/ds)``: the input (pseudo stress or strain) whose rule gives
    the local stress ``s`` > 0 on the first-loading curve, and its slope."""
    plast = (s / k) ** inv_n
    if rule == 0:      # Neuber: x^2 / E = s^2 / E + s (s/K')^(1/n')
        x = math.sqrt(s * s + e_mod * s * plast)
        return x, (2.0 * s + e_mod * plast * (1.0 + inv_n)) / (2.0 * x)
    if rule == 1:      # Glinka: x^2 / 2E = s^2 / 2E + s (s/K')^(1/n') / (1 + n')
        x = math.sqrt(s * s + 2.0 * e_mod * s * plast / (1.0 + n))
        return x, (s + e_mod * plast * (1.0 + inv_n) / (1.0 + n)) / x
    return s / e_mod + plast, 1.0 / e_mod + inv_n * plast / s


@kernel
def _fill_table(rule, e_mod, k, inv_n, n, u0, h, out):
    """Nodes ``u0 + i h`` (u = ln x): ``out[i] = (ln s, d ln s / d ln x)``."""
    for i in range(out.shape[0]):
        x = math.exp(u0 + i * h)
        s = _first_loading(x, rule, e_mod, k, inv_n, n)
        xs, slope = _forward(s, rule, e_mod, k, inv_n, n)
        out[i, 0] = math.log(s)
        out[i, 1] = xs / (s * slope)


@functools.lru_cache(maxsize=64)
def inverse_table(rule: int, e_mod: float, k: float, n: float) -> np.ndarray:
    r"""The first-loading solution of a notch rule as a table over
    :math:`u = \ln x`, nodes ``(ln s, d ln s/d ln x)`` (layout and cubic
    Hermite lookup in ``_hermite.py``).

    With :data:`_TABLE_NODES` nodes over :data:`_TABLE_SPAN` the
    interpolated stress is within ~1e-12 of the solved one (tested against
    the solver over the span); outside it :func:`_stress_of` solves. The
    table is cached per material and rule: a reserve search follows the
    same notch a dozen times.
    """
    inv_n = 1.0 / n
    lo = _forward(_TABLE_SPAN[0] * k, rule, e_mod, k, inv_n, n)[0]
    hi = _forward(_TABLE_SPAN[1] * k, rule, e_mod, k, inv_n, n)[0]
    out, h = empty_table(math.log(lo), math.log(hi), _TABLE_NODES)
    _fill_table(rule, e_mod, k, inv_n, n, out[0, 0], h, out[1:])
    out.flags.writeable = False
    return out


@kernel
def _stress_of(x, rule, e_mod, k, inv_n, n, tab):
    """``(s, (s/K')^(1/n'))``: the local stress for ``x`` >= 0 on the
    first-loading curve and its plastic strain, from the table (cubic
    Hermite in ln x) within its span, else solved."""
    if x <= 0.0:
        return 0.0, 0.0
    inside, v = table_value(tab, math.log(x))
    if inside:
        return math.exp(v), math.exp(inv_n * (v - math.log(k)))
    s = _first_loading(x, rule, e_mod, k, inv_n, n)
    return s, (s / k) ** inv_n


@kernel
def _fill_state_table(rule, e_mod, k, inv_n, n, x0, h, tab, out):
    """Nodes ``x0 + i h``: ``out[i] = (s, ds/dx, p, dp/dx)``, the local
    stress and plastic strain from the first-loading table."""
    for i in range(out.shape[0]):
        x = x0 + i * h
        s, plast = _stress_of(x, rule, e_mod, k, inv_n, n, tab)
        ds = 1.0 / _forward(s, rule, e_mod, k, inv_n, n)[1]
        out[i, 0] = s
        out[i, 1] = ds
        out[i, 2] = plast
        out[i, 3] = inv_n * plast / s * ds


#: The span of a table over x, in multiples of the knee (the input at which
#: the plastic strain equals the elastic one): a cubic over a wider span
#: misses the knee's curvature (at 27 knees ~3e-12, at 17,600 ~6e-4). It
#: starts at 1/256 of its top: nearer 0 the plastic strain goes as
#: x^(1/n'), whose fourth derivative is unbounded for n' > 1/4 (1.8e-8 of
#: the stress one node from 0 for n' = 0.3); there the log table serves.
_LINEAR_KNEES = 16.0
_LINEAR_START = 1.0 / 256.0


def knee_input(rule: int, e_mod: float, k: float, n: float) -> float:
    r"""The input (pseudo stress or strain) at which the first-loading
    curve's plastic strain equals its elastic strain:
    :math:`\sigma_y = (K'^{1/n'}/E)^{n'/(1 - n')}`, then the rule's input
    for it."""
    s_y = math.exp((math.log(k) / n - math.log(e_mod)) * n / (1.0 - n))
    return float(_forward(s_y, rule, e_mod, k, 1.0 / n, n)[0])


def state_table_for(rule: int, e_mod: float, k: float, n: float, largest: float) -> np.ndarray:
    """The :func:`state_table` a follow reaching inputs up to ``largest``
    reads: its span rounded up to a power of two (a reserve search's trials
    share a few tables), and no wider than :data:`_LINEAR_KNEES` knees
    (inputs beyond are read from :func:`inverse_table`)."""
    top = min(largest, _LINEAR_KNEES * knee_input(rule, e_mod, k, n))
    return state_table(rule, e_mod, k, n, 2.0 ** math.ceil(math.log2(top)) if top > 0 else 1.0)


@functools.lru_cache(maxsize=64)
def state_table(rule: int, e_mod: float, k: float, n: float, top: float) -> np.ndarray:
    """The local stress and plastic strain on the first-loading curve as a
    table over the input x itself, from ``top/256`` to ``top``
    (``_hermite.py``, two functions), read from :func:`inverse_table`.

    The follow reads every turning point from it: no logarithm and no
    exponential per point, where the table over ln x needed one and two
    (the follow took about a third of the time). Over up to 32 knees
    (:func:`state_table_for`) the cubic gives the solved stress and strain
    to ~1e-10 (tested). Cached per material, rule and ``top``.
    """
    x0 = _LINEAR_START * top
    out, h = empty_table(x0, top, _TABLE_NODES, functions=2)
    _fill_state_table(rule, e_mod, k, 1.0 / n, n, x0, h, inverse_table(rule, e_mod, k, n),
                      out[1:])
    out.flags.writeable = False
    return out


@kernel
def _origins(x, stack, sp, org):
    """The material's memory over the points ``x`` (pseudo stress or
    strain): ``org[j]`` is the index of the reversal point the branch to
    ``x[j]`` starts from, -1 on the first-loading curve. The first ``sp``
    points are the memory a history starts from (their ``org`` is not
    set); ``stack`` (room for ``len(x)``) holds the open reversal points'
    indices and is left as it stands after the last point (so a history can
    be followed block by block). Only comparisons of the points: the same
    for the points scaled by any positive factor. Returns the new ``sp``."""
    for j in range(sp, x.shape[0]):
        v = x[j]
        while True:
            if sp >= 2:
                if abs(v - x[stack[sp - 1]]) >= abs(x[stack[sp - 2]] - x[stack[sp - 1]]):
                    sp -= 2  # the loop closes: the interrupted branch goes on
                    continue
            elif sp == 1:
                r = x[stack[0]]
                # The first-loading curve is met again at the mirror of r.
                if (v - r) * r < 0.0 and abs(v - r) >= 2.0 * abs(r):
                    sp = 0
                    continue
            break
        org[j] = stack[sp - 1] if sp > 0 else -1
        stack[sp] = j
        sp += 1
    return sp


@kernel
def _states(x, org, start, rule, e_mod, k, inv_n, n, tab, lin, sig, eps):
    """Local stress and strain at the points ``x`` from ``start`` on, along
    the branches :func:`_origins` found: on the first-loading curve, or
    along the Masing branch (the first-loading curve doubled) from the
    origin's state (an earlier point's, or the memory's before ``start``).
    ``tab`` is the rule's :func:`inverse_table`, ``lin`` its
    :func:`state_table`."""
    for j in range(start, x.shape[0]):
        v = x[j]
        o = org[j]
        if o < 0:
            # Read from the table over x; solved past it. (Written out here:
            # through a helper taking the tables, each point paid for the
            # arrays' reference counts, tripling the follow's time.)
            inside, s, plast = table_values(lin, abs(v))
            if not inside:
                s, plast = _stress_of(abs(v), rule, e_mod, k, inv_n, n, tab)
            sgn = 1.0 if v >= 0.0 else -1.0
            sig[j] = sgn * s
            eps[j] = sgn * (s / e_mod + plast)
        else:
            dv = abs(v - x[o])
            inside, half, plast = table_values(lin, 0.5 * dv)
            if not inside:
                half, plast = _stress_of(0.5 * dv, rule, e_mod, k, inv_n, n, tab)
            sgn = 1.0 if v >= x[o] else -1.0
            sig[j] = sig[o] + sgn * 2.0 * half
            eps[j] = eps[o] + sgn * 2.0 * (half / e_mod + plast)


@kernel
def loop_states(sig, eps, pos_a, pos_b, strain_amp, mean, smax):
    """Each loop's strain amplitude [-], mean and peak stress [MPa] from the
    local states at its two tips (positions among the turning points)."""
    for i in range(pos_a.shape[0]):
        sa, sb = sig[pos_a[i]], sig[pos_b[i]]
        strain_amp[i] = 0.5 * abs(eps[pos_a[i]] - eps[pos_b[i]])
        mean[i] = 0.5 * (sa + sb)
        smax[i] = max(sa, sb)


@dataclass
class Memory:
    """The open reversal points of a followed history (oldest first): the
    input value, local stress [MPa] and strain [-] of each; empty for an
    unloaded start."""

    x: list
    stress: list
    strain: list

    @classmethod
    def empty(cls) -> "Memory":
        return cls([], [], [])

    def to_dict(self) -> dict:
        return {"x": list(map(float, self.x)), "stress": list(map(float, self.stress)),
                "strain": list(map(float, self.strain))}

    @classmethod
    def from_dict(cls, data: dict) -> "Memory":
        return cls(list(data["x"]), list(data["stress"]), list(data["strain"]))


def origins(x, start: int = 0) -> tuple[np.ndarray, np.ndarray]:
    """``(org, open)`` over the points ``x`` from ``start`` on (the points
    before it are the memory a history starts from, open in their order):
    each point's branch origin (:func:`_origins`) and the indices of the
    open reversal points after the last."""
    x = np.ascontiguousarray(x, dtype=np.float64)
    org = np.empty(x.shape[0], np.int64)
    stack = np.arange(x.shape[0], dtype=np.int64)
    sp = _origins(x, stack, start, org)
    return org, stack[:sp]


class Notch:
    """A material's notch rule with its tables, to read the local states of
    many points (:meth:`states`)."""

    def __init__(self, material: StrainLifeMaterial, rule: str, largest: float):
        m = material
        self.code = RULE_CODES[rule]
        self.e_mod, self.k, self.n = (float(m.youngs_modulus),
                                      float(m.cyclic_strength_coefficient),
                                      float(m.cyclic_hardening_exponent))
        self.tab = inverse_table(self.code, self.e_mod, self.k, self.n)
        # First loading reaches |x|, a Masing branch half a range: neither
        # goes past the largest |x|.
        self.lin = state_table_for(self.code, self.e_mod, self.k, self.n, largest)

    def states(self, x, org, start, sig, eps) -> None:
        """Fill ``sig`` and ``eps`` from ``start`` on (:func:`_states`)."""
        _states(x, org, start, self.code, self.e_mod, self.k, 1.0 / self.n, self.n, self.tab,
                self.lin, sig, eps)


def follow(x, material: StrainLifeMaterial, rule: str, memory: Memory | None = None):
    """``(stress, strain, memory)``: the local state at each turning point
    ``x`` (in order) starting from ``memory`` (an unloaded start if None),
    and the memory after the last. [MPa], [-]"""
    memory = memory or Memory.empty()
    m0 = len(memory.x)
    xa = np.concatenate([np.asarray(memory.x, dtype=np.float64),
                         np.asarray(x, dtype=np.float64)])
    org, open_ = origins(xa, m0)
    sig, eps = np.empty(xa.shape[0]), np.empty(xa.shape[0])
    sig[:m0], eps[:m0] = memory.stress, memory.strain
    notch = Notch(material, rule, float(np.max(np.abs(xa), initial=0.0)))
    notch.states(xa, org, m0, sig, eps)
    return sig[m0:], eps[m0:], Memory(xa[open_].tolist(), sig[open_].tolist(),
                                      eps[open_].tolist())


def local_states(x, material: StrainLifeMaterial, rule: str):
    """``(stress, strain)`` at the notch root for each turning point ``x``
    (pseudo-elastic stress [MPa] for ``neuber``/``glinka``, strain [-] for
    ``strain``), with Masing branches and memory, from an unloaded start.
    [MPa], [-]"""
    sig, eps, _ = follow(x, material, rule)
    return sig, eps
