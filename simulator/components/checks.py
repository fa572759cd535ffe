"""Checks of a model file's design state shared by the plant reader and the kinds."""

from __future__ import annotations

from ..steam.constants import P_CRIT, T_CRIT
from ..units import Where

__all__ = ["check_superheated"]



def check_superheated(problems, steam, where: Where, T: float,
                       p: float, what: str) -> None:
    """Record a problem unless ``(p, T)`` is superheated (or supercritical) steam.

    A state given by pressure [Pa] and temperature [K] is steam only above the
    saturation temperature (above the critical temperature at supercritical
    pressure); below it, it is water, which no stage group can expand.
    """
    T_sat = T_CRIT if p >= P_CRIT else steam.T_sat(p)
    if T <= T_sat:
        problems.add(where.error(
            f"{what} {T - 273.15:.1f} degC is not above the "
            f"{'critical' if p >= P_CRIT else 'saturation'} temperature "
            f"{T_sat - 273.15:.1f} degC at the design pressure {p / 1e5:.5g} bar there: the "
            f"steam would be water; the turbine needs superheated steam at this point"))
