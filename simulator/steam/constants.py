"""Constants of water and steam used across partload, each written once (SI units).

Critical point
    ``T_CRIT`` = 647.096 K and ``P_CRIT`` = 22.064 MPa, the critical temperature
    and pressure of IAPWS-IF97 (IAPWS R7-97(2012), "Revised Release on the IAPWS
    Industrial Formulation 1997 for the Thermodynamic Properties of Water and
    Steam", section 2, eqs. (1)-(2) constants; also W. Wagner et al., J. Eng.
    Gas Turbines Power 122(1), 150-182, 2000).

Validity bounds used by partload
    IAPWS-IF97 covers 273.15 K <= T <= 1073.15 K at p <= 100 MPa (regions 1-4;
    region 5, above 1073.15 K, is not used here).  ``P_MIN`` is the triple-point
    pressure 611.2127 Pa as given by the IF97 saturation-pressure equation at
    273.16 K (IAPWS R7-97(2012), section 8.1, from memory), below which there is
    no liquid water.

Largest saturated-vapour enthalpy
    ``H_ABOVE_SAT_VAP`` = 2.81e6 J/kg lies above the saturated-vapour enthalpy of
    water at every pressure.  The maximum of ``h''(p)`` on the IF97 saturation
    line is 2803.29 kJ/kg at 3.078 MPa (235.29 degC), found by a scan of the
    saturated-vapour enthalpy from 2 to 4.5 MPa with both property backends
    (a hand check of the formulation; steam tables give 2803.3 kJ/kg near
    3 MPa, from memory).  The constant is that maximum rounded up with a
    margin of about 7 kJ/kg, far beyond the backward equations' uncertainty:
    any state with more enthalpy is superheated vapour, and an expansion end
    point above it is certainly dry.  Its exact value only decides which of
    two equivalent code paths computes a state; any number above 2803.3 kJ/kg
    gives the same answers.
"""

from __future__ import annotations

__all__ = ["T_CRIT", "P_CRIT", "P_MIN", "P_MAX", "T_MIN", "T_MAX", "H_ABOVE_SAT_VAP"]

T_CRIT = 647.096  # [K] critical temperature, IAPWS R7-97(2012)
P_CRIT = 22.064e6  # [Pa] critical pressure, IAPWS R7-97(2012)
P_MIN = 611.2127  # [Pa] triple-point pressure; below it no liquid water exists
P_MAX = 100e6  # [Pa] upper pressure limit of IAPWS-IF97 regions 1-3
T_MIN = 273.15  # [K] lower temperature limit of IAPWS-IF97
T_MAX = 1073.15  # [K] upper temperature limit of regions 1-3 (region 5 is not used)
H_ABOVE_SAT_VAP = 2.81e6  # [J/kg] above every saturated-vapour enthalpy (see above)
