"""Piecewise-linear waveforms: closed forms against numpy's FFT and direct sampling."""

from __future__ import annotations

import numpy as np
import pytest

from lossbudget.waveforms import Pwl, harmonic_rms_pwl, integral_extremes_pwl

M = 2**16  # samples per period for the numerical references


def _random_pwl(seed: int, n: int = 6) -> Pwl:
    rng = np.random.default_rng(seed)
    inner = np.sort(rng.random((n, 3)), axis=1)
    t = np.concatenate([np.zeros((n, 1)), inner, np.ones((n, 1))], axis=1)
    t[0, 2] = t[0, 1]  # a zero-length segment (a jump) must be handled
    return Pwl(t, rng.normal(size=(n, 4)), rng.normal(size=(n, 4)))


def _sample(w: Pwl, p: int) -> np.ndarray:
    tau = (np.arange(M) + 0.5) / M
    x = np.zeros(M)
    for k in range(w.start.shape[1]):
        t0, t1 = w.t[p, k], w.t[p, k + 1]
        if t1 > t0:
            m = (tau >= t0) & (tau < t1)
            x[m] = w.start[p, k] + (w.end[p, k] - w.start[p, k]) * (tau[m] - t0) / (t1 - t0)
    return x


@pytest.mark.parametrize("seed", [1, 2, 3])
def test_harmonics_against_numpy_fft(seed):
    """c_n in closed form against numpy.fft.rfft of the sampled waveform; the sampling error
    of a waveform with jumps is of order 1/M, hence the tolerance."""
    w = _random_pwl(seed)
    h = w.harmonics_rms(12)
    for p in range(w.t.shape[0]):
        spectrum = np.fft.rfft(_sample(w, p)) / M
        np.testing.assert_allclose(h[p], np.sqrt(2) * np.abs(spectrum[1:13]), atol=1e-4)


def test_mean_rms_and_parseval():
    """Mean and mean square against the sampled waveform; Parseval: Σ I_n² = <x²> − <x>²."""
    w = _random_pwl(7)
    for p in range(w.t.shape[0]):
        x = _sample(w, p)
        np.testing.assert_allclose(w.mean()[p], x.mean(), atol=1e-4)
        np.testing.assert_allclose(w.mean_square()[p], np.mean(x * x), atol=1e-3)
    # continuous triangle: harmonics fall as 1/n², 4000 of them hold Parseval to 1e-9
    t = np.array([0.0, 0.3, 0.3, 1.0, 1.0])
    tri = Pwl(t, np.array([-1.0, 2.0, 2.0, -1.0]), np.array([2.0, 2.0, -1.0, -1.0]))
    h = harmonic_rms_pwl(tri.t, tri.start, tri.end, n_max=4000)
    np.testing.assert_allclose(np.sum(h * h), tri.mean_square() - tri.mean() ** 2, rtol=1e-9)


def test_triangle_series_closed_form():
    """I_n,peak = ΔI·|sin(nπD)|/(π²n²D(1 − D)) (REFERENCES §3.4, derived); zero for nD integer."""
    d, di = 0.4, 3.0
    t = np.array([0.0, d, 1.0])
    w = Pwl(t, np.array([0.0, di]), np.array([di, 0.0]))
    n = np.arange(1, 11)
    expected = di * np.abs(np.sin(n * np.pi * d)) / (np.pi**2 * n**2 * d * (1 - d)) / np.sqrt(2)
    np.testing.assert_allclose(w.harmonics_rms(10), expected, atol=1e-12)
    assert w.harmonics_rms(10)[4] < 1e-12  # n = 5, nD = 2


def test_derivative_mean_square_is_the_weighted_harmonic_sum():
    """<x'²> = 4π²·Σ n²·I_n² for a continuous waveform (Parseval on the derivative)."""
    t = np.array([0.0, 0.25, 0.6, 1.0])
    w = Pwl(t, np.array([0.0, 2.0, 1.0]), np.array([2.0, 1.0, 0.0]))
    n = np.arange(1, 20001)
    h = harmonic_rms_pwl(w.t, w.start, w.end, n_max=n.size)
    np.testing.assert_allclose(w.derivative_mean_square(), 4 * np.pi**2 * np.sum(n**2 * h**2),
                               rtol=1e-3)


def test_integral_extremes_give_the_capacitor_charge():
    """Peak-to-peak of ∫(i − <i>) against a cumulative sum of the samples; for the triangular
    ripple of a buck inductor it is ΔI/8 per period ([EM] ch. 2: Δv = ΔI·T/(8C))."""
    w = _random_pwl(11)
    mean = w.mean()[:, None]
    got = integral_extremes_pwl(w.t, w.start - mean, w.end - mean)
    for p in range(w.t.shape[0]):
        q = np.cumsum(_sample(w, p) - w.mean()[p]) / M
        np.testing.assert_allclose(got[p], q.max() - q.min(), atol=1e-4)
    t = np.array([0.0, 0.3, 1.0])
    tri = Pwl(t, np.array([-0.5, 0.5]), np.array([0.5, -0.5]))  # ΔI = 1, zero mean
    np.testing.assert_allclose(integral_extremes_pwl(tri.t, tri.start, tri.end), 1 / 8,
                               rtol=1e-12)
