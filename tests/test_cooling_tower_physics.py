"""Wet cooling tower (simulator.physics.cooling_tower) against IAPWS-IF97's
verification values, a psychrometric table, direct integration and identities."""

import pytest
from partload.physics.cooling_tower import (
    CP_WATER,
    cold_water_temperature,
    merkel_number,
    saturated_air_enthalpy,
    saturation_pressure,
)
from scipy.integrate import quad


@pytest.mark.parametrize("T, p_mpa", [(300.0, 0.353658941e-2), (500.0, 0.263889776e1),
                                      (600.0, 0.123443146e2)])
def test_saturation_pressure_if97_verification(T, p_mpa):
    # IAPWS R7-97(2012), table 35: computer-program verification values of eq. 30
    assert saturation_pressure(T) == pytest.approx(p_mpa * 1e6, rel=1e-8)


def test_saturated_air_enthalpy_at_20_degC():
    # ASHRAE Handbook Fundamentals 2017, ch. 1, table 2 (moist air at 101.325 kPa):
    # saturated air at 20 degC holds W = 0.014758 and h = 57.55 kJ/kg dry air (from memory)
    assert saturated_air_enthalpy(293.15, 101325.0) == pytest.approx(57550.0, rel=3e-3)


def test_chebyshev_rule_against_direct_integration():
    # Merkel's integral by the four-point rule against scipy's adaptive quadrature
    T_c, T_h, T_wb, lg, p = 300.15, 310.15, 293.15, 1.2, 101325.0
    h_in = saturated_air_enthalpy(T_wb, p)

    def integrand(T):
        return CP_WATER / (saturated_air_enthalpy(T, p) - (h_in + lg * CP_WATER * (T - T_c)))

    exact, _ = quad(integrand, T_c, T_h)
    assert merkel_number(T_c, T_h, T_wb, lg, p) == pytest.approx(exact, rel=0.01)


def test_cold_water_inverts_the_merkel_number():
    p, lg, T_wb, rng = 101325.0, 1.1, 290.15, 9.0
    need = merkel_number(297.15, 297.15 + rng, T_wb, lg, p)  # a 7 K approach
    T_c = cold_water_temperature(T_wb, rng, need, lg, p)
    assert T_c == pytest.approx(297.15, abs=1e-8)
    # common practice: a hotter day (higher wet bulb) gives warmer cold water, by less
    # than the wet bulb rose (the approach shrinks)
    T_c2 = cold_water_temperature(T_wb + 5.0, rng, need, lg, p)
    assert T_c < T_c2 < T_c + 5.0


def test_cold_water_continuous_in_the_wet_bulb():
    # no jumps: over a fine grid of wet bulbs the cold water changes smoothly (a first
    # version skipped past the root when the air saturated at small approaches)
    import numpy as np
    p, lg, rng = 101325.0, 1.2, 8.0
    need = merkel_number(297.15, 297.15 + rng, 291.15, lg, p)
    wb = np.linspace(268.15, 303.15, 351)
    tc = np.array([cold_water_temperature(t, rng, need, lg, p) for t in wb])
    step = np.diff(tc)
    assert np.all(step > 0) and np.all(step < 0.1)  # 0.1 K wet-bulb steps
    assert np.max(np.abs(np.diff(step))) < 2e-3


def test_cold_water_from_a_start_inverts_the_merkel_number():
    # the secant from a start (as a condenser searches from its design approach) and the
    # bracketed search find the same cold water, whose Merkel number is the tower's
    # (identity), also in winter, where the air saturates at the design approach
    import numpy as np
    p, lg = 101325.0, 1.2
    need = merkel_number(297.15, 297.15 + 8.0, 291.15, lg, p)
    for T_wb in np.linspace(258.15, 303.15, 10):
        for rng in (2.0, 5.0, 8.0, 12.0):
            T_c = cold_water_temperature(T_wb, rng, need, lg, p, start=6.0)
            assert T_c == pytest.approx(cold_water_temperature(T_wb, rng, need, lg, p),
                                        abs=1e-9)
            assert merkel_number(T_c, T_c + rng, T_wb, lg, p) == pytest.approx(need, rel=1e-9)


@pytest.mark.parametrize("T_wb, rng, merkel, lg, start", [
    # found by a random search over wet bulbs 250-310 K, ranges 0.5-20 K, L/G 0.3-3
    # and Merkel numbers 0.3-5: the secant's second step, along a nearly flat
    # stretch, left for approaches of 1e4-1e10 K and the saturation pressure's
    # equation failed (math domain error) on the way back
    (292.87952376813365, 16.857931688740717, 0.3694139687667729, 0.30822164710710664,
     0.17736007886971109),
    (304.8568177457543, 15.52044377722564, 0.32370493234567804, 0.42262962487876404,
     0.1044337800530305),
    (283.60465815782464, 14.106287250224323, 0.8677369295805799, 0.3619021850646375,
     0.05990557814279719),
    # the same search with starts of 58-104 K: a start moved (or a step taken) to
    # water far above boiling, where the saturation pressure's equation fails
    (309.5526047305639, 11.930425491512036, 0.7649348559371336, 0.3962882672371416,
     60.06374981666062),
    (307.4269768876136, 0.5106418116542676, 3.0173864815110396, 1.8229572632639008,
     90.43746580588012),
    (309.44294024094415, 7.904244896406883, 0.7970587713831243, 0.579019536026958,
     58.031607369514184),
])
def test_cold_water_from_an_extreme_start_equals_the_bracketed_search(T_wb, rng, merkel, lg,
                                                                      start):
    p = 101325.0
    T_c = cold_water_temperature(T_wb, rng, merkel, lg, p, start=start)
    # identity: the same answer as the bracketed search, and the tower's Merkel number
    assert T_c == pytest.approx(cold_water_temperature(T_wb, rng, merkel, lg, p), abs=1e-9)
    assert merkel_number(T_c, T_c + rng, T_wb, lg, p) == pytest.approx(merkel, rel=1e-9)
