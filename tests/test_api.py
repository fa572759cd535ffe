"""The public Python API (partload.load_model, load_case, point, run_study, open_result).

Each function is checked against another path to the same answer: the
command line's JSON output (``partload check --json``, ``partload point
--json``, ``partload study``), the lower-level solver and study functions, or
the HDF5 file read with h5py alone.  The demo files are invented data.

Tolerances: where the API and the other path solve the same equations from the
same start, the answers agree to round-off in the unit conversions of the JSON
output (display units; hand calculation: one rounding each way, about 1e-16),
and where the stated load comes through pint ("210 MW") it may differ from the
float in the last bit; ``rel = 1e-9`` covers both with a wide margin, as
tests/test_answers.py does for the recorded answers.
"""

from __future__ import annotations

import json
import re
import shutil
import subprocess
import sys
from pathlib import Path

import h5py
import numpy as np
import partload
import pytest
from partload.cli.main import main
from partload.errors import InputError, ResultFileError
from partload.plant.case import Conditions
from partload.plant.case import load_case as lower_load_case
from partload.solve.point import solve_point
from partload.store import StudyData
from partload.study import plan_study

ROOT = Path(__file__).resolve().parents[1]
MODEL = ROOT / "models" / "demo_reheat_unit.toml"
CASES = ROOT / "cases"
SWEEP = CASES / "reheat_load_sweep.toml"
REL = 1e-9  # see the module docstring


def cli_json(capsys, *args) -> dict:
    """The JSON printed by ``partload ARGS --json``."""
    capsys.readouterr()
    assert main([*map(str, args), "--json"]) == 0
    return json.loads(capsys.readouterr().out)


def assert_same_point(r, d):
    """A PointResult (SI) against the command's JSON of the same point (display units)."""
    t = d["totals"]
    assert r.totals["throttle_flow"] == pytest.approx(t["throttle_flow"], rel=REL)
    assert r.totals["generator_output"] == pytest.approx(t["generator_output"] * 1e6, rel=REL)
    assert r.totals["heat_rate"] * 3600.0 == pytest.approx(t["heat_rate"], rel=REL)
    assert r.totals["final_feedwater_temperature"] - 273.15 == pytest.approx(
        t["final_feedwater_temperature"], rel=REL)
    pressures = {n["name"]: n["pressure"] for n in d["nodes"]}
    assert set(pressures) == set(r.node_names)
    for name, p in zip(r.node_names, r.node_p):
        assert p / 1e5 == pytest.approx(pressures[name], rel=REL), name
    bleeds = {e["name"]: e["flow"] for e in d["extractions"]}
    for name, m in zip(r.extraction_names, r.extraction_flow):
        assert m == pytest.approx(bleeds[name], rel=REL, abs=1e-12), name


# ------------------------------------------------------------------ import
def test_import_is_light_and_names_load_on_first_use():
    code = ("import sys, partload\n"
            "heavy = [m for m in ('h5py', 'matplotlib', 'distributed', 'partload.solve.point',"
            " 'partload.study.run', 'partload.store.reader') if m in sys.modules]\n"
            "print(heavy)\n"
            "partload.open_result\n"
            "print('partload.api' in sys.modules, 'h5py' in sys.modules)\n")
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True,
                         check=True).stdout.split("\n")
    assert out[0] == "[]"
    # the function is there; h5py still waits for a file to be read
    assert out[1] == "True False"


def test_unknown_name_is_an_attribute_error():
    with pytest.raises(AttributeError, match="no attribute 'solve_everything'"):
        partload.solve_everything  # noqa: B018


# ------------------------------------------------------------------ loading and points
def test_load_model_gives_the_design_point_of_check_json(capsys):
    model = partload.load_model(MODEL)
    assert model.name == "Demo reheat unit"  # models/demo_reheat_unit.toml, [about] name
    d = cli_json(capsys, "check", MODEL)
    assert_same_point(partload.point(model), d["design"])


def test_point_of_a_case_matches_point_json(capsys):
    case = partload.load_case(CASES / "reheat_part_load.toml")
    d = cli_json(capsys, "point", CASES / "reheat_part_load.toml")
    assert_same_point(partload.point(case), d)
    # the path of the case file is accepted too
    assert_same_point(partload.point(str(CASES / "reheat_part_load.toml")), d)


@pytest.mark.parametrize("case_file, keywords", [
    # each case file stated as keywords on the model (SI values from the file's units)
    ("reheat_part_load.toml", {"throttle_flow_fraction": 0.6, "pressure_mode": "sliding"}),
    ("reheat_top_heater_out.toml", {"throttle_flow": 280.0, "heaters_out": ["HP8"]}),
    ("reheat_demand_210MW.toml", {"output": 210e6}),
    ("reheat_throttle_governing.toml", {"throttle_flow_fraction": 0.7, "pressure_mode": "fixed",
                                        "throttle_pressure": 166e5, "exhaust_pressure": 8.5e3}),
])
def test_keywords_on_the_model_match_the_case_file(capsys, case_file, keywords):
    d = cli_json(capsys, "point", CASES / case_file)
    assert_same_point(partload.point(MODEL, **keywords), d)


def test_keywords_on_a_case_replace_its_conditions(capsys):
    out = partload.load_case(CASES / "reheat_top_heater_out.toml")
    # no heater out again: the design point (the case runs at design throttle flow)
    design = cli_json(capsys, "check", MODEL)["design"]
    assert_same_point(partload.point(out, heaters_out=()), design)
    # output_fraction of the 350 MW rating is 210 MW (models/demo_reheat_unit.toml)
    d210 = cli_json(capsys, "point", CASES / "reheat_demand_210MW.toml")
    assert_same_point(partload.point(out, heaters_out=[], output_fraction=0.6), d210)


def test_conditions_object_and_backend(reheat_model):
    cond = Conditions(throttle_flow=0.45 * reheat_model.throttle.flow)
    lower = solve_point(reheat_model, cond, "seuif97")
    r = partload.point(reheat_model, cond)
    np.testing.assert_allclose(r.node_p, lower.node_p, rtol=REL)
    assert r.backend == "seuif97"
    # the case's backend is the default; backend= overrides it
    case = lower_load_case(CASES / "reheat_part_load.toml", model=reheat_model)
    case.backend = "iapws"
    assert partload.point(case).backend == "iapws"
    assert partload.point(case, backend="seuif97").backend == "seuif97"


@pytest.mark.parametrize("keywords, key", [
    ({"throttle_flwo": 200.0}, "throttle_flwo"),
    ({"throttle_flow": 200.0, "output": 2e8}, "output"),
    ({"throttle_flow": -1.0}, "throttle_flow"),
    ({"pressure_mode": "nozzle"}, "pressure_mode"),
    ({"throttle_pressure": 150e5}, "throttle_pressure"),  # sliding pressure holds none
    ({"heaters_out": ["HP9"]}, "heaters_out"),
    ({"heaters_out": ["deaerator"]}, "heaters_out"),
    # the case reader's ranges: a case file refuses these too
    ({"throttle_flow_fraction": 5.0}, "throttle_flow_fraction"),
    ({"exhaust_pressure": -1.0}, "exhaust_pressure"),
    ({"throttle_temperature": 2000.0}, "throttle_temperature"),
])
def test_mistaken_keywords_are_input_errors_naming_the_key(reheat_model, keywords, key):
    with pytest.raises(InputError) as info:
        partload.point(reheat_model, **keywords)
    assert info.value.key == key


def test_a_model_object_of_the_wrong_kind_is_refused():
    with pytest.raises(InputError, match="expected a model, a case"):
        partload.point(42)


# ------------------------------------------------------------------ studies
def _h5_arrays(path: Path) -> dict[str, np.ndarray]:
    out = {}
    with h5py.File(path, "r") as f:
        def take(name, obj):
            if isinstance(obj, h5py.Dataset) and obj.dtype.kind == "f":
                out[name] = obj[...]
        f.visititems(take)
    return out


def test_run_study_writes_the_file_the_command_writes(tmp_path, capsys):
    api_path, summary = partload.run_study(SWEEP, tmp_path / "api.h5", workers=1, limit=6)
    assert api_path == tmp_path / "api.h5"
    assert main(["study", str(SWEEP), "--output", str(tmp_path / "cli.h5"), "--workers", "1",
                 "--limit", "6", "--quiet"]) == 0
    ours, theirs = _h5_arrays(api_path), _h5_arrays(tmp_path / "cli.h5")
    assert set(ours) == set(theirs) and "totals/generator_output" in ours
    for name, values in theirs.items():
        # the same plan and chunks: bit for bit (simulator/study/ docstring)
        np.testing.assert_array_equal(ours[name], values, err_msg=name)
    assert summary.n_points == 6 and summary.n_converged == 6
    assert summary.n_failed == 0 and not summary.interrupted
    with h5py.File(api_path, "r") as f:
        assert int(f.attrs["limit"]) == 6
        assert (f["solver/status"][:] == 0).all()


def test_run_study_answers_match_points_solved_one_by_one(tmp_path, reheat_model):
    path, summary = partload.run_study(SWEEP, tmp_path, workers=2, limit=16)
    assert path == tmp_path / "reheat_load_sweep.h5"  # a folder gets <case file name>.h5
    # 16 points: the 15 of the first series in chunks of 8 and 7, then the first
    # point with HP8 out (chunk_size and _chunks in simulator/study/)
    assert summary.workers == 2 and summary.n_converged == 16
    plan = plan_study(lower_load_case(SWEEP, model=reheat_model)).head(16)
    with h5py.File(path, "r") as f:
        output = f["totals/generator_output"][:]
        heat_rate = f["totals/heat_rate"][:]
        assert list(f["points/chunk"][:]) == [0] * 8 + [1] * 7 + [2]
    # cold solves from the design-scaled guess; continuation differs by at most
    # 3e-10 relative (tests/test_study.py), so 1e-8
    for k in (0, 7, 8, 14, 15):
        r = solve_point(reheat_model, plan.conditions[k])
        assert output[k] == pytest.approx(r.totals["generator_output"], rel=1e-8)
        assert heat_rate[k] == pytest.approx(r.totals["heat_rate"], rel=1e-8)


def test_run_study_default_path_refusal_resume_and_force(tmp_path, monkeypatch):
    monkeypatch.chdir(tmp_path)
    path, first = partload.run_study(SWEEP, workers=1, limit=3)
    assert path == Path("results") / "reheat_load_sweep.h5" and path.exists()
    assert first.n_solved == 3
    with pytest.raises(ResultFileError, match="already exists"):
        partload.run_study(SWEEP, workers=1, limit=3)
    _, again = partload.run_study(SWEEP, workers=1, limit=3, resume=True)
    assert again.n_solved == 0 and again.n_skipped == 3
    _, replaced = partload.run_study(SWEEP, workers=1, limit=3, force=True)
    assert replaced.n_solved == 3


def test_run_study_of_a_case_without_a_study_is_an_input_error():
    with pytest.raises(InputError, match=r"no \[sweep\] or \[profile\]"):
        partload.run_study(CASES / "reheat_part_load.toml", limit=1)


def test_open_result_reads_what_h5py_reads(tmp_path):
    path, _ = partload.run_study(SWEEP, tmp_path / "r.h5", workers=1, limit=5)
    data = partload.open_result(path)
    assert isinstance(data, StudyData)
    with h5py.File(path, "r") as f:
        labels = list(f["points/label"].asstr()[:])
        output = f["totals/generator_output"][:]
        nodes = list(f["nodes/names"].asstr()[:])
        p_x = f["nodes/pressure"][:, nodes.index("crossover")]
        unit = f["totals/generator_output"].attrs["unit"]
    assert data.labels == labels and data.n_points == 5
    np.testing.assert_array_equal(data.total("generator_output"), output)
    np.testing.assert_array_equal(data.column("nodes", "pressure", "crossover"), p_x)
    assert data.units["totals/generator_output"] == unit == "W"
    assert data.ok.all()


def test_open_result_refuses_other_files(tmp_path):
    other = tmp_path / "other.h5"
    with h5py.File(other, "w") as f:
        f.attrs["format"] = "something-else"
    with pytest.raises(ResultFileError, match="another program"):
        partload.open_result(other)
    with pytest.raises(ResultFileError, match="no such file"):
        partload.open_result(tmp_path / "missing.h5")


# ------------------------------------------------------------------ README
def test_readme_api_example_runs_as_written(tmp_path, monkeypatch, capsys):
    text = (ROOT / "README.md").read_text(encoding="utf-8")
    section = text[text.index("## Python API"):]
    section = section[:section.index("\n## ", 1)]
    code = re.search(r"```python\n(.*?)```", section, re.S).group(1)
    # run from a copy of the project folder's demo files, as the README says
    shutil.copytree(ROOT / "models", tmp_path / "models")
    shutil.copytree(ROOT / "cases", tmp_path / "cases")
    monkeypatch.chdir(tmp_path)
    capsys.readouterr()
    exec(compile(code, "README.md", "exec"), {"__name__": "readme"})
    lines = capsys.readouterr().out.splitlines()
    # 198.817 MW at 60 % flow: README, "A quick tour" (partload point of that case)
    assert lines[0] == "198.8 MW"
    assert lines[2] == "10 of 10 points converged into results/reheat_load_sweep.h5"
    assert (tmp_path / "results" / "reheat_load_sweep.h5").exists()


def test_a_study_file_that_cannot_be_made_is_a_file_error_on_a_dask_cluster(tmp_path,
                                                                            monkeypatch):
    # the file is made when the first chunk comes back, inside the cluster's loop: a
    # failure to make it (here: too little free space) is the file's error, not a lost
    # scheduler, and no file appears
    distributed = pytest.importorskip("distributed")
    import partload.store.writer as writer
    monkeypatch.setattr(writer, "_free_space", lambda folder: 1000)
    out = tmp_path / "sweep.h5"
    with distributed.LocalCluster(n_workers=1, threads_per_worker=1, processes=False,
                                  dashboard_address=None, host="127.0.0.1", protocol="tcp",
                                  scheduler_port=0) as cluster:
        with pytest.raises(ResultFileError, match="free"):
            partload.run_study(ROOT / "cases" / "reheat_load_sweep.toml", out, limit=4,
                               scheduler=cluster.scheduler_address)
    assert not out.exists()


def test_a_study_file_that_does_not_fit_is_refused_before_any_point_is_solved(tmp_path,
                                                                             monkeypatch):
    # the file is made when the first chunk comes back, but the free space it needs is
    # known from the plan: a study that cannot be stored is refused before solving
    import partload.store.writer as writer
    import partload.study.run as run
    monkeypatch.setattr(writer, "_free_space", lambda folder: 1000)
    solved = []
    real = run.solve_point

    def counted(*a, **kw):
        solved.append(1)
        return real(*a, **kw)

    monkeypatch.setattr(run, "solve_point", counted)
    out = tmp_path / "sub" / "sweep.h5"
    with pytest.raises(ResultFileError, match="only 1.0 kB is free"):
        partload.run_study(ROOT / "cases" / "reheat_load_sweep.toml", out, limit=4, workers=1)
    assert solved == [] and not out.exists()


def _die(*_args):  # a worker process that dies before it finishes its chunk
    import os
    os._exit(1)


def test_a_worker_lost_before_any_chunk_leaves_a_file_to_resume(tmp_path, monkeypatch):
    # the result file is made when the first chunk comes back; when none does, the error
    # still tells the user to continue with --resume, so the file must be there (empty)
    from partload.errors import SolveError
    from partload.study import executors

    monkeypatch.setattr(executors, "solve_chunk_task", _die)
    out = tmp_path / "sweep.h5"
    with pytest.raises(SolveError, match="--resume"):
        partload.run_study(CASES / "reheat_load_sweep.toml", out, workers=2)
    with h5py.File(out, "r") as f:
        assert not np.any(f["points/done"][()])


def test_a_study_stopped_before_its_first_chunk_leaves_a_replaced_file_as_it_was(
        tmp_path, monkeypatch, capsys):
    # --force replaces a result only once there is something to put in its place: a
    # study stopped (Ctrl-C) before its first chunk came back writes nothing
    from partload.study import executors

    out = tmp_path / "sweep.h5"
    partload.run_study(CASES / "reheat_load_sweep.toml", out, workers=1, limit=3)
    before = out.read_bytes()

    def interrupted(*_args):
        raise KeyboardInterrupt

    monkeypatch.setattr(executors, "solve_chunk", interrupted)
    code = main(["study", str(CASES / "reheat_load_sweep.toml"), "--output", str(out),
                 "--force", "--workers", "1", "--quiet"])
    assert code == 130
    assert "nothing was written" in capsys.readouterr().err
    assert out.read_bytes() == before
