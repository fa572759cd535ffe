"""One operating point: design reproduction, balances, trade facts, limits."""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pytest
from helpers import node_mass_imbalance, turbine_energy_imbalance, variant
from partload.errors import InfeasibleError
from partload.plant.case import Conditions, load_case
from partload.solve.point import PointEquations, solve_point
from partload.steam.if97 import get_backend

CASES = sorted((Path(__file__).resolve().parent.parent / "cases").glob("*.toml"))


@pytest.mark.parametrize("model_name", ["demo_reheat_unit", "demo_industrial_unit"])
def test_design_inputs_reproduce_design_heat_balance(model_name, request):
    model = request.getfixturevalue("reheat_model" if "reheat" in model_name
                                    else "industrial_model")
    cond = Conditions(throttle_flow=model.throttle.flow)
    eq = PointEquations(model, cond, get_backend())
    # start 10 % away from design so that Newton has to find it
    guess = eq.guess()
    guess[: eq.n_p] += np.log(0.9)
    r = solve_point(model, cond, guess=guess)
    assert r.iterations > 0
    for i, n in enumerate(r.node_names):
        # identity: the calibrated model at design inputs gives the design pressures
        assert r.node_p[i] == pytest.approx(model.design_pressure[n], rel=1e-8), n
    for i, e in enumerate(r.extraction_names):
        assert r.extraction_flow[i] == pytest.approx(model.extractions[e].design_flow,
                                                     rel=1e-8)
    for i, g in enumerate(r.group_names):
        assert r.group_flow[i] == pytest.approx(model.design_group_flow[g], rel=1e-8)
        assert r.group_eta[i] == pytest.approx(model.groups[i].eta_design, rel=1e-8)
    # design output: the same as the design march of calibration (no second solve)
    eq0 = PointEquations(model, cond, get_backend())
    _, st = eq0.evaluate(eq0.guess(), detail=True)
    assert r.totals["generator_output"] == pytest.approx(st["P_gen"], rel=1e-9)


@pytest.mark.parametrize("case_path", CASES, ids=[p.stem for p in CASES])
def test_every_demo_case_converges_and_balances(case_path):
    case = load_case(case_path)
    r = solve_point(case.model, case.conditions)
    assert r.converged and r.residual <= 1e-10
    m_T = r.totals["throttle_flow"]
    for node, err in node_mass_imbalance(case.model, r).items():
        assert abs(err) <= 1e-9 * m_T, node
    i_src = r.node_names.index(case.model.source)
    throttle_energy = m_T * r.node_h[i_src]
    # energy balance closure of the steam path to 1e-9 of throttle energy
    assert abs(turbine_energy_imbalance(case.model, r)) <= 1e-9 * throttle_energy


def test_stage_pressures_nearly_proportional_to_flow(reheat_model):
    # Common practice, no source: in a condensing turbine the pressure at the
    # inlet of an HP or IP group is nearly proportional to the flow through it
    # (the ellipse law with a large pressure ratio; the small rest is the
    # change of inlet temperature); near the exhaust it is not.
    model = reheat_model
    next_group = {"hp_inlet": "HP1", "hp_mid": "HP2", "hot_reheat": "IP1", "ip_x1": "IP2",
                  "ip_x2": "IP3"}
    for f in (0.4, 0.6, 0.8, 1.0):
        r = solve_point(model, Conditions(throttle_flow=f * model.throttle.flow))
        for n, g in next_group.items():
            p_ratio = r.node(n)["p"] / model.design_pressure[n]
            m_ratio = r.group(g)["flow"] / model.design_group_flow[g]
            assert p_ratio == pytest.approx(m_ratio, rel=0.05), (f, n)
        m_ratio = r.group("LPA3")["flow"] / model.design_group_flow["LPA3"]
        p_ratio = r.node("lpa_x2")["p"] / model.design_pressure["lpa_x2"]
        assert p_ratio > 1.02 * m_ratio or f > 0.6  # not proportional near the exhaust


def test_willans_line_is_straight_with_throttle_governing():
    # Willans (1888); common practice: with throttle governing and constant
    # efficiencies, throttle flow versus output is a straight line.
    model = variant(correction="constant", heaters=False)
    flows, outputs = [], []
    for f in np.linspace(0.5, 1.0, 6):
        r = solve_point(model, Conditions(throttle_flow=f * model.throttle.flow,
                                          pressure_mode="fixed"))
        flows.append(r.totals["throttle_flow"])
        outputs.append(r.totals["generator_output"])
    coef = np.polyfit(outputs, flows, 1)
    fit = np.polyval(coef, outputs)
    r2 = 1.0 - np.sum((np.array(flows) - fit) ** 2) / np.sum((flows - np.mean(flows)) ** 2)
    assert r2 > 0.999
    assert coef[0] > 0.0
    # the no-load intercept is positive: a Willans line does not pass through zero
    assert np.polyval(coef, 0.0) > 0.0


def test_closing_an_extraction_raises_downstream_pressure_and_output():
    # Common practice, no source: steam that is not bled passes on and works in
    # the following groups; their inlet pressures rise with their flow.
    model = variant(heaters=False)
    base = solve_point(model, Conditions(throttle_flow=model.throttle.flow))
    closed = solve_point(model, Conditions(throttle_flow=model.throttle.flow,
                                           extraction_control=(("E6", ("closed", 0.0)),)))
    assert closed.totals["generator_output"] > base.totals["generator_output"]
    for n in ["ip_x1", "ip_x2", "crossover", "lpa_x1", "lpb_x1"]:
        assert closed.node(n)["p"] > base.node(n)["p"], n


def test_process_extraction_closed_raises_output(industrial_model):
    base = solve_point(industrial_model, Conditions(throttle_flow=45.0))
    closed = solve_point(industrial_model, Conditions(
        throttle_flow=45.0, extraction_control=(("process_steam", ("closed", 0.0)),)))
    # common practice, no source: 25 kg/s more through the LP of a 45 kg/s machine is
    # worth well over 10 % more output
    assert closed.totals["generator_output"] > 1.1 * base.totals["generator_output"]
    assert closed.node("lp_x")["p"] > base.node("lp_x")["p"]


def test_flow_above_valves_wide_open_is_refused_with_the_maximum(reheat_model):
    with pytest.raises(InfeasibleError, match=r"maximum throttle flow \d+\.\d+ kg/s"):
        solve_point(reheat_model, Conditions(throttle_flow=1.1 * reheat_model.throttle.flow,
                                             pressure_mode="fixed"))
    with pytest.raises(InfeasibleError, match=r"highest allowed 175.00 bar"):
        solve_point(reheat_model, Conditions(throttle_flow=1.2 * reheat_model.throttle.flow))


def test_throttle_governing_takes_the_drop_in_the_valves(reheat_model):
    r = solve_point(reheat_model, Conditions(throttle_flow=0.6 * reheat_model.throttle.flow,
                                             pressure_mode="fixed"))
    assert r.totals["throttle_pressure"] == pytest.approx(reheat_model.throttle.pressure)
    # the first-stage inlet pressure follows the flow, the valves take the rest
    # ellipse law: at 60 % flow the first-stage pressure is near 60 % of design (a few
    # percent more for the hotter throttled steam); 65 % bounds it (hand estimate)
    assert r.node("hp_inlet")["p"] < 0.65 * reheat_model.design_pressure["hp_inlet"]
    s = solve_point(reheat_model, Conditions(throttle_flow=0.6 * reheat_model.throttle.flow))
    # throttling loses work: sliding pressure gives more output at the same flow
    assert s.totals["generator_output"] > r.totals["generator_output"]


def test_lower_condenser_pressure_gives_more_output(reheat_model):
    # common practice, no source: better vacuum, more LP work (near design flow)
    a = solve_point(reheat_model, Conditions(throttle_flow=280.0, exhaust_pressure=5.5e3))
    b = solve_point(reheat_model, Conditions(throttle_flow=280.0, exhaust_pressure=9.0e3))
    assert a.totals["generator_output"] > b.totals["generator_output"]


def test_backends_give_the_same_point(reheat_model):
    model = variant(heaters=False)
    cond = Conditions(throttle_flow=0.7 * model.throttle.flow)
    a = solve_point(model, cond, "seuif97")
    b = solve_point(model, cond, "iapws")
    # the two implementations of IF97 agree to about 1e-6 on these states; the
    # solved pressures and output agree to 1e-5
    np.testing.assert_allclose(a.node_p, b.node_p, rtol=1e-5)
    assert a.totals["generator_output"] == pytest.approx(b.totals["generator_output"],
                                                         rel=1e-5)


def test_plain_newton_and_broyden_agree(reheat_model):
    cond = Conditions(throttle_flow=0.55 * reheat_model.throttle.flow)
    a = solve_point(reheat_model, cond, broyden=False)
    b = solve_point(reheat_model, cond, broyden=True)
    np.testing.assert_allclose(a.node_p, b.node_p, rtol=1e-9)


def test_warm_start_from_a_neighbour(reheat_model):
    a = solve_point(reheat_model, Conditions(throttle_flow=200.0))
    b = solve_point(reheat_model, Conditions(throttle_flow=205.0), guess=a.unknowns,
                    jacobian=a.jacobian)
    c = solve_point(reheat_model, Conditions(throttle_flow=205.0))
    np.testing.assert_allclose(b.node_p, c.node_p, rtol=1e-9)
    assert b.evaluations < c.evaluations


def test_control_valve_holds_process_pressure_then_opens_wide(industrial_model):
    # The LP control valve holds the process-node pressure while it can throttle;
    # with more LP flow than it passes wide open, it opens fully and the process
    # pressure rises above its setting (complementarity of the two states).
    model = industrial_model
    p_set = model.design_pressure["process"]
    closed = (("process_steam", ("closed", 0.0)),)
    low = solve_point(model, Conditions(throttle_flow=35.0, extraction_control=closed))
    assert low.node("process")["p"] == pytest.approx(p_set, rel=1e-12)
    assert not low.wide_open_valves
    row = low.table("control_valves")["LP control valve"]
    assert row["wide_open"] == 0
    valve = model.control_valves[0]
    v_in = get_backend().v_ph(low.node("process")["p"], low.node("process")["h"])
    assert row["pressure_drop"] >= valve.wide_open_drop(row["flow"], v_in)
    high = solve_point(model, Conditions(throttle_flow=49.0, extraction_control=closed))
    assert high.wide_open_valves == frozenset({"LP control valve"})
    assert high.node("process")["p"] > 1.05 * p_set
    row = high.table("control_valves")["LP control valve"]
    assert row["wide_open"] == 1
    v_in = get_backend().v_ph(high.node("process")["p"], high.node("process")["h"])
    assert row["pressure_drop"] == pytest.approx(valve.wide_open_drop(row["flow"], v_in),
                                                 rel=1e-8)
    # a warm start across the switch gives the same answer as a cold one
    warm = solve_point(model, Conditions(throttle_flow=49.0, extraction_control=closed),
                       neighbour=low)
    np.testing.assert_allclose(warm.node_p, high.node_p, rtol=1e-9)


def test_process_pressure_setting_from_the_case(tmp_path, industrial_model):
    case = tmp_path / "held.toml"
    case.write_text(f'model = "{industrial_model.file}"\n'
                    '[operation]\nthrottle_flow_fraction = 0.8\n'
                    '[control_valves."LP control valve"]\npressure = "10 barg"\n')
    c = load_case(case)
    r = solve_point(c.model, c.conditions)
    # 10 barg with the model's stated atmosphere of 1.013 bar
    assert r.node("process")["p"] == pytest.approx(11.013e5, rel=1e-12)
