"""Tests of output/plots.py: every figure is written, opens, and is not blank."""

from __future__ import annotations

import importlib.resources
import subprocess
import sys
import tomllib
from pathlib import Path

import numpy as np
import pytest

import lossbudget
from lossbudget.output import plots
from lossbudget.sweep import load_axis

DEMO = importlib.resources.files("lossbudget") / "data" / "demo.toml"
FIGURES = {
    "map": plots.efficiency_map,
    "curves": plots.efficiency_curves,
    "breakdown": plots.loss_breakdown,
    "temperatures": plots.temperature_curves,
}
# A blank (single-colour) image has zero variance; a figure with axes, text and filled areas
# is far above this threshold (common practice for smoke-testing rendered images).
MIN_VARIANCE = 1e-3


@pytest.fixture(scope="module")
def demo_map():
    d = lossbudget.load_design(DEMO)
    return lossbudget.sweep(d, vin=np.linspace(18.0, 32.0, 6),
                            load=load_axis(d, start=5, stop=100, count=8, percent=True))


@pytest.fixture(scope="module")
def flagged_map():
    """A log-load map with flagged points: a 1 us minimum on-time fails at light load, 32 V."""
    raw = tomllib.loads(DEMO.read_text(encoding="utf-8"))
    raw["operating"]["min_on_time"] = "1 us"
    d = lossbudget.load_design(raw)
    b = lossbudget.sweep(d, vin=np.linspace(18.0, 32.0, 6),
                         load=load_axis(d, start=2, stop=100, count=8, percent=True, log=True))
    assert b.flagged.any() and not b.flagged.all()
    return b


def _grey(path) -> np.ndarray:
    from matplotlib.image import imread

    image = imread(path)
    assert image.ndim == 3 and image.shape[0] > 300 and image.shape[1] > 400
    return image[..., :3].mean(axis=2)


@pytest.mark.parametrize("name", list(FIGURES))
def test_png_is_written_and_not_blank(demo_map, tmp_path, name):
    path = FIGURES[name](demo_map, tmp_path / f"{name}.png", rated_load=4.0)
    assert path == tmp_path / f"{name}.png"
    assert np.var(_grey(path)) > MIN_VARIANCE
    assert [p.name for p in tmp_path.iterdir()] == [f"{name}.png"]  # no temporary left


@pytest.mark.parametrize("name", list(FIGURES))
def test_flagged_log_map_renders(flagged_map, tmp_path, name):
    path = FIGURES[name](flagged_map, tmp_path / f"{name}.png")
    assert np.var(_grey(path)) > MIN_VARIANCE


def test_flagged_region_is_drawn_grey(demo_map, flagged_map, tmp_path):
    # The flagged corner (lightest load, highest input voltage) is filled with the flagged
    # grey under its hatching, not left white; a map with no flagged point has none of it.
    from matplotlib.image import imread

    face = np.array([int(plots.FLAGGED_FACE[k:k + 2], 16) / 255 for k in (1, 3, 5)])

    def grey_pixels(budget, name):
        rgb = imread(plots.efficiency_map(budget, tmp_path / name))[..., :3]
        return int(np.all(np.abs(rgb - face) < 0.02, axis=2).sum())

    # anti-aliased text edges give a few hundred such pixels anywhere; the region, thousands
    clean, flagged = grey_pixels(demo_map, "clean.png"), grey_pixels(flagged_map, "flagged.png")
    assert flagged > clean + 5_000, (clean, flagged)


@pytest.mark.parametrize(("suffix", "magic"), [(".svg", b"<?xml"), (".pdf", b"%PDF")])
def test_vector_formats_are_written(demo_map, tmp_path, suffix, magic):
    for name, func in FIGURES.items():
        path = func(demo_map, tmp_path / f"{name}{suffix}")
        head = path.read_bytes()[:5]
        assert head.startswith(magic), (name, head)
        assert path.stat().st_size > 5_000


def test_bad_suffix_and_bad_shape_are_refused(demo_map, tmp_path):
    with pytest.raises(ValueError, match=r"\.png, \.svg or \.pdf"):
        plots.efficiency_map(demo_map, tmp_path / "map.gif")
    d = lossbudget.load_design(DEMO)
    three_axes = lossbudget.sweep(d, vin=[18.0, 24.0], load=[1.0, 4.0], ambient=[0.0, 55.0])
    assert three_axes.shape == (2, 2, 2)
    with pytest.raises(ValueError, match="input voltage × load"):
        plots.efficiency_curves(three_axes, tmp_path / "c.png")
    assert list(tmp_path.iterdir()) == []


def test_plots_leave_pyplot_alone():
    # No pyplot state: the plots work through matplotlib.figure.Figure and the Agg canvas.
    code = (
        "import sys, numpy as np, importlib.resources, tempfile, pathlib\n"
        "import lossbudget\n"
        "from lossbudget.output import plots\n"
        "d = lossbudget.load_design(importlib.resources.files('lossbudget')/'data'/'demo.toml')\n"
        "b = lossbudget.sweep(d, vin=[18.0, 32.0], load=[1.0, 4.0])\n"
        "with tempfile.TemporaryDirectory() as t:\n"
        "    plots.efficiency_map(b, pathlib.Path(t) / 'm.png')\n"
        "print('matplotlib.pyplot' in sys.modules)\n"
    )
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True,
                         check=True)
    assert out.stdout.strip() == "False"


def test_titles_carry_the_signed_output_voltage():
    # The inverting stage's output is negative in the design and on every figure (SPEC §5).
    d = lossbudget.load_design(Path(__file__).parents[1] / "sample_inputs"
                               / "frontend_bias_inverting.toml")
    b = lossbudget.sweep(d, vin=[10.8, 13.2], load=[0.1, 0.4])
    text = plots._conditions(b)
    assert "vout -15 V" in text and text.startswith("buck-boost")
