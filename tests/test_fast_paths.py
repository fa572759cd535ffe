"""The fast paths (Broyden updates, reused Jacobians, continuation with a secant
predictor, compiled equations) give the same answers as plain Newton.

These are correctness tests; the timings are in benchmarks/run.py.
"""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pytest
from partload.plant.case import Conditions, load_case
from partload.plant.model import build_model
from partload.plant.synthetic import synthetic_model_data
from partload.solve.point import solve_point

CASES = sorted((Path(__file__).resolve().parent.parent / "cases").glob("*.toml"))


def _same(a, b, rtol=1e-9):
    np.testing.assert_allclose(a.node_p, b.node_p, rtol=rtol)
    np.testing.assert_allclose(a.group_flow, b.group_flow, rtol=rtol)
    np.testing.assert_allclose(a.extraction_flow, b.extraction_flow, rtol=rtol, atol=1e-9)
    assert a.totals["generator_output"] == pytest.approx(b.totals["generator_output"],
                                                         rel=rtol)


@pytest.mark.parametrize("case_path", CASES, ids=[p.stem for p in CASES])
def test_demo_cases_plain_newton_equals_default(case_path):
    case = load_case(case_path)
    plain = solve_point(case.model, case.conditions, broyden=False)
    fast = solve_point(case.model, case.conditions)
    _same(plain, fast)


def test_continuation_along_a_sweep_equals_cold_points(reheat_model):
    m_d = reheat_model.throttle.flow
    prev = None
    evaluations = []
    for f in np.linspace(0.45, 1.0, 12):
        cond = Conditions(throttle_flow=f * m_d)
        warm = solve_point(reheat_model, cond, neighbour=prev)
        cold = solve_point(reheat_model, cond, broyden=False)
        _same(warm, cold)
        evaluations.append(warm.evaluations)
        prev = warm
    # continuation starts every point from its neighbour and its Jacobian: fewer
    # residual evaluations than the first, cold point, which forms a Jacobian
    # (regression of the method; counts, not timings)
    assert max(evaluations[1:]) < evaluations[0]


def test_fine_sweep_needs_one_or_two_iterations(reheat_model):
    # In a fine sweep the quadratic predictor through the last three solutions
    # starts Newton so close that one or two iterations reach 1e-10 (regression of
    # the continuation method; iteration counts, not timings).
    m_d = reheat_model.throttle.flow
    prev = None
    iterations = []
    for f in np.linspace(0.6, 0.7, 25):
        prev = solve_point(reheat_model, Conditions(throttle_flow=f * m_d), neighbour=prev)
        iterations.append(prev.iterations)
    assert np.median(iterations[3:]) <= 2 and max(iterations[3:]) <= 3 < iterations[0]


def test_continuation_across_changing_exhaust_pressure(reheat_model):
    # an hourly profile changes load and condenser pressure together
    prev = None
    for f, p_x in [(0.6, 5e3), (0.62, 6e3), (0.9, 9e3), (0.5, 7e3)]:
        cond = Conditions(output=f * reheat_model.generator.rating, exhaust_pressure=p_x)
        warm = solve_point(reheat_model, cond, neighbour=prev)
        _same(warm, solve_point(reheat_model, cond, broyden=False))
        prev = warm


@pytest.mark.parametrize("n_groups", [10, 23, 60])
def test_synthetic_networks_fast_equals_plain(n_groups):
    model = build_model(synthetic_model_data(n_groups), file=f"synthetic-{n_groups}")
    assert len(model.groups) == n_groups
    # parallel branches split and merge: some node has two groups leaving it
    assert max(model.graph.out_degree(n) for n in model.graph.nodes) == 2
    prev = None
    for f in (0.6, 0.65, 0.7):
        cond = Conditions(throttle_flow=f * model.throttle.flow)
        warm = solve_point(model, cond, neighbour=prev)
        _same(warm, solve_point(model, cond, broyden=False))
        prev = warm


def test_memo_tables_answer_as_the_backend():
    # identity: every remembered answer equals the backend's, asked twice
    from partload.errors import PropertyRangeError
    from partload.steam.if97 import MemoTables, get_backend

    raw = get_backend("seuif97")
    memo = MemoTables(raw, size=4)
    states = [(1.2e7, 3.3e6), (5e5, 2.6e6), (8e3, 2.3e6), (1.2e7, 3.3e6), (5e5, 2.6e6)] * 3
    for p, h in states:
        assert memo.T_ph(p, h) == raw.T_ph(p, h)
        assert memo.vs_ph(p, h) == raw.vs_ph(p, h)
    assert memo.h_pT(1.66e7, 811.15) == raw.h_pT(1.66e7, 811.15)
    # errors are raised every time, never remembered
    for _ in range(2):
        with pytest.raises(PropertyRangeError):
            memo.h_pT(-1.0, 500.0)


def test_solver_runs_blas_on_one_thread():
    # the context the solver runs in limits every BLAS library to one thread and gives
    # the previous count back (common practice for small systems, no source)
    threadpoolctl = pytest.importorskip("threadpoolctl")
    from partload.solve.point import one_blas_thread

    def numpy_blas():  # the solver's linear algebra is numpy's (other libraries loaded
        # after the solver's first use, scipy's say, are not its concern)
        return [i["num_threads"] for i in threadpoolctl.threadpool_info()
                if i["user_api"] == "blas" and "numpy" in i["filepath"]]

    before = numpy_blas()
    with one_blas_thread():
        inside = numpy_blas()
    after = numpy_blas()
    assert inside and all(n == 1 for n in inside)
    assert after == before
