"""Flow laws of a stage group, chosen by name from :data:`FLOW_LAWS`.

Each law gives the mass flow of a group of stages from its inlet pressure and
specific volume and its outlet pressure, with one flow constant ``K`` [m^2]
fixed at the design point; it is written in the reduced form

.. math::  \\dot m = K \\sqrt{p_{in} / v_{in}} \\; \\varphi(\\pi),
           \\quad \\pi = p_{out} / p_{in}

``ellipse`` (the default)
    Stodola's ellipse in the ``p v`` form, :math:`\\varphi = \\sqrt{1 - \\pi^2}`
    (:mod:`simulator.physics.ellipse`).  For groups of several stages whose
    pressure ratio changes little with load.
``ellipse_critical``
    The ellipse with a critical pressure ratio :math:`\\pi_c` below which the
    group passes its largest flow (its last stage chokes),

    .. math::  \\varphi = \\sqrt{1 - \\left(\\frac{\\pi - \\pi_c}{1 - \\pi_c}\\right)^2}
               \\;(\\pi > \\pi_c), \\qquad \\varphi = 1 \\;(\\pi \\le \\pi_c)

    the form of the generalised cone law for a group of ``z`` stages in
    W. Traupel, *Thermische Turbomaschinen*, vol. 1, 3rd ed., Springer, 1977,
    ch. on part-load behaviour; the estimate of its critical ratio from the
    number of stages, :math:`\\pi_c = 0.85 / \\sqrt{z + 1.5}`, is quoted from
    memory of that treatment (a single stage gives 0.54, near the critical
    ratio of a steam nozzle).  For groups of few stages with large pressure
    ratios (the last stages of a condensing LP section).  ``pi_c = 0`` is the
    ``ellipse``.
``constant_flow_coefficient``
    :math:`\\varphi = 1`: the flow follows ``sqrt(p_in / v_in)`` alone, as
    for a group whose first row is choked (a nozzle-governed first stage
    lumped with what follows, or a group with a large pressure ratio at every
    load).  The outlet pressure does not enter.

Each law's measured accuracy against a stage-by-stage calculation is in the
README (Method, flow laws) and ``tests/test_trust.py``.

Newton's iteration may ask for an outlet pressure above the inlet; the laws
continue as odd functions about ``pi = 1`` (negative flow), which keeps the
equations defined; a converged answer never has it.
"""

from __future__ import annotations

import math
from collections.abc import Callable
from dataclasses import dataclass

__all__ = ["FlowLaw", "FLOW_LAWS", "get_flow_law", "critical_ratio_from_stages",
           "reduced_flow"]


def critical_ratio_from_stages(z: float) -> float:
    """Critical pressure ratio [-] of a group of ``z`` [-] stages, ``0.85 / sqrt(z + 1.5)``.

    After Traupel's treatment of the generalised cone law (see module; the
    coefficients are quoted from memory).
    """
    if z < 1:
        raise ValueError("a group has at least one stage")
    return 0.85 / math.sqrt(z + 1.5)


def reduced_flow(pi: float, pi_c: float) -> float:
    """``phi(pi)`` of the ellipse with critical ratio ``pi_c`` [-] at ``pi`` [-],
    continued as an odd function about ``pi = 1`` (negative above it)."""
    if pi > 1.0:
        return -reduced_flow(2.0 - pi, pi_c) if pi < 2.0 - pi_c else -1.0
    if pi <= pi_c:
        return 1.0
    t = (pi - pi_c) / (1.0 - pi_c)
    return math.sqrt(max(1.0 - t * t, 0.0))


@dataclass(frozen=True)
class FlowLaw:
    """A flow law: ``flow(p_in, p_out, v_in, K, pi_c)`` [kg/s], its reduced form
    ``phi(pi, pi_c)`` [-] and a description.  ``uses_stages``: the law takes the
    group's number of stages or critical ratio."""

    name: str
    phi: Callable[[float, float], float]
    description: str
    uses_stages: bool = False

    def flow(self, p_in: float, p_out: float, v_in: float, K: float,
             pi_c: float = 0.0) -> float:
        """Mass flow [kg/s].

        Parameters
        ----------
        p_in : inlet pressure [Pa]
        p_out : outlet pressure [Pa]
        v_in : inlet specific volume [m^3/kg]
        K : flow constant [m^2]
        pi_c : critical pressure ratio [-] (``ellipse_critical``)
        """
        return K * math.sqrt(p_in / v_in) * self.phi(p_out / p_in, pi_c)

    def constant(self, m: float, p_in: float, p_out: float, v_in: float,
                 pi_c: float = 0.0) -> float:
        """Flow constant ``K`` [m^2] from one state: flow ``m`` [kg/s], pressures
        ``p_in``, ``p_out`` [Pa] (``p_out < p_in``), inlet volume ``v_in`` [m^3/kg],
        critical ratio ``pi_c`` [-]."""
        if not p_out < p_in:
            raise ValueError("a flow law needs p_out < p_in")
        return m / (math.sqrt(p_in / v_in) * self.phi(p_out / p_in, pi_c))

    def inlet_pressure(self, m: float, p_out: float, pv_in: float, K: float,
                       pi_c: float = 0.0) -> float:
        """Inlet pressure [Pa] passing ``m`` [kg/s] to ``p_out`` [Pa] with the inlet
        product ``p v`` held at ``pv_in`` [J/kg], flow constant ``K`` [m^2] (bisection)."""
        lo, hi = p_out, max(2.0 * p_out, 1.0)
        target = m * math.sqrt(pv_in) / K  # = p_in * phi(p_out / p_in)
        while hi * self.phi(p_out / hi, pi_c) < target and hi < 1e10:
            hi *= 2.0
        for _ in range(200):
            mid = 0.5 * (lo + hi)
            if mid * self.phi(p_out / mid, pi_c) < target:
                lo = mid
            else:
                hi = mid
            if hi - lo < 1e-12 * hi:
                break
        return 0.5 * (lo + hi)


def _ellipse_phi(pi: float, pi_c: float) -> float:
    return math.copysign(math.sqrt(abs(1.0 - pi * pi)), 1.0 - pi)


FLOW_LAWS: dict[str, FlowLaw] = {
    "ellipse": FlowLaw("ellipse", _ellipse_phi, "Stodola's ellipse, p v form"),
    "ellipse_critical": FlowLaw("ellipse_critical", reduced_flow,
                                "ellipse with a critical pressure ratio (Traupel)",
                                uses_stages=True),
    "constant_flow_coefficient": FlowLaw("constant_flow_coefficient", lambda pi, pi_c: 1.0,
                                         "flow proportional to sqrt(p_in / v_in)"),
}
"""The flow laws by name; ``ellipse`` is the default."""


def get_flow_law(name: str) -> FlowLaw:
    """The flow law called ``name``; the error lists the valid names."""
    try:
        return FLOW_LAWS[name]
    except KeyError:
        raise KeyError(f"unknown flow law {name!r}; valid: {', '.join(FLOW_LAWS)}") from None

