"""The study's continuation: the fit of a family's solutions starts points of a
profile, and every answer equals the point solved alone."""

from __future__ import annotations

import dataclasses
from pathlib import Path

import numpy as np
import pytest
from partload.plant.case import Conditions, load_case
from partload.solve.equations import equations_for
from partload.solve.point import solve_point
from partload.solve.result import PointResult
from partload.steam.if97 import get_backend
from partload.study import plan_study, solve_order
from partload.study.run import Continuation, SolutionFit

ROOT = Path(__file__).resolve().parent.parent


def _result(x):
    return PointResult(converged=True, iterations=0, residual=0.0, evaluations=0,
                       message="", model_name="m", valve_mode="throttle",
                       pressure_mode="sliding", backend="seuif97", tables={}, totals={},
                       heaters=[], unknowns=np.asarray(x, float))


def test_fit_reproduces_a_plane():
    # identity: solutions that are linear in the numbers are predicted exactly
    # (least squares through points of a plane), at a point away from all of them
    fit = SolutionFit()
    rng = np.random.default_rng(3)
    a, B = np.array([1.0, -2.0, 0.5]), rng.normal(size=(5, 3))
    for _ in range(5):
        t = np.concatenate([rng.uniform(0.4, 1.0, 2), [1.0, 1.0, 1.0]])
        fit.add("f", t, _result(a + t @ B))
    t = np.array([0.7, 0.9, 1.0, 1.0, 1.0])
    np.testing.assert_allclose(fit.predict("f", t), a + t @ B, rtol=1e-12)


def test_fit_reproduces_a_quadratic_with_enough_points():
    # identity: with eight points kept the fit is quadratic in two numbers
    fit = SolutionFit()
    rng = np.random.default_rng(5)

    def f(t):
        return np.array([1.0 + t[0] - 3.0 * t[1] + 2.0 * t[0] * t[1] + t[1] ** 2, t[0] ** 2])

    for _ in range(12):
        t = np.concatenate([rng.uniform(0.4, 1.0, 2), [1.0, 1.0, 1.0]])
        fit.add("f", t, _result(f(t)))
    t = np.array([0.66, 0.77, 1.0, 1.0, 1.0])
    np.testing.assert_allclose(fit.predict("f", t), f(t), rtol=1e-10)


def test_fit_keeps_the_last_points_in_order():
    # hand count: after KEEP + 5 points the first five are forgotten, the rest kept
    # oldest first; the prediction then fits the kept ones only (a plane through
    # the latest points, exact whatever the forgotten ones were)
    fit = SolutionFit()
    n = SolutionFit.KEEP + 5
    for k in range(n):
        t = np.array([0.4 + 0.005 * k, 1.0 + 0.01 * (k % 3), 1, 1, 1.0])
        x = [1e6] if k < 5 else [2.0 + 3.0 * t[0] - t[1]]  # the forgotten ones are off
        fit.add("f", t, _result(x))
    assert len(fit.numbers) == SolutionFit.KEEP
    np.testing.assert_array_equal(fit.numbers[:, 0], 0.4 + 0.005 * np.arange(5, n))
    t = np.array([0.3, 1.005, 1, 1, 1.0])
    np.testing.assert_allclose(fit.predict("f", t), [2.0 + 3.0 * 0.3 - 1.005], rtol=1e-9)


def test_fit_falls_back_to_a_plane_where_a_quadratic_is_not_fixed():
    # ten points with only two values of the second number: no quadratic in it through
    # them, but a plane is fixed; the data are a plane, so its value is exact (hand
    # calculation: 2 + 3 * 0.62 - 1.005)
    fit = SolutionFit()
    for k in range(10):
        t = np.array([0.5 + 0.02 * k, 1.0 + 0.01 * (k % 2), 1, 1, 1.0])
        fit.add("f", t, _result([2.0 + 3.0 * t[0] - t[1]]))
    x = fit.predict("f", np.array([0.62, 1.005, 1, 1, 1.0]))
    np.testing.assert_allclose(x, [2.0 + 3.0 * 0.62 - 1.005], rtol=1e-12)


def test_fit_forgets_another_family():
    # a point of another family (other heaters out, other unknowns) starts afresh
    fit = SolutionFit()
    for k in range(5):
        fit.add("a", np.array([0.5 + 0.1 * k, 1, 1, 1, 1.0]), _result([k, k]))
    assert fit.predict("a", np.array([0.75, 1, 1, 1, 1.0])) is not None
    assert fit.predict("b", np.array([0.75, 1, 1, 1, 1.0])) is None
    fit.add("b", np.array([0.5, 1, 1, 1, 1.0]), _result([1.0, 2.0, 3.0]))
    assert fit.predict("a", np.array([0.75, 1, 1, 1, 1.0])) is None


def test_profile_points_from_the_fit_equal_points_solved_alone():
    # the demo hourly profile (load and condenser pressure change together): every
    # point of a chunk solved by the continuation equals the point solved cold to
    # 1e-9, and the fit starts most of them (the continuation's own counts)
    case = load_case(ROOT / "cases" / "reheat_hourly_profile.toml")
    plan = plan_study(case)
    conds = plan.conditions[:60]
    chain = Continuation(case.model, get_backend("seuif97"))
    plain = Continuation(case.model, get_backend("seuif97"))
    plain.fitted = False
    chain.renew_jacobian = None  # the fit's own effect on the counts (no Jacobian columns)
    ev_fit, ev_plain = [], []
    for i in solve_order(conds):
        warm = chain.solve(conds[i])
        ev_fit.append(warm.evaluations)
        ev_plain.append(plain.solve(conds[i]).evaluations)
        cold = solve_point(case.model, conds[i], broyden=False)
        np.testing.assert_allclose(warm.node_p, cold.node_p, rtol=1e-9)
        np.testing.assert_allclose(warm.group_flow, cold.group_flow, rtol=1e-9)
        assert warm.totals["heat_rate"] == pytest.approx(cold.totals["heat_rate"], rel=1e-9)
    # fewer residual evaluations than from the last solution scaled (regression of the
    # method: counts, not timings)
    assert sum(ev_fit[10:]) < sum(ev_plain[10:])


def test_sweep_keeps_the_load_predictor(reheat_model):
    # points that differ only in load keep the secant predictor (the fit is not asked):
    # the answers equal the points solved alone
    chain = Continuation(reheat_model, get_backend("seuif97"))
    m_d = reheat_model.throttle.flow
    for f in np.linspace(0.5, 0.9, 9):
        cond = Conditions(throttle_flow=f * m_d)
        warm = chain.solve(cond)
        cold = solve_point(reheat_model, cond, broyden=False)
        np.testing.assert_allclose(warm.node_p, cold.node_p, rtol=1e-9)


def test_renewed_jacobian_is_the_jacobian_at_the_answer():
    # a point of the profile that took many evaluations hands the next the
    # Jacobian at its answer: equal bit for bit to the one formed afresh there (an
    # identity of the two paths), its columns counted in the point's evaluations;
    # and every answer still equals the point solved cold to 1e-9
    case = load_case(ROOT / "cases" / "reheat_hourly_profile.toml")
    plan = plan_study(case)
    conds = plan.conditions[:60]
    chain = Continuation(case.model, get_backend("seuif97"))
    chain.renew_jacobian = 5
    renewed = 0
    for i in solve_order(conds):
        r = chain.solve(conds[i])
        eq = equations_for(case.model, conds[i], get_backend("seuif97"),
                           wide_open=r.wide_open_valves)
        x = np.asarray(r.unknowns)
        _, J = eq.jacobian(eq.residuals, x, eq.residuals(x))
        if np.array_equal(J, r.jacobian):
            renewed += 1
            assert r.evaluations >= 5 + eq.n + 1
        cold = solve_point(case.model, conds[i], broyden=False)
        np.testing.assert_allclose(r.node_p, cold.node_p, rtol=1e-9)
    # the Broyden-updated Jacobian is never the exact one; the renewed ones are
    assert 5 <= renewed < len(conds)


def test_a_renewal_that_fails_keeps_the_converged_point(monkeypatch):
    # the renewed Jacobian is formed after the point converged: a column the laws
    # cannot take there (made to fail here) must not lose the point.  Expected: the
    # answer of the point solved without renewal (regression value, 1e-12), and the
    # failed renewal's base march counted
    from partload.solve.equations import PointEquations, TrialPointError

    case = load_case(ROOT / "cases" / "reheat_hourly_profile.toml")
    conds = plan_study(case).conditions[:2]
    steam = get_backend("seuif97")
    first = solve_point(case.model, conds[0], steam)
    plain = solve_point(case.model, conds[1], steam, neighbour=first)
    formed = PointEquations.jacobian
    failed = []

    def jacobian(self, fun, x, F):
        if F is not None and np.array_equal(x, plain.unknowns):  # at the answer
            failed.append(True)
            fun(x)  # the base march, then a state beyond a limit
            raise TrialPointError("a column beyond a limit")
        return formed(self, fun, x, F)

    monkeypatch.setattr(PointEquations, "jacobian", jacobian)
    r = solve_point(case.model, conds[1], steam, neighbour=first, renew_jacobian=1)
    assert failed
    np.testing.assert_allclose(r.node_p, plain.node_p, rtol=1e-12)
    assert r.evaluations == plain.evaluations + 1
    np.testing.assert_array_equal(r.jacobian, plain.jacobian)  # Newton's, kept


def test_a_program_point_renews_only_where_it_is_held():
    # under a pressure program the sliding attempt may be dropped for a held
    # pressure; its renewal would be thrown away uncounted, so a sliding answer
    # is not renewed (its evaluations are Newton's alone)
    case = load_case(ROOT / "cases" / "reheat_nozzle_pressure_program.toml")
    cond = plan_study(case).conditions[6]  # 108 bar: sliding, between 90 and 166 bar
    steam = get_backend("seuif97")
    plain = solve_point(case.model, cond, steam)
    r = solve_point(case.model, cond, steam, renew_jacobian=1)
    assert not r.program_held and r.evaluations == plain.evaluations


@pytest.mark.parametrize("change", ["load", "exhaust pressure"])
def test_a_moved_jacobian_contracts_newton_faster(reheat_model, change):
    # A chord step with Jacobian J near the answer of F(x) = 0 with Jacobian J* shrinks
    # the error by the spectral radius of I - J^-1 J* (J. M. Ortega and W. C.
    # Rheinboldt, Iterative Solution of Nonlinear Equations in Several Variables,
    # Academic Press, 1970, ch. 10, the chord method; cited from memory).  The neighbour's Jacobian
    # moved to the new point by the ellipse law contracts several times faster than
    # the neighbour's as it is (measured 0.17 -> 0.018 for a 10 % load step).
    from partload.solve.point import moved_jacobian

    m = reheat_model
    steam = get_backend("seuif97")
    a = Conditions(throttle_flow=0.6 * m.throttle.flow, exhaust_pressure=5e3)
    b = (Conditions(throttle_flow=0.7 * m.throttle.flow, exhaust_pressure=5e3)
         if change == "load" else
         Conditions(throttle_flow=0.6 * m.throttle.flow, exhaust_pressure=9e3))

    def exact(cond):
        eq = equations_for(m, cond, steam)
        x = np.asarray(solve_point(m, cond, steam).unknowns)
        return x, eq.jacobian(eq.residuals, x, None)[1], eq.n_p

    x_a, J_a, n_p = exact(a)
    x_b, J_b, _ = exact(b)

    def contraction(J):
        return max(abs(np.linalg.eigvals(np.eye(len(J_b)) - np.linalg.solve(J, J_b))))

    as_it_was = contraction(J_a)
    moved = contraction(moved_jacobian(J_a, x_b, x_a, n_p))
    assert moved < 0.4 * as_it_was


def test_a_weather_year_starts_from_the_fit():
    # In the weather-year case the wet-bulb temperature (a setting of the tower
    # condenser) changes from hour to hour with the demand.  Points differing only in
    # it are one family (fitted over load and wet bulb) and not one load line (no
    # secant along the load across it).  The fit's start must be far closer to each
    # answer than the last solution (regression of the method: measured median 1.6e-5
    # against 6e-2 in the unknowns, points 40 to 120).
    from partload.study.run import _boundary, _family, _numbers

    case = load_case(ROOT / "cases" / "reheat_weather_year.toml")
    conds = plan_study(case).conditions[:120]
    a, b = conds[0], conds[1]
    assert a.settings != b.settings
    assert _family(a) == _family(b) and _boundary(a) != _boundary(b)
    chain = Continuation(case.model, get_backend("seuif97"))
    fit_err, last_err = [], []
    for k, cond in enumerate(conds):
        start = chain.fit.predict(_family(cond), _numbers(case.model, cond))
        last = chain.last
        x = np.asarray(chain.solve(cond).unknowns)
        if k >= 40:
            assert start is not None
            fit_err.append(np.max(np.abs(start - x)))
            last_err.append(np.max(np.abs(np.asarray(last.unknowns) - x)))
    assert np.median(fit_err) < 1e-3 and np.median(fit_err) < 0.01 * np.median(last_err)


def test_numeric_settings_of_any_number_type_are_a_family_s_numbers():
    # a setting's value is a number of the family whatever its Python or numpy type,
    # while a choice or a flag stays part of the family
    from partload.study.run import _family, _numbers

    case = load_case(ROOT / "cases" / "reheat_weather_year.toml")
    base = plan_study(case).conditions[0]
    key = base.settings[0][:3]

    def with_value(v):
        return dataclasses.replace(base, settings=(key + (v,),))

    a, b = with_value(np.int64(280)), with_value(285.5)
    assert _family(a) == _family(b)
    assert _numbers(case.model, a)[-1] == 280.0 and _numbers(case.model, b)[-1] == 285.5
    assert _family(with_value(True)) != _family(with_value(False))
    assert _family(with_value("wet")) != _family(with_value("dry"))
