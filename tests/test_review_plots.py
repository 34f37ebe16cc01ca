"""The figures a design review opens: exact input voltages, both temperature corners, the
loss grouping, the every-mechanism bars, the margin chart and the cautions inside each figure.

Each figure is captured as it is saved (the real file is written too) so that its titles,
labels, bars and caption can be read back.
"""

from __future__ import annotations

import importlib.resources

import numpy as np
import pytest
from click.testing import CliRunner

import lossbudget
from lossbudget.cli import main
from lossbudget.commands.mapping import ExactRows
from lossbudget.limits import LimitReport, LimitRow
from lossbudget.output import plots
from lossbudget.sweep import load_axis

DEMO = importlib.resources.files("lossbudget") / "data" / "demo.toml"


@pytest.fixture()
def captured(monkeypatch):
    """Every figure saved by output.plots, by file name (the file is still written)."""
    figures = {}
    save = plots._save

    def keep(fig, path):
        figures[path.name] = fig
        return save(fig, path)

    monkeypatch.setattr(plots, "_save", keep)
    return figures


def _texts(fig) -> list[str]:
    out = [t.get_text() for t in fig.texts]
    for ax in fig.axes:
        out += [ax.get_title(loc) for loc in ("left", "center", "right")]
        out += [t.get_text() for t in ax.texts]
        out += [t.get_text() for t in ax.get_yticklabels()]
        legend = ax.get_legend()
        if legend is not None:
            out += [t.get_text() for t in legend.get_texts()]
    if fig._suptitle is not None:
        out.append(fig._suptitle.get_text())
    return out


def _assert_texts_inside(fig, name):
    """The caption once, and every text of the figure inside the image."""
    fig.canvas.draw()
    renderer = fig.canvas.get_renderer()
    box = fig.bbox
    caption = [t for t in fig.texts if t.get_text() == plots.CAPTION]
    assert len(caption) == 1, name
    for artist in [*fig.texts, *(a.title for a in fig.axes)]:
        if not artist.get_text():
            continue
        ext = artist.get_window_extent(renderer)
        assert ext.x0 >= box.x0 - 1 and ext.x1 <= box.x1 + 1, (name, artist.get_text())
        assert ext.y0 >= box.y0 - 1 and ext.y1 <= box.y1 + 1, (name, artist.get_text())


def test_demo_figures_keep_every_caption_inside_and_show_exact_vins(tmp_path, captured):
    # the map grid 18:32:7 has no 24 V row (18, 20.33, 22.67, 25, ...): the per-Vin figures
    # must still show the nominal 24 V exactly
    result = CliRunner().invoke(main, ["map", str(DEMO), "--vin", "18:32:7", "--out",
                                       str(tmp_path)])
    assert result.exit_code == 0, result.output
    for name in ("efficiency_map.png", "efficiency_curves.png", "loss_breakdown.png",
                 "temperatures.png", "loss_bars.png"):
        _assert_texts_inside(captured[name], name)
    assert "vin 24 V" in " ".join(_texts(captured["loss_breakdown.png"]))
    curves = " ".join(_texts(captured["efficiency_curves.png"]))
    assert all(f"vin {v} V" in curves for v in (18, 24, 32))
    temps = _texts(captured["temperatures.png"])
    assert any(t.startswith("nominal corner: vin 24 V") and "ambient 25 °C" in t
               and "typical part values" in t for t in temps)
    # the hot panel: maximum ambient (55 degC in the demo) with worst-case part values
    assert any(t.startswith("hot corner: vin ") and "ambient 55 °C" in t
               and "worst-case part values" in t for t in temps)


def test_exact_rows_solve_the_design_input_voltages():
    d = lossbudget.load_design(DEMO)
    load = load_axis(d, start=5, stop=100, count=5, percent=True)
    rows = ExactRows.solve(d, load=load, ambient=None)
    assert rows.vins == (18.0, 24.0, 32.0)  # the demo's vin min, nom, max
    # the nominal row is the solve at exactly 24 V, not a neighbouring grid row
    single = lossbudget.solve(d, vin=24.0, load=load)
    np.testing.assert_allclose(rows.nominal.efficiency[1], single.efficiency, rtol=1e-12)
    hot = lossbudget.solve(d, vin=rows.hot_vin, load=load, ambient=55.0, corner="worst")
    np.testing.assert_allclose(rows.hot.efficiency[list(rows.vins).index(rows.hot_vin)],
                               hot.efficiency, rtol=1e-12)


def test_small_group_stays_under_the_share_at_every_load():
    # hand-built: shares 1 %, 1.5 %, 50 %, 47.5 % of a 1 W total at two loads; with a 3 %
    # share only the first two (2.5 % together) may be grouped; adding the next breaks it
    values = np.array([[0.01, 0.01], [0.015, 0.015], [0.5, 0.5], [0.475, 0.475]])
    total = values.sum(axis=0)
    assert sorted(plots._small_group(values, total, 0.03)) == [0, 1]
    # one load where the second is larger: 1 % + 2.5 % = 3.5 % > 3 % there, so only the first
    values[1, 1] = 0.025
    assert plots._small_group(values, values.sum(axis=0), 0.03) == [0]


def test_loss_breakdown_hides_no_more_than_the_stated_share(tmp_path, captured):
    d = lossbudget.load_design(DEMO)
    b = lossbudget.sweep(d, vin=[24.0], load=load_axis(d, start=5, stop=100, count=6,
                                                       percent=True))
    plots.loss_breakdown(b, tmp_path / "lb.png", vin=24.0, min_share=0.03)
    labels = _texts(captured["lb.png"])
    other = [t for t in labels if t.startswith("other: ")]
    named = [t for t in labels if " · " in t and not t.startswith("boost")]
    assert len(other) == 1 and "under 3 % of the loss at every load" in other[0]
    n_other = int(other[0].split()[1])
    # every mechanism is either drawn by name or counted in the group
    assert len(set(named)) + n_other == len(b.losses)
    grouped = [k for k in b.losses if f"{k[0]} · {k[1]}" not in named]
    share = sum(b.losses[k][0] for k in grouped) / b.total_loss[0]
    assert np.all(share < 0.03)


def test_mechanism_bars_list_every_mechanism_sorted_with_values(tmp_path, captured):
    d = lossbudget.load_design(DEMO)
    nominal = lossbudget.solve(d, vin=24.0, load_fraction=1.0)
    worst = lossbudget.solve(d, vin=18.0, load_fraction=1.0, ambient=55.0, corner="worst")
    plots.mechanism_bars(nominal, worst, tmp_path / "bars.png", nominal_what="nominal",
                         worst_what="worst case")
    ax = captured["bars.png"].axes[0]
    ticks = [t.get_text() for t in ax.get_yticklabels()]
    assert len(ticks) == len(worst.losses)
    values = [float(np.ravel(worst.losses[tuple(t.split(" · "))])[0]) for t in ticks]
    assert values == sorted(values, reverse=True)  # largest worst-case loss at the top
    shown = " ".join(t.get_text() for t in ax.texts)
    assert f"{values[0]:.3g} W" in shown


def _row(part, quantity, margin, unit, status, where=None):
    nan = float("nan")
    return LimitRow(part=part, quantity=quantity, unit="degC" if unit == "K" else "V",
                    worst=nan, where=where or {"vin": 18.0, "load": 4.0, "ambient": 55.0},
                    design_limit=nan, absolute_limit=nan, margin=margin, margin_unit=unit,
                    status=status, basis="test row")


def test_margin_chart_has_one_bar_per_row_coloured_by_status(tmp_path, captured):
    rows = (_row("switch", "t_j", 30.0, "K", "ok"), _row("inductor", "t_hot", -4.0, "K",
                                                         "caution"),
            _row("switch", "v_pk", -0.2, "fraction", "fail"),
            _row("cout", "v_pk", 0.3, "fraction", "ok"),
            _row("stage", "thermal", float("nan"), "", "fail"))
    report = LimitReport(design_name="test", derating="moderate", corner="worst", rows=rows,
                         worst_status="fail")
    plots.margin_chart(report, tmp_path / "m.png")
    fig = captured["m.png"]
    bars = {}
    for ax in fig.axes:
        labels = {round(float(y), 6): t.get_text().split("\n")
                  for y, t in zip(ax.get_yticks(), ax.get_yticklabels(), strict=True)}
        for patch in ax.patches:
            label = labels[round(patch.get_y() + patch.get_height() / 2, 6)]
            bars[label[0]] = (patch.get_width(), patch.get_facecolor(), label[1])
    from matplotlib.colors import to_rgba

    assert set(bars) == {"switch t_j", "inductor t_hot", "switch v_pk", "cout v_pk"}
    assert bars["switch v_pk"][0] == pytest.approx(-20.0)  # percent of the design limit
    assert bars["inductor t_hot"][0] == pytest.approx(-4.0)  # kelvin
    for name, status in (("switch t_j", "ok"), ("inductor t_hot", "caution"),
                         ("switch v_pk", "fail")):
        assert bars[name][1] == pytest.approx(to_rgba(plots.STATUS_STYLE[status][0]))
    assert bars["switch t_j"][2] == "vin 18 V · load 4 A · ambient 55 °C"
    # the row without a margin is named under the chart with its status
    assert any(t.startswith("stage thermal: FAIL") for t in _texts(fig))
    _assert_texts_inside(fig, "m.png")


def test_flag_legend_counts_reasons_by_kind():
    # the demo's board at 40 K/W to ambient: runaways at 55 degC over a spread of loop gains
    # and of nodes passing the ceiling; the legend names each kind once with its count
    import tomllib

    raw = tomllib.loads(DEMO.read_text(encoding="utf-8"))
    raw["thermal"]["sink"][0]["rth_to_ambient"] = "40 K/W"
    d = lossbudget.load_design(raw)
    b = lossbudget.sweep(d, vin=np.linspace(18.0, 32.0, 8), load=np.linspace(0.5, 4.0, 12),
                         ambient=55.0)
    text = plots._flag_text(b, b.flagged)
    lines = text.splitlines()[1:]
    counted = [ln for ln in lines if " × " in ln]
    assert counted and len(set(counted)) == len(counted)
    shown = sum(int(ln.split(" × ")[0]) for ln in counted)
    rest = [ln for ln in lines if ln.startswith("+")]
    more = int(rest[0].split()[0][1:]) if rest else 0
    assert shown + more == int(b.flagged.sum())


def test_check_writes_the_margin_chart_and_refuses_a_bad_suffix(tmp_path):
    ok = CliRunner().invoke(main, ["check", str(DEMO), "--chart", str(tmp_path / "m.png")])
    assert ok.exit_code == 0 and (tmp_path / "m.png").stat().st_size > 10_000
    bad = CliRunner().invoke(main, ["check", str(DEMO), "--chart", str(tmp_path / "m.txt")])
    assert bad.exit_code == 2 and "--chart" in bad.stderr and not (tmp_path / "m.txt").exists()


def test_temperature_panels_name_a_map_ambient_that_is_not_the_nominal(tmp_path, captured):
    result = CliRunner().invoke(main, ["map", str(DEMO), "--vin", "18:32:3", "--load-pct",
                                       "20:100:3", "--ambient", "40 degC", "--out",
                                       str(tmp_path)])
    assert result.exit_code == 0, result.output
    temps = _texts(captured["temperatures.png"])
    assert any(t.startswith("the map's ambient: vin 24 V") and "ambient 40 °C" in t
               for t in temps)
    assert not any(t.startswith("nominal corner") for t in temps)
