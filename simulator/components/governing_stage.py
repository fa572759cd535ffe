"""Governing stage: nozzle-group (partial-arc) admission behind sequential control valves.

The first stage of a nozzle-governed turbine is fed through several nozzle
groups, each behind its own control valve, from the throttle node to the
governing-stage exit (the *first-stage pressure*, the trade's load indicator).
Its laws are in :mod:`simulator.physics.governing`:

* a wide-open valve drops ``wide_open_drop`` of its inlet pressure at design,
  scaling with its flow squared and inlet volume
  (:func:`simulator.physics.pressure_drop.scaled_pressure_drop`); its nozzle
  group passes the nozzle flow from its nozzle-box pressure
  (:func:`~simulator.physics.governing.nozzle_flux`, real-steam exponent);
* a partly open valve throttles its own group only: its flow is the rest of
  the throttle flow, its nozzle-box pressure the one at which its group passes
  that flow; the valves open in their listed order, the next starting
  ``overlap`` before the previous is fully open (openings are fractions of
  each group's wide-open flow at the point's pressures);
* each stream expands from its nozzle box to the first-stage pressure with an
  efficiency that follows its velocity ratio and the admitted arc
  (:func:`~simulator.physics.governing.governing_efficiency`); the streams mix
  at the exit.

It is the admission of the turbine (the component leaving the throttle node).
Under a held throttle pressure its valves take whatever the flow leaves
(valve mode ``"nozzle_groups"``: in sequence; ``"throttle"``: all together,
the full arc); with the throttle pressure sliding a number of valves stand
wide open and the rest closed, and the nozzle law sets the throttle pressure.

Calibration from the design heat balance: at design flow the first
``valves_open_at_design`` valves are wide open and the others closed; the
first-stage pressure is the outlet node's design pressure and ``efficiency``
the design efficiency from the nozzle boxes.  With an ``overlap`` the design
point is exactly reproduced with those valves wide open (sliding pressure, or
the held design pressure when the next valve has not started).
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field
from typing import ClassVar

from ..errors import InputError
from ..physics.governing import (
    NOZZLE_LAWS,
    governing_efficiency,
    mean_isentropic_exponent,
    nozzle_flux,
    peak_efficiency,
    solve_increasing,
    valve_openings,
)
from ..physics.pressure_drop import scaled_pressure_drop
from ..units import parse
from .base import Column, ReadContext, SteamPathComponent, Tunable

__all__ = ["GoverningStage", "GoverningState"]


@dataclass
class GoverningState:
    """The governing stage at one evaluation (the march record).

    ``openings`` [-], ``box_pressures`` [Pa] (NaN for a closed valve) and
    ``flows`` [kg/s] per valve; ``power`` [W]; ``isentropic_power`` [W] from
    the nozzle boxes; ``throttling_loss`` [W] the isentropic power lost in the
    valves; ``admitted`` [-] the admitted arc; ``capacity_used`` [-] the flow
    over what every valve wide open would pass at these pressures (held
    throttle pressure only; NaN otherwise).
    """

    openings: list[float]
    box_pressures: list[float]
    flows: list[float]
    power: float
    isentropic_power: float
    throttling_loss: float
    admitted: float
    capacity_used: float = math.nan


@dataclass
class GoverningStage(SteamPathComponent):
    """Control valves and nozzle groups from the throttle node to ``outlet``.

    Attributes
    ----------
    valves : valve names in opening order
    arcs : each valve's share of the nozzle arc [-] (sum 1)
    valves_open_at_design : valves wide open at design (the others closed)
    wide_open_fraction : wide-open valve drop at design over the throttle pressure [-]
    eta_design : design efficiency from the nozzle boxes [-]
    overlap : opening at which the next valve starts, back from fully open [-]
    law : nozzle law, :data:`~simulator.physics.governing.NOZZLE_LAWS`
    speed_ratio : velocity ratio at design over the best one [-]
    loss_coefficient : partial-admission (pumping) loss coefficient ``K`` [-]
    minimum_opening : opening below which a throttling valve is cautioned [-]
    C, kappa, eta_peak, dh_design, dp_design, g_design, v_design : calibrated
        nozzle constant [m^2 per unit arc], isentropic exponent [-], peak
        efficiency [-], design isentropic drop from the boxes [J/kg], design
        wide-open valve drop [Pa], design flow per unit open arc [kg/s],
        design throttle volume [m^3/kg]
    """

    table: ClassVar[str] = "governing_stage"
    many: ClassVar[bool] = False
    title: ClassVar[str] = "governing stage"
    results: ClassVar[str] = "governing_stage"
    part_results: ClassVar[str] = "governing_valves"
    inlet_key: ClassVar[str] = "node"
    calibration_key: ClassVar[str] = "efficiency"
    admits: ClassVar[bool] = True
    expands: ClassVar[bool] = True
    columns: ClassVar[tuple[Column, ...]] = (
        Column("flow", "kg/s", "steam flow through the governing stage"),
        Column("efficiency", "-", "efficiency from the nozzle boxes to the first-stage "
               "pressure", display="%"),
        Column("power", "W", "power of the governing stage"),
        Column("throttling_loss", "W", "isentropic power lost by throttling in the control "
               "valves", label="throttling"),
        Column("admitted_arc", "-", "admitted share of the nozzle arc", display="%",
               label="arc"),
        Column("valves_wide_open", "-", "number of control valves wide open", "i4",
               label="wide open"),
        Column("capacity_used", "-", "throttle flow over what every valve wide open would "
               "pass at the held throttle pressure (NaN: sliding pressure)", display="%",
               label="capacity"),
    )
    part_columns: ClassVar[tuple[Column, ...]] = (
        Column("opening", "-", "valve opening, fraction of its group's wide-open flow",
               display="%"),
        Column("nozzle_box_pressure", "Pa", "pressure after the valve, ahead of its nozzles "
               "(NaN: closed)", label="box pressure"),
        Column("flow", "kg/s", "steam flow through the valve and its nozzle group"),
    )
    tunables: ClassVar[tuple[Tunable, ...]] = (
        Tunable("efficiency", "eta_peak", "-", "peak blading efficiency", 0.0, 1.0),
        Tunable("nozzle_constant", "C", "m^2", "nozzle throat area of the whole arc", 0.0),
    )

    name: str
    inlet: str
    outlet: str
    valves: list[str] = field(default_factory=list)
    arcs: list[float] = field(default_factory=list)
    valves_open_at_design: int = 1
    wide_open_fraction: float = 0.0
    eta_design: float = 0.0
    overlap: float = 0.0
    law: str = "isentropic"
    speed_ratio: float = 1.0
    loss_coefficient: float = 0.0
    minimum_opening: float = 0.0
    C: float = 0.0
    kappa: float = 1.3
    eta_peak: float = 0.0
    dh_design: float = 0.0
    dp_design: float = 0.0
    g_design: float = 0.0
    v_design: float = 0.0

    @classmethod
    def read(cls, rr, ctx: ReadContext):
        to = rr.string("to")
        valves = rr.raw("valves")
        arcs_raw = rr.raw("arcs")
        w = rr.where
        names = arcs = None
        if not (isinstance(valves, list) and valves and all(isinstance(v, str) for v in valves)):
            rr.problems.add(w.child("valves").error(
                "expected a list of control-valve names in the order they open"))
        elif len(set(valves)) != len(valves):
            rr.problems.add(w.child("valves").error("a valve is named twice"))
        else:
            names = valves
        if isinstance(arcs_raw, list) and names is not None and len(arcs_raw) == len(names):
            try:
                arcs = [parse(a, "fraction", w.child("arcs")) for a in arcs_raw]
            except InputError as exc:
                rr.problems.add(exc)
            if arcs is not None and min(arcs) <= 0.0:
                rr.problems.add(w.child("arcs").error(
                    f"each valve's share of the nozzle arc must be positive, got "
                    f"{arcs_raw[arcs.index(min(arcs))]!r}"))
                arcs = None
            elif arcs is not None and abs(sum(arcs) - 1.0) > 1e-3:
                rr.problems.add(w.child("arcs").error(
                    f"the shares of the nozzle arc must add up to 100 %, not "
                    f"{100 * sum(arcs):.6g} %"))
                arcs = None
            elif arcs is not None:
                arcs = [a / sum(arcs) for a in arcs]  # 3 x 33.33 % is the whole arc
        elif names is not None:
            rr.problems.add(w.child("arcs").error(
                f"expected a list of {len(names)} shares of the nozzle arc, one for each "
                f"valve, such as ['30 %', '30 %', '20 %', '20 %']"))
        n_open = rr.number("valves_open_at_design", lo=1,
                           hi=len(names) if names else None)
        if n_open is not None and n_open != int(n_open):
            rr.problems.add(w.child("valves_open_at_design").error(
                f"expected a whole number of valves, got {n_open!r}"))
            n_open = None
        drop = rr.quantity("wide_open_drop", "fraction", lo=0.0, hi=0.5)
        eta = rr.number("efficiency", lo=0.0, hi=1.0, lo_open=True)
        overlap = rr.quantity("overlap", "fraction", default=0.0, lo=0.0, hi=0.9)
        law = rr.string("nozzle_law", default="isentropic", choices=NOZZLE_LAWS)
        speed = rr.number("speed_ratio_at_design", default=1.0, lo=0.5, hi=1.5)
        loss = rr.number("admission_loss", default=ADMISSION_LOSS, lo=0.0, hi=0.5)
        min_open = rr.quantity("minimum_opening", "fraction", default=0.0, lo=0.0, hi=0.9)
        rr.finish()
        if None in (to, names, arcs, n_open, drop, eta) or ctx.throttle_node is None:
            return None
        return cls("governing stage", ctx.throttle_node, to, list(names), arcs, int(n_open),
                   drop, eta, overlap, law, speed, loss, min_open)

    # ------------------------------------------------------------------ laws
    def _flux(self, steam, p_box: float, h: float, p_out: float) -> float:
        """Flow per unit arc [kg/s] of nozzle groups fed at ``p_box`` [Pa]."""
        return self.C * nozzle_flux(p_box, steam.v_ph(p_box, h), p_out, self.kappa, self.law)

    def _valve_drop(self, g: float, v_in: float) -> float:
        """Drop [Pa] of a wide-open valve passing ``g`` [kg/s per unit arc]."""
        return scaled_pressure_drop(g, v_in, self.dp_design, self.g_design, self.v_design)

    def _box_pressure(self, steam, g: float, h: float, p_out: float, p_top: float) -> float:
        """The nozzle-box pressure [Pa] at which the groups pass ``g`` [kg/s per
        unit arc] to ``p_out`` [Pa]; ``p_top`` [Pa] a first upper bound."""
        top = p_top
        for _ in range(60):
            if self._flux(steam, top, h, p_out) >= g:
                break
            top *= 1.5
        return solve_increasing(lambda pb: self._flux(steam, pb, h, p_out), g, p_out, top)

    def _wide_open(self, steam, p_in: float, h: float, v_in: float, p_out: float):
        """``(flow per unit arc [kg/s], box pressure [Pa])`` of a wide-open valve."""
        if self.dp_design == 0.0:
            return self._flux(steam, p_in, h, p_out), p_in
        p_box = solve_increasing(
            lambda pb: pb + self._valve_drop(self._flux(steam, pb, h, p_out), v_in),
            p_in, p_out, p_in)
        return self._flux(steam, p_box, h, p_out), p_box

    def _streams(self, steam, h_in, p_out, boxes, flows):
        """``(power [W], isentropic power [W], admitted arc [-])`` of the streams
        from ``boxes`` [Pa] carrying ``flows`` [kg/s].

        A group counts in the admitted arc by its isentropic drop over the largest
        one: fully when its valve is as open as any, nothing as its valve closes
        (so the admitted arc, and with it the pumping loss, change continuously
        as a valve cracks open; all valves together admit the whole arc).
        """
        drops: dict[float, float] = {}
        for p_box, m in zip(boxes, flows):
            if m > 0.0 and p_box not in drops:
                drops[p_box] = max(h_in - steam.h_ps(p_out, steam.s_ph(p_box, h_in)), 0.0)
        top = max(drops.values(), default=0.0)
        if top <= 0.0:
            return 0.0, 0.0, 0.0
        admitted = sum(a * drops[p] / top for a, p, m in zip(self.arcs, boxes, flows)
                       if m > 0.0)
        power = iso = 0.0
        for p_box, m in zip(boxes, flows):
            if m <= 0.0:
                continue
            dh = drops[p_box]
            if dh > 0.0:
                r = self.speed_ratio * math.sqrt(self.dh_design / dh)
                power += m * dh * governing_efficiency(r, self.eta_peak, admitted,
                                                       self.loss_coefficient)
            iso += m * dh
        return power, iso, admitted

    # ---------------------------------------------------------- calibration
    def calibrate(self, m, p_in, h_in, p_out, steam, model) -> float:
        n = self.valves_open_at_design
        open_arc = sum(self.arcs[:n])
        self.dp_design = self.wide_open_fraction * p_in
        p_box = p_in - self.dp_design
        if p_box <= p_out:
            raise InputError(
                f"the wide-open valve drop leaves {p_box / 1e5:.4g} bar ahead of the nozzles, "
                f"not above the first-stage pressure {p_out / 1e5:.4g} bar", file=model.file,
                table=self.where, key="wide_open_drop")
        v_box = steam.v_ph(p_box, h_in)
        s_box = steam.s_ph(p_box, h_in)
        p_mid = max(0.55 * p_box, p_out)  # about the critical pressure of the nozzles
        self.kappa = mean_isentropic_exponent(
            p_box, v_box, p_mid, steam.v_ph(p_mid, steam.h_ps(p_mid, s_box)))
        self.g_design = m / open_arc
        self.v_design = steam.v_ph(p_in, h_in)
        self.C = 1.0
        self.C = self.g_design / self._flux(steam, p_box, h_in, p_out)
        self.dh_design = h_in - steam.h_ps(p_out, s_box)
        self.eta_peak = peak_efficiency(self.eta_design, self.speed_ratio, open_arc,
                                        self.loss_coefficient)
        if not 0.0 < self.eta_peak < 1.0:
            raise InputError(
                f"the design efficiency {self.eta_design:.3f} with admission loss coefficient "
                f"{self.loss_coefficient:g} at {100 * open_arc:.3g} % arc needs a peak blading "
                f"efficiency of {self.eta_peak:.3f}, outside (0, 1)", file=model.file,
                table=self.where,
                key="admission_loss" if self.loss_coefficient > 0.0 else "efficiency")
        return h_in - self.eta_design * self.dh_design

    # ----------------------------------------------------------------- march
    def evaluate(self, march, i, j, m_net):
        steam = march.steam
        p_in, h_in, p_out = march.p[i], march.h[i], march.p[j]
        v_in = steam.v_ph(p_in, h_in)
        arcs = self.arcs
        n_all = len(arcs)
        together = march.cond.valve_mode == "throttle"
        m = m_net
        capacity = math.nan
        if march.admission_throttles:  # held throttle pressure: the valves take the rest
            g_wo, p_wo = self._wide_open(steam, p_in, h_in, v_in, p_out)
            capacity = m / g_wo if g_wo > 0.0 else math.inf
            if capacity >= 1.0 or together:
                o = min(capacity, 1.0)
                openings = [o] * n_all
                p_box = p_wo if capacity == 1.0 else self._box_pressure(steam, m, h_in, p_out,
                                                                        p_in)
                boxes = [p_box] * n_all
            else:
                openings = valve_openings(capacity, arcs, self.overlap)
                boxes = [p_wo if o >= 1.0 else
                         self._box_pressure(steam, o * g_wo, h_in, p_out, p_wo) if o > 0.0
                         else math.nan for o in openings]
            flows = ([m * a for a in arcs] if capacity >= 1.0 or together
                     else [o * a * g_wo for o, a in zip(openings, arcs)])
            dp = None
        else:  # sliding pressure or valves wide open: the open valves' law sets the flow
            # sliding: the case's valves wide open (the design number when not given);
            # the capacity at a held pressure: every valve unless the case names a number
            n_open = n_all if together else (march.cond.valves_open or (
                n_all if march.mode == "wide_open" else self.valves_open_at_design))
            open_arc = sum(arcs[:n_open])
            g = m / open_arc
            p_box = self._box_pressure(steam, g, h_in, p_out, p_in)
            dp = p_box + self._valve_drop(g, v_in) - p_out
            openings = [1.0] * n_open + [0.0] * (n_all - n_open)
            boxes = [p_box] * n_open + [math.nan] * (n_all - n_open)
            flows = [g * a for a in arcs[:n_open]] + [0.0] * (n_all - n_open)
        if m <= 0.0:  # a trial point with no flow: nothing expands
            return h_in, dp, 0.0, GoverningState(openings, boxes, flows, 0.0, 0.0, 0.0, 0.0,
                                                 capacity)
        power, iso, admitted = self._streams(steam, h_in, p_out, boxes, flows)
        full = m * (h_in - steam.h_ps(p_out, steam.s_ph(p_in, h_in)))
        state = GoverningState(openings, boxes, flows, power, iso, full - iso, admitted,
                               capacity)
        return h_in - power / m, dp, power, state

    # ----------------------------------------------------------------- admission
    def over_capacity(self, record: GoverningState, p_in: float, p_out: float) -> bool:
        """Whether, at a held throttle pressure, the flow needs more than every
        valve wide open passes."""
        return record.capacity_used > 1.0 + 1e-9

    def valve_drop(self, record: GoverningState, p_in: float, p_out: float) -> float:
        """Drop [Pa] from the throttle to the highest nozzle-box pressure."""
        return p_in - max(p for p in record.box_pressures if not math.isnan(p))

    def describe(self) -> list[str]:
        from ..physics.governing import critical_ratio

        arcs = ", ".join(f"{v} {100 * a:.4g} %" for v, a in zip(self.valves, self.arcs))
        law = (f"isentropic nozzle law, real-steam exponent {self.kappa:.4f} (critical pressure "
               f"ratio {critical_ratio(self.kappa):.4f})" if self.law == "isentropic"
               else "Stodola's ellipse")
        return [
            f"governing stage, {self.inlet} -> {self.outlet}: valves in opening order {arcs}; "
            f"{self.valves_open_at_design} wide open at design, overlap "
            f"{100 * self.overlap:.3g} %, minimum opening {100 * self.minimum_opening:.3g} %",
            f"  {law}; design efficiency {100 * self.eta_design:.4g} % from the nozzle boxes, "
            f"peak blading efficiency {100 * self.eta_peak:.4g} %, velocity ratio at design "
            f"{self.speed_ratio:g} of the best, partial-admission loss coefficient "
            f"{self.loss_coefficient:g}; design isentropic drop {self.dh_design / 1e3:.4g} "
            f"kJ/kg, wide-open valve drop {self.dp_design / 1e5:.4g} bar",
        ]

    # ----------------------------------------------------------------- results
    def result_row(self, record: GoverningState, m, p_in, h_in, p_out, h_out) -> tuple:
        eff = record.power / record.isentropic_power if record.isentropic_power > 0 else 0.0
        wide = sum(1 for o in record.openings if o >= 1.0)
        return (m, eff, record.power, record.throttling_loss, record.admitted, wide,
                record.capacity_used)

    def part_names(self) -> list[str]:
        return list(self.valves)

    def part_rows(self, record: GoverningState) -> list[tuple]:
        return [(o, p, f) for o, p, f in zip(record.openings, record.box_pressures,
                                             record.flows)]


# Default partial-admission loss coefficient K [-] of
# :func:`simulator.physics.governing.governing_efficiency`: about 0.065 / sin(alpha1)
# times the cube of the best velocity ratio, for nozzle angles near 14 degrees and a
# best ratio near 0.47 (the pumping-loss correlations cited there; from memory).
ADMISSION_LOSS = 0.03
