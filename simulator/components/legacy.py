"""Plant components: calibrated constants plus calls to the physics functions.

Components hold the numbers fixed by calibration to the design heat balance
and evaluate their own law at one state.  They add no algorithm of their own;
the equations of a whole operating point are assembled in :mod:`simulator.solve`.

All values are SI (see :mod:`simulator.units`).
"""

from __future__ import annotations

import math
from collections.abc import Callable
from dataclasses import dataclass, field

from ..physics.ellipse import ellipse_flow
from ..physics.exhaust import annulus_velocity, exhaust_loss, used_energy_end_point
from ..physics.expansion import dry_expansion_end, expansion_end, moisture_from_enthalpy
from ..physics.feedwater import boiler_pressure_drop
from ..physics.generator import generator_output
from ..physics.heater import (
    closed_heater_outlet_temperature,
    effectiveness_ttd,
    heater_shell_pressure,
    pump_enthalpy_rise,
)
from ..physics.pressure_drop import scaled_pressure_drop
from ..steam.constants import H_ABOVE_SAT_VAP

# [J/kg] above the largest saturated-vapour enthalpy of water an expansion end point is
# certainly dry (the one constant, with its source, is in simulator.steam.constants)
H_DRY = H_ABOVE_SAT_VAP

__all__ = [
    "ExhaustEnd",
    "StageGroup",
    "ThrottleValve",
    "ControlValve",
    "PressureDropPath",
    "Extraction",
    "Generator",
    "Heater",
    "Pump",
    "Boiler",
    "FeedwaterTrain",
    "H_DRY",
]


@dataclass
class ExhaustEnd:
    """Last-stage annulus of an exhaust group and its exhaust-loss curve.

    area [m^2]; curve_velocity [m/s] increasing; curve_loss [J/kg dry flow].
    """

    area: float
    curve_velocity: list[float]
    curve_loss: list[float]
    curve_name: str = ""


@dataclass
class StageGroup:
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
    exhaust : the last-stage annulus if the group exhausts to a condenser
    """

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
        m = ellipse_flow(p_in, p_out, v_in, self.K)
        dh_s = h_in - steam.h_ps(p_out, s_in)
        ratio = self.correction(m * v_in / self.q_design, dh_s / self.dh_s_design)
        eta_dry = self.eta_dry_design * ratio
        alpha = self.alpha
        if y_in is None:
            y_in = 1.0 - steam.x_ph(p_in, h_in) if alpha else 0.0
        h_dry_end = h_in - eta_dry * dh_s
        if h_dry_end > H_DRY:  # above every saturated vapour: a dry end, no lookups
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
        loss = exhaust_loss(vel, ex.curve_velocity, ex.curve_loss)
        h_used = used_energy_end_point(h_elep, loss, y_out)
        return m, h_used, h_elep, eta, dh_s, y_out, vel, loss, h_vap, h_liq


@dataclass
class ThrottleValve:
    """Main-steam throttle (control) valves: isenthalpic.

    With the valves wide open the pressure drop follows the quadratic law of
    :func:`simulator.physics.pressure_drop.scaled_pressure_drop` from its design
    value ``dp_wide_open`` [Pa] at ``m_design`` [kg/s], ``v_design`` [m^3/kg].
    """

    name: str
    inlet: str
    outlet: str
    dp_wide_open: float = 0.0
    m_design: float = 0.0
    v_design: float = 0.0

    def wide_open_drop(self, m_dot: float, v_in: float) -> float:
        """Pressure drop [Pa] of the wide-open valves at ``m_dot`` and inlet volume ``v_in``."""
        return scaled_pressure_drop(m_dot, v_in, self.dp_wide_open, self.m_design, self.v_design)


@dataclass
class ControlValve(ThrottleValve):
    """A valve inside the turbine that holds the pressure at its inlet node, such as
    the valve ahead of the LP section of an extraction-condensing unit holding the
    process-steam pressure.  While it throttles, the inlet pressure is held (at
    the design pressure, or the case's setting); when holding it would need less
    than its wide-open drop, the valve is wide open and the inlet pressure rises
    above the setting.  Wide open, its drop follows the same quadratic law as
    :class:`ThrottleValve`; ``wide_open_fraction`` is the model file's
    ``wide_open_drop`` [-] (``None``: the design drop)."""

    wide_open_fraction: float | None = None


@dataclass
class PressureDropPath:
    """A reheater (outlet temperature held) or a steam pipe (isenthalpic).

    The pressure drop scales with ``m^2 v`` from the design drop ``dp_design``
    [Pa] at ``m_design`` [kg/s] and inlet volume ``v_design`` [m^3/kg].
    ``outlet_temperature`` [K] is ``None`` for a pipe.
    """

    name: str
    inlet: str
    outlet: str
    outlet_temperature: float | None
    dp_design: float = 0.0
    m_design: float = 0.0
    v_design: float = 0.0

    @property
    def is_reheater(self) -> bool:
        return self.outlet_temperature is not None

    def drop(self, m_dot: float, v_in: float) -> float:
        """Pressure drop [Pa] at flow ``m_dot`` [kg/s] and inlet volume ``v_in``."""
        return scaled_pressure_drop(m_dot, v_in, self.dp_design, self.m_design, self.v_design)

    def outlet_enthalpy(self, steam, p_out: float, h_in: float,
                        T_out: float | None = None) -> float:
        """Outlet enthalpy [J/kg]: ``h(p_out, T_out)`` for a reheater, ``h_in`` for a pipe."""
        if self.outlet_temperature is None:
            return h_in
        return steam.h_pT(p_out, self.outlet_temperature if T_out is None else T_out)


@dataclass
class Extraction:
    """A bleed of steam from a node.

    ``control`` decides the off-design bleed flow: ``"fraction"`` (the design
    fraction of throttle flow), ``"flow"`` (a fixed flow), ``"closed"`` or
    ``"heater"`` (whatever its feedwater heater condenses; an unknown of the
    solver).  ``design_flow`` [kg/s].
    """

    name: str
    node: str
    design_flow: float
    control: str = "fraction"
    heater: str | None = None


@dataclass
class Generator:
    """Generator and shaft losses; see :func:`simulator.physics.generator.generator_output`.

    rating [W]; mechanical_loss, fixed_loss and load_loss_rated [W].
    """

    rating: float
    mechanical_loss: float = 0.0
    fixed_loss: float = 0.0
    load_loss_rated: float = 0.0

    def output(self, p_shaft: float) -> float:
        """Electrical output [W] at shaft power ``p_shaft`` [W]."""
        return generator_output(p_shaft, self.mechanical_loss, self.fixed_loss,
                                self.load_loss_rated, self.rating)


@dataclass
class Heater:
    """A feedwater heater: closed (shell and tube) or open (deaerator).

    Attributes
    ----------
    kind : ``"closed"`` or ``"deaerator"``
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
    """

    name: str
    kind: str
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

    def shell_pressure(self, p_node: float) -> float:
        """Shell pressure [Pa] from extraction-node pressure [Pa] less the line drop."""
        return heater_shell_pressure(p_node, self.line_drop)

    def outlet_temperature(self, T_sat: float, T_in: float, m_water: float) -> float:
        """Feedwater outlet temperature [K] (closed heater)."""
        if self.ttd_method == "ua" and self.ua > 0.0:  # ua is 0 until calibrated
            ttd = effectiveness_ttd(T_sat, T_in, m_water, self.ua, self.cp)
        else:
            ttd = self.ttd
        return closed_heater_outlet_temperature(T_sat, ttd)


@dataclass
class Pump:
    """A condensate, feed or drain pump: ``dh = v dp / eta``.

    ``discharge`` is ``"boiler"`` (throttle pressure plus the boiler pressure
    drop) or ``"fixed"`` at ``discharge_pressure`` [Pa].
    """

    name: str
    efficiency: float
    discharge: str = "fixed"
    discharge_pressure: float = 0.0

    def enthalpy_rise(self, v: float, p_in: float, p_out: float) -> float:
        """Enthalpy rise [J/kg]."""
        return pump_enthalpy_rise(v, p_in, p_out, self.efficiency)


@dataclass
class Boiler:
    """Pressure drop from the feed-pump discharge to the throttle [Pa] at design
    flow [kg/s]; scales with flow squared."""

    dp_design: float = 0.0
    m_design: float = 1.0

    def drop(self, m_dot: float) -> float:
        return boiler_pressure_drop(m_dot, self.dp_design, self.m_design)


@dataclass
class FeedwaterTrain:
    """The water side: condensate from a condenser node through pumps and heaters."""

    condenser: str
    order: list[str] = field(default_factory=list)  # heater and pump names, water order
    boiler: Boiler = field(default_factory=Boiler)
