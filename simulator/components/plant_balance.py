"""Auxiliary power and the boiler: from turbine-cycle figures to net plant figures.

``[auxiliaries]`` charges the pumps of the feedwater train (their shaft power
from the water side, over the efficiency of their motors and drives) and the
rest of the unit's auxiliary load (a fixed part and a part in proportion to
output) against the generator output: net output and the turbine-cycle heat
rate net of the charged pumps.  ``[boiler]`` turns the heat added to the steam
into fuel energy by the boiler efficiency (constant, or a table against load),
on the heating value the file names (higher or lower): fuel flow and net plant
heat rate.

Definitions (ASME PTC 6, *Steam Turbines*, and ASME PTC 46, *Performance Test
Code on Overall Plant Performance*, use these terms; from memory):

* turbine-cycle heat rate, gross: heat added to the steam over generator output
  (the point's ``heat_rate``; pump work enters as feedwater enthalpy);
* turbine-cycle heat rate, net of charged pumps: the same heat over generator
  output less the pumps' electrical input;
* net plant heat rate: fuel energy over net output (generator output less all
  auxiliaries), on the stated heating value.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import ClassVar

import numpy as np

from .base import Column, Component, ReadContext, Setting, Tunable

__all__ = ["Auxiliaries", "Boiler", "HEATING_VALUES"]

HEATING_VALUES = ("higher", "lower")


@dataclass
class Auxiliaries(Component):
    """Charged pumps and other auxiliary load.

    ``pump_drive_efficiency`` [-] of the pumps' motors and drives; ``fixed_load``
    [W]; ``load_fraction`` [-] of generator output.
    """

    table: ClassVar[str] = "auxiliaries"
    many: ClassVar[bool] = False
    title: ClassVar[str] = "auxiliaries"
    results: ClassVar[str] = "auxiliaries"
    reads_totals: ClassVar[bool] = True
    settings_table: ClassVar[str] = "auxiliaries"
    settings: ClassVar[tuple[Setting, ...]] = (
        Setting("fixed_load", "power", "auxiliary load independent of output", lo=0.0),
    )
    columns: ClassVar[tuple[Column, ...]] = (
        Column("pump_drive_power", "W", "electrical input of the feedwater train's pumps "
               "driven by motors (their shaft power over the drive efficiency)",
               label="pumps"),
        Column("other_power", "W", "the other auxiliary load", label="other"),
        Column("net_output", "W", "generator output less all auxiliary power",
               label="net output"),
        Column("turbine_heat_rate_net", "J/J", "turbine-cycle heat rate net of the charged "
               "pumps: heat added over generator output less the pumps' input (ASME PTC 6 "
               "terms; x 3600 = kJ/kWh)", label="net cycle HR"),
    )
    tunables: ClassVar[tuple[Tunable, ...]] = (
        Tunable("fixed_load", "fixed_load", "W", "auxiliary load independent of output", 0.0),
    )

    pump_drive_efficiency: float
    fixed_load: float
    load_fraction: float
    name: str = "auxiliaries"

    @classmethod
    def read(cls, rr, ctx: ReadContext):
        eta = rr.quantity("pump_drive_efficiency", "fraction", lo=0.3, hi=1.0)
        fixed = rr.quantity("fixed_load", "power", lo=0.0)
        frac = rr.quantity("load_fraction", "fraction", lo=0.0, hi=0.3)
        rr.finish()
        if None in (eta, fixed, frac):
            return None
        return cls(eta, fixed, frac)

    def figures(self, totals: dict, fixed: float) -> tuple[float, float, float, float]:
        """``(pumps, other, net output, net cycle heat rate)`` [W, W, W, J/J] from a
        point's ``totals`` with the fixed load ``fixed`` [W]."""
        gross = totals["generator_output"]
        pumps = ((totals.get("pump_power", 0.0) - totals.get("turbine_driven_pump_power", 0.0))
                 / self.pump_drive_efficiency)
        other = fixed + self.load_fraction * gross
        heat = totals.get("heat_added", math.nan)
        return pumps, other, gross - pumps - other, heat / (gross - pumps)

    def point_row(self, point) -> tuple:
        fixed = point.setting(self, "fixed_load", self.fixed_load)
        return self.figures(point.totals, fixed)

    def describe(self) -> list[str]:
        return [f"auxiliaries: pumps charged at {100 * self.pump_drive_efficiency:.4g} % drive "
                f"efficiency, other load {self.fixed_load / 1e6:.4g} MW + "
                f"{100 * self.load_fraction:.4g} % of output"]


@dataclass
class Boiler(Component):
    """Boiler efficiency and fuel.

    ``efficiency`` [-] constant, or ``curve`` (load fraction [-] of the generator
    rating, efficiency [-]) interpolated linearly and held at its ends;
    ``heating_value`` ``"higher"`` or ``"lower"``; ``fuel_heating_value``
    [J/kg] for a fuel flow, if given.
    """

    table: ClassVar[str] = "boiler"
    many: ClassVar[bool] = False
    title: ClassVar[str] = "boiler"
    results: ClassVar[str] = "boiler"
    reads_totals: ClassVar[bool] = True
    columns: ClassVar[tuple[Column, ...]] = (
        Column("efficiency", "-", "boiler efficiency on the stated heating value",
               display="%"),
        Column("fuel_energy", "W", "fuel energy in (heat added to the steam over the boiler "
               "efficiency)", label="fuel"),
        Column("fuel_flow", "kg/s", "fuel flow (NaN: no fuel heating value given)"),
        Column("plant_heat_rate_gross", "J/J", "fuel energy over generator output (x 3600 = "
               "kJ/kWh)", label="gross plant HR"),
        Column("plant_heat_rate_net", "J/J", "net plant heat rate: fuel energy over net output "
               "(ASME PTC 46 terms; NaN without [auxiliaries]; x 3600 = kJ/kWh)",
               label="net plant HR"),
    )

    heating_value: str
    efficiency: float | None = None
    curve: tuple | None = None
    fuel_heating_value: float | None = None
    name: str = "boiler"

    @classmethod
    def read(cls, rr, ctx: ReadContext):
        hv = rr.string("heating_value", choices=HEATING_VALUES)
        eff = rr.quantity("efficiency", "fraction", default=None, lo=0.3, hi=1.0)
        curve = None
        if rr.has("efficiency_curve"):
            cr = rr.sub("efficiency_curve")
            loads = cr.raw("load_fraction")
            effs = cr.raw("efficiency")
            cr.finish()
            ok = (isinstance(loads, list) and isinstance(effs, list) and len(loads) == len(effs)
                  and len(loads) >= 2 and all(isinstance(v, (int, float)) for v in loads + effs))
            if not ok or any(b <= a for a, b in zip(loads, loads[1:])) or not all(
                    0.3 <= e <= 1.0 for e in effs):
                rr.problems.add(rr.where.child("efficiency_curve").error(
                    "expected { load_fraction = [...], efficiency = [...] }: two or more "
                    "increasing loads (fractions of the generator rating) and efficiencies "
                    "between 0.3 and 1"))
            else:
                curve = (tuple(float(v) for v in loads), tuple(float(v) for v in effs))
        fhv = rr.quantity("fuel_heating_value", "specific_enthalpy", default=None,
                          positive=True)
        rr.finish(also_valid=("efficiency_curve",))
        if (eff is None) == (curve is None):
            rr.problems.add(rr.where.child("efficiency").error(
                "give the boiler efficiency as 'efficiency' or as 'efficiency_curve', once"))
            return None
        if hv is None:
            return None
        return cls(hv, eff, curve, fhv)

    def efficiency_at(self, load: float) -> float:
        """Boiler efficiency [-] at ``load`` [-] (generator output over rating)."""
        if self.curve is None:
            return self.efficiency
        return float(np.interp(load, self.curve[0], self.curve[1]))

    def point_row(self, point) -> tuple:
        t = point.totals
        gross = t["generator_output"]
        eta = self.efficiency_at(gross / point.rating)
        fuel = t.get("heat_added", math.nan) / eta
        aux = point.tables.get("auxiliaries")
        net = aux.columns["net_output"][0] if aux is not None else math.nan
        flow = fuel / self.fuel_heating_value if self.fuel_heating_value else math.nan
        return (eta, fuel, flow, fuel / gross, fuel / net)

    def describe(self) -> list[str]:
        eff = (f"{100 * self.efficiency:.4g} %" if self.curve is None else
               "from a table against load")
        return [f"boiler: efficiency {eff} on the {self.heating_value} heating value"
                + (f", fuel {self.fuel_heating_value / 1e6:.5g} MJ/kg"
                   if self.fuel_heating_value else "")]
