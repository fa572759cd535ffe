"""Feedwater heater train: balances, a hand-checked heater, out-of-service effects,
output demand."""

from __future__ import annotations

import numpy as np
import pytest
from iapws import IAPWS97
from partload.errors import InfeasibleError
from partload.plant.case import Conditions
from partload.plant.model import build_model
from partload.solve.point import solve_point

HP8_OUT = Conditions(throttle_flow=280.0, heaters_out=frozenset({"HP8"}),
                     extraction_control=(("E8", ("closed", 0.0)),))


@pytest.mark.parametrize("flow", [280.0, 196.0, 112.0])
def test_heater_balances_and_cycle_energy_close(reheat_model, flow):
    r = solve_point(reheat_model, Conditions(throttle_flow=flow))
    for hs in r.heaters:
        h = reheat_model.heaters[hs.name]
        # each heater: closure * heat given up by steam and drains = feedwater duty
        assert abs(h.closure * hs.steam_release - hs.duty) <= 1e-9 * h.duty_design, hs.name
    t = r.totals
    # whole cycle: heat added + pump work = shaft work + condenser + losses
    assert abs(t["energy_imbalance"]) <= 1e-6 * t["heat_added"]
    # a closed cycle needs no make-up water
    assert abs(t["makeup_flow"]) <= 1e-9 * flow


def _single_heater_model(bleed_design: float) -> dict:
    """Throttle -> valve -> G1 -> x (bleed to one closed heater) -> G2 -> condenser."""
    return {
        "about": {"name": "one heater (test)"},
        "throttle": {"node": "throttle", "pressure": "40 bar", "temperature": "400 degC",
                     "flow": "20 kg/s"},
        "throttle_valve": {"to": "inlet"},
        "nodes": {"throttle": "40 bar", "inlet": "39 bar", "x": "5 bar", "condenser": "10 kPa"},
        "exhaust": {"nodes": ["condenser"], "loss_curves": {"c": {
            "annulus_velocity": ["100 m/s", "300 m/s"], "loss": ["20 kJ/kg", "20 kJ/kg"]}}},
        "stage_group": [
            {"name": "G1", "from": "inlet", "to": "x", "efficiency": 0.85,
             "efficiency_correction": "constant"},
            {"name": "G2", "from": "x", "to": "condenser", "efficiency": 0.85,
             "efficiency_correction": "constant", "annulus_area": "1.0 m^2",
             "loss_curve": "c"}],
        "extraction": [{"name": "X", "node": "x", "design_flow": f"{bleed_design} kg/s"}],
        "generator": {"rating": "20 MW"},
        "feedwater": {"condenser": "condenser", "train": ["cp", "H", "fp"],
                      "boiler_pressure_drop": "5 bar"},
        "pump": [{"name": "cp", "efficiency": 0.8, "discharge_pressure": "10 bar"},
                 {"name": "fp", "efficiency": 0.8, "discharge": "boiler"}],
        "heater": [{"name": "H", "extraction": "X", "ttd": "3 K", "drain_to": "condenser",
                    "line_pressure_drop": "3 %"}],
    }


def _hand_bleed(p_x: float, h_x: float, m_fw: float) -> float:
    """Bleed flow of the one heater by hand with the reference IAPWS-IF97 package
    (MPa, K, kJ/kg inside; W and kg/s out)."""
    p_c, p_cp = 0.01, 1.0
    sat_c = IAPWS97(P=p_c, x=0.0)
    h_in = sat_c.h + sat_c.v * (p_cp - p_c) * 1e3 / 0.8  # pump: v dp / eta [kJ/kg]
    p_sh = p_x * 1e-6 * 0.97
    sat_sh = IAPWS97(P=p_sh, x=0.0)
    h_out = IAPWS97(P=p_cp, T=sat_sh.T - 3.0).h
    return m_fw * (h_out - h_in) / (h_x / 1e3 - sat_sh.h)


def test_single_heater_against_hand_calculation():
    # design state at the extraction by hand (IAPWS-IF97 reference package):
    # expansion from 39 bar (isenthalpic valve from 40 bar, 400 degC) to 5 bar, eta 0.85
    h0 = IAPWS97(P=4.0, T=673.15).h
    s1 = IAPWS97(P=3.9, h=h0).s
    h_x = h0 - 0.85 * (h0 - IAPWS97(P=0.5, s=s1).h)
    bleed = _hand_bleed(0.5e6, h_x * 1e3, 20.0)
    model = build_model(_single_heater_model(round(bleed, 6)), file="one-heater")
    # a consistent design heat balance calibrates to closure 1
    assert model.heaters["H"].closure == pytest.approx(1.0, abs=2e-5)
    r = solve_point(model, Conditions(throttle_flow=14.0))
    i = r.node_names.index("x")
    expected = _hand_bleed(r.node_p[i], r.node_h[i], 14.0)
    assert r.heaters[0].bleed == pytest.approx(expected, rel=5e-5)
    # TTD held: feedwater leaves 3 K below shell saturation
    assert r.heaters[0].ttd == pytest.approx(3.0, abs=0.03)  # IF97 backward T(p,h): ~25 mK


def test_top_heater_out_of_service_effects(reheat_model):
    # Common practice, no source: with the top HP heater out of service at the
    # same throttle flow, final feedwater temperature falls by about that
    # heater's design temperature rise, output rises by a few percent, heat rate
    # gets worse, and pressures downstream of the closed extraction rise.
    base = solve_point(reheat_model, Conditions(throttle_flow=280.0), check_limits=False)
    out = solve_point(reheat_model, HP8_OUT, check_limits=False)
    hp8 = next(h for h in base.heaters if h.name == "HP8")
    rise = hp8.T_out - hp8.T_in
    drop = (base.totals["final_feedwater_temperature"]
            - out.totals["final_feedwater_temperature"])
    assert drop == pytest.approx(rise, rel=0.25)
    gain = out.totals["generator_output"] / base.totals["generator_output"] - 1.0
    assert 0.01 < gain < 0.10
    assert out.totals["heat_rate"] > base.totals["heat_rate"]
    for n in ["cold_reheat", "hot_reheat", "ip_x1", "ip_x2", "crossover"]:
        assert out.node(n)["p"] > base.node(n)["p"], n
    assert not next(h for h in out.heaters if h.name == "HP8").in_service


def test_lp_heater_out_reroutes_drains(reheat_model):
    r = solve_point(reheat_model, Conditions(throttle_flow=280.0,
                                             heaters_out=frozenset({"LP3"})))
    by = {h.name: h for h in r.heaters}
    assert by["LP3"].bleed == 0.0 and not by["LP3"].in_service
    # LP4's drains pass on to LP2 (the model's drain_to_when_out_of_service is unset
    # for LP3, so its own drain_to applies): LP2 drains forward all of E2 and E4
    assert by["LP2"].drain_flow == pytest.approx(by["LP2"].bleed + by["LP4"].drain_flow)
    assert abs(r.totals["energy_imbalance"]) <= 1e-6 * r.totals["heat_added"]


def test_heat_rate_worse_at_half_load(reheat_model):
    # common practice, no source
    full = solve_point(reheat_model, Conditions(throttle_flow=280.0))
    half = solve_point(reheat_model, Conditions(throttle_flow=140.0))
    assert half.totals["heat_rate"] > 1.03 * full.totals["heat_rate"]
    # a plausible utility reheat heat rate at design: 7,500-8,500 kJ/kWh (common practice)
    assert 7500.0 < full.totals["heat_rate"] * 3600.0 < 8500.0


@pytest.mark.parametrize("mode", ["sliding", "fixed"])
def test_output_demand_matches_flow_case(reheat_model, mode):
    demand = 0.6 * reheat_model.generator.rating
    d = solve_point(reheat_model, Conditions(output=demand, pressure_mode=mode))
    assert d.totals["generator_output"] == pytest.approx(demand, rel=1e-6)
    f = solve_point(reheat_model, Conditions(throttle_flow=d.totals["throttle_flow"],
                                             pressure_mode=mode))
    np.testing.assert_allclose(f.node_p, d.node_p, rtol=1e-8)
    np.testing.assert_allclose([h.bleed for h in f.heaters], [h.bleed for h in d.heaters],
                               rtol=1e-7)


def test_demand_above_maximum_states_the_maximum(reheat_model):
    with pytest.raises(InfeasibleError, match=r"maximum output \d+\.\d+ MW"):
        solve_point(reheat_model, Conditions(output=1.2 * reheat_model.generator.rating))


def test_ua_method_widens_ttd_with_more_duty():
    # With UA held, a heater that must heat more water (its neighbour out of
    # service) has a larger TTD than with the constant-TTD default
    # (epsilon-NTU, Incropera et al. 2007, eq. 11.35a; direction: common practice).
    from helpers import demo_data

    data = demo_data()
    for h in data["heater"]:
        if h["name"] == "LP4":
            h["ttd_method"] = "ua"
    model = build_model(data, file="ua-variant")
    r = solve_point(model, Conditions(throttle_flow=280.0, heaters_out=frozenset({"LP3"})))
    lp4 = next(h for h in r.heaters if h.name == "LP4")
    # LP4 takes on LP3's duty too, so its TTD must grow clearly; 0.5 K is a margin far
    # above the property noise (regression: about 9 K)
    assert lp4.ttd > 2.8 + 0.5
    d = solve_point(model, Conditions(throttle_flow=280.0))
    assert next(h for h in d.heaters if h.name == "LP4").ttd == pytest.approx(2.8, abs=0.03)


def test_heat_rate_chargeable_to_power(reheat_model, industrial_model):
    # Without process steam the heat rate chargeable to power is the heat rate;
    # with it, the net enthalpy leaving with process steam is taken off the heat
    # added (an enthalpy allocation, common practice, no source).
    r = solve_point(reheat_model, Conditions(throttle_flow=200.0))
    assert r.totals["heat_rate_power"] == pytest.approx(r.totals["heat_rate"], rel=1e-12)
    i = solve_point(industrial_model, Conditions(throttle_flow=60.0))
    t = i.totals
    assert t["process_steam_energy"] > 0.2 * t["heat_added"]
    assert t["heat_rate_power"] * t["generator_output"] == pytest.approx(
        t["heat_added"] - t["process_steam_energy"], rel=1e-12)
    # a non-reheat 92 bar unit: 7,000-11,000 kJ/kWh chargeable to power (common
    # practice, no source)
    assert 7000.0 < t["heat_rate_power"] * 3600.0 < 11000.0 < t["heat_rate"] * 3600.0
