"""The machine as tested: the fitted model file, and what each deviation costs.

A fitted model is written as a small TOML file beside the measurements: it
names the design model it was fitted from (path and SHA-256), the measurements,
the quality of the fit, and each fitted constant with its design value and 95 %
uncertainty.  :func:`load_as_tested` reads it back as a calibrated
:class:`~simulator.plant.model.Model` whose name says "as tested".

:func:`deviation_report` puts each fitted constant against design and prices
it: output and heat rate at the design throttle flow (sliding pressure, design
steam conditions) with that constant alone at its fitted value, and with all
of them, against the design model.
"""

from __future__ import annotations

import copy
import datetime as _dt
import json
import os
from dataclasses import dataclass
from pathlib import Path

import numpy as np

from ..plant.case import design_conditions
from ..plant.fitted import BASIS, is_as_tested, load_as_tested, resolve_tunable
from ..solve.point import solve_point
from ..units import Where
from ..version import __version__
from .fit import FitResult
from .tags import COVERAGE

__all__ = ["Deviation", "deviation_report", "write_as_tested", "load_as_tested", "BASIS",
           "is_as_tested", "predict", "monte_carlo_band"]


@dataclass
class Deviation:
    """One fitted constant against design and its cost at the design throttle flow.

    ``value``, ``uncertainty`` (95 %) and ``design`` in the tunable's ``unit``;
    ``output_loss`` [W] (design output less output with this constant as fitted;
    positive: output lost) and ``heat_rate_change`` [J/J] (positive: worse), with
    their 95 % uncertainties from the constant's (linear in the deviation).
    """

    key: str
    unit: str
    value: float
    uncertainty: float
    design: float
    output_loss: float
    output_loss_uncertainty: float
    heat_rate_change: float
    heat_rate_change_uncertainty: float


def _rated(model, steam):
    return solve_point(model, design_conditions(model), steam, check_limits=False)


def deviation_report(result: FitResult, backend: str = "seuif97") -> tuple[list[Deviation],
                                                                          dict]:
    """Each fitted tunable against design and its cost in output and heat rate.

    Parameters
    ----------
    result : a fit [-]
    backend : steam property backend [-]

    Returns
    -------
    (list[Deviation], dict)
        One entry per tunable, and the totals with all fitted together:
        ``design_output`` [W], ``tested_output`` [W] and its 95 % uncertainty
        ``tested_output_uncertainty`` [W], ``design_heat_rate``,
        ``tested_heat_rate`` and ``tested_heat_rate_uncertainty`` [J/J].
    """
    design = copy.deepcopy(result.meas.model)
    design.solver_cache.clear()
    base = _rated(design, backend)
    p0, hr0 = base.totals["generator_output"], base.totals["heat_rate"]
    out = []
    for p in result.parameters:
        if p.tag is not None:
            continue
        value, u = result.tunable(p.key)
        ref = resolve_tunable(design, p.key, Where())
        d = result.design[p.key]
        setattr(ref.component, ref.tunable.attribute, value)
        try:
            r = _rated(design, backend)
        finally:
            setattr(ref.component, ref.tunable.attribute, d)
        dp = p0 - r.totals["generator_output"]
        dhr = r.totals["heat_rate"] - hr0
        slope = 1.0 / (value - d) if value != d else 0.0
        out.append(Deviation(p.key, ref.tunable.unit, value, u, d, dp, abs(dp * slope * u),
                             dhr, abs(dhr * slope * u)))
    r, u = predict(result, None, backend)
    return out, {"design_output": p0, "tested_output": r.totals["generator_output"],
                 "tested_output_uncertainty": u["generator_output"],
                 "design_heat_rate": hr0, "tested_heat_rate": r.totals["heat_rate"],
                 "tested_heat_rate_uncertainty": u["heat_rate"]}


def predict(result: FitResult, cond=None, backend: str = "seuif97"):
    """A point of the fitted model with the 95 % uncertainty of every total from the
    fit's covariance, linearised (first-order propagation, JCGM 100:2008 "Guide to
    the expression of uncertainty in measurement", section 5.1).

    Parameters
    ----------
    result : a fit [-]
    cond : the operating conditions (:class:`simulator.plant.case.Conditions`, SI);
        default: the design conditions [-]
    backend : steam property backend [-]

    Returns
    -------
    (PointResult, dict)
        The point as tested, and each total's 95 % uncertainty [unit of the total].
    """
    model = result.model
    cond = design_conditions(model) if cond is None else cond
    base = solve_point(model, cond, backend, check_limits=False)
    keys = [p for p in result.parameters if p.tag is None]
    n = len(keys)
    grads = {name: np.zeros(n) for name in base.totals}
    for c, p in enumerate(keys):
        ref = resolve_tunable(model, p.key, Where())
        value = getattr(ref.component, ref.tunable.attribute)
        step = 1e-3 * p.scale
        setattr(ref.component, ref.tunable.attribute, value + step)
        try:
            r = solve_point(model, cond, backend, guess=base.unknowns,
                            jacobian=base.jacobian, check_limits=False)
        finally:
            setattr(ref.component, ref.tunable.attribute, value)
        for name in grads:
            grads[name][c] = (r.totals[name] - base.totals[name]) / step
    C = result.covariance[:n, :n]  # the tunables come first among the parameters
    u = {name: float(COVERAGE * np.sqrt(max(g @ C @ g, 0.0))) for name, g in grads.items()}
    return base, u


def monte_carlo_band(result: FitResult, conditions: list, draws: int = 200, seed: int = 0,
                     backend: str = "seuif97", names=("generator_output", "heat_rate")):
    """Totals of the fitted model at several points with Monte Carlo bands: the
    tunables drawn from the fit's normal distribution (mean and covariance; draws
    outside the declared bounds are drawn again), each draw solving every point
    (JCGM 101:2008, "Propagation of distributions using a Monte Carlo method").

    Parameters
    ----------
    result : a fit [-]
    conditions : the operating points (:class:`simulator.plant.case.Conditions`, SI) [-]
    draws : number of draws [-]
    seed : seed of the random generator (the same seed, the same band) [-]
    backend : steam property backend [-]
    names : the totals to band [-]

    Returns
    -------
    dict
        For each total name a (points, 3) array: the value of the fitted model and
        the 2.5 % and 97.5 % quantiles over the draws [unit of the total].  Draws
        that fail to solve are left out; ``"draws"`` holds how many were used at
        each point [-].
    """
    from ..errors import SolveError

    model = copy.deepcopy(result.model)
    model.solver_cache.clear()
    keys = [p for p in result.parameters if p.tag is None]
    refs = [resolve_tunable(model, p.key, Where()) for p in keys]
    n = len(keys)
    mean = np.array([getattr(r.component, r.tunable.attribute) for r in refs])
    C = result.covariance[:n, :n]
    lo = np.array([r.tunable.lo for r in refs])
    hi = np.array([r.tunable.hi for r in refs])
    rng = np.random.default_rng(seed)
    base = [solve_point(model, c, backend, check_limits=False) for c in conditions]
    samples = {name: [[] for _ in conditions] for name in names}
    for _ in range(draws):
        x = rng.multivariate_normal(mean, C)
        while np.any(x < lo) or np.any(x > hi):
            x = rng.multivariate_normal(mean, C)
        for r, v in zip(refs, x):
            setattr(r.component, r.tunable.attribute, float(v))
        for k, c in enumerate(conditions):
            try:
                p = solve_point(model, c, backend, guess=base[k].unknowns,
                                jacobian=base[k].jacobian, check_limits=False)
            except SolveError:
                continue
            for name in names:
                samples[name][k].append(p.totals[name])
    out = {}
    for name in names:
        out[name] = np.array([[b.totals[name], *np.percentile(s, [2.5, 97.5])]
                              if s else [b.totals[name], np.nan, np.nan]
                              for b, s in zip(base, samples[name])])
    out["draws"] = np.array([len(s) for s in samples[names[0]]])
    return out


def _toml_string(text: str) -> str:
    return json.dumps(text, ensure_ascii=False)


def write_as_tested(result: FitResult, path: str | Path) -> Path:
    """Write the fitted model file.

    Parameters
    ----------
    result : a fit [-]
    path : the file to write (TOML) [-]

    Returns
    -------
    Path
        The file written (whole or not at all: written under a temporary name and
        renamed).
    """
    path = Path(path)
    meas = result.meas
    model = meas.model
    here = path.parent.resolve()
    rel_model = os.path.relpath(Path(model.file).resolve(), here)
    rel_meas = os.path.relpath(Path(meas.file).resolve(), here)
    rec = result.rec
    now = _dt.datetime.now(_dt.UTC).strftime("%Y-%m-%dT%H:%M:%SZ")
    lines = [
        f"# The machine AS TESTED: constants of {model.name!r} fitted to measured data by",
        f"# partload {__version__} on {now}. The design model describes the machine AS",
        "# DESIGNED; this file changes only the constants below, after its calibration.",
        "",
        f"basis = {_toml_string(BASIS)}",
        f"design_model = {_toml_string(rel_model)}",
        f"design_model_sha256 = {_toml_string(model.sha256)}",
        f"measurements = {_toml_string(rel_meas)}",
        f"data_sha256 = {_toml_string(meas.data_sha256)}",
        f"points = {len(meas.values)}",
        f"chi2 = {rec.chi2!r}",
        f"degrees_of_freedom = {rec.dof}",
        f"chi2_limit_95 = {rec.chi2_limit!r}",
        f"quality_criterion_met = {'true' if rec.passed else 'false'}",
        "",
    ]
    for p in result.parameters:
        if p.tag is not None:
            continue
        value, u = result.tunable(p.key)
        ref = resolve_tunable(model, p.key, Where())
        lines += [f"[tunables.{_toml_string(p.key)}]",
                  f"value = {value!r}",
                  f"design = {result.design[p.key]!r}",
                  f"uncertainty_95 = {u!r}",
                  f"unit = {_toml_string(ref.tunable.unit)}", ""]
    path.parent.mkdir(parents=True, exist_ok=True)
    tmp = path.with_name(f".{path.name}.{os.getpid()}.tmp")
    try:
        tmp.write_text("\n".join(lines), encoding="utf-8")
        os.replace(tmp, path)
    finally:
        if tmp.exists():
            tmp.unlink()
    return path
