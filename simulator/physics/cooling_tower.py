"""Wet cooling tower: the cold-water temperature from the wet-bulb temperature.

Merkel's theory (F. Merkel, "Verdunstungskuehlung", VDI-Forschungsheft 275,
1925) treats the heat and mass transfer between water and air as one enthalpy
driving force; the tower's characteristic is the Merkel number

.. math::  \\frac{K a V}{L} = \\int_{T_c}^{T_h} \\frac{c_{p,w}\\,dT}{h_s(T) - h_a(T)}

with ``h_s`` the enthalpy of saturated air at the water temperature and
``h_a`` that of the air, which rises along the tower by the water's heat,
``h_a = h_{a,in} + (L/G) c_{p,w} (T - T_c)``; the inlet air enthalpy is that of
saturated air at the wet-bulb temperature.  The integral is evaluated by the
four-point Chebyshev rule at 10, 40, 60 and 90 % of the range, as the Cooling
Technology Institute's acceptance code and the ASHRAE Handbook (HVAC Systems
and Equipment, ch. "Cooling Towers") use it (from memory).  A tower's
characteristic at other water-to-air ratios follows ``KaV/L = C (L/G)^-n``
(the same sources; ``n`` is typically 0.5-0.8, common practice).

Moist-air enthalpy per kilogram of dry air, ``h = 1006 t + W (2501000 + 1860 t)``
J/kg with ``t`` in degC and humidity ratio ``W = 0.621945 p_ws / (p - p_ws)``
(ASHRAE Handbook, Fundamentals, 2017, ch. 1, eqs. 20 and 32; from memory);
the saturation pressure ``p_ws`` of water from IAPWS-IF97's region-4 equation
(IAPWS R7-97(2012), eq. 30).
"""

from __future__ import annotations

import math

from .governing import solve_increasing

__all__ = ["saturation_pressure", "saturated_air_enthalpy", "merkel_number",
           "cold_water_temperature", "CP_WATER"]

_MAX_LOG_STEP = 2.0  # [-] largest change of the approach's logarithm in one secant step
CP_WATER = 4186.0  # [J/(kg K)] water heat capacity in Merkel's integral (common practice)

# IAPWS-IF97 region 4 coefficients n1..n10 (IAPWS R7-97(2012), table 34)
_N = (0.11670521452767e4, -0.72421316703206e6, -0.17073846940092e2, 0.12020824702470e5,
      -0.32325550322333e7, 0.14915108613530e2, -0.48232657361591e4, 0.40511340542057e6,
      -0.23855557567849, 0.65017534844798e3)


def saturation_pressure(T: float) -> float:
    """Saturation pressure [Pa] of water at ``T`` [K] (IAPWS-IF97 eq. 30, 273.15-647.096 K)."""
    n = _N
    th = T + n[8] / (T - n[9])
    A = th * th + n[0] * th + n[1]
    B = n[2] * th * th + n[3] * th + n[4]
    C = n[5] * th * th + n[6] * th + n[7]
    return (2.0 * C / (-B + math.sqrt(B * B - 4.0 * A * C))) ** 4 * 1e6


def saturated_air_enthalpy(T: float, p: float) -> float:
    """Enthalpy [J/kg dry air] of air saturated with water vapour at ``T`` [K] and
    total pressure ``p`` [Pa] (reference: dry air and liquid water at 0 degC)."""
    p_ws = saturation_pressure(T)
    W = 0.621945 * p_ws / (p - p_ws)
    t = T - 273.15
    return 1006.0 * t + W * (2501000.0 + 1860.0 * t)


def merkel_number(T_cold: float, T_hot: float, T_wet_bulb: float, l_over_g: float,
                  p: float) -> float:
    """Merkel number ``KaV/L`` [-] a tower needs to cool water from ``T_hot`` to
    ``T_cold`` [K] with air entering at wet bulb ``T_wet_bulb`` [K], water-to-air
    mass ratio ``l_over_g`` [-] at pressure ``p`` [Pa] (four-point Chebyshev rule).
    Infinite where the air would reach the water's saturation enthalpy."""
    rng = T_hot - T_cold
    h_in = saturated_air_enthalpy(T_wet_bulb, p)
    total = 0.0
    for f in (0.1, 0.4, 0.6, 0.9):
        T = T_cold + f * rng
        drive = saturated_air_enthalpy(T, p) - (h_in + l_over_g * CP_WATER * (T - T_cold))
        if drive <= 0.0:
            return math.inf
        total += 1.0 / drive
    return CP_WATER * rng / 4.0 * total


def cold_water_temperature(T_wet_bulb: float, rng: float, merkel: float, l_over_g: float,
                           p: float, start: float | None = None) -> float:
    """Cold-water temperature [K] of a tower with characteristic ``merkel`` [-] at
    wet bulb ``T_wet_bulb`` [K], range ``rng`` [K], ratio ``l_over_g`` [-] and air
    pressure ``p`` [Pa]: where the Merkel number the duty needs equals the tower's
    (it falls as the approach grows).

    ``start`` [K] is an approach to start from: the secant method from there on
    the logarithms of the Merkel number and of the approach (the number falls
    roughly as a power of the approach, so the two logarithms are nearly in a
    straight line: four to six Merkel numbers from the design approach), a start
    or a step at which the air would saturate on the way moved to a larger
    approach or halved back; the bracketed search when it does not settle
    within twelve steps."""
    def needed_minus(approach):
        return -merkel_number(T_wet_bulb + approach, T_wet_bulb + approach + rng, T_wet_bulb,
                              l_over_g, p)
    if start is not None and start > 0.0:
        log_merkel = math.log(merkel)

        def g(u):  # log of the number needed at approach e^u, less the tower's
            try:
                n = -needed_minus(math.exp(u))
            except ValueError:  # water far above boiling: beyond IF97 eq. 30's range
                return math.inf  # (as where the air saturates: back to a smaller step)
            if not 0.0 < n < math.inf:  # saturated on the way (or no range): no log
                return math.inf if n > 0.0 else -math.inf
            return math.log(n) - log_merkel

        u0 = math.log(start)
        f0 = g(u0)
        for _ in range(8):  # the air would saturate on the way: a larger approach
            if f0 != math.inf:
                break
            u0 += 0.4
            f0 = g(u0)
        u1 = u0 + 1e-4
        f1 = g(u1)
        for _ in range(12):
            if not (math.isfinite(f0) and math.isfinite(f1)) or f1 == f0:
                break
            u2 = u1 - f1 * (u1 - u0) / (f1 - f0)
            # a step along a nearly flat stretch can leave for approaches of thousands
            # of kelvin, beyond the saturation pressure's range (a math domain
            # error there): at most a factor e^2 of the approach a step
            u2 = min(max(u2, u1 - _MAX_LOG_STEP), u1 + _MAX_LOG_STEP)
            if abs(math.exp(u2) - math.exp(u1)) <= 1e-12 * (T_wet_bulb + math.exp(u2)):
                return T_wet_bulb + math.exp(u2)
            f2 = g(u2)
            for _ in range(30):  # beyond saturation: back toward the last finite point
                if math.isfinite(f2):
                    break
                u2 = 0.5 * (u1 + u2)
                f2 = g(u2)
            u0, f0, u1, f1 = u1, f1, u2, f2
    hi = 5.0
    while needed_minus(hi) < -merkel and hi < 80.0:
        hi *= 2.0
    # -needed rises with the approach and is -inf below the approach at which the air
    # would saturate on the way: bisect to a finite lower bracket below the answer
    lo = 0.0
    top = hi
    for _ in range(200):
        mid = 0.5 * (lo + top)
        v = needed_minus(mid)
        if not math.isfinite(v):
            lo = mid
        elif v < -merkel:
            lo = mid
            break
        else:
            top = mid
    return T_wet_bulb + solve_increasing(needed_minus, -merkel, lo, hi, rtol=1e-13)
