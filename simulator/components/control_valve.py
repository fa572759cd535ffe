"""Control valve inside the turbine, holding the pressure of its inlet node.

Such as the valve ahead of the LP section of an extraction-condensing unit that
holds the process-steam pressure.  While it throttles, its inlet pressure is
held (at the design pressure, or the case's setting) and the valve takes the
rest; when holding it would need less than its wide-open drop, it is wide open
(the quadratic law of :func:`simulator.physics.pressure_drop.scaled_pressure_drop`)
and the inlet pressure floats above the setting.  The solver picks the
consistent state of each valve.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import ClassVar

from ..steam.if97 import P_MAX, P_MIN
from .base import Column, ReadContext, Setting, SteamPathComponent
from .drops import WideOpenValve
from .reading import edge_names

__all__ = ["ControlValve"]


@dataclass
class ControlValve(WideOpenValve, SteamPathComponent):
    """A valve holding its inlet pressure, or wide open.

    ``wide_open_fraction`` [-] is the model file's ``wide_open_drop`` (``None``:
    the design drop); ``dp_wide_open`` [Pa] its wide-open drop at design flow
    ``m_design`` [kg/s] and inlet volume ``v_design`` [m^3/kg].
    """

    table: ClassVar[str] = "control_valve"
    title: ClassVar[str] = "control valve"
    results: ClassVar[str] = "control_valves"
    settings_table: ClassVar[str] = "control_valves"
    settings: ClassVar[tuple[Setting, ...]] = (
        Setting("pressure", "pressure", "inlet pressure the valve holds", lo=P_MIN, hi=P_MAX),
    )
    columns: ClassVar[tuple[Column, ...]] = (
        Column("flow", "kg/s", "steam flow through the valve"),
        Column("pressure_drop", "Pa", "pressure drop across the valve"),
        Column("wide_open", "", "1 wide open (inlet pressure floats), 0 holding its inlet "
               "pressure", "u1"),
    )

    name: str
    inlet: str
    outlet: str
    wide_open_fraction: float | None = None
    dp_wide_open: float = 0.0
    m_design: float = 0.0
    v_design: float = 0.0

    @classmethod
    def read(cls, rr, ctx: ReadContext):
        name, a, b = edge_names(rr, cls.table)
        frac = rr.quantity("wide_open_drop", "fraction", default=None, lo=0.0, hi=0.5)
        rr.finish()
        if None in (name, a, b):
            return None
        return cls(name, a, b, frac)

    def evaluate(self, march, i, j, m_net):
        hi = march.h[i]
        if self.name not in march.wide_open:
            return hi, None, 0.0, False  # holding: its inlet node is fixed, no law to meet
        return hi, self.wide_open_drop(m_net, march.steam.v_ph(march.p[i], hi)), 0.0, True

    def result_row(self, record, m, p_in, h_in, p_out, h_out) -> tuple:
        return (m, p_in - p_out, 1 if record else 0)

    def apply_settings(self, values, where, target) -> None:
        if values.get("pressure") is not None:
            target.held_pressures.append((self.name, values["pressure"]))
