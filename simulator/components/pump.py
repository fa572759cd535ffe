"""Pump: a condensate, feed or drain pump adding ``v dp / eta``
(:func:`simulator.physics.pump.pump_enthalpy_rise`)."""

from __future__ import annotations

from dataclasses import dataclass
from typing import ClassVar

from ..physics.pump import pump_enthalpy_rise
from ..steam.if97 import P_MAX
from ..units import Where
from .base import Component, ReadContext, Tunable

__all__ = ["Pump"]


@dataclass
class Pump(Component):
    """A pump of the feedwater train.

    ``discharge`` is ``"boiler"`` (throttle pressure plus the boiler pressure
    drop: the feed pump) or ``"fixed"`` at ``discharge_pressure`` [Pa];
    ``efficiency`` [-].
    """

    table: ClassVar[str] = "pump"
    title: ClassVar[str] = "pump"
    tunables: ClassVar[tuple[Tunable, ...]] = (
        Tunable("efficiency", "efficiency", "-", "pump efficiency", 0.0, 1.0),
    )

    name: str
    efficiency: float
    discharge: str = "fixed"
    discharge_pressure: float = 0.0

    @classmethod
    def read(cls, pr, ctx: ReadContext):
        pname = pr.string("name")
        if pname:
            pr.where = Where(ctx.file, f"pump '{pname}'", None)
        eff = pr.number("efficiency", lo=0.0, hi=1.0, lo_open=True)
        dis = pr.string("discharge", default="fixed", choices=("fixed", "boiler"))
        dp = (pr.quantity("discharge_pressure", "pressure", positive=True, hi=P_MAX)
              if dis == "fixed" else 0.0)
        pr.finish()
        if None in (pname, eff, dis, dp):
            return None
        return cls(pname, eff, dis, dp)

    def enthalpy_rise(self, v: float, p_in: float, p_out: float) -> float:
        """Enthalpy rise [J/kg] from ``p_in`` to ``p_out`` [Pa] at suction volume
        ``v`` [m^3/kg]."""
        return pump_enthalpy_rise(v, p_in, p_out, self.efficiency)
