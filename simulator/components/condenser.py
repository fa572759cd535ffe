"""Surface condenser: the exhaust pressure from the cooling water.

A condenser sits at an exhaust node.  Where the case does not give the
exhaust pressure, that pressure is an unknown of the point and the
condenser's law (:mod:`simulator.physics.condenser`) is its residual: the
heat rejected at the node (exhaust steam, heater drains and make-up in,
condensate out) heats the cooling water, and the condensing temperature
follows from the water's inlet temperature, flow and the overall heat-transfer
coefficient, which is fixed at design and corrected off design for water
velocity and temperature (the chosen law) and for the cleanliness factor.

Condensers in series on the cooling water (a multi-pressure condenser) name
the shell whose water they receive (``after``): its outlet temperature is
their inlet temperature.

The cooling water comes at a given inlet temperature (once-through: river,
sea) or from a wet cooling tower (``cooling_tower = {...}`` on the first
shell): the tower's Merkel characteristic, fixed at design, gives the
cold-water temperature from the wet-bulb temperature and the range (the
water's rise through all shells of the circuit;
:mod:`simulator.physics.cooling_tower`).
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field
from typing import ClassVar

from ..errors import InputError
from ..physics.condenser import (
    HEAT_TRANSFER_LAWS,
    condensing_temperature,
    cooling_water_rise,
    dittus_boelter,
    lmtd,
    ntu,
    rest_resistance,
    tube_coefficient,
)
from ..physics.cooling_tower import CP_WATER, cold_water_temperature, merkel_number
from ..steam.transport import WaterTable
from .base import Column, Component, ReadContext, Setting, Tunable

__all__ = ["Condenser", "CondenserState"]

T_SCALE = 10.0  # [K] scale of the condenser residual (condensing temperature error)


@dataclass
class CondenserState:
    """A condenser at one evaluation: heat rejected [W], cooling-water flow [kg/s],
    inlet and outlet temperature [K], condensing temperature [K] from its law,
    UA [W/K], cleanliness [-]."""

    duty: float
    m_water: float
    T_in: float
    T_out: float
    T_condensing: float
    ua: float
    cleanliness: float


@dataclass
class Condenser(Component):
    """A surface condenser at exhaust node ``node``.

    Attributes
    ----------
    m_water_design : design cooling-water flow [kg/s]
    T_in_design : design cooling-water inlet temperature [K]
    cleanliness_design : cleanliness factor of the design heat balance [-]
    law : heat-transfer law, :data:`~simulator.physics.condenser.HEAT_TRANSFER_LAWS`
    area : tube surface (outer) [m^2]; d_o, d_i : tube diameters [m];
        velocity_design : design water velocity in the tubes [m/s]
        (``"tube_resistances"`` only)
    after : the condenser whose cooling water this one receives, if any
    ua_design : design UA [W/K]; r_rest : resistances besides the water film
        [m^2 K/W]; duty_design : heat rejected at design [W]; rho_design : water
        density at design [kg/m^3] (calibrated)
    """

    table: ClassVar[str] = "condenser"
    title: ClassVar[str] = "condenser"
    results: ClassVar[str] = "condensers"
    settings_table: ClassVar[str] = "condensers"
    frees_node: ClassVar[bool] = True
    settings: ClassVar[tuple[Setting, ...]] = (
        Setting("inlet_temperature", "temperature", "cooling-water inlet temperature "
                "(a condenser that receives another's water: not settable)", lo=274.15,
                hi=353.15),
        Setting("cooling_water_flow", "mass_flow", "cooling-water flow", lo=0.0),
        Setting("cleanliness", "fraction", "cleanliness factor", lo=0.05, hi=1.2),
        Setting("wet_bulb_temperature", "temperature", "wet-bulb temperature of the air "
                "entering the cooling tower (a condenser fed by one)", lo=243.15, hi=323.15),
        Setting("pressure", "pressure", "the condenser's pressure, given (its law then "
                "gives the effective cleanliness instead)", lo=611.0, hi=1e5),
    )
    columns: ClassVar[tuple[Column, ...]] = (
        Column("pressure", "Pa", "condenser (exhaust) pressure"),
        Column("duty", "W", "heat rejected to the cooling water"),
        Column("cooling_water_flow", "kg/s", "cooling-water flow", label="water flow"),
        Column("inlet_temperature", "K", "cooling-water inlet temperature", label="water in"),
        Column("outlet_temperature", "K", "cooling-water outlet temperature",
               label="water out"),
        Column("temperature_rise", "K", "cooling-water temperature rise", display="K",
               label="rise"),
        Column("ttd", "K", "terminal temperature difference, condensing temperature less "
               "water outlet", display="K", label="TTD"),
        Column("cleanliness", "-", "effective cleanliness factor: the one with which the "
               "design UA, corrected for water flow and temperature, gives this pressure",
               display="%"),
        Column("ua", "W/K", "overall heat-transfer coefficient times surface", label="UA"),
    )
    tunables: ClassVar[tuple[Tunable, ...]] = (
        Tunable("cleanliness", "cleanliness_design", "-", "cleanliness factor the design UA "
                "stands for", 0.05, 1.2),
    )

    name: str
    node: str
    m_water_design: float
    T_in_design: float
    cleanliness_design: float
    law: str = "sqrt_velocity"
    area: float | None = None
    d_o: float | None = None
    d_i: float | None = None
    velocity_design: float | None = None
    after: str | None = None
    tower: dict | None = None  # wet_bulb [K], ratio (L/G) [-], exponent [-], air_pressure [Pa]
    tower_merkel: float = 0.0  # the tower's Merkel number at design [-]
    ua_design: float = 0.0
    r_rest: float = 0.0
    duty_design: float = 0.0
    rho_design: float = 0.0
    water: WaterTable | None = field(default=None, repr=False, compare=False)

    @classmethod
    def read(cls, rr, ctx: ReadContext):
        name = rr.string("name")
        node = rr.string("node")
        m_w = rr.quantity("cooling_water_flow", "mass_flow", positive=True)
        T_in = rr.quantity("inlet_temperature", "temperature", lo=274.15, hi=353.15,
                           reason="liquid cooling water")
        cf = rr.quantity("cleanliness", "fraction", lo=0.05, hi=1.2)
        tubes = [k for k in ("tube_outer_diameter", "tube_inner_diameter", "water_velocity",
                             "area") if k in rr.data]
        law = rr.string("heat_transfer", default="tube_resistances" if tubes
                        else "sqrt_velocity", choices=HEAT_TRANSFER_LAWS)
        area = rr.quantity("area", "area", default=None, positive=True)
        d_o = rr.quantity("tube_outer_diameter", "length", default=None, positive=True)
        d_i = rr.quantity("tube_inner_diameter", "length", default=None, positive=True)
        vel = rr.quantity("water_velocity", "velocity", default=None, positive=True)
        after = rr.string("after", default=None)
        tower = None
        if rr.has("cooling_tower"):
            tr = rr.sub("cooling_tower")
            tower = {
                "wet_bulb": tr.quantity("wet_bulb_temperature", "temperature", lo=243.15,
                                        hi=323.15, reason="the air of a wet cooling tower"),
                "ratio": tr.number("water_to_air_ratio", lo=0.1, hi=5.0),
                "exponent": tr.number("exponent", default=0.6, lo=0.1, hi=1.5),
                "air_pressure": tr.quantity("air_pressure", "pressure", default=(
                    ctx.atmosphere or 101325.0), lo=5e4, hi=1.2e5),
            }
            tr.finish()
            if None in tower.values():
                tower = None
            elif after is not None:
                rr.problems.add(rr.where.child("cooling_tower").error(
                    "a shell that receives another's water has no tower of its own; give the "
                    "tower on the first shell of the circuit"))
        rr.finish(also_valid=("cooling_tower",))
        if law == "tube_resistances":
            for key, v in (("area", area), ("tube_outer_diameter", d_o),
                           ("tube_inner_diameter", d_i), ("water_velocity", vel)):
                if v is None:
                    rr.problems.add(rr.where.child(key).error(
                        "the 'tube_resistances' heat-transfer law needs the tube surface, both "
                        "tube diameters and the design water velocity; give them, or "
                        "heat_transfer = 'sqrt_velocity'"))
            if d_o is not None and d_i is not None and d_i >= d_o:
                rr.problems.add(rr.where.child("tube_inner_diameter").error(
                    "must be smaller than the outer diameter"))
        if None in (name, node, m_w, T_in, cf):
            return None
        return cls(name, node, m_w, T_in, cf, law, area, d_o, d_i, vel, after, tower)

    def check_design(self, ctx: ReadContext) -> None:
        if ctx.design_pressure is not None and self.node not in ctx.design_pressure:
            ctx.problems.add(InputError(f"node {self.node!r} does not exist", file=ctx.file,
                                        table=self.where, key="node"))

    # ------------------------------------------------------------------ laws
    def _water(self, duty: float, T_in: float, m_w: float) -> tuple:
        """Water properties ``(rho, cp, mu, k)`` at the mean water temperature, the
        rise taken with the heat capacity at the inlet (no iteration, so the design
        and every point evaluate the law alike)."""
        return self.water(T_in + 0.5 * cooling_water_rise(duty, m_w, self.water(T_in)[1]))

    def _ua(self, props: tuple, m_w: float, cf: float) -> float:
        """UA [W/K] with water ``props`` (as :meth:`_water`), flow ``m_w`` [kg/s] and
        cleanliness ``cf`` [-]."""
        rho, cp, mu, k = props
        if self.law == "sqrt_velocity":
            rho_d = self.rho_design
            ratio = (m_w / rho) / (self.m_water_design / rho_d)
            return self.ua_design * math.sqrt(ratio) * cf / self.cleanliness_design
        vel = self.velocity_design * (m_w / rho) / (self.m_water_design / self.rho_design)
        h_w = dittus_boelter(rho, cp, mu, k, vel, self.d_i)
        u_clean = tube_coefficient(h_w, self.d_o, self.d_i, self.r_rest)
        return u_clean * self.area * cf

    def state(self, duty: float, T_in: float, m_w: float, cf: float) -> CondenserState:
        """The condenser rejecting ``duty`` [W] to water at ``T_in`` [K], flow ``m_w``
        [kg/s], cleanliness ``cf`` [-]."""
        props = self._water(duty, T_in, m_w)
        ua = self._ua(props, m_w, cf)
        cp = props[1]
        rise = cooling_water_rise(duty, m_w, cp)
        T_s = condensing_temperature(T_in, rise, ntu(ua, m_w, cp))
        return CondenserState(duty, m_w, T_in, T_in + rise, T_s, ua, cf)

    def calibrate_design(self, duty: float, p: float, steam, circuit_duty: float) -> None:
        """Fix the design UA from the heat rejected at design ``duty`` [W] at the
        design condenser pressure ``p`` [Pa]; a tower's Merkel number from the heat
        of its circuit ``circuit_duty`` [W]."""
        self.water = WaterTable()
        self.duty_design = duty
        if self.tower is not None:
            t = self.tower
            if not self.T_in_design > t["wet_bulb"]:
                raise InputError(
                    f"the design cooling water ({self.T_in_design - 273.15:.2f} degC) must be "
                    f"warmer than the tower's design wet bulb ({t['wet_bulb'] - 273.15:.2f} "
                    f"degC)", table=self.where, key="cooling_tower")
            rng = circuit_duty / (self.m_water_design * CP_WATER)
            self.tower_merkel = merkel_number(self.T_in_design, self.T_in_design + rng,
                                              t["wet_bulb"], t["ratio"], t["air_pressure"])
            if not math.isfinite(self.tower_merkel):
                raise InputError(
                    "at design the tower's air would saturate before cooling the water: raise "
                    "the design approach (inlet temperature over the wet bulb) or lower the "
                    "water-to-air ratio", table=self.where, key="cooling_tower")
        T_s = steam.T_sat(p)
        props = self._water(duty, self.T_in_design, self.m_water_design)
        self.rho_design = props[0]
        rise = cooling_water_rise(duty, self.m_water_design, props[1])
        T_out = self.T_in_design + rise
        if not T_out < T_s:
            raise InputError(
                f"at design the cooling water would leave at {T_out - 273.15:.2f} degC, not below "
                f"the condensing temperature {T_s - 273.15:.2f} degC at the design pressure: "
                f"too little cooling water for the {duty / 1e6:.4g} MW rejected",
                table=self.where, key="cooling_water_flow")
        ua = duty / lmtd(T_s, self.T_in_design, T_out)
        self.ua_design = ua
        if self.law == "tube_resistances":
            h_w = dittus_boelter(*props, self.velocity_design, self.d_i)
            u_clean = ua / self.area / self.cleanliness_design
            self.r_rest = rest_resistance(u_clean, h_w, self.d_o, self.d_i)
            if self.r_rest <= 0.0:
                raise InputError(
                    f"the design heat balance needs an overall coefficient of {u_clean:.0f} "
                    f"W/(m^2 K) (clean), more than the water film alone allows "
                    f"({h_w * self.d_i / self.d_o:.0f}); check the area and the tube data",
                    table=self.where, key="area")

    def node_state(self, duty: float, march, upstream: dict,
                   circuit_duty: float) -> CondenserState:
        """The condenser at one evaluation rejecting ``duty`` [W]: the case's cooling
        water (``march.setting``), the water leaving the shell it follows
        (``upstream``: states of the condensers before it), or its tower's cold
        water for the heat all shells of its circuit reject (``circuit_duty`` [W])."""
        cf = march.setting(self, "cleanliness", self.cleanliness_design)
        if self.after is not None:
            up = upstream[self.after]
            return self.state(duty, up.T_out, up.m_water, cf)
        m_w = march.setting(self, "cooling_water_flow", self.m_water_design)
        if self.tower is not None:
            T_wb = march.setting(self, "wet_bulb_temperature", self.tower["wet_bulb"])
            # the search starts from the design approach: the same start at every
            # evaluation, so an answer never depends on the evaluations before it
            T_in = self.cold_water(T_wb, circuit_duty, m_w,
                                   self.T_in_design - self.tower["wet_bulb"])
        else:
            T_in = march.setting(self, "inlet_temperature", self.T_in_design)
        return self.state(duty, T_in, m_w, cf)

    def cold_water(self, T_wb: float, circuit_duty: float, m_w: float,
                   start: float | None = None) -> float:
        """Cold-water temperature [K] of the tower at wet bulb ``T_wb`` [K] for the
        heat of the circuit ``circuit_duty`` [W] and water flow ``m_w`` [kg/s]: its
        design Merkel number corrected as ``(L/G)^-n`` with the air flow constant;
        ``start`` [K] an approach to start the search from."""
        t = self.tower
        lg = t["ratio"] * m_w / self.m_water_design
        merkel = self.tower_merkel * (lg / t["ratio"]) ** -t["exponent"]
        rng = circuit_duty / (m_w * CP_WATER)
        return cold_water_temperature(T_wb, rng, merkel, lg, t["air_pressure"], start)

    def residual(self, p: float, st: CondenserState, steam) -> float:
        """The condenser's law at pressure ``p`` [Pa]: saturation temperature less the
        condensing temperature the cooling water allows, over :data:`T_SCALE` [-]."""
        return (steam.T_sat(p) - st.T_condensing) / T_SCALE

    def describe(self) -> list[str]:
        law = ("tube resistances (Dittus-Boelter water film, the rest fixed at design: "
               f"{self.r_rest * 1e3:.4g} m^2 K/kW)" if self.law == "tube_resistances"
               else "U proportional to the square root of water velocity")
        lines = [f"condenser {self.name!r} at {self.node}: design UA "
                 f"{self.ua_design / 1e6:.4g} MW/K for {self.duty_design / 1e6:.4g} MW with "
                 f"{self.m_water_design:.5g} kg/s of water at {self.T_in_design - 273.15:.4g} "
                 f"degC, cleanliness {self.cleanliness_design:.3g}; {law}"
                 + (f"; water from {self.after!r}" if self.after else "")]
        if self.tower is not None:
            t = self.tower
            lines.append(f"  wet cooling tower: design wet bulb {t['wet_bulb'] - 273.15:.4g} "
                         f"degC, water-to-air ratio {t['ratio']:g}, exponent {t['exponent']:g}, "
                         f"air at {t['air_pressure'] / 1e3:.5g} kPa; Merkel number "
                         f"{self.tower_merkel:.4f} at design")
        return lines

    def point_row(self, point) -> tuple:
        st: CondenserState = point.records[self.name]
        p = point.pressure(self.node)
        T_s = point.saturation_temperature(self.node)
        # the cleanliness that gives this pressure (the set one where the law set it;
        # UA is proportional to it in both laws)
        ua_needed = (st.duty / lmtd(T_s, st.T_in, st.T_out) if T_s > st.T_out
                     else math.inf)
        return (p, st.duty, st.m_water, st.T_in, st.T_out, st.T_out - st.T_in,
                T_s - st.T_out, st.cleanliness * ua_needed / st.ua, ua_needed)

    def apply_settings(self, values, where, target) -> None:
        if self.after is not None and values.get("inlet_temperature") is not None:
            target.problems.add(where.child("inlet_temperature").error(
                f"condenser {self.name!r} receives the cooling water of {self.after!r}: set "
                f"the inlet temperature there"))
            return
        if self.tower is not None and values.get("inlet_temperature") is not None:
            target.problems.add(where.child("inlet_temperature").error(
                f"condenser {self.name!r} takes its water from its cooling tower: set the "
                f"wet_bulb_temperature instead"))
            return
        if self.tower is None and values.get("wet_bulb_temperature") is not None:
            target.problems.add(where.child("wet_bulb_temperature").error(
                f"condenser {self.name!r} has no cooling tower: set its inlet_temperature"))
            return
        super().apply_settings(values, where, target)

    @classmethod
    def check_kind(cls, comps: list, ctx: ReadContext, exhaust_nodes: list[str]) -> None:
        seen: dict[str, str] = {}
        names: list[str] = []
        for c in comps:
            if c.node not in exhaust_nodes:
                ctx.problems.add(InputError(
                    f"a condenser sits at an exhaust node; {c.node!r} is not in [exhaust] "
                    f"nodes ({', '.join(exhaust_nodes)})", file=ctx.file, table=c.where,
                    key="node"))
            if c.node in seen:
                ctx.problems.add(InputError(
                    f"node {c.node!r} already has condenser {seen[c.node]!r}", file=ctx.file,
                    table=c.where, key="node"))
            seen[c.node] = c.name
            if c.after is not None and c.after not in names:
                ctx.problems.add(InputError(
                    f"{c.after!r} is not a condenser listed before this one; list the shells "
                    f"in the order the cooling water passes them", file=ctx.file,
                    table=c.where, key="after"))
            names.append(c.name)
