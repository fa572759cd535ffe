"""The governing stage on the invented nozzle-governed demo reheat unit: design point,
closure at every valve state, continuity, the valve loop, and an identity with the
plain stage-group law."""

from pathlib import Path

import numpy as np
import pytest
from partload.errors import InputError
from partload.inputs.reading import load_toml
from partload.plant.case import Conditions, read_conditions
from partload.plant.model import build_model, load_model
from partload.solve.point import solve_point

MODELS = Path(__file__).resolve().parent.parent / "models"
NOZZLE = MODELS / "demo_reheat_nozzle_unit.toml"


@pytest.fixture(scope="module")
def model():
    return load_model(NOZZLE)


def _variant(**changes):
    """The nozzle demo with governing-stage keys changed (``None`` removes a key)."""
    data, text = load_toml(NOZZLE)
    gs = data["governing_stage"]
    for k, v in changes.items():
        if v is None:
            gs.pop(k, None)
        else:
            gs[k] = v
    return build_model(data, text=text, file=str(NOZZLE))


@pytest.fixture(scope="module")
def no_overlap():
    return _variant(overlap=None)


def _solve(model, f, **kw):
    kw.setdefault("valve_mode", "nozzle_groups")
    kw.setdefault("pressure_mode", "fixed")
    return solve_point(model, Conditions(throttle_flow=f * model.throttle.flow, **kw))


def test_design_point_exact(model):
    # the default case of a nozzle-governed model: nozzle groups, sliding pressure with the
    # design valves wide open, which is the design heat balance itself (identity)
    cond = read_conditions({"operation": {}}, model)
    assert (cond.valve_mode, cond.pressure_mode) == ("nozzle_groups", "sliding")
    r = solve_point(model, cond)
    assert r.iterations == 0
    for i, n in enumerate(r.node_names):
        assert r.node_p[i] == pytest.approx(model.design_pressure[n], rel=1e-12)
    gs = r.tables["governing_stage"].columns
    assert gs["efficiency"][0] == pytest.approx(0.74, rel=1e-12)  # the model file's value
    assert list(r.tables["governing_valves"].columns["opening"]) == [1, 1, 1, 0]


def test_held_design_pressure_at_design_flow_is_the_design_point(no_overlap):
    # without overlap, the held design pressure at design flow opens exactly the design
    # valves (identity with the calibration)
    r = _solve(no_overlap, 1.0)
    for i, n in enumerate(r.node_names):
        assert r.node_p[i] == pytest.approx(no_overlap.design_pressure[n], rel=1e-7)
    assert r.tables["governing_valves"].columns["opening"] == pytest.approx([1, 1, 1, 0],
                                                                             abs=1e-6)


@pytest.mark.parametrize("f", [0.3, 0.45, 0.6, 0.86, 0.97, 1.05])
@pytest.mark.parametrize("valve_mode", ["nozzle_groups", "throttle"])
def test_closure_at_every_valve_state(model, f, valve_mode):
    # mass: the valves' flows add up to the throttle flow; energy: the turbine cycle's
    # balance closes (heat in + pump work = shaft work + condenser + process + losses)
    r = _solve(model, f, valve_mode=valve_mode)
    t = r.totals
    flows = r.tables["governing_valves"].columns["flow"]
    assert flows.sum() == pytest.approx(t["throttle_flow"], rel=1e-12)
    assert abs(t["energy_imbalance"]) < 1e-8 * t["heat_added"]
    gs = r.tables["governing_stage"].columns
    # the stage's power is its flow times its enthalpy drop (first law, identity)
    h = dict(zip(r.node_names, r.node_h))
    assert gs["power"][0] == pytest.approx(t["throttle_flow"] * (h["throttle"]
                                                                 - h["first_stage"]), rel=1e-9)
    assert gs["throttling_loss"][0] >= 0.0


def _valve_point_flow(model, k):
    """Throttle flow [kg/s] with the first ``k`` valves wide open at the design pressure
    (solved with those valves wide open, the held pressure and the flow the unknown)."""
    from partload.plant.case import override
    from partload.solve.equations import equations_for
    from partload.solve.newton import newton
    from partload.steam.if97 import get_backend
    steam = get_backend()
    c = override(Conditions(throttle_flow=model.throttle.flow, valve_mode="nozzle_groups",
                            pressure_mode="fixed"), valves_open=k)
    eq = equations_for(model, c, steam, mode="wide_open")
    nr = newton(eq.residuals, eq.guess(), tol=1e-12)
    return eq.evaluate(nr.x, detail=True)[1]["m_T"]


def test_output_continuous_across_valve_points(no_overlap):
    for k in (1, 2, 3):
        m_k = _valve_point_flow(no_overlap, k)
        f = m_k / no_overlap.throttle.flow
        d = 1e-4
        below, at, above = (_solve(no_overlap, f + s) for s in (-d, 0.0, d))
        P = [r.totals["generator_output"] for r in (below, at, above)]
        # continuous: both one-sided steps are small and of the same size
        assert abs(P[1] - P[0]) < 2e-3 * P[1] * d / 1e-4
        assert abs(P[2] - P[1]) < 2e-3 * P[1] * d / 1e-4
        opening = at.tables["governing_valves"].columns["opening"]
        assert opening[:k] == pytest.approx([1.0] * k, abs=1e-6)
        assert opening[k:] == pytest.approx([0.0] * (4 - k), abs=1e-6)


def test_first_stage_pressure_nearly_linear_in_flow(model):
    # common practice: first-stage pressure is nearly proportional to throttle flow (the
    # trade's load indicator; e.g. Sarkar, Thermal Power Plant, 2015, ch. 6)
    fs = np.array([0.3, 0.5, 0.7, 0.9, 1.05])
    p1 = np.array([_solve(model, f).node("first_stage")["p"] for f in fs])
    slope = p1 / fs
    assert slope.max() / slope.min() < 1.03


def test_valve_loop(no_overlap):
    # heat rate versus load has local minima at the valve points and rises between them,
    # where a valve throttles (common practice: the valve loop; Cotton, Evaluating and
    # Improving Steam Turbine Performance)
    m2 = _valve_point_flow(no_overlap, 2) / no_overlap.throttle.flow
    hr = [_solve(no_overlap, f).totals["heat_rate"] for f in (m2 - 0.03, m2, m2 + 0.03)]
    assert hr[1] < hr[0] and hr[1] < hr[2]
    m3 = _valve_point_flow(no_overlap, 3) / no_overlap.throttle.flow
    hr = [_solve(no_overlap, f).totals["heat_rate"] for f in (m3 - 0.02, m3, m3 + 0.04)]
    assert hr[1] < hr[0] and hr[1] < hr[2]


@pytest.mark.parametrize("f", [0.4, 0.6, 0.8])
def test_nozzle_better_than_throttle_governing_at_part_load(model, f):
    # common practice: partial-arc admission throttles only one valve's share of the flow
    nozzle = _solve(model, f).totals["heat_rate"]
    throttle = _solve(model, f, valve_mode="throttle").totals["heat_rate"]
    assert nozzle < throttle


@pytest.mark.parametrize("f", [0.3, 0.5, 0.7, 0.9])
def test_sliding_better_than_throttle_governing(model, f):
    # common practice: sliding pressure with the valves wide open avoids the throttling loss
    sliding = _solve(model, f, valve_mode="throttle", pressure_mode="sliding")
    throttle = _solve(model, f, valve_mode="throttle")
    assert sliding.totals["heat_rate"] < throttle.totals["heat_rate"]


def test_single_group_reduces_to_stage_group_law():
    # identity: one nozzle group behind one valve, Stodola's ellipse as its law, no
    # partial admission and the velocity-ratio parabola is a throttle valve followed by a
    # stage group with the velocity-ratio correction
    data, text = load_toml(NOZZLE)
    data["governing_stage"] = {"to": "first_stage", "valves": ["CV"], "arcs": ["100 %"],
                               "valves_open_at_design": 1, "wide_open_drop": 0.03,
                               "efficiency": 0.74, "nozzle_law": "ellipse",
                               "admission_loss": 0.0}
    gov = build_model(data, text=text, file="single group")
    data, text = load_toml(NOZZLE)
    del data["governing_stage"]
    data["throttle_valve"] = {"to": "nozzle_box"}
    data["nodes"]["nozzle_box"] = f"{166 * 0.97} bar"
    data["stage_group"].insert(0, {"name": "GS", "from": "nozzle_box", "to": "first_stage",
                                   "efficiency": 0.74,
                                   "efficiency_correction": "velocity_ratio"})
    plain = build_model(data, text=text, file="stage group")
    for f, mode in ((0.6, "fixed"), (0.85, "sliding"), (1.0, "fixed"), (0.45, "sliding")):
        a = _solve(gov, f, pressure_mode=mode)
        b = solve_point(plain, Conditions(throttle_flow=f * plain.throttle.flow,
                                          pressure_mode=mode))
        for key in ("generator_output", "heat_rate", "throttle_pressure"):
            assert a.totals[key] == pytest.approx(b.totals[key], rel=1e-9)
        assert a.node("first_stage")["p"] == pytest.approx(b.node("first_stage")["p"],
                                                           rel=1e-9)


def test_pressure_program(no_overlap):
    m = no_overlap
    cond = read_conditions({"operation": {"pressure_mode": "program",
                                          "throttle_pressure": "160 bar",
                                          "minimum_throttle_pressure": "90 bar"}}, m)
    from partload.plant.case import override
    p_T = {}
    for f in (0.3, 0.6, 1.0):
        r = solve_point(m, override(cond, throttle_flow=f * m.throttle.flow))
        assert r.pressure_mode == "program"
        p_T[f] = r.totals["throttle_pressure"]
    assert p_T[0.3] == pytest.approx(90e5)   # held at the minimum at low load
    assert p_T[1.0] == pytest.approx(160e5)  # held at the top at high load
    assert 90e5 < p_T[0.6] < 160e5           # sliding between
    # continuous where sliding reaches the top: the held point with the design valves wide
    # open is the same state
    lo, hi = 0.9, 1.0
    for _ in range(40):
        mid = 0.5 * (lo + hi)
        r = solve_point(m, override(cond, throttle_flow=mid * m.throttle.flow))
        lo, hi = (lo, mid) if r.program_held else (mid, hi)
    a = solve_point(m, override(cond, throttle_flow=lo * m.throttle.flow))
    b = solve_point(m, override(cond, throttle_flow=hi * m.throttle.flow))
    assert not a.program_held and b.program_held
    assert b.totals["generator_output"] == pytest.approx(a.totals["generator_output"],
                                                         rel=1e-6)


@pytest.mark.parametrize("op, key", [
    ({"valves_open": 2, "pressure_mode": "fixed"}, "valves_open"),
    ({"valves_open": 5}, "valves_open"),
    ({"pressure_mode": "program"}, "minimum_throttle_pressure"),
    ({"pressure_mode": "program", "minimum_throttle_pressure": "170 bar"},
     "minimum_throttle_pressure"),
    ({"minimum_throttle_pressure": "90 bar"}, "minimum_throttle_pressure"),
])
def test_case_keys_checked(model, op, key):
    with pytest.raises(InputError) as err:
        read_conditions({"operation": op}, model, "case.toml")
    assert err.value.key == key


def test_nozzle_groups_need_a_governing_stage():
    plain = load_model(MODELS / "demo_reheat_unit.toml")
    with pytest.raises(InputError, match="no \\[governing_stage\\]"):
        read_conditions({"operation": {"valve_mode": "nozzle_groups"}}, plain, "case.toml")


@pytest.mark.parametrize("changes, key", [
    ({"arcs": ["30 %", "30 %", "20 %"]}, "arcs"),
    ({"arcs": ["30 %", "30 %", "20 %", "30 %"]}, "arcs"),
    ({"valves_open_at_design": 5}, "valves_open_at_design"),
    ({"valves": ["CV1", "CV1", "CV3", "CV4"]}, "valves"),
    ({"wide_open_drop": "45 %"}, "wide_open_drop"),
])
def test_model_keys_checked(changes, key):
    with pytest.raises(InputError) as err:
        _variant(**changes)
    assert key in str(err.value)


def _codes(model, f, **kw):
    from partload.cautions.checks import check_point
    kw.setdefault("valve_mode", "nozzle_groups")
    kw.setdefault("pressure_mode", "fixed")
    cond = Conditions(throttle_flow=f * model.throttle.flow, **kw)
    return [c.code for c in check_point(model, cond, solve_point(model, cond))]


def test_cautions_of_nozzle_governing(model):
    # quiet at design (common practice: the design point is within every limit)
    assert _codes(model, 1.0, pressure_mode="sliding") == []
    # below the first valve point only CV1 admits steam
    assert "first_valve_only" in _codes(model, 0.3)
    # just past the first valve point CV2 cracks open, below the model's 10 % minimum
    assert "valve_low_opening" in _codes(model, 0.44)
    assert "valve_low_opening" not in _codes(model, 0.6)
    # above design flow at the held pressure the first-stage pressure exceeds its design
    assert "first_stage_overload" in _codes(model, 1.05)
    assert "first_stage_overload" not in _codes(model, 0.9)
    # valves that open together have no sequence to caution about
    assert not {"first_valve_only", "valve_low_opening"} & set(
        _codes(model, 0.3, valve_mode="throttle"))


def test_valve_points(model):
    from partload.plant.case import design_conditions
    from partload.solve.point import valve_points
    found = valve_points(model, design_conditions(model))
    assert [k for k, _ in found] == [1, 2, 3, 4]
    points = [p for _, p in found]
    flows = [p.totals["throttle_flow"] for p in points]
    assert flows == sorted(flows)
    # the design heat balance is the third valve point (identity with the calibration)
    assert flows[2] == pytest.approx(model.throttle.flow, rel=1e-9)
    for k, p in enumerate(points, start=1):
        opening = p.tables["governing_valves"].columns["opening"]
        assert list(opening) == [1.0] * k + [0.0] * (4 - k)
        assert p.totals["throttle_pressure"] == pytest.approx(model.throttle.pressure)


def test_valve_point_not_reached_says_why():
    # the invented industrial unit holds 25 kg/s of process steam: its first valve alone
    # cannot pass that and the other bleeds, so that valve point is not reached
    from partload.errors import SolveError
    from partload.plant.case import design_conditions
    from partload.solve.point import valve_points
    m = load_model(MODELS / "demo_industrial_nozzle_unit.toml")
    found = dict(valve_points(m, design_conditions(m)))
    assert isinstance(found[1], SolveError)
    assert "1 of the control valves wide open" in str(found[1])
    assert found[4].totals["throttle_flow"] == pytest.approx(m.throttle.flow, rel=1e-9)


def test_program_without_a_sliding_answer_holds_the_lowest_pressure():
    # the invented industrial unit holds 25 kg/s of process steam; at 60 % flow sliding has
    # no answer, and the program's lowest pressure (60 bar) has one
    from partload.api import point
    m = load_model(MODELS / "demo_industrial_nozzle_unit.toml")
    r = point(m, throttle_flow_fraction=0.6, pressure_mode="program",
              throttle_pressure=92e5, minimum_throttle_pressure=60e5)
    assert r.program_held
    assert r.totals["throttle_pressure"] == pytest.approx(60e5)


def test_mode_axes_in_any_order(tmp_path):
    # the values a mode has no use for are dropped once all axes of a point are set,
    # whatever the order of the axes in [sweep]
    from partload.plant.case import load_case
    from partload.study import plan_study
    plans = []
    for order in ("pressure_mode = ['fixed', 'sliding']\nvalves_open = [2, 3]\n",
                  "valves_open = [2, 3]\npressure_mode = ['fixed', 'sliding']\n"):
        case = tmp_path / "c.toml"
        case.write_text(f'model = "{NOZZLE}"\n[operation]\npressure_mode = "sliding"\n'
                        f'[sweep]\nthrottle_flow_fraction = [0.6, 0.9]\n{order}',
                        encoding="utf-8")
        plans.append(plan_study(load_case(case)))
    for plan in plans:
        for c in plan.conditions:
            assert (c.valves_open is None) == (c.pressure_mode == "fixed")
    key = sorted((c.pressure_mode, c.valves_open, c.throttle_flow) for c in plans[0].conditions)
    assert key == sorted((c.pressure_mode, c.valves_open, c.throttle_flow)
                         for c in plans[1].conditions)


def test_a_held_program_point_counts_its_sliding_attempt(no_overlap):
    # at 30 % flow the sliding answer lies below the program's lowest pressure, so the
    # point is solved again at that pressure: its evaluations are both solves' (hand
    # count of the two solves made separately from the same start)
    from partload.plant.case import override

    m = no_overlap
    cond = read_conditions({"operation": {"pressure_mode": "program",
                                          "throttle_pressure": "160 bar",
                                          "minimum_throttle_pressure": "90 bar"}}, m)
    cond = override(cond, throttle_flow=0.3 * m.throttle.flow)
    r = solve_point(m, cond)
    assert r.program_held
    sliding = solve_point(m, override(cond, pressure_mode="sliding", throttle_pressure=None,
                                      minimum_throttle_pressure=None), check_limits=False)
    held = solve_point(m, override(cond, pressure_mode="fixed", throttle_pressure=90e5,
                                   valves_open=None, minimum_throttle_pressure=None))
    assert r.evaluations == sliding.evaluations + held.evaluations
