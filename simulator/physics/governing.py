"""Nozzle flow and the governing stage: the laws of nozzle-group (partial-arc) control.

A nozzle-governed turbine feeds its first stage (the governing or control
stage) through several nozzle groups, each behind its own control valve; the
valves open in sequence.  Three laws describe it:

Nozzle flow
    Isentropic flow of a compressible fluid through a convergent nozzle
    (the Saint-Venant--Wantzel relation), mass flow per unit throat area

    .. math::  \\frac{\\dot m}{A} = \\sqrt{\\frac{p_0}{v_0}}\\,\\psi(\\pi),\\quad
               \\psi = \\sqrt{\\frac{2\\kappa}{\\kappa-1}\\left(\\pi^{2/\\kappa}
               - \\pi^{(\\kappa+1)/\\kappa}\\right)}

    for a pressure ratio ``pi = p1/p0`` above the critical ratio
    ``pi* = (2/(kappa+1))^(kappa/(kappa-1))``; below it the nozzle is choked and
    passes ``psi(pi*)``, proportional to ``p0 / sqrt(p0 v0)`` whatever the back
    pressure.  For steam the exponent ``kappa`` is taken from real-steam
    properties (IAPWS-IF97) as the mean isentropic exponent over the expansion
    (:func:`mean_isentropic_exponent`), not the ideal-gas 1.3.
    Source: Y. A. Cengel and M. A. Boles, *Thermodynamics: An Engineering
    Approach*, 8th ed., McGraw-Hill, 2015, ch. 17 (isentropic flow through
    nozzles, choked flow; from memory); the same relations with ``kappa = 1.3``
    for superheated steam are in every steam-turbine text.

    An alternative for a governing stage lumped with the stages behind it is
    Stodola's ellipse (``law = "ellipse"``, :mod:`simulator.physics.ellipse`),
    the limit of many stages: no choking.

Blade efficiency versus velocity ratio
    For an impulse stage the blading efficiency is a parabola in the velocity
    ratio ``nu = u/c0`` with its maximum at ``nu_opt``; with ``r = nu/nu_opt``,
    ``eta/eta_peak = 2 r - r^2`` (S. L. Dixon and C. A. Hall, *Fluid Mechanics
    and Thermodynamics of Turbomachinery*, 7th ed., 2014, ch. 4; the same
    parabola as :func:`simulator.physics.efficiency.velocity_ratio`).  At
    constant blade speed ``r`` scales with ``1/sqrt(dh_s)`` of each stream.

Partial-admission (pumping) loss
    Blades passing through the arc that receives no steam pump the steam
    around them; the power lost scales with the steam density, the cube of the
    blade speed and the idle arc, so that relative to the stage's isentropic
    power it is ``zeta = K (1 - eps)/eps * r^3`` for an admitted arc fraction
    ``eps`` (the form of the pumping-loss correlations of partial-admission
    stages, e.g. W. Traupel, *Thermische Turbomaschinen*, vol. 1, 3rd ed.,
    Springer, 1977, partial admission; from memory).  Sector-end (filling)
    losses are not modelled separately: they are inside the calibrated peak.
"""

from __future__ import annotations

import math
from collections.abc import Callable, Sequence

__all__ = ["critical_ratio", "flow_function", "nozzle_flux", "mean_isentropic_exponent",
           "governing_efficiency", "peak_efficiency", "valve_openings", "solve_increasing",
           "NOZZLE_LAWS"]

NOZZLE_LAWS = ("isentropic", "ellipse")


def critical_ratio(kappa: float) -> float:
    """The critical pressure ratio ``p*/p0`` [-] of a nozzle for isentropic
    exponent ``kappa`` [-] (0.5457 for 1.3; 0.5283 for 1.4)."""
    return (2.0 / (kappa + 1.0)) ** (kappa / (kappa - 1.0))


def flow_function(pi: float, kappa: float) -> float:
    """The nozzle flow function ``psi`` [-] at pressure ratio ``pi = p1/p0`` [-]:
    mass flow per throat area is ``sqrt(p0/v0) * psi``.  Choked (held at the
    critical ratio's value) below the critical ratio; zero at ``pi >= 1``."""
    if pi >= 1.0:
        return 0.0
    pi = max(pi, critical_ratio(kappa))
    k = kappa
    return math.sqrt(2.0 * k / (k - 1.0) * (pi ** (2.0 / k) - pi ** ((k + 1.0) / k)))


def nozzle_flux(p0: float, v0: float, p1: float, kappa: float,
                law: str = "isentropic") -> float:
    """Mass flow per unit throat area [kg/(s m^2)] of a nozzle row.

    Parameters
    ----------
    p0 : inlet (nozzle-box) pressure [Pa]
    v0 : inlet specific volume [m^3/kg]
    p1 : outlet pressure [Pa]
    kappa : isentropic exponent [-] (``"isentropic"`` law only)
    law : ``"isentropic"`` (Saint-Venant--Wantzel with choking) or
        ``"ellipse"`` (Stodola's ellipse ``sqrt((p0^2 - p1^2)/(p0 v0))``)
    """
    if law == "ellipse":
        d = p0 * p0 - p1 * p1
        return math.copysign(math.sqrt(abs(d) / (p0 * v0)), d)
    return math.sqrt(p0 / v0) * flow_function(p1 / p0, kappa)


def mean_isentropic_exponent(p0: float, v0: float, p1: float, v1: float) -> float:
    """The mean isentropic exponent ``kappa = ln(p0/p1) / ln(v1/v0)`` [-] of an
    isentropic expansion from ``(p0, v0)`` to ``(p1, v1)`` [Pa, m^3/kg]: the
    exponent of the ``p v^kappa = const`` line through both states."""
    return math.log(p0 / p1) / math.log(v1 / v0)


def governing_efficiency(r: float, eta_peak: float, admission: float,
                         loss_coefficient: float) -> float:
    """Efficiency [-] of one stream through the governing stage.

    ``r`` [-] is the stream's velocity ratio over the best one, ``eta_peak``
    [-] the blading efficiency at the best ratio, ``admission`` [-] the
    admitted fraction of the nozzle arc (0, 1], ``loss_coefficient`` [-] the
    pumping-loss coefficient ``K``.  Held at zero where the parabola and the
    loss would give less (a stream through a barely open valve only throttles).
    """
    eta = eta_peak * (2.0 * r - r * r) - loss_coefficient * (1.0 - admission) / admission * r ** 3
    return max(eta, 0.0)


def peak_efficiency(eta_design: float, r_design: float, admission_design: float,
                    loss_coefficient: float) -> float:
    """The peak blading efficiency [-] that gives ``eta_design`` [-] at design
    velocity ratio ``r_design`` [-] (over the best) and admitted arc
    ``admission_design`` [-] (the inverse of :func:`governing_efficiency`)."""
    loss = loss_coefficient * (1.0 - admission_design) / admission_design * r_design ** 3
    return (eta_design + loss) / (2.0 * r_design - r_design * r_design)


def valve_openings(flow: float, arcs: Sequence[float], overlap: float) -> list[float]:
    """Openings [-] of valves that open in sequence to pass ``flow``.

    ``flow`` is the flow to pass in units of the flow of the whole arc with
    every valve wide open [-]; ``arcs`` [-] each valve's share of the arc, in
    opening order; ``overlap`` [-] the opening at which the next valve starts,
    counted back from fully open (0: the next starts when the previous is fully
    open).  An opening is the fraction of its group's wide-open flow.  Flows
    beyond the whole arc give every valve 1.
    """
    n = len(arcs)
    step = 1.0 - overlap
    starts = [k * step for k in range(n)]

    def passed(s):
        return sum(a * min(max(s - s0, 0.0), 1.0) for a, s0 in zip(arcs, starts))

    if flow <= 0.0:
        return [0.0] * n
    if flow >= sum(arcs):
        return [1.0] * n
    points = sorted(set(starts + [s0 + 1.0 for s0 in starts]))
    lo, f_lo = points[0], 0.0
    for s in points[1:]:
        f = passed(s)
        if f >= flow:
            s_at = lo + (s - lo) * (flow - f_lo) / (f - f_lo)  # linear between breakpoints
            return [min(max(s_at - s0, 0.0), 1.0) for s0 in starts]
        lo, f_lo = s, f
    return [1.0] * n


def solve_increasing(f: Callable[[float], float], target: float, lo: float, hi: float,
                     rtol: float = 1e-14) -> float:
    """The ``x`` in ``[lo, hi]`` with ``f(x) = target`` for an increasing ``f``,
    by the Illinois variant of regula falsi (superlinear, always bracketed):
    until the bracket is narrower than ``rtol`` of ``hi`` or ``f`` meets the
    target to rounding.  Outside the range the nearer end.

    (Only these two tests end it: a short step alone does not mean the root is
    near, as regula falsi creeps from one side before Illinois halves it.)"""
    f_lo, f_hi = f(lo) - target, f(hi) - target
    if f_lo >= 0.0:
        return lo
    if f_hi <= 0.0:
        return hi
    noise = 4.0 * 2.2e-16 * max(abs(target), abs(f_lo), abs(f_hi))
    side = 0
    x = hi
    for _ in range(200):
        x = (lo * f_hi - hi * f_lo) / (f_hi - f_lo)
        fx = f(x) - target
        if abs(fx) <= noise or hi - lo <= rtol * abs(hi):
            return x
        if fx > 0.0:
            hi, f_hi = x, fx
            if side == -1:
                f_lo *= 0.5
            side = -1
        else:
            lo, f_lo = x, fx
            if side == 1:
                f_hi *= 0.5
            side = 1
    return x
