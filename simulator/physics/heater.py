"""Feedwater heaters: closed (shell and tube) heaters and the deaerator.

Closed (shell-and-tube) heater
    Shell pressure is the extraction pressure less the extraction-line drop
    (3-5 % is common practice).  Feedwater leaves at the shell saturation
    temperature less the terminal temperature difference (TTD); the drain
    leaves at the feedwater inlet temperature plus the drain-cooler approach
    (DCA), or saturated at shell pressure when there is no drain cooler.

    .. math::  T_{fw,out} = T_{sat}(p_{shell}) - TTD, \\quad T_{drain} = T_{fw,in} + DCA

    Energy balance (closure factor ``f`` = 1 for a consistent heat balance):
    the bleed and the drains cascaded in from heaters above give up their heat
    down to this heater's drain enthalpy,

    .. math::  f \\left[ m_b (h_b - h_d) + \\sum m_{d,in} (h_{d,in} - h_d) \\right]
               = m_{fw} (h_{fw,out} - h_{fw,in})

    Assumptions: no heat lost to the surroundings; the feedwater's pressure
    drop through the tubes neglected.

    Reference: common practice; definitions of TTD and DCA as in
    HEI, *Standards for Closed Feedwater Heaters*, Heat Exchange Institute
    (edition not checked; from memory).

Deaerator (open heater)
    Bleed, drains and feedwater mix at shell pressure; the water leaves as
    saturated liquid.  Its balance is the one above with the drain enthalpy
    replaced by the outlet enthalpy, which is the mixing balance
    ``m_fw,in h_fw,in + m_b h_b + sum m_d h_d = m_fw,out h_sat,liq``.

Off-design TTD
    Constant by default.  Alternatively the condensing zone is treated as a
    heat exchanger with one fluid at constant temperature, whose effectiveness
    is ``eps = 1 - exp(-NTU)``, ``NTU = UA / (m c_p)`` (F. P. Incropera et al.,
    *Fundamentals of Heat and Mass Transfer*, 6th ed., Wiley, 2007, eq. 11.35a,
    ``C_r = 0``); UA is kept at its design value.

Pumps are in :mod:`simulator.physics.pump`; mixing of streams and the boiler
pressure drop in :mod:`simulator.physics.feedwater`.
"""

from __future__ import annotations

import math
from collections.abc import Sequence

from .pump import pump_enthalpy_rise  # the one pump law, re-exported here

__all__ = ["heater_shell_pressure", "closed_heater_outlet_temperature", "effectiveness_ttd",
           "design_ua",
           "drain_outlet_temperature", "drain_outlet_enthalpy", "deaerator_outlet_enthalpy",
           "feedwater_duty", "steam_release", "heater_balance_residual",
           "pump_enthalpy_rise"]


def heater_shell_pressure(p_extraction: float, line_drop: float) -> float:
    """Heater shell pressure: extraction pressure less the extraction-line drop.

    .. math::  p_{shell} = p_{ext} (1 - \\delta)

    Parameters
    ----------
    p_extraction : pressure at the turbine's extraction point [Pa]
    line_drop : line pressure drop as a fraction of the extraction pressure [-]
        (3-5 % is common practice, no source)

    Returns
    -------
    float
        Shell pressure [Pa].  The fraction is held at its design value off
        design (the drop itself scales with the pressure, not with the flow
        squared: a simplification, common practice, no source).
    """
    return p_extraction * (1.0 - line_drop)


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


def drain_outlet_temperature(T_sat: float, T_fw_in: float, dca: float | None) -> float:
    """Drain outlet temperature of a closed heater.

    .. math::  T_{drain} = \\min(T_{fw,in} + DCA, T_{sat})

    Parameters
    ----------
    T_sat : saturation temperature at shell pressure [K]
    T_fw_in : feedwater inlet temperature [K]
    dca : drain-cooler approach, ``None`` when the heater has no drain cooler [K]

    Returns
    -------
    float
        Drain temperature [K]: feedwater inlet plus DCA, or saturated
        (``T_sat``) without a drain cooler or when the approach would reach
        saturation (at very low feedwater flow the cooler cannot subcool).

    Reference: DCA as defined by HEI, *Standards for Closed Feedwater Heaters*
    (from memory); the cap at saturation is common practice, no source.
    """
    if dca is None:
        return T_sat
    return min(T_fw_in + dca, T_sat)


def drain_outlet_enthalpy(steam, p_shell: float, T_sat: float, T_fw_in: float,
                          dca: float | None) -> float:
    """Drain outlet enthalpy of a closed heater: subcooled by the drain cooler or
    saturated liquid at shell pressure (see :func:`drain_outlet_temperature`).

    Parameters
    ----------
    steam : property backend (:mod:`simulator.steam`)
    p_shell : shell pressure [Pa]
    T_sat : saturation temperature at ``p_shell`` [K]
    T_fw_in : feedwater inlet temperature [K]
    dca : drain-cooler approach, ``None`` without a drain cooler [K]

    Returns
    -------
    float
        Drain enthalpy [J/kg].
    """
    T_d = drain_outlet_temperature(T_sat, T_fw_in, dca)
    if T_d < T_sat:
        return steam.h_pT(p_shell, T_d)
    return steam.h_liq_sat(p_shell)


def deaerator_outlet_enthalpy(steam, p_shell: float) -> float:
    """Water leaving a deaerator: saturated liquid at shell pressure.

    Parameters
    ----------
    steam : property backend (:mod:`simulator.steam`)
    p_shell : deaerator shell pressure, below the critical pressure [Pa]

    Returns
    -------
    float
        Outlet enthalpy [J/kg], which is also the reference (drain) enthalpy of
        its energy balance (:func:`steam_release`): bleed, drains and feedwater
        mix to saturated liquid.

    Assumption: the storage tank holds the water at saturation (it is heated by
    direct contact until the dissolved gases leave); common practice, no source.
    """
    return steam.h_liq_sat(p_shell)


def feedwater_duty(m_water: float, h_in: float, h_out: float) -> float:
    """Heat taken up by the feedwater in a heater, ``m (h_out - h_in)``.

    Parameters
    ----------
    m_water : feedwater flow through the heater [kg/s]
    h_in : feedwater inlet enthalpy [J/kg]
    h_out : feedwater outlet enthalpy [J/kg]

    Returns
    -------
    float
        Duty [W].
    """
    return m_water * (h_out - h_in)


def steam_release(m_bleed: float, h_bleed: float, h_drain: float,
                  drain_flows: Sequence[float] = (),
                  drain_enthalpies: Sequence[float] = ()) -> float:
    """Heat given up in a heater by its bleed and the drains cascaded into it.

    .. math::  Q = m_b (h_b - h_d) + \\sum_i m_{d,i} (h_{d,i} - h_d)

    Every stream entering the shell leaves with the heater's drain (for a
    deaerator: its outlet) enthalpy ``h_d``.

    Parameters
    ----------
    m_bleed : bleed flow of the heater [kg/s]
    h_bleed : bleed enthalpy at the extraction, unchanged by the isenthalpic line
        drop [J/kg]
    h_drain : drain outlet enthalpy of this heater [J/kg]
    drain_flows : flows of the drains arriving from heaters above [kg/s]
    drain_enthalpies : their enthalpies as they leave those heaters [J/kg]

    Returns
    -------
    float
        Heat released [W].

    Reference: first law for the shell side, no heat loss (see module).
    """
    q = m_bleed * (h_bleed - h_drain)
    for m, h in zip(drain_flows, drain_enthalpies):
        q += m * (h - h_drain)
    return q


def heater_balance_residual(release: float, duty: float, closure: float = 1.0,
                            duty_design: float = 1.0) -> float:
    """Normalised energy-balance residual of a heater, ``(f Q - duty) / duty_design``.

    Parameters
    ----------
    release : heat released by bleed and drains, :func:`steam_release` [W]
    duty : heat taken up by the feedwater, :func:`feedwater_duty` [W]
    closure : design closure factor ``f``, design duty over design release [-]
        (1 for a consistent heat balance; it carries the design heat balance's
        own imbalance to every off-design point)
    duty_design : design duty used as scale [W]

    Returns
    -------
    float
        Residual [-], zero when the heater balances.
    """
    return (closure * release - duty) / duty_design
