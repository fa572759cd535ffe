"""Throttle valve: the main-steam valves in front of the turbine (isenthalpic).

Wide open, the pressure drop follows the quadratic law of
:func:`simulator.physics.pressure_drop.scaled_pressure_drop` from its design
value; under throttle governing the valves take whatever drop is left between
the held throttle pressure and the first-stage inlet.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import ClassVar

from .base import Column, ReadContext, SteamPathComponent
from .drops import WideOpenValve

__all__ = ["ThrottleValve"]


@dataclass
class ThrottleValve(WideOpenValve, SteamPathComponent):
    """Main-steam throttle valves, from the throttle node to ``outlet``.

    ``wide_open_fraction`` [-] is the model file's ``wide_open_drop`` (``None``:
    the design drop, i.e. the design point is at valves wide open);
    ``dp_wide_open`` [Pa] the wide-open drop at design flow ``m_design`` [kg/s]
    and inlet volume ``v_design`` [m^3/kg].
    """

    table: ClassVar[str] = "throttle_valve"
    many: ClassVar[bool] = False
    title: ClassVar[str] = "throttle valve"
    results: ClassVar[str] = "throttle_valve"
    inlet_key: ClassVar[str] = "node"
    admits: ClassVar[bool] = True
    columns: ClassVar[tuple[Column, ...]] = (
        Column("flow", "kg/s", "steam flow through the throttle valves"),
        Column("pressure_drop", "Pa", "pressure drop across the throttle valves"),
        Column("wide_open_drop", "Pa", "the valves' wide-open drop at this flow"),
    )

    name: str
    inlet: str
    outlet: str
    wide_open_fraction: float | None = None
    dp_wide_open: float = 0.0
    m_design: float = 0.0
    v_design: float = 0.0

    @classmethod
    def read(cls, va, ctx: ReadContext):
        v_to = va.string("to")
        frac = va.quantity("wide_open_drop", "fraction", default=None, lo=0.0, hi=0.5)
        va.finish()
        if v_to is None or ctx.throttle_node is None:
            return None
        return cls("throttle valve", ctx.throttle_node, v_to, frac)

    def evaluate(self, march, i, j, m_net):
        hi = march.h[i]
        dp = self.wide_open_drop(m_net, march.steam.v_ph(march.p[i], hi))
        return hi, dp, 0.0, dp

    def describe(self) -> list[str]:
        return [f"throttle valve: wide-open drop {self.dp_wide_open / 1e5:.3f} bar at design "
                f"flow"]

    def over_capacity(self, record, p_in, p_out) -> bool:
        # record: the wide-open drop at this flow; within 1e-5 of the throttle
        # pressure, since the design point itself sits on that limit and its exact
        # value moves by pascals with the back pressure
        return p_in - p_out < record - 1e-5 * p_in

    def valve_drop(self, record, p_in, p_out) -> float:
        return p_in - p_out

    def result_row(self, record, m, p_in, h_in, p_out, h_out) -> tuple:
        return (m, p_in - p_out, record)
