"""S-N curves: cycles to failure as a function of stress range.

One representation serves every curve: a piecewise power law in log-log
coordinates on *stress range*, N * S^m = constant on each segment, with an
optional cut-off below which a cycle does no damage. Amplitude-form curves
(Basquin's sigma_a = sigma_f' (2N)^b) are converted to range form when built.
Partial factors, thickness corrections and the treatment of cycles below the
fatigue limit act on this one object, so every source of curve behaves alike.
"""

from __future__ import annotations

from dataclasses import dataclass, field, replace
from functools import cached_property

import numpy as np

from .errors import InvalidParameter, unknown

#: Treatments of cycles below the constant-amplitude fatigue limit (the first
#: knee). ``curve``: as the curve is defined; ``ignore``: no damage below the
#: limit; ``haibach``: continue with slope 2m - 1; ``first_slope``: continue
#: with the first slope and no cut-off (elementary Miner, conservative).
BELOW_LIMIT_TREATMENTS = ("curve", "ignore", "haibach", "first_slope")

#: What a curve stands for (see ``SNCurve.family``).
CURVE_FAMILIES = ("welded", "welded_shear", "estimate", "material", "user")


@dataclass(frozen=True)
class SNCurve:
    r"""A piecewise power-law S-N curve on stress range.

    Attributes
    ----------
    slopes : tuple of float
        Inverse slope m of each segment, from high stress to low. [-]
    knee_cycles : tuple of float
        Cycles at the knees between segments, increasing
        (``len(slopes) - 1`` of them). [cycles]
    reference_range, reference_cycles : float
        One point on the first segment. [MPa], [cycles]
    cutoff_cycles : float or None
        Cycles at the cut-off: ranges below the curve's range there do no
        damage. ``None``: the last segment goes on for ever. [cycles]
    name, source : str
        Designation and the published source (or "user" / "estimate").
    fatigue_limit_cycles : float or None
        Cycles at the constant-amplitude fatigue limit, if the curve has one
        (used by the below-limit treatments). [cycles]
    notes : tuple of str
        Anything a reader of a result should know about this curve.
    segment_log_a : tuple or None
        Per segment, the tabulated :math:`\log_{10} a` of
        :math:`N = a\,\Delta\sigma^{-m}`, for codes that tabulate each
        segment on its own (DNV-RP-C203's log a2): that segment then starts at
        the range where the one above reaches its knee and follows its own
        intercept, so a small step at the knee is kept as published. ``None``
        (or a ``None`` entry): the segment continues the one above. The
        first entry is ignored (the reference point fixes the first segment).
    family : str
        What the curve stands for, which decides the checks made with it:
        ``welded`` (a code's curve for welded details, as-welded: assessed on
        range), ``welded_shear`` (a code's shear curve), ``estimate`` (from
        tensile data), ``material`` (a material's Basquin curve) or ``user``.
    stress_ratio : float or None
        R of the tests behind the curve when it is known (-1: fully
        reversed); ``None``: not stated. [-]
    """

    slopes: tuple
    knee_cycles: tuple
    reference_range: float
    reference_cycles: float
    cutoff_cycles: float | None = None
    name: str = "curve"
    source: str = "user"
    fatigue_limit_cycles: float | None = None
    notes: tuple = field(default=())
    segment_log_a: tuple | None = None
    family: str = "user"
    stress_ratio: float | None = None

    def __post_init__(self):
        slopes = tuple(float(m) for m in self.slopes)
        knees = tuple(float(n) for n in self.knee_cycles)
        object.__setattr__(self, "slopes", slopes)
        object.__setattr__(self, "knee_cycles", knees)
        if not slopes or any(not np.isfinite(m) or m <= 0 for m in slopes):
            raise InvalidParameter(f"slopes {list(slopes)} must all be positive",
                                   field="slopes", value=list(slopes), limit=0.0)
        if len(knees) != len(slopes) - 1:
            raise InvalidParameter(
                f"{len(slopes)} slopes need {len(slopes) - 1} knee_cycles, got {len(knees)}",
                field="knee_cycles")
        if any(not np.isfinite(n) or n <= 0 for n in knees) or any(
                b <= a for a, b in zip(knees, knees[1:])):
            raise InvalidParameter(f"knee_cycles {list(knees)} must be positive and increasing",
                                   field="knee_cycles", value=list(knees))
        for name in ("reference_range", "reference_cycles"):
            v = getattr(self, name)
            if not np.isfinite(v) or v <= 0:
                raise InvalidParameter(f"{name} {v} must be positive", field=name, value=v,
                                       limit=0.0)
        if self.family not in CURVE_FAMILIES:
            raise unknown("family", self.family, CURVE_FAMILIES)
        if self.segment_log_a is not None:
            log_a = tuple(None if v is None else float(v) for v in self.segment_log_a)
            if len(log_a) != len(slopes) or any(v is not None and not np.isfinite(v)
                                                for v in log_a):
                raise InvalidParameter(
                    f"segment_log_a needs one finite value (or None) per segment, "
                    f"got {list(log_a)} for {len(slopes)} segments", field="segment_log_a")
            object.__setattr__(self, "segment_log_a", log_a)
        if self.cutoff_cycles is not None and (
                not self.cutoff_cycles > 0 or (knees and self.cutoff_cycles < knees[-1])):
            raise InvalidParameter(
                f"cutoff_cycles {self.cutoff_cycles} must be positive and not before the last knee",
                field="cutoff_cycles", value=self.cutoff_cycles)

    # ------------------------------------------------------------------ geometry

    def range_at(self, cycles) -> np.ndarray:
        """Stress range of the curve (cut-off ignored) at ``cycles``. [MPa]"""
        n = np.asarray(cycles, dtype=np.float64)
        anchors_n, anchors_s = self._anchors()
        seg = np.searchsorted(np.asarray(self.knee_cycles), n, side="right")
        m = np.asarray(self.slopes)[seg]
        return anchors_s[seg] * (anchors_n[seg] / n) ** (1.0 / m)

    def _anchors(self):
        """Point (N, S) on each segment: the reference, then each knee.

        A segment with a tabulated intercept (``segment_log_a``) is anchored
        at the knee range with its own N there.
        """
        ns = [self.reference_cycles]
        ss = [self.reference_range]
        log_a = self.segment_log_a or ()
        for i, nk in enumerate(self.knee_cycles):
            sk = ss[-1] * (ns[-1] / nk) ** (1.0 / self.slopes[i])
            own = log_a[i + 1] if i + 1 < len(log_a) else None
            ns.append(nk if own is None else
                      10.0 ** (own - self.slopes[i + 1] * np.log10(sk)))
            ss.append(sk)
        return np.asarray(ns), np.asarray(ss)

    @property
    def knee_ranges(self) -> np.ndarray:
        """Stress range at each knee, decreasing. [MPa]"""
        return self._anchors()[1][1:]

    @property
    def cutoff_range(self) -> float:
        """Stress range below which no damage is done (0 if none). [MPa]"""
        if self.cutoff_cycles is None:
            return 0.0
        return float(self.range_at(self.cutoff_cycles))

    @property
    def fatigue_limit_range(self) -> float | None:
        """Constant-amplitude fatigue limit, if the curve has one. [MPa]"""
        if self.fatigue_limit_cycles is None:
            return None
        return float(self.range_at(self.fatigue_limit_cycles))

    # ------------------------------------------------------------------ life

    def cycles_to_failure(self, stress_range) -> np.ndarray:
        r"""
        Cycles to failure at each stress range.

        Parameters
        ----------
        stress_range : array-like
            Stress range :math:`\Delta\sigma` (already corrected for mean
            stress and scaled by any partial factor). [MPa]

        Returns
        -------
        ndarray
            :math:`N`; ``inf`` below the cut-off and at zero range, ``0`` at
            an infinite range (static overload). [cycles]

        Notes
        -----
        On segment *i*, anchored at :math:`(N_i, \Delta\sigma_i)`:
        :math:`N = N_i\,(\Delta\sigma_i / \Delta\sigma)^{m_i}`.
        """
        s = np.asarray(stress_range, dtype=np.float64)
        anchors_n, anchors_s = self._anchors()
        knee_s = anchors_s[1:]
        # Segment index: how many knees lie above this range.
        seg = knee_s.size - np.searchsorted(knee_s[::-1], s, side="right")
        m = np.asarray(self.slopes)[seg]
        with np.errstate(divide="ignore", over="ignore", invalid="ignore"):
            n = anchors_n[seg] * np.power(anchors_s[seg] / s, m)
        n = np.where(s <= 0.0, np.inf, n)
        if self.cutoff_cycles is not None:
            n = np.where(s < self.cutoff_range, np.inf, n)
        return np.where(np.isinf(s), 0.0, n)

    # ------------------------------------------------------------------ variants

    def scaled(self, factor: float, note: str | None = None) -> "SNCurve":
        """The curve with every stress multiplied by ``factor`` (e.g. 1/gamma_Mf)."""
        if not np.isfinite(factor) or factor <= 0:
            raise InvalidParameter(f"curve scale factor {factor} must be positive",
                                   field="factor", value=factor, limit=0.0)
        notes = self.notes + ((note,) if note else ())
        log_a = self.segment_log_a
        if log_a is not None:
            # N = a S^-m with every S times factor: log a grows by m log factor.
            log_a = tuple(None if la is None else la + m * np.log10(factor)
                          for la, m in zip(log_a, self.slopes))
        return replace(self, reference_range=self.reference_range * factor, notes=notes,
                       segment_log_a=log_a)

    def below_limit(self, treatment: str) -> "SNCurve":
        """The curve with cycles below its fatigue limit treated as chosen.

        See :data:`BELOW_LIMIT_TREATMENTS`. A curve without a fatigue limit
        is returned unchanged for every treatment but ``first_slope``.

        References
        ----------
        .. [1] E. Haibach, *Betriebsfestigkeit*, 3rd ed. Berlin, Germany:
           Springer, 2006, sec. 3.2 (slope 2m - 1 below the fatigue limit).
        """
        if treatment not in BELOW_LIMIT_TREATMENTS:
            raise unknown("below_limit", treatment, BELOW_LIMIT_TREATMENTS)
        if treatment == "curve":
            return self
        m1 = self.slopes[0]
        if treatment == "first_slope":
            return replace(self, slopes=(m1,), knee_cycles=(), cutoff_cycles=None,
                           segment_log_a=None,
                           notes=self.notes + ("first slope continued below the limit",))
        nd = self.fatigue_limit_cycles
        if nd is None:
            return self
        # Keep every segment above the limit, then apply the treatment.
        keep = [i for i, nk in enumerate(self.knee_cycles) if nk < nd]
        slopes = self.slopes[:len(keep) + 1]
        knees = tuple(self.knee_cycles[i] for i in keep)
        log_a = None if self.segment_log_a is None else tuple(self.segment_log_a[:len(slopes)])
        if treatment == "ignore":
            return replace(self, slopes=slopes, knee_cycles=knees, cutoff_cycles=nd,
                           segment_log_a=log_a,
                           notes=self.notes + ("no damage below the fatigue limit",))
        m_last = slopes[-1]
        return replace(self, slopes=slopes + (2.0 * m_last - 1.0,), knee_cycles=knees + (nd,),
                       cutoff_cycles=None,
                       segment_log_a=None if log_a is None else log_a + (None,),
                       notes=self.notes + (f"Haibach slope {2 * m_last - 1:g} below the limit",))

    def slope_at(self, cycles: float) -> float:
        """Inverse slope m of the segment that holds ``cycles``. [-]"""
        seg = int(np.searchsorted(np.asarray(self.knee_cycles), float(cycles), side="right"))
        return float(self.slopes[seg])

    @cached_property
    def description(self) -> dict:
        """:meth:`describe`, computed once per curve (treat as read-only)."""
        return self.describe()

    def describe(self) -> dict:
        """Plain-JSON description: segments, knees, limits and the source."""
        anchors_n, anchors_s = self._anchors()
        return {
            "name": self.name, "source": self.source, "quantity": "stress_range",
            "slopes": list(self.slopes), "knee_cycles": list(self.knee_cycles),
            "knee_ranges": [float(v) for v in anchors_s[1:]],
            "reference_range": float(self.reference_range),
            "reference_cycles": float(self.reference_cycles),
            "fatigue_limit_cycles": self.fatigue_limit_cycles,
            "fatigue_limit_range": self.fatigue_limit_range,
            "cutoff_cycles": self.cutoff_cycles,
            "cutoff_range": self.cutoff_range if self.cutoff_cycles else None,
            "segment_log_a": None if self.segment_log_a is None else list(self.segment_log_a),
            "family": self.family, "stress_ratio": self.stress_ratio,
            "notes": list(self.notes),
        }


# ---------------------------------------------------------------------- builders


def basquin_range(slope: float, intercept: float, *, name: str = "basquin",
                  source: str = "user", cutoff_cycles: float | None = None) -> SNCurve:
    r"""
    Single-slope curve :math:`N\,\Delta\sigma^m = C`.

    Parameters
    ----------
    slope : float
        :math:`m`. [-]
    intercept : float
        :math:`C`, in MPa^m cycles (``log10(C)`` is the "log a" of the codes).

    References
    ----------
    .. [1] O. H. Basquin, "The exponential law of endurance tests," *Proc.
       ASTM*, vol. 10, pp. 625-630, 1910.
    """
    if not np.isfinite(intercept) or intercept <= 0:
        raise InvalidParameter(f"intercept {intercept} must be positive",
                               field="intercept", value=intercept, limit=0.0)
    if not np.isfinite(slope) or slope <= 0:
        raise InvalidParameter(f"slope {slope} must be positive", field="slope",
                               value=slope, limit=0.0)
    # Reference at 1e6 cycles keeps the numbers well scaled.
    ref_n = 1e6
    return SNCurve((slope,), (), (intercept / ref_n) ** (1.0 / slope), ref_n,
                   cutoff_cycles=cutoff_cycles, name=name, source=source)


def basquin_amplitude(fatigue_strength_coefficient: float, fatigue_strength_exponent: float,
                      *, name: str = "basquin", source: str = "user") -> SNCurve:
    r"""
    Amplitude-form curve :math:`\sigma_a = \sigma_f'\,(2N)^b`, in range form.

    Parameters
    ----------
    fatigue_strength_coefficient : float
        :math:`\sigma_f'`. [MPa]
    fatigue_strength_exponent : float
        :math:`b < 0`. [-]

    Notes
    -----
    :math:`N = \tfrac12 (\Delta\sigma / 2\sigma_f')^{1/b}`, so :math:`m = -1/b`
    and the range at one reversal (N = 1/2) is :math:`2\sigma_f'`.

    References
    ----------
    .. [1] O. H. Basquin, "The exponential law of endurance tests," *Proc.
       ASTM*, vol. 10, pp. 625-630, 1910.
    .. [2] N. E. Dowling, *Mechanical Behavior of Materials*, 4th ed.
       Boston, MA, USA: Pearson, 2013, eq. 9.7.
    """
    sf, b = float(fatigue_strength_coefficient), float(fatigue_strength_exponent)
    if not np.isfinite(sf) or sf <= 0:
        raise InvalidParameter(f"fatigue_strength_coefficient {sf} MPa must be positive",
                               field="fatigue_strength_coefficient", value=sf, limit=0.0)
    if not np.isfinite(b) or b >= 0:
        raise InvalidParameter(f"fatigue_strength_exponent {b} must be negative",
                               field="fatigue_strength_exponent", value=b, limit=0.0)
    return SNCurve((-1.0 / b,), (), 2.0 * sf, 0.5, name=name, source=source,
                   family="material", stress_ratio=-1.0)


def from_points(cycles, stress, *, quantity: str = "stress_range", name: str = "user",
                source: str = "user", below_last: str = "haibach") -> SNCurve:
    """
    Curve through user points, straight between them in log-log.

    Parameters
    ----------
    cycles : array-like
        Cycles to failure at each point, strictly increasing. [cycles]
    stress : array-like
        Stress range (or amplitude) at each point, strictly decreasing. [MPa]
    quantity : {"stress_range", "stress_amplitude"}
        What ``stress`` holds; amplitudes are doubled to ranges.
    below_last : {"haibach", "ignore", "continue"}
        Below the last point, whose stress is taken as the fatigue limit:
        ``haibach`` (default) continues with slope 2m - 1 of the last
        segment's m, the conservative choice for a spectrum when the curve's
        own behaviour there is not known; ``ignore``: no damage below it;
        ``continue``: the last segment's slope goes on. Above the first point
        the first segment's slope is extended.

    Raises
    ------
    InvalidParameter
        Fewer than two points, non-positive values, or points that are not
        monotonic (the first offending point is named).
    """
    n = np.asarray(cycles, dtype=np.float64)
    s = np.asarray(stress, dtype=np.float64)
    if quantity not in ("stress_range", "stress_amplitude"):
        raise unknown("quantity", quantity, ("stress_range", "stress_amplitude"))
    if below_last not in ("haibach", "ignore", "continue"):
        raise unknown("below_last", below_last, ("haibach", "ignore", "continue"))
    if n.ndim != 1 or n.shape != s.shape or n.size < 2:
        raise InvalidParameter("an S-N curve needs at least two (cycles, stress) points "
                               "of equal count", field="points")
    for label, arr in (("cycles", n), ("stress", s)):
        bad = np.flatnonzero(~np.isfinite(arr) | (arr <= 0))
        if bad.size:
            raise InvalidParameter(f"point {int(bad[0])}: {label} {arr[bad[0]]} must be "
                                   f"positive and finite", field=label, value=float(arr[bad[0]]))
    bad = np.flatnonzero(np.diff(n) <= 0)
    if bad.size:
        i = int(bad[0]) + 1
        raise InvalidParameter(f"point {i}: cycles {n[i]} must exceed the previous {n[i - 1]}",
                               field="cycles", value=float(n[i]))
    bad = np.flatnonzero(np.diff(s) >= 0)
    if bad.size:
        i = int(bad[0]) + 1
        raise InvalidParameter(f"point {i}: stress {s[i]} MPa must be below the previous "
                               f"{s[i - 1]} MPa", field="stress", value=float(s[i]))
    if quantity == "stress_amplitude":
        s = 2.0 * s
    slopes = -np.diff(np.log10(n)) / np.diff(np.log10(s))
    knees = tuple(n[1:-1])
    cutoff = float(n[-1]) if below_last == "ignore" else None
    limit = float(n[-1]) if below_last != "continue" else None
    curve = SNCurve(tuple(slopes), knees, float(s[0]), float(n[0]), cutoff_cycles=cutoff,
                    name=name, source=source, fatigue_limit_cycles=limit)
    return curve.below_limit("haibach") if below_last == "haibach" else curve
