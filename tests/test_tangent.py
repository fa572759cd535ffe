"""The Jacobian carried along the march (solve/tangent.py) against plain forward
differences of the whole residual function (newton.fd_jacobian): an independent
calculation of the same derivatives."""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pytest
from partload.plant.case import Conditions, load_case
from partload.plant.model import build_model
from partload.plant.synthetic import synthetic_model_data
from partload.solve.equations import equations_for
from partload.solve.newton import fd_jacobian
from partload.solve.point import solve_point
from partload.steam.if97 import get_backend

CASES = sorted((Path(__file__).resolve().parent.parent / "cases").glob("*.toml"))
# Both are forward differences with steps of 1e-7 relative: each errs by about the
# step times the second derivative (1e-7 of a row's scale, measured up to 7e-8 here).
TOL = 2e-6


def _equations(model, cond):
    return equations_for(model, cond, get_backend("seuif97"))


def _assert_agree(eq, x, what=""):
    F = eq.residuals(x)
    F_own, J = eq.jacobian(eq.residuals, x, None)
    assert np.array_equal(F_own, F)
    F_same, J_again = eq.jacobian(eq.residuals, x, F)
    assert F_same is F and np.array_equal(J_again, J)  # the same Jacobian, bit for bit
    dense = fd_jacobian(eq.residuals, x, F)
    scale = np.abs(dense).max(axis=1, keepdims=True)
    worst = np.abs(J - dense) / np.where(scale > 0.0, scale, 1.0)
    r, c = np.unravel_index(np.argmax(worst), worst.shape)
    assert worst.max() < TOL, (what, eq.residual_names[r], eq.unknown_names[c], worst.max())


def _off_design_knots(x):
    # 0.2 % above the point in every unknown: away from the knots of the efficiency
    # tables (a point exactly at design sits on one, where one-sided differences of
    # the two methods may take different sides)
    return np.asarray(x, float) + 2e-3


@pytest.mark.parametrize("case_path", CASES, ids=[p.stem for p in CASES])
def test_carried_jacobian_equals_forward_differences_on_every_case(case_path):
    case = load_case(case_path)
    eq = _equations(case.model, case.conditions)
    _assert_agree(eq, _off_design_knots(eq.guess()))
    r = solve_point(case.model, case.conditions)
    eq = _equations(case.model, case.conditions)
    _assert_agree(eq, _off_design_knots(r.unknowns))


@pytest.mark.parametrize("groups", [10, 60])
def test_carried_jacobian_equals_forward_differences_on_synthetic_models(groups):
    model = build_model(synthetic_model_data(groups), file=f"synthetic-{groups}")
    eq = _equations(model, Conditions(throttle_flow=0.7 * model.throttle.flow))
    _assert_agree(eq, _off_design_knots(eq.guess()))


def test_carried_jacobian_costs_a_few_evaluations_a_component(monkeypatch):
    # the point of carrying derivatives: component evaluations grow with the network,
    # not with its square (forward differences: one march a column, about n^2 / 2).
    # Counts, not timings.
    from partload.components.stage_group import StageGroup

    count = [0]
    evaluate = StageGroup.evaluate

    def counted(self, *args):
        count[0] += 1
        return evaluate(self, *args)

    per_group = []
    for groups in (20, 80):
        model = build_model(synthetic_model_data(groups), file=f"synthetic-{groups}")
        eq = _equations(model, Conditions(throttle_flow=0.7 * model.throttle.flow))
        x = eq.guess()
        monkeypatch.setattr(StageGroup, "evaluate", counted)
        count[0] = 0
        eq.jacobian(eq.residuals, x, None)
        monkeypatch.setattr(StageGroup, "evaluate", evaluate)
        per_group.append(count[0] / groups)
    # the base march, the step once more, and at most its three inputs moved
    assert per_group[1] <= 5.0 and per_group[1] <= 1.05 * per_group[0]


def _failing_beyond(monkeypatch, group, limit):
    """``group``'s law fails (``ValueError``, as a law at the edge of its range) once
    its inlet pressure exceeds ``limit`` [Pa] while ``armed[0]`` is true."""
    from partload.components.stage_group import StageGroup

    evaluate = StageGroup.evaluate
    armed = [True]

    def failing(self, march, i, j, m_net):
        if armed[0] and self is group and march.p[i] > limit:
            raise ValueError("a state beyond the range of the law")
        return evaluate(self, march, i, j, m_net)

    monkeypatch.setattr(StageGroup, "evaluate", failing)
    return armed


def test_a_law_failing_at_a_moved_state_is_a_trial_point_error(monkeypatch):
    # a step whose law cannot take its moved input (here: the first group's inlet
    # pressure moved 1e-7 up, made to fail just above the point) is a trial point
    # the laws cannot take, as it is for a residual evaluation and for the forward
    # differences of whole marches: a SolveError, not the law's own ValueError
    from partload.solve.equations import TrialPointError

    case = load_case(CASES[0].parent / "reheat_part_load.toml")
    eq = _equations(case.model, case.conditions)
    x = _off_design_knots(eq.guess())
    F = eq.residuals(x)
    group = next(c for c in case.model.steam_path if c.name == "HP1")
    i = eq.idx[group.inlet]
    assert i in eq.free
    _failing_beyond(monkeypatch, group, eq.p[i] * (1.0 + 1e-8))
    assert np.array_equal(eq.residuals(x), F)  # the point itself is fine
    with pytest.raises(TrialPointError):
        fd_jacobian(eq.residuals, x, F)
    with pytest.raises(TrialPointError):
        eq.jacobian(eq.residuals, x, F)
    assert eq.steam is eq.raw_steam  # the remembered property calls let go


def test_a_renewal_whose_law_fails_keeps_the_converged_point(monkeypatch):
    # the renewal at the answer meets a law that cannot take a moved input: the
    # point stays solved with Newton's Jacobian, the renewal's base march counted
    # (expected: the point solved without renewal, regression value, 1e-12)
    from partload.solve.equations import PointEquations

    case = load_case(CASES[0].parent / "reheat_part_load.toml")
    steam = get_backend("seuif97")
    plain = solve_point(case.model, case.conditions, steam)
    group = next(c for c in case.model.steam_path if c.name == "HP1")
    p_answer = plain.node_p[case.model.order.index(group.inlet)]
    armed = _failing_beyond(monkeypatch, group, p_answer * (1.0 + 1e-8))
    armed[0] = False
    formed = PointEquations.jacobian

    def jacobian(self, fun, x, F):
        armed[0] = F is not None and np.array_equal(x, plain.unknowns)  # the renewal
        try:
            return formed(self, fun, x, F)
        finally:
            armed[0] = False

    monkeypatch.setattr(PointEquations, "jacobian", jacobian)
    r = solve_point(case.model, case.conditions, steam, renew_jacobian=1)
    np.testing.assert_allclose(r.node_p, plain.node_p, rtol=1e-12)
    assert r.evaluations == plain.evaluations + 1
    np.testing.assert_array_equal(r.jacobian, plain.jacobian)  # Newton's, kept


MODELS = sorted((Path(__file__).resolve().parent.parent / "models").glob("*.toml"))


def _variants(model):
    """Structures the cases do not all reach: fixed and sliding pressure, an output
    demanded, a bleed in proportion to a throttle flow that is an unknown, each
    heater out (those the cycle can lose), the control valves wide open, and the
    wide-open mode at a held throttle pressure."""
    from dataclasses import replace

    from partload.plant.case import design_conditions

    base = design_conditions(model)
    m, rating = model.throttle.flow, model.generator.rating
    out = [("sliding", replace(base, throttle_flow=0.83 * m), {}),
           ("fixed", replace(base, throttle_flow=0.83 * m, pressure_mode="fixed"), {}),
           ("demand", replace(base, throttle_flow=None, output=0.87 * rating), {}),
           ("demand-fixed", replace(base, throttle_flow=None, output=0.87 * rating,
                                    pressure_mode="fixed"), {}),
           ("wide-open-mode", replace(base, pressure_mode="fixed"), {"mode": "wide_open"})]
    for first in list(model.extractions)[:1]:  # a bleed in proportion to the unknown flow
        out.append(("fraction-demand",
                    replace(base, throttle_flow=None, output=0.87 * rating,
                            extraction_control=((first, ("fraction", 0.03)),)), {}))
    for h, heater in model.heaters.items():
        if heater.heater_type != "deaerator":
            out.append((f"{h}-out", replace(base, throttle_flow=0.83 * m,
                                            heaters_out=frozenset([h])), {}))
    if model.control_valves:
        out.append(("control-valves-wide-open", replace(base, throttle_flow=0.83 * m),
                    {"wide_open": frozenset(c.name for c in model.control_valves)}))
    return out


@pytest.mark.parametrize("model_path", MODELS, ids=[p.stem for p in MODELS])
def test_carried_jacobian_equals_forward_differences_in_every_structure(model_path):
    from partload.plant.model import load_model

    model = load_model(model_path)
    for name, cond, how in _variants(model):
        eq = equations_for(model, cond, get_backend("seuif97"), **how)
        _assert_agree(eq, _off_design_knots(eq.guess()), name)


@pytest.mark.parametrize("mode", ["sliding", "fixed"])
def test_carried_jacobian_equals_forward_differences_with_paired_bleeds(mode):
    # a heater fed by bleeds of two parallel branches, each its share of the bleed
    from test_paired_bleeds import PAIRED, _model

    model = _model(PAIRED)
    for cond in (Conditions(throttle_flow=0.7 * model.throttle.flow, pressure_mode=mode),
                 Conditions(output=0.7 * model.generator.rating, pressure_mode=mode)):
        eq = _equations(model, cond)
        _assert_agree(eq, _off_design_knots(eq.guess()))
