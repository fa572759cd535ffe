"""Pumps of the water side: condensate, feed and drain pumps.

.. math::  \\Delta h = v \\Delta p / \\eta

the isentropic work of an incompressible liquid, ``v dp`` with the specific
volume at suction, divided by the pump efficiency.  The whole loss is taken to
heat the liquid (an adiabatic pump), so ``dh`` is also the shaft work per unit
mass.

Assumptions: the liquid is incompressible between suction and discharge
(``v`` at suction; hot feedwater compresses by a percent or so over a feed
pump's rise, so the rise is slightly overstated); suction state known; no
cavitation.  Valid for liquid water well below the critical point.

Reference: any thermodynamics text, e.g. Y. A. Cengel and M. A. Boles,
*Thermodynamics: An Engineering Approach*, 8th ed., McGraw-Hill, 2015,
eq. 10-3 (pump work of the Rankine cycle), from memory.
"""

from __future__ import annotations

__all__ = ["pump_enthalpy_rise"]


def pump_enthalpy_rise(v: float, p_in: float, p_out: float, eta: float) -> float:
    """Enthalpy rise of a pumped liquid, ``v (p_out - p_in) / eta``.

    Parameters
    ----------
    v : specific volume of the liquid at suction [m^3/kg]
    p_in : suction pressure [Pa]
    p_out : discharge pressure [Pa]
    eta : pump efficiency, isentropic work over shaft work [-]

    Returns
    -------
    float
        Enthalpy rise of the liquid, equal to the shaft work per unit mass [J/kg].
    """
    return v * (p_out - p_in) / eta
