"""Liquid water for heat transfer: density, heat capacity, viscosity, conductivity.

The cooling water of a condenser is liquid at a few bar and 0-60 degC.  Its
properties come from the ``iapws`` package: density and isobaric heat capacity
from IAPWS-IF97, dynamic viscosity from the IAPWS 2008 formulation (IAPWS
R12-08, M. L. Huber et al., J. Phys. Chem. Ref. Data 38(2), 101-125, 2009) and
thermal conductivity from the IAPWS 2011 formulation (IAPWS R15-11, M. L. Huber
et al., J. Phys. Chem. Ref. Data 41(3), 033102, 2012).  A property evaluation
there costs about a millisecond, so :class:`WaterTable` tabulates them once on
a 0.5 K grid and interpolates linearly (the properties are smooth: the error
is below 1e-4 relative, checked in the tests).
"""

from __future__ import annotations

import bisect
from dataclasses import dataclass

from ..errors import PropertyRangeError

__all__ = ["water_properties", "WaterTable"]

T_LOW, T_HIGH = 273.65, 373.15  # [K] range of the table (liquid at the table pressure)


def water_properties(T: float, p: float = 3e5) -> tuple[float, float, float, float]:
    """``(rho [kg/m^3], cp [J/(kg K)], mu [Pa s], k [W/(m K)])`` of liquid water at
    temperature ``T`` [K] and pressure ``p`` [Pa], from the ``iapws`` package."""
    import iapws

    w = iapws.IAPWS97(T=T, P=p / 1e6)
    if w.region != 1:
        raise PropertyRangeError(f"water at {T - 273.15:.2f} degC and {p / 1e5:.3g} bar is not "
                                 f"liquid")
    return w.rho, w.cp * 1e3, w.mu, w.k


@dataclass
class WaterTable:
    """Liquid-water properties on a grid from :data:`T_LOW` to :data:`T_HIGH` [K]
    at pressure ``p`` [Pa], interpolated linearly (see the module docstring)."""

    p: float = 3e5
    step: float = 0.5

    def __post_init__(self):
        n = int(round((T_HIGH - T_LOW) / self.step)) + 1
        self.T = [T_LOW + k * self.step for k in range(n)]
        self.values = [water_properties(T, self.p) for T in self.T]

    def __call__(self, T: float) -> tuple[float, float, float, float]:
        """``(rho, cp, mu, k)`` at ``T`` [K] (units as :func:`water_properties`)."""
        if not T_LOW <= T <= T_HIGH:
            raise PropertyRangeError(
                f"cooling water at {T - 273.15:.2f} degC is outside the table of liquid "
                f"water ({T_LOW - 273.15:.1f} to {T_HIGH - 273.15:.1f} degC)")
        k = min(bisect.bisect_right(self.T, T) - 1, len(self.T) - 2)
        f = (T - self.T[k]) / self.step
        a, b = self.values[k], self.values[k + 1]
        return tuple(x + f * (y - x) for x, y in zip(a, b))
