"""Tests of partload.present.diagram: the heat-balance diagram of a solved point (SVG).

Every demo model (invented data) is drawn at its design point and, for a case,
in the difference view.  The SVG must be well-formed XML, name every
component of its model, and lay the graph out left to right (a component's
outlet node in a later column than its inlet) with parallel branches on rows
of their own.
"""

from __future__ import annotations

import re
import xml.etree.ElementTree as ET
from pathlib import Path

import pytest
from partload.cautions.checks import check_point
from partload.plant.case import design_conditions, load_case
from partload.plant.model import load_model
from partload.present.diagram import diagram_svg, layout
from partload.solve.point import solve_point

ROOT = Path(__file__).resolve().parents[1]
MODELS = sorted((ROOT / "models").glob("*.toml"))
SVG = "{http://www.w3.org/2000/svg}"


def _texts(svg: str) -> list[str]:
    root = ET.fromstring(svg)  # raises on XML that is not well formed
    assert root.tag == f"{SVG}svg"
    return ["".join(t.itertext()) for t in root.iter(f"{SVG}text")]


@pytest.mark.parametrize("path", MODELS, ids=lambda p: p.stem)
def test_design_diagram_is_xml_and_names_every_component(path):
    model = load_model(path)
    r = solve_point(model, design_conditions(model))
    svg = diagram_svg(model, r)
    texts = _texts(svg)
    joined = "\n".join(texts)
    for comp in model.components:
        assert comp.name in joined, f"{comp.name} missing from the diagram of {path.name}"
    for node in model.graph.nodes:
        assert node in texts, f"node {node} is not labelled"
    # the heat rate is shown, and says which one (common practice, no source: a heat
    # rate without its kind is ambiguous)
    assert "turbine-cycle heat rate" in joined
    # the generator output of the box is the solved one, to two decimals in MW
    # (regression value: the point's own total)
    out = f"{r.totals['generator_output'] / 1e6:.2f} MW"
    assert out in joined


@pytest.mark.parametrize("path", MODELS, ids=lambda p: p.stem)
def test_layout_runs_left_to_right_with_branches_apart(path):
    model = load_model(path)
    lay = layout(model.graph, model.throttle.node)
    for comp in model.steam_path:
        assert lay.column[comp.outlet] > lay.column[comp.inlet]
    # every node where branches leave: its successors are on distinct rows (or a
    # successor is also reached another way, a merge)
    for n in model.graph.nodes:
        succ = [m for m in model.graph.successors(n) if model.graph.in_degree(m) == 1]
        if len(succ) > 1:
            rows = [lay.row[m] for m in succ]
            assert len(set(rows)) == len(rows)


def test_parallel_lp_casings_of_the_reheat_unit_on_two_rows(reheat_model):
    # the demo reheat unit has two LP casings from 'crossover' to 'condenser'
    # (models/demo_reheat_unit.toml: LPA1..3 and LPB1..2)
    lay = layout(reheat_model.graph, reheat_model.throttle.node)
    assert lay.n_rows == 2
    assert lay.row["lpa_x1"] != lay.row["lpb_x1"]
    assert lay.row["condenser"] == lay.row["crossover"] == 0


def test_difference_view_shows_the_change_from_design():
    case = load_case(ROOT / "cases" / "reheat_top_heater_out.toml")
    r = solve_point(case.model, case.conditions, case.backend)
    d = solve_point(case.model, design_conditions(case.model), case.backend)
    cautions = check_point(case.model, case.conditions, r)
    svg = diagram_svg(case.model, r, case_name=case.name, design=d, cautions=cautions)
    texts = _texts(svg)
    joined = "\n".join(texts)
    # output difference (hand calculation from the two solved totals, in MW, shown
    # with two decimals and its sign)
    dP = (r.totals["generator_output"] - d.totals["generator_output"]) / 1e6
    assert f"({dP:+.2f})" in joined
    assert dP > 0  # README worked example: output rises with HP8 out (+6.2 %)
    # the numbers the README's worked example "a page to send" quotes (regression values)
    for quoted in ("generator output 343.49 (+20.09) MW",
                   "turbine-cycle heat rate 7927.2 (+58.4) kJ/kWh", "79.10 (+7.10) bar"):
        assert quoted in texts, quoted
    # the heater taken out is marked as such
    assert "out of service" in joined
    # the closed extraction E8 carries no steam: drawn grey with 0.00 kg/s
    e8 = next(t for t in texts if t.startswith("E8 "))
    assert re.match(r"E8 0\.00 \(-\d+\.\d\d\) kg/s", e8), e8
    # the caution of the case (pressure rise at hp_mid) is ringed and named
    assert "pressure_rise" in joined
    assert "caution at hp_mid" in svg


def test_governing_stage_valves_are_listed():
    case = load_case(ROOT / "cases" / "industrial_nozzle_part_load.toml")
    r = solve_point(case.model, case.conditions, case.backend)
    texts = _texts(diagram_svg(case.model, r, case_name=case.name))
    valves = r.tables["governing_valves"]
    for k, name in enumerate(valves.names):
        row = f"{name}  {100 * valves.columns['opening'][k]:.0f} %  "
        assert any(t.startswith(row) for t in texts), row
    # process steam leaves the industrial unit as such
    assert any("to process" in t for t in texts)


def test_a_model_without_heater_train_is_drawn():
    # tests/helpers.variant: the demo reheat unit without heaters, pumps and feedwater
    from helpers import variant

    model = variant(heaters=False)
    r = solve_point(model, design_conditions(model))
    texts = _texts(diagram_svg(model, r))
    joined = "\n".join(texts)
    for comp in model.components:
        assert comp.name in joined
    assert "condenser" in texts  # the exhaust node is still labelled


def _text_boxes(svg: str, cls: str) -> list[tuple[float, float, float, float, str]]:
    """Boxes of the texts of class ``cls``, ``(x0, y0, x1, y1, text)`` [px],
    estimated here from the character count and the font size: 0.6 em a character
    and 1.3 em tall (from the baseline up one em, down 0.3 em).  Hand bound over
    what headless Chromium draws in DejaVu Sans for the drain labels (measured: at
    most 0.51 em a character, 1.14 em tall).  Drain labels start at their x,
    feedwater stream labels are centred on it."""
    out = []
    for t in ET.fromstring(svg).iter(f"{SVG}text"):
        if t.get("class") != cls:
            continue
        text = "".join(t.itertext())
        size = float(re.search(r"font-size:([\d.]+)px", t.get("style")).group(1))
        x, y = float(t.get("x")), float(t.get("y"))
        width = 0.6 * size * len(text)
        x0 = x if t.get("text-anchor") == "start" else x - width / 2
        assert t.get("text-anchor") == ("start" if cls == "drain" else "middle")
        out.append((x0, y - size, x0 + width, y + 0.3 * size, text))
    return out


def _drain_boxes(svg: str) -> list[tuple[float, float, float, float, str]]:
    """Boxes of the drain labels (:func:`_text_boxes`)."""
    return _text_boxes(svg, "drain")


def _drain_segments(svg: str) -> list[tuple[float, float, float, float]]:
    """The straight pieces of the drain lines, ``(x0, y0, x1, y1)`` [px]."""
    out = []
    for pl in ET.fromstring(svg).iter(f"{SVG}polyline"):
        if pl.get("class") != "drain":
            continue
        pts = [tuple(float(v) for v in p.split(",")) for p in pl.get("points").split()]
        out += [(a[0], a[1], b[0], b[1]) for a, b in zip(pts, pts[1:])]
    return out


def _overlap(a, b) -> bool:
    return a[0] < b[2] and b[0] < a[2] and a[1] < b[3] and b[1] < a[3]


def _drain_diagrams():
    for path in MODELS:
        model = load_model(path)
        yield path.stem, model, solve_point(model, design_conditions(model)), None
    # the difference view has the longest labels: the top-heater-out case
    case = load_case(ROOT / "cases" / "reheat_top_heater_out.toml")
    yield ("reheat_top_heater_out vs design", case.model,
           solve_point(case.model, case.conditions, case.backend),
           solve_point(case.model, design_conditions(case.model), case.backend))


@pytest.mark.parametrize("units", ["metric", "us"])
def test_no_drain_line_crosses_a_feedwater_label(units):
    # a drain pumped forward rises into the feedwater beside the label of that stream
    # (the demo reheat unit pumps LP2's drain forward: its model file)
    forward = 0
    for name, model, r, design in _drain_diagrams():
        svg = diagram_svg(model, r, design=design, units=units)
        labels = _text_boxes(svg, "stream")
        assert labels or not model.heaters, name
        forward += sum(1 for h in model.heaters.values() if h.drain_to == "forward")
        for x0, y0, x1, y1 in _drain_segments(svg):
            line = (min(x0, x1) - 0.5, min(y0, y1) - 0.5, max(x0, x1) + 0.5, max(y0, y1) + 0.5)
            for a in labels:
                assert not _overlap(a, line), f"{name}: a drain line crosses {a[4]!r}"
    assert forward >= 1


@pytest.mark.parametrize("units", ["metric", "us"])
def test_drain_labels_overlap_neither_each_other_nor_a_drain_line(units):
    n_labels = 0
    for name, model, r, design in _drain_diagrams():
        svg = diagram_svg(model, r, design=design, units=units)
        boxes = _drain_boxes(svg)
        # every heater that drains (a closed heater in service with a drain flow) has
        # one label (count from the solved point)
        drains = [h for h in r.heaters if h.in_service and h.heater_type == "closed"
                  and h.drain_flow > 0]
        assert len(boxes) == len(drains), name
        assert all(b[4].startswith("drain ") for b in boxes)
        n_labels += len(boxes)
        for i, a in enumerate(boxes):
            for b in boxes[i + 1:]:
                assert not _overlap(a, b), f"{name}: {a[4]!r} overlaps {b[4]!r}"
        for seg in _drain_segments(svg):
            x0, y0, x1, y1 = seg
            line = (min(x0, x1) - 0.5, min(y0, y1) - 0.5, max(x0, x1) + 0.5, max(y0, y1) + 0.5)
            for a in boxes:
                assert not _overlap(a, line), f"{name}: a drain line crosses {a[4]!r}"
        # and inside the drawing
        width = float(ET.fromstring(svg).get("width"))
        height = float(ET.fromstring(svg).get("height"))
        for a in boxes:
            assert 0.0 <= a[0] and a[2] <= width and a[3] <= height - 36, (name, a[4])
    # the demo models have drains to label (7 in the reheat unit alone, its model file)
    assert n_labels >= 7


def test_diagram_in_us_units():
    # hand factors from the definitions of the units (independent of partload.units):
    # 1 psi = 6894.757 Pa; 1 lb = 0.45359237 kg (exact); 1 Btu (IT) = 1.055056 kJ;
    # 1 Btu/lb = 2.326 kJ/kg (exact); degF = degC * 9/5 + 32; 1 inHg = 3.386389 kPa
    case = load_case(ROOT / "cases" / "reheat_top_heater_out.toml")
    r = solve_point(case.model, case.conditions, case.backend)
    d = solve_point(case.model, design_conditions(case.model), case.backend)
    texts = _texts(diagram_svg(case.model, r, case_name=case.name, units="us"))
    joined = "\n".join(texts)
    for unit in (" psia", " \u00b0F", " Btu/lb", " klb/h", " Btu/kWh", " inHg"):
        assert unit in joined, unit
    for unit in (" bar", " \u00b0C", " kJ/kg", " kg/s", " kJ/kWh", " kPa"):
        assert unit not in joined, unit
    t = r.totals
    assert f"generator output {t['generator_output'] / 1e6:.2f} MW" in texts
    hr = t["heat_rate"] * 3600 / 1.055056  # J/J -> kJ/kWh -> Btu/kWh
    assert f"turbine-cycle heat rate {hr:.1f} Btu/kWh" in texts
    flow = t["throttle_flow"] * 3.6 / 0.45359237  # kg/s -> klb/h
    assert any(x.startswith(f"throttle {flow:.2f} klb/h") for x in texts)
    nodes = r.tables["nodes"]
    i = nodes.names.index("throttle")
    p = nodes.columns["pressure"][i] / 6894.757
    T = (nodes.columns["temperature"][i] - 273.15) * 9 / 5 + 32
    h = nodes.columns["enthalpy"][i] / 2326.0
    for label in (f"{p:.2f} psia", f"{T:.1f} \u00b0F", f"{h:.1f} Btu/lb"):
        assert label in texts, label
    # the back pressure of the case in inHg
    p_back = nodes.columns["pressure"][nodes.names.index("condenser")] / 3386.389
    assert f"back pressure {p_back:.2f} inHg" in joined
    # the difference view in US units: the output's change stays in MW, the heat
    # rate's is in Btu/kWh (hand calculation from the two solved totals)
    texts = _texts(diagram_svg(case.model, r, case_name=case.name, design=d, units="us"))
    dhr = (t["heat_rate"] - d.totals["heat_rate"]) * 3600 / 1.055056
    assert any(x.startswith(f"turbine-cycle heat rate {hr:.1f} ({dhr:+.1f}) Btu/kWh")
               for x in texts)
