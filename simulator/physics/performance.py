"""Performance of the turbine cycle: heat added, heat rate, steam rate, heat
chargeable to power, make-up and condenser duty.

Turbine-cycle heat rate
    The heat the steam generator adds to the cycle's working fluid divided by
    the generator output:

    .. math::  HR = \\frac{m_T (h_T - h_{fw}) + \\sum m_{rh} (h_{rh,out} - h_{rh,in})}{P_{gen}}

    in J/J here (multiply by 3600 for kJ/kWh).  This is the turbine-cycle (not
    the plant) heat rate: no boiler efficiency and no auxiliary power.  The
    definition follows ASME PTC 6, *Steam Turbines: Performance Test Codes*,
    American Society of Mechanical Engineers, New York, 2004 (the heat-rate
    definition of the turbine cycle; section and equation numbers not checked,
    from memory).

Heat chargeable to power
    For a unit that exports process steam, the heat that leaves with the
    process steam and is returned as make-up water at condensate enthalpy is
    charged to the process, not to power:

    .. math::  Q_{power} = Q_{added} - \\left(\\sum m_{proc} h_{proc} - m_{mu} h_c\\right)

    and the heat rate chargeable to power is ``Q_power / P_gen``; for a unit
    without process steam it equals the turbine-cycle heat rate.  Common
    practice of combined heat and power accounting, no source; make-up is
    taken at condensate (hotwell) enthalpy.

Condenser duty
    First law for the condenser: exhaust steam, drains cascaded to it and
    make-up water come in, condensate leaves saturated at condenser pressure.

    .. math::  Q_c = \\sum m_{ex} h_{ex} + m_d h_d + m_{mu} h_c - m_c h_c

Steam rate
    Throttle flow over generator output [kg/J] (multiply by 3.6e6 for kg/kWh).

All functions are pure and SI; an output of zero or less gives NaN for the
rates, since a unit that produces nothing has no heat or steam rate.
"""

from __future__ import annotations

import math

__all__ = ["heat_added", "heat_rate", "steam_rate", "makeup_flow",
           "net_process_steam_energy", "heat_chargeable_to_power", "condenser_duty",
           "energy_imbalance"]


def heat_added(m_throttle: float, h_throttle: float, h_feedwater: float,
               reheat_heat: float = 0.0) -> float:
    """Heat added to the cycle by the steam generator.

    Parameters
    ----------
    m_throttle : throttle (main-steam) flow, equal to the final feedwater flow [kg/s]
    h_throttle : throttle enthalpy [J/kg]
    h_feedwater : final feedwater enthalpy entering the boiler [J/kg]
    reheat_heat : heat added in the reheaters [W]

    Returns
    -------
    float
        ``m_T (h_T - h_fw) + Q_reheat`` [W].
    """
    return m_throttle * (h_throttle - h_feedwater) + reheat_heat


def heat_rate(heat: float, output: float) -> float:
    """Heat rate: heat over generator output (ASME PTC 6, see module).

    Parameters
    ----------
    heat : heat added (:func:`heat_added`) or heat chargeable to power
        (:func:`heat_chargeable_to_power`) [W]
    output : generator output [W]

    Returns
    -------
    float
        Heat rate [J/J] (times 3600 is kJ/kWh); NaN when ``output <= 0``.
    """
    return heat / output if output > 0 else math.nan


def steam_rate(m_throttle: float, output: float) -> float:
    """Steam rate: throttle flow per unit of generator output.

    Parameters
    ----------
    m_throttle : throttle flow [kg/s]
    output : generator output [W]

    Returns
    -------
    float
        Steam rate [kg/J] (times 3.6e6 is kg/kWh); NaN when ``output <= 0``.
    """
    return m_throttle / output if output > 0 else math.nan


def makeup_flow(m_condensate: float, m_exhaust: float, m_drains: float) -> float:
    """Make-up water entering the condenser, from its mass balance.

    Parameters
    ----------
    m_condensate : condensate flow leaving the hotwell [kg/s]
    m_exhaust : exhaust steam flow entering the condenser [kg/s]
    m_drains : heater drains cascaded to the condenser [kg/s]

    Returns
    -------
    float
        Make-up flow [kg/s]: what the cycle loses (process steam not returned)
        and must be given back.  Zero for a closed cycle.
    """
    return m_condensate - m_exhaust - m_drains


def net_process_steam_energy(process_energy: float, m_makeup: float,
                             h_condensate: float) -> float:
    """Net energy exported with process steam, ``sum(m h)_proc - m_mu h_c``.

    Parameters
    ----------
    process_energy : ``sum m h`` of the process-steam extractions [W]
    m_makeup : make-up flow returned for it [kg/s]
    h_condensate : enthalpy at which make-up enters, the condensate's [J/kg]

    Returns
    -------
    float
        Net process-steam energy [W].
    """
    return process_energy - m_makeup * h_condensate


def heat_chargeable_to_power(heat: float, net_process_energy: float) -> float:
    """Heat chargeable to power: heat added less the net process-steam energy.

    Parameters
    ----------
    heat : heat added to the cycle, :func:`heat_added` [W]
    net_process_energy : :func:`net_process_steam_energy` [W]

    Returns
    -------
    float
        Heat chargeable to power [W] (see module; common practice, no source).
    """
    return heat - net_process_energy


def condenser_duty(exhaust_energy: float, m_drains: float, h_drains: float,
                   m_makeup: float, m_condensate: float, h_condensate: float) -> float:
    """Heat rejected in the condenser, from its energy balance (see module).

    Parameters
    ----------
    exhaust_energy : ``sum m h`` of the exhaust steam entering, at the
        used-energy end point [W]
    m_drains : heater drains cascaded to the condenser [kg/s]
    h_drains : their mixed enthalpy [J/kg]
    m_makeup : make-up water entering at condensate enthalpy [kg/s]
    m_condensate : condensate leaving [kg/s]
    h_condensate : condensate enthalpy, saturated liquid at condenser pressure [J/kg]

    Returns
    -------
    float
        Condenser duty [W].
    """
    return (exhaust_energy + m_drains * h_drains + m_makeup * h_condensate
            - m_condensate * h_condensate)


def energy_imbalance(heat: float, pump_power: float, shaft_power: float,
                     condenser_heat: float, heater_heat_loss: float,
                     net_process_energy: float) -> float:
    """First-law check of the whole cycle: what comes in less what goes out.

    .. math::  Q_{added} + P_{pumps} - P_{shaft} - Q_c - Q_{heaters} - E_{proc}

    Parameters
    ----------
    heat : heat added, :func:`heat_added` [W]
    pump_power : power of all pumps, delivered to the water [W]
    shaft_power : turbine shaft power [W]
    condenser_heat : condenser duty, :func:`condenser_duty` [W]
    heater_heat_loss : heat released in heaters less their feedwater duty [W]
        (nonzero where a closure factor is not 1)
    net_process_energy : :func:`net_process_steam_energy` [W]

    Returns
    -------
    float
        Imbalance [W]; zero (to rounding) for a solved point.
    """
    return (heat + pump_power - shaft_power - condenser_heat - heater_heat_loss
            - net_process_energy)
