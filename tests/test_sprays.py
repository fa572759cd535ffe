"""Attemperator sprays on the invented demo reheat plant: balances, identities and the
trade's rule that reheater spray costs heat rate while superheater spray from final
feedwater costs nothing."""

from pathlib import Path

import pytest
from partload.errors import InputError
from partload.plant.case import read_conditions
from partload.plant.model import load_model
from partload.solve.point import solve_point

ROOT = Path(__file__).resolve().parent.parent
MODEL = ROOT / "models" / "demo_reheat_plant_unit.toml"


@pytest.fixture(scope="module")
def model():
    return load_model(MODEL)


def _point(model, **op):
    return solve_point(model, read_conditions(
        {"operation": {"throttle_flow_fraction": 0.8, **op}}, model))


def test_sprays_vanishing_change_nothing(model):
    # identity in the limit: a spray of a microgram a second leaves every figure where it
    # is without one (a spray added at the wrong state or twice would show at once)
    base = _point(model)
    tiny = _point(model, reheater_spray="1e-6 kg/s", superheater_spray="1e-6 kg/s")
    for key in ("generator_output", "heat_rate", "heat_added", "condenser_duty"):
        assert tiny.totals[key] == pytest.approx(base.totals[key], rel=1e-8)
    assert abs(tiny.totals["energy_imbalance"]) < 1e-8 * tiny.totals["heat_added"]


def test_reheater_spray_balances_and_cost(model):
    base = _point(model)
    spray = _point(model, reheater_spray="4 kg/s")
    t = spray.totals
    # first law over the cycle with the spray water in
    assert abs(t["energy_imbalance"]) < 1e-8 * t["heat_added"]
    # mass: what leaves the hot-reheat node is what the reheater brings plus the spray
    rh = spray.table("reheaters")["reheater"]["flow"]
    out = (spray.table("stage_groups")["IP1"]["flow"]
           + spray.table("leakoffs")["IP inlet gland"]["flow"])
    assert out == pytest.approx(rh + 4.0, rel=1e-9)
    # common practice: reheater spray bypasses the HP section and costs heat rate
    assert t["heat_rate"] > base.totals["heat_rate"]
    # the feed pump carries the spray water too, so its turbine needs more steam
    name = "feed-pump turbine"
    assert (spray.table("feed_pump_turbines")[name]["flow"]
            > base.table("feed_pump_turbines")[name]["flow"])


def test_superheater_spray_from_final_feedwater_costs_nothing(model):
    # common practice: superheater spray taken after the HP heaters costs (almost)
    # nothing; here exactly nothing at a given throttle flow (identity)
    base = _point(model)
    spray = _point(model, superheater_spray="6 kg/s")
    assert spray.totals["heat_rate"] == pytest.approx(base.totals["heat_rate"], rel=1e-12)


def test_superheater_spray_from_the_pump_costs_a_little():
    from partload.inputs.reading import load_toml
    from partload.plant.model import build_model
    data, text = load_toml(MODEL)
    data["feedwater"]["superheater_spray_from"] = "pump"
    m = build_model(data, text=text, file="spray from pump")
    base = _point(m)
    spray = _point(m, superheater_spray="6 kg/s")
    assert abs(spray.totals["energy_imbalance"]) < 1e-8 * spray.totals["heat_added"]
    # it bypasses the HP heaters: less bleed heat, more boiler heat
    assert spray.totals["heat_rate"] > base.totals["heat_rate"]
    assert spray.totals["heat_rate"] < 1.01 * base.totals["heat_rate"]


def test_spray_needs_a_pump():
    m = load_model(ROOT / "models" / "demo_reheat_unit.toml")
    with pytest.raises(InputError, match="spray_pump"):
        read_conditions({"operation": {"reheater_spray": "2 kg/s"}}, m, "case.toml")
