"""Surface condenser: condensing pressure from the cooling water.

Exhaust steam condenses on the outside of tubes through which cooling water
flows.  With the condensing temperature ``T_s`` uniform in the shell, the water
heats from ``T_in`` to ``T_out`` and the heat-exchanger effectiveness of a
condenser (one stream at constant temperature) gives

.. math::  T_s = T_{in} + \\frac{\\Delta T}{1 - e^{-NTU}}, \\quad
           \\Delta T = \\frac{Q}{\\dot m_w c_p}, \\quad NTU = \\frac{U A}{\\dot m_w c_p}

(F. P. Incropera, D. P. DeWitt, T. L. Bergman and A. S. Lavine, *Fundamentals of
Heat and Mass Transfer*, 6th ed., Wiley, 2007, eq. 11.35a, effectiveness with
``C_r = 0``); the condenser pressure is the saturation pressure at ``T_s``.
The terminal temperature difference is ``TTD = T_s - T_out``.

The Heat Exchange Institute's *Standards for Steam Surface Condensers* define
the trade's method: an overall coefficient proportional to the square root of
the water velocity, times factors for inlet water temperature, tube material
and gauge, and a cleanliness factor.  Its temperature and material tables are
not in the open literature, so two documented alternatives are offered:

``"tube_resistances"``
    Series resistances referred to the outer tube area,
    ``1/U = (d_o/d_i)/h_w + R_rest``, with the water-side coefficient from
    Dittus-Boelter, ``Nu = 0.023 Re^0.8 Pr^0.4`` (Incropera et al., eq. 8.60;
    valid for Re > 10,000 and 0.6 < Pr < 160) and liquid-water properties at
    the mean water temperature; ``R_rest`` (condensing film, wall, fouling at
    design) is fixed at design.  It follows velocity and water temperature
    through the physics of the water film.
``"sqrt_velocity"``
    ``U / U_d = sqrt(V / V_d)``: the velocity dependence of the HEI method
    alone, no temperature correction (for a condenser with no tube data).

Both are multiplied by the cleanliness factor over its design value.
"""

from __future__ import annotations

import math

__all__ = ["cooling_water_rise", "ntu", "condensing_temperature", "lmtd",
           "dittus_boelter", "tube_coefficient", "rest_resistance", "HEAT_TRANSFER_LAWS"]

HEAT_TRANSFER_LAWS = ("tube_resistances", "sqrt_velocity")


def cooling_water_rise(duty: float, m_w: float, cp: float) -> float:
    """Temperature rise [K] of cooling water ``m_w`` [kg/s] with heat capacity ``cp``
    [J/(kg K)] taking ``duty`` [W]."""
    return duty / (m_w * cp)


def ntu(ua: float, m_w: float, cp: float) -> float:
    """Number of transfer units [-] of a condenser with ``ua`` [W/K]."""
    return ua / (m_w * cp)


def condensing_temperature(T_in: float, rise: float, n_tu: float) -> float:
    """Condensing temperature [K] from the water inlet ``T_in`` [K], its ``rise`` [K]
    and the number of transfer units ``n_tu`` [-] (effectiveness ``1 - exp(-NTU)``)."""
    return T_in + rise / -math.expm1(-n_tu)


def lmtd(T_s: float, T_in: float, T_out: float) -> float:
    """Log-mean temperature difference [K] of a condenser at ``T_s`` [K] heating
    water from ``T_in`` to ``T_out`` [K]."""
    return (T_out - T_in) / math.log((T_s - T_in) / (T_s - T_out))


def dittus_boelter(rho: float, cp: float, mu: float, k: float, velocity: float,
                   d_i: float) -> float:
    """Water-side heat-transfer coefficient [W/(m^2 K)] of turbulent flow in a tube:
    ``Nu = 0.023 Re^0.8 Pr^0.4`` (heating).

    Parameters
    ----------
    rho : density [kg/m^3]
    cp : isobaric heat capacity [J/(kg K)]
    mu : dynamic viscosity [Pa s]
    k : thermal conductivity [W/(m K)]
    velocity : mean water velocity in the tube [m/s]
    d_i : tube inner diameter [m]
    """
    re = rho * velocity * d_i / mu
    pr = cp * mu / k
    return 0.023 * re ** 0.8 * pr ** 0.4 * k / d_i


def tube_coefficient(h_w: float, d_o: float, d_i: float, r_rest: float) -> float:
    """Overall coefficient [W/(m^2 K)] referred to the outer tube area: water film
    ``h_w`` [W/(m^2 K)] inside a tube of diameters ``d_o``, ``d_i`` [m] in series
    with the other resistances ``r_rest`` [m^2 K/W]."""
    return 1.0 / (d_o / (d_i * h_w) + r_rest)


def rest_resistance(u_clean: float, h_w: float, d_o: float, d_i: float) -> float:
    """The resistance [m^2 K/W] besides the water film that gives the overall
    coefficient ``u_clean`` [W/(m^2 K)] (the inverse of :func:`tube_coefficient`)."""
    return 1.0 / u_clean - d_o / (d_i * h_w)
