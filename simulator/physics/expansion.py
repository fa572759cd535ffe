"""End point of an expansion line with a given efficiency and Baumann's rule.

.. math::  h_{out} = h_{in} - \\eta_{dry} f_B (h_{in} - h_s(p_{out}, s_{in}))

with the wet-over-dry factor ``f_B`` of Baumann's rule
(:func:`simulator.physics.efficiency.baumann_factor`, the one place the rule
is written) using the mean of inlet and outlet moisture.  Because the outlet
moisture depends on ``h_out`` and is linear in it inside the dome, the end
point is found in closed form, without iteration.
"""

from __future__ import annotations

from .efficiency import baumann_factor

__all__ = ["expansion_end", "dry_expansion_end", "moisture_from_enthalpy"]


def moisture_from_enthalpy(h: float, h_liq: float, h_vap: float) -> float:
    """Moisture fraction of steam at enthalpy ``h``, by the lever rule.

    .. math::  y = (h'' - h) / (h'' - h') \\quad (h < h''), \\qquad y = 0 \\quad (h \\ge h'')

    Parameters
    ----------
    h : enthalpy of the state [J/kg]
    h_liq : saturated-liquid enthalpy at its pressure [J/kg]
    h_vap : saturated-vapour enthalpy at its pressure [J/kg]

    Returns
    -------
    float
        Moisture fraction ``1 - x`` [-]; 0 for superheated steam.  Valid down to
        saturated liquid (``y = 1``) below the critical pressure.

    Reference: definition of quality in a two-phase mixture, any thermodynamics
    text (e.g. Y. A. Cengel and M. A. Boles, *Thermodynamics: An Engineering
    Approach*, 8th ed., McGraw-Hill, 2015, sec. 3-5, from memory).
    """
    return (h_vap - h) / (h_vap - h_liq) if h < h_vap else 0.0


def dry_expansion_end(h_in: float, dh_s: float, eta_dry: float, y_in: float,
                      alpha: float = 1.0) -> float:
    """Outlet enthalpy of an expansion whose end point is dry (superheated).

    .. math::  h_{out} = h_{in} - \\eta_{dry} \\Delta h_s f_B(y_{in}, 0)

    Parameters
    ----------
    h_in : inlet enthalpy [J/kg]
    dh_s : isentropic enthalpy drop to the outlet pressure [J/kg]
    eta_dry : dry isentropic efficiency [-]
    y_in : inlet moisture fraction [-]
    alpha : Baumann factor (K. Baumann, J. IEE 59, 1921) [-]

    Returns
    -------
    float
        Outlet enthalpy [J/kg]; valid when it is at or above the saturated-vapour
        enthalpy at the outlet pressure (outlet moisture 0), which the caller
        checks (see :func:`expansion_end`).
    """
    return h_in - eta_dry * dh_s * baumann_factor(y_in, 0.0, alpha)


def expansion_end(h_in: float, dh_s: float, eta_dry: float, y_in: float,
                  h_liq: float, h_vap: float, alpha: float = 1.0) -> float:
    """Outlet enthalpy of an expansion with Baumann's moisture correction.

    Parameters
    ----------
    h_in : inlet enthalpy [J/kg]
    dh_s : isentropic enthalpy drop to the outlet pressure [J/kg]
    eta_dry : dry isentropic efficiency [-]
    y_in : inlet moisture fraction [-]
    h_liq, h_vap : saturated liquid and vapour enthalpy at the outlet pressure [J/kg]
    alpha : Baumann factor (K. Baumann, J. IEE 59, 1921) [-]

    Returns
    -------
    float
        Outlet enthalpy [J/kg].

    Notes
    -----
    With ``A = eta_dry dh_s`` and, inside the dome,
    ``y_out = (h_vap - h_out) / (h_vap - h_liq)``, Baumann's rule
    ``h_out = h_in - A (1 - alpha (y_in + y_out) / 2)`` solved for ``h_out``:
    ``h_out (1 + A alpha / (2 h_fg)) = h_in - A + A alpha (y_in + h_vap / h_fg) / 2``.
    Outside the dome ``y_out = 0`` (:func:`dry_expansion_end`); both agree at
    ``h_out = h_vap``.
    """
    h_dry = dry_expansion_end(h_in, dh_s, eta_dry, y_in, alpha)
    if h_dry >= h_vap:
        return h_dry
    a = eta_dry * dh_s
    h_fg = h_vap - h_liq
    return (h_in - a + 0.5 * a * alpha * (y_in + h_vap / h_fg)) / (1.0 + 0.5 * a * alpha / h_fg)
