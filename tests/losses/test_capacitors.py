"""Capacitor banks: harmonics, sharing, ESR loss and the exact voltage ripple.

Check values come from outside the code under test: dense sampling with numpy (cumulative
sums and FFT), the textbook ripple formulas in the limits where each is exact, and an exact
matrix-exponential solution of the parallel RC network (scipy.linalg.expm).
"""

from __future__ import annotations

import numpy as np
import pytest
from numpy.testing import assert_allclose
from scipy import linalg

from lossbudget.losses import capacitors as capm
from lossbudget.waveforms import fourier_coefficients_pwl

M = 200_000  # samples per period of the dense checks
TAU = (np.arange(M) + 0.5) / M


def _sample(t, a, b):
    x = np.zeros(M)
    for k in range(len(a)):
        if t[k + 1] > t[k]:
            m = (t[k] <= TAU) & (t[k + 1] > TAU)
            x[m] = a[k] + (b[k] - a[k]) * (TAU[m] - t[k]) / (t[k + 1] - t[k])
    return x


def _random_pwl(seed):
    """A PWL period with jumps and a zero-length padding segment holding a stray value."""
    rng = np.random.default_rng(seed)
    inner = np.sort(rng.uniform(0.05, 0.95, 3))
    t = np.array([0.0, inner[0], inner[1], inner[1], inner[2], 1.0])
    a = rng.normal(0.0, 2.0, 5)
    b = rng.normal(0.0, 2.0, 5)
    a[2], b[2] = 0.0, 0.0  # zero-length segment: must never count
    mean = np.sum(np.diff(t) * (a + b)) / 2
    return t, a - mean, b - mean


def test_fourier_coefficients_against_numpy_fft():
    """c_n against numpy's FFT of the densely sampled waveform (midpoint samples: error of
    order 1/M of the amplitude)."""
    for seed in range(4):
        t, a, b = _random_pwl(seed)
        ref = np.fft.fft(_sample(t, a, b))[1:9] / M
        got = fourier_coefficients_pwl(t, a, b, n_max=8)
        assert_allclose(got, ref, atol=1e-4 * np.abs(ref).max())


@pytest.mark.parametrize("seed", range(6))
def test_single_bank_ripple_against_sampled_waveform(seed):
    """Peak-to-peak of ESR·i + ∫i dt/C against the dense sampled waveform (numpy cumsum).
    The zero-length segment's 0 A must not enter (the old padding defect)."""
    t, a, b = _random_pwl(seed)
    fsw, esr, c = 150e3, 0.02, 22e-6
    x = _sample(t, a, b)
    v = esr * x + np.cumsum(x) / (M * fsw * c)
    got = capm.ripple_voltage_pwl(t, a, b, fsw=fsw, esr=esr, capacitance=c)
    assert_allclose(got, np.ptp(v), rtol=2e-4)


def test_buck_ripple_textbook_limit_esr_zero():
    """Triangular inductor ripple ΔI into C alone: Δv = ΔI·T/(8C) peak-to-peak.

    Source: Erickson & Maksimović, Fundamentals of Power Electronics, 2nd ed., 2001, §2.5,
    Δv = Δi·T_s/(8C) written with both ripples as half-pp, identical in pp (section number
    from memory); exact for ESR = 0.
    """
    d, di, fsw, c = 0.37, 1.6, 300e3, 47e-6
    t = np.array([0.0, d, 1.0])
    a = np.array([-di / 2, di / 2])
    b = np.array([di / 2, -di / 2])
    got = capm.ripple_voltage_pwl(t, a, b, fsw=fsw, esr=0.0, capacitance=c)
    assert_allclose(got, di / (8 * fsw * c), rtol=1e-12)
    # the ESR-only limit (C → ∞): ESR·ΔI (common practice, REFERENCES §7.2)
    got = capm.ripple_voltage_pwl(t, a, b, fsw=fsw, esr=0.01, capacitance=1e3)
    assert_allclose(got, 0.01 * di, rtol=1e-6)


def test_boost_ripple_textbook_limit_esr_zero():
    """Boost output: the capacitor gives I_o for D·T, so Δv = I_o·D·T/C peak-to-peak while
    the diode's valley current stays above I_o.

    Source: Erickson & Maksimović, Fundamentals of Power Electronics, 2nd ed., 2001, §2.3
    (boost capacitor ripple, half ripple V·D·T_s/(2RC); location from memory). ESR-only
    limit: the step of the capacitor current, ESR·I_D,peak (common practice, REFERENCES
    §7.2).
    """
    io, d, il, di, fsw, c = 2.0, 0.6, 5.0, 1.2, 200e3, 33e-6
    t = np.array([0.0, d, d, 1.0])  # on, zero-length gap, rectifier
    a = np.array([0.0, 0.0, il + di / 2]) - io
    b = np.array([0.0, 0.0, il - di / 2]) - io
    got = capm.ripple_voltage_pwl(t, a, b, fsw=fsw, esr=0.0, capacitance=c)
    assert_allclose(got, io * d / (fsw * c), rtol=1e-12)
    got = capm.ripple_voltage_pwl(t, a, b, fsw=fsw, esr=0.02, capacitance=1e3)
    assert_allclose(got, 0.02 * (il + di / 2), rtol=1e-6)


def _exact_network_ripple(t, a, b, *, fsw, esr, cap, samples=400):
    """Periodic steady state of parallel ESR-C branches driven by the PWL current, by the
    matrix exponential per segment (independent of the code under test).

    State u (capacitor voltages); C_k u_k' = (v − u_k)/R_k with v = R_par·(i + Σ u_j/R_j).
    Augmented z = (u, i, 1): i' = slope on a segment, jumps applied between segments.
    """
    nb = len(esr)
    g = 1.0 / np.asarray(esr)
    r_par = 1.0 / g.sum()
    period = 1.0 / fsw
    mm = (-np.diag(g) + r_par * np.outer(g, g)) / np.asarray(cap)[:, None]
    bi = r_par * g / np.asarray(cap)
    segs = []
    for k in range(len(a)):
        dur = (t[k + 1] - t[k]) * period
        if dur <= 0:
            continue
        slope = (b[k] - a[k]) / dur
        gen = np.zeros((nb + 2, nb + 2))
        gen[:nb, :nb] = mm
        gen[:nb, nb] = bi
        gen[nb, nb + 1] = slope
        segs.append((dur, gen, a[k]))
    # u(T) = Phi u(0) + w; the zero mode is fixed by Σ C u(0) = 0
    phi = np.eye(nb)
    w = np.zeros(nb)
    for dur, gen, a0 in segs:
        e = linalg.expm(gen * dur)
        phi = e[:nb, :nb] @ phi
        w = e[:nb, :nb] @ w + e[:nb, nb] * a0 + e[:nb, nb + 1]
    lhs = np.vstack([phi - np.eye(nb), np.asarray(cap)[None, :]])
    rhs = np.concatenate([-w, [0.0]])
    u = np.linalg.lstsq(lhs, rhs, rcond=None)[0]
    vs = []
    for dur, gen, a0 in segs:
        for s in np.linspace(0.0, dur, samples):
            z = linalg.expm(gen * s) @ np.concatenate([u, [a0, 1.0]])
            vs.append(r_par * (z[nb] + g @ z[:nb]))
        u = (linalg.expm(gen * dur) @ np.concatenate([u, [a0, 1.0]]))[:nb]
    return np.ptp(vs)


@pytest.mark.parametrize(
    ("esr", "cap"),
    [
        ((0.024 / 4, 0.075), (4 * 1.4e-6, 220e-6)),  # ceramics beside an electrolytic
        ((0.004, 0.012), (40e-6, 100e-6)),
        ((0.01, 0.01 / 3), (10e-6, 30e-6)),  # equal time constants: exact
    ],
)
def test_parallel_banks_against_exact_rc_network(esr, cap):
    """Several banks: within 2 % of the exact matrix-exponential solution (the accuracy the
    docstring states for the harmonic correction)."""
    fsw = 300e3
    io, d, il, di = 1.0, 0.66, 3.0, 0.9
    t = np.array([0.0, d, d, 1.0])
    a = np.array([0.0, 0.0, il + di / 2])
    b = np.array([0.0, 0.0, il - di / 2])
    mean = np.sum(np.diff(t) * (a + b)) / 2
    a, b = a - mean, b - mean
    ref = _exact_network_ripple(t, a, b, fsw=fsw, esr=esr, cap=cap)
    got = capm.ripple_voltage_banks(t, a, b, fsw=fsw, esr=np.array(esr),
                                    capacitance=np.array(cap))
    assert_allclose(got, ref, rtol=2e-2)
    del io


def test_bank_sharing_current_divider():
    """Two identical banks take a quarter of the mean square each (half the current);
    one bank takes all (the current-divider rule of circuit theory)."""
    harm = np.array([[1.0, 0.5, 0.25]])
    ms = np.array([1.0 + 0.25 + 0.0625 + 0.01])
    got = capm.bank_mean_squares(harm, ms, esr=np.array([[0.01, 0.01]]),
                                 capacitance=np.array([[1e-5, 1e-5]]), fsw=np.array([1e5]))
    assert_allclose(got, np.repeat(ms[:, None] / 4, 2, axis=-1), rtol=1e-12)
    one = capm.bank_mean_squares(harm, ms, esr=np.array([[0.01]]),
                                 capacitance=np.array([[1e-5]]), fsw=np.array([1e5]))
    assert_allclose(one[..., 0], ms, rtol=0)


def test_ripple_broadcasts_grid_equals_points():
    """Contract: the grid result equals the point-by-point results (STYLE §6.3)."""
    pts = [_random_pwl(s) for s in range(5)]
    t = np.stack([p[0] for p in pts])
    a = np.stack([p[1] for p in pts])
    b = np.stack([p[2] for p in pts])
    fsw = np.linspace(1e5, 5e5, 5)
    esr = np.stack([np.full(5, 0.01), np.full(5, 0.05)], axis=-1)
    cap = np.stack([np.full(5, 10e-6), np.full(5, 100e-6)], axis=-1)
    grid = capm.ripple_voltage_banks(t, a, b, fsw=fsw, esr=esr, capacitance=cap)
    one = [capm.ripple_voltage_banks(t[k], a[k], b[k], fsw=fsw[k], esr=esr[k],
                                     capacitance=cap[k]) for k in range(5)]
    assert_allclose(grid, one, rtol=1e-12)
