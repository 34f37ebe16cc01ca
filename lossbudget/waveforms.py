"""Piecewise-linear periodic waveforms over many operating points at once.

Every current in a hard-switched DC-DC stage is, to the accuracy of a loss budget, piecewise
linear over one switching period. A :class:`Pwl` holds such a waveform for every operating
point: segment ``k`` runs from the period fraction ``t[..., k]`` to ``t[..., k + 1]`` and moves
linearly from ``start[..., k]`` to ``end[..., k]`` (a jump between segments is allowed). The
average, the RMS, the peak and the Fourier coefficients all have closed forms, so no waveform is
ever sampled. The leading axes are the operating points; the last axis is the segment.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

# The segment axis is short (a handful of segments) and last, where numpy's reductions and
# strided views are slow; these helpers reduce it by a matrix-vector product or column by
# column, and build differences as contiguous arrays.


def _segment_sum(x: np.ndarray) -> np.ndarray:
    """Sum over the last (segment) axis."""
    x = np.asarray(x, dtype=float)
    k = x.shape[-1]
    if k == 0 or x.size == 0:
        return np.sum(x, axis=-1)
    return (x.reshape(-1, k) @ np.ones(k)).reshape(x.shape[:-1])


def _segment_extreme(x: np.ndarray, pick, empty: float) -> np.ndarray:
    """np.maximum or np.minimum over the last (segment) axis; ``empty`` when it has none."""
    if x.shape[-1] == 0:
        return np.full(x.shape[:-1], empty)
    out = x[..., 0]
    for k in range(1, x.shape[-1]):
        out = pick(out, x[..., k])
    return out


def _boundary_differences(t: np.ndarray) -> np.ndarray:
    """np.diff over the last axis, as a contiguous array."""
    t = np.asarray(t, dtype=float)
    if t.shape[-1] < 2:
        return np.diff(t, axis=-1)
    return np.stack([t[..., k + 1] - t[..., k] for k in range(t.shape[-1] - 1)], axis=-1)


@dataclass(frozen=True, slots=True)
class Pwl:
    """A periodic piecewise-linear waveform over one period, for many operating points."""

    t: np.ndarray
    start: np.ndarray
    end: np.ndarray

    @property
    def durations(self) -> np.ndarray:
        """Fraction of the period each segment lasts. [-]"""
        return _boundary_differences(self.t)

    def mean(self) -> np.ndarray:
        """Average value over the period (the DC component)."""
        return average_pwl(self.durations, self.start, self.end)

    def mean_square(self) -> np.ndarray:
        """Mean of the square over the period (RMS squared)."""
        return mean_square_pwl(self.durations, self.start, self.end)

    def ripple_square(self) -> np.ndarray:
        """Mean square less the mean square of each segment's mean: Σ d·(b − a)²/12."""
        rise = self.end - self.start
        return _segment_sum(self.durations * (rise * rise)) / 12.0

    def rms(self) -> np.ndarray:
        """RMS value over the period."""
        return np.sqrt(self.mean_square())

    def peak(self) -> np.ndarray:
        """Highest value reached over the period."""
        return _segment_extreme(np.maximum(self.start, self.end), np.maximum, -np.inf)

    def trough(self) -> np.ndarray:
        """Lowest value reached over the period."""
        return _segment_extreme(np.minimum(self.start, self.end), np.minimum, np.inf)

    def shifted(self, offset: np.ndarray) -> Pwl:
        """The waveform with ``offset`` added at every point (broadcast over operating points)."""
        off = np.asarray(offset)[..., None]
        return Pwl(self.t, self.start + off, self.end + off)

    def scaled(self, factor: np.ndarray) -> Pwl:
        """The waveform multiplied by ``factor`` (broadcast over operating points)."""
        fac = np.asarray(factor)[..., None]
        return Pwl(self.t, self.start * fac, self.end * fac)

    def harmonics_rms(self, n_max: int) -> np.ndarray:
        """RMS of harmonics 1..n_max, shape (..., n_max)."""
        return harmonic_rms_pwl(self.t, self.start, self.end, n_max=n_max)

    def derivative_mean_square(self) -> np.ndarray:
        """Mean square of the derivative (per period), for harmonic tails."""
        return derivative_mean_square_pwl(self.durations, self.start, self.end)

    def take(self, index: np.ndarray) -> Pwl:
        """The waveform at a subset of the operating points (first axis)."""
        return Pwl(self.t[index], self.start[index], self.end[index])


def average_pwl(durations, start, end):
    """Average of a piecewise-linear waveform over one period.

    Parameters
    ----------
    durations : array_like
        Fraction of the period of each segment, last axis. [-]
    start, end : array_like
        Value at the start and at the end of each segment, last axis. [A]

    Returns
    -------
    ndarray
        Average over the period. [A]

    Notes
    -----
    <x> = Σ_k d_k·(a_k + b_k)/2: the mean of a linear segment is the mean of its ends.

    References
    ----------
    .. [1] R. W. Erickson, D. Maksimović, Fundamentals of Power Electronics, 2nd ed., Kluwer,
       2001, Appendix A (averages of piecewise-linear converter waveforms).
    """
    return _segment_sum(np.asarray(durations) * (np.asarray(start) + end)) * 0.5


def mean_square_pwl(durations, start, end):
    """Mean square (RMS squared) of a piecewise-linear waveform.

    Parameters
    ----------
    durations : array_like
        Fraction of the period of each segment, last axis. [-]
    start, end : array_like
        Value at the start and at the end of each segment, last axis. [A]

    Returns
    -------
    ndarray
        Mean of the square over the period. [A2]

    Notes
    -----
    <x²> = Σ_k d_k·(a_k² + a_k·b_k + b_k²)/3. For a ramp of mean I_m and peak-to-peak ΔI this is
    d·(I_m² + ΔI²/12).

    References
    ----------
    .. [1] R. W. Erickson, D. Maksimović, Fundamentals of Power Electronics, 2nd ed., Kluwer,
       2001, Appendix A, "RMS values of commonly observed converter waveforms".
    """
    start = np.asarray(start)
    end = np.asarray(end)
    return _segment_sum(np.asarray(durations) * (start * start + start * end + end * end)) / 3.0


def harmonic_rms_pwl(t, start, end, *, n_max):
    """RMS of the harmonics 1..n_max of a piecewise-linear periodic waveform.

    Parameters
    ----------
    t : array_like
        Segment boundaries as fractions of the period, last axis (K + 1 values, 0 to 1). [-]
    start, end : array_like
        Value at the start and at the end of each segment, last axis (K values). [A]
    n_max : int
        Highest harmonic. [-]

    Returns
    -------
    ndarray
        RMS of harmonic n at index n − 1 along a new last axis. [A]

    Notes
    -----
    The derivative of a piecewise-linear waveform is piecewise constant (slopes s_k) plus
    impulses at its jumps J_k, so with ω = 2πn and E_k = e^(−jω t_k) its coefficient is
    c_n[x'] = Σ_k E_k·[(s_k − s_(k−1))/(jω) + J_k] and c_n[x] = c_n[x']/(jω). A segment of zero
    length counts as a jump. The phases are taken from t_0 (a common time shift leaves |c_n|
    unchanged), E_k from the tangent of the half angle, and E_k^n by repeated multiplication,
    one harmonic at a time. The RMS of the real harmonic is √2·|c_n|; Parseval:
    Σ_n I_n² = <x²> − <x>².

    References
    ----------
    .. [1] R. W. Erickson, D. Maksimović, Fundamentals of Power Electronics, 2nd ed., Kluwer,
       2001, section on PWM waveform harmonics (Fourier series of piecewise-linear waveforms).
    """
    t = np.asarray(t, dtype=float)
    start = np.asarray(start, dtype=float)
    end = np.asarray(end, dtype=float)
    lead = np.broadcast_shapes(t.shape[:-1], start.shape[:-1], end.shape[:-1])
    k = start.shape[-1]
    if n_max < 1:
        return np.zeros((*lead, 0))
    # segment-major layout, one contiguous row per boundary: (K + 1, points) and (K, points)
    t = np.broadcast_to(t, (*lead, k + 1)).reshape(-1, k + 1).T
    start = np.broadcast_to(start, (*lead, k)).reshape(-1, k).T
    end = np.broadcast_to(end, (*lead, k)).reshape(-1, k).T
    npt = t.shape[1]
    d = np.diff(t, axis=0)
    long = d > 0
    with np.errstate(divide="ignore", invalid="ignore"):
        slope = np.where(long, (end - start) / d, 0.0)
    jump = start - np.roll(end, 1, axis=0) + np.where(long, 0.0, end - start)
    ds = slope - np.roll(slope, 1, axis=0)
    # E_k = e^(-j 2 pi (t_k - t_0)) from u = tan(pi (t_k - t_0)); E_0 = 1
    e = np.empty((k - 1, npt), dtype=complex)
    parts = e.view(float).reshape(k - 1, npt, 2)
    with np.errstate(divide="ignore", invalid="ignore", over="ignore"):
        u = np.tan(np.pi * (t[1:-1] - t[0]))
        u2 = u * u
        inv = 1.0 / (1.0 + u2)
    np.multiply(1.0 - u2, inv, out=parts[..., 0])
    np.multiply(-2.0 * u, inv, out=parts[..., 1])
    # real and imaginary parts side by side, so that each weight is repeated twice
    ds_w = np.repeat(ds[1:], 2, axis=-1)
    jump_w = np.repeat(jump[1:], 2, axis=-1)
    out = np.empty((n_max, npt))
    power = e.copy()
    flat = power.view(float)
    # harmonic by harmonic, on arrays the size of the points (they stay in cache)
    for n in range(1, n_max + 1):
        if n > 1:
            power *= e
        sum_ds = np.einsum("kp,kp->p", flat, ds_w).reshape(npt, 2)
        sum_jump = np.einsum("kp,kp->p", flat, jump_w).reshape(npt, 2)
        w_inv = 1.0 / (2.0 * np.pi * n)
        # c_n = (sum_jump + J_0) - j (sum_ds + ds_0)/omega, real and imaginary parts
        re = sum_jump[:, 0] + jump[0] + sum_ds[:, 1] * w_inv
        im = sum_jump[:, 1] - (sum_ds[:, 0] + ds[0]) * w_inv
        np.sqrt(2.0 * (re * re + im * im), out=out[n - 1])
        out[n - 1] *= w_inv
    return out.T.reshape(*lead, n_max)


def fourier_coefficients_pwl(t, start, end, *, n_max):
    """Complex Fourier coefficients c_1..c_N of a periodic PWL waveform.

    Parameters
    ----------
    t : array_like
        Segment boundaries as fractions of the period, last axis (K + 1 values, 0 to 1). [-]
    start, end : array_like
        Value at the start and the end of each segment, last axis. [A]
    n_max : int
        Highest harmonic. [-]

    Returns
    -------
    ndarray
        c_n = <x·e^(−j2πnτ)> at index n − 1 along a new last axis (complex). [A]

    Notes
    -----
    Integrating twice by parts, with slopes s_k (per period), jumps J_k at the boundaries t_k
    and ω = 2πn: c_n = Σ_k e^(−jωt_k)·[J_k + (s_k − s_(k−1))/(jω)]/(jω). A zero-length segment
    counts as a jump.

    References
    ----------
    .. [1] R. W. Erickson, D. Maksimović, Fundamentals of Power Electronics, 2nd ed., Kluwer,
       2001, section on PWM waveform harmonics (Fourier series of piecewise-linear waveforms).
    """
    t = np.asarray(t, dtype=float)
    a = np.asarray(start, dtype=float)
    b = np.asarray(end, dtype=float)
    d = t[..., 1:] - t[..., :-1]
    long = d > 0
    with np.errstate(divide="ignore", invalid="ignore"):
        slope = np.where(long, (b - a) / d, 0.0)
    jump = a - np.roll(b, 1, axis=-1) + np.where(long, 0.0, b - a)
    ds = slope - np.roll(slope, 1, axis=-1)
    # harmonic by harmonic, e^(−j2πn t_k) by repeated multiplication
    base = np.exp(-2j * np.pi * t[..., :-1])  # (..., K)
    power = base.copy()
    out = np.empty((*base.shape[:-1], n_max), dtype=complex)
    for n in range(1, n_max + 1):
        if n > 1:
            power *= base
        w = 2j * np.pi * n
        out[..., n - 1] = np.sum(power * (jump + ds / w), axis=-1) / w
    return out


def derivative_mean_square_pwl(durations, start, end):
    """Mean square of the derivative of a continuous piecewise-linear waveform.

    Parameters
    ----------
    durations : array_like
        Fraction of the period of each segment, last axis. [-]
    start, end : array_like
        Value at the start and at the end of each segment, last axis. [A]

    Returns
    -------
    ndarray
        <(dx/dτ)²> with τ in periods; equals 4π²·Σ_n n²·I_n² for a continuous waveform. [A2]

    Notes
    -----
    Σ_k (b_k − a_k)²/d_k over the segments of non-zero length (Parseval applied to the
    derivative).

    References
    ----------
    .. [1] W. G. Hurley, E. Gath, J. G. Breslin, "Optimizing the AC resistance of multilayer
       transformer windings with arbitrary current waveforms", IEEE Trans. Power Electron.,
       vol. 15, no. 2, 2000 (RMS of the current's derivative).
    """
    d = np.asarray(durations, dtype=float)
    with np.errstate(divide="ignore", invalid="ignore"):
        terms = np.where(d > 0, (np.asarray(end) - np.asarray(start)) ** 2 / d, 0.0)
    return _segment_sum(terms)


def integral_extremes_pwl(t, start, end):
    """Peak-to-peak excursion of the running integral of a zero-mean PWL waveform.

    Parameters
    ----------
    t : array_like
        Segment boundaries as fractions of the period, last axis. [-]
    start, end : array_like
        Values at the start and the end of each segment (mean removed), last axis. [A]

    Returns
    -------
    ndarray
        max − min of ∫₀^τ x dτ' over the period, in units of value × period. [A]

    Notes
    -----
    The integral of a linear segment is quadratic; its extremes lie at the segment ends or where
    the segment crosses zero. Multiplied by the period and divided by a capacitance it gives the
    charge term of the capacitor voltage ripple.

    References
    ----------
    .. [1] R. W. Erickson, D. Maksimović, Fundamentals of Power Electronics, 2nd ed., Kluwer,
       2001, ch. 2 (capacitor charge balance and voltage ripple).
    """
    t = np.asarray(t, dtype=float)
    a = np.asarray(start, dtype=float)
    b = np.asarray(end, dtype=float)
    d = _boundary_differences(t)
    seg_int = d * (a + b) * 0.5
    # zero crossing inside a segment: x = a + (b - a)·s, s in (0, 1)
    with np.errstate(divide="ignore", invalid="ignore"):
        s = np.where((a * b < 0) & (a != b), a / (a - b), 0.0)
    cross_int = d * (a * s + 0.5 * (b - a) * s * s)
    # running integral at each boundary and at each crossing, extremes kept as it goes
    q = np.zeros(seg_int.shape[:-1])
    hi = lo = q
    for k in range(seg_int.shape[-1]):
        q_cross = q + cross_int[..., k]
        q = q + seg_int[..., k]
        hi = np.maximum(np.maximum(hi, q_cross), q)
        lo = np.minimum(np.minimum(lo, q_cross), q)
    return hi - lo
