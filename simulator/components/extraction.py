"""Extraction: a bleed of steam from a node of the steam path.

Its off-design flow is set by its ``control``: the design fraction of throttle
flow, a fixed flow (process steam), closed, or whatever its feedwater heater
condenses (an unknown of the solver, with the heater's energy balance).
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import ClassVar

from ..units import Where
from .base import Column, Component, ReadContext, Setting

__all__ = ["Extraction", "EXTRACTION_CONTROLS"]

EXTRACTION_CONTROLS = ("fraction", "flow", "closed", "heater")


@dataclass
class Extraction(Component):
    """A bleed at ``node`` with its design flow [kg/s].

    ``closing``: the model file asks for the design flow that closes its
    heater's balance (``design_flow = "closing"``); the calibration sets
    ``design_flow``.  ``control``: ``"fraction"`` (the design fraction of throttle flow),
    ``"flow"`` (a fixed flow), ``"closed"`` or ``"heater"``; ``heater`` the
    name of the heater it feeds, if any.
    """

    table: ClassVar[str] = "extraction"
    title: ClassVar[str] = "extraction"
    results: ClassVar[str] = "extractions"
    settings_table: ClassVar[str] = "extractions"
    settings: ClassVar[tuple[Setting, ...]] = (
        Setting("control", "choice", "how the bleed flow is set", EXTRACTION_CONTROLS),
        Setting("flow", "mass_flow", "bleed flow held (control = 'flow')", lo=0.0),
        Setting("fraction", "fraction", "bleed flow over throttle flow (control = 'fraction')",
                lo=0.0, hi=1.0),
    )
    columns: ClassVar[tuple[Column, ...]] = (
        Column("flow", "kg/s", "bleed flow"),
        Column("pressure", "Pa", "pressure at the bleed point"),
        Column("enthalpy", "J/kg", "enthalpy of the bleed steam"),
        Column("control", "", "how the bleed flow is set: heater, closed, flow or fraction",
               "text"),
    )

    name: str
    node: str
    design_flow: float
    control: str = "fraction"
    heater: str | None = None
    closing: bool = False

    @classmethod
    def read(cls, er, ctx: ReadContext):
        name = er.string("name")
        if name:
            er.where = Where(ctx.file, f"extraction '{name}'", None)
        node = er.string("node")
        closing = er.raw("design_flow", None) == "closing"
        flow = 0.0 if closing else er.quantity("design_flow", "mass_flow", lo=0.0)
        control = er.string("control", default=None, choices=EXTRACTION_CONTROLS)
        er.finish()
        if None in (name, node, flow):
            return None
        return cls(name, node, flow, control or "", closing=closing)

    def describe(self) -> list[str]:
        if not self.closing:
            return []
        return [f"extraction {self.name!r}: design flow {self.design_flow:.5g} kg/s, the flow "
                f"that closes the balance of heater {self.heater!r}"]

    def point_row(self, point) -> tuple:
        flow, control = point.bleeds[self.name]
        return (flow, point.pressure(self.node), point.enthalpy(self.node), control)

    def apply_settings(self, values, where, target) -> None:
        # a flow or a fraction given without a control word says which control it is
        implied = [k for k in ("flow", "fraction") if k in values]
        control = values.get("control", implied[0] if len(implied) == 1 else None)
        for key in ("flow", "fraction"):
            if key in values and control != key:
                target.problems.add(where.child(key).error(
                    f"applies with control = {key!r} only"))
        if control is None:
            if "control" not in values:
                target.problems.add(where.child("control").error(
                    "missing required key (or give one of flow and fraction)"))
            return
        if control == "heater" and not self.heater:
            target.problems.add(where.child("control").error("this extraction feeds no heater"))
        elif control in ("flow", "fraction") and self.heater:
            target.problems.add(where.child("control").error(
                f"this extraction feeds heater {self.heater!r}, which sets its flow; close it "
                f"or take the heater out of service instead"))
        elif control == "closed" and self.heater:
            target.heaters_out.add(self.heater)
        elif control in ("flow", "fraction"):
            value = values.get(control)
            if value is None:
                if control not in values:
                    target.problems.add(where.child(control).error("missing required key"))
                return
            target.extraction_control.append((self.name, (control, float(value))))
        else:
            target.extraction_control.append((self.name, (control, 0.0)))
