"""Inductance over current (a swinging or powder-core choke): the model functions, the
solver's use of them, the design keys.

Check values: scipy's quadrature of the interpolated curve (flux linkage λ = ∫L di, Erickson
& Maksimović, Fundamentals of Power Electronics, 2nd ed., 2001, ch. 13), the boost's ripple
ΔI = V_in·D/(L·f_sw) (same book, ch. 2; REFERENCES §8.1), and hand interpolation of the
design's points.
"""

from __future__ import annotations

import importlib.resources
import tomllib

import numpy as np
import pytest
from click.testing import CliRunner
from scipy import integrate

import lossbudget as lb
from lossbudget.cli import main
from lossbudget.losses.inductance import flux_linkage_at_current, inductance_at_current

DEMO = importlib.resources.files("lossbudget") / "data" / "demo.toml"
PTS_I = (2.0, 8.0, 14.0)
PTS_L = (22e-6, 19e-6, 12e-6)


def test_flux_linkage_against_quadrature():
    i = np.array([-9.0, 0.0, 1.0, 2.0, 5.0, 8.0, 11.0, 14.0, 20.0])
    got = flux_linkage_at_current(i, points_i=PTS_I, points_l=PTS_L)
    for x, g in zip(i, got, strict=True):
        ref, _ = integrate.quad(lambda u: np.interp(u, PTS_I, PTS_L), 0.0, abs(x),
                                points=PTS_I, epsabs=1e-15)
        np.testing.assert_allclose(g, np.sign(x) * ref, rtol=1e-12, atol=1e-18)
    # a constant inductance gives λ = L·i
    np.testing.assert_allclose(flux_linkage_at_current(3.0, points_i=(0.0,), points_l=(5e-6,)),
                               15e-6, rtol=1e-15)


def test_inductance_interpolates_and_holds_at_the_ends():
    got = inductance_at_current([0.0, 5.0, 20.0, -5.0], points_i=PTS_I, points_l=PTS_L)
    # hand interpolation: 22 − 3·(5 − 2)/6 = 20.5 uH at 5 A
    np.testing.assert_allclose(got, [22e-6, 20.5e-6, 12e-6, 20.5e-6], rtol=1e-12)


def _demo_with_curve():
    raw = tomllib.loads(DEMO.read_text(encoding="utf-8"))
    raw["inductor"]["l"] = [{"l": "22 uH", "at_i": "0 A"}, {"l": "15 uH", "at_i": "14 A"}]
    return lb.load_design(raw)


def test_solver_takes_the_inductance_at_the_mean_current_and_the_ripple_follows():
    b = lb.solve(_demo_with_curve(), vin=24.0, load=np.array([1.0, 2.0, 4.0, 6.0]))
    i_avg = b.stress("inductor", "i_avg")
    l_hand = 22e-6 - (7e-6 / 14.0) * i_avg
    # the inductance of the last stage pass, at the previous pass's mean current
    np.testing.assert_allclose(b.stress("inductor", "l"), l_hand, rtol=1e-3)
    # CCM boost ripple with that inductance; the conduction drops move V_L by under 3 %
    ccm = ~b.dcm
    assert ccm.sum() >= 2
    di = 2 * (b.stress("inductor", "i_pk") - i_avg)
    np.testing.assert_allclose(di[ccm], (24.0 * b.duty / (l_hand * 200e3))[ccm], rtol=3e-2)


def test_a_one_point_curve_equals_the_constant_inductance():
    raw = tomllib.loads(DEMO.read_text(encoding="utf-8"))
    raw["inductor"]["l"] = "22 uH"
    const = lb.solve(lb.load_design(raw), vin=24.0, load=3.0)
    raw["inductor"]["l"] = [{"l": "22 uH", "at_i": "5 A"}]
    curve = lb.solve(lb.load_design(raw), vin=24.0, load=3.0)
    np.testing.assert_allclose(curve.efficiency, const.efficiency, rtol=1e-12)
    np.testing.assert_allclose(curve.stress("inductor", "b_pk"), const.stress("inductor", "b_pk"),
                               rtol=1e-12)


@pytest.mark.parametrize(
    ("points", "match"),
    [
        ([{"l": "22 uH", "at_i": "0 A"}, {"l": "15 uH", "at_i": "0 A"}], r"distinct currents"),
        ([{"l": "22 uF", "at_i": "0 A"}], r"inductor\.l\[0\]\.l"),
        ([{"l": "22 uH", "at_i": "3 V"}], r"inductor\.l\[0\]\.at_i"),
        ([{"l": "22 uH"}], r"inductor\.l\[0\]"),
    ],
)
def test_bad_curves_are_refused_naming_the_key(points, match):
    raw = tomllib.loads(DEMO.read_text(encoding="utf-8"))
    raw["inductor"]["l"] = points
    with pytest.raises(lb.DesignError, match=match):
        lb.load_design(raw)


def test_validate_and_point_say_which_current_is_used(tmp_path):
    raw = DEMO.read_text(encoding="utf-8").replace(
        'l = { typ = "22 uH", min = "19.8 uH" }',
        'l = [{ l = "22 uH", at_i = "0 A" }, { l = "15 uH", at_i = "14 A" }]')
    assert "at_i" in raw
    path = tmp_path / "swinging.toml"
    path.write_text(raw, encoding="utf-8")
    out = CliRunner().invoke(main, ["validate", str(path)]).output
    assert "mean inductor current" in out
    out = CliRunner().invoke(main, ["point", str(path)]).output
    assert "taken at the mean inductor current" in out


def test_model_functions_broadcast_grid_equals_points():
    """Contract (STYLE §6.3): a 2-D grid gives the point-by-point values."""
    from lossbudget.losses.overshoot import turn_off_overshoot

    i = np.linspace(-3.0, 18.0, 12).reshape(3, 4)
    t_fi = np.linspace(1e-9, 5e-9, 4)  # broadcast along the last axis
    funcs = (
        lambda x, c: inductance_at_current(x, points_i=PTS_I, points_l=PTS_L),
        lambda x, c: flux_linkage_at_current(x, points_i=PTS_I, points_l=PTS_L),
        lambda x, c: turn_off_overshoot(3e-9, x, t_fi if c is None else t_fi[c]),
    )
    for func in funcs:
        got = func(i, None)
        assert got.shape == i.shape
        want = np.array([[float(func(float(i[r, c]), c)) for c in range(4)] for r in range(3)])
        np.testing.assert_allclose(got, want, rtol=1e-15)


def test_overshoot_is_l_di_dt():
    """v = L·I/t_fi (the inductor law with a linear fall): 3 nH, 10 A in 2 ns is 15 V."""
    from lossbudget.losses.overshoot import turn_off_overshoot

    np.testing.assert_allclose(turn_off_overshoot(3e-9, 10.0, 2e-9), 15.0, rtol=1e-15)
    assert np.isnan(turn_off_overshoot(3e-9, 10.0, 0.0))
