"""Tests of partload.study: sweep and profile definitions, planning, running.

Reference values are the demo reheat unit (models/demo_reheat_unit.toml,
invented data) solved point by point with :func:`partload.solve.point.solve_point`
from its design-scaled guess.  Newton stops at a largest normalised residual
of 1e-10; a point reached by continuation differs from the cold solve by the
residual times the conditioning of the system, measured at most 3e-10
relative on 90 points of the demo profile, so the equality checks use
``rtol = 1e-8`` (a margin of about 30).
"""

from __future__ import annotations

import json
import math
import re
from pathlib import Path

import numpy as np
import pytest
from partload.errors import InputError
from partload.plant.case import load_case
from partload.solve.point import solve_point
from partload.study import (
    CHUNK_MAX,
    CHUNK_MIN,
    STATUS,
    Progress,
    chunk_size,
    plan_study,
    result_layout,
    run_study,
    solve_order,
)

ROOT = Path(__file__).resolve().parents[1]
MODEL = ROOT / "models" / "demo_reheat_unit.toml"
RTOL = 1e-8  # see the module docstring


def write_case(tmp_path: Path, body: str, name: str = "study.toml", model: Path = MODEL) -> Path:
    """A case file in ``tmp_path`` naming ``model`` by its absolute path."""
    path = tmp_path / name
    path.write_text(f"model = {json.dumps(str(model))}\n" + body, encoding="utf-8")
    return path


def collect(plan, **kw):
    """Run ``plan`` and return every stored array by path, in plan order."""
    layout = result_layout(plan.case.model)
    out = {f.path: np.full((plan.n_points, f.width) if f.width else (plan.n_points,), f.fill,
                           dtype=f.dtype) for f in layout.fields()}
    seen = []

    def sink(res):
        seen.append(res.index)
        for k, v in res.arrays.items():
            out[k][res.start:res.stop] = v

    summary = run_study(plan, sink, layout=layout, **kw)
    return out, summary, seen


SMALL_SWEEP = """
[operation]
governing = "sliding"

[sweep]
throttle_flow_fraction = [1.0, 0.4, 0.55, 0.7, 0.85, 0.5, 0.95]
heater_out = ["none", "HP8"]
"""


@pytest.fixture(scope="module")
def small_plan(tmp_path_factory):
    case = load_case(write_case(tmp_path_factory.mktemp("small"), SMALL_SWEEP))
    return plan_study(case)


@pytest.fixture(scope="module")
def small_run(small_plan):
    return collect(small_plan, workers=1)


# ------------------------------------------------------------------ planning
def test_sweep_is_the_cartesian_product_sorted_for_continuation(small_plan):
    plan = small_plan
    assert plan.n_points == 14  # 7 flows x 2 heater states
    assert plan.continuation == "throttle_flow_fraction"
    assert plan.series_labels == ["heater_out=none", "heater_out=HP8"]
    m_d = plan.case.model.throttle.flow
    flows = np.array([c.throttle_flow for c in plan.conditions]) / m_d
    # each series runs from the lowest to the highest flow, whatever the list order
    expected = sorted([1.0, 0.4, 0.55, 0.7, 0.85, 0.5, 0.95])
    np.testing.assert_allclose(flows[:7], expected, rtol=1e-15)
    np.testing.assert_allclose(flows[7:], expected, rtol=1e-15)
    assert all(not c.heaters_out for c in plan.conditions[:7])
    assert all(c.heaters_out == frozenset({"HP8"}) for c in plan.conditions[7:])
    # a heater out closes its extraction, as a [heaters.HP8] table in the case would
    assert dict(plan.conditions[7].extraction_control)["E8"] == ("closed", 0.0)
    assert plan.inputs["heaters_out_of_service"].values[7] == "HP8"
    assert plan.labels[7] == "throttle_flow_fraction=0.4, heater_out=HP8"
    # chunks never cross a series and cover every point once
    covered = np.zeros(plan.n_points, int)
    for c in plan.chunks:
        covered[c.start:c.stop] += 1
        assert len(set(plan.series[c.start:c.stop])) == 1
    assert (covered == 1).all()


def test_ranges_with_points_and_with_step(tmp_path):
    case = load_case(write_case(tmp_path, """
[sweep]
exhaust_pressure = {from = "5 kPa", to = "9 kPa", step = "2 kPa"}
throttle_temperature = {from = "520 degC", to = "540 degC", points = 3}
output = {from = "150 MW", to = "300 MW", points = 4}
"""))
    plan = plan_study(case)
    assert plan.n_points == 3 * 3 * 4
    assert plan.continuation == "output"  # a load axis is preferred
    p_x = sorted(set(plan.inputs["exhaust_pressure"].values))
    np.testing.assert_allclose(p_x, [5e3, 7e3, 9e3], rtol=1e-12)
    T = sorted(set(plan.inputs["throttle_temperature"].values))
    np.testing.assert_allclose(T, [793.15, 803.15, 813.15], rtol=1e-12)
    out = plan.inputs["output"].values[:4]
    np.testing.assert_allclose(out, [150e6, 200e6, 250e6, 300e6], rtol=1e-12)
    assert all(c.throttle_flow is None for c in plan.conditions)  # the output is the load
    assert plan.labels[1].startswith("output=200 MW")


def test_step_that_misses_the_end_stops_before_it(tmp_path):
    case = load_case(write_case(tmp_path, """
[sweep]
throttle_flow_fraction = {from = 0.5, to = 1.0, step = 0.2}
"""))
    plan = plan_study(case)
    np.testing.assert_allclose(plan.inputs["throttle_flow_fraction"].values, [0.5, 0.7, 0.9])


@pytest.mark.parametrize("body, key, text", [
    ("[sweep]\nthrottle_flow_fractoin = [0.5]\n", "throttle_flow_fractoin",
     "did you mean 'throttle_flow_fraction'"),
    ("[sweep]\nexhaust_pressure = ['5 bananas']\n", "exhaust_pressure", "5 bananas"),
    ("[sweep]\nexhaust_pressure = [5]\n", "exhaust_pressure", "needs a unit"),
    ("[sweep]\nthrottle_flow_fraction = {from = 0.5, to = 1.0}\n", "throttle_flow_fraction",
     "one of 'points' or 'step'"),
    ("[sweep]\nthrottle_flow_fraction = [0.5, 0.5]\n", "throttle_flow_fraction",
     "appears twice"),
    ("[sweep]\nthrottle_flow_fraction = [0.5]\noutput = ['200 MW']\n", "output",
     "the load is set once"),
    ("[sweep]\nheater_out = ['none', 'HP9']\n", "heater_out", "did you mean 'HP8'"),
    ("[sweep]\nheater_out = ['deaerator']\n", "heater_out", "deaerator"),
    ("[sweep]\nthrottle_pressure = ['150 bar']\n", "throttle_pressure",
     "needs pressure_mode = 'fixed'"),
    ("[sweep]\nthrottle_flow_fraction = [0.5, 2.5]\n", "throttle_flow_fraction", "2.5"),
    ("[sweep]\nextraction_flow = {E8 = ['1 kg/s']}\n", "E8", "feeds heater 'HP8'"),
    ("[sweep]\n", None, "empty"),
])
def test_sweep_mistakes_name_file_table_and_key(tmp_path, body, key, text):
    path = write_case(tmp_path, body)
    with pytest.raises(InputError) as err:
        plan_study(load_case(path))
    e = err.value
    assert e.file == str(path)
    assert e.table and e.table.startswith("sweep")
    if key is not None:
        assert e.key == key
    assert text in str(e)


def test_a_case_without_sweep_or_profile_is_refused(tmp_path):
    path = write_case(tmp_path, "[operation]\nthrottle_flow_fraction = 0.6\n")
    with pytest.raises(InputError, match="no \\[sweep\\] or \\[profile\\]"):
        plan_study(load_case(path))


def test_chunk_size_depends_on_the_plan_only():
    assert chunk_size(1) == CHUNK_MIN
    assert chunk_size(30) == CHUNK_MIN
    assert chunk_size(16 * 50) == 50
    assert chunk_size(8760) == CHUNK_MAX


def test_solve_order_is_by_load_and_stable(small_plan):
    conds = small_plan.conditions[:7]
    assert solve_order(conds) == list(range(7))  # a sweep's chunk is already in order
    shuffled = [conds[k] for k in (3, 0, 6, 1, 5, 2, 4)]
    order = solve_order(shuffled)
    assert [shuffled[k].throttle_flow for k in order] == [c.throttle_flow for c in conds]


# ------------------------------------------------------------------- profile
PROFILE_CSV = """# invented test profile
time,output [MW],exhaust_pressure [kPa]
h0,200,6.5
h1,240.5,7.0

h2,180,8.25
"""


def test_profile_rows_become_points_in_file_order(tmp_path):
    (tmp_path / "p.csv").write_text(PROFILE_CSV, encoding="utf-8")
    case = load_case(write_case(tmp_path, '[profile]\nfile = "p.csv"\n'))
    plan = plan_study(case)
    assert plan.kind == "profile"
    assert plan.n_points == 3
    assert plan.labels == ["h0", "h1", "h2"]
    np.testing.assert_allclose(plan.inputs["output"].values, [200e6, 240.5e6, 180e6])
    np.testing.assert_allclose(plan.inputs["exhaust_pressure"].values, [6500, 7000, 8250])
    assert list(plan.inputs["profile_line"].values) == [3, 4, 6]  # comment and blank skipped
    assert plan.profile.sha256 and "h2,180" in plan.profile.text


def test_profile_times_a_sweep_axis(tmp_path):
    (tmp_path / "p.csv").write_text(PROFILE_CSV, encoding="utf-8")
    case = load_case(write_case(tmp_path, '[profile]\nfile = "p.csv"\n'
                                          '[sweep]\nheater_out = ["none", "LP3"]\n'))
    plan = plan_study(case)
    assert plan.kind == "profile+sweep"
    assert plan.n_points == 6
    assert [c.heaters_out for c in plan.conditions] == [frozenset()] * 3 + [
        frozenset({"LP3"})] * 3
    assert plan.labels[4] == "h1, heater_out=LP3"


def test_plan_points_are_the_conditions_of_their_rows(tmp_path):
    # the plan keeps its points as numbers; each point made from them is the case's
    # conditions with the row's output and exhaust pressure and its label (hand-made here
    # from PROFILE_CSV), for the heaters of its series; pickled (as a chunk goes to a
    # worker) the points leave the model out and are made again with the worker's
    import dataclasses
    import pickle

    (tmp_path / "p.csv").write_text(PROFILE_CSV, encoding="utf-8")
    case = load_case(write_case(tmp_path, '[operation]\npressure_mode = "sliding"\n'
                                          '[profile]\nfile = "p.csv"\n'
                                          '[sweep]\nheater_out = ["none", "LP3"]\n'))
    plan = plan_study(case)
    rows = [(200e6, 6.5e3, "h0"), (240.5e6, 7.0e3, "h1"), (180e6, 8.25e3, "h2")]
    got = list(plan.conditions)
    assert len(got) == 6 and plan.conditions[-1] == got[5] and plan.conditions[1:3] == got[1:3]
    for k, (output, p_x, label) in enumerate(rows):
        want = dataclasses.replace(case.conditions, output=output, throttle_flow=None,
                                   exhaust_pressure=p_x, label=label + ", heater_out=none")
        assert got[k] == want
        lp3 = got[3 + k]
        assert (lp3.output, lp3.exhaust_pressure, lp3.label, lp3.heaters_out) == (
            output, p_x, label + ", heater_out=LP3", frozenset({"LP3"}))
    part = pickle.loads(pickle.dumps(plan.conditions.part(2, 5)))
    with pytest.raises(TypeError, match="without their model"):
        part[0]
    assert list(part.with_model(case.model)) == got[2:5]
    assert plan.profile.axes == []  # the rows' values are kept once, in the inputs


@pytest.mark.parametrize("csv_text, table, key, text", [
    ("time,output,exhaust_pressure [kPa]\nh0,200,6\n", "line 1", "output",
     "needs its unit"),
    ("time,output [MW]\nh0,2x0\n", "line 2", "output [MW]", "cannot read '2x0'"),
    ("time,output [MW],exhaust_pressure [kPa]\nh0,200,6\nh1,210,0.1\n", "line 3",
     "exhaust_pressure [kPa]", "out of range"),
    ("time,output [MW]\nh0,200,7\n", "line 2", None, "3 cells where the header has 2"),
    ("time,ouptut [MW]\nh0,200\n", "line 1", "ouptut", "did you mean 'output'"),
])
def test_profile_mistakes_name_the_line(tmp_path, csv_text, table, key, text):
    (tmp_path / "p.csv").write_text(csv_text, encoding="utf-8")
    case = load_case(write_case(tmp_path, '[profile]\nfile = "p.csv"\n'))
    with pytest.raises(InputError) as err:
        plan_study(case)
    e = err.value
    assert e.file == str(tmp_path / "p.csv")
    assert e.table == table
    if key is not None:
        assert e.key == key
    assert text in str(e)


def test_shipped_hourly_profile_is_a_year():
    # cases/reheat_hourly_profile.csv: invented, 8760 hours of a non-leap year
    plan = plan_study(load_case(ROOT / "cases" / "reheat_hourly_profile.toml"))
    assert plan.n_points == 8760
    out = plan.inputs["output"].values / 350e6  # fraction of the 350 MW rating
    # the generator script's bounds: dispatch between 45 % and 95 % of rating, condenser
    # 4-11 kPa over the seasons (invented data; regression values of that script)
    assert 0.45 <= out.min() < 0.5 and 0.9 < out.max() <= 0.95
    p = plan.inputs["exhaust_pressure"].values
    assert 4e3 < p.min() < 5.5e3 and 9.5e3 < p.max() < 11e3
    assert plan.labels[0] == "2030-01-01 00:00" and plan.labels[-1] == "2030-12-31 23:00"


# ------------------------------------------------------------------- running
def assert_matches_cold_solves(plan, arrays, indices):
    """Stored points equal the same points solved one by one from a cold start."""
    model = plan.case.model
    for i in indices:
        r = solve_point(model, plan.conditions[i], plan.backend)
        assert arrays["solver/status"][i] == STATUS["converged"]
        np.testing.assert_allclose(arrays["nodes/pressure"][i], r.node_p, rtol=RTOL)
        np.testing.assert_allclose(arrays["nodes/enthalpy"][i], r.node_h, rtol=RTOL)
        np.testing.assert_allclose(arrays["extractions/flow"][i], r.extraction_flow,
                                   rtol=RTOL, atol=1e-9)
        for name in ("generator_output", "heat_rate", "throttle_pressure",
                     "final_feedwater_temperature"):
            np.testing.assert_allclose(arrays[f"totals/{name}"][i], r.totals[name], rtol=RTOL)
        bleeds = {h.name: h.bleed for h in r.heaters}
        j = plan.case.model.heaters
        for k, name in enumerate(j):
            np.testing.assert_allclose(arrays["heaters/bleed"][i, k], bleeds[name], rtol=RTOL,
                                       atol=1e-9)


def test_sweep_equals_points_solved_one_by_one(small_plan, small_run):
    arrays, summary, _ = small_run
    assert summary.n_solved == 14 and summary.n_converged == 14 and summary.n_failed == 0
    assert_matches_cold_solves(small_plan, arrays, range(small_plan.n_points))


def _assert_same(a: dict, b: dict) -> None:
    assert a.keys() == b.keys()
    for k in a:
        np.testing.assert_array_equal(a[k], b[k], err_msg=k)


def test_several_workers_give_bit_identical_results(small_plan, small_run):
    # chunking depends on the plan alone, so the numbers do not depend on the workers
    arrays, summary, seen = collect(small_plan, workers=2)
    assert summary.workers == 2
    assert sorted(seen) == [c.index for c in small_plan.chunks]
    _assert_same(arrays, small_run[0])


def test_dask_local_cluster_gives_the_same_results(small_plan, small_run):
    distributed = pytest.importorskip("distributed")
    with distributed.LocalCluster(n_workers=1, threads_per_worker=2, processes=False,
                                  dashboard_address=None, host="127.0.0.1", protocol="tcp",
                                  scheduler_port=0) as cluster:
        arrays, summary, _ = collect(small_plan, scheduler=cluster.scheduler_address)
    assert summary.where.startswith("Dask scheduler tcp://127.0.0.1:")
    _assert_same(arrays, small_run[0])


def test_a_failing_point_is_recorded_and_the_study_goes_on(tmp_path):
    # 1.2 x the 350 MW rating is beyond the valves-wide-open output of the demo unit
    # (about 338 MW at the highest allowed throttle pressure, solve.InfeasibleError)
    case = load_case(write_case(tmp_path, """
[sweep]
output_fraction = [0.5, 0.8, 1.2]
"""))
    plan = plan_study(case)
    arrays, summary, _ = collect(plan, workers=1)
    assert list(arrays["solver/status"]) == [0, 0, 1]
    assert summary.n_failed == 1 and summary.n_converged == 2
    assert arrays["solver/error"][2] == b"InfeasibleError"
    assert b"maximum output" in arrays["solver/message"][2]
    assert math.isnan(arrays["totals/generator_output"][2])
    assert summary.failures[0][0] == 2 and "maximum output" in summary.failures[0][2]
    assert_matches_cold_solves(plan, arrays, [0, 1])


def test_an_unexpected_exception_is_recorded_as_internal_error(tmp_path, monkeypatch):
    import partload.study.run as study

    case = load_case(write_case(tmp_path, "[sweep]\nthrottle_flow_fraction = [0.5, 0.6, 0.7]\n"))
    plan = plan_study(case)
    real = study.solve_point

    def flaky(model, cond, *a, **kw):
        if abs(cond.throttle_flow - 0.6 * model.throttle.flow) < 1e-9:
            raise ZeroDivisionError("simulated bug")
        return real(model, cond, *a, **kw)

    monkeypatch.setattr(study, "solve_point", flaky)
    arrays, summary, _ = collect(plan, workers=1)
    assert list(arrays["solver/status"]) == [0, 2, 0]
    assert summary.n_internal == 1
    assert b"internal error (ZeroDivisionError: simulated bug)" in arrays["solver/message"][1]


def test_interrupt_keeps_finished_chunks(small_plan):
    got = []

    def sink(res):
        got.append(res.index)
        if len(got) == 2:
            raise KeyboardInterrupt  # as Ctrl-C (or SIGTERM, see study_cli) would

    summary = run_study(small_plan, sink, workers=1)
    assert summary.interrupted
    assert got == [0, 1]


def test_skip_leaves_done_chunks_alone(small_plan):
    first = small_plan.chunks[0]
    _, summary, seen = collect(small_plan, workers=1, skip={first.index})
    assert first.index not in seen
    assert summary.n_skipped == first.size
    assert summary.n_solved == small_plan.n_points - first.size


def test_plain_progress_lines_show_rate_and_eta(capsys):
    import io

    buf = io.StringIO()
    p = Progress(100, stream=buf, interval=0.0)
    p.update(40, failed=1)
    p.close()
    line = buf.getvalue()
    assert "study: 40/100 points (40 %), 1 failed" in line and "points/s" in line
    assert "left" in line


def test_a_worker_that_dies_gives_a_clear_error(small_plan, monkeypatch):
    import os

    import partload.study.run as study
    from partload.errors import SolveError

    real = study.solve_point
    last = small_plan.conditions[-1]

    def dying(model, cond, *a, **kw):
        if cond is last or cond == last:
            os._exit(3)  # as a worker killed by the system would (forked: patch inherited)
        return real(model, cond, *a, **kw)

    monkeypatch.setattr(study, "solve_point", dying)
    with pytest.raises(SolveError, match="worker stopped without finishing its chunk"):
        collect(small_plan, workers=2)


def test_head_plans_the_first_points_only(small_plan):
    trial = small_plan.head(9)
    assert trial.n_points == 9 and trial.limit == 9
    assert trial.labels == small_plan.labels[:9]
    assert trial.series_labels == small_plan.series_labels  # 9 points reach the 2nd series
    assert sum(c.size for c in trial.chunks) == 9
    assert all(len(set(trial.series[c.start:c.stop])) == 1 for c in trial.chunks)
    assert small_plan.head(100) is small_plan
    with pytest.raises(InputError):
        small_plan.head(0)


# -------------------------------------------------------------- continuation
# Chunks of the shipped hourly profile (200 points each, cases/reheat_hourly_profile.toml,
# invented data).  Chunk 23 (rows 4600-4799, July) is where a chain of plain
# solve_point(neighbour=...) calls without the start guard turned 117 of 200 points into
# failures (measured: a secant slope taken over a 0.1 MW load step while the condenser
# pressure changed extrapolated to throttle pressures above 1,000 bar); the others are the
# next worst (25, 36, 26, 39, 30, 18, 1: 84 to 44 failures) and winter hours (0, 2).
PROFILE_CHUNKS = (0, 1, 2, 18, 23, 25, 26, 30, 36, 39)
SWEEP_CASES = ("reheat_load_sweep.toml", "reheat_load_sweep_warm_condenser.toml",
               "industrial_process_steam_sweep.toml")
# Answers from two starts agree to the solver's tolerance times the conditioning: measured
# at most 2.3e-10 relative on all 8,760 profile points and every demo sweep point, so the
# continuation checks use 1e-9 (a margin of about 4).
RTOL_START = 1e-9


def _solve_from_last_solution(plan, chunk):
    """A chunk solved as studies did before the guarded continuation: each point from
    the last solution and its Jacobian (``guess``/``jacobian``).  Returns ``{index:
    (node pressures, generator output)}`` of the points that solved."""
    from partload.errors import SolveError
    from partload.steam.if97 import get_backend

    model = plan.case.model
    steam = get_backend(plan.backend)
    conds = plan.conditions[chunk.start:chunk.stop]
    out = {}
    prev = None
    for i in solve_order(conds):
        try:
            r = solve_point(model, conds[i], steam, guess=prev.unknowns if prev else None,
                            jacobian=prev.jacobian if prev else None)
        except SolveError:
            continue
        out[chunk.start + i] = (r.node_p, r.totals["generator_output"])
        prev = r
    return out


def _continuation_plans():
    plans = []
    profile = plan_study(load_case(ROOT / "cases" / "reheat_hourly_profile.toml"))
    plans += [(profile, profile.chunks[k]) for k in PROFILE_CHUNKS]
    for name in SWEEP_CASES:
        plan = plan_study(load_case(ROOT / "cases" / name))
        plans += [(plan, c) for c in plan.chunks]
    return plans


def test_guarded_continuation_solves_every_point_the_last_solution_start_solves():
    from partload.study import SolveSpec, solve_chunk

    n_points = 0
    for plan, chunk in _continuation_plans():
        model = plan.case.model
        spec = SolveSpec(model.text, model.file, model.sha256, plan.backend,
                         result_layout(model))
        res = solve_chunk(spec, chunk, plan.conditions[chunk.start:chunk.stop])
        before = _solve_from_last_solution(plan, chunk)
        for k, (p, out) in before.items():
            j = k - chunk.start
            assert res.status[j] == STATUS["converged"], (plan.case.name, k)
            np.testing.assert_allclose(res.arrays["nodes/pressure"][j], p, rtol=RTOL_START)
            np.testing.assert_allclose(res.arrays["totals/generator_output"][j], out,
                                       rtol=RTOL_START)
        n_points += len(before)
    # every point of these chunks solves (200 a profile chunk; 30, 15, 24 sweep points)
    assert n_points == len(PROFILE_CHUNKS) * 200 + 30 + 15 + 24


def test_neighbour_chain_survives_the_stretch_where_extrapolation_failed():
    # solve_point(neighbour=...) alone, no fallback: the start guard keeps every point of
    # the chunk that failed 117 times without it (see PROFILE_CHUNKS); either half of the
    # guard (no secant step beyond four times the step the slope was taken over; no start
    # that is not physical) is enough here, and without both this test fails (checked)
    plan = plan_study(load_case(ROOT / "cases" / "reheat_hourly_profile.toml"))
    chunk = plan.chunks[23]
    before = _solve_from_last_solution(plan, chunk)
    conds = plan.conditions[chunk.start:chunk.stop]
    prev = None
    for i in solve_order(conds):
        prev = solve_point(plan.case.model, conds[i], plan.backend, neighbour=prev)
        p, out = before[chunk.start + i]
        np.testing.assert_allclose(prev.node_p, p, rtol=RTOL_START)
        np.testing.assert_allclose(prev.totals["generator_output"], out, rtol=RTOL_START)


def test_a_predicted_start_that_is_not_physical_is_not_used():
    import dataclasses

    from partload.plant.case import Conditions

    model = load_case(ROOT / "cases" / "reheat_load_sweep.toml").model
    m_d = model.throttle.flow
    a = solve_point(model, Conditions(throttle_flow=0.60 * m_d))
    b = solve_point(model, Conditions(throttle_flow=0.61 * m_d), neighbour=a)
    assert b.unknowns_slope is not None
    # a slope that predicts ln p rising by 500 per unit of flow ratio: over a step of 0.01
    # every pressure would be e^5 = 148 times higher (far above the throttle limit)
    poisoned = dataclasses.replace(b, unknowns_slope=np.full_like(b.unknowns_slope, 500.0),
                                   unknowns_curvature=None)
    cold = solve_point(model, Conditions(throttle_flow=0.62 * m_d))
    warm = solve_point(model, Conditions(throttle_flow=0.62 * m_d), neighbour=poisoned)
    np.testing.assert_allclose(warm.node_p, cold.node_p, rtol=RTOL_START)
    # it started from the neighbour scaled by the ellipse law, with the neighbour's
    # Jacobian, exactly as a neighbour without a slope does: the same iterates
    plain = dataclasses.replace(b, unknowns_slope=None, unknowns_curvature=None)
    scaled = solve_point(model, Conditions(throttle_flow=0.62 * m_d), neighbour=plain)
    assert warm.iterations == scaled.iterations
    np.testing.assert_array_equal(warm.unknowns, scaled.unknowns)


def test_continuation_falls_back_on_any_solve_error(monkeypatch):
    import partload.study.run as run
    from partload.errors import InfeasibleError
    from partload.plant.case import Conditions
    from partload.steam.if97 import get_backend

    model = load_case(ROOT / "cases" / "reheat_load_sweep.toml").model
    m_d = model.throttle.flow
    real = run.solve_point
    starts = []

    def refuse_neighbour_start(*a, **kw):
        starts.append("neighbour" if kw.get("neighbour") is not None else
                      "last" if kw.get("guess") is not None else "design")
        if kw.get("neighbour") is not None:
            raise InfeasibleError("simulated: the predicted start led to an answer refused")
        return real(*a, **kw)

    monkeypatch.setattr(run, "solve_point", refuse_neighbour_start)
    chain = run.Continuation(model, get_backend("seuif97"))
    chain.solve(Conditions(throttle_flow=0.60 * m_d))
    r = chain.solve(Conditions(throttle_flow=0.65 * m_d))
    assert starts == ["design", "neighbour", "last"]
    cold = solve_point(model, Conditions(throttle_flow=0.65 * m_d))
    np.testing.assert_allclose(r.node_p, cold.node_p, rtol=RTOL_START)


# ---------------------------------------------------------------- column units
@pytest.mark.parametrize("unit, dimension, a, b", [
    ("kPa", "pressure", 1000.0, 0.0),            # hand calculation: 1 kPa = 1000 Pa
    ("degC", "temperature", 1.0, 273.15),        # hand calculation: T/K = t/degC + 273.15
    ("degF", "temperature", 5.0 / 9.0, 459.67 * 5.0 / 9.0),  # T/K = (t/degF + 459.67) 5/9
    ("t/h", "mass_flow", 1000.0 / 3600.0, 0.0),  # hand calculation: 1 t/h = 1000 kg / 3600 s
    ("%", "fraction", 0.01, 0.0),
    ("", "fraction", 1.0, 0.0),
])
def test_column_unit_factors(unit, dimension, a, b):
    from partload.units import Where, linear_factors

    got = linear_factors(unit, dimension, Where("p.csv", "line 1", "x"))
    assert got == pytest.approx((a, b), rel=1e-12, abs=1e-12)


def test_profile_columns_in_other_units(tmp_path):
    (tmp_path / "p.csv").write_text(
        "time,output_fraction [%],throttle_temperature [degF]\nh0,60,1000\n", encoding="utf-8")
    plan = plan_study(load_case(write_case(tmp_path, '[profile]\nfile = "p.csv"\n')))
    # hand calculation: 60 % of the 350 MW rating; (1000 + 459.67) * 5/9 K
    assert plan.conditions[0].output == pytest.approx(0.60 * 350e6, rel=1e-12)
    assert plan.conditions[0].throttle_temperature == pytest.approx(1459.67 * 5 / 9, rel=1e-12)


@pytest.mark.parametrize("header, text", [
    ("output_fraction [kg/s]", "a fraction column takes no unit or [%], got [kg/s]"),
    ("exhaust_pressure [kPag]", "which is not an absolute pressure unit"),
    ("exhaust_pressure [MW]", "which is not an absolute pressure unit"),
])
def test_profile_column_with_a_wrong_unit(tmp_path, header, text):
    (tmp_path / "p.csv").write_text(f"time,{header}\nh0,6\n", encoding="utf-8")
    with pytest.raises(InputError, match=re.escape(text)) as err:
        plan_study(load_case(write_case(tmp_path, '[profile]\nfile = "p.csv"\n')))
    assert err.value.table == "line 1"
