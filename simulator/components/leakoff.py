"""Leakoff: steam leaking past a shaft seal or a valve stem to a lower-pressure node.

The heat balance shows these small flows (gland leakages from the HP end to the
IP or LP section or to a heater, valve-stem leakoffs to cold reheat).  A seal
is a labyrinth: a row of throttling teeth, through which the flow follows
Martin's relation

.. math::  \\dot m = K \\sqrt{\\frac{p_{in}^2 - p_{out}^2}{p_{in} v_{in}}}

(H. M. Martin, "Labyrinth packings", *Engineering* 85, 1908; the form of
Stodola's ellipse, :mod:`simulator.physics.ellipse`, for many teeth without
choking; quoted from memory), with ``K`` (area over the square root of the
number of teeth) fixed by the design leakage.  The flow throttles without work
(``h_out = h_in``) and mixes at the node it reaches.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import ClassVar

from ..errors import InputError
from ..physics.ellipse import ellipse_flow, flow_constant
from .base import Column, ReadContext, SteamPathComponent, Tunable
from .reading import edge_names

__all__ = ["Leakoff"]


@dataclass
class Leakoff(SteamPathComponent):
    """A seal or stem leakage from ``inlet`` to ``outlet``: ``design_flow`` [kg/s]
    from the heat balance; ``K`` [m^2] Martin's constant (calibrated)."""

    table: ClassVar[str] = "leakoff"
    title: ClassVar[str] = "leakoff"
    results: ClassVar[str] = "leakoffs"
    sets_flow: ClassVar[bool] = True
    calibration_key: ClassVar[str] = "design_flow"
    columns: ClassVar[tuple[Column, ...]] = (
        Column("flow", "kg/s", "leakage flow"),
    )
    tunables: ClassVar[tuple[Tunable, ...]] = (
        Tunable("seal_constant", "K", "m^2", "labyrinth constant (area over the square root "
                "of the number of teeth)", 0.0),
    )

    name: str
    inlet: str
    outlet: str
    design_flow: float
    K: float = 0.0

    @classmethod
    def read(cls, rr, ctx: ReadContext):
        name, a, b = edge_names(rr, cls.table)
        m = rr.quantity("design_flow", "mass_flow", positive=True)
        rr.finish()
        if None in (name, a, b, m):
            return None
        return cls(name, a, b, m)

    def calibrate(self, m, p_in, h_in, p_out, steam, model) -> float:
        if p_out >= p_in:
            raise InputError(f"a leakage flows to a lower pressure; {self.outlet!r} is not below "
                             f"{self.inlet!r} at design", file=model.file, table=self.where,
                             key="to")
        self.K = flow_constant(m, p_in, p_out, steam.v_ph(p_in, h_in))
        return h_in

    def evaluate(self, march, i, j, m_net):
        h_in = march.h[i]
        m = ellipse_flow(march.p[i], march.p[j], march.steam.v_ph(march.p[i], h_in), self.K)
        return m, h_in, 0.0, None

    def result_row(self, record, m, p_in, h_in, p_out, h_out) -> tuple:
        return (m,)
