"""Tests of lossbudget.losses.diode against the formulas and sources of REFERENCES.md §6.

The inputs are round numbers chosen for hand arithmetic; each check value is the stated
formula evaluated by hand (written out beside it) or a second method computed here (numerical
averaging of the instantaneous power over a sampled waveform).
"""

from __future__ import annotations

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from numpy.testing import assert_allclose

from lossbudget.losses import diode as d

# --------------------------------------------------------------------------------------------
# Temperature law of Vf0, Rd, vsd
# --------------------------------------------------------------------------------------------


def test_linear_in_temperature_through_points_and_extrapolated():
    # Source: SPEC §2.6 (linear through the points), REFERENCES §6 (linear tempco of V_F,
    # common practice). 0.42 V at 25 degC, 0.31 V at 125 degC: slope −1.1 mV/K.
    kw = {"t_points": [25.0, 125.0], "values": [0.42, 0.31]}
    v = d.linear_in_temperature([25.0, 125.0, 75.0, -25.0, 175.0], **kw)
    # Hand: 75 degC → 0.365 V; −25 degC → 0.475 V; 175 degC → 0.255 V.
    assert_allclose(v, [0.42, 0.31, 0.365, 0.475, 0.255], rtol=1e-13)


def test_linear_in_temperature_clips_at_floor():
    # Source: SPEC §2.6 (clipped at zero). The line reaches 0 V at 25 + 0.42/1.1e-3 = 406.8 degC.
    kw = {"t_points": [25.0, 125.0], "values": [0.42, 0.31]}
    assert d.linear_in_temperature(500.0, **kw) == 0.0
    assert_allclose(d.linear_in_temperature(400.0, **kw), 0.42 - 375.0 * 1.1e-3, rtol=1e-12)
    assert d.linear_in_temperature(300.0, floor=0.2, **kw) == 0.2
    assert_allclose(
        d.linear_in_temperature(500.0, floor=-np.inf, **kw), 0.42 - 475.0 * 1.1e-3, rtol=1e-12
    )


def test_linear_in_temperature_single_point_constant_and_piecewise():
    # Source: SPEC §2.6: a single point is constant; several points piecewise linear.
    t = np.array([-40.0, 25.0, 150.0])
    assert_allclose(d.linear_in_temperature(t, t_points=[25.0], values=[0.8]), 0.8, rtol=0)
    kw = {"t_points": [0.0, 50.0, 100.0], "values": [20e-3, 25e-3, 35e-3]}
    # Hand: 25 degC → 22.5 mohm; 75 degC → 30 mohm; 150 degC → 35 + 0.2·50 = 45 mohm.
    r = d.linear_in_temperature([25.0, 75.0, 150.0, -50.0], **kw)
    assert_allclose(r, [22.5e-3, 30e-3, 45e-3, 15e-3], rtol=1e-12)


def test_linear_in_temperature_rejects_bad_points():
    with pytest.raises(ValueError, match="increasing"):
        d.linear_in_temperature(25.0, t_points=[25.0, 25.0], values=[0.4, 0.3])
    with pytest.raises(ValueError, match="equal"):
        d.linear_in_temperature(25.0, t_points=[25.0, 50.0], values=[0.4])
    with pytest.raises(ValueError, match="equal"):
        d.linear_in_temperature(25.0, t_points=[], values=[])


# --------------------------------------------------------------------------------------------
# Forward loss
# --------------------------------------------------------------------------------------------


def test_forward_loss_transcription():
    # Source: REFERENCES §6, P_F = V_F0·I_avg + R_d·I_rms² (common practice).
    # 0.4 V·3 A + 20 mohm·(4 A)² = 1.2 + 0.32 = 1.52 W.
    assert_allclose(d.forward_loss(0.4, 20e-3, i_avg=3.0, i_rms=4.0), 1.52, rtol=1e-14)


def test_forward_loss_equals_averaged_instantaneous_power():
    # Second method: average p(t) = (Vf0 + Rd·i)·i over a sampled trapezoidal diode current
    # (conducts 40 % of the period, falling 9 A → 5 A, blocking otherwise).
    n = 400_000
    t = (np.arange(n) + 0.5) / n
    i_f = np.where(t < 0.4, 9.0 - 4.0 * t / 0.4, 0.0)
    vf0, rd = 0.45, 15e-3
    p_avg = np.mean((vf0 + rd * i_f) * i_f)
    i_avg, i_rms = np.mean(i_f), np.sqrt(np.mean(i_f**2))
    assert_allclose(d.forward_loss(vf0, rd, i_avg=i_avg, i_rms=i_rms), p_avg, rtol=1e-12)
    # Hand: I_avg = 0.4·7 = 2.8 A; I_rms² = 0.4·(81 + 45 + 25)/3 = 20.1333 A².
    assert_allclose([i_avg, i_rms**2], [2.8, 0.4 * 151.0 / 3.0], rtol=1e-9)


@settings(max_examples=300, deadline=None)
@given(
    vf0=st.floats(0.0, 2.0),
    rd_a=st.floats(0.0, 1.0),
    rd_b=st.floats(0.0, 1.0),
    i_avg=st.floats(0.0, 100.0),
    i_rms=st.floats(0.0, 200.0),
)
def test_forward_loss_non_decreasing_in_rd(vf0, rd_a, rd_b, i_avg, i_rms):
    # Invariant (STYLE §6): loss never falls as a resistance rises.
    lo, hi = min(rd_a, rd_b), max(rd_a, rd_b)
    assert d.forward_loss(vf0, hi, i_avg=i_avg, i_rms=i_rms) >= d.forward_loss(
        vf0, lo, i_avg=i_avg, i_rms=i_rms
    )


# --------------------------------------------------------------------------------------------
# Leakage
# --------------------------------------------------------------------------------------------

_LEAK = {"i_ref": 50e-6, "t_ref": 25.0, "v_ref": 100.0, "doubling": 10.0}


def test_leakage_doubles_per_doubling_and_is_linear_in_voltage():
    # Source: SPEC §2.6 / REFERENCES §6: I_R doubles every `doubling` K (common practice),
    # linear in V (common practice).
    i_r = d.leakage_current([25.0, 35.0, 45.0, 15.0, 30.0], 100.0, **_LEAK)
    # Hand: ×1, ×2, ×4, ×½, ×√2.
    assert_allclose(i_r, 50e-6 * np.array([1.0, 2.0, 4.0, 0.5, np.sqrt(2.0)]), rtol=1e-14)
    i_v = d.leakage_current(25.0, [0.0, 25.0, 50.0, 200.0, -10.0], **_LEAK)
    assert_allclose(i_v, 50e-6 * np.array([0.0, 0.25, 0.5, 2.0, 0.0]), rtol=1e-14, atol=0.0)
    i_slow = d.leakage_current(45.0, 100.0, i_ref=50e-6, t_ref=25.0, v_ref=100.0, doubling=20.0)
    assert_allclose(i_slow, 100e-6, rtol=1e-14)


def test_leakage_loss_over_blocking_intervals():
    # Source: REFERENCES §6, P_R = V_R·I_R(T_j)·(1 − D_F), generalised to several intervals
    # (SPEC §2.6). DCM boost, Vin 24 V, Vout 48 V, 65 degC (×16): the diode blocks 48 V for
    # D = 0.3 and 48 − 24 = 24 V in the idle interval, 0.2 of the period.
    # Hand: I_R(48 V) = 50 uA·16·0.48 = 384 uA, I_R(24 V) = 192 uA;
    # P = 384e-6·48·0.3 + 192e-6·24·0.2 = 5.5296 mW + 0.9216 mW = 6.4512 mW.
    p = d.leakage_loss(65.0, v_blocking=[48.0, 24.0], fractions=[0.3, 0.2], **_LEAK)
    assert_allclose(p, 6.4512e-3, rtol=1e-13)
    # CCM reduces to the single-interval form V_R·I_R·(1 − D_F) with 1 − D_F = D.
    p_ccm = d.leakage_loss(65.0, v_blocking=[48.0], fractions=[0.3], **_LEAK)
    assert_allclose(p_ccm, 48.0 * d.leakage_current(65.0, 48.0, **_LEAK) * 0.3, rtol=1e-14)


def test_leakage_loss_broadcasts_points_against_interval_axis():
    # Contract: t_j (n,) against v_blocking (n, k), a shared fractions row; equals per point.
    t_j = np.array([25.0, 60.0, 100.0])
    v_b = np.array([[48.0, 24.0], [40.0, 20.0], [36.0, 0.0]])
    frac = np.array([0.5, 0.25])
    p = d.leakage_loss(t_j, v_blocking=v_b, fractions=frac, **_LEAK)
    assert p.shape == (3,)
    for n in range(3):
        p_n = d.leakage_loss(t_j[n], v_blocking=v_b[n], fractions=frac, **_LEAK)
        assert_allclose(p[n], p_n, rtol=1e-14)


# --------------------------------------------------------------------------------------------
# Broadcasting contract: a 2-D grid equals point-by-point evaluation
# --------------------------------------------------------------------------------------------

_RNG = np.random.default_rng(99)
_SHAPE = (3, 4)


def _grid(lo, hi, extra=()):
    return _RNG.uniform(lo, hi, _SHAPE + extra)


_CASES = {
    "linear_in_temperature": (
        d.linear_in_temperature,
        (_grid(-50, 300),),
        {"t_points": [25.0, 125.0], "values": [0.42, 0.31], "floor": 0.05},
    ),
    "forward_loss": (
        d.forward_loss,
        (_grid(0.2, 0.6), _grid(0, 0.05)),
        {"i_avg": _grid(0, 10), "i_rms": _grid(0, 15)},
    ),
    "leakage_current": (
        d.leakage_current,
        (_grid(0, 150), _grid(0, 100)),
        {"i_ref": _grid(1e-6, 1e-4), "t_ref": 25.0, "v_ref": 100.0, "doubling": _grid(8, 12)},
    ),
    "leakage_loss": (
        d.leakage_loss,
        (_grid(0, 150),),
        {
            "v_blocking": _grid(0, 100, (2,)),
            "fractions": _grid(0, 0.5, (2,)),
            "i_ref": _grid(1e-6, 1e-4),
            "t_ref": 25.0,
            "v_ref": 100.0,
            "doubling": 10.0,
        },
    ),
}


def _at(value, idx):
    """Index a grid argument at an operating point; 1-D data and scalars unchanged."""
    return value[idx] if isinstance(value, np.ndarray) and value.ndim >= 2 else value


def test_broadcast_cases_cover_every_public_function():
    assert {f.__name__ for f, _, _ in _CASES.values()} == set(d.__all__)


@pytest.mark.parametrize("name", sorted(_CASES))
def test_grid_equals_point_by_point(name):
    # Contract (STYLE §4): every model broadcasts; the grid result equals a loop over points.
    func, args, kwargs = _CASES[name]
    grid = func(*args, **kwargs)
    assert grid.shape == _SHAPE
    for idx in np.ndindex(*_SHAPE):
        point = func(*(_at(a, idx) for a in args), **{k: _at(v, idx) for k, v in kwargs.items()})
        assert_allclose(grid[idx], point, rtol=1e-14, atol=0.0)
