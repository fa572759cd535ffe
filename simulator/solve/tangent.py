"""The Jacobian of a point's equations carried along the march (forward mode).

A finite-difference column re-marches everything downstream of its unknown:
a change of any pressure changes the enthalpy, and so the flow, of every node
after it.  On a chain of ``n`` stage groups a Jacobian then costs about
``n**2 / 2`` component evaluations.  Here the march is differenced once, step by
step: each step (one component from node ``i`` to node ``j``) is evaluated again
with each of its inputs moved in turn (the pressures at its ends, its inlet
enthalpy, the net flow a passing kind carries, the flow of a kind whose flow is
an unknown), and the chain rule carries the derivatives of every node's
pressure, flow and enthalpy with respect to all unknowns at once (one row of
``n`` numbers a node).  That is at most five evaluations a step, whatever
``n`` is.  The residuals after the march (the water side, freed nodes, the
output demand: :meth:`PointEquations.close`) are differenced along each
column's direction of their inputs, as a finite-difference column would move
them.

The columns are derivatives of the same residuals as
:func:`~simulator.solve.newton.fd_jacobian` takes forward differences of, with
steps of the same relative size; they agree with its columns to the accuracy of
a forward difference (about ``1e-7`` relative; ``tests/test_tangent.py``), and
Newton converges to the same answer.

References
----------
A. Griewank and A. Walther, *Evaluating Derivatives: Principles and Techniques
of Algorithmic Differentiation*, 2nd ed., SIAM, 2008, ch. 3 (the forward mode:
tangents carried through a program step by step).
"""

from __future__ import annotations

import math

import numpy as np

from .equations import TrialPointError

__all__ = ["tangent_jacobian", "STEP"]

STEP = 1e-7  # relative step of every difference, as fd_jacobian's step in ln p [-]
H_SCALE = 1e5  # [J/kg] the enthalpy step is STEP times the larger of |h| and this


def tangent_jacobian(eq, fun, x: np.ndarray, F: np.ndarray | None):
    """Residuals and Jacobian at ``x`` [-]: ``(F, J)``.

    ``eq`` is a :class:`~simulator.solve.equations.PointEquations`; ``fun`` the
    residual function Newton counts evaluations with (the base point is
    marched once through it, with its property calls remembered); ``F`` the
    residuals at ``x`` when known (``None`` otherwise).  A law that cannot take
    a moved input raises :class:`~simulator.solve.equations.TrialPointError`, as
    a residual evaluation does.
    """
    memo = eq.memo_steam
    memo.clear()
    eq.steam = memo
    try:
        base = fun(x)  # the march at x, kept in eq._last; its property calls remembered
        F = base if F is None else F
        try:
            return F, _carry(eq, x.size)
        except (ArithmeticError, ValueError) as exc:  # a moved input the laws cannot take,
            # as PointEquations.residuals says of a trial point
            raise TrialPointError(
                f"the equations cannot be evaluated at a trial point ({exc})") from None
    finally:
        eq.steam = eq.raw_steam
        memo.clear()


def _outputs(c, eq, i: int, j: int, net: float) -> tuple[float, float, float, float, bool]:
    """``(flow, outlet enthalpy, power, drop, has a drop)`` of one step: the drop
    [Pa] of a kind that passes the net flow (0 where it has none at this
    point), and the flow ``net`` [kg/s] it passes."""
    if c.sets_flow:
        m, h_out, power, _rec = c.evaluate(eq, i, j, net)
        return m, h_out, power, 0.0, False
    h_out, dp, power, _rec = c.evaluate(eq, i, j, net)
    return net, h_out, power, (0.0 if dp is None else dp), dp is not None


def _carry(eq, n: int) -> np.ndarray:
    """The Jacobian from the march kept in ``eq._last`` (see the module)."""
    (_xs, F_base, p, h, M, m_T, _bf, heater_bleed, shaft, _P, steps, _s) = eq._last
    N = eq.N
    md = eq.m_design
    n_p, n_h = eq.n_p, eq.n_h
    steam = eq.steam
    J = np.zeros((eq.n_res, n))
    # tangents: d(quantity)/d(unknowns), one row per node
    DP = np.zeros((N, n))
    for k, i in enumerate(eq.free):
        DP[i, k] = p[i]  # the unknown is ln p
    dmT = np.zeros(n)
    if eq.flow_unknown:
        dmT[-1] = md
    bleed_node = [0.0] * N
    DB = np.zeros((N, n))  # bleeds taken at each node
    DHB = np.zeros((n_h, n))  # each heater's bleed
    for (_name, i, kind, v), share, b in zip(eq.bleeds, eq.bleed_share, _bf):
        bleed_node[i] += b
        if kind == 1:
            DB[i] += v * dmT
        elif kind == 2:
            DB[i, n_p + v] += md * share
            DHB[v, n_p + v] += md * share
    DM = np.zeros((N, n))
    DE = np.zeros((N, n))
    DH = np.zeros((N, n))
    DM[eq.src] = dmT
    src = eq.src
    if DP[src].any():
        dp_ = STEP * p[src]
        DH[src] = (steam.h_pT(p[src] + dp_, eq.T_throttle) - h[src]) / dp_ * DP[src]
    d_shaft = np.zeros(n)
    comp_q = {c.name: q for q, c in enumerate(eq.flow_comps)}
    d_comp = np.zeros((eq.n_c, n))
    n_flow = n_p + n_h
    by_node: list[list] = [[] for _ in range(N)]
    for s in steps:
        by_node[s[1]].append(s)
    # the march's lists, copied: a moved input is put back after each evaluation
    P, H, HV, HL = list(p), list(h), list(eq.hv), list(eq.hl)
    saved = eq.p, eq.h, eq.hv, eq.hl
    eq.p, eq.h, eq.hv, eq.hl = P, H, HV, HL
    flows = eq.component_flow
    added = eq.added
    row_of, passes_net, p_design = eq.row_of, eq.passes_net, eq.p_design
    nan = math.nan
    try:
        for i in range(N):
            if i != src and M[i] > 0.0:
                DH[i] = (DE[i] - h[i] * DM[i]) / M[i]
            here = by_node[i]
            if not here:
                continue
            net = M[i] - bleed_node[i]
            d_net = DM[i] - DB[i]
            d_out = np.zeros(n)
            for c, _i, j, m, h_out, _power, _rec in here:
                base = _outputs(c, eq, i, j, net)
                keep = HV[j], HL[j], HL[i]
                moves = []  # (outputs with one input moved, its step, its tangent)

                def moved(net_in: float, d: float, t: np.ndarray) -> None:
                    moves.append((_outputs(c, eq, i, j, net_in), d, t))  # noqa: B023
                    HV[j], HL[j], HL[i] = keep  # noqa: B023 - what the step wrote

                if DP[i].any():
                    d = STEP * p[i]
                    P[i] = p[i] + d
                    hv_i = HV[i]
                    if hv_i == hv_i:  # as the step before node i would have left it
                        HV[i] = steam.h_vap_sat(P[i])
                        HL[i] = nan
                    moved(net, d, DP[i])
                    P[i], HV[i] = p[i], hv_i
                if DP[j].any():
                    d = STEP * p[j]
                    P[j] = p[j] + d
                    moved(net, d, DP[j])
                    P[j] = p[j]
                if DH[i].any():
                    d = STEP * max(abs(h[i]), H_SCALE)
                    H[i] = h[i] + d
                    moved(net, d, DH[i])
                    H[i] = h[i]
                if not c.sets_flow and d_net.any():  # a kind that sets its flow reads
                    d = STEP * md                    # no net flow
                    moved(net + d, d, d_net)
                if c.flow_unknown:
                    d = STEP * md
                    flows[c.name] = m + d
                    t = np.zeros(n)
                    t[n_flow + comp_q[c.name]] = md
                    moved(net, d, t)
                    flows[c.name] = m
                # each output's tangent: its partials times the inputs' tangents
                d_out4 = [np.zeros(n) for _ in range(4)]
                for out, d, t in moves:
                    for k in range(4):
                        g = (out[k] - base[k]) / d
                        if g:
                            d_out4[k] += g * t
                d_m, d_h, d_pw, d_dp = d_out4
                if not c.sets_flow:
                    d_m = d_net
                    if base[4] and row_of[i] >= 0:
                        J[row_of[i]] = (DP[i] - DP[j] - d_dp) / p_design[i]
                d_out += d_m
                if c.drives_generator:
                    d_shaft += d_pw
                if c.name in comp_q:
                    d_comp[comp_q[c.name]] += d_pw
                m_in = m + added[c.name] if added and c.name in added else m
                DM[j] += d_m
                DE[j] += d_m * h_out + m_in * d_h
            if row_of[i] >= 0 and not passes_net[i]:
                J[row_of[i]] = (d_net - d_out) / md
    finally:
        eq.p, eq.h, eq.hv, eq.hl = saved
    _close_columns(eq, J, F_base, p, h, M, heater_bleed, m_T, shaft, steps,
                   DP, DH, DM, DHB, dmT, d_shaft, d_comp)
    return J


def _close_columns(eq, J, F_base, p, h, M, heater_bleed, m_T, shaft, steps,
                   DP, DH, DM, DHB, dmT, d_shaft, d_comp) -> None:
    """The rows :meth:`PointEquations.close` gives, differenced along each column's
    direction of its inputs (written into ``J``)."""
    tail = [eq.row_of[i] for c, i in eq.at_nodes if i in eq.freed and eq.row_of[i] >= 0]
    tail += list(range(len(eq.node_rows), eq.n_res))
    if not tail:
        return
    comp_power = [sum(s[5] for s in steps if s[0] is c) for c in eq.flow_comps]
    p_a, h_a, M_a = np.array(p), np.array(h), np.array(M)
    hb_a = np.array(heater_bleed, dtype=float)
    cp_a = np.array(comp_power, dtype=float)
    base = F_base[tail]
    F_list = F_base.tolist()
    for col in range(J.shape[1]):
        dp_, dh_, dM_ = DP[:, col], DH[:, col], DM[:, col]
        moves = (dp_.any() or dh_.any() or dM_.any() or DHB[:, col].any() or dmT[col]
                 or d_shaft[col] or d_comp[:, col].any())
        if not moves:
            continue
        F2 = list(F_list)
        eq.close(F2, (p_a + STEP * dp_).tolist(), (h_a + STEP * dh_).tolist(),
                 (M_a + STEP * dM_).tolist(), (hb_a + STEP * DHB[:, col]).tolist(),
                 m_T + STEP * dmT[col], shaft + STEP * d_shaft[col],
                 (cp_a + STEP * d_comp[:, col]).tolist())
        J[tail, col] = (np.array(F2)[tail] - base) / STEP
