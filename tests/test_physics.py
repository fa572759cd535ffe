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
from partload.physics.expansion import dry_expansion_end, expansion_end
from partload.physics.generator import generator_output
from partload.physics.heater import design_ua, effectiveness_ttd, pump_enthalpy_rise
from partload.physics.pressure_drop import scaled_pressure_drop
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
