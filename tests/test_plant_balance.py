"""Auxiliary power and boiler (net output, fuel, net plant heat rate) on the invented
demo reheat unit with condenser, auxiliaries and boiler: identities of the definitions,
the whole-plant energy balance, and figures of the trade."""

from pathlib import Path

import pytest
from partload.errors import InputError
from partload.inputs.reading import load_toml
from partload.plant.case import read_conditions
from partload.plant.model import build_model, load_model
from partload.solve.point import solve_point

MODEL = Path(__file__).resolve().parent.parent / "models" / "demo_reheat_condenser_unit.toml"


@pytest.fixture(scope="module")
def model():
    return load_model(MODEL)


def _point(model, f, **op):
    return solve_point(model, read_conditions({"operation": {"throttle_flow_fraction": f,
                                                             **op}}, model))


@pytest.mark.parametrize("f", [0.4, 0.7, 1.0])
def test_definitions_and_whole_plant_balance(model, f):
    r = _point(model, f)
    t = r.totals
    aux = r.table("auxiliaries")["auxiliaries"]
    blr = r.table("boiler")["boiler"]
    # identities of the definitions (ASME PTC 6 / PTC 46 terms)
    assert aux["net_output"] + aux["pump_drive_power"] + aux["other_power"] == pytest.approx(
        t["generator_output"], rel=1e-12)
    assert aux["pump_drive_power"] == pytest.approx(t["pump_power"] / 0.92, rel=1e-12)
    assert blr["fuel_energy"] * blr["efficiency"] == pytest.approx(t["heat_added"], rel=1e-12)
    assert blr["plant_heat_rate_net"] == pytest.approx(blr["fuel_energy"] / aux["net_output"])
    assert blr["fuel_flow"] == pytest.approx(blr["fuel_energy"] / 25e6)
    assert aux["turbine_heat_rate_net"] > t["heat_rate"]
    # whole-plant energy balance (first law): fuel energy kept by the boiler plus the
    # pumps' work equals net output, auxiliaries, generator losses, condenser duty,
    # heater losses and process steam, to 1e-9 of the heat input
    lhs = blr["fuel_energy"] * blr["efficiency"] + t["pump_power"]
    rhs = (aux["net_output"] + aux["pump_drive_power"] + aux["other_power"]
           + t["generator_and_mechanical_losses"] + t["condenser_duty"]
           + t["heater_heat_loss"] + t["process_steam_energy"])
    assert abs(lhs - rhs) < 1e-9 * t["heat_added"]


def test_figures_of_the_trade(model):
    r = _point(model, 1.0)
    aux = r.table("auxiliaries")["auxiliaries"]
    # common practice, no source: the feedwater train's pumps of a subcritical unit take
    # about 1.5-3 % of gross output (2-4 % on supercritical units, issue text)
    share = aux["pump_drive_power"] / r.totals["generator_output"]
    assert 0.015 < share < 0.035
    # the boiler efficiency of the table at this load (linear between its points)
    load = r.totals["generator_output"] / model.generator.rating
    expected = 0.885 + (0.89 - 0.885) * (load - 0.6) / 0.4
    assert r.table("boiler")["boiler"]["efficiency"] == pytest.approx(expected, rel=1e-12)


def test_fixed_load_is_a_case_setting(model):
    base = _point(model, 0.8)
    more = solve_point(model, read_conditions(
        {"operation": {"throttle_flow_fraction": 0.8},
         "auxiliaries": {"auxiliaries": {"fixed_load": "6 MW"}}}, model))
    d = (base.table("auxiliaries")["auxiliaries"]["net_output"]
         - more.table("auxiliaries")["auxiliaries"]["net_output"])
    assert d == pytest.approx(2e6, rel=1e-9)  # 6 MW against the model's 4 MW


def test_boiler_inputs_checked():
    data, text = load_toml(MODEL)
    data["boiler"]["efficiency"] = "88 %"
    with pytest.raises(InputError, match="once"):
        build_model(data, text=text, file="bad")
    data, text = load_toml(MODEL)
    del data["boiler"]["heating_value"]
    with pytest.raises(InputError, match="heating_value"):
        build_model(data, text=text, file="bad")
