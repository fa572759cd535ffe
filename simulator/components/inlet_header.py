"""Inlet header: a turbine section admitted straight from a steam header, with no
throttle valve of its own (an industrial or back-pressure turbine on a plant
header, an LP turbine fed from a process header).

The throttle node is the header.  Between it and the first stage group's inlet
lies only the header line: isenthalpic, with a drop that scales as
``m^2 v`` from its design value
(:func:`simulator.physics.pressure_drop.scaled_pressure_drop`), stays the
design fraction of the header pressure, or is nil when the model file says so
(``pressure_drop_law = "none"``).

Nothing here can throttle.  With the header pressure held, the flow is what
the section swallows at that pressure (the solver's ``wide_open`` mode finds
it, :func:`simulator.solve.point.wide_open_capacity`); a held-pressure point
asked for any other throttle flow or output is refused (:meth:`held_refusal`).
At sliding header pressure a flow or an output may be asked for: the header
pressure is then the result.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import ClassVar

from ..errors import InputError
from ..physics.pressure_drop import DROP_LAWS
from .base import Column, ReadContext, SteamPathComponent
from .drops import SquareLawDrop

__all__ = ["InletHeader", "HEADER_DROP_LAWS", "HELD_TOLERANCE"]

# the header line's drop laws: those of pipes and reheaters, and none at all
HEADER_DROP_LAWS = DROP_LAWS + ("none",)
# [-] a held-pressure answer is what the section swallows when its line drop is
# that of the law within this fraction of the header pressure (the tolerance the
# throttle valve's wide-open limit takes; common practice, no source)
HELD_TOLERANCE = 1e-5


@dataclass
class InletHeader(SquareLawDrop, SteamPathComponent):
    """The header line from the throttle node (the header) to ``outlet``.

    ``drop_law`` [-] is one of :data:`HEADER_DROP_LAWS`; ``dp_design`` [Pa] the
    design drop at design flow ``m_design`` [kg/s] and inlet volume
    ``v_design`` [m^3/kg]; ``drop_fraction`` [-] its fraction of the header
    pressure.
    """

    table: ClassVar[str] = "inlet_header"
    many: ClassVar[bool] = False
    title: ClassVar[str] = "inlet header"
    results: ClassVar[str] = "inlet_header"
    inlet_key: ClassVar[str] = "node"
    admits: ClassVar[bool] = True
    columns: ClassVar[tuple[Column, ...]] = (
        Column("flow", "kg/s", "steam flow from the header into the turbine"),
        Column("pressure_drop", "Pa", "pressure drop along the header line"),
    )

    name: str
    inlet: str
    outlet: str
    drop_law: str = DROP_LAWS[0]
    dp_design: float = 0.0
    m_design: float = 0.0
    v_design: float = 0.0
    drop_fraction: float = 0.0

    @property
    def keeps_pressure(self) -> bool:
        """With no line drop the first group's inlet is at the header pressure."""
        return self.drop_law == "none"

    @classmethod
    def read(cls, rr, ctx: ReadContext):
        to = rr.string("to")
        law = rr.string("pressure_drop_law", default=DROP_LAWS[0], choices=HEADER_DROP_LAWS)
        rr.finish()
        if to is None or ctx.throttle_node is None:
            return None
        return cls("inlet header", ctx.throttle_node, to, law or DROP_LAWS[0])

    def check_design(self, ctx: ReadContext) -> None:
        p = ctx.design_pressure or {}
        if self.inlet not in p or self.outlet not in p:
            return  # the graph names the missing node
        p_h, p_to = p[self.inlet], p[self.outlet]
        if self.drop_law == "none" and p_to != p_h:
            ctx.problems.add(InputError(
                f"'none' puts node {self.outlet!r} at the header pressure "
                f"({p_h / 1e5:.6g} bar), but [nodes] gives it {p_to / 1e5:.6g} bar: give "
                f"the same pressure, or leave the key out for a line drop from the node "
                f"pressures", file=ctx.file, table=self.where, key="pressure_drop_law"))
        elif self.drop_law != "none" and p_to == p_h:
            ctx.problems.add(InputError(
                f"node {self.outlet!r} is at the header pressure ({p_h / 1e5:.6g} bar): a "
                f"header line with no drop is written pressure_drop_law = \"none\"",
                file=ctx.file, table=self.where, key="pressure_drop_law"))

    def calibrate(self, m, p_in, h_in, p_out, steam, model) -> float:
        self.calibrate_drop(m, p_in, h_in, p_out, steam)
        return h_in

    def header_drop(self, m_dot: float, p_in: float, h_in: float, steam) -> float:
        """Drop [Pa] of the header line by its law at flow ``m_dot`` [kg/s] and header
        state ``(p_in [Pa], h_in [J/kg])``."""
        if self.drop_law == "none":
            return 0.0
        return self.line_drop(m_dot, p_in, h_in, steam)

    def evaluate(self, march, i, j, m_net):
        hi = march.h[i]
        dp = self.header_drop(m_net, march.p[i], hi, march.steam)
        return hi, dp, 0.0, dp

    def describe(self) -> list[str]:
        if self.drop_law == "none":
            return ["inlet header: no valves, no line drop (the first group's inlet is at the "
                    "header pressure)"]
        law = ("scaled as flow squared times volume" if self.drop_law == DROP_LAWS[0]
               else "the design fraction of the header pressure")
        return [f"inlet header: no valves; line drop {self.dp_design / 1e5:.4g} bar at design "
                f"flow ({100 * self.drop_fraction:.3g} % of the header pressure), {law}"]

    def over_capacity(self, record, p_in, p_out) -> bool:
        # record: the line drop at this flow
        return p_in - p_out < record - HELD_TOLERANCE * p_in

    def held_refusal(self, record, p_in, p_out) -> str | None:
        gap = p_in - p_out - record
        if abs(gap) <= HELD_TOLERANCE * p_in:
            return None
        more = "more" if gap < 0.0 else "less"
        return (f"the turbine is admitted from a header with no valve of its own; this flow "
                f"needs {p_out / 1e5:.5g} bar at {self.outlet!r}, where the header line leaves "
                f"{(p_in - record) / 1e5:.5g} bar (the flow is {more} than the turbine "
                f"swallows). Give pressure_mode = 'sliding' with a flow or an output (the "
                f"header pressure is then the result), or take the flow the turbine swallows "
                f"at the held pressure (partload.solve.point.wide_open_capacity in Python)")

    def valve_drop(self, record, p_in, p_out) -> float:
        return 0.0  # no valves

    def result_row(self, record, m, p_in, h_in, p_out, h_out) -> tuple:
        return (m, p_in - p_out)
