r"""Strain-life materials: the cyclic and strain-life constants, their
estimates from tensile data or hardness, and the strain-life curve.

``StrainLifeMaterial`` holds the Ramberg-Osgood constants (K', n') and the
Coffin-Manson-Basquin constants (sigma_f', b, eps_f', c), with Walker's
gamma when known; ``estimate`` gives them from tensile data or hardness by
published methods, each labelled; ``reversals_to_failure`` solves the curve
with its mean-stress forms for the life of each loop. The local analysis
that finds the loops is in ``strain_life.py``.

References
----------
.. [1] S. S. Manson, NACA TN 2933, 1953; L. F. Coffin, *Trans. ASME*,
   vol. 76, pp. 931-950, 1954 (the strain-life curve).
.. [2] J. Morrow, in *Fatigue Design Handbook*, AE-4, SAE, 1968, sec. 3.2.
.. [3] K. N. Smith, P. Watson and T. H. Topper, *J. Mater.*, vol. 5, no. 4,
   pp. 767-778, 1970.
.. [4] N. E. Dowling, "Mean stress effects in strain-life fatigue,"
   *Fatigue Fract. Eng. Mater. Struct.*, vol. 32, pp. 1004-1019, 2009.
"""

from __future__ import annotations

import functools
import math
from dataclasses import asdict, dataclass

import numpy as np

from ._hermite import empty_table, table_value
from ._numba import kernel
from .errors import InvalidParameter, unknown

#: Mean-stress forms of the strain-life curve, and how texts name them.
STRAIN_MEAN_STRESS = ("none", "morrow", "smith_watson_topper", "walker")
MEAN_STRESS_NAMES = {"none": "no mean-stress correction", "morrow": "Morrow's mean stress",
                     "smith_watson_topper": "the Smith-Watson-Topper parameter",
                     "walker": "Walker's mean stress"}


@dataclass(frozen=True)
class StrainLifeMaterial:
    """Cyclic and strain-life constants of a material.

    ``youngs_modulus`` E [MPa]; ``cyclic_strength_coefficient`` K' [MPa] and
    ``cyclic_hardening_exponent`` n' [-] of the Ramberg-Osgood cyclic curve;
    ``fatigue_strength_coefficient`` sigma_f' [MPa], ``fatigue_strength_exponent``
    b [-], ``fatigue_ductility_coefficient`` eps_f' [-] and
    ``fatigue_ductility_exponent`` c [-] of Coffin-Manson-Basquin;
    ``walker_exponent`` gamma [-] of Walker's mean-stress form, when known
    (from tests at several R ratios). ``source`` says where they come from
    (test data, or an estimate by name).
    """

    youngs_modulus: float
    cyclic_strength_coefficient: float
    cyclic_hardening_exponent: float
    fatigue_strength_coefficient: float
    fatigue_strength_exponent: float
    fatigue_ductility_coefficient: float
    fatigue_ductility_exponent: float
    source: str = "user data"
    walker_exponent: float | None = None

    def __post_init__(self):
        for name in ("youngs_modulus", "cyclic_strength_coefficient",
                     "cyclic_hardening_exponent", "fatigue_strength_coefficient",
                     "fatigue_ductility_coefficient"):
            v = getattr(self, name)
            if isinstance(v, bool) or not isinstance(v, (int, float)) or not (
                    math.isfinite(v) and v > 0):
                raise InvalidParameter(f"{name} {v!r} must be a positive number", field=name,
                                       value=v)
        for name in ("fatigue_strength_exponent", "fatigue_ductility_exponent"):
            v = getattr(self, name)
            if isinstance(v, bool) or not isinstance(v, (int, float)) or not (-1.5 < v < 0):
                raise InvalidParameter(f"{name} {v!r} must be negative (typically -0.05 to "
                                       f"-0.15 for b, -0.4 to -0.8 for c)", field=name, value=v)
        g = self.walker_exponent
        if g is not None and (isinstance(g, bool) or not isinstance(g, (int, float))
                              or not 0.0 < g <= 1.0):
            raise InvalidParameter(f"walker_exponent {g!r} must be in (0, 1] (1: no mean-"
                                   "stress effect)", field="walker_exponent", value=g)
        if not self.cyclic_hardening_exponent < 1:
            raise InvalidParameter("cyclic_hardening_exponent must be below 1",
                                   field="cyclic_hardening_exponent")

    def as_dict(self) -> dict:
        return asdict(self)

    def transition_reversals(self) -> float:
        r""":math:`2N_t`, where the elastic and plastic strain amplitudes are
        equal: :math:`2N_t = (\varepsilon_f' E/\sigma_f')^{1/(b-c)}`. [reversals]"""
        return (self.fatigue_ductility_coefficient * self.youngs_modulus
                / self.fatigue_strength_coefficient) ** (
            1.0 / (self.fatigue_strength_exponent - self.fatigue_ductility_exponent))

    def compatibility_gap(self, plastic_strain_amplitude: float) -> float:
        r"""How far the cyclic stress-strain curve and the strain-life curve
        disagree at a plastic strain amplitude: eliminating life from the
        two Coffin-Manson-Basquin terms gives a stress amplitude
        :math:`\sigma_f'(\varepsilon_p/\varepsilon_f')^{b/c}`, which constants
        fitted together match to Ramberg-Osgood's :math:`K'\varepsilon_p^{n'}`
        (the compatibility :math:`n' = b/c`, :math:`K' =
        \sigma_f'/\varepsilon_f'^{\,b/c}`: J. Morrow, "Cyclic plastic strain
        energy and fatigue of metals," in *Internal Friction, Damping, and
        Cyclic Plasticity*, ASTM STP 378, 1965, pp. 45-87). Returns the
        ratio of the two stresses minus one (0 for compatible constants;
        0 where the strain is not positive). [-]"""
        ep = float(plastic_strain_amplitude)
        if not ep > 0.0:
            return 0.0
        from_life = self.fatigue_strength_coefficient * (
            ep / self.fatigue_ductility_coefficient) ** (
            self.fatigue_strength_exponent / self.fatigue_ductility_exponent)
        from_curve = self.cyclic_strength_coefficient * ep ** self.cyclic_hardening_exponent
        return from_curve / from_life - 1.0


# ---------------------------------------------------------------------------- estimates

#: Estimates from tensile data, each named after its paper.
ESTIMATES = ("uniform_material_law", "medians", "hardness")


def estimate(method: str, *, ultimate_strength: float | None = None,
             youngs_modulus: float = 206_000.0, material_class: str = "steel",
             brinell_hardness: float | None = None) -> StrainLifeMaterial:
    r"""
    Strain-life constants estimated from tensile data or hardness.

    ``uniform_material_law`` (Bäumel and Seeger [1]_): steels
    :math:`\sigma_f' = 1.5S_u`, :math:`b = -0.087`, :math:`\varepsilon_f' =
    0.59\psi` (:math:`\psi = 1` for :math:`S_u/E \le 0.003`, else
    :math:`1.375 - 125 S_u/E`), :math:`c = -0.58`, :math:`K' = 1.65S_u`,
    :math:`n' = 0.15`; aluminium and titanium alloys :math:`1.67S_u`,
    :math:`-0.095`, 0.35, :math:`-0.69`, :math:`1.61S_u`, 0.11.
    ``medians`` (Meggiolaro and Castro [2]_, steels): :math:`1.5S_u`,
    :math:`-0.09`, 0.45, :math:`-0.59`, with the cyclic curve from
    compatibility (:math:`n' = b/c`, :math:`K' = \sigma_f'/\varepsilon_f'^{n'}`).
    ``hardness`` (Roessle and Fatemi [3]_, steels): :math:`\sigma_f' =
    4.25HB + 225`, :math:`\varepsilon_f' = (0.32HB^2 - 487HB + 191000)/E`,
    :math:`b = -0.09`, :math:`c = -0.56`, the cyclic curve from
    compatibility. Every estimate scatters by a factor of several in life
    (the papers' own comparisons); the result says it is one.

    References
    ----------
    .. [1] A. Bäumel and T. Seeger, *Materials Data for Cyclic Loading*,
       Supplement 1. Amsterdam: Elsevier, 1990.
    .. [2] M. A. Meggiolaro and J. T. P. Castro, "Statistical evaluation of
       strain-life fatigue crack initiation predictions," *Int. J. Fatigue*,
       vol. 26, pp. 463-476, 2004.
    .. [3] M. L. Roessle and A. Fatemi, "Strain-controlled fatigue
       properties of steels and some simple approximations," *Int. J.
       Fatigue*, vol. 22, pp. 495-511, 2000.

    (Constants recalled without the papers at hand; check against them.)
    """
    if method not in ESTIMATES:
        raise unknown("strain_life estimate", method, ESTIMATES)
    e = float(youngs_modulus)
    if method == "hardness":
        if brinell_hardness is None or not 80 <= brinell_hardness <= 700:
            raise InvalidParameter("the hardness estimate needs brinell_hardness (80-700 HB)",
                                   field="brinell_hardness", value=brinell_hardness)
        hb = float(brinell_hardness)
        sf, b = 4.25 * hb + 225.0, -0.09
        ef, c = (0.32 * hb * hb - 487.0 * hb + 191_000.0) / e, -0.56
        n = b / c
        return StrainLifeMaterial(e, sf / ef ** n, n, sf, b, ef, c,
                                  "estimate: hardness method (Roessle and Fatemi 2000)")
    if ultimate_strength is None or not 100 <= ultimate_strength <= 3000:
        raise InvalidParameter(f"the {method} estimate needs ultimate_strength (100-3000 MPa)",
                               field="ultimate_strength", value=ultimate_strength)
    su = float(ultimate_strength)
    if method == "uniform_material_law":
        if material_class == "steel":
            psi = 1.0 if su / e <= 0.003 else 1.375 - 125.0 * su / e
            return StrainLifeMaterial(e, 1.65 * su, 0.15, 1.5 * su, -0.087, 0.59 * psi, -0.58,
                                      "estimate: uniform material law, steels (Bäumel and "
                                      "Seeger 1990)")
        if material_class == "aluminium":
            return StrainLifeMaterial(e, 1.61 * su, 0.11, 1.67 * su, -0.095, 0.35, -0.69,
                                      "estimate: uniform material law, aluminium and titanium "
                                      "(Bäumel and Seeger 1990)")
        raise unknown("material_class", material_class, ("steel", "aluminium"))
    if material_class != "steel":
        raise InvalidParameter("the medians estimate is for steels", field="material_class")
    sf, b, ef, c = 1.5 * su, -0.09, 0.45, -0.59
    n = b / c
    return StrainLifeMaterial(e, sf / ef ** n, n, sf, b, ef, c,
                              "estimate: medians method, steels (Meggiolaro and Castro 2004)")


def reversals_to_failure(strain_amplitude, material: StrainLifeMaterial, *,
                         mean_stress=None, max_stress=None,
                         mean_stress_method: str = "morrow") -> np.ndarray:
    r"""
    :math:`2N_f` of each loop from Coffin-Manson-Basquin. [reversals]

    ``morrow``: :math:`\varepsilon_a = (\sigma_f' - \sigma_m)/E\,(2N)^b +
    \varepsilon_f'(2N)^c` (0 where :math:`\sigma_m \ge \sigma_f'`);
    ``smith_watson_topper``: :math:`\sigma_{max}\varepsilon_a =
    \sigma_f'^2/E\,(2N)^{2b} + \sigma_f'\varepsilon_f'(2N)^{b+c}` (inf, no
    damage, where :math:`\sigma_{max} \le 0`); ``walker``: the fully reversed
    curve at a shifted life, :math:`\varepsilon_a = \sigma_f'/E\,(2N)^b
    \left(\frac{1-R}{2}\right)^{1-\gamma} + \varepsilon_f'(2N)^c
    \left(\frac{1-R}{2}\right)^{(1-\gamma)c/b}` with
    :math:`(1-R)/2 = \sigma_a/\sigma_{max}` and :math:`\gamma` the
    material's ``walker_exponent`` (Walker's :math:`\sigma_{ar} =
    \sigma_{max}^{1-\gamma}\sigma_a^\gamma` carried into both terms, as in
    N. E. Dowling, "Mean stress effects in strain-life fatigue," *Fatigue
    Fract. Eng. Mater. Struct.*, vol. 32, pp. 1004-1019, 2009; inf where
    :math:`\sigma_{max} \le 0`); ``none``: no mean term.
    Solved for :math:`\log 2N` by Halley's method (the right side falls
    monotonically with life; :func:`_solve_life`); for many loops read from
    one table of the equation's reduced form (:func:`life_table`), which
    gives the solved lives to ~1e-10.
    """
    m = material
    if mean_stress_method not in STRAIN_MEAN_STRESS:
        raise unknown("mean_stress_method", mean_stress_method, STRAIN_MEAN_STRESS)
    # A form's own inputs must be given: a peak left out would read as 0 (no
    # damage under SWT and Walker), a mean left out as 0 (Morrow's benefit
    # or penalty lost) without a word.
    needs = {"morrow": ("mean_stress",), "smith_watson_topper": ("max_stress",),
             "walker": ("mean_stress", "max_stress"), "none": ()}[mean_stress_method]
    given = {"mean_stress": mean_stress, "max_stress": max_stress}
    missing = [k for k in needs if given[k] is None]
    if missing:
        raise InvalidParameter(f"the {mean_stress_method} form needs {' and '.join(missing)} "
                               "of each loop", field=missing[0])
    ea = np.asarray(strain_amplitude, dtype=np.float64)

    def loops(v):
        # Contiguous and writeable (one compiled signature): broadcast views
        # are read-only, so they are copied.
        return np.require(np.broadcast_to(0.0 if v is None else v, ea.shape), np.float64,
                          ["C", "W"]).ravel()

    out = np.empty(ea.size)
    loop_lives(loops(ea), loops(mean_stress), loops(max_stress), m, mean_stress_method, out)
    return out.reshape(ea.shape)


#: Codes of the mean-stress forms inside the kernels.
FORM_CODES = {"none": 0, "morrow": 1, "smith_watson_topper": 2, "walker": 3}


def loop_lives(strain_amplitude, mean_stress, max_stress, material: StrainLifeMaterial,
               mean_stress_method: str, out) -> np.ndarray:
    """:func:`reversals_to_failure` into ``out`` for contiguous float64
    arrays of the loops (the local analysis's own path: no copies)."""
    m = material
    form = FORM_CODES[mean_stress_method]
    gamma = m.walker_exponent
    if form == 3 and gamma is None:
        raise InvalidParameter("the walker form needs the material's walker_exponent "
                               "(gamma, from tests at several R ratios)",
                               field="walker_exponent")
    b, c = m.fatigue_strength_exponent, m.fatigue_ductility_exponent
    e1, e2 = (2.0 * b, b + c) if form == 2 else (b, c)
    tabled = out.shape[0] >= TABLED_LOOPS
    _loop_lives(strain_amplitude, mean_stress, max_stress, form, float(m.youngs_modulus),
                float(m.fatigue_strength_coefficient), float(b),
                float(m.fatigue_ductility_coefficient), float(c),
                1.0 if gamma is None else float(gamma),
                life_table(float(e1), float(e2)) if tabled else _NO_TABLE, tabled, out)
    return out


@kernel
def _loop_lives(ea, sm, smax, form, e_mod, sf, b, ef, c, gamma, tab, tabled, out):
    """``out[i]`` = 2N of loop i under ``form`` (:data:`FORM_CODES`): the
    root of ``a (2N)^e1 + a2 (2N)^e2 = t`` (Morrow: t = ea, a = (sf - sm)/E;
    SWT: t = smax ea, a = sf^2/E, exponents 2b and b + c; none and Walker:
    t = ea, a = sf/E, Walker's life then shifted); inf (no damage) where
    there is nothing to solve (no strain, an SWT or Walker peak not
    tensile), 0 where Morrow's mean has reached sigma_f'. From
    :func:`life_table` when ``tabled`` (solved outside its span), else by
    :func:`_solve_life`."""
    if form == 2:
        e1, e2, a2, a_fixed = 2.0 * b, b + c, sf * ef, sf * sf / e_mod
    else:
        e1, e2, a2, a_fixed = b, c, ef, sf / e_mod
    d = e1 - e2
    la2 = math.log(a2)
    # Where a is the same for every loop (all but Morrow), so are lambda and C.
    la_fixed = math.log(a_fixed)
    ll_fixed = (la2 - la_fixed) / d
    walker = (1.0 - gamma) / b
    for i in range(ea.shape[0]):
        shift = 1.0
        a, la, ll = a_fixed, la_fixed, ll_fixed
        if form == 2:
            t = smax[i] * ea[i] if smax[i] > 0.0 else 0.0
        else:
            t = ea[i]
            if form == 1:
                a = (sf - sm[i]) / e_mod
            elif form == 3:
                sa = smax[i] - sm[i]
                if not (smax[i] > 0.0 and sa > 0.0):
                    t = 0.0
                else:
                    # The fully reversed life shifted: 2N = 2N_0 / ((1 - R)/2)^((1 - gamma)/b).
                    shift = (sa / smax[i]) ** walker
        if not t > 0.0:
            out[i] = math.inf
            continue
        if a <= 0.0:
            out[i] = 0.0
            continue
        if tabled:
            # 2N = lambda z, lambda = (a2/a)^(1/d), z from the reduced equation.
            if form == 1:
                la = math.log(a)
                ll = (la2 - la) / d
            inside, v = table_value(tab, math.log(t) - la - e1 * ll)
            life = math.exp(ll + v) if inside else _solve_life(t, a, e1, a2, e2)
        else:
            life = _solve_life(t, a, e1, a2, e2)
        out[i] = life / shift


@kernel
def _solve_life(t, a, e1, a2, e2):
    """2N solving ``a (2N)^e1 + a2 (2N)^e2 = t`` (both exponents negative,
    ``t``, ``a``, ``a2`` > 0).

    Halley's method in y = ln 2N from the later of the two terms' own
    solutions (both lie left of the root): f(y) = a e^{e1 y} + a2 e^{e2 y} - t
    is convex and falling, and Halley's step (cubic convergence; the
    exponentials serve f and both its derivatives; Newton's where Halley's
    is not to be trusted) needs about four steps where Newton's alone took
    eight. Stopped once a step is below 1e-9 of max(1, |y|): the error left
    is of the order of its cube, far below round-off.
    """
    # Each term alone reaches the target left of the root (the other
    # is still positive there): start from the later of the two.
    y = max(math.log(t / a) / e1, math.log(t / a2) / e2)
    for _ in range(100):
        p1 = a * math.exp(e1 * y)
        p2 = a2 * math.exp(e2 * y)
        f = p1 + p2 - t
        d1 = e1 * p1 + e2 * p2
        d2 = e1 * e1 * p1 + e2 * e2 * p2
        newton = f / d1
        # Halley's step is Newton's over (1 - L); far from the root
        # (L >= 1/2) it is not to be trusted, and Newton's step, which
        # never overshoots on this convex falling curve, is taken.
        lean = 0.5 * f * d2 / (d1 * d1)
        step = newton / (1.0 - lean) if abs(lean) < 0.5 else newton
        y -= step
        if abs(step) < 1e-9 * max(1.0, abs(y)):
            break
    return math.exp(y)


#: Loops from which lives are read from :func:`life_table` (building one
#: solves its 32768 nodes once; a reserve search then reads it at each
#: trial), its nodes, and its span in v = ln z either side of 0 (lives from
#: 4e-18 to 2e17 times the scale lambda, itself near the transition life;
#: beyond it lives are solved).
TABLED_LOOPS = 8192
_LIFE_NODES = 32768
_LIFE_SPAN = 40.0
_NO_TABLE = np.zeros((3, 2))
_NO_TABLE.flags.writeable = False      # typed as the cached tables are


@functools.lru_cache(maxsize=32)
def life_table(e1: float, e2: float) -> np.ndarray:
    r"""The solution of :math:`z^{e_1} + z^{e_2} = e^u` as a table of
    :math:`v = \ln z` over :math:`u` (``_hermite.py``), for exponents
    :math:`e_1 > e_2` (both negative).

    Every loop's equation :math:`a (2N)^{e_1} + a_2 (2N)^{e_2} = t` comes to
    this one by :math:`2N = \lambda z` with :math:`\lambda =
    (a_2/a)^{1/(e_1 - e_2)}`, which makes both coefficients
    :math:`C = a\lambda^{e_1}`: :math:`u = \ln(t/C)`. So one table per
    material and mean-stress form serves every loop (Morrow's mean changes
    only :math:`a`). Cached: a reserve search asks for the same lives again
    at each trial.
    """
    span = _LIFE_SPAN
    u_lo = math.log(math.exp(e1 * span) + math.exp(e2 * span))
    u_hi = math.log(math.exp(-e1 * span) + math.exp(-e2 * span))
    out, h = empty_table(u_lo, u_hi, _LIFE_NODES)
    _fill_life_table(e1, e2, u_lo, h, out[1:])
    out.flags.writeable = False
    return out


@kernel
def _fill_life_table(e1, e2, u0, h, out):
    """Nodes ``u0 + i h``: ``out[i] = (v, dv/du)`` with v = ln z solving
    ``z^e1 + z^e2 = e^u``."""
    for i in range(out.shape[0]):
        v = math.log(_solve_life(math.exp(u0 + i * h), 1.0, e1, 1.0, e2))
        p1 = math.exp(e1 * v)
        p2 = math.exp(e2 * v)
        out[i, 0] = v
        out[i, 1] = (p1 + p2) / (e1 * p1 + e2 * p2)
