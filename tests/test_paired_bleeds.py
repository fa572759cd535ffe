"""Paired bleeds: one heater fed by bleeds at the matching nodes of parallel branches.

The check is an identity: a double-flow section of two equal branches with a paired
bleed gives the same answers as one branch of twice the flow capacity and annulus
with a single bleed of the sum (both models invented here)."""

import tomllib

import pytest
from partload.errors import InputError
from partload.plant.case import Conditions
from partload.plant.model import build_model
from partload.solve.point import solve_point

COMMON = """
[about]
name = "{name}"
description = "INVENTED: a small condensing unit for a test of paired bleeds"

[throttle]
node = "throttle"
pressure = "60 bar"
temperature = "480 degC"
flow = "50 kg/s"

[throttle_valve]
to = "hp_inlet"

[exhaust]
nodes = ["condenser"]

[exhaust.loss_curves.last]
annulus_velocity = ["50 m/s", "150 m/s", "250 m/s", "400 m/s"]
loss = ["80 kJ/kg", "20 kJ/kg", "30 kJ/kg", "90 kJ/kg"]

[[stage_group]]
name = "HP"
from = "hp_inlet"
to = "x"
efficiency = 0.85

[[extraction]]
name = "ED"
node = "x"
design_flow = "5.34 kg/s"   # about the closing bleeds of this invented balance

[generator]
rating = "60 MW"

[feedwater]
condenser = "condenser"
train = ["condensate pump", "LP", "deaerator", "feed pump"]
boiler_pressure_drop = "5 bar"

[[pump]]
name = "condensate pump"
efficiency = 0.75
discharge = "fixed"
discharge_pressure = "12 bar"

[[pump]]
name = "feed pump"
efficiency = 0.78
discharge = "boiler"

[[heater]]
name = "deaerator"
type = "deaerator"
extraction = "ED"
"""

PAIRED = COMMON.format(name="paired") + """
[nodes]
throttle = "60 bar"
hp_inlet = "58 bar"
x = "8 bar"
a1 = "1.5 bar"
b1 = "1.5 bar"
condenser = "8 kPa"

[[stage_group]]
name = "A1"
from = "x"
to = "a1"
efficiency = 0.88

[[stage_group]]
name = "B1"
from = "x"
to = "b1"
efficiency = 0.88

[[stage_group]]
name = "A2"
from = "a1"
to = "condenser"
efficiency = 0.82
annulus_area = "2 m^2"
loss_curve = "last"

[[stage_group]]
name = "B2"
from = "b1"
to = "condenser"
efficiency = 0.82
annulus_area = "2 m^2"
loss_curve = "last"

[[extraction]]
name = "EA"
node = "a1"
design_flow = "2.825 kg/s"

[[extraction]]
name = "EB"
node = "b1"
design_flow = "2.825 kg/s"

[[heater]]
name = "LP"
extraction = ["EA", "EB"]
ttd = "3 K"
drain_to = "condenser"
"""

LUMPED = COMMON.format(name="lumped") + """
[nodes]
throttle = "60 bar"
hp_inlet = "58 bar"
x = "8 bar"
ab1 = "1.5 bar"
condenser = "8 kPa"

[[stage_group]]
name = "AB1"
from = "x"
to = "ab1"
efficiency = 0.88

[[stage_group]]
name = "AB2"
from = "ab1"
to = "condenser"
efficiency = 0.82
annulus_area = "4 m^2"
loss_curve = "last"

[[extraction]]
name = "E"
node = "ab1"
design_flow = "5.65 kg/s"

[[heater]]
name = "LP"
extraction = "E"
ttd = "3 K"
drain_to = "condenser"
"""


def _model(text):
    return build_model(tomllib.loads(text), text=text, file="test")


@pytest.mark.parametrize("f, mode", [(1.0, "sliding"), (0.6, "sliding"), (0.45, "fixed")])
def test_paired_bleed_equals_the_lumped_branch(f, mode):
    paired, lumped = _model(PAIRED), _model(LUMPED)
    a = solve_point(paired, Conditions(throttle_flow=50 * f, pressure_mode=mode))
    b = solve_point(lumped, Conditions(throttle_flow=50 * f, pressure_mode=mode))
    for key in ("generator_output", "heat_rate", "final_feedwater_temperature",
                "condenser_duty", "throttle_pressure"):
        assert a.totals[key] == pytest.approx(b.totals[key], rel=1e-10), key
    ha, hb = a.table("heaters")["LP"], b.table("heaters")["LP"]
    assert ha["bleed"] == pytest.approx(hb["bleed"], rel=1e-10)
    ea, eb = a.table("extractions"), b.table("extractions")
    # each branch gives half the heater's bleed
    assert ea["EA"]["flow"] == pytest.approx(0.5 * eb["E"]["flow"], rel=1e-10)
    assert ea["EB"]["flow"] == pytest.approx(ea["EA"]["flow"], rel=1e-12)


def test_paired_bleeds_at_unequal_pressures_refused():
    text = PAIRED.replace('b1 = "1.5 bar"', 'b1 = "1.2 bar"')
    with pytest.raises(InputError, match="paired bleeds"):
        _model(text)


def test_heater_out_closes_both_bleeds():
    from partload.plant.case import read_conditions
    m = _model(PAIRED)
    cond = read_conditions({"operation": {"throttle_flow": "40 kg/s"},
                            "heaters": {"LP": {"in_service": False}}}, m)
    assert dict(cond.extraction_control)["EB"] == ("closed", 0.0)
    r = solve_point(m, cond)
    assert r.table("extractions")["EA"]["flow"] == 0.0
    assert r.table("extractions")["EB"]["flow"] == 0.0
