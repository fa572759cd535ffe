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

__all__ = ["constant", "velocity_ratio", "make_table_correction", "CORRECTIONS",
           "get_correction", "baumann_factor"]


def constant(q_ratio: float, dh_ratio: float) -> float:
    """No change of efficiency with flow: always 1 [-]."""
    return 1.0


R_MIN, R_MAX = 0.5, 1.5  # range of the velocity-ratio parabola [-]


def velocity_ratio(q_ratio: float, dh_ratio: float) -> float:
    """Velocity-ratio parabola of an impulse stage.

    The blade efficiency of an impulse stage is parabolic in the velocity ratio
    ``u/c0`` with its maximum at the design ratio; with blade speed fixed,
    ``c0`` scales with ``sqrt(dh_s)``, so with ``r = sqrt(dh_s,d / dh_s)``

    .. math::  \\eta / \\eta_d = 2 r - r^2

    which is 1 at design and falls off either side.  Valid near design,
    0.5 <= r <= 1.5; outside that range ``r`` is held at the nearer end (ratio
    0.75), since the parabola says nothing reliable beyond it.

    Reference: textbook impulse-stage theory, e.g. S. L. Dixon and C. A. Hall,
    *Fluid Mechanics and Thermodynamics of Turbomachinery*, 7th ed.,
    Butterworth-Heinemann, 2014, ch. 4 (blade efficiency versus ``U/c1``).
    """
    if dh_ratio <= 0.0:
        r = R_MAX
    else:
        r = min(max(math.sqrt(1.0 / dh_ratio), R_MIN), R_MAX)
    return 2.0 * r - r * r


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
}


def get_correction(name: str) -> Callable[[float, float], float]:
    """Look up a correction by name; the error lists the valid names."""
    try:
        return CORRECTIONS[name]
    except KeyError:
        raise KeyError(f"unknown efficiency correction {name!r}; valid: "
                       f"{', '.join(sorted([*CORRECTIONS, 'table']))}") from None


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
