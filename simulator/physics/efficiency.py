"""Stage-group efficiency away from design, and Baumann's moisture rule.

Each correction returns the ratio ``eta / eta_design`` of the dry efficiency
from two dimensionless inputs:

``q_ratio``
    inlet volume flow over its design value, ``m v_in / (m v_in)_design`` [-]
``dh_ratio``
    isentropic enthalpy drop over its design value, ``dh_s / dh_s,design`` [-]

Corrections are chosen by name from :data:`CORRECTIONS`; a user table or a
callable ``f(q_ratio, dh_ratio) -> ratio`` can be given instead.
"""

from __future__ import annotations

import math
from collections.abc import Callable, Sequence

import numpy as np

__all__ = ["constant", "velocity_ratio", "velocity_ratio_unclamped", "velocity_ratio_per_stage",
           "make_table_correction", "CORRECTIONS", "get_correction", "baumann_factor",
           "PER_STAGE"]


def constant(q_ratio: float, dh_ratio: float) -> float:
    """No change of efficiency with flow: always 1 [-]."""
    return 1.0


R_MIN, R_MAX = 0.5, 1.5  # range of the velocity-ratio parabola [-]


def _parabola(r: float) -> float:
    return 2.0 * r - r * r


def velocity_ratio(q_ratio: float, dh_ratio: float) -> float:
    """Velocity-ratio parabola of an impulse stage, held within 0.5 <= r <= 1.5.

    The blade efficiency of an impulse stage is parabolic in the velocity ratio
    ``u/c0`` with its maximum at the design ratio; with blade speed fixed,
    ``c0`` scales with ``sqrt(dh_s)``, so with ``r = sqrt(dh_s,d / dh_s)``

    .. math::  \\eta / \\eta_d = 2 r - r^2

    which is 1 at design and falls off either side.

    Why the range, and why held at its ends: the parabola is the ideal blade
    efficiency of one impulse stage (nozzle and blade losses constant, no
    leakage or disc friction); it reaches zero at ``r = 2`` (a drop a quarter of
    design) and would give negative work beyond, while a real group's
    efficiency at a small drop is set by losses the parabola does not hold
    (disc friction and windage, the reaction of the later stages).  Outside
    ``0.5 <= r <= 1.5`` (a drop between 44 % and 400 % of design) ``r`` is held
    at the nearer end, which bounds the correction at 0.75: a choice of this
    project that keeps the default answers continuous and positive, with no
    published source (common practice, no source).  ``velocity_ratio_unclamped``
    applies the parabola over its whole range instead (zero efficiency at and
    beyond ``r = 2``); ``velocity_ratio_per_stage`` applies it stage by stage.

    Reference: textbook impulse-stage theory, e.g. S. L. Dixon and C. A. Hall,
    *Fluid Mechanics and Thermodynamics of Turbomachinery*, 7th ed.,
    Butterworth-Heinemann, 2014, ch. 4 (blade efficiency versus ``U/c1``).
    """
    if dh_ratio <= 0.0:
        r = R_MAX
    else:
        r = min(max(math.sqrt(1.0 / dh_ratio), R_MIN), R_MAX)
    return 2.0 * r - r * r


def velocity_ratio_unclamped(q_ratio: float, dh_ratio: float) -> float:
    """The velocity-ratio parabola :func:`velocity_ratio` over its whole range [-]:
    ``2 r - r^2`` for ``r < 2`` (no lower bound but zero), 0 at and beyond ``r = 2``
    (the stage does no work) and for a drop of zero or less."""
    if dh_ratio <= 0.0:
        return 0.0
    r = math.sqrt(1.0 / dh_ratio)
    return max(_parabola(r), 0.0)


def velocity_ratio_per_stage(p_in: float, p_out: float, p_in_design: float,
                             p_out_design: float, dh_ratio: float, stages: int,
                             kappa: float = 1.3, clamp: bool = True) -> float:
    """The velocity-ratio parabola applied to each of ``stages`` estimated stages [-].

    The group is split at design into stages of equal pressure ratio.  Off
    design each stage's inlet pressure follows the ellipse law applied to the
    stages from it to the group's outlet, with ``p v`` scaling as at the group
    inlet: ``p_k^2 = p_out^2 + (p_in^2 - p_out^2) (p_k,d^2 - p_out,d^2) /
    (p_in,d^2 - p_out,d^2)``.  Each stage's isentropic drop is the ideal-gas
    one, ``dh_k ~ (p_k / p_in)^e (1 - (p_k+1 / p_k)^e)``, ``e = (kappa - 1) /
    kappa``, scaled so the stages add up to the group's drop ratio.  The
    correction is the drop-weighted mean of ``2 r_k - r_k^2``, ``r_k =
    sqrt(dh_k,d / dh_k)`` (held within 0.5-1.5 when ``clamp``, as in
    :func:`velocity_ratio`).

    Where the group's pressure ratio changes at part load (the last stages of
    a condensing section, whose exhaust pressure is held while the inlet falls
    with the flow), the last stage's drop falls far more than the group's mean
    and its velocity ratio rises: the group average understates the loss.

    Parameters
    ----------
    p_in, p_out : inlet and outlet pressure [Pa]
    p_in_design, p_out_design : their design values [Pa]
    dh_ratio : the group's isentropic drop over its design value [-]
    stages : number of stages of the group [-]
    kappa : isentropic exponent of the ideal-gas drop estimate [-] (1.3:
        superheated steam, common practice, no source)
    clamp : hold each ``r_k`` within 0.5-1.5 [-]

    Returns
    -------
    float
        ``eta / eta_design`` [-].

    Assumptions: stages of equal design pressure ratio, the ellipse law for the
    tail of the group, ideal-gas drops; the estimate of this project (no
    published source), built from the parabola of Dixon and Hall (see
    :func:`velocity_ratio`) and Stodola's ellipse.
    """
    if stages <= 1 or p_out >= p_in:
        return velocity_ratio(0.0, dh_ratio) if clamp else velocity_ratio_unclamped(0.0,
                                                                                    dh_ratio)
    e = (kappa - 1.0) / kappa
    z = int(stages)
    pi_d = p_out_design / p_in_design
    pd = [p_in_design * pi_d ** (k / z) for k in range(z + 1)]
    span_d = p_in_design ** 2 - p_out_design ** 2
    span = p_in * p_in - p_out * p_out
    p = [math.sqrt(p_out * p_out + span * (q * q - p_out_design ** 2) / span_d) for q in pd]
    p[0], p[-1] = p_in, p_out

    def drops(ps):
        return [(ps[k] / ps[0]) ** e * (1.0 - (ps[k + 1] / ps[k]) ** e) for k in range(z)]

    dd, do = drops(pd), drops(p)
    scale = dh_ratio * sum(dd) / sum(do) if sum(do) > 0.0 else 0.0
    do = [d * scale for d in do]
    total = sum(do)
    if total <= 0.0:
        return 0.0 if not clamp else velocity_ratio(0.0, 0.0)
    ratio = 0.0
    for d_design, d in zip(dd, do):
        if d <= 0.0:
            r = R_MAX if clamp else 2.0
        else:
            r = math.sqrt(d_design / d)
            if clamp:
                r = min(max(r, R_MIN), R_MAX)
        ratio += d / total * max(_parabola(r), 0.0)
    return ratio


PER_STAGE = "velocity_ratio_per_stage"
"""The correction applied per estimated stage (needs the group's pressures and
``stages``), chosen by name like those of :data:`CORRECTIONS`."""


def make_table_correction(q_ratios: Sequence[float],
                          eta_ratios: Sequence[float]) -> Callable[[float, float], float]:
    """A correction from a user table of ``eta/eta_d`` versus volume-flow ratio.

    Linear interpolation; held constant beyond the ends of the table.
    ``q_ratios`` must increase.
    """
    q = np.asarray(q_ratios, dtype=float)
    e = np.asarray(eta_ratios, dtype=float)
    if q.ndim != 1 or q.shape != e.shape or q.size < 2 or np.any(np.diff(q) <= 0):
        raise ValueError("table needs two or more increasing volume-flow ratios and the "
                         "same number of efficiency ratios")
    ql, el = q.tolist(), e.tolist()

    def table(q_ratio: float, dh_ratio: float) -> float:
        return float(np.interp(q_ratio, ql, el))

    table.q_ratios = ql  # type: ignore[attr-defined]
    table.eta_ratios = el  # type: ignore[attr-defined]
    return table


CORRECTIONS: dict[str, Callable[[float, float], float]] = {
    "constant": constant,
    "velocity_ratio": velocity_ratio,
    "velocity_ratio_unclamped": velocity_ratio_unclamped,
}


def get_correction(name: str) -> Callable[[float, float], float]:
    """Look up a correction by name; the error lists the valid names."""
    try:
        return CORRECTIONS[name]
    except KeyError:
        raise KeyError(f"unknown efficiency correction {name!r}; valid: "
                       f"{', '.join(sorted([*CORRECTIONS, PER_STAGE, 'table']))}") from None


def baumann_factor(y_in: float, y_out: float = 0.0, alpha: float = 1.0) -> float:
    """Baumann's rule: wet efficiency over dry efficiency of an expansion.

    .. math::  \\eta_{wet} / \\eta_{dry} = 1 - \\alpha \\bar y,
               \\quad \\bar y = (y_{in} + y_{out}) / 2

    Each percent of mean moisture costs about ``alpha`` percent of efficiency
    (the water droplets are dragged along by the steam and brake the blades).
    This is the one place the rule is written; every expansion, at design
    (calibration of the dry efficiency) and off design, uses it.

    Parameters
    ----------
    y_in : moisture fraction at the inlet of the expansion, 0 when superheated [-]
    y_out : moisture fraction at the outlet of the expansion, 0 when superheated [-]
    alpha : Baumann factor; 1 is Baumann's own value, measured values span
        about 0.4-2.5 (range quoted from memory of the literature) [-]

    Returns
    -------
    float
        ``eta_wet / eta_dry`` [-].

    Assumptions and range: the mean of inlet and outlet moisture stands for the
    moisture along the expansion (the usual form for a stage group); a rule of
    thumb for moisture up to about 15 % (common practice, no source).

    Reference: K. Baumann, "Some recent developments in large steam turbine
    practice", J. Inst. Electrical Engineers 59(302), 565-623, 1921.
    """
    return 1.0 - 0.5 * alpha * (y_in + y_out)
