"""Feedwater heaters and pumps.

Closed (shell-and-tube) heater
    Shell pressure is the extraction pressure less the extraction-line drop
    (3-5 % is common practice).  Feedwater leaves at the shell saturation
    temperature less the terminal temperature difference (TTD); the drain
    leaves at the feedwater inlet temperature plus the drain-cooler approach
    (DCA), or saturated at shell pressure when there is no drain cooler.

    .. math::  T_{fw,out} = T_{sat}(p_{shell}) - TTD, \\quad T_{drain} = T_{fw,in} + DCA

    Energy balance (closure factor ``f`` = 1 for a consistent heat balance):

    .. math::  f \\left[ m_b (h_b - h_d) + \\sum m_{d,in} (h_{d,in} - h_d) \\right]
               = m_{fw} (h_{fw,out} - h_{fw,in})

    Reference: common practice; definitions of TTD and DCA as in
    HEI, *Standards for Closed Feedwater Heaters*, Heat Exchange Institute.

Off-design TTD
    Constant by default.  Alternatively the condensing zone is treated as a
    heat exchanger with one fluid at constant temperature, whose effectiveness
    is ``eps = 1 - exp(-NTU)``, ``NTU = UA / (m c_p)`` (F. P. Incropera et al.,
    *Fundamentals of Heat and Mass Transfer*, 6th ed., Wiley, 2007, eq. 11.35a,
    ``C_r = 0``); UA is kept at its design value.

Pump
    .. math::  \\Delta h = v \\Delta p / \\eta

    the isentropic work of an incompressible liquid divided by the pump
    efficiency (any thermodynamics text, e.g. Y. A. Cengel and M. A. Boles,
    *Thermodynamics: An Engineering Approach*, 8th ed., McGraw-Hill, 2015,
    eq. 10-3).
"""

from __future__ import annotations

import math

__all__ = ["closed_heater_outlet_temperature", "effectiveness_ttd", "design_ua",
           "pump_enthalpy_rise"]


def closed_heater_outlet_temperature(T_sat: float, ttd: float) -> float:
    """Feedwater outlet temperature [K] from shell saturation temperature [K] and TTD [K]."""
    return T_sat - ttd


def design_ua(T_sat: float, T_in: float, T_out: float, m_water: float, cp: float) -> float:
    """UA [W/K] of a condensing zone that heats ``m_water`` [kg/s] from ``T_in`` to
    ``T_out`` [K] with the shell at ``T_sat`` [K]; ``cp`` [J/(kg K)].

    Needs ``T_in < T_out < T_sat`` (a positive TTD).
    """
    eps = (T_out - T_in) / (T_sat - T_in)
    if not 0.0 < eps < 1.0:
        raise ValueError("the effectiveness method needs T_in < T_out < T_sat")
    return -m_water * cp * math.log(1.0 - eps)


def effectiveness_ttd(T_sat: float, T_in: float, m_water: float, ua: float, cp: float) -> float:
    """TTD [K] of a condensing zone with fixed UA [W/K] at water flow ``m_water`` [kg/s].

    ``TTD = (T_sat - T_in) exp(-UA / (m c_p))``, from ``eps = 1 - exp(-NTU)``.
    """
    if m_water <= 0.0:
        return 0.0
    return (T_sat - T_in) * math.exp(-ua / (m_water * cp))


def pump_enthalpy_rise(v: float, p_in: float, p_out: float, eta: float) -> float:
    """Enthalpy rise [J/kg] of a liquid of specific volume ``v`` [m^3/kg] pumped
    from ``p_in`` to ``p_out`` [Pa] with efficiency ``eta`` [-]."""
    return v * (p_out - p_in) / eta
