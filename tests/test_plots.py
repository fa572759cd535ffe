"""Tests of partload.present.charts: charts of study results as PNG files.

The charts are drawn for a small sweep of the demo reheat unit (invented
data).  Each must be an 800 x 500 pixel image (8 x 5 in at 100 dpi, the size
stated in partload.present.charts) with something drawn on it.  The saturation line is
checked against IAPWS-IF97 values of the steam tables (W. Wagner, H.-J.
Kretzschmar, "International Steam Tables", 2nd ed., Springer 2008, table
2.3): at the triple point s' = 0 and s'' = 9.1555 kJ/(kg K); the enthalpy
of saturated vapour peaks at about 2803 kJ/kg near 3 MPa.
"""

from __future__ import annotations

import json
from pathlib import Path

import numpy as np
import pytest
from matplotlib.image import imread
from partload.cli.main import main
from partload.plant.model import load_model
from partload.present.charts import CHARTS, DPI, FIGSIZE, plot_study, saturation_line
from partload.store import read_study

ROOT = Path(__file__).resolve().parents[1]
MODEL = ROOT / "models" / "demo_reheat_unit.toml"
SIZE = (int(FIGSIZE[1] * DPI), int(FIGSIZE[0] * DPI))  # (rows, columns) = (500, 800)


def study(folder: Path, name: str, body: str) -> Path:
    case = folder / f"{name}.toml"
    case.write_text(f"model = {json.dumps(str(MODEL))}\n" + body, encoding="utf-8")
    out = folder / f"{name}.h5"
    assert main(["study", str(case), "--workers", "1", "--output", str(out), "-q"]) == 0
    return out


@pytest.fixture(scope="module")
def results(tmp_path_factory):
    folder = tmp_path_factory.mktemp("plots")
    sweep = """
[sweep]
throttle_flow_fraction = {from = 0.4, to = 1.0, points = 5}
heater_out = ["none", "HP8"]
"""
    a = study(folder, "cool", sweep + 'exhaust_pressure = "5 kPa"\n')
    b = study(folder, "warm", sweep + 'exhaust_pressure = "10 kPa"\n')
    (folder / "p.csv").write_text("time,output [MW],exhaust_pressure [kPa]\n"
                                  + "".join(f"h{k},{150 + 7 * k},{5 + k * 0.2:.1f}\n"
                                            for k in range(24)), encoding="utf-8")
    c = study(folder, "day", '[profile]\nfile = "p.csv"\n')
    return a, b, c


def assert_chart(path: Path) -> None:
    img = imread(path)
    assert img.shape[:2] == SIZE
    rgb = img[..., :3]
    not_white = np.any(rgb < 0.95, axis=-1).mean()
    assert not_white > 0.02, f"{path.name} looks empty"
    # colour, not just black axes (200 pixels: fewer than the 24 dots of the smallest
    # chart here); what is drawn is checked on the figures in test_charts_draw_every_point
    saturated = (rgb.max(axis=-1) - rgb.min(axis=-1) > 0.3).sum()
    assert saturated > 200, f"{path.name} has no coloured curve"


def test_every_chart_of_a_sweep(results, tmp_path):
    files = plot_study([results[0]], tmp_path)
    assert [f.name for f in files] == [f"cool_{c}.png" for c in CHARTS]
    for f in files:
        assert_chart(f)


def test_two_files_overlaid(results, tmp_path):
    files = plot_study([results[0], results[1]], tmp_path, loads=[0.4, 1.0])
    assert [f.name for f in files] == [f"cool_vs_warm_{c}.png" for c in CHARTS]
    for f in files:
        assert_chart(f)


def test_profile_charts_and_cli(results, tmp_path, capsys):
    assert main(["plot", str(results[2]), "--output", str(tmp_path), "--loads", "60,90"]) == 0
    printed = capsys.readouterr().out.split()
    assert len(printed) == len(CHARTS)
    for f in printed:
        assert_chart(Path(f))


def test_charts_draw_every_converged_point(results):
    from partload.present.charts import plot_bleed_flows, plot_node_pressures, plot_willans

    st = read_study(results[0])
    n_ok = int(st.ok.sum())
    assert n_ok == 10
    ax = plot_willans([st]).axes[0]
    drawn = [ln for ln in ax.lines if not ln.get_label().startswith("_")]
    assert sum(len(ln.get_xdata()) for ln in drawn) == n_ok
    xy = np.concatenate([np.column_stack([ln.get_xdata(), ln.get_ydata()]) for ln in drawn])
    expected = np.column_stack([st.total("throttle_flow")[st.ok],
                                st.total("generator_output")[st.ok] / 1e6])
    np.testing.assert_allclose(np.sort(xy, axis=0), np.sort(expected, axis=0), rtol=1e-12)
    # one line per node and series on the pressure chart; E8 is closed with HP8 out
    ax = plot_node_pressures([st]).axes[0]
    assert len([ln for ln in ax.lines if len(ln.get_xdata())]) == 2 * len(st.names["nodes"])
    ax = plot_bleed_flows([st]).axes[0]
    assert len([ln for ln in ax.lines if len(ln.get_xdata())]) == 2 * 8 - 1


def test_charts_use_the_stored_numbers(results):
    # the Willans line of the demo unit rises with flow (a fact of the trade: output is
    # nearly proportional to throttle flow), and the stored output is what is drawn
    st = read_study(results[0])
    flow = st.total("throttle_flow")[st.series == 0]
    power = st.total("generator_output")[st.series == 0]
    assert np.all(np.diff(power) > 0) and np.all(np.diff(flow) > 0)
    # HP8 out of service: more output at the same flow, higher heat rate (less
    # regeneration) - common practice for a top heater out of service
    p_out = st.total("generator_output")[st.series == 1]
    hr_in = st.total("heat_rate")[st.series == 0]
    hr_out = st.total("heat_rate")[st.series == 1]
    assert np.all(p_out > power) and np.all(hr_out > hr_in)


def test_saturation_line_against_steam_tables():
    s, h = saturation_line()  # [J/(kg K)], [J/kg]
    assert s[0] == pytest.approx(0.0, abs=0.5)  # liquid at the triple point [J/(kg K)]
    # IAPWS R7-97(2012) saturation properties (from memory): s'' = 9.1555 kJ/(kg K) at
    # the triple point; h'' peaks at about 2803 kJ/kg near 3 MPa
    assert s[-1] == pytest.approx(9155.5, rel=1e-3)  # vapour at the triple point
    assert h.max() == pytest.approx(2803e3, rel=1e-3)


def test_unknown_chart_and_too_many_files(results):
    from partload.errors import InputError

    with pytest.raises(InputError, match="unknown chart"):
        plot_study([results[0]], charts=["pie"])
    with pytest.raises(InputError, match="one result file, or two"):
        plot_study(list(results))


def test_demo_command_writes_file_and_charts(tmp_path, monkeypatch, capsys):
    monkeypatch.chdir(ROOT)  # the demo case is found in ./cases
    out = tmp_path / "demo"
    assert main(["demo", "--output", str(out), "--workers", "2", "-q"]) == 0
    st = read_study(out / "reheat_load_sweep.h5")
    assert st.n_points == 30 and st.ok.all()
    # the 15-point curves are continuous, with no jumps: along each series the output,
    # every free node pressure and every open bleed rise with throttle flow and the heat
    # rate falls (ellipse law and sliding pressure: common practice), and no step stands
    # out: a second difference is below 0.3 of the largest first difference (measured
    # at most 0.22, the heat rate's hyperbola; a jump to another solution would give 1-2)
    names = st.names["nodes"]
    for s in (0, 1):
        m = st.series == s
        assert m.sum() == 15
        curves = {"output": st.total("generator_output")[m],
                  "heat rate": -st.total("heat_rate")[m]}
        for j, node in enumerate(names):
            if node != "condenser":
                curves[f"p {node}"] = st.data["nodes/pressure"][m, j]
        for j, ex in enumerate(st.names["extractions"]):
            if not (s == 1 and ex == "E8"):  # closed with HP8 out
                curves[f"bleed {ex}"] = st.data["extractions/flow"][m, j]
        for what, y in curves.items():
            d1 = np.diff(y)
            assert (d1 > 0).all(), what
            assert np.abs(np.diff(d1)).max() < 0.3 * d1.max(), what
    for c in CHARTS:
        assert_chart(out / f"reheat_load_sweep_{c}.png")
    # run again: the complete result is kept and the charts redrawn, here in US units
    import partload.present.charts as charts

    drawn = []
    plot = charts.plot_study
    monkeypatch.setattr(charts, "plot_study",
                        lambda *a, **kw: drawn.append(kw.get("units")) or plot(*a, **kw))
    assert main(["demo", "--output", str(out), "-q", "--units", "us"]) == 0
    assert "nothing to do" in capsys.readouterr().out
    assert drawn == ["us"]


def test_valve_points_marked(tmp_path):
    # the nozzle-governed demo at its held design pressure: valves CV1, CV2 and CV3 reach
    # full opening between 30 % and 105 % flow (CV4 only at 109 %, see partload valve-points)
    from partload.present.charts import plot_heat_rate, plot_willans
    case = tmp_path / "loop.toml"
    nozzle = ROOT / "models" / "demo_reheat_nozzle_unit.toml"
    case.write_text(f"model = {json.dumps(str(nozzle))}\n[operation]\npressure_mode = "
                    f"'fixed'\n[sweep]\nthrottle_flow_fraction = {{from = 0.3, to = 1.05, "
                    f"points = 16}}\n", encoding="utf-8")
    out = tmp_path / "loop.h5"
    assert main(["study", str(case), "--workers", "1", "--output", str(out), "-q"]) == 0
    st = read_study(out)
    for plot in (plot_heat_rate, plot_willans):
        ax = plot([st]).axes[0]
        marks = [ln for ln in ax.lines if ln.get_marker() == "D"]
        assert len(marks) == 3
        assert [t.get_text() for t in ax.texts] == ["CV1", "CV2", "CV3"]


# ------------------------------------------------------- chart fixes (issue 14)

def _red_rings(fig) -> int:
    """Points ringed in the caution colour on every axes of a figure."""
    from matplotlib.colors import to_rgba

    red = to_rgba("#d62728")
    n = 0
    for ax in fig.axes:
        for coll in ax.collections:
            ec = coll.get_edgecolor()
            if len(ec) and np.allclose(ec[0], red):
                n += len(coll.get_offsets())
    return n


def test_pressure_ratio_beside_the_absolute_view(results):
    from partload.present.charts import plot_node_pressures

    st = read_study(results[0])
    fig = plot_node_pressures([st])
    absolute, ratio = fig.axes[0], fig.axes[1]
    assert absolute.get_yscale() == "log" and ratio.get_yscale() == "linear"
    nodes = st.names["nodes"]
    design = load_model(MODEL).design_pressure
    lines = [ln for ln in ratio.lines if len(ln.get_xdata()) == 5][:len(nodes)]
    absolute_lines = [ln for ln in absolute.lines if len(ln.get_xdata()) == 5][:len(nodes)]
    assert len(lines) == len(nodes)
    for node, ln, ab in zip(nodes, lines, absolute_lines):
        x, y = np.asarray(ln.get_xdata()), np.asarray(ln.get_ydata())
        # hand calculation: each point is the absolute one over the node's design
        # pressure, at throttle flow over the design 280 kg/s (models/demo_reheat_unit.toml)
        np.testing.assert_allclose(y, np.asarray(ab.get_ydata()) * 1e5 / design[node],
                                   rtol=1e-12)
        np.testing.assert_allclose(x, np.asarray(ab.get_xdata()) / 280.0, rtol=1e-12)
        k = int(np.argmin(abs(x - 1.0)))
        assert x[k] == pytest.approx(1.0, rel=1e-9)
        if node == "condenser":
            # the case's 5 kPa over the design 6.8 kPa (hand calculation)
            assert y[k] == pytest.approx(5.0 / 6.8, rel=1e-9)
        elif node in ("throttle", "hp_inlet", "hp_mid", "cold_reheat", "hot_reheat"):
            # at design flow the HP and IP nodes are at design pressure: the ellipse
            # law makes them insensitive to the back pressure (common practice, no
            # source; measured 1 - 3e-6)
            assert y[k] == pytest.approx(1.0, abs=1e-4)


def test_series_styles_are_distinct_beyond_a_few():
    from partload.present.charts import series_style

    styles = [series_style(j) for j in range(70)]
    assert len(set(styles)) == 70  # 10 colours x 7 markers, co-prime: all pairs


def test_legends_inside_the_figure_and_rings_and_captions_on_every_chart(results):
    from partload.present.charts import plot_expansion

    studies = [read_study(results[0]), read_study(results[1])]
    assert all((st.cautions > 0).any() for st in studies)  # HP8 out at full flow
    for name, fn in CHARTS.items():
        fig = fn(studies)
        fig.canvas.draw()
        renderer = fig.canvas.get_renderer()
        box = fig.bbox
        legends = list(fig.legends) + [ax.get_legend() for ax in fig.axes if ax.get_legend()]
        assert legends, name
        for leg in legends:
            bb = leg.get_window_extent(renderer)
            assert bb.x0 >= box.x0 - 0.5 and bb.x1 <= box.x1 + 0.5, name
            assert bb.y0 >= box.y0 - 0.5 and bb.y1 <= box.y1 + 0.5, name
        # the axes keep clear of the legends
        right = min(leg.get_window_extent(renderer).x0 for leg in fig.legends)
        for ax in fig.axes:
            assert ax.get_window_extent(renderer).x1 <= right, name
        assert _red_rings(fig) > 0, f"{name}: no caution rings"
        note = " ".join(t.get_text() for t in fig.texts).replace("\n", " ")
        assert "valves throttle" in note and "throttle pressure sliding" in note, name
        # back pressures of the two files (the cases above: 5 and 10 kPa)
        assert "back pressure 5.00 kPa" in note and "back pressure 10.00 kPa" in note, name
        assert "boiler efficiency not included" in note, name
    # the h-s chart: every series of each file (3 loads x 2 series x 2 files), and the
    # second LP casing of the reheat unit as a line of its own (dash-dotted)
    fig = plot_expansion(studies)
    entries = [t.get_text() for t in fig.legends[0].get_texts()]
    assert len(entries) == 12
    assert sum("heater_out=HP8" in e for e in entries) == 6
    ax = fig.axes[0]
    assert any(ln.get_linestyle() == "-." for ln in ax.lines)


def test_small_multiples_beyond_four_series(tmp_path):
    from partload.present.charts import plot_bleed_flows

    out = study(tmp_path, "bp", '[sweep]\nthrottle_flow_fraction = [0.6, 1.0]\n'
                'exhaust_pressure = ["4 kPa", "6 kPa", "8 kPa", "10 kPa", "12 kPa"]\n')
    st = read_study(out)
    fig = plot_bleed_flows([st])
    assert len(fig.axes) == 5  # one panel per back pressure
    assert [ax.get_title() for ax in fig.axes] == st.series_labels


# Hand factors from the definitions of the units, independent of partload.units:
PSI_PER_BAR = 14.5037738  # 1 psi = 1 lbf/in^2 = 6894.757 Pa, so 1 bar = 1e5 / 6894.757 psi
KLBH_PER_KGS = 3.6 / 0.45359237  # 1 lb = 0.45359237 kg (exact, 1959 definition); 3600 s/h
BTUKWH_PER_KJKWH = 1.0 / 1.055056  # 1 Btu (International Table) = 1.055056 kJ
BTULB_PER_KJKG = 1.0 / 2.326  # 1 Btu/lb = 2.326 kJ/kg (exact, IT Btu over the pound)
BTULBR_PER_KJKGK = 1.0 / 4.1868  # 1 Btu/(lb degR) = 4.1868 kJ/(kg K) (exact, IT Btu)
INHG_PER_KPA = 1.0 / 3.386389  # 1 inHg (conventional, 0 degC mercury) = 3.386389 kPa


def _curves_drawn(fig):
    """``(x, y)`` of every line drawn on the figure's axes with data, in order."""
    return [(np.asarray(ln.get_xdata(), float), np.asarray(ln.get_ydata(), float))
            for ax in fig.axes for ln in ax.lines if len(ln.get_xdata())]


@pytest.mark.parametrize("chart,fx,fy,xunit,yunit", [
    ("willans", KLBH_PER_KGS, 1.0, "klb/h", "MW"),
    ("heat_rate", 1.0, BTUKWH_PER_KJKWH, "MW", "Btu/kWh"),
    ("node_pressures", KLBH_PER_KGS, PSI_PER_BAR, "klb/h", "psia"),
    ("bleed_flows", 1.0, KLBH_PER_KGS, "MW", "klb/h"),
    ("expansion", BTULBR_PER_KJKGK, BTULB_PER_KJKG, "Btu/(lb degR)", "Btu/lb"),
])
def test_a_chart_in_us_units_draws_the_same_curves(results, chart, fx, fy, xunit, yunit):
    st = read_study(results[0])
    metric = CHARTS[chart]([st])
    us = CHARTS[chart]([st], units="us")
    a, b = _curves_drawn(metric), _curves_drawn(us)
    assert len(a) == len(b) > 0
    first = us.axes[0]
    assert first.get_xlabel().endswith(f"[{xunit}]"), first.get_xlabel()
    assert first.get_ylabel().endswith(f"[{yunit}]"), first.get_ylabel()
    ratio_panel = chart == "node_pressures"
    for k, ((xm, ym), (xu, yu)) in enumerate(zip(a, b)):
        if ratio_panel and metric.axes[1].lines and k >= len(metric.axes[0].lines):
            # the ratio panel is dimensionless: the same numbers in both systems
            np.testing.assert_allclose(xu, xm, rtol=1e-9)
            np.testing.assert_allclose(yu, ym, rtol=1e-9)
            continue
        # rtol 1e-6: the hand factors above carry seven figures
        np.testing.assert_allclose(xu, xm * fx, rtol=1e-6)
        np.testing.assert_allclose(yu, ym * fy, rtol=1e-6)
    note = " ".join(t.get_text() for t in us.texts).replace("\n", " ")
    # the case's 5 kPa back pressure in inHg (hand factor above): 1.48 inHg
    assert f"back pressure {5.0 * INHG_PER_KPA:.2f} inHg" in note


def test_profile_charts_and_plot_command_in_us_units(results, tmp_path, capsys):
    from partload.present.charts import plot_load_duration, plot_time_series

    st = read_study(results[2])
    fig = plot_time_series([st], units="us")
    assert fig.axes[0].get_ylabel() == "output [MW]"
    assert fig.axes[1].get_ylabel() == "heat rate [Btu/kWh]"
    hr = np.asarray(fig.axes[1].lines[0].get_ydata(), float)
    # the stored heat rate [J/J] in Btu/kWh: 3600 kJ/kWh per J/J, then the IT Btu
    np.testing.assert_allclose(hr, st.total("heat_rate")[st.ok] * 3600 * BTUKWH_PER_KJKWH,
                               rtol=1e-6)
    assert plot_load_duration([st], units="us").axes[0].get_ylabel() == \
        "generator output [MW]"
    assert main(["plot", str(results[0]), "--output", str(tmp_path), "--units", "us"]) == 0
    printed = capsys.readouterr().out.split()
    assert len(printed) == len(CHARTS)
    for f in printed:
        assert_chart(Path(f))
    with pytest.raises(SystemExit):  # argparse refuses a system it does not know
        main(["plot", str(results[0]), "--units", "si"])
    from partload.errors import InputError

    with pytest.raises(InputError, match="units"):
        plot_study([results[0]], units="imperial")
