"""Result layout: the names, types and units of the per-point result arrays of a
study (:class:`ResultLayout`, :class:`Field`, :func:`result_layout`), the
fixed byte lengths of stored text and the solver status codes.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np

from ..errors import ConvergenceError, SolveError
from ..plant.case import Conditions
from ..plant.model import Model
from ..solve.point import PointResult, solve_point

__all__ = [
    "CAUTION_BYTES",
    "CODES_BYTES",
    "CONTROL_BYTES",
    "MESSAGE_BYTES",
    "STATUS",
    "Field",
    "ResultLayout",
    "cut_text",
    "result_layout",
]

MESSAGE_BYTES = 256  # fixed length of a stored solver message (UTF-8, truncated)
CODES_BYTES = 128  # fixed length of the stored caution codes of a point
CAUTION_BYTES = 1024  # fixed length of the stored caution messages of a point
CONTROL_BYTES = 8  # fixed length of a stored extraction control word

# solver status of a point, as stored in /solver/status
STATUS = {"not solved": -1, "converged": 0, "failed": 1, "internal error": 2}


@dataclass(frozen=True)
class Field:
    """One per-point result dataset.

    ``path`` below the file root; ``dtype`` a numpy dtype string (``"S400"``
    for fixed-length UTF-8 text); ``width`` the number of columns (``0``: a
    one-dimensional dataset); ``unit`` SI; ``fill`` the value before the point
    is solved.
    """

    path: str
    dtype: str
    width: int
    unit: str
    description: str
    fill: float | int | bytes = math.nan


# SI unit of each total, from its display unit in :mod:`simulator.report`
_SI_OF_DISPLAY = {"bar": "Pa", "degC": "K", "MW": "W", "kg/s": "kg/s", "%": "-",
                  "kg/kWh": "kg/J", "kJ/kWh": "J/J", "W": "W", "Btu/kWh": "J/J"}

_HEATER_FIELDS = (
    # (dataset name, HeaterState attribute, unit, meaningful when out of service, description)
    ("bleed", "bleed", "kg/s", True, "bleed steam flow"),
    ("shell_pressure", "shell_pressure", "Pa", False, "shell pressure"),
    ("saturation_temperature", "T_sat", "K", False, "saturation temperature in the shell"),
    ("feedwater_in_temperature", "T_in", "K", False, "feedwater inlet temperature"),
    ("feedwater_out_temperature", "T_out", "K", False, "feedwater outlet temperature"),
    ("drain_temperature", "T_drain", "K", False, "drain outlet temperature"),
    ("feedwater_in_enthalpy", "h_in", "J/kg", True, "feedwater inlet enthalpy"),
    ("feedwater_out_enthalpy", "h_out", "J/kg", True, "feedwater outlet enthalpy"),
    ("drain_enthalpy", "h_drain", "J/kg", False, "drain outlet enthalpy"),
    ("bleed_enthalpy", "h_bleed", "J/kg", False, "bleed steam enthalpy"),
    ("feedwater_flow", "m_water", "kg/s", True, "feedwater (or condensate) flow"),
    ("drain_flow", "drain_out", "kg/s", True, "drain flow leaving the heater"),
    ("duty", "duty", "W", True, "heat given to the feedwater"),
    ("steam_release", "steam_release", "W", True, "heat given up by bleed and drains"),
    ("ttd", "ttd", "K", False, "terminal temperature difference (NaN for a deaerator)"),
    ("dca", "dca", "K", False, "drain cooler approach (NaN for a deaerator)"),
)
_CLOSED_ONLY = ("ttd", "dca")


@dataclass
class ResultLayout:
    """Names and units of the per-point results of a model (fixed for a study).

    Built by :func:`result_layout`; picklable, so workers fill the same
    arrays the store writes.  ``valve`` is the throttle valve's (inlet,
    outlet) nodes; ``paths`` the reheaters and pipes as ``(name, inlet,
    outlet, kind)``; ``design_throttle_flow`` [kg/s] and ``generator_rating``
    [W] come from the model.
    """

    nodes: list[str]
    groups: list[str]
    group_inlet: list[str]
    group_outlet: list[str]
    extractions: list[str]
    extraction_nodes: list[str]
    heaters: list[str]
    heater_closed: list[bool]
    totals: list[str]
    totals_units: list[str]
    valve: tuple[str, str] = ("", "")
    paths: list[tuple[str, str, str, str]] = field(default_factory=list)
    design_throttle_flow: float = math.nan
    generator_rating: float = math.nan
    cautions: bool = False
    caution_codes: list[str] = field(default_factory=list)

    def fields(self) -> list[Field]:
        """Every per-point result dataset, in the order of the file."""
        n, g, e, h = len(self.nodes), len(self.groups), len(self.extractions), len(self.heaters)
        f = [
            Field("solver/status", "i1", 0, "",
                  "-1 not solved yet, 0 converged, 1 failed (cannot be solved), "
                  "2 internal error", -1),
            Field("solver/converged", "u1", 0, "", "1 when the point converged", 0),
            Field("solver/iterations", "i4", 0, "-", "Newton iterations (-1: not known)", -1),
            Field("solver/evaluations", "i4", 0, "-", "residual evaluations (-1: not known)",
                  -1),
            Field("solver/residual", "f8", 0, "-",
                  "largest normalised residual at the end (NaN: not known)"),
            Field("solver/error", "S32", 0, "",
                  "class of the error of a failed point (ConvergenceError, InfeasibleError, "
                  "PropertyRangeError, ...)", b""),
            Field("solver/message", f"S{MESSAGE_BYTES}", 0, "",
                  "solver message, or why the point failed (UTF-8, cut to "
                  f"{MESSAGE_BYTES} bytes)", b""),
            Field("nodes/pressure", "f8", n, "Pa", "pressure at each node"),
            Field("nodes/temperature", "f8", n, "K", "temperature at each node"),
            Field("nodes/enthalpy", "f8", n, "J/kg", "specific enthalpy at each node"),
            Field("nodes/entropy", "f8", n, "J/(kg K)", "specific entropy at each node"),
            Field("nodes/quality", "f8", n, "-",
                  "steam quality at each node (1 dry or superheated; moisture = 1 - quality)"),
            Field("stage_groups/flow", "f8", g, "kg/s", "steam flow through the group"),
            Field("stage_groups/efficiency", "f8", g, "-", "effective isentropic efficiency"),
            Field("stage_groups/isentropic_drop", "f8", g, "J/kg", "isentropic enthalpy drop"),
            Field("stage_groups/power", "f8", g, "W", "power of the group"),
            Field("stage_groups/annulus_velocity", "f8", g, "m/s",
                  "last-stage annulus velocity (0: group without exhaust)"),
            Field("stage_groups/exhaust_loss", "f8", g, "J/kg",
                  "exhaust loss (0: group without exhaust)"),
            Field("stage_groups/outlet_moisture", "f8", g, "-", "moisture at the outlet"),
            Field("extractions/flow", "f8", e, "kg/s", "bleed flow"),
            Field("extractions/pressure", "f8", e, "Pa", "pressure at the bleed point"),
            Field("extractions/enthalpy", "f8", e, "J/kg", "enthalpy of the bleed steam"),
            Field("extractions/control", f"S{CONTROL_BYTES}", e, "",
                  "how the bleed flow is set: heater, closed, flow or fraction", b""),
            Field("heaters/in_service", "u1", h, "", "1 in service, 0 out of service", 0),
        ]
        for name, _attr, unit, _oos, desc in _HEATER_FIELDS:
            f.append(Field(f"heaters/{name}", "f8", h, unit,
                           desc + ("" if _oos else " (NaN when out of service)")))
        for name, unit in zip(self.totals, self.totals_units):
            f.append(Field(f"totals/{name}", "f8", 0, unit, _TOTAL_TEXT.get(name, name)))
        if self.cautions:
            f += [
                Field("cautions/count", "i2", 0, "-",
                      "number of operating-limit cautions (-1: not checked)", -1),
                Field("cautions/codes", f"S{CODES_BYTES}", 0, "",
                      "caution codes, separated by spaces", b""),
                Field("cautions/flags", "u1", len(self.caution_codes), "",
                      "1 where the caution of /cautions/names fired", 0),
                Field("cautions/messages", f"S{CAUTION_BYTES}", 0, "",
                      "caution messages, one a line (UTF-8, cut to "
                      f"{CAUTION_BYTES} bytes)", b""),
            ]
        return f

    def empty(self, k: int) -> dict[str, np.ndarray]:
        """Arrays for ``k`` points filled with the 'not solved' values."""
        out = {}
        for f in self.fields():
            shape = (k, f.width) if f.width else (k,)
            out[f.path] = np.full(shape, f.fill, dtype=f.dtype)
        return out

    def fill(self, arrays: dict[str, np.ndarray], i: int, r: PointResult) -> None:
        """Copy point result ``r`` into row ``i`` of ``arrays``."""
        arrays["solver/status"][i] = STATUS["converged"]
        arrays["solver/converged"][i] = 1 if r.converged else 0
        arrays["solver/iterations"][i] = r.iterations
        arrays["solver/evaluations"][i] = r.evaluations
        arrays["solver/residual"][i] = r.residual
        arrays["solver/message"][i] = cut_text(r.message, MESSAGE_BYTES)
        if r.node_names == self.nodes:
            arrays["nodes/pressure"][i] = r.node_p
            arrays["nodes/temperature"][i] = r.node_T
            arrays["nodes/enthalpy"][i] = r.node_h
            arrays["nodes/entropy"][i] = r.node_s
            arrays["nodes/quality"][i] = r.node_x
        else:
            idx = [self.nodes.index(n) for n in r.node_names]
            arrays["nodes/pressure"][i, idx] = r.node_p
            arrays["nodes/temperature"][i, idx] = r.node_T
            arrays["nodes/enthalpy"][i, idx] = r.node_h
            arrays["nodes/entropy"][i, idx] = r.node_s
            arrays["nodes/quality"][i, idx] = r.node_x
        gi = (slice(None) if r.group_names == self.groups
              else [self.groups.index(n) for n in r.group_names])
        arrays["stage_groups/flow"][i, gi] = r.group_flow
        arrays["stage_groups/efficiency"][i, gi] = r.group_eta
        arrays["stage_groups/isentropic_drop"][i, gi] = r.group_dh_s
        arrays["stage_groups/power"][i, gi] = r.group_power
        arrays["stage_groups/annulus_velocity"][i, gi] = r.group_velocity
        arrays["stage_groups/exhaust_loss"][i, gi] = r.group_exhaust_loss
        arrays["stage_groups/outlet_moisture"][i, gi] = r.group_moisture_out
        ei = (slice(None) if r.extraction_names == self.extractions
              else [self.extractions.index(n) for n in r.extraction_names])
        arrays["extractions/flow"][i, ei] = r.extraction_flow
        arrays["extractions/pressure"][i, ei] = r.extraction_p
        arrays["extractions/enthalpy"][i, ei] = r.extraction_h
        arrays["extractions/control"][i, ei] = [c.encode()[:CONTROL_BYTES]
                                                for c in r.extraction_control]
        for hs in r.heaters:
            j = self.heaters.index(hs.name)
            arrays["heaters/in_service"][i, j] = 1 if hs.in_service else 0
            closed = self.heater_closed[j]
            for name, attr, _unit, oos, _d in _HEATER_FIELDS:
                if (hs.in_service or oos) and (closed or name not in _CLOSED_ONLY):
                    arrays[f"heaters/{name}"][i, j] = getattr(hs, attr)
        for name in self.totals:
            v = r.totals.get(name)
            if v is not None:
                arrays[f"totals/{name}"][i] = v

    def fail(self, arrays: dict[str, np.ndarray], i: int, exc: BaseException,
             internal: bool = False) -> None:
        """Record in row ``i`` that the point could not be solved."""
        arrays["solver/status"][i] = STATUS["internal error" if internal else "failed"]
        arrays["solver/converged"][i] = 0
        if isinstance(exc, ConvergenceError):
            arrays["solver/iterations"][i] = exc.iterations
            arrays["solver/residual"][i] = exc.residual
        arrays["solver/error"][i] = type(exc).__name__.encode()[:32]
        text = str(exc) if not internal else (
            f"internal error ({type(exc).__name__}: {exc}); please report it as a bug")
        arrays["solver/message"][i] = cut_text(text, MESSAGE_BYTES)
        if self.cautions:
            arrays["cautions/count"][i] = 0


_TOTAL_TEXT = {
    "throttle_flow": "throttle steam flow",
    "throttle_pressure": "throttle pressure",
    "throttle_temperature": "throttle temperature",
    "valve_pressure_drop": "pressure drop across the throttle valves",
    "shaft_power": "shaft power of all stage groups",
    "generator_output": "generator output",
    "generator_and_mechanical_losses": "generator and mechanical losses",
    "steam_rate": "throttle flow over generator output",
    "exhaust_loss_power": "exhaust loss",
    "exhaust_moisture": "largest exhaust moisture",
    "exhaust_flow": "steam flow to the exhaust",
    "reheat_heat": "heat added in the reheater",
    "final_feedwater_temperature": "final feedwater temperature",
    "heat_added": "heat added in the boiler and reheater",
    "heat_rate": "heat added over generator output (J/J; x 3600 = kJ/kWh)",
    "pump_power": "power of all pumps",
    "makeup_flow": "makeup water flow",
    "condenser_duty": "heat rejected in the condenser",
    "heater_heat_loss": "heat lost by the heaters",
    "process_steam_energy": "energy leaving with process steam, less makeup",
    "energy_imbalance": "cycle energy balance error (a check; near 0)",
}


def cut_text(text: str, n: int) -> bytes:
    """``text`` as UTF-8, cut to at most ``n`` bytes on a character boundary."""
    b = text.encode("utf-8")
    if len(b) <= n:
        return b
    return b[:n - 3].decode("utf-8", "ignore").encode("utf-8") + b"..."


def _cautions_available() -> tuple[bool, list[str]]:
    """Whether the operating-limit checks are installed, and their codes."""
    try:
        from ..cautions.checks import check_point  # noqa: F401
    except ImportError:
        return False, []
    try:
        from ..cautions.checks import CAUTION_CODES
    except ImportError:
        return True, []
    return True, [str(c) for c in CAUTION_CODES]


def result_layout(model: Model, backend: str = "seuif97") -> ResultLayout:
    """The result layout of ``model``: node, group, bleed, heater and total names.

    The list of totals is taken from a solve of the design point (cheap: it
    converges at once), so that every total the solver reports is stored.
    """
    try:
        r = solve_point(model, Conditions(throttle_flow=model.throttle.flow), backend)
        totals = list(r.totals)
    except SolveError:  # pragma: no cover - a calibrated model solves its design point
        from ..present.tables import DISPLAY_UNITS

        totals = [k for k in DISPLAY_UNITS["totals"] if k != "heat_rate_btu"]
    from ..present.tables import DISPLAY_UNITS

    units = [_SI_OF_DISPLAY.get(DISPLAY_UNITS["totals"].get(k, ""), "") for k in totals]
    ex = list(model.extractions.values())
    cautions, codes = _cautions_available()
    return ResultLayout(
        nodes=list(model.order), groups=[g.name for g in model.groups],
        group_inlet=[g.inlet for g in model.groups], group_outlet=[g.outlet for g in model.groups],
        extractions=[e.name for e in ex], extraction_nodes=[e.node for e in ex],
        heaters=list(model.heaters),
        heater_closed=[h.kind == "closed" for h in model.heaters.values()],
        totals=totals, totals_units=units,
        valve=(model.valve.inlet, model.valve.outlet),
        paths=[(p.name, p.inlet, p.outlet, "reheater" if p.is_reheater else "pipe")
               for p in model.paths],
        design_throttle_flow=model.throttle.flow, generator_rating=model.generator.rating,
        cautions=cautions, caution_codes=codes)
