"""A turbine section admitted straight from a steam header ([inlet_header]): the
design point, the identity with a throttle valve held wide open, what a held
header pressure allows, and the model-file keys."""

from __future__ import annotations

import copy
import re
import subprocess
import sys
from pathlib import Path

import h5py
import partload
import pytest
from helpers import MODELS, demo_data
from partload.errors import InfeasibleError, InputError
from partload.physics.pressure_drop import scaled_pressure_drop
from partload.plant.case import Conditions
from partload.plant.model import build_model
from partload.solve.point import solve_point, wide_open_capacity
from partload.steam.if97 import get_backend

NAME = "demo_header_backpressure_unit"
ROOT = Path(__file__).resolve().parent.parent


@pytest.fixture(scope="module")
def steam():
    return get_backend("seuif97")


@pytest.fixture(scope="module")
def header():
    return partload.load_model(MODELS / f"{NAME}.toml")


def _with_valve(data: dict) -> dict:
    """The same unit with a throttle valve where the header line was (its wide-open
    drop the line's design drop)."""
    data = copy.deepcopy(data)
    data["throttle_valve"] = {"to": data.pop("inlet_header")["to"]}
    return data


def _pressures(r) -> dict:
    return dict(zip(r.node_names, r.node_p))


# ------------------------------------------------------------------ design point
def test_design_point_reproduces_the_design_heat_balance(header, steam):
    # identity: the design flow at sliding header pressure gives back every design
    # node pressure of the model file, and the design line drop (42 - 41.4 bar)
    r = solve_point(header, Conditions(throttle_flow=header.throttle.flow), steam)
    for node, p in _pressures(r).items():
        assert p == pytest.approx(header.design_pressure[node], rel=1e-9), node
    line = r.tables["inlet_header"].columns
    assert line["pressure_drop"][0] == pytest.approx(0.6e5, rel=1e-9)  # model file: 42 - 41.4
    assert r.totals["valve_pressure_drop"] == 0.0  # no valves (by construction)


def test_design_point_at_held_header_pressure(header, steam):
    # identity: held at the design header pressure, the section swallows the design
    # flow: asked for it, the point is accepted and is the design point; in the
    # solver's wide_open mode the flow is the result and is the design flow
    r = solve_point(header, Conditions(throttle_flow=header.throttle.flow,
                                       pressure_mode="fixed"), steam)
    for node, p in _pressures(r).items():
        assert p == pytest.approx(header.design_pressure[node], rel=1e-9), node
    m, P = wide_open_capacity(header, Conditions(), steam, header.throttle.pressure)
    assert m == pytest.approx(header.throttle.flow, rel=1e-9)  # design flow, model file
    assert P == pytest.approx(r.totals["generator_output"], rel=1e-9)  # the same point


def test_output_at_sliding_header_pressure_round_trip(header, steam):
    # round trip: an output asked at sliding header pressure gives a header pressure;
    # held at that pressure the section swallows the same flow (wide_open mode), and
    # asking that flow at that held pressure is accepted
    r = solve_point(header, Conditions(output=8e6), steam)
    assert r.totals["generator_output"] == pytest.approx(8e6, rel=1e-9)  # the demand
    p_h, m = r.totals["throttle_pressure"], r.totals["throttle_flow"]
    assert p_h < header.throttle.pressure  # less output: a lower header pressure
    m_held, P_held = wide_open_capacity(header, Conditions(), steam, p_h)
    assert m_held == pytest.approx(m, rel=1e-8)
    assert P_held == pytest.approx(8e6, rel=1e-8)
    held = solve_point(header, Conditions(throttle_flow=m, pressure_mode="fixed",
                                          throttle_pressure=p_h), steam)
    assert held.totals["generator_output"] == pytest.approx(8e6, rel=1e-8)


def test_line_drop_follows_flow_squared_volume(header, steam):
    # hand calculation: dp = dp_d (m/m_d)^2 (v/v_d), v at the header state, with the
    # design drop 0.6 bar at 25 kg/s (model file)
    r = solve_point(header, Conditions(throttle_flow=15.0), steam)
    p = _pressures(r)
    h_h = r.node_h[r.node_names.index("header")]
    v, v_d = steam.v_ph(p["header"], h_h), steam.v_ph(42e5, steam.h_pT(42e5, 693.15))
    expected = scaled_pressure_drop(15.0, v, 0.6e5, 25.0, v_d)
    assert p["header"] - p["inlet"] == pytest.approx(expected, rel=1e-9)
    assert r.tables["inlet_header"].columns["flow"][0] == pytest.approx(15.0, rel=1e-12)


# ---------------------------------------------- identity with a throttle valve
@pytest.mark.parametrize("conditions", [
    Conditions(throttle_flow=14.0), Conditions(throttle_flow=26.5), Conditions(output=6e6)],
    ids=["flow 14", "flow 26.5", "output 6 MW"])
def test_same_answers_as_a_throttle_valve_wide_open(header, steam, conditions):
    # identity: the header line's square law is the wide-open law of a throttle valve
    # with the same design drop, so at sliding pressure (valves wide open) both
    # models give the same point
    valve = build_model(_with_valve(demo_data(NAME)), file="with a throttle valve")
    a, b = solve_point(header, conditions, steam), solve_point(valve, conditions, steam)
    assert a.node_p == pytest.approx(b.node_p, rel=1e-10)
    for key in ("throttle_flow", "generator_output", "shaft_power"):
        assert a.totals[key] == pytest.approx(b.totals[key], rel=1e-10), key


def test_no_drop_equals_a_throttle_valve_of_zero_drop_held_wide_open(steam):
    # identity: a header with no line drop at p_1 feeding the first group directly is
    # a throttle valve whose wide-open drop is zero, held wide open at a throttle
    # pressure p_1 with the same inlet enthalpy.  The valve model's design point is
    # throttled from 42 to 41.4 bar; the header model's header sits at 41.4 bar with
    # the temperature that gives the same enthalpy, so both calibrate alike.
    p1 = 41.4e5
    h = steam.h_pT(42e5, 693.15)
    T_star = steam.Tsx_ph(p1, h)[0]
    valve_data = _with_valve(demo_data(NAME))
    valve_data["throttle_valve"]["wide_open_drop"] = "0 %"
    valve = build_model(valve_data, file="valve of zero drop")
    data = demo_data(NAME)
    data["throttle"]["pressure"] = "41.4 bar"
    data["throttle"]["temperature"] = f"{T_star!r} K"
    data["nodes"]["inlet"] = "41.4 bar"
    data["inlet_header"]["pressure_drop_law"] = "none"
    header = build_model(data, file="header without drop")
    for p in (41.4e5, 36e5):
        m_a, P_a = wide_open_capacity(header, Conditions(), steam, p)
        m_b, P_b = wide_open_capacity(valve, Conditions(throttle_temperature=T_star), steam, p)
        assert m_a == pytest.approx(m_b, rel=1e-9)
        assert P_a == pytest.approx(P_b, rel=1e-9)
    a = solve_point(header, Conditions(throttle_flow=18.0), steam)
    b = solve_point(valve, Conditions(throttle_flow=18.0, throttle_temperature=T_star), steam)
    assert a.totals["generator_output"] == pytest.approx(b.totals["generator_output"], rel=1e-9)
    pa, pb = _pressures(a), _pressures(b)
    assert pa["header"] == pa["inlet"]  # no line drop at all (by construction)
    assert pa["inlet"] == pytest.approx(pb["inlet"], rel=1e-9)
    # valve drop zero, to the solver's tolerance (1e-10 of the design pressure)
    assert pb["header"] == pytest.approx(pb["inlet"], rel=1e-9)


# -------------------------------------------------- inputs that make no sense
@pytest.mark.parametrize("asked", [{"throttle_flow": 20.0}, {"throttle_flow": 30.0},
                                   {"output": 9e6}], ids=["less", "more", "output"])
@pytest.mark.parametrize("check_limits", [True, False])
def test_held_header_pressure_refuses_another_flow(header, steam, asked, check_limits):
    # the design point swallows 25 kg/s at 42 bar (model file); nothing can throttle or
    # open further, so any other flow or output at that held pressure is refused, also
    # as a what-if (no machine can give it)
    with pytest.raises(InfeasibleError) as e:
        solve_point(header, Conditions(pressure_mode="fixed", **asked), steam,
                    check_limits=check_limits)
    text = str(e.value)
    assert "no valve of its own" in text
    # the design flow and output at the design header pressure (model file, and
    # test_design_point_at_held_header_pressure), first, before a record cuts it
    assert text.split(": ", 1)[1].startswith(
        "the turbine swallows 25.00 kg/s (10.41 MW) at this pressure and no other flow")
    assert "pressure_mode = 'sliding'" in text
    assert text.startswith(("a throttle flow of", "an output of"))


def test_program_refused_where_the_header_pressure_would_be_held(header, steam):
    # 12 kg/s slides to about 20 bar (ellipse law), below a 35 bar floor: holding the
    # header at 35 bar would need a valve; inside the band the program slides
    cond = Conditions(throttle_flow=12.0, pressure_mode="program", throttle_pressure=42e5,
                      minimum_throttle_pressure=35e5)
    with pytest.raises(InfeasibleError, match="no valve of its own"):
        solve_point(header, cond, steam)
    r = solve_point(header, Conditions(throttle_flow=24.0, pressure_mode="program",
                                       throttle_pressure=42e5, minimum_throttle_pressure=35e5),
                    steam)
    assert not r.program_held
    assert 35e5 < r.totals["throttle_pressure"] < 42e5  # slides inside the band


def test_case_file_at_held_pressure_is_refused_with_exit_code_1(tmp_path):
    case = tmp_path / "held.toml"
    case.write_text(f'model = "{(MODELS / (NAME + ".toml")).as_posix()}"\n'
                    '[operation]\npressure_mode = "fixed"\nthrottle_flow = "20 kg/s"\n')
    out = subprocess.run([sys.executable, "-m", "partload.cli", "point", str(case)],
                         capture_output=True, text=True, cwd=ROOT)
    assert out.returncode == 1  # README: a point that cannot be solved
    assert "the turbine swallows 25.00 kg/s" in out.stderr + out.stdout


def test_study_records_header_results_and_refusals(tmp_path, header, steam):
    # the study path agrees with the point path: at sliding pressure every flow
    # solves, held at the design header pressure only the design flow does
    case = tmp_path / "sweep.toml"
    case.write_text(f'model = "{(MODELS / (NAME + ".toml")).as_posix()}"\n[sweep]\n'
                    'throttle_flow_fraction = [0.6, 1.0]\n'
                    'pressure_mode = ["sliding", "fixed"]\n')
    path, summary = partload.run_study(case, tmp_path / "sweep.h5", workers=1)
    assert (summary.n_converged, summary.n_failed) == (3, 1)
    with h5py.File(path) as f:
        status = f["solver/status"][...]
        flows = f["inputs/throttle_flow"][...]
        modes = f["inputs/pressure_mode"].asstr()[...]
        drop = f["inlet_header/pressure_drop"][:, 0]
        error = f["solver/error"].asstr()[...]
    for k in range(len(status)):
        if modes[k] == "fixed" and flows[k] < 20.0:
            assert status[k] == 1 and error[k] == "InfeasibleError"
            continue
        assert status[k] == 0
        r = solve_point(header, Conditions(throttle_flow=float(flows[k]),
                                           pressure_mode=str(modes[k])), steam)
        assert drop[k] == pytest.approx(r.tables["inlet_header"].columns["pressure_drop"][0],
                                        rel=1e-9)


@pytest.mark.parametrize("change, key, words", [
    ({"nodes": {"inlet": "42 bar", "mid": "14 bar", "exhaust": "4.5 bar"}},
     "pressure_drop_law", 'pressure_drop_law = "none"'),
    ({"inlet_header": {"to": "inlet", "pressure_drop_law": "none"}},
     "pressure_drop_law", "gives it 41.4 bar"),
    ({"inlet_header": {"to": "inlet", "pressure_drop_law": "straight"}},
     "pressure_drop_law", "flow_squared_volume"),
    ({"inlet_header": {}}, "to", "missing"),
])
def test_model_file_mistakes_name_table_and_key(change, key, words):
    data = demo_data(NAME)
    data.update(change)
    with pytest.raises(InputError) as e:
        build_model(data, file="header.toml")
    text = str(e.value)
    assert "header.toml" in text and "inlet_header" in text and key in text
    assert words in text


def test_a_header_and_a_throttle_valve_together_are_refused():
    data = demo_data(NAME)
    data["throttle_valve"] = {"to": "inlet"}
    with pytest.raises(InputError, match=r"give only one of .*\[inlet_header\]"):
        build_model(data, file="header.toml")


# ------------------------------------------------------------------- documents
def test_demo_model_says_invented_and_readme_gives_the_keys():
    text = (MODELS / f"{NAME}.toml").read_text()
    assert "INVENTED" in text
    readme = (ROOT / "README.md").read_text()
    row = next(line for line in readme.splitlines() if line.startswith("| `[inlet_header]`"))
    assert "`to`" in row
    assert re.search(r"\| \| `pressure_drop_law` \| .*`\"none\"`", readme)
    assert f"models/{NAME}.toml" in readme
