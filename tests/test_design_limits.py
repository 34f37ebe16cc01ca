"""Temperature design limits after derating, as the temperature plot draws them."""

from __future__ import annotations

from importlib import resources

import lossbudget as lb
from lossbudget.limits import temperature_design_limits

DEMO = resources.files("lossbudget") / "data" / "demo.toml"


def test_moderate_profile_junction_margin_is_25_k():
    """T_J <= T_J,max − 25 K at the worst-case ambient (commercial designs): common practice,
    REFERENCES §10.3."""
    limits = temperature_design_limits(lb.load_design(DEMO))
    value, basis = limits["switch"]
    assert value == 175.0 - 25.0
    assert "common practice" in basis
    assert limits["rectifier"][0] == 150.0 - 25.0
    assert set(limits) == {"switch", "rectifier", "inductor", "cin", "cout"}


def test_none_profile_is_the_absolute_limit():
    limits = temperature_design_limits(lb.load_design(DEMO), derating="none")
    assert limits["switch"][0] == 175.0
    assert limits["cout"][0] == 105.0
