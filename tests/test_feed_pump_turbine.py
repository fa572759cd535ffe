"""The feed-pump turbine on the invented demo reheat plant: design point, its power
balance with the pump, the whole energy balance, and figures of the trade."""

from pathlib import Path

import pytest
from partload.errors import InputError
from partload.inputs.reading import load_toml
from partload.plant.case import read_conditions
from partload.plant.model import build_model, load_model
from partload.solve.point import solve_point

MODEL = Path(__file__).resolve().parent.parent / "models" / "demo_reheat_plant_unit.toml"


@pytest.fixture(scope="module")
def model():
    return load_model(MODEL)


def _point(model, f, **op):
    return solve_point(model, read_conditions({"operation": {"throttle_flow_fraction": f,
                                                             **op}}, model))


def test_design_point_exact(model):
    r = _point(model, 1.0)
    assert r.iterations == 0
    row = r.table("feed_pump_turbines")["feed-pump turbine"]
    assert row["flow"] == pytest.approx(12.8, rel=1e-10)  # the model file's design flow


@pytest.mark.parametrize("f, mode", [(0.5, "sliding"), (0.8, "fixed"), (1.0, "sliding")])
def test_power_balance_and_energy_balance(model, f, mode):
    r = _point(model, f, pressure_mode=mode)
    t = r.totals
    row = r.table("feed_pump_turbines")["feed-pump turbine"]
    # the pump gets what the turbine gives through its drive (the residual, solved)
    assert row["pump_power"] == pytest.approx(t["turbine_driven_pump_power"], rel=1e-8)
    # first law over the cycle, the turbine's work included (near 0 W against ~800 MW)
    assert abs(t["energy_imbalance"]) < 1e-8 * t["heat_added"]
    # its power turns the pump, not the generator: the shaft is the stage groups' alone
    groups = sum(v["power"] for v in r.table("stage_groups").values())
    assert t["shaft_power"] == pytest.approx(groups, rel=1e-12)
    # a turbine-driven pump is not charged as auxiliary power
    aux = r.table("auxiliaries")["auxiliaries"]
    assert aux["pump_drive_power"] == pytest.approx(
        (t["pump_power"] - t["turbine_driven_pump_power"]) / 0.92, rel=1e-12)


def test_figures_of_the_trade(model):
    full = _point(model, 1.0)
    # common practice, no source: the feed pump of a subcritical unit takes about 2 % of
    # gross output (2-4 % on supercritical units, the figure)
    share = full.totals["turbine_driven_pump_power"] / full.totals["generator_output"]
    assert 0.015 < share < 0.03
    # common practice: sliding pressure lowers the feed pump's head, so the turbine needs
    # less steam than at a held throttle pressure at the same load
    slide = _point(model, 0.6, pressure_mode="sliding")
    held = _point(model, 0.6, pressure_mode="fixed")
    name = "feed-pump turbine"
    assert (slide.table("feed_pump_turbines")[name]["flow"]
            < held.table("feed_pump_turbines")[name]["flow"])


def test_inputs_checked():
    data, text = load_toml(MODEL)
    data["feed_pump_turbine"][0]["pump"] = "no such pump"
    with pytest.raises(InputError, match="not in the feedwater train"):
        build_model(data, text=text, file="bad")
    data, text = load_toml(MODEL)
    data["feed_pump_turbine"][0]["design_flow"] = "20 kg/s"
    with pytest.raises(InputError, match="design_flow"):
        build_model(data, text=text, file="bad")


def test_leakoffs(model):
    # the design heat balance's leakages at design (identity with the calibration)
    r = _point(model, 1.0)
    assert r.table("leakoffs")["HP balance piston"]["flow"] == pytest.approx(2.5, rel=1e-10)
    assert r.table("leakoffs")["IP inlet gland"]["flow"] == pytest.approx(1.2, rel=1e-10)
    # common practice: a labyrinth passes a flow nearly in proportion to its upstream
    # pressure when the pressure ratio across it stays (Martin's relation)
    part = _point(model, 0.6)
    for name, node in (("HP balance piston", "hp_inlet"), ("IP inlet gland", "hot_reheat")):
        ratio_m = part.table("leakoffs")[name]["flow"] / r.table("leakoffs")[name]["flow"]
        ratio_p = part.node(node)["p"] / r.node(node)["p"]
        assert ratio_m == pytest.approx(ratio_p, rel=0.05)
    # the cycle still balances with them (first law)
    assert abs(part.totals["energy_imbalance"]) < 1e-8 * part.totals["heat_added"]
