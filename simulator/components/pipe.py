"""Steam pipe (a crossover or a line between casings): isenthalpic, with a
pressure drop that scales with ``m^2 v`` from its design value
(:func:`simulator.physics.pressure_drop.scaled_pressure_drop`)."""

from __future__ import annotations

from dataclasses import dataclass
from typing import ClassVar

from ..physics.pressure_drop import DROP_LAWS
from .base import Column, ReadContext, SteamPathComponent
from .drops import SquareLawDrop
from .reading import edge_names

__all__ = ["Pipe"]


@dataclass
class Pipe(SquareLawDrop, SteamPathComponent):
    """A pipe between two nodes; ``dp_design`` [Pa] at ``m_design`` [kg/s] and inlet
    volume ``v_design`` [m^3/kg]."""

    table: ClassVar[str] = "pipe"
    title: ClassVar[str] = "pipe"
    results: ClassVar[str] = "pipes"
    columns: ClassVar[tuple[Column, ...]] = (
        Column("flow", "kg/s", "steam flow through the pipe"),
        Column("pressure_drop", "Pa", "pressure drop along the pipe"),
    )

    name: str
    inlet: str
    outlet: str
    dp_design: float = 0.0
    m_design: float = 0.0
    v_design: float = 0.0
    drop_law: str = DROP_LAWS[0]
    drop_fraction: float = 0.0

    @classmethod
    def read(cls, rr, ctx: ReadContext):
        name, a, b = edge_names(rr, cls.table)
        law = cls.read_drop_law(rr)
        rr.finish()
        if None in (name, a, b):
            return None
        return cls(name, a, b, drop_law=law)

    def calibrate(self, m, p_in, h_in, p_out, steam, model) -> float:
        self.calibrate_drop(m, p_in, h_in, p_out, steam)
        return h_in

    def evaluate(self, march, i, j, m_net):
        hi = march.h[i]
        return hi, self.line_drop(m_net, march.p[i], hi, march.steam), 0.0, None

    def result_row(self, record, m, p_in, h_in, p_out, h_out) -> tuple:
        return (m, p_in - p_out)
