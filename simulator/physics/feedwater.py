"""The feedwater line between heaters: mixing of streams, forward-pumped drains,
and the boiler's pressure drop.

Adiabatic mixing
    Streams that join at one pressure without heat exchange with the
    surroundings leave with the flow-weighted mean enthalpy

    .. math::  h_{mix} = \\sum m_i h_i / \\sum m_i

    (first law for a steady adiabatic mixing chamber; e.g. Y. A. Cengel and
    M. A. Boles, *Thermodynamics: An Engineering Approach*, 8th ed.,
    McGraw-Hill, 2015, sec. 5-4, from memory).

Forward-pumped drain
    A heater's drain is pumped from shell pressure up to the feedwater line
    after the heater (:func:`simulator.physics.pump.pump_enthalpy_rise`) and
    mixes with the feedwater there.

Boiler pressure drop
    From the feed-pump discharge to the throttle (economiser, evaporator or
    drum, superheater, main-steam line) the drop scales with the square of the
    flow:

    .. math::  \\Delta p = \\Delta p_d (m / m_d) |m / m_d|

    Assumptions: turbulent flow with a constant friction factor, and a mean
    specific volume that does not change with load (a simplification of the
    compressible steam sections; common practice, no source).  The
    Darcy-Weisbach basis is as in :mod:`simulator.physics.pressure_drop`.
"""

from __future__ import annotations

from collections.abc import Sequence

from .pump import pump_enthalpy_rise

__all__ = ["mixed_enthalpy", "pumped_drain_enthalpy", "boiler_pressure_drop"]


def mixed_enthalpy(flows: Sequence[float], enthalpies: Sequence[float]) -> float:
    """Enthalpy of streams mixed adiabatically at one pressure.

    Parameters
    ----------
    flows : mass flow of each stream; their sum must not be zero (a negative
        flow, as a Newton iterate may have, is continued by the same formula so
        that the iteration stays well defined) [kg/s]
    enthalpies : enthalpy of each stream [J/kg]

    Returns
    -------
    float
        Mixed enthalpy ``sum(m h) / sum(m)`` [J/kg].
    """
    m = 0.0
    e = 0.0
    for mi, hi in zip(flows, enthalpies):
        m += mi
        e += mi * hi
    if m == 0.0:
        raise ValueError("mixing needs a nonzero total flow")
    return e / m


def pumped_drain_enthalpy(h_drain: float, v_drain: float, p_shell: float,
                          p_line: float, eta: float) -> float:
    """Enthalpy of a heater drain after its pump lifts it into the feedwater line.

    Parameters
    ----------
    h_drain : drain enthalpy leaving the heater shell [J/kg]
    v_drain : specific volume of the drain at pump suction [m^3/kg]
    p_shell : shell (suction) pressure [Pa]
    p_line : feedwater line (discharge) pressure [Pa]
    eta : drain pump efficiency [-]

    Returns
    -------
    float
        Drain enthalpy at the pump discharge [J/kg]; it then mixes with the
        feedwater (:func:`mixed_enthalpy`).
    """
    return h_drain + pump_enthalpy_rise(v_drain, p_shell, p_line, eta)


def boiler_pressure_drop(m_dot: float, dp_design: float, m_design: float) -> float:
    """Pressure drop from the feed-pump discharge to the throttle (see module).

    Parameters
    ----------
    m_dot : feedwater flow [kg/s]
    dp_design : drop at design flow [Pa]
    m_design : design flow [kg/s]

    Returns
    -------
    float
        Pressure drop [Pa]; the sign of the flow is kept (``r |r|``) so that a
        Newton iterate with reversed flow stays well defined.
    """
    r = m_dot / m_design
    return dp_design * r * abs(r)
