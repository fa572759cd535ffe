"""Reheater: steam returned to the boiler and heated back to a set temperature.

Its pressure drop scales with ``m^2 v`` from the design drop
(:func:`simulator.physics.pressure_drop.scaled_pressure_drop`); the outlet
temperature is held (the model's, or the case's ``reheat_temperature``).
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import ClassVar

from ..physics.pressure_drop import DROP_LAWS
from ..steam.if97 import T_MAX, T_MIN
from ..units import Where
from .base import Column, ReadContext, SteamPathComponent
from .checks import check_superheated
from .drops import SquareLawDrop
from .reading import edge_names

__all__ = ["Reheater"]

IF97 = "the validity range of IAPWS-IF97"


@dataclass
class Reheater(SquareLawDrop, SteamPathComponent):
    """A reheater between two nodes.

    ``outlet_temperature`` [K]; ``dp_design`` [Pa] the design drop at
    ``m_design`` [kg/s] and inlet volume ``v_design`` [m^3/kg].
    """

    table: ClassVar[str] = "reheater"
    title: ClassVar[str] = "reheater"
    results: ClassVar[str] = "reheaters"
    columns: ClassVar[tuple[Column, ...]] = (
        Column("flow", "kg/s", "steam flow through the reheater"),
        Column("pressure_drop", "Pa", "pressure drop through the reheater"),
        Column("heat", "W", "heat added in the reheater"),
    )

    name: str
    inlet: str
    outlet: str
    outlet_temperature: float
    dp_design: float = 0.0
    m_design: float = 0.0
    v_design: float = 0.0
    drop_law: str = DROP_LAWS[0]
    drop_fraction: float = 0.0

    @classmethod
    def read(cls, rr, ctx: ReadContext):
        name, a, b = edge_names(rr, cls.table)
        T_out = rr.quantity("outlet_temperature", "temperature", lo=T_MIN, hi=T_MAX, reason=IF97)
        law = cls.read_drop_law(rr)
        rr.finish()
        if None in (name, a, b, T_out):
            return None
        return cls(name, a, b, T_out, drop_law=law)

    def check_design(self, ctx: ReadContext) -> None:
        p = (ctx.design_pressure or {}).get(self.outlet)
        if p is not None:
            check_superheated(ctx.problems, ctx.steam,
                              Where(ctx.file, self.where, "outlet_temperature"),
                              self.outlet_temperature, p, "the reheater outlet temperature")

    def calibrate(self, m, p_in, h_in, p_out, steam, model) -> float:
        self.calibrate_drop(m, p_in, h_in, p_out, steam)
        return steam.h_pT(p_out, self.outlet_temperature)

    def evaluate(self, march, i, j, m_net):
        steam = march.steam
        T_out = march.T_reheat if march.T_reheat is not None else self.outlet_temperature
        dp = self.line_drop(m_net, march.p[i], march.h[i], steam)
        return steam.h_pT(march.p[j], T_out), dp, 0.0, None

    def result_row(self, record, m, p_in, h_in, p_out, h_out) -> tuple:
        return (m, p_in - p_out, m * (h_out - h_in))
