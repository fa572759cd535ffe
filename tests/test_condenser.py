"""The condenser kind on the invented demo reheat unit with a cooling-water condenser:
design point, balances, the trends of the trade, the effective cleanliness, shells in
series, and cooling-water settings as case keys and sweep axes."""

from pathlib import Path

import pytest
from partload.errors import InputError
from partload.inputs.reading import load_toml
from partload.plant.case import Conditions, read_conditions
from partload.plant.model import build_model, load_model
from partload.solve.point import solve_point
from partload.steam.transport import water_properties

MODEL = Path(__file__).resolve().parent.parent / "models" / "demo_reheat_condenser_unit.toml"


def _once_through():
    """The demo with its cooling water given at the condenser (no tower)."""
    data, text = load_toml(MODEL)
    del data["condenser"][0]["cooling_tower"]
    return data, text


@pytest.fixture(scope="module")
def model():
    data, text = _once_through()
    return build_model(data, text=text, file="once through")


@pytest.fixture(scope="module")
def tower():
    return load_model(MODEL)


def _point(model, f=1.0, **settings):
    cond = read_conditions({"operation": {"throttle_flow_fraction": f},
                            "condensers": {"condenser": settings} if settings else {}}, model)
    return solve_point(model, cond)


def test_design_point_exact(model):
    r = _point(model)
    assert r.iterations == 0
    assert r.node("condenser")["p"] == pytest.approx(6.8e3, rel=1e-10)  # the model's design
    row = r.table("condensers")["condenser"]
    assert row["cleanliness"] == pytest.approx(0.85, rel=1e-9)
    assert row["inlet_temperature"] == pytest.approx(24 + 273.15)


@pytest.mark.parametrize("f, T", [(1.0, "24 degC"), (0.5, "10 degC"), (0.8, "33 degC")])
def test_balances(model, f, T):
    r = _point(model, f, inlet_temperature=T)
    row = r.table("condensers")["condenser"]
    # one condenser: it rejects the cycle's condenser duty (the point's balance)
    assert row["duty"] == pytest.approx(r.totals["condenser_duty"], rel=1e-9)
    assert abs(r.totals["energy_imbalance"]) < 1e-8 * r.totals["heat_added"]
    # the water carries the duty: m cp dT with cp at the mean water temperature (first
    # law; cp from IAPWS-IF97, independent of the table the law uses)
    cp = water_properties(0.5 * (row["inlet_temperature"] + row["outlet_temperature"]))[1]
    assert row["cooling_water_flow"] * cp * row["temperature_rise"] == pytest.approx(
        row["duty"], rel=2e-3)
    # the pressure is the saturation pressure at the condensing temperature: TTD > 0
    assert 0 < row["ttd"] < 15


def test_trends(model):
    # common practice: warmer or less cooling water and a fouled condenser raise the back
    # pressure and cost output
    base = _point(model, 0.9)
    warm = _point(model, 0.9, inlet_temperature="30 degC")
    less = _point(model, 0.9, cooling_water_flow="8000 kg/s")
    dirty = _point(model, 0.9, cleanliness="65 %")
    p0 = base.node("condenser")["p"]
    for r in (warm, less, dirty):
        assert r.node("condenser")["p"] > p0
        assert r.totals["generator_output"] < base.totals["generator_output"]
    # and lower load rejects less heat at a lower pressure
    assert _point(model, 0.5).node("condenser")["p"] < p0


def test_effective_cleanliness_inverts_the_law(model):
    # identity: the pressure solved at cleanliness 70 %, given back as the exhaust pressure,
    # gives an effective cleanliness of 70 %
    fouled = _point(model, 0.8, cleanliness="70 %")
    p = float(fouled.node("condenser")["p"])
    cond = read_conditions({"operation": {"throttle_flow_fraction": 0.8,
                                          "exhaust_pressure": f"{p!r} Pa"}}, model)
    given = solve_point(model, cond)
    assert given.table("condensers")["condenser"]["cleanliness"] == pytest.approx(0.70,
                                                                                    rel=1e-7)


def _two_shells():
    data, text = _once_through()
    data["nodes"]["condenser_b"] = "8.4 kPa"
    data["exhaust"]["nodes"] = ["condenser", "condenser_b"]
    for g in data["stage_group"]:
        if g["name"] == "LPB2":
            g["to"] = "condenser_b"
    shell = data["condenser"][0]
    data["condenser"] = [
        {**shell, "name": "LP shell", "area": "8500 m^2"},
        {**shell, "name": "HP shell", "node": "condenser_b", "area": "8500 m^2",
         "after": "LP shell", "inlet_temperature": "28.2 degC"},
    ]
    return build_model(data, text=text, file="two shells")


def test_shells_in_series():
    m = _two_shells()
    r = solve_point(m, Conditions(throttle_flow=0.9 * m.throttle.flow))
    lo, hi = r.table("condensers")["LP shell"], r.table("condensers")["HP shell"]
    # the water leaves one shell and enters the next
    assert hi["inlet_temperature"] == pytest.approx(lo["outlet_temperature"], rel=1e-12)
    assert r.node("condenser_b")["p"] > r.node("condenser")["p"]
    # the shells together reject the cycle's condenser duty (energy balance)
    assert lo["duty"] + hi["duty"] == pytest.approx(r.totals["condenser_duty"], rel=1e-9)
    assert abs(r.totals["energy_imbalance"]) < 1e-8 * r.totals["heat_added"]


def test_inputs_checked(model):
    with pytest.raises(InputError) as err:
        read_conditions({"condensers": {"condenser": {"inlet_temperature": "150 degC"}}}, model,
                        "case.toml")
    assert err.value.key == "inlet_temperature"
    m = _two_shells()
    with pytest.raises(InputError, match="set the inlet temperature there"):
        read_conditions({"condensers": {"HP shell": {"inlet_temperature": "20 degC"}}}, m,
                        "case.toml")
    data, text = _once_through()
    data["condenser"][0]["node"] = "crossover"
    with pytest.raises(InputError, match="exhaust node"):
        build_model(data, text=text, file="bad")
    data, text = _once_through()
    del data["condenser"][0]["area"]
    with pytest.raises(InputError, match="area"):
        build_model(data, text=text, file="bad")


def test_wet_bulb_as_a_sweep_axis(tower, tmp_path):
    from partload.plant.case import load_case
    from partload.study import plan_study
    case = tmp_path / "cw.toml"
    case.write_text(f'model = "{MODEL}"\n[sweep.condensers.condenser]\n'
                    f'wet_bulb_temperature = ["5 degC", "18 degC", "26 degC"]\n',
                    encoding="utf-8")
    plan = plan_study(load_case(case))
    assert plan.n_points == 3
    rows = [solve_point(tower, c) for c in plan.conditions]
    p = [r.node("condenser")["p"] for r in rows]
    assert p[0] < p[1] < p[2]
    # the design wet bulb gives back the design point (identity with the calibration)
    assert p[1] == pytest.approx(6.8e3, rel=1e-9)
    T_in = [r.table("condensers")["condenser"]["inlet_temperature"] for r in rows]
    # common practice: the approach (cold water over wet bulb) shrinks as the air warms
    approach = [t - w for t, w in zip(T_in, (278.15, 291.15, 299.15))]
    assert approach[0] > approach[1] > approach[2] > 0


def test_tower_inputs(tower):
    with pytest.raises(InputError, match="wet_bulb_temperature instead"):
        read_conditions({"condensers": {"condenser": {"inlet_temperature": "20 degC"}}}, tower,
                        "case.toml")
    with pytest.raises(InputError, match="no cooling tower"):
        read_conditions({"condensers": {"condenser": {"wet_bulb_temperature": "20 degC"}}},
                        build_model(*_once_through(), file="x"), "case.toml")


def _codes(model, f, **settings):
    from partload.cautions.checks import check_point
    cond = read_conditions({"operation": {"throttle_flow_fraction": f},
                            "condensers": {"condenser": settings} if settings else {}}, model)
    return [c.code for c in check_point(model, cond, solve_point(model, cond))]


def test_condenser_cautions(model):
    # quiet at design; half the cooling water (a pump out) doubles the rise to about 17 K,
    # above the 12 K default; a condenser at a fifth of its duty is extrapolated
    assert _codes(model, 1.0) == []
    assert "cooling_water_rise" in _codes(model, 1.0, cooling_water_flow="5500 kg/s")
    assert "cooling_water_rise" not in _codes(model, 1.0, cooling_water_flow="10000 kg/s")
    assert "condenser_duty" in _codes(model, 0.18)
    assert "condenser_duty" not in _codes(model, 0.5)


def test_pump_out_and_two_shells(model):
    # common practice: one cooling-water pump out raises the back pressure and the rise
    full = _point(model, 0.9)
    half = _point(model, 0.9, cooling_water_flow="5500 kg/s")
    assert half.node("condenser")["p"] > full.node("condenser")["p"]
    assert (half.table("condensers")["condenser"]["temperature_rise"]
            > 1.9 * full.table("condensers")["condenser"]["temperature_rise"])


@pytest.mark.parametrize("ntu_total", [0.8, 1.2, 2.0])
def test_two_shells_in_series_beat_one(ntu_total):
    # common practice: two shells in series on the water, each with half the surface and
    # half the steam, give a lower mean back pressure than one shell with all of it;
    # checked with the condenser laws (Incropera eq. 11.35a) and IF97 saturation pressures
    from partload.physics.condenser import condensing_temperature
    from partload.physics.cooling_tower import saturation_pressure
    T_in, rise = 297.15, 8.0
    one = saturation_pressure(condensing_temperature(T_in, rise, ntu_total))
    first = condensing_temperature(T_in, rise / 2, ntu_total / 2)
    second = condensing_temperature(T_in + rise / 2, rise / 2, ntu_total / 2)
    mean = 0.5 * (saturation_pressure(first) + saturation_pressure(second))
    assert mean < one


def test_one_shell_pressure_given():
    # multi-pressure condensers: a case may give one shell's pressure; the other shell
    # still follows its law (the shells in series of the test model above)
    m = _two_shells()
    free = solve_point(m, Conditions(throttle_flow=0.9 * m.throttle.flow))
    cond = read_conditions({"operation": {"throttle_flow_fraction": 0.9},
                            "condensers": {"HP shell": {"pressure": "9.5 kPa"}}}, m)
    r = solve_point(m, cond)
    assert r.node("condenser_b")["p"] == pytest.approx(9.5e3, rel=1e-12)
    # the given, higher pressure implies a fouled shell; the other stays on its law
    assert r.table("condensers")["HP shell"]["cleanliness"] < 0.85
    assert r.table("condensers")["LP shell"]["cleanliness"] == pytest.approx(0.85, rel=1e-7)
    assert r.node("condenser")["p"] != pytest.approx(free.node("condenser")["p"], rel=1e-6)
