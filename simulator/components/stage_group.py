"""Stage group: a group of turbine stages between two nodes.

Flow by Stodola's ellipse law (:mod:`simulator.physics.ellipse`), expansion with
an efficiency corrected for flow (:mod:`simulator.physics.efficiency`) and
moisture (Baumann), and for a group that exhausts to a condenser the exhaust
loss and used-energy end point (:mod:`simulator.physics.exhaust`).
"""

from __future__ import annotations

import math
from collections.abc import Callable
from dataclasses import dataclass
from typing import ClassVar

from ..errors import InputError
from ..physics.efficiency import (
    CORRECTIONS,
    PER_STAGE,
    baumann_factor,
    make_table_correction,
    velocity_ratio_per_stage,
)
from ..physics.ellipse import ellipse_flow, flow_constant
from ..physics.exhaust import (
    annulus_velocity,
    exhaust_loss,
    exhaust_loss_pchip,
    pchip_pieces,
    used_energy_end_point,
)
from ..physics.expansion import dry_expansion_end, expansion_end, moisture_from_enthalpy
from ..physics.flow_laws import FLOW_LAWS, FlowLaw, critical_ratio_from_stages
from ..steam.constants import H_ABOVE_SAT_VAP, P_CRIT, T_MAX, T_MIN
from .base import Column, ReadContext, SteamPathComponent, Tunable
from .reading import edge_names, ratio_list

__all__ = ["StageGroup", "ExhaustEnd"]


@dataclass
class ExhaustEnd:
    """Last-stage annulus of an exhaust group and its exhaust-loss curve.

    area [m^2]; curve_velocity [m/s] increasing; curve_loss [J/kg dry flow];
    interpolation (``"linear"`` or ``"pchip"``, the curve's key, see
    :mod:`simulator.physics.exhaust`) [-]; pieces: the cubic pieces of a
    ``"pchip"`` curve, made once here [-].
    """

    area: float
    curve_velocity: list[float]
    curve_loss: list[float]
    curve_name: str = ""
    interpolation: str = "linear"
    pieces: list | None = None

    def __post_init__(self):
        if self.interpolation == "pchip" and self.pieces is None:
            self.pieces = pchip_pieces(self.curve_velocity, self.curve_loss)

    def loss(self, velocity: float) -> float:
        """Exhaust loss [J/kg dry flow] at annulus ``velocity`` [m/s] from the curve."""
        if self.pieces is None:
            return exhaust_loss(velocity, self.curve_velocity, self.curve_loss)
        return exhaust_loss_pchip(velocity, self.curve_velocity, self.pieces)


@dataclass
class StageGroup(SteamPathComponent):
    """A group of stages between two nodes, calibrated at design.

    Attributes
    ----------
    K : ellipse-law flow constant [m^2]
    eta_dry_design : dry isentropic efficiency at design [-] (the stated design
        efficiency divided by Baumann's factor at the design moisture)
    eta_design : stated design efficiency [-]
    dh_s_design : design isentropic drop [J/kg]
    q_design : design inlet volume flow [m^3/s]
    alpha : Baumann factor [-]
    correction : ``f(q_ratio, dh_ratio) -> eta/eta_design``
    design_flow : stated design flow [kg/s] where a node splits into parallel groups
    exhaust : the last-stage annulus if the group exhausts to a condenser
    outlet_given : ``(key, value)`` when the model file gives the design outlet
        state instead of the efficiency: ``("outlet_enthalpy", h [J/kg])`` or
        ``("outlet_temperature", T [K])`` or, for an exhaust group,
        ``("used_energy_end_point", h [J/kg])``; the efficiency is derived at calibration
    """

    table: ClassVar[str] = "stage_group"
    title: ClassVar[str] = "stage group"
    results: ClassVar[str] = "stage_groups"
    sets_flow: ClassVar[bool] = True
    expands: ClassVar[bool] = True
    calibration_key: ClassVar[str] = "efficiency"
    columns: ClassVar[tuple[Column, ...]] = (
        Column("flow", "kg/s", "steam flow through the group"),
        Column("efficiency", "-", "effective isentropic efficiency", display="%"),
        Column("isentropic_drop", "J/kg", "isentropic enthalpy drop", label="dh_s"),
        Column("power", "W", "power of the group"),
        Column("annulus_velocity", "m/s", "last-stage annulus velocity (0: group without "
               "exhaust)", label="V_annulus"),
        Column("exhaust_loss", "J/kg", "exhaust loss (0: group without exhaust)",
               label="exh. loss"),
        Column("outlet_moisture", "-", "moisture at the outlet", display="%",
               label="moisture out"),
    )
    tunables: ClassVar[tuple[Tunable, ...]] = (
        Tunable("efficiency", "eta_dry_design", "-", "dry isentropic efficiency at design "
                "flow", 0.0, 1.0),
        Tunable("flow_constant", "K", "m^2", "ellipse-law flow constant", 0.0),
    )

    name: str
    inlet: str
    outlet: str
    eta_design: float
    correction_name: str
    correction: Callable[[float, float], float]
    alpha: float = 1.0
    K: float = 0.0
    eta_dry_design: float = 0.0
    dh_s_design: float = 0.0
    q_design: float = 0.0
    design_flow: float | None = None
    exhaust: ExhaustEnd | None = None
    outlet_given: tuple[str, float] | None = None
    no_exhaust_loss: bool = False
    equal_share_of: str | None = None
    flow_law_name: str = "ellipse"
    pi_c: float = 0.0
    stages: int | None = None
    p_in_design: float = 0.0
    p_out_design: float = 0.0
    law: FlowLaw | None = None  # None: the ellipse, through ellipse_flow

    @classmethod
    def read(cls, gr, ctx: ReadContext):
        gname, g_from, g_to = edge_names(gr, cls.table)
        eta, outlet = _design_expansion(gr)
        # The exhaust-loss curve already carries the last stage's losses at low
        # volume flow, so an exhaust group defaults to a constant efficiency.
        is_exhaust = gr.has("annulus_area") or gr.has("loss_curve")
        cname = gr.string("efficiency_correction",
                          default="constant" if is_exhaust else "velocity_ratio",
                          choices=sorted(CORRECTIONS) + [PER_STAGE, "table"])
        corr = CORRECTIONS.get(cname or "constant", CORRECTIONS["constant"])
        if cname == "table":
            tr = ctx.reader(gr.raw("correction_table"), f"{gr.where.table}.correction_table")
            corr = _correction_table(tr, eta) or corr
        stages = gr.number("stages", default=None, lo=1.0, hi=100.0)
        if stages is not None and stages != int(stages):
            gr.problems.add(gr.where.child("stages").error("give a whole number of stages"))
        law_name, pi_c = _flow_law(gr, stages)
        if cname == PER_STAGE and stages is None:
            gr.problems.add(gr.where.child("stages").error(
                f"efficiency_correction = {PER_STAGE!r} needs the number of stages of the group"))
        if stages is not None and cname != PER_STAGE and law_name != "ellipse_critical":
            gr.problems.add(gr.where.child("stages").error(
                f"used only with flow_law = 'ellipse_critical' or efficiency_correction = "
                f"{PER_STAGE!r}"))
        alpha = gr.number("moisture_factor", default=1.0, lo=0.0, hi=3.0)
        dflow = gr.quantity("design_flow", "mass_flow", default=None, positive=True)
        exhaust = None
        no_loss = gr.string("exhaust_loss", default=None, choices=("none",)) == "none"
        if no_loss and is_exhaust:
            gr.problems.add(gr.where.child("exhaust_loss").error(
                "'none' says the group has no exhaust loss; leave out annulus_area and "
                "loss_curve, or this key"))
        if is_exhaust:
            area = gr.quantity("annulus_area", "area", positive=True)
            curve = gr.string("loss_curve", choices=list(ctx.curves) or None)
            if area and curve in ctx.curves:
                c = ctx.curves[curve]
                exhaust = ExhaustEnd(area, c[0], c[1], curve,
                                     c[2] if len(c) > 2 else "linear")
        gr.finish(also_valid=("annulus_area", "loss_curve", "correction_table"))
        if None in (gname, g_from, g_to) or (eta is None and outlet is None):
            return None
        group = cls(gname, g_from, g_to, eta if eta is not None else math.nan,
                    cname or "constant", corr, alpha if alpha is not None else 1.0,
                    design_flow=dflow, exhaust=exhaust, outlet_given=outlet,
                    no_exhaust_loss=no_loss, flow_law_name=law_name, pi_c=pi_c,
                    stages=int(stages) if stages is not None else None,
                    law=None if law_name == "ellipse" else FLOW_LAWS[law_name])
        if outlet is not None:
            group.calibration_key = outlet[0]
        return group

    def calibrate(self, m, p_in, h_in, p_out, steam, model) -> float:
        v_in = steam.v_ph(p_in, h_in)
        s_in = steam.s_ph(p_in, h_in)
        if self.law is None:
            self.K = flow_constant(m, p_in, p_out, v_in)
        else:
            self.K = self.law.constant(m, p_in, p_out, v_in, self.pi_c)
        self.dh_s_design = h_in - steam.h_ps(p_out, s_in)
        self.q_design = m * v_in
        self.p_in_design, self.p_out_design = p_in, p_out
        if self.outlet_given is not None:
            self.eta_design = self._derived_efficiency(m, h_in, p_out, steam, model)
        h_elep = h_in - self.eta_design * self.dh_s_design
        h_vap = steam.h_vap_sat(p_out)
        h_liq = steam.h_liq_sat(p_out)
        y_out = moisture_from_enthalpy(h_elep, h_liq, h_vap)
        y_in = (1.0 - steam.x_ph(p_in, h_in)) if self.alpha else 0.0
        factor = baumann_factor(y_in, y_out, self.alpha)
        if factor <= 0.05:
            raise InputError("Baumann's factor leaves no efficiency; check moisture_factor",
                             file=model.file, table=self.where, key="moisture_factor")
        self.eta_dry_design = self.eta_design / factor
        return self.expand(steam, p_in, h_in, p_out)[1]

    def _derived_efficiency(self, m: float, h_in: float, p_out: float, steam, model) -> float:
        """Design efficiency [-] from the outlet state the heat balance gives.

        Parameters
        ----------
        m : design flow [kg/s]
        h_in : design inlet enthalpy [J/kg]
        p_out : design outlet pressure [Pa]
        steam : property backend
        model : the model being calibrated (for the file name of errors)
        """
        key, value = self.outlet_given
        if key == "outlet_temperature":
            T_sat = steam.T_sat(p_out) if p_out < P_CRIT else 0.0
            if value <= T_sat + 0.05:
                raise InputError(
                    f"{value - 273.15:.2f} degC is the saturation temperature (or below it) "
                    f"at the outlet pressure {p_out / 1e5:.5g} bar, where a temperature does "
                    f"not fix the state; give 'outlet_enthalpy' instead",
                    file=model.file, table=self.where, key=key)
            h_out = steam.h_pT(p_out, value)
        elif key == "used_energy_end_point":
            h_out = self._elep_from_ueep(m, value, p_out, steam, model)
        else:
            h_out = value
        eta = (h_in - h_out) / self.dh_s_design
        if not 0.0 < eta <= 1.0:
            raise InputError(
                f"gives an outlet enthalpy of {h_out / 1e3:.2f} kJ/kg against an inlet "
                f"enthalpy of {h_in / 1e3:.2f} kJ/kg and an isentropic outlet of "
                f"{(h_in - self.dh_s_design) / 1e3:.2f} kJ/kg: an efficiency of {eta:.4f}, "
                f"outside (0, 1]; check the value, its unit and the node pressures",
                file=model.file, table=self.where, key=key)
        return eta

    def inlet_pressure_for(self, m: float, p_out: float, pv_in: float) -> float:
        """Inlet pressure [Pa] at which the group passes ``m`` [kg/s] to ``p_out`` [Pa]
        with the inlet product ``p v`` given, ``pv_in`` [J/kg] (its flow law inverted)."""
        if self.law is None:
            return math.sqrt(p_out * p_out + (m / self.K) ** 2 * pv_in)
        return self.law.inlet_pressure(m, p_out, pv_in, self.K, self.pi_c)

    def _elep_from_ueep(self, m: float, h_used: float, p_out: float, steam, model) -> float:
        """Expansion-line end point [J/kg] whose used-energy end point, with the exhaust
        loss at design flow ``m`` [kg/s], is ``h_used`` [J/kg] at ``p_out`` [Pa]
        (fixed-point iteration: the loss changes little with the end point)."""
        if self.exhaust is None:
            raise InputError("a used-energy end point needs the group's exhaust: give "
                             "annulus_area and loss_curve, or 'outlet_enthalpy'",
                             file=model.file, table=self.where, key="used_energy_end_point")
        ex = self.exhaust
        h_liq, h_vap = steam.h_liq_sat(p_out), steam.h_vap_sat(p_out)
        h = h_used
        for _ in range(100):
            y = moisture_from_enthalpy(h, h_liq, h_vap)
            loss = exhaust_loss(annulus_velocity(m, steam.v_ph(p_out, h), ex.area),
                                ex.curve_velocity, ex.curve_loss)
            h_new = h_used - (used_energy_end_point(h, loss, y) - h)
            if abs(h_new - h) < 1e-6:
                return h_new
            h = h_new
        return h

    def describe(self) -> list[str]:
        lines = []
        if self.outlet_given is not None:
            key, value = self.outlet_given
            shown = (f"{value - 273.15:.2f} degC" if key == "outlet_temperature"
                     else f"{value / 1e3:.2f} kJ/kg")
            lines.append(f"stage group {self.name!r}: design efficiency "
                         f"{self.eta_design * 100:.3f} % derived from {key} = {shown}")
        if self.equal_share_of is not None:
            lines.append(f"stage group {self.name!r}: no design_flow given; at design it "
                         f"takes an equal share of the flow left at node "
                         f"{self.equal_share_of!r} for the parallel groups without one")
        if self.law is not None:
            extra = f", critical pressure ratio {self.pi_c:.3f}" if self.law.uses_stages else ""
            lines.append(f"stage group {self.name!r}: flow law {self.flow_law_name}{extra}")
        if self.no_exhaust_loss:
            lines.append(f"stage group {self.name!r}: exhausts without an exhaust loss "
                         f"(exhaust_loss = 'none')")
        return lines

    def expand(self, steam, p_in: float, h_in: float, p_out: float, y_in: float | None = None):
        """Flow and end state of the group for inlet ``(p_in, h_in)`` and ``p_out``.

        Parameters
        ----------
        steam : property backend
        p_in : inlet pressure [Pa]
        h_in : inlet enthalpy [J/kg]
        p_out : outlet pressure [Pa]
        y_in : inlet moisture [-] if the caller knows it (saves a property call)

        Returns
        -------
        tuple
            ``(m_dot, h_used, h_elep, eta, dh_s, y_out, velocity, loss, h_vap, h_liq)``:
            flow [kg/s], used-energy end point [J/kg] (equal to the ELEP for a
            group without exhaust), expansion-line end point [J/kg], effective
            efficiency [-], isentropic drop [J/kg], outlet moisture [-],
            annulus velocity [m/s] and exhaust loss [J/kg] (zero without
            exhaust), saturated vapour and liquid enthalpy at ``p_out`` [J/kg]
            (the liquid value is NaN when the end point is far from saturation
            and it was not needed).
        """
        v_in, s_in = steam.vs_ph(p_in, h_in)
        if self.law is None:
            m = ellipse_flow(p_in, p_out, v_in, self.K)
        else:
            m = self.law.flow(p_in, p_out, v_in, self.K, self.pi_c)
        dh_s = h_in - steam.h_ps(p_out, s_in)
        if self.correction_name == PER_STAGE:
            ratio = velocity_ratio_per_stage(p_in, p_out, self.p_in_design, self.p_out_design,
                                             dh_s / self.dh_s_design, self.stages or 1)
        else:
            ratio = self.correction(m * v_in / self.q_design, dh_s / self.dh_s_design)
        eta_dry = self.eta_dry_design * ratio
        alpha = self.alpha
        if y_in is None:
            y_in = 1.0 - steam.x_ph(p_in, h_in) if alpha else 0.0
        h_dry_end = h_in - eta_dry * dh_s
        if h_dry_end > H_ABOVE_SAT_VAP:  # above every saturated vapour: a dry end, no lookups
            h_vap = h_liq = math.nan
            h_elep = dry_expansion_end(h_in, dh_s, eta_dry, y_in, alpha)
            y_out = 0.0
        else:
            h_vap = steam.h_vap_sat(p_out)
            if h_dry_end < h_vap + 1e5:
                h_liq = steam.h_liq_sat(p_out)
                h_elep = expansion_end(h_in, dh_s, eta_dry, y_in, h_liq, h_vap, alpha)
            else:  # far above saturation: Baumann's rule with dry outlet, no liquid needed
                h_liq = math.nan
                h_elep = dry_expansion_end(h_in, dh_s, eta_dry, y_in, alpha)
            y_out = moisture_from_enthalpy(h_elep, h_liq, h_vap)
        eta = (h_in - h_elep) / dh_s if dh_s else eta_dry
        if self.exhaust is None:
            return m, h_elep, h_elep, eta, dh_s, y_out, 0.0, 0.0, h_vap, h_liq
        ex = self.exhaust
        vel = annulus_velocity(abs(m), steam.v_ph(p_out, h_elep), ex.area)
        loss = ex.loss(vel)
        h_used = used_energy_end_point(h_elep, loss, y_out)
        return m, h_used, h_elep, eta, dh_s, y_out, vel, loss, h_vap, h_liq

    def evaluate(self, march, i, j, m_net):
        """Flow by the ellipse law; the inlet moisture from the saturation state the
        march already knows at node ``i`` where it can (no property call)."""
        steam = march.steam
        pi = march.p[i]
        hi = march.h[i]
        if self.alpha and hi < H_ABOVE_SAT_VAP:
            hv, hl = march.hv, march.hl
            hvi = hv[i]
            if hvi != hvi:  # node state not known from upstream
                y_in = 1.0 - steam.x_ph(pi, hi)
            elif hi >= hvi:
                y_in = 0.0
            else:
                hli = hl[i]
                if hli != hli:
                    hli = hl[i] = steam.h_liq_sat(pi)
                y_in = (hvi - hi) / (hvi - hli)
        else:
            y_in = 0.0
        r = self.expand(steam, pi, hi, march.p[j], y_in)
        march.hv[j] = r[8]
        if r[9] == r[9]:
            march.hl[j] = r[9]
        m = r[0]
        return m, r[1], m * (hi - r[1]), r

    def result_row(self, record, m, p_in, h_in, p_out, h_out) -> tuple:
        r = record
        return (r[0], r[3], r[4], r[0] * (h_in - r[1]), r[6], r[7], r[5])


def _flow_law(gr, stages: float | None) -> tuple[str, float]:
    """``(flow law name, critical pressure ratio [-])`` of a stage group table with
    ``stages`` [-] read already."""
    name = gr.string("flow_law", default="ellipse", choices=list(FLOW_LAWS)) or "ellipse"
    ratio = gr.quantity("critical_pressure_ratio", "fraction", default=None, lo=0.0, hi=0.95)
    if name != "ellipse_critical":
        if ratio is not None:
            gr.problems.add(gr.where.child("critical_pressure_ratio").error(
                "applies with flow_law = 'ellipse_critical' only"))
        return name, 0.0
    if (stages is None) == (ratio is None):
        gr.problems.add(gr.where.child("stages").error(
            "flow_law = 'ellipse_critical' needs one of 'stages' (the number of stages of "
            "the group) and 'critical_pressure_ratio'"))
        return name, 0.0
    return name, ratio if ratio is not None else critical_ratio_from_stages(stages)


OUTLET_KEYS = ("efficiency", "outlet_enthalpy", "outlet_temperature", "used_energy_end_point")


def _design_expansion(gr):
    """``(efficiency, outlet_given)`` of a stage group table: exactly one of
    :data:`OUTLET_KEYS` (``None`` where absent or wrong)."""
    given = [k for k in OUTLET_KEYS if gr.has(k)]
    if len(given) > 1:
        gr.problems.add(gr.where.child(given[1]).error(
            f"give one of {', '.join(OUTLET_KEYS)}, not both {given[0]!r} and {given[1]!r}"))
        return None, None
    if not given:
        gr.problems.add(gr.where.child("efficiency").error(
            "missing required key (or give the design outlet state as the heat balance "
            "writes it: 'outlet_enthalpy', 'outlet_temperature' or, for an exhaust group, "
            "'used_energy_end_point')"))
        return None, None
    key = given[0]
    if key == "efficiency":
        return gr.number("efficiency", lo=0.0, hi=1.0, lo_open=True), None
    if key in ("outlet_enthalpy", "used_energy_end_point"):
        value = gr.quantity(key, "specific_enthalpy", positive=True)
    else:
        value = gr.quantity(key, "temperature", lo=T_MIN, hi=T_MAX)
    return None, (key, value) if value is not None else None


def _correction_table(tr, eta: float | None):
    """Read a stage group's ``correction_table``; ``None`` when it is wrong."""
    qs = ratio_list(tr, "volume_flow_ratio")
    es = ratio_list(tr, "efficiency_ratio")
    tr.finish()
    if qs is None or es is None:
        return None
    if len(qs) != len(es):
        tr.problems.add(tr.where.child("efficiency_ratio").error(
            f"{len(es)} efficiency ratios for {len(qs)} volume-flow ratios; give one each"))
        return None
    if any(b <= a for a, b in zip(qs, qs[1:])):
        tr.problems.add(tr.where.child("volume_flow_ratio").error("values must increase"))
        return None
    if eta is not None and eta * max(es) > 1.0:
        tr.problems.add(tr.where.child("efficiency_ratio").error(
            f"the largest ratio {max(es):g} times the design efficiency {eta:g} exceeds 1"))
        return None
    try:
        return make_table_correction(qs, es)
    except (ValueError, TypeError) as exc:
        tr.problems.add(tr.where.error(str(exc)))
        return None
