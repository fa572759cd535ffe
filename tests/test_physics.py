"""Physics functions: each law against a hand calculation or its defining identity."""

from __future__ import annotations

import math

import pytest
from partload.physics.efficiency import (
    baumann_factor,
    constant,
    get_correction,
    make_table_correction,
    velocity_ratio,
)
from partload.physics.ellipse import ellipse_flow, flow_constant
from partload.physics.exhaust import annulus_velocity, exhaust_loss, used_energy_end_point
from partload.physics.expansion import (
    dry_expansion_end,
    expansion_end,
    moisture_from_enthalpy,
)
from partload.physics.feedwater import boiler_pressure_drop, mixed_enthalpy, pumped_drain_enthalpy
from partload.physics.generator import generator_output
from partload.physics.heater import (
    deaerator_outlet_enthalpy,
    design_ua,
    drain_outlet_enthalpy,
    drain_outlet_temperature,
    effectiveness_ttd,
    feedwater_duty,
    heater_balance_residual,
    heater_shell_pressure,
    steam_release,
)
from partload.physics.performance import (
    condenser_duty,
    energy_imbalance,
    heat_added,
    heat_chargeable_to_power,
    heat_rate,
    makeup_flow,
    net_process_steam_energy,
    steam_rate,
)
from partload.physics.pressure_drop import scaled_pressure_drop
from partload.physics.pump import pump_enthalpy_rise
from partload.steam.if97 import get_backend
from scipy.optimize import brentq


def test_ellipse_law_round_trip_flow_and_pressure():
    # K from one state; then the outlet pressure that passes 70 % of the flow is
    # found from the law and must give back exactly that flow (round trip).
    p_in, p_out, v_in, m = 16e6, 7.2e6, 0.021, 280.0
    K = flow_constant(m, p_in, p_out, v_in)
    assert ellipse_flow(p_in, p_out, v_in, K) == pytest.approx(m, rel=1e-14)
    p2 = brentq(lambda p: ellipse_flow(p_in, p, v_in, K) - 0.7 * m, 1e3, p_in, xtol=1e-6)
    assert ellipse_flow(p_in, p2, v_in, K) == pytest.approx(0.7 * m, rel=1e-10)
    assert p2 > p_out  # less flow, less pressure ratio


def test_ellipse_law_hand_value():
    # hand calculation: K = 1e-2 m^2, p_in = 10 bar, p_out = 6 bar, v_in = 0.2:
    # m = 1e-2 * sqrt((1e12 - 0.36e12) / (1e6 * 0.2)) = 1e-2 * sqrt(3.2e6) = 17.888...
    assert ellipse_flow(1e6, 0.6e6, 0.2, 1e-2) == pytest.approx(0.01 * math.sqrt(3.2e6))


def test_ellipse_law_choked_limit_and_reverse_sign():
    # at zero back pressure the law gives m = K sqrt(p_in / v_in) (Stodola's cone tip)
    assert ellipse_flow(1e6, 0.0, 0.2, 1.0) == pytest.approx(math.sqrt(1e6 / 0.2))
    assert ellipse_flow(1e6, 1.1e6, 0.2, 1.0) < 0.0


def test_velocity_ratio_parabola():
    # eta/eta_d = 2r - r^2 with r = sqrt(dh_d / dh): 1 at design; at dh = dh_d/0.64
    # r = 0.8 so 1.6 - 0.64 = 0.96 (hand calculation)
    assert velocity_ratio(1.0, 1.0) == pytest.approx(1.0)
    assert velocity_ratio(1.0, 1.0 / 0.64) == pytest.approx(0.96)
    assert velocity_ratio(1.0, 1.0 / 1.44) == pytest.approx(2 * 1.2 - 1.44)
    # outside 0.5 <= r <= 1.5 the ratio is held at the end value 2(1.5) - 1.5^2 = 0.75
    assert velocity_ratio(1.0, 0.2) == pytest.approx(0.75)
    assert velocity_ratio(1.0, 10.0) == pytest.approx(0.75)
    assert constant(0.3, 2.0) == 1.0


def test_table_correction_interpolates_and_holds_ends():
    # hand calculation: halfway between 0.4 and 0.8 the ratio is halfway, 0.88
    f = make_table_correction([0.4, 0.8, 1.0], [0.8, 0.96, 1.0])
    assert f(0.6, 1.0) == pytest.approx(0.88)
    assert f(0.1, 1.0) == pytest.approx(0.8)
    assert f(1.5, 1.0) == pytest.approx(1.0)
    with pytest.raises(ValueError):
        make_table_correction([1.0, 0.5], [1.0, 0.9])


def test_unknown_correction_lists_valid_names():
    with pytest.raises(KeyError, match="constant, table, velocity_ratio"):
        get_correction("parabola")


def test_baumann_rule():
    # Baumann (1921): 1 % mean moisture costs 1 % of efficiency with alpha = 1;
    # hand calculation: inlet 4 %, outlet 12 % -> mean 8 % -> 0.92 (alpha 1), 0.96 (0.5)
    assert baumann_factor(0.04, 0.12, 1.0) == pytest.approx(0.92)
    assert baumann_factor(0.04, 0.12, 0.5) == pytest.approx(0.96)
    # a dry outlet: the mean is half the inlet moisture, 1 - 0.06 / 2
    assert baumann_factor(0.06) == pytest.approx(0.97)
    assert baumann_factor(0.0, 0.0, 2.0) == 1.0


def test_dry_expansion_end_with_wet_inlet():
    # hand calculation: h = 2700 - 0.9 * 300 * (1 - 1.0 * 0.04 / 2) kJ/kg = 2435.4 kJ/kg
    assert dry_expansion_end(2.7e6, 3e5, 0.9, 0.04, 1.0) == pytest.approx(2.4354e6, rel=1e-12)
    # the general end point agrees with it when the end is dry (h_vap below it)
    assert expansion_end(2.7e6, 3e5, 0.9, 0.04, 2e5, 2.4e6) == dry_expansion_end(
        2.7e6, 3e5, 0.9, 0.04)


@pytest.mark.parametrize("h_in, y_in", [(2.75e6, 0.0), (2.60e6, 0.03)])
def test_expansion_closed_form_equals_fixed_point(h_in, y_in):
    # The closed form must equal the fixed point of h = h_in - eta(y_mean) dh_s
    # with y_out = (h_vap - h) / (h_vap - h_liq) (brute-force iteration).
    dh_s, eta, alpha = 4.5e5, 0.88, 1.0
    h_liq, h_vap = 1.7e5, 2.57e6  # near 6.8 kPa (IF97: 161.1 and 2570.8 kJ/kg)
    h = h_in - eta * dh_s
    for _ in range(200):
        y_out = max(0.0, (h_vap - h) / (h_vap - h_liq))
        h = h_in - eta * (1.0 - alpha * 0.5 * (y_in + y_out)) * dh_s
    assert expansion_end(h_in, dh_s, eta, y_in, h_liq, h_vap, alpha) == pytest.approx(h,
                                                                                     rel=1e-12)


def test_expansion_dry_end_is_plain_efficiency():
    # hand calculation: a dry end is h_in - eta dh_s = 3400 - 0.85 * 200 kJ/kg
    assert expansion_end(3.4e6, 2e5, 0.85, 0.0, 1e6, 2.7e6) == pytest.approx(3.4e6 - 1.7e5)


def test_used_energy_end_point_hand_value():
    # UEEP = ELEP + L * 0.87 * (1 - y)(1 - 0.65 y): L = 30 kJ/kg, y = 0.10:
    # 30 * 0.87 * 0.9 * 0.935 = 21.96 kJ/kg (hand calculation, Spencer-Cotton-Cannon form)
    assert used_energy_end_point(2.3e6, 3.0e4, 0.10) == pytest.approx(2.3e6 + 21963.15)
    # hand calculations: 100 kg/s * 18 m^3/kg / 8 m^2 = 225 m/s; halfway between
    # the curve points 200 and 300 m/s the loss is halfway, 25 kJ/kg
    assert annulus_velocity(100.0, 18.0, 8.0) == pytest.approx(225.0)
    assert exhaust_loss(225.0, [100.0, 200.0, 300.0], [30e3, 20e3, 40e3]) == pytest.approx(25e3)


def test_generator_output_satisfies_its_loss_equation():
    P_shaft, mech, fixed, load, rating = 300e6, 1e6, 1.2e6, 2.8e6, 350e6
    P = generator_output(P_shaft, mech, fixed, load, rating)
    assert P_shaft - mech - fixed - load * (P / rating) ** 2 == pytest.approx(P, rel=1e-12)
    # at rated output the losses are exactly the rated losses
    P_r = generator_output(rating + mech + fixed + load, mech, fixed, load, rating)
    assert P_r == pytest.approx(rating, rel=1e-12)


def test_scaled_pressure_drop_quadratic_in_flow():
    # hand calculation: half the flow, a quarter of the drop; twice the volume, twice
    assert scaled_pressure_drop(50.0, 0.1, 4e5, 100.0, 0.1) == pytest.approx(1e5)
    assert scaled_pressure_drop(100.0, 0.2, 4e5, 100.0, 0.1) == pytest.approx(8e5)


def test_effectiveness_round_trip():
    # UA from a design TTD, then the same flow gives back the same TTD
    T_sat, T_in, T_out, m, cp = 420.0, 380.0, 417.2, 200.0, 4250.0
    ua = design_ua(T_sat, T_in, T_out, m, cp)
    assert effectiveness_ttd(T_sat, T_in, m, ua, cp) == pytest.approx(T_sat - T_out, rel=1e-12)
    # less water flow, more NTU: the TTD shrinks (common practice, no source)
    assert effectiveness_ttd(T_sat, T_in, 0.5 * m, ua, cp) < T_sat - T_out


def test_pump_rise_hand_value():
    # v dp / eta: 0.00101 m^3/kg * 18 MPa / 0.8 = 22.725 kJ/kg (hand calculation)
    assert pump_enthalpy_rise(0.00101, 0.0, 18e6, 0.8) == pytest.approx(22725.0)


def test_one_pump_law():
    # the heater module re-exports the pump law; it is the same function, not a copy
    from partload.physics import heater

    assert heater.pump_enthalpy_rise is pump_enthalpy_rise


def test_drain_outlet_temperature_hand_values():
    # hand calculation: feedwater in at 400 K plus a DCA of 5.6 K; without a drain
    # cooler the drain is saturated; an approach beyond saturation is held there
    assert drain_outlet_temperature(450.0, 400.0, 5.6) == pytest.approx(405.6)
    assert drain_outlet_temperature(450.0, 400.0, None) == 450.0
    assert drain_outlet_temperature(450.0, 400.0, 60.0) == 450.0


@pytest.mark.parametrize("backend", ["seuif97", "iapws"])
def test_drain_and_deaerator_outlet_enthalpy(backend):
    steam = get_backend(backend)
    # subcooled drain at 3 MPa, 495 K + DCA 5 K = 500 K (T_sat(3 MPa) = 507.0 K):
    # IAPWS R7-97(2012) Table 5, region 1, T = 500 K, p = 3 MPa: h = 975.542239 kJ/kg
    T_sat = steam.T_sat(3e6)
    assert drain_outlet_enthalpy(steam, 3e6, T_sat, 495.0, 5.0) == pytest.approx(
        975.542239e3, rel=1e-8)
    # no drain cooler: saturated liquid at 3 MPa, 1008.37 kJ/kg (IF97 saturation
    # table, from memory)
    assert drain_outlet_enthalpy(steam, 3e6, T_sat, 495.0, None) == pytest.approx(
        1008.37e3, rel=1e-5)
    # deaerator at 1 MPa: saturated liquid, 762.68 kJ/kg (IF97 saturation table,
    # from memory)
    assert deaerator_outlet_enthalpy(steam, 1e6) == pytest.approx(762.68e3, rel=1e-5)


def test_closed_heater_balance_hand_values():
    # hand calculation: bleed 10 kg/s at 3000 kJ/kg and drains of 5 kg/s at 900 kJ/kg
    # from the heater above, all leaving at the drain enthalpy 800 kJ/kg:
    # 10 * 2200 + 5 * 100 = 22 500 kW
    q = steam_release(10.0, 3.0e6, 8.0e5, [5.0], [9.0e5])
    assert q == pytest.approx(22.5e6)
    assert steam_release(10.0, 3.0e6, 8.0e5) == pytest.approx(22.0e6)
    # feedwater 250 kg/s from 700 to 790.2 kJ/kg takes up 22 550 kW
    duty = feedwater_duty(250.0, 7.0e5, 7.902e5)
    assert duty == pytest.approx(22.55e6)
    # closure 22.55 / 22.5 closes it; closure 1 leaves -50 kW, over a 25 MW scale -0.002
    assert heater_balance_residual(q, duty, 22.55 / 22.5, 25e6) == pytest.approx(0.0, abs=1e-15)
    assert heater_balance_residual(q, duty, 1.0, 25e6) == pytest.approx(-0.002)


def test_deaerator_balance_is_mixing():
    # identity: with the drain enthalpy equal to the saturated outlet, the heater
    # balance is the adiabatic mixing of water, bleed and drains (hand-picked numbers)
    m_w, h_w, h_b, m_d, h_d, h_out = 200.0, 5.5e5, 2.9e6, 30.0, 8.0e5, 7.0e5
    # bleed that makes the mixture leave at h_out:
    m_b = (m_w * (h_out - h_w) - m_d * (h_d - h_out)) / (h_b - h_out)
    mixed = mixed_enthalpy([m_w, m_b, m_d], [h_w, h_b, h_d])
    assert mixed == pytest.approx(h_out, rel=1e-12)
    q = steam_release(m_b, h_b, h_out, [m_d], [h_d])
    assert heater_balance_residual(q, feedwater_duty(m_w, h_w, h_out)) == pytest.approx(
        0.0, abs=1e-9)


def test_mixing_and_pumped_drain_hand_values():
    # hand calculation: 100 kg/s at 1000 kJ/kg with 10 kg/s at 800 kJ/kg: 10800/11 kJ/kg
    assert mixed_enthalpy((100.0, 10.0), (1.0e6, 8.0e5)) == pytest.approx(1.08e7 / 11)
    with pytest.raises(ValueError):
        mixed_enthalpy((0.0,), (1.0e6,))
    # hand calculation: drain at 1 MPa, v = 0.0011 m^3/kg, lifted to 20 MPa at 75 %:
    # 0.0011 * 19e6 / 0.75 = 27 866.67 J/kg above its 760 kJ/kg
    assert pumped_drain_enthalpy(7.6e5, 0.0011, 1e6, 20e6, 0.75) == pytest.approx(
        7.6e5 + 27866.6667, rel=1e-9)


def test_boiler_pressure_drop_quadratic_in_flow():
    # hand calculation: 20 bar at 280 kg/s; half the flow a quarter, sign kept
    assert boiler_pressure_drop(280.0, 20e5, 280.0) == pytest.approx(20e5)
    assert boiler_pressure_drop(140.0, 20e5, 280.0) == pytest.approx(5e5)
    assert boiler_pressure_drop(-140.0, 20e5, 280.0) == pytest.approx(-5e5)


def test_heat_rate_and_steam_rate_definitions():
    # ASME PTC 6 definition (heat added / generator output): a cycle 40 % efficient
    # has a heat rate of 3600 / 0.4 = 9000 kJ/kWh, 3412.14 / 0.4 = 8530.4 Btu/kWh
    # (1 kWh = 3412.14 Btu, conversion factor from memory); hand calculation
    assert heat_rate(250e6, 100e6) * 3600.0 == pytest.approx(9000.0)
    assert heat_rate(250e6, 100e6) * 3412.14 == pytest.approx(8530.35)
    # hand calculation: 280 kg/s from 1250 to 3400 kJ/kg plus 250 MW of reheat
    assert heat_added(280.0, 3.4e6, 1.25e6, 250e6) == pytest.approx(852e6)
    # hand calculation: 280 kg/s for 320 MW is 280 * 3.6e6 / 320e6 = 3.15 kg/kWh
    assert steam_rate(280.0, 320e6) * 3.6e6 == pytest.approx(3.15)
    assert math.isnan(heat_rate(1e6, 0.0)) and math.isnan(steam_rate(1.0, -1.0))


def test_cycle_balances_of_a_hand_built_cycle():
    # hand-built cycle (invented numbers): 100 kg/s raised to 3400 kJ/kg from
    # feedwater at 200 kJ/kg; 20 kg/s leave as process steam at 2800 kJ/kg and come
    # back as make-up at the condensate's 190 kJ/kg; 80 kg/s exhaust at 2300 kJ/kg;
    # the pump adds 10 kJ/kg to the 100 kg/s of condensate.
    q_in = heat_added(100.0, 3.4e6, 2.0e5)  # 320 MW
    shaft = 100.0 * (3.4e6 - 2.8e6) + 80.0 * (2.8e6 - 2.3e6)  # 100 MW
    m_mu = makeup_flow(100.0, 80.0, 0.0)
    assert m_mu == pytest.approx(20.0)
    q_c = condenser_duty(80.0 * 2.3e6, 0.0, 0.0, m_mu, 100.0, 1.9e5)
    assert q_c == pytest.approx(184e6 + 3.8e6 - 19e6)  # 168.8 MW
    e_proc = net_process_steam_energy(20.0 * 2.8e6, m_mu, 1.9e5)
    assert e_proc == pytest.approx(52.2e6)
    # first law closes: 320 + 1 - 100 - 168.8 - 0 - 52.2 = 0 MW
    assert energy_imbalance(q_in, 1e6, shaft, q_c, 0.0, e_proc) == pytest.approx(0.0, abs=1e-3)
    # heat chargeable to power: 320 - 52.2 = 267.8 MW; without process steam the two
    # heat rates agree
    assert heat_chargeable_to_power(q_in, e_proc) == pytest.approx(267.8e6)
    assert heat_rate(heat_chargeable_to_power(q_in, 0.0), 100e6) == heat_rate(q_in, 100e6)
    # drains cascaded to the condenser add their enthalpy: 5 kg/s at 400 kJ/kg
    assert condenser_duty(0.0, 5.0, 4.0e5, 0.0, 5.0, 1.9e5) == pytest.approx(5.0 * 2.1e5)


def test_point_totals_follow_the_performance_definitions(industrial_model):
    # identity: a solved point of the demo unit with process steam reports the
    # heat rate, heat rate chargeable to power, steam rate and first-law check as
    # defined in physics.performance
    from partload.plant.case import Conditions
    from partload.solve.point import solve_point

    model = industrial_model
    r = solve_point(model, Conditions(throttle_flow=0.8 * model.throttle.flow))
    t = r.totals
    P = t["generator_output"]
    assert t["heat_rate"] == pytest.approx(heat_rate(t["heat_added"], P), rel=1e-12)
    assert t["steam_rate"] == pytest.approx(steam_rate(t["throttle_flow"], P), rel=1e-12)
    assert t["process_steam_energy"] > 0.0
    assert t["heat_rate_power"] == pytest.approx(
        heat_rate(heat_chargeable_to_power(t["heat_added"], t["process_steam_energy"]), P),
        rel=1e-12)
    assert t["heat_rate_power"] < t["heat_rate"]
    imbalance = energy_imbalance(t["heat_added"], t["pump_power"], t["shaft_power"],
                                 t["condenser_duty"], t["heater_heat_loss"],
                                 t["process_steam_energy"])
    assert imbalance == pytest.approx(t["energy_imbalance"], abs=1.0)
    assert abs(imbalance) < 1e-6 * t["heat_added"]


def test_moisture_lever_rule_hand_values():
    # hand calculation at 6.8 kPa (h' = 161.1, h'' = 2570.8 kJ/kg, IF97 from memory):
    # h = 2330 kJ/kg is (2570.8 - 2330) / (2570.8 - 161.1) = 0.09993 moist
    assert moisture_from_enthalpy(2.33e6, 161.1e3, 2570.8e3) == pytest.approx(
        240.8 / 2409.7, rel=1e-12)
    assert moisture_from_enthalpy(161.1e3, 161.1e3, 2570.8e3) == 1.0
    assert moisture_from_enthalpy(2.6e6, 161.1e3, 2570.8e3) == 0.0
    # a superheated state needs no liquid enthalpy
    assert moisture_from_enthalpy(2.9e6, math.nan, 2570.8e3) == 0.0


def test_heater_shell_pressure_hand_value():
    # hand calculation: 3 % line drop from 20 bar leaves 19.4 bar
    assert heater_shell_pressure(20e5, 0.03) == pytest.approx(19.4e5)
