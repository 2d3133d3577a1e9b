"""One-sided stress PSDs: the table checked, its moments, a history synthesised.

A PSD is given at lines (frequency [Hz], G(f) [MPa^2/Hz]). Its spectral
moments give the rates of zero up-crossings and of peaks and the bandwidth
parameters the spectral methods (``spectral.py``) take; ``synthesize``
draws a stationary Gaussian history with the PSD (for comparisons with
time-domain counting).

References
----------
.. [1] S. O. Rice, "Mathematical analysis of random noise," *Bell Syst.
   Tech. J.*, vol. 23, pp. 282-332, 1944, and vol. 24, pp. 46-156, 1945
   (crossing and peak rates from the moments).
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from .errors import InvalidParameter


@dataclass(frozen=True)
class SpectralMoments:
    """Moments and bandwidth figures of a one-sided PSD.

    Attributes
    ----------
    m0, m1, m2, m4 : float
        :math:`m_k = \\int_0^\\infty f^k G(f)\\,df`; m0 is the variance.
        [MPa^2 Hz^k]
    nu0 : float
        Rate of zero (mean) up-crossings, :math:`\\sqrt{m_2/m_0}`. [1/s]
    nu_p : float
        Rate of peaks, :math:`\\sqrt{m_4/m_2}`. [1/s]
    alpha1, alpha2 : float
        Bandwidth parameters :math:`\\alpha_i = m_i/\\sqrt{m_0 m_{2i}}`;
        alpha2 (Rice's irregularity factor nu0/nu_p) is 1 for a narrow band.
        [-]
    alpha075 : float
        :math:`m_{0.75}/\\sqrt{m_0 m_{1.5}}` (Tovo-Benasciutti). [-]
    """

    m0: float
    m1: float
    m2: float
    m4: float
    m075: float
    m15: float

    @property
    def nu0(self) -> float:
        return math.sqrt(self.m2 / self.m0)

    @property
    def nu_p(self) -> float:
        return math.sqrt(self.m4 / self.m2)

    @property
    def alpha1(self) -> float:
        return self.m1 / math.sqrt(self.m0 * self.m2)

    @property
    def alpha2(self) -> float:
        return self.m2 / math.sqrt(self.m0 * self.m4)

    @property
    def alpha075(self) -> float:
        return self.m075 / math.sqrt(self.m0 * self.m15)

    @property
    def rms(self) -> float:
        """Standard deviation of the stress, :math:`\\sqrt{m_0}`. [MPa]"""
        return math.sqrt(self.m0)

    def as_dict(self) -> dict:
        return {"m0": self.m0, "m1": self.m1, "m2": self.m2, "m4": self.m4,
                "rms": self.rms, "nu0": self.nu0, "nu_p": self.nu_p,
                "alpha1": self.alpha1, "alpha2": self.alpha2, "alpha075": self.alpha075}


def check_psd(frequency, psd) -> tuple[np.ndarray, np.ndarray]:
    """The table as float arrays, or an error naming the first bad line."""
    f = np.asarray(frequency, dtype=np.float64)
    g = np.asarray(psd, dtype=np.float64)
    if f.ndim != 1 or f.shape != g.shape or f.shape[0] < 2:
        raise InvalidParameter("a PSD needs two or more lines: frequency_hz and psd of the "
                               "same length", field="psd")
    bad = np.flatnonzero(~np.isfinite(f) | ~np.isfinite(g) | (g < 0) | (f < 0))
    if bad.size:
        raise InvalidParameter(f"PSD line {int(bad[0])} ({f[bad[0]]!r} Hz, {g[bad[0]]!r}) "
                               f"must be finite and >= 0", field="psd", value=int(bad[0]))
    if np.any(np.diff(f) <= 0):
        i = int(np.flatnonzero(np.diff(f) <= 0)[0]) + 1
        raise InvalidParameter(f"frequencies must rise: line {i} ({f[i]} Hz) does not",
                               field="psd", value=i)
    if not np.any(g > 0):
        raise InvalidParameter("the PSD is zero everywhere", field="psd")
    return f, g


def moments(frequency, psd) -> SpectralMoments:
    r"""
    Spectral moments of a one-sided PSD given at lines (trapezoidal rule).

    Parameters
    ----------
    frequency : array-like
        Rising frequencies. [Hz]
    psd : array-like
        One-sided PSD at each frequency, :math:`G(f)`. [MPa^2/Hz]

    Returns
    -------
    SpectralMoments

    Notes
    -----
    :math:`m_k = \int f^k G(f)\,df` by the trapezoidal rule over the lines
    given (the PSD is taken as zero outside them).
    """
    f, g = check_psd(frequency, psd)
    # Trapezoid weights once; the powers by products and square roots.
    w = np.empty_like(f)
    d = np.diff(f)
    w[0], w[-1] = 0.5 * d[0], 0.5 * d[-1]
    w[1:-1] = 0.5 * (d[:-1] + d[1:])
    gw = g * w
    root = np.sqrt(f)
    f2 = f * f
    powers = np.vstack([np.ones_like(f), np.sqrt(f * root), f, f * root, f2, f2 * f2])
    vals = powers @ gw
    m = dict(zip((0.0, 0.75, 1.0, 1.5, 2.0, 4.0), (float(v) for v in vals)))
    if m[2.0] <= 0 or m[4.0] <= 0:
        raise InvalidParameter("the PSD has no power above 0 Hz: no crossings to count",
                               field="psd")
    return SpectralMoments(m[0.0], m[1.0], m[2.0], m[4.0], m[0.75], m[1.5])


def synthesize(frequency, psd, duration_s: float, sample_rate_hz: float,
               seed: int | None = None) -> np.ndarray:
    r"""
    A stationary Gaussian history with the given one-sided PSD.

    Random phases on a fine frequency grid (the PSD interpolated linearly,
    zero outside its lines); the amplitude of each line is
    :math:`\sqrt{2\,G(f)\,\Delta f}`, so the variance is :math:`m_0`.
    [MPa]

    References
    ----------
    .. [1] M. Shinozuka and C.-M. Jan, "Digital simulation of random
       processes and its applications," *J. Sound Vib.*, vol. 25, no. 1,
       pp. 111-128, 1972.
    """
    f, g = check_psd(frequency, psd)
    n = int(round(duration_s * sample_rate_hz))
    if n < 4:
        raise InvalidParameter("the duration holds fewer than 4 samples", field="duration_s")
    if f[-1] > sample_rate_hz / 2:
        raise InvalidParameter(f"the PSD reaches {f[-1]} Hz, above the Nyquist frequency "
                               f"{sample_rate_hz / 2} Hz of the synthesis", field="psd")
    grid = np.fft.rfftfreq(n, 1.0 / sample_rate_hz)
    df = grid[1] - grid[0]
    gi = np.interp(grid, f, g, left=0.0, right=0.0)
    rng = np.random.default_rng(seed)
    phase = rng.uniform(0.0, 2 * np.pi, grid.shape[0])
    amp = np.sqrt(2.0 * gi * df)
    amp[0] = 0.0  # a zero-mean process
    if n % 2 == 0:
        amp[-1] = 0.0  # the Nyquist line has no phase to draw
    spectrum = amp * np.exp(1j * phase) * (n / 2.0)
    return np.fft.irfft(spectrum, n)
