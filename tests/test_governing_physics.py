"""The laws of nozzle-group governing (simulator.physics.governing), each against a
published value, a closed form or an identity."""

import math

import pytest
from partload.physics.governing import (
    critical_ratio,
    flow_function,
    governing_efficiency,
    mean_isentropic_exponent,
    nozzle_flux,
    peak_efficiency,
    solve_increasing,
    valve_openings,
)
from partload.steam.if97 import get_backend


@pytest.mark.parametrize("kappa, ratio", [
    (1.4, 0.5283),   # Cengel & Boles, Thermodynamics, ch. 17, table of critical ratios (k = 1.4)
    (1.3, 0.5457),   # superheated steam, the textbook value (common practice, no source)
    (1.135, 0.5774),  # wet steam, the textbook value (common practice, no source)
])
def test_critical_ratio(kappa, ratio):
    assert critical_ratio(kappa) == pytest.approx(ratio, abs=1e-4)


@pytest.mark.parametrize("kappa", [1.135, 1.3, 1.4])
def test_choked_flow_function_closed_form(kappa):
    # choked flow per throat area, p0 sqrt(k/(R T0)) (2/(k+1))^((k+1)/(2(k-1))) for an ideal
    # gas (Cengel & Boles, ch. 17); with p0 v0 = R T0 that is sqrt(p0/v0) times
    # sqrt(k) (2/(k+1))^((k+1)/(2(k-1)))
    closed = math.sqrt(kappa) * (2 / (kappa + 1)) ** ((kappa + 1) / (2 * (kappa - 1)))
    assert flow_function(critical_ratio(kappa), kappa) == pytest.approx(closed, rel=1e-12)
    assert flow_function(0.1, kappa) == flow_function(critical_ratio(kappa), kappa)


def test_choked_flow_proportional_to_p_over_sqrt_pv():
    # textbook nozzle theory (Cengel & Boles, ch. 17): a choked nozzle passes
    # m ~ p0 / sqrt(p0 v0), whatever the back pressure
    k = 1.3
    base = nozzle_flux(100e5, 0.03, 30e5, k)
    assert nozzle_flux(200e5, 0.015, 30e5, k) == pytest.approx(2 * base, rel=1e-12)
    assert nozzle_flux(100e5, 0.03, 10e5, k) == pytest.approx(base, rel=1e-12)
    # above the critical ratio the flow falls to zero at no pressure difference
    assert nozzle_flux(100e5, 0.03, 80e5, k) < base
    assert nozzle_flux(100e5, 0.03, 100e5, k) == 0.0


def test_ellipse_law_matches_stodola():
    # the "ellipse" nozzle law is Stodola's ellipse (simulator.physics.ellipse), per unit constant
    from partload.physics.ellipse import ellipse_flow
    assert nozzle_flux(90e5, 0.035, 60e5, 1.3, law="ellipse") == pytest.approx(
        ellipse_flow(90e5, 60e5, 0.035, 1.0), rel=1e-14)


def test_real_steam_exponent_of_superheated_steam():
    # superheated steam expands nearly as p v^1.3 (common practice, no source; the
    # textbook value of kappa for superheated steam)
    steam = get_backend()
    p0, T0 = 160e5, 535 + 273.15
    h0, s0 = steam.h_pT(p0, T0), steam.s_pT(p0, T0)
    v0 = steam.v_pT(p0, T0)
    p1 = 0.55 * p0
    v1 = steam.v_ph(p1, steam.h_ps(p1, s0))
    kappa = mean_isentropic_exponent(p0, v0, p1, v1)
    assert 1.25 < kappa < 1.33
    assert h0 > 0


def test_valve_openings_sequence():
    arcs = [0.3, 0.3, 0.2, 0.2]
    # identity: the openings pass the flow asked
    for f in (0.05, 0.3, 0.45, 0.6, 0.7, 0.95):
        o = valve_openings(f, arcs, 0.0)
        assert sum(a * x for a, x in zip(arcs, o)) == pytest.approx(f, rel=1e-12)
        # in sequence: a valve opens only when the one before is fully open
        for k in range(1, 4):
            assert o[k] == 0.0 or o[k - 1] == pytest.approx(1.0)
    # at a valve point the valves before it are fully open, the rest closed
    assert valve_openings(0.6, arcs, 0.0) == pytest.approx([1, 1, 0, 0])
    assert valve_openings(1.2, arcs, 0.0) == [1.0] * 4
    assert valve_openings(0.0, arcs, 0.0) == [0.0] * 4


def test_valve_openings_overlap():
    arcs = [0.5, 0.5]
    # 20 % overlap: the second valve starts when the first is at 80 %
    # hand calculation: 0.5 s + 0.5 (s - 0.8) = 0.45 gives s = 0.85
    assert valve_openings(0.45, arcs, 0.2) == pytest.approx([0.85, 0.05], rel=1e-12)
    assert valve_openings(0.39, arcs, 0.2) == pytest.approx([0.78, 0.0], rel=1e-12)
    o = valve_openings(0.5 * 0.8 + 0.5 * 0.1 + 0.5 * 0.1, arcs, 0.2)
    assert o == pytest.approx([0.9, 0.1])
    assert sum(a * x for a, x in zip(arcs, o)) == pytest.approx(0.5, rel=1e-12)


def test_efficiency_parabola_and_calibration():
    # impulse stage: 2 r - r^2 with its maximum 1 at r = 1 (Dixon & Hall, ch. 4)
    assert governing_efficiency(1.0, 0.8, 1.0, 0.03) == pytest.approx(0.8)
    assert governing_efficiency(0.8, 0.8, 1.0, 0.0) == pytest.approx(0.8 * (1.6 - 0.64))
    # partial admission costs efficiency, more the smaller the arc
    full = governing_efficiency(1.0, 0.8, 1.0, 0.03)
    half = governing_efficiency(1.0, 0.8, 0.5, 0.03)
    quarter = governing_efficiency(1.0, 0.8, 0.25, 0.03)
    assert full > half > quarter
    assert half == pytest.approx(0.8 - 0.03)  # K (1 - 0.5)/0.5
    # the calibration inverts it (identity)
    for r, eps in ((1.0, 0.6), (0.9, 0.3), (1.2, 1.0)):
        peak = peak_efficiency(0.7, r, eps, 0.03)
        assert governing_efficiency(r, peak, eps, 0.03) == pytest.approx(0.7, rel=1e-14)
    assert governing_efficiency(3.0, 0.8, 0.5, 0.03) == 0.0


def test_solve_increasing():
    x = solve_increasing(lambda t: t ** 3 + t, 10.0, 0.0, 5.0)
    assert x ** 3 + x == pytest.approx(10.0, rel=1e-13)  # x = 2
    assert x == pytest.approx(2.0, rel=1e-13)
    assert solve_increasing(lambda t: t, -1.0, 0.0, 1.0) == 0.0
