"""Pressure drop of a pipe, reheater or wide-open valve away from design.

For turbulent flow in a fixed passage the pressure drop scales with the
dynamic head, ``rho c^2 / 2 = m^2 v / (2 A^2)``, so from a design point

.. math::  \\Delta p = \\Delta p_d (m / m_d)^2 (v / v_d)

Assumption: friction factor constant (fully rough turbulent flow), which holds
well for reheaters and steam lines at 30-110 % flow (common practice, no source).

Reference: common practice; the quadratic law follows from the Darcy-Weisbach
equation with a constant friction factor (any fluid-mechanics text, e.g.
F. M. White, *Fluid Mechanics*, 7th ed., McGraw-Hill, 2011, sec. 6.6).
"""

from __future__ import annotations

__all__ = ["scaled_pressure_drop", "fraction_pressure_drop", "DROP_LAWS"]

DROP_LAWS = ("flow_squared_volume", "fixed_fraction")
"""Pressure-drop laws of reheaters and pipes by name; the first is the default."""


def scaled_pressure_drop(m_dot: float, v: float, dp_design: float, m_design: float,
                         v_design: float) -> float:
    """Pressure drop [Pa] at flow ``m_dot`` [kg/s] and inlet volume ``v`` [m^3/kg].

    ``dp_design`` [Pa], ``m_design`` [kg/s] and ``v_design`` [m^3/kg] are the
    design values.  The sign of the flow is kept (``m |m|``) so that a Newton
    iterate with reversed flow stays well defined.
    """
    r = m_dot / m_design
    return dp_design * r * abs(r) * (v / v_design)


def fraction_pressure_drop(p_in: float, fraction: float) -> float:
    """Pressure drop [Pa] that is a fixed ``fraction`` [-] of the inlet pressure
    ``p_in`` [Pa], whatever the flow.

    The convention of heat balances that state a reheater's (or a line's) drop
    as a percentage of its inlet pressure (commonly about 10 % for a reheater
    system; common practice, no source): the fraction is fixed at design.
    Less physical than :func:`scaled_pressure_drop` at part load, where the
    real drop falls with flow squared; use it to match a heat balance written
    that way.
    """
    return fraction * p_in
