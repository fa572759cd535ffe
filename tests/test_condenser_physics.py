"""Condenser laws (simulator.physics.condenser) and liquid-water properties
(simulator.steam.transport), each against a published value, an identity or an
independent correlation."""

import math

import pytest
from partload.physics.condenser import (
    condensing_temperature,
    cooling_water_rise,
    dittus_boelter,
    lmtd,
    ntu,
    rest_resistance,
    tube_coefficient,
)
from partload.steam.transport import WaterTable, water_properties


def test_water_properties_at_25_degC():
    # liquid water at 25 degC and 0.1 MPa: density 997.05 kg/m^3, cp 4.1813 kJ/(kg K)
    # (IAPWS-IF97 tables, Wagner & Kretzschmar, International Steam Tables, 2008),
    # viscosity 890.0 uPa s (IAPWS R12-08) and conductivity 0.6072 W/(m K) (IAPWS R15-11);
    # quoted from memory of those tables, hence the tolerances
    rho, cp, mu, k = water_properties(298.15, 1e5)
    assert rho == pytest.approx(997.05, rel=2e-4)
    assert cp == pytest.approx(4181.3, rel=1e-3)
    assert mu == pytest.approx(890.0e-6, rel=3e-3)
    assert k == pytest.approx(0.6072, rel=3e-3)


def test_water_table_interpolates_within_1e4():
    table = WaterTable(p=3e5)
    for T in (275.0, 291.37, 303.71, 318.2, 340.05):
        exact = water_properties(T, 3e5)
        for a, b in zip(table(T), exact):
            assert a == pytest.approx(b, rel=1e-4)


def test_condenser_energy_identity():
    # identity: with T_s from the effectiveness, UA * LMTD is the duty m cp dT
    m_w, cp, ua, T_in, duty = 12000.0, 4180.0, 60e6, 293.15, 400e6
    rise = cooling_water_rise(duty, m_w, cp)
    T_s = condensing_temperature(T_in, rise, ntu(ua, m_w, cp))
    assert ua * lmtd(T_s, T_in, T_in + rise) == pytest.approx(duty, rel=1e-12)
    # hand calculation: rise = 400e6 / (12000 * 4180) = 7.974 K; NTU = 1.196;
    # T_s - T_in = 7.974 / (1 - exp(-1.196)) = 7.974 / 0.6976 = 11.43 K
    assert rise == pytest.approx(7.9745, rel=1e-4)
    assert T_s - T_in == pytest.approx(11.43, abs=0.01)


def _gnielinski(rho, cp, mu, k, v, d):
    # V. Gnielinski, Int. Chem. Eng. 16, 359-368, 1976 (Incropera et al., eq. 8.62), with
    # Petukhov's smooth-tube friction factor (eq. 8.21): an independent correlation
    re = rho * v * d / mu
    pr = cp * mu / k
    f = (0.790 * math.log(re) - 1.64) ** -2
    nu = (f / 8) * (re - 1000) * pr / (1 + 12.7 * math.sqrt(f / 8) * (pr ** (2 / 3) - 1))
    return nu * k / d


@pytest.mark.parametrize("T, v", [(288.15, 1.5), (298.15, 2.0), (308.15, 2.5)])
def test_dittus_boelter_against_gnielinski(T, v):
    # the two correlations agree within about 15 % for water in condenser tubes
    # (Re 3e4-1e5, Pr 4-8; Incropera et al. quote errors of up to 25 % and 10 %)
    props = water_properties(T, 3e5)
    d = 0.0229  # [m] inner diameter of a 25.4 mm tube, 1.25 mm wall
    h1 = dittus_boelter(*props, v, d)
    h2 = _gnielinski(*props, v, d)
    assert abs(h1 / h2 - 1) < 0.15
    assert 5000 < h1 < 20000  # W/(m^2 K): the range of condenser water films (common practice)


def test_tube_resistances_identity():
    h_w, d_o, d_i = 9000.0, 0.0254, 0.0229
    r = rest_resistance(3000.0, h_w, d_o, d_i)
    assert r > 0
    assert tube_coefficient(h_w, d_o, d_i, r) == pytest.approx(3000.0, rel=1e-14)
    # a faster water film raises the overall coefficient, less than in proportion
    assert 3000.0 < tube_coefficient(2 * h_w, d_o, d_i, r) < 6000.0
