"""Operating-limit cautions: each fires on a point built to trigger it, none at design."""

from __future__ import annotations

import json
import math
from pathlib import Path

import pytest
from helpers import variant
from partload.cautions.checks import (
    CAUTION_CODES,
    CHECKS,
    DEFERENCE,
    Caution,
    check_point,
    design_last_stage_volume_flow,
    last_groups,
    last_stage_state,
)
from partload.cli.main import main
from partload.errors import InfeasibleError, InputError
from partload.plant.case import Conditions, load_case, override
from partload.plant.limits import DEFAULT_SOURCE, LIMITS, Limits
from partload.solve.point import solve_point
from partload.steam.if97 import get_backend

ROOT = Path(__file__).resolve().parent.parent


def codes(cautions: list[Caution]) -> list[str]:
    return [c.code for c in cautions]


def caution(cautions: list[Caution], code: str) -> Caution:
    (found,) = [c for c in cautions if c.code == code]
    return found


def solved(model, cond, check_limits=True):
    r = solve_point(model, cond, check_limits=check_limits)
    return r, check_point(model, cond, r)


# ------------------------------------------------------------------- the limits
def test_default_limits_and_their_source(reheat_model):
    lim = reheat_model.limits
    assert isinstance(lim, Limits) and set(lim) == set(LIMITS)
    # defaults of issue 5, common practice, no source
    assert lim["max_exhaust_moisture"] == pytest.approx(0.12)
    assert lim["min_last_stage_volume_flow"] == pytest.approx(0.30)
    assert lim["max_pressure_rise"] == pytest.approx(0.05)
    assert lim["max_exhaust_temperature"] == pytest.approx(273.15 + 80.0)
    assert lim.given == frozenset()
    assert all(lim.source(n) == DEFAULT_SOURCE for n in lim)


def test_limits_table_is_read_in_si_and_marked_as_given():
    m = variant(limits={"max_exhaust_moisture": "10 %", "max_exhaust_temperature": "176 degF"})
    assert m.limits["max_exhaust_moisture"] == pytest.approx(0.10)
    assert m.limits["max_exhaust_temperature"] == pytest.approx(353.15)  # 176 degF = 80 degC
    assert m.limits["max_pressure_rise"] == pytest.approx(0.05)  # default kept
    assert m.limits.given == {"max_exhaust_moisture", "max_exhaust_temperature"}
    assert m.limits.source("max_exhaust_moisture") == "the model file's [limits]"


def test_limits_table_reports_all_its_problems():
    with pytest.raises(InputError) as info:
        variant(limits={"max_exhaust_moistur": "12 %", "max_pressure_rise": "5 bar",
                        "min_last_stage_volume_flow": 0.0})
    keys = {(p.table, p.key) for p in info.value.problems}
    assert keys == {("limits", "max_exhaust_moistur"), ("limits", "max_pressure_rise"),
                    ("limits", "min_last_stage_volume_flow")}


# -------------------------------------------------------------- quiet at design
@pytest.mark.parametrize("fixture", ["reheat_model", "industrial_model"])
def test_design_point_is_quiet(fixture, request):
    model = request.getfixturevalue(fixture)
    _, found = solved(model, Conditions(throttle_flow=model.throttle.flow))
    assert found == []


@pytest.mark.parametrize("fixture", ["reheat_model", "industrial_model"])
def test_design_volume_flow_identity(fixture, request):
    # identity: the design point's last-stage volume flow is the calibrated design value
    model = request.getfixturevalue(fixture)
    cond = Conditions(throttle_flow=model.throttle.flow)
    r = solve_point(model, cond)
    steam = get_backend()
    assert last_groups(model)
    for k in last_groups(model):
        q = last_stage_state(model, r, k, steam)[1]
        assert q == pytest.approx(design_last_stage_volume_flow(model, k, steam), rel=1e-9)


def test_quiet_cases_through_the_command_line(capsys):
    # regression values: these demo cases stay within every default limit
    for name in ("reheat_part_load", "reheat_demand_210MW", "reheat_throttle_governing",
                 "industrial_part_load"):
        assert main(["point", str(ROOT / f"cases/{name}.toml"), "--json"]) == 0
        assert json.loads(capsys.readouterr().out)["cautions"] == [], name


# --------------------------------------------------------- each caution fires
def test_pressure_rise_behind_a_heater_out_of_service(capsys):
    # HP8 out: its bleed E8 closes, and the steam it took passes HP2 instead
    case = load_case(ROOT / "cases/reheat_top_heater_out.toml")
    r, found = solved(case.model, case.conditions)
    assert codes(found) == ["pressure_rise"]
    c = found[0]
    assert c.where == "hp_mid" and c.limit == pytest.approx(0.05) and c.unit == "-"
    # Stodola's ellipse law with a small pressure ratio: the inlet pressure of HP2 rises
    # nearly in proportion to its flow (within 0.5 percentage points here)
    k = r.group_names.index("HP2")
    flow_rise = r.group_flow[k] / case.model.design_group_flow["HP2"] - 1.0
    assert c.value == pytest.approx(flow_rise, abs=0.005)
    assert c.value == pytest.approx(0.0986, abs=5e-4)  # regression value
    assert "stage overload" in c.message and "'HP2'" in c.message
    # and the command line prints it with the answer
    assert main(["point", str(ROOT / "cases/reheat_top_heater_out.toml")]) == 0
    out = capsys.readouterr().out
    assert "CAUTIONS" in out and "Pressure at node 'hp_mid'" in out


def test_pressure_rise_quiet_when_limit_raised():
    case = load_case(ROOT / "cases/reheat_top_heater_out.toml")
    m = variant(limits={"max_pressure_rise": "12 %"})
    _, found = solved(m, case.conditions)
    assert found == []


def test_exhaust_moisture_with_cold_condenser_and_low_reheat(reheat_model):
    cond = Conditions(throttle_flow=280.0, exhaust_pressure=3e3, reheat_temperature=703.15)
    _, found = solved(reheat_model, cond)
    # at 3 kPa the annulus velocity is beyond the demo curve's last point (350 m/s)
    assert codes(found) == ["exhaust_moisture", "exhaust_loss_curve"]
    c = found[0]
    assert c.where == "LPA3" and c.value > 0.12
    assert c.value == pytest.approx(0.1390, abs=5e-4)  # regression value
    assert "LPB2" in c.message and "erode" in c.message


def test_exhaust_moisture_limit_from_the_model_file():
    # the design moisture of the reheat demo is 8.9 % (regression value): 8 % trips it
    m = variant(limits={"max_exhaust_moisture": "8 %"})
    _, found = solved(m, Conditions(throttle_flow=m.throttle.flow))
    c = caution(found, "exhaust_moisture")
    assert c.limit == pytest.approx(0.08)
    assert "limit 8.0 %, the model file's [limits]" in c.message


def test_low_load_ventilation(reheat_model):
    # 15 % throttle flow: low last-stage volume flow and a superheated, hot exhaust
    _, found = solved(reheat_model, Conditions(throttle_flow=42.0))
    # the annulus velocity is below the demo curve's first point (50 m/s) too
    assert codes(found) == ["last_stage_volume_flow", "exhaust_temperature",
                            "exhaust_loss_curve"]
    vol = caution(found, "last_stage_volume_flow")
    assert vol.where == "LPB2" and vol.value < 0.30
    assert vol.value == pytest.approx(0.2026, abs=0.002)  # regression value
    assert "ventilation" in vol.message and "LPA3" in vol.message
    hot = caution(found, "exhaust_temperature")
    assert hot.unit == "K" and hot.value > 273.15 + 80.0
    assert hot.value - 273.15 == pytest.approx(99.8, abs=0.5)  # regression value


def test_volume_flow_quiet_at_part_load(reheat_model):
    # 30 % throttle flow keeps about 40 % of design volume flow (regression value)
    _, found = solved(reheat_model, Conditions(throttle_flow=84.0))
    assert "last_stage_volume_flow" not in codes(found)


def test_exhaust_temperature_with_a_low_limit():
    # at 10 kPa the exhaust is wet, so it leaves at saturation: 45.81 degC
    # (IAPWS-IF97 saturation temperature at 10 kPa, steam tables)
    m = variant(limits={"max_exhaust_temperature": "40 degC", "max_pressure_rise": "50 %"})
    _, found = solved(m, Conditions(throttle_flow=280.0, exhaust_pressure=10e3))
    assert codes(found) == ["exhaust_temperature"]
    assert found[0].value - 273.15 == pytest.approx(45.81, abs=0.01)
    assert found[0].limit == pytest.approx(313.15)


def test_valves_wide_open_at_held_pressure(reheat_model):
    cond = Conditions(throttle_flow=290.0, pressure_mode="fixed", throttle_pressure=166e5)
    with pytest.raises(InfeasibleError):
        solve_point(reheat_model, cond)
    _, found = solved(reheat_model, cond, check_limits=False)
    c = caution(found, "valves_wide_open")
    assert c.value == pytest.approx(290.0)
    # identity: wide open at the design throttle pressure passes the design flow, since the
    # wide-open drop of the demo defaults to the design drop
    assert c.limit == pytest.approx(280.0, rel=1e-6)
    assert c.unit == "kg/s" and "what-if" in c.message


def test_valves_wide_open_sliding_above_highest_pressure(reheat_model):
    cond = Conditions(throttle_flow=300.0)
    with pytest.raises(InfeasibleError):
        solve_point(reheat_model, cond)
    _, found = solved(reheat_model, cond, check_limits=False)
    assert codes(found) == ["valves_wide_open", "pressure_rise"]
    c = found[0]
    assert c.limit == pytest.approx(296.42, abs=0.01)  # regression value
    assert "175.00 bar" in c.message


def test_valves_quiet_within_capacity(reheat_model):
    cond = Conditions(throttle_flow=275.0, pressure_mode="fixed", throttle_pressure=166e5)
    _, found = solved(reheat_model, cond, check_limits=False)
    assert "valves_wide_open" not in codes(found)


# ------------------------------------------------------------------- the form
def test_every_caution_defers_and_serialises(reheat_model):
    cond = Conditions(throttle_flow=300.0)
    _, found = solved(reheat_model, cond, check_limits=False)
    _, low = solved(reheat_model, Conditions(throttle_flow=42.0))
    for c in found + low:
        assert c.message.endswith(DEFERENCE)
        assert "common practice, no source" in c.message or c.code in (
            "valves_wide_open", "exhaust_loss_curve")
        d = json.loads(json.dumps(c.to_dict(), allow_nan=False))
        assert d["code"] == c.code and d["where"] == c.where
        assert math.isfinite(d["value"]) and math.isfinite(d["limit"])


def test_registry_order_and_one_caution_per_code(reheat_model):
    assert CAUTION_CODES == tuple(CHECKS) == ("valves_wide_open", "pressure_rise",
                                              "back_pressure_rise",
                                              "exhaust_moisture", "last_stage_volume_flow",
                                              "exhaust_temperature", "steam_temperature",
                                              "generator_output", "back_pressure",
                                              "first_stage_overload", "valve_low_opening",
                                              "first_valve_only", "cooling_water_rise",
                                              "condenser_duty", "exhaust_loss_curve")
    # overload everywhere: one pressure_rise caution naming the worst node, not ten
    _, found = solved(reheat_model, Conditions(throttle_flow=300.0), check_limits=False)
    assert codes(found).count("pressure_rise") == 1
    assert "and 6 more" in caution(found, "pressure_rise").message


def test_check_point_on_a_case_does_not_change_the_answer():
    case = load_case(ROOT / "cases/reheat_top_heater_out.toml")
    r = solve_point(case.model, case.conditions)
    before = (r.node_p.copy(), dict(r.totals))
    check_point(case.model, case.conditions, r)
    check_point(case.model, override(case.conditions), r)
    assert (r.node_p == before[0]).all() and r.totals == before[1]


def test_hot_steam_caution(reheat_model):
    # 20 K above the design throttle temperature (538 degC in the model file)
    _, found = solved(reheat_model, Conditions(throttle_flow=200.0,
                                               throttle_temperature=811.15 + 20.0))
    c = caution(found, "steam_temperature")
    assert c.where == "throttle" and c.value == pytest.approx(20.0)
    assert "creep" in c.message
    # at design temperatures it stays quiet (identity: 0 K above design)
    _, found = solved(reheat_model, Conditions(throttle_flow=200.0,
                                               throttle_temperature=811.15))
    assert "steam_temperature" not in codes(found)


def test_generator_above_rating_caution(reheat_model):
    # HP7 and HP8 out near full flow: more steam reaches the IP and LP, output
    # above the 350 MW rating (regression: about 354 MW)
    cond = Conditions(throttle_flow=280.0, heaters_out=frozenset({"HP7", "HP8"}))
    r, found = solved(reheat_model, cond, check_limits=False)
    assert r.totals["generator_output"] > reheat_model.generator.rating
    c = caution(found, "generator_output")
    assert c.value == pytest.approx(r.totals["generator_output"] / 350e6)


def test_high_back_pressure_caution(reheat_model):
    # 20 kPa against 6.8 kPa design: 294 % of design, above the 250 % default
    _, found = solved(reheat_model, Conditions(throttle_flow=200.0, exhaust_pressure=20e3))
    c = caution(found, "back_pressure")
    assert c.value == pytest.approx(20.0 / 6.8) and c.where == "condenser"
    _, found = solved(reheat_model, Conditions(throttle_flow=200.0, exhaust_pressure=15e3))
    assert "back_pressure" not in codes(found)


# NIST SP 811 (2008), appendix B: psi = 6894.757293168 Pa, lb = 0.45359237 kg,
# Btu (IT) = 1055.05585262 J, inHg (conventional) = 3386.389 Pa, ft = 0.3048 m,
# degF = degC * 1.8 + 32; a difference of 1 K is 1.8 degF
_US = {"bar": ("psia", 1e5 / 6894.757293168, 0.0), "degC": ("degF", 1.8, 32.0),
       "K": ("degF", 1.8, 0.0), "kg/s": ("klb/h", 3.6 / 0.45359237, 0.0),
       "kPa": ("inHg", 1e3 / 3386.389, 0.0), "m/s": ("ft/s", 1 / 0.3048, 0.0),
       "m^3/s": ("ft^3/s", 1 / 0.3048**3, 0.0),
       "kJ/kg": ("Btu/lb", 1e3 * 0.45359237 / 1055.05585262, 0.0)}
_QUANTITY = r"(-?\d+(?:\.\d+)?(?:e[-+]?\d+)?) (bar|degC|K|kg/s|kPa|m/s|m\^3/s|kJ/kg|psia|degF|" \
            r"klb/h|inHg|ft/s|ft\^3/s|Btu/lb)\b"


def _half_digit(text: str) -> float:
    """Half a unit of the last digit printed in ``text`` [-]."""
    mantissa = text.split("e")[0]
    places = len(mantissa.split(".")[1]) if "." in mantissa else 0
    scale = 10.0 ** int(text.split("e")[1]) if "e" in text else 1.0
    return 0.5 * 10.0 ** -places * scale


def test_caution_messages_in_us_units():
    # every number with a unit in a metric message reappears in the US message, in the
    # same order, converted by the factors above to the digits printed
    import re
    pairs = 0
    for name, flow in [("industrial_part_load", 1.08), ("industrial_nozzle_part_load", 1.08),
                       ("reheat_load_sweep_warm_condenser", None),
                       ("plant_condenser_half_out", None), ("reheat_top_heater_out", None),
                       ("reheat_load_sweep_warm_condenser", 0.25)]:
        case = load_case(ROOT / "cases" / f"{name}.toml")
        cond = case.conditions if flow is None else override(
            case.conditions, throttle_flow=flow * case.model.throttle.flow, output=None)
        r = solve_point(case.model, cond, check_limits=False)
        metric = check_point(case.model, cond, r)
        us = check_point(case.model, cond, r, units="us")
        assert [c.code for c in us] == [c.code for c in metric] and metric, name
        for a, b in zip(metric, us):
            assert (a.value, a.limit, a.unit) == (b.value, b.limit, b.unit)  # SI either way
            qa, qb = re.findall(_QUANTITY, a.message), re.findall(_QUANTITY, b.message)
            assert len(qa) == len(qb), (a.message, b.message)
            for (va, ua), (vb, ub) in zip(qa, qb):
                unit, factor, offset = _US[ua]
                assert ub == unit, (a.message, b.message)
                expected = float(va) * factor + offset
                assert abs(float(vb) - expected) <= (_half_digit(vb)
                                                     + factor * _half_digit(va)), (va, vb)
                pairs += 1
    assert pairs >= 20
