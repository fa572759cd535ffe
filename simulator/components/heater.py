"""Feedwater heater: closed (shell and tube) or open (deaerator).

The laws are in :mod:`simulator.physics.heater`: shell pressure from the
extraction pressure less the line drop, feedwater outlet at saturation less
the TTD (constant, or from the condensing zone's design UA), drain outlet at
the feedwater inlet plus the DCA or saturated.  The water-side march that
balances every heater is :mod:`simulator.plant.water_side`.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import ClassVar

from ..physics.heater import (
    closed_heater_outlet_temperature,
    effectiveness_ttd,
    heater_shell_pressure,
)
from ..units import Where
from .base import Column, Component, ReadContext, Setting, Tunable

__all__ = ["Heater", "HEATER_TYPES", "TTD_METHODS"]

HEATER_TYPES = ("closed", "deaerator")
TTD_METHODS = ("constant", "ua")
_NAN = math.nan


@dataclass
class Heater(Component):
    """A feedwater heater.

    Attributes
    ----------
    heater_type : ``"closed"`` or ``"deaerator"`` (the model file's ``type``)
    extraction : name of the extraction that feeds it
    line_drop : extraction-line pressure drop as a fraction of node pressure [-]
    ttd : terminal temperature difference, saturation minus feedwater outlet [K]
    dca : drain-cooler approach, drain outlet minus feedwater inlet [K];
        ``None`` when the heater has no drain cooler (drain leaves saturated)
    drain_to : heater name, ``"condenser"`` or ``"forward"`` (pumped into the
        feedwater line after this heater)
    drain_to_when_out : where drains arriving at this heater go when it is out
        of service (default: its own ``drain_to``)
    ttd_method : ``"constant"`` or ``"ua"`` (effectiveness of the condensing zone)
    ua : design UA [W/K] (``"ua"`` method); cp : feedwater heat capacity [J/(kg K)]
    closure : design heat-balance closure factor, feedwater duty over the heat
        the steam side gives up [-] (1 for a consistent heat balance)
    duty_design : design duty [W], used to normalise the energy residual
    drain_pump_efficiency : of the drain pump for ``drain_to = "forward"`` [-]
    """

    table: ClassVar[str] = "heater"
    title: ClassVar[str] = "heater"
    results: ClassVar[str] = "heaters"
    settings_table: ClassVar[str] = "heaters"
    settings: ClassVar[tuple[Setting, ...]] = (
        Setting("in_service", "flag", "false takes the heater out of service (its extraction "
                "closes, the feedwater bypasses it)"),
    )
    tunables: ClassVar[tuple[Tunable, ...]] = (
        Tunable("ttd", "ttd", "K", "terminal temperature difference", -30.0, 60.0),
        Tunable("dca", "dca", "K", "drain-cooler approach", 0.0, 60.0),
    )
    columns: ClassVar[tuple[Column, ...]] = (
        Column("in_service", "", "1 in service, 0 out of service", "u1", label="in service",
               words=("OUT", "yes")),
        Column("bleed", "kg/s", "bleed steam flow"),
        Column("shell_pressure", "Pa", "shell pressure", when_out=False, label="p shell"),
        Column("saturation_temperature", "K", "saturation temperature in the shell",
               when_out=False, console=False),
        Column("feedwater_in_temperature", "K", "feedwater inlet temperature", when_out=False,
               label="T fw in"),
        Column("feedwater_out_temperature", "K", "feedwater outlet temperature", when_out=False,
               label="T fw out"),
        Column("drain_temperature", "K", "drain outlet temperature", when_out=False,
               label="T drain"),
        Column("feedwater_in_enthalpy", "J/kg", "feedwater inlet enthalpy", console=False),
        Column("feedwater_out_enthalpy", "J/kg", "feedwater outlet enthalpy", console=False),
        Column("drain_enthalpy", "J/kg", "drain outlet enthalpy", when_out=False,
               console=False),
        Column("bleed_enthalpy", "J/kg", "bleed steam enthalpy", when_out=False,
               console=False),
        Column("feedwater_flow", "kg/s", "feedwater (or condensate) flow", console=False),
        Column("drain_flow", "kg/s", "drain flow leaving the heater", console=False),
        Column("duty", "W", "heat given to the feedwater"),
        Column("steam_release", "W", "heat given up by bleed and drains", console=False),
        Column("ttd", "K", "terminal temperature difference (NaN for a deaerator)",
               when_out=False, display="K", label="TTD"),
        Column("dca", "K", "drain cooler approach (NaN for a deaerator)", when_out=False,
               display="K", label="DCA"),
    )

    name: str
    heater_type: str
    extraction: str
    line_drop: float = 0.03
    ttd: float = 0.0
    dca: float | None = None
    drain_to: str = "condenser"
    drain_to_when_out: str | None = None
    ttd_method: str = "constant"
    ua: float = 0.0
    cp: float = 4200.0
    closure: float = 1.0
    duty_design: float = 1.0
    drain_pump_efficiency: float = 0.75
    # further extractions feeding this heater: paired bleeds at the matching nodes of
    # parallel branches (a double-flow section); the first is ``extraction``
    paired: tuple = ()
    shares: tuple = (1.0,)  # each extraction's share of the heater's bleed [-]

    @property
    def extractions(self) -> tuple[str, ...]:
        """Every extraction that feeds the heater, the first one first."""
        return (self.extraction,) + tuple(self.paired)

    @classmethod
    def read(cls, hr, ctx: ReadContext):
        hname = hr.string("name")
        if hname:
            hr.where = Where(ctx.file, f"heater '{hname}'", None)
        kind = hr.string("type", default="closed", choices=HEATER_TYPES)
        paired: tuple = ()
        raw = hr.raw("extraction", None)
        if isinstance(raw, list):
            if len(raw) < 2 or not all(isinstance(v, str) for v in raw) or len(set(raw)) != len(
                    raw):
                hr.problems.add(hr.where.child("extraction").error(
                    "expected an extraction name, or a list of two or more different names "
                    "(paired bleeds at matching nodes of parallel branches)"))
                extraction = None
            else:
                extraction, paired = raw[0], tuple(raw[1:])
        else:
            extraction = hr.string("extraction")
        line_drop = hr.number("line_pressure_drop", default=0.03, lo=0.0, hi=0.5)
        ttd = dca = None
        drain_to = "condenser"
        when_out = None
        method = "constant"
        if kind == "closed":
            ttd = hr.quantity("ttd", "temperature_difference", lo=-30.0, hi=60.0)
            dca = hr.quantity("dca", "temperature_difference", default=None, lo=0.0, hi=60.0)
            drain_to = hr.string("drain_to", default="condenser")
            when_out = hr.string("drain_to_when_out_of_service", default=None)
            method = hr.string("ttd_method", default="constant", choices=TTD_METHODS)
        dp_eff = hr.number("drain_pump_efficiency", default=0.75, lo=0.0, hi=1.0, lo_open=True)
        hr.finish()
        if None in (hname, kind, extraction):
            return None
        # a wrong TTD is already a problem of the file; the heater is still known, so the
        # feedwater train naming it gives no second, unrelated error
        return cls(hname, kind, extraction, line_drop if line_drop is not None else 0.03,
                   ttd or 0.0, dca, drain_to or "condenser", when_out, method or "constant",
                   drain_pump_efficiency=dp_eff or 0.75, paired=paired)

    def shell_pressure(self, p_node: float) -> float:
        """Shell pressure [Pa] from extraction-node pressure [Pa] less the line drop."""
        return heater_shell_pressure(p_node, self.line_drop)

    def outlet_temperature(self, T_sat: float, T_in: float, m_water: float) -> float:
        """Feedwater outlet temperature [K] (closed heater) from the shell saturation
        temperature [K], the inlet temperature [K] and the water flow [kg/s]."""
        if self.ttd_method == "ua" and self.ua > 0.0:  # ua is 0 until calibrated
            ttd = effectiveness_ttd(T_sat, T_in, m_water, self.ua, self.cp)
        else:
            ttd = self.ttd
        return closed_heater_outlet_temperature(T_sat, ttd)

    def state_row(self, hs) -> tuple:
        """Values of :attr:`columns` from the water side's state of this heater
        (NaN where a value has no meaning: most of a heater out of service, TTD and
        DCA of a deaerator)."""
        on = hs.in_service
        closed = on and self.heater_type == "closed"
        return (1 if on else 0, hs.bleed,
                hs.shell_pressure if on else _NAN, hs.T_sat if on else _NAN,
                hs.T_in if on else _NAN, hs.T_out if on else _NAN,
                hs.T_drain if on else _NAN, hs.h_in, hs.h_out,
                hs.h_drain if on else _NAN, hs.h_bleed if on else _NAN,
                hs.m_water, hs.drain_flow, hs.duty, hs.steam_release,
                hs.ttd if closed else _NAN, hs.dca if closed else _NAN)

    def point_row(self, point) -> tuple:
        return self.state_row(point.heaters[self.name])

    def apply_settings(self, values, where, target) -> None:
        if values.get("in_service") is False:
            target.heaters_out.add(self.name)
