r"""Strain-life: the local strain approach for notches and low-cycle loading.

Where a notch yields locally, elastic stresses misjudge life; the local
strain approach follows the stress and strain at the notch root instead.

1. **Input.** A nominal stress history with the notch's :math:`K_t` (or
   :math:`K_f`), or an elastic local stress (finite elements,
   superposition) with :math:`K_t = 1`: the *pseudo-elastic* local stress
   :math:`e(t) = K_t S(t)`. Or a gauge at the notch root: the local strain
   itself (``input = "local_strain"``).
2. **Cyclic stress-strain curve** (Ramberg-Osgood [1]_):
   :math:`\varepsilon = \sigma/E + (\sigma/K')^{1/n'}`; the hysteresis
   branches by Masing's rule, the curve doubled:
   :math:`\Delta\varepsilon = \Delta\sigma/E + 2(\Delta\sigma/2K')^{1/n'}`.
3. **Elastic to local.** Neuber's rule [2]_, :math:`\sigma\varepsilon =
   e^2/E` (:math:`\Delta\sigma\Delta\varepsilon = \Delta e^2/E` on a
   branch), or Glinka's equal strain-energy density [3]_,
   :math:`\sigma^2/2E + \sigma/(1+n')\,(\sigma/K')^{1/n'} = e^2/2E` (on a
   branch :math:`\Delta\sigma^2/2E + 2\Delta\sigma/(1+n')\,
   (\Delta\sigma/2K')^{1/n'} = \Delta e^2/2E`). Each branch relation is the
   first-loading one doubled, so one solver serves both.
4. **Memory.** Turning points are followed in order with the material's
   memory (a closed loop is forgotten and the branch it interrupted goes
   on; beyond the largest excursion so far the first-loading curve
   continues), so every loop has its own tips, mean stress and strain
   amplitude; the cycles assessed are those of ASTM E1049-85 rainflow
   counting of the same history (the residue as half cycles, as in the
   stress-life path).
5. **Life** by Coffin-Manson-Basquin [4]_, :math:`\varepsilon_a =
   \sigma_f'/E\,(2N)^b + \varepsilon_f'(2N)^c`, with Morrow's mean stress
   (:math:`\sigma_f' - \sigma_m` in the elastic term) [5]_ or Smith, Watson
   and Topper's :math:`\sigma_{max}\varepsilon_a = \sigma_f'^2/E\,(2N)^{2b}
   + \sigma_f'\varepsilon_f'(2N)^{b+c}` [6]_; Miner's rule sums the loops.

References
----------
.. [1] W. Ramberg and W. R. Osgood, "Description of stress-strain curves by
   three parameters," NACA TN 902, 1943.
.. [2] H. Neuber, "Theory of stress concentration for shear-strained
   prismatical bodies with arbitrary nonlinear stress-strain law," *J.
   Appl. Mech.*, vol. 28, pp. 544-550, 1961.
.. [3] K. Molski and G. Glinka, "A method of elastic-plastic stress and
   strain calculation at a notch root," *Mater. Sci. Eng.*, vol. 50,
   pp. 93-100, 1981.
.. [4] S. S. Manson, "Behavior of materials under conditions of thermal
   stress," NACA TN 2933, 1953; L. F. Coffin, *Trans. ASME*, vol. 76,
   pp. 931-950, 1954.
.. [5] J. Morrow, in *Fatigue Design Handbook*, AE-4, SAE, 1968, sec. 3.2.
.. [6] K. N. Smith, P. Watson and T. H. Topper, *J. Mater.*, vol. 5, no. 4,
   pp. 767-778, 1970.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from .errors import InvalidParameter, unknown
from .rainflow import astm_e1049, turning_points
# The notch root's stress and strain: one import path.
from .strain_life_local import (Memory, Notch, cyclic_strain, follow, local_states,
                                loop_states, masing_strain_range, origins)
# The material, its estimates and its life curve: one import path.
from .strain_life_material import (TABLED_LOOPS, ESTIMATES, MEAN_STRESS_NAMES,
                                   STRAIN_MEAN_STRESS, StrainLifeMaterial, estimate,
                                   loop_lives, reversals_to_failure)

__all__ = ["INPUTS", "NOTCH_RULES", "STRAIN_MEAN_STRESS", "MEAN_STRESS_NAMES", "ESTIMATES",
           "StrainLifeMaterial", "estimate", "reversals_to_failure", "validity_cautions",
           "cyclic_strain", "masing_strain_range", "Memory", "follow", "local_states",
           "input_of_stored", "pseudo_of_stored", "StrainLifeAssessment", "assess_strain_life",
           "warm_up"]

#: How the history relates to the notch root.
INPUTS = ("nominal", "local_elastic", "local_strain")
#: Elastic-to-local rules (for the stress inputs).
NOTCH_RULES = ("neuber", "glinka")
def input_of_stored(material: StrainLifeMaterial, input_kind: str) -> float:
    """The factor from a channel as the service stores it [MPa] to the
    engine's input: 1 for stresses, 1/E for a notch-root strain (stored as
    E times strain, so send it with the material's E as youngs_modulus)."""
    return 1.0 / material.youngs_modulus if input_kind == "local_strain" else 1.0


def pseudo_of_stored(material: StrainLifeMaterial, params: dict) -> tuple[float, str]:
    """``(factor, rule)`` that turn a stored channel [MPa] into what the
    notch is followed with: Kt times a nominal stress, an elastic local
    stress as it is, a notch-root strain as strain (rule ``strain``)."""
    kind = params["input_kind"]
    if kind == "nominal":
        return float(params["kt"]), params["rule"]
    if kind == "local_strain":
        return input_of_stored(material, kind), "strain"
    return 1.0, params["rule"]


# ---------------------------------------------------------------------------- assessment


@dataclass(frozen=True)
class StrainLifeAssessment:
    """The local strain assessment of a point.

    ``damage`` [-] of one pass (residue as half cycles); ``life_repeats``
    [-] until ``allowable_damage``; ``life_hours`` [h]; ``reserve_factor``
    [-] on the input history, ``reserve_limited_by`` ``fatigue`` or
    ``static_strength`` (a static overload sets it); ``loops``: per counted cycle the local
    ``strain_amplitude`` [-], ``stress_mean`` and ``stress_max`` [MPa],
    ``reversals_to_failure`` [-] and ``damage`` [-].
    """

    damage: float
    life_repeats: float
    life_hours: float | None
    life_cycles: float
    reserve_factor: float | None
    reserve_limited_by: str | None
    cycles_counted: float
    max_strain_amplitude: float
    max_stress: float
    flags: tuple
    loops: dict
    material: dict
    method: dict

    def top_loops(self, k: int = 10) -> list[dict]:
        order = np.argsort(-self.loops["damage"], kind="stable")[:k]
        return [{name: float(col[i]) if name != "start_index" and name != "end_index"
                 else int(col[i]) for name, col in self.loops.items()} for i in order
                if self.loops["damage"][i] > 0]


class _Counted:
    """The cycles and turning points of an input history, counted once: they
    do not change when the history is scaled (the gate scaled with it), nor
    does the material's memory (which branch each turning point lies on),
    so the reserve search only reads the local states again at each trial
    scale."""

    def __init__(self, samples, input_kind, kt, residue, gate):
        x = np.asarray(samples, dtype=np.float64)
        if input_kind == "nominal":
            x = kt * x
            gate = kt * gate
        self.table = astm_e1049(x, gate=gate, residue=residue)
        idx = turning_points(x, gate=gate)[0]
        self.points = x[idx]
        # Each cycle's tips as positions among the turning points: through a
        # map from sample index to position (a binary search per tip cost
        # three times the counting).
        where = np.empty(x.shape[0], np.int32 if idx.shape[0] < 2**31 else np.int64)
        where[idx] = np.arange(idx.shape[0])
        self.pos_a = where[self.table.start_index]
        self.pos_b = where[self.table.end_index]
        self.org = origins(self.points)[0]
        self.largest = float(np.max(np.abs(self.points), initial=0.0))

    def evaluate(self, material, input_kind, rule, mean_stress_method, scale=1.0):
        """Per-loop local values and damage at ``scale`` times the input."""
        code = "strain" if input_kind == "local_strain" else rule
        sig, eps = np.empty(self.points.shape[0]), np.empty(self.points.shape[0])
        Notch(material, code, self.largest * scale).states(self.points * scale, self.org, 0,
                                                           sig, eps)
        n = self.pos_a.shape[0]
        strain_amp, mean, smax, nf = np.empty(n), np.empty(n), np.empty(n), np.empty(n)
        loop_states(sig, eps, self.pos_a, self.pos_b, strain_amp, mean, smax)
        loop_lives(strain_amp, mean, smax, material, mean_stress_method, nf)
        nf *= 0.5
        # No life (a static overload): infinite damage; infinite life: none.
        with np.errstate(divide="ignore"):
            dmg = self.table.count / nf
        return strain_amp, mean, smax, nf, dmg


def _reserve(counted, material, input_kind, rule, mean_stress_method, damage,
             allowable_damage) -> tuple[float | None, str | None]:
    """The factor on the input that brings the damage to ``allowable_damage``:
    the root of log(D(s)/D_allow) in log s, bracketed by secant steps, then
    by inverse quadratic interpolation kept inside the bracket (bisection
    when it strays or stalls), each trial the notch followed again
    (plasticity makes D(s) no power law, but a smooth one). The stress-life
    search (``_batch_kernels.reserve_step``) steps by Newton on the exact
    slope each pass gives; a local analysis gives none (carrying one
    through it was measured no faster), hence this derivative-free one. Returns ``(factor, limited_by)``:
    ``static_strength`` when the damage jumps past the allowable sum at a
    static overload (a trial beyond it has a loop with no life: Morrow's
    mean or SWT's peak past the strength), the factor then being that
    onset; ``(None, None)`` if no factor in [1e-4, 1e4] does it."""
    def f(log_s):
        d = float(np.sum(counted.evaluate(material, input_kind, rule, mean_stress_method,
                                          math.exp(log_s))[4]))
        # An overload (inf) or no damage (0) at a trial: a large finite
        # value of the right sign, so the interpolation stays defined.
        if d == math.inf or np.isnan(d):
            return _BIG
        return math.log(d / allowable_damage) if d > 0 else -_BIG

    a, fa = 0.0, math.log(damage / allowable_damage)
    if fa == 0.0:
        return 1.0, "fatigue"
    # A first guess as if damage went with the load to the power 5; until
    # the root is bracketed, secant steps from the last two trials (5 %
    # beyond, to bracket it), at most 3 in ln s a step.
    step = max(min(-fa / 5.0, 3.0), -3.0)
    b, fb = a + step, f(a + step)
    while (fa < 0) == (fb < 0):
        if abs(b) > 9.2:
            return None, None
        slope = (fb - fa) / (b - a)
        nxt = b - 1.05 * fb / slope if abs(fb) < _BIG and slope > 0 else b + step
        nxt = b + max(min(nxt - b, 3.0), -3.0) if (nxt - b) * step > 0 else b + step
        a, fa = b, fb
        b, fb = nxt, f(nxt)
    # Bracketed: inverse quadratic interpolation through the three latest
    # trials (a secant through two at first) while it falls inside the
    # bracket and shrinks |f| well, else bisection (the scheme of Brent's
    # method); stopped once |ln(D/D_allow)| < _DONE, which holds the factor
    # to ~1e-8 (the damage grows at least linearly with it), or with one
    # last interpolation once below _CLOSE.
    lo, flo, hi, fhi = (a, fa, b, fb) if a < b else (b, fb, a, fa)
    trials = [(x, fx) for x, fx in ((a, fa), (b, fb)) if abs(fx) < _BIG]
    for _ in range(100):
        c = _interpolated_root(trials[-3:])
        if c is None or not lo < c < hi:
            c = 0.5 * (lo + hi)
        fc = f(c)
        if abs(fc) < _DONE:
            return math.exp(c), "fatigue"
        if (fc < 0) == (flo < 0):
            lo, flo = c, fc
        else:
            hi, fhi = c, fc
        if hi - lo < 1e-12:
            break
        if abs(fc) >= _BIG or (trials and abs(fc) > 0.5 * abs(trials[-1][1])):
            trials = []          # poor progress: bisect next
        else:
            trials.append((c, fc))
            # Close: the next interpolation through three trials is taken
            # without following the notch again (its error, of the order
            # of |f|^1.8, is far below _DONE: 3.8e-6 left 8e-12, 2e-6
            # left 1e-13 on the benchmark's histories), as the
            # stress-life search takes its last Newton step.
            nxt = _interpolated_root(trials[-3:]) if len(trials) >= 3 else None
            if abs(fc) < _CLOSE and nxt is not None and lo < nxt < hi:
                return math.exp(nxt), "fatigue"
    # The damage jumps at a static overload: the factor is its onset (the
    # last scale without one), not a fatigue root.
    if fhi >= _BIG and flo < -1e-6:
        return math.exp(lo), "static_strength"
    return math.exp(0.5 * (lo + hi)), "fatigue"


def _interpolated_root(points) -> float | None:
    """The root of the inverse quadratic through three ``(x, f)`` points (the
    secant through two), or None with fewer or with repeated f."""
    if len(points) < 2:
        return None
    fs = [p[1] for p in points]
    if len(set(fs)) < len(fs):
        return None
    if len(points) == 2:
        (x0, f0), (x1, f1) = points
        return x1 - f1 * (x1 - x0) / (f1 - f0)
    (x0, f0), (x1, f1), (x2, f2) = points
    return (x0 * f1 * f2 / ((f0 - f1) * (f0 - f2)) + x1 * f0 * f2 / ((f1 - f0) * (f1 - f2))
            + x2 * f0 * f1 / ((f2 - f0) * (f2 - f1)))


#: Stands for an infinite log damage ratio in the reserve search; the
#: |ln(D/D_allow)| that ends it (the stress-life search's), and below which
#: its last interpolation is taken without another trial.
_BIG = 1e3
_DONE = 1e-8
_CLOSE = 1e-5


#: Lives outside the span strain-controlled fatigue tests usually cover
#: (common practice: a few cycles to about 1e7 cycles). [reversals]
SHORT_LIFE_REVERSALS = 10.0
LONG_LIFE_REVERSALS = 2e7
#: Share of the damage in loops beyond LONG_LIFE_REVERSALS that is cautioned.
LONG_LIFE_SHARE = 0.1


#: Disagreement of the two curves (``compatibility_gap``) that is cautioned.
COMPATIBILITY_GAP = 0.2


def validity_cautions(loops: dict, material: StrainLifeMaterial | None = None) -> list:
    """Cautions for loops whose lives lie outside the usual span of the
    strain-life data: below :data:`SHORT_LIFE_REVERSALS` (the notch near
    ductile exhaustion; a static overload, life 0, is flagged on its own),
    and a share above :data:`LONG_LIFE_SHARE` of the damage in loops beyond
    :data:`LONG_LIFE_REVERSALS` (the elastic line extrapolated); given the
    material, constants whose two curves disagree by more than
    :data:`COMPATIBILITY_GAP` at the largest loop's plastic strain."""
    from .cautions import caution

    rev, dmg = loops["reversals_to_failure"], loops["damage"]
    out = []
    if material is not None and rev.shape[0]:
        i = int(np.argmax(loops["strain_amplitude"]))
        amplitude = loops["stress_max"][i] - loops["stress_mean"][i]
        ep = float(loops["strain_amplitude"][i] - amplitude / material.youngs_modulus)
        gap = material.compatibility_gap(ep)
        if abs(gap) > COMPATIBILITY_GAP:
            out.append(caution("strain_life_incompatible", gap=gap, strain=ep,
                               ratio=material.fatigue_strength_exponent
                               / material.fatigue_ductility_exponent,
                               n=material.cyclic_hardening_exponent))
    short = (rev > 0.0) & (rev < SHORT_LIFE_REVERSALS)
    if short.any():
        out.append(caution("strain_life_short_lives", count=int(short.sum()),
                           limit=SHORT_LIFE_REVERSALS, least=float(rev[short].min())))
    total = float(np.sum(dmg))
    if 0.0 < total < math.inf:
        share = float(np.sum(dmg[np.isfinite(rev) & (rev > LONG_LIFE_REVERSALS)])) / total
        if share > LONG_LIFE_SHARE:
            out.append(caution("strain_life_long_lives", share=share,
                               limit=LONG_LIFE_REVERSALS))
    return out


def assess_strain_life(samples, material: StrainLifeMaterial, *, input_kind: str = "nominal",
                       rule: str = "neuber", kt: float = 1.0,
                       mean_stress_method: str = "morrow", allowable_damage: float = 1.0,
                       residue: str = "half_cycles", gate: float = 0.0,
                       duration_s: float | None = None,
                       reserve_factor: bool = True) -> StrainLifeAssessment:
    """
    Assess a history by the local strain approach (module notes).

    Parameters
    ----------
    samples : array-like
        Nominal stress [MPa] (``nominal``, with ``kt``), elastic local
        stress [MPa] (``local_elastic``) or local strain [-]
        (``local_strain``), in time order.
    material : StrainLifeMaterial
    rule : str
        ``neuber`` or ``glinka`` for the stress inputs.
    kt : float
        Elastic stress concentration (or fatigue notch) factor for
        ``nominal``. [-]
    mean_stress_method : str
        ``morrow``, ``smith_watson_topper`` or ``none``.
    gate : float
        Hysteresis gate on the input (pseudo stress [MPa] or strain [-]).
    reserve_factor : bool
        Search the factor on the input that brings the damage to
        ``allowable_damage`` (each trial a full local analysis).
    """
    if input_kind not in INPUTS:
        raise unknown("input", input_kind, INPUTS)
    if rule not in NOTCH_RULES:
        raise unknown("notch_rule", rule, NOTCH_RULES)
    if mean_stress_method not in STRAIN_MEAN_STRESS:
        raise unknown("mean_stress_method", mean_stress_method, STRAIN_MEAN_STRESS)
    if isinstance(kt, bool) or not isinstance(kt, (int, float)) or not 1.0 <= kt <= 20.0:
        raise InvalidParameter(f"kt {kt!r} must be in [1, 20]", field="kt", value=kt)
    if input_kind != "nominal" and kt != 1.0:
        raise InvalidParameter("kt applies to a nominal stress input", field="kt", value=kt)
    counted = _Counted(samples, input_kind, kt, residue, gate)
    table = counted.table
    strain_amp, mean, smax, nf, dmg = counted.evaluate(material, input_kind, rule,
                                                       mean_stress_method)
    damage = float(np.sum(dmg))
    total = float(np.sum(table.count))
    life = math.inf if damage == 0.0 else allowable_damage / damage
    flags = []
    if len(table) == 0:
        flags.append("no_cycles")
    if np.any(nf == 0.0):
        flags.append("static_overload")
        damage, life = math.inf, 0.0
    elif damage >= allowable_damage:
        flags.append("allowable_reached")
    reserve, limited = None, None
    if reserve_factor and 0.0 < damage < math.inf:
        reserve, limited = _reserve(counted, material, input_kind, rule, mean_stress_method, damage,
                           allowable_damage)
    loops = {"start_index": table.start_index, "end_index": table.end_index,
             "count": table.count, "strain_amplitude": strain_amp, "stress_mean": mean,
             "stress_max": smax, "reversals_to_failure": 2.0 * nf, "damage": dmg}
    return StrainLifeAssessment(
        damage=damage, life_repeats=life,
        life_hours=None if duration_s is None else life * duration_s / 3600.0,
        life_cycles=math.inf if math.isinf(life) else life * total,
        reserve_factor=reserve, reserve_limited_by=limited, cycles_counted=total,
        max_strain_amplitude=float(strain_amp.max()) if len(table) else 0.0,
        max_stress=float(smax.max()) if len(table) else 0.0, flags=tuple(flags),
        loops=loops, material=material.as_dict(),
        method={"input": input_kind, "notch_rule": None if input_kind == "local_strain"
                else rule, "kt": kt, "mean_stress_method": mean_stress_method,
                "allowable_damage": allowable_damage, "residue": residue, "gate": gate})


def warm_up() -> None:
    """Compile (or load from cache) the local analysis and life kernels:
    one assessment with its reserve search, a follow from a memory, and
    lives read from a table."""
    m = StrainLifeMaterial(206_000.0, 1150.0, 0.16, 1050.0, -0.085, 0.45, -0.6)
    x = np.array([0.0, 300.0, -200.0, 500.0, -450.0, 100.0, -50.0, 400.0] * 4)
    assess_strain_life(x, m, kt=2.0, mean_stress_method="morrow")
    _, _, memory = follow(x[:5], m, "glinka")
    follow(x[5:], m, "glinka", memory)
    # Many loops read their lives from a table: its kernels too.
    many = np.full(TABLED_LOOPS, 0.004)
    reversals_to_failure(many, m, mean_stress=many * 0.0, mean_stress_method="morrow")
