"""Correction curves of output and heat rate, from a model.

An acceptance test never runs at exactly the reference (specified) conditions:
the throttle pressure and temperature, the reheat temperature, the reheater's
pressure drop and the back pressure differ a little, and a heater may be out
of service.  ASME PTC 6 (Steam Turbines, Performance Test Code, The American
Society of Mechanical Engineers, New York; the 2004 edition is the one in
mind, quoted from memory) describes correcting the test's output and heat
rate to the reference conditions with curves of factors supplied for the
machine, one curve per condition, at several loads.  This module draws such
curves from a calibrated model by solving it: at each load, one condition
varied at a time over a band around its reference value, the others held.

For condition value ``x`` at load ``L``::

    output factor     f_P(x)  = P(x, L) / P(x_ref, L)
    heat-rate factor  f_HR(x) = HR(x, L) / HR(x_ref, L)

and a test point at ``x`` corrects to the reference as ``P_ref = P_test /
f_P(x)`` and ``HR_ref = HR_test / f_HR(x)``.  Differences ``P(x) - P(x_ref)``
[W] are given too.

Basis (a choice of this module, stated with every result): a load is a
throttle flow (a fraction of design), held while the condition varies; the
throttle pressure is held (pressure mode ``fixed``) at the reference pressure
for every curve, so that it can be varied; the reference conditions are the
case's, or the model's design values where the case leaves them unset.  PTC 6
corrections for throttle pressure and temperature are often stated at
constant valve position instead, which lets the flow change with them: such
curves differ from these, which hold the flow.  Points the machine cannot
reach (a lower throttle pressure at full flow needs the valves wider than
wide open) are left out (NaN) with the reason.
"""

from __future__ import annotations

import dataclasses
import math
from dataclasses import dataclass, field

import numpy as np

from ..components import Reheater
from ..errors import InputError, SolveError
from ..plant.case import Conditions, design_conditions
from ..solve.point import solve_point

__all__ = ["CONDITIONS", "CorrectionCurve", "CorrectionCurves", "correction_curves",
           "DEFAULT_LOADS"]

# [-] of design throttle flow; below 1: the demo units' design flow is their
# valves-wide-open flow, which a lower throttle pressure or a hotter throttle
# steam cannot pass at a held pressure
DEFAULT_LOADS = (0.5, 0.7, 0.9)
# condition -> (SI unit, how its values are made, the band, what it is)
CONDITIONS = {
    "throttle_pressure": ("Pa", "ratio", (0.95, 0.975, 1.0, 1.025, 1.05),
                          "throttle pressure (held)"),
    "throttle_temperature": ("K", "offset", (-20.0, -10.0, 0.0, 10.0, 20.0),
                             "throttle temperature"),
    "reheat_temperature": ("K", "offset", (-20.0, -10.0, 0.0, 10.0, 20.0),
                           "reheat temperature"),
    "reheater_pressure_drop": ("-", "ratio", (0.5, 0.75, 1.0, 1.25, 1.5),
                               "reheater pressure drop, as a multiple of its design "
                               "drop at the same flow"),
    "exhaust_pressure": ("Pa", "ratio", tuple(np.round(np.linspace(0.5, 1.5, 11), 10)),
                         "back pressure (exhaust pressure)"),
    "heaters_out": ("", "names", (), "one heater out of service (its bleed closed)"),
}


@dataclass
class CorrectionCurve:
    """One condition's curves at every load.

    ``values`` (SI, or heater names for ``heaters_out``: ``"none"`` first, the
    reference) [unit]; ``reference`` the reference value [unit]; arrays
    ``(loads, values)``: ``output`` [W], ``heat_rate`` [J/J],
    ``output_factor``, ``heat_rate_factor`` [-], ``output_change`` [W];
    ``failed`` maps ``(load index, value index)`` to why that point was not
    solved.
    """

    name: str
    unit: str
    description: str
    values: list
    reference: float | str
    output: np.ndarray
    heat_rate: np.ndarray
    failed: dict = field(default_factory=dict)

    @property
    def reference_index(self) -> int:
        return self.values.index(self.reference)

    @property
    def output_factor(self) -> np.ndarray:
        return self.output / self.output[:, [self.reference_index]]

    @property
    def heat_rate_factor(self) -> np.ndarray:
        return self.heat_rate / self.heat_rate[:, [self.reference_index]]

    @property
    def output_change(self) -> np.ndarray:
        return self.output - self.output[:, [self.reference_index]]


@dataclass
class CorrectionCurves:
    """The correction curves of a model: ``loads`` [-] of ``design_throttle_flow``
    [kg/s], one :class:`CorrectionCurve` per condition in ``curves``, the
    ``basis`` in words, ``model_name`` and ``case_name``."""

    model_name: str
    case_name: str
    loads: list[float]
    design_throttle_flow: float
    reference_throttle_pressure: float
    curves: list[CorrectionCurve]
    basis: str

    def curve(self, name: str) -> CorrectionCurve:
        return next(c for c in self.curves if c.name == name)


def _reference(model, base: Conditions) -> dict:
    """The reference value of each condition [SI]."""
    exhaust = model.exhaust_nodes[0]
    reheaters = model.of_kind(Reheater)
    return {
        "throttle_pressure": (base.throttle_pressure if base.throttle_pressure is not None
                              else model.throttle.pressure),
        "throttle_temperature": (base.throttle_temperature
                                 if base.throttle_temperature is not None
                                 else model.throttle.temperature),
        "reheat_temperature": (base.reheat_temperature if base.reheat_temperature is not None
                               else reheaters[0].outlet_temperature if reheaters else None),
        "reheater_pressure_drop": 1.0 if reheaters else None,
        "exhaust_pressure": (base.exhaust_pressure if base.exhaust_pressure is not None
                             else model.design_pressure[exhaust]),
    }


def _closed_heaters(model, base: Conditions) -> list[str]:
    return [name for name, h in model.heaters.items()
            if h.heater_type != "deaerator" and name not in base.heaters_out]


def _heater_out(model, base: Conditions, name: str) -> dict:
    """Conditions fields for heater ``name`` out of service besides the case's:
    its extraction closed, as a case's ``[heaters.NAME] in_service = false``."""
    out = set(base.heaters_out) | {name}
    bleeds = {n for h in out for n in model.heaters[h].extractions}
    controls = [(e, c) for e, c in base.extraction_control if e not in bleeds]
    controls += [(n, ("closed", 0.0)) for h in sorted(out) for n in model.heaters[h].extractions]
    return {"heaters_out": frozenset(out), "extraction_control": tuple(sorted(controls))}


def correction_curves(model, base: Conditions | None = None, *, case_name: str = "",
                      loads=DEFAULT_LOADS, conditions=None, backend: str = "seuif97",
                      check_limits: bool = True) -> CorrectionCurves:
    """Solve the correction curves of ``model`` around ``base``.

    Parameters
    ----------
    model : a calibrated :class:`~simulator.plant.model.Model` [-]
    base : the reference conditions (a case's); default the design point [-]
    case_name : named in the results [-]
    loads : throttle flows as fractions of design [-]
    conditions : names of :data:`CONDITIONS` to draw (default: all the model
        has: no reheat curves without a reheater, no heater curve without a
        closed heater) [-]
    backend : steam property backend [-]
    check_limits : refuse points beyond valves wide open (left out, with the
        reason) [-]

    Returns
    -------
    CorrectionCurves
    """
    base = base if base is not None else design_conditions(model)
    loads = [float(x) for x in loads]
    if not loads or any(not (x > 0.0) for x in loads):
        raise InputError(f"loads must be positive fractions of design throttle flow, got "
                         f"{loads!r}", key="loads")
    ref = _reference(model, base)
    heaters = _closed_heaters(model, base)
    wanted = list(conditions) if conditions is not None else list(CONDITIONS)
    unknown = [c for c in wanted if c not in CONDITIONS]
    if unknown:
        raise InputError(f"unknown condition {unknown[0]!r}; known: "
                         f"{', '.join(CONDITIONS)}", key="conditions")
    held = dataclasses.replace(base, pressure_mode="fixed",
                               throttle_pressure=ref["throttle_pressure"],
                               minimum_throttle_pressure=None, valves_open=None,
                               output=None)
    reheaters = model.of_kind(Reheater)
    curves = []
    for name in wanted:
        unit, how, band, text = CONDITIONS[name]
        if name == "heaters_out":
            if not heaters:
                continue
            values, reference = ["none", *heaters], "none"
        else:
            if ref.get(name) is None:
                continue
            r0 = ref[name]
            values = [r0 * b if how == "ratio" else r0 + b for b in band]
            reference = values[band.index(1.0 if how == "ratio" else 0.0)]
        out = np.full((len(loads), len(values)), math.nan)
        hr = np.full_like(out, math.nan)
        failed = {}
        for i, load in enumerate(loads):
            for j, v in enumerate(values):
                cond = dataclasses.replace(held, throttle_flow=load * model.throttle.flow)
                saved = [c.dp_design for c in reheaters]
                if name == "heaters_out" and v != "none":
                    cond = dataclasses.replace(cond, **_heater_out(model, base, v))
                elif name == "reheater_pressure_drop":
                    for c in reheaters:
                        c.dp_design *= v
                elif name != "heaters_out":
                    cond = dataclasses.replace(cond, **{name: v})
                try:
                    r = solve_point(model, cond, backend, check_limits=check_limits)
                except SolveError as exc:
                    failed[(i, j)] = str(exc)
                    continue
                finally:
                    for c, dp in zip(reheaters, saved):
                        c.dp_design = dp
                out[i, j] = r.totals["generator_output"]
                hr[i, j] = r.totals["heat_rate"]
        curves.append(CorrectionCurve(name, unit, text, values, reference, out, hr, failed))
    basis = (f"each load a throttle flow held while one condition varies; throttle pressure "
             f"held at {ref['throttle_pressure'] / 1e5:.2f} bar (pressure mode fixed) for "
             f"every curve; reference conditions: the case's, else the model's design values; "
             f"factor = value at the condition / value at reference (divide a test value by "
             f"it to correct it to reference)")
    return CorrectionCurves(model.name, case_name, loads, model.throttle.flow,
                            ref["throttle_pressure"], curves, basis)
