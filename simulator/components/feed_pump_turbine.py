"""Feed-pump turbine: a small turbine that drives a pump of the feedwater train.

It takes steam from a node of the steam path (a bleed point or cold reheat)
and exhausts to another node (the main condenser, or a heater's extraction
node).  Its steam flow is whatever makes its power equal the power its pump
needs at the point: an unknown of the point's equations, with that power
balance as its residual.  The expansion is that of a stage group with a
constant dry efficiency and Baumann's moisture correction
(:func:`simulator.physics.expansion.expansion_end`).

Calibration: the design heat balance gives its design steam flow and
efficiency; the pump's design power, from the water side at design, fixes the
drive factor (pump power over turbine power: gear and bearing losses), which
must lie between 0.9 and 1.02 for a consistent heat balance.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import ClassVar

from ..errors import InputError
from ..physics.expansion import expansion_end, moisture_from_enthalpy
from ..steam.constants import H_ABOVE_SAT_VAP
from .base import Column, ReadContext, SteamPathComponent, Tunable
from .reading import edge_names

__all__ = ["FeedPumpTurbine"]


@dataclass
class FeedPumpTurbine(SteamPathComponent):
    """A turbine driving pump ``pump`` with steam from ``inlet`` to ``outlet``.

    ``design_flow`` [kg/s] and ``efficiency`` [-] (dry isentropic) from the design
    heat balance; ``drive_factor`` [-] the pump's power over the turbine's at
    design; ``pump_power_design`` [W].
    """

    table: ClassVar[str] = "feed_pump_turbine"
    title: ClassVar[str] = "feed-pump turbine"
    results: ClassVar[str] = "feed_pump_turbines"
    sets_flow: ClassVar[bool] = True
    expands: ClassVar[bool] = True
    drives_generator: ClassVar[bool] = False
    flow_unknown: ClassVar[bool] = True
    calibration_key: ClassVar[str] = "design_flow"
    columns: ClassVar[tuple[Column, ...]] = (
        Column("flow", "kg/s", "steam flow through the feed-pump turbine"),
        Column("power", "W", "power of the turbine (to its pump)"),
        Column("pump_power", "W", "shaft power its pump needs"),
        Column("outlet_moisture", "-", "moisture at the outlet", display="%",
               label="moisture out"),
    )
    tunables: ClassVar[tuple[Tunable, ...]] = (
        Tunable("efficiency", "efficiency", "-", "dry isentropic efficiency", 0.0, 1.0),
    )

    name: str
    inlet: str
    outlet: str
    pump: str
    design_flow: float
    efficiency: float
    drive_factor: float = 1.0
    pump_power_design: float = 0.0

    @classmethod
    def read(cls, rr, ctx: ReadContext):
        name, a, b = edge_names(rr, cls.table)
        pump = rr.string("pump")
        m = rr.quantity("design_flow", "mass_flow", positive=True)
        eta = rr.number("efficiency", lo=0.2, hi=1.0)
        rr.finish()
        if None in (name, a, b, pump, m, eta):
            return None
        return cls(name, a, b, pump, m, eta)

    @classmethod
    def check_kind(cls, comps: list, ctx: ReadContext, exhaust_nodes: list[str]) -> None:
        driven = {}
        for c in comps:
            if c.pump in driven:
                ctx.problems.add(InputError(
                    f"pump {c.pump!r} is already driven by {driven[c.pump]!r}", file=ctx.file,
                    table=c.where, key="pump"))
            driven[c.pump] = c.name

    def _expand(self, steam, p_in: float, h_in: float, p_out: float) -> tuple[float, float]:
        """``(h_out [J/kg], outlet moisture [-])`` of the expansion."""
        s_in = steam.s_ph(p_in, h_in)
        dh_s = h_in - steam.h_ps(p_out, s_in)
        h_l, h_v = steam.h_liq_sat(p_out), steam.h_vap_sat(p_out)
        y_in = (0.0 if h_in >= H_ABOVE_SAT_VAP else  # surely dry: no property call
                moisture_from_enthalpy(h_in, steam.h_liq_sat(p_in), steam.h_vap_sat(p_in)))
        h_out = expansion_end(h_in, dh_s, self.efficiency, y_in, h_l, h_v)
        return h_out, moisture_from_enthalpy(h_out, h_l, h_v)

    def calibrate(self, m, p_in, h_in, p_out, steam, model) -> float:
        if p_out >= p_in:
            raise InputError(f"its outlet {self.outlet!r} is not below its inlet "
                             f"{self.inlet!r} at design", file=model.file, table=self.where,
                             key="to")
        return self._expand(steam, p_in, h_in, p_out)[0]

    def calibrate_drive(self, pump_power: float, h_in: float, h_out: float, file) -> None:
        """Fix the drive factor from the pump's design power [W] and the design
        expansion ``h_in`` -> ``h_out`` [J/kg]."""
        power = self.design_flow * (h_in - h_out)
        self.pump_power_design = pump_power
        self.drive_factor = pump_power / power
        if not 0.9 <= self.drive_factor <= 1.02:
            raise InputError(
                f"at design its pump needs {pump_power / 1e6:.4g} MW while "
                f"{self.design_flow:.4g} kg/s at {100 * self.efficiency:.3g} % efficiency give "
                f"{power / 1e6:.4g} MW (ratio {self.drive_factor:.3f}, allowed 0.9-1.02 for "
                f"gear and bearing losses); check its design flow and efficiency against "
                f"the heat balance", file=file, table=self.where, key="design_flow")

    def evaluate(self, march, i, j, m_net):
        m = march.component_flow[self.name]
        h_in = march.h[i]
        h_out, y_out = self._expand(march.steam, march.p[i], h_in, march.p[j])
        return m, h_out, m * (h_in - h_out), y_out

    def residual(self, power: float, pump_power: float) -> float:
        """Power balance [-]: the pump's need less what the turbine gives through its
        drive, over the pump's design power."""
        return (self.drive_factor * power - pump_power) / self.pump_power_design

    def result_row(self, record, m, p_in, h_in, p_out, h_out) -> tuple:
        power = m * (h_in - h_out)
        return (m, power, self.drive_factor * power, record)

    def describe(self) -> list[str]:
        return [f"feed-pump turbine {self.name!r}, {self.inlet} -> {self.outlet}, drives "
                f"{self.pump!r}: design {self.design_flow:.4g} kg/s at "
                f"{100 * self.efficiency:.3g} % efficiency, drive factor "
                f"{self.drive_factor:.4f} (pump power over turbine power at design)"]
