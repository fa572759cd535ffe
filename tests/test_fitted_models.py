"""Fitted ("as tested") model files named by case files, points and studies.

The fitted file here is written by hand in the documented format (plant/fitted.py),
independently of the fit itself (tests/test_measure.py covers the fit and the
file it writes).  The checks: every path that reads a model (a case file, the
API, a study's workers, which build the model from its design text) gives the
same fitted machine; a lower stage-group efficiency shows as that efficiency in
the result (a fact of the definition) and costs output at the same flow
(physics: less work from the same steam); a study file records what was fitted
and is not resumed with other fitted values.
"""

from __future__ import annotations

import dataclasses
import hashlib
import json
from pathlib import Path

import h5py
import partload
import pytest
from partload.api import run_study_file
from partload.errors import InputError, ResultFileError
from partload.measure.fit import fit
from partload.measure.tags import read_measurements
from partload.plant.case import Conditions, load_case
from partload.plant.model import load_model
from partload.solve.point import solve_point
from partload.study import plan_study, result_layout
from partload.study.run import _MODELS, SolveSpec, worker_model

ROOT = Path(__file__).resolve().parents[1]
MODEL = ROOT / "models" / "demo_reheat_unit.toml"
FITTED_EFFICIENCY = 0.80  # HP1's design efficiency is 0.84 in the demo model file


def _fitted_file(folder: Path, efficiency: float = FITTED_EFFICIENCY) -> Path:
    """A fitted model file of the demo reheat unit with HP1's efficiency fitted."""
    sha = hashlib.sha256(MODEL.read_bytes()).hexdigest()
    path = folder / "as_tested.toml"
    path.write_text(
        'basis = "as tested"\n'
        f"design_model = {json.dumps(str(MODEL))}\n"
        f'design_model_sha256 = "{sha}"\n\n'
        '[tunables."stage_group.HP1.efficiency"]\n'
        f"value = {efficiency!r}\n", encoding="utf-8")
    return path


def _case(folder: Path, model: Path, body: str = "") -> Path:
    path = folder / "case.toml"
    path.write_text(f"model = {json.dumps(str(model))}\n[operation]\nthrottle_flow = \"200 kg/s\"\n"
                    + body, encoding="utf-8")
    return path


def test_a_case_file_names_a_fitted_model(tmp_path):
    fitted = _fitted_file(tmp_path)
    case = load_case(_case(tmp_path, fitted))
    design = load_case(_case(tmp_path, MODEL))
    assert case.model.fitted == (("stage_group.HP1.efficiency", FITTED_EFFICIENCY),)
    assert case.model.name.endswith("(as tested)")
    assert case.model.sha256 != design.model.sha256  # the fitted values are its identity
    r = solve_point(case.model, case.conditions)
    d = solve_point(design.model, design.conditions)
    # the same as the API's reading of the fitted file, bit for bit
    api = solve_point(partload.load_model(fitted), case.conditions)
    assert r.totals["generator_output"] == api.totals["generator_output"]
    # HP1 runs near its fitted efficiency (71 % flow moves its velocity ratio a little;
    # regression bound 0.01), and the design model near 0.84
    eta = r.tables["stage_groups"].row("HP1")["efficiency"]
    assert eta == pytest.approx(FITTED_EFFICIENCY, abs=0.01)
    assert d.tables["stage_groups"].row("HP1")["efficiency"] == pytest.approx(0.84, abs=0.01)
    # the same throttle flow gives less output and a higher heat rate (physics)
    assert r.totals["throttle_flow"] == pytest.approx(d.totals["throttle_flow"], rel=1e-12)
    assert r.totals["generator_output"] < d.totals["generator_output"]
    assert r.totals["heat_rate"] > d.totals["heat_rate"]


def test_a_study_worker_builds_the_fitted_model_from_its_design_text(tmp_path):
    model = load_model(_fitted_file(tmp_path))
    layout = result_layout(model)
    spec = SolveSpec(model.text, model.file, model.sha256, "seuif97", layout, True, model.fitted)
    plain = dataclasses.replace(spec, fitted=(), model_sha256="design")
    _MODELS.clear()  # as a worker that did not inherit the model (spawned, or remote)
    try:
        built = worker_model(spec)
        unfitted = worker_model(plain)
    finally:
        _MODELS.clear()
    assert built is not model and built.fitted == model.fitted
    assert built.sha256 == model.sha256
    cond = Conditions(throttle_flow=200.0)
    a = solve_point(built, cond).totals["generator_output"]
    b = solve_point(model, cond).totals["generator_output"]
    c = solve_point(unfitted, cond).totals["generator_output"]
    assert a == b  # the same machine, bit for bit
    assert c > a  # without the fitted values: the design machine


def test_a_study_of_a_fitted_model_records_it_and_refuses_other_values(tmp_path):
    body = "\n[sweep]\nthrottle_flow_fraction = [0.6, 0.8]\n"
    out = tmp_path / "study.h5"
    run_study_file(_case(tmp_path, _fitted_file(tmp_path), body), output=out,
                            workers=1)
    with h5py.File(out, "r") as f:
        assert f.attrs["model_fitted"] == "stage_group.HP1.efficiency = 0.8"
        assert f.attrs["model_name"].endswith("(as tested)")
        power = f["totals/generator_output"][()]
    # the same points solved one by one on the fitted model
    case = load_case(tmp_path / "case.toml")
    plan = plan_study(case)
    for k, cond in enumerate(plan.conditions):
        alone = solve_point(case.model, cond).totals["generator_output"]
        assert power[k] == pytest.approx(alone, rel=1e-9)
    # fitted again with another value: the file is not resumed with it
    _fitted_file(tmp_path, 0.81)
    with pytest.raises(ResultFileError, match="fitted values") as e:
        run_study_file(tmp_path / "case.toml", output=out, workers=1, resume=True)
    assert "then: stage_group.HP1.efficiency = 0.8" in str(e.value)
    assert "now: stage_group.HP1.efficiency = 0.81" in str(e.value)


def test_a_fitted_model_is_not_fitted_again(tmp_path):
    # the demo acceptance test (INVENTED data) against a fitted model: refused, naming
    # the map's model key, before any solving
    meas = read_measurements(ROOT / "measurements" / "acceptance_test.toml")
    meas = dataclasses.replace(meas, model=load_model(_fitted_file(tmp_path)))
    with pytest.raises(InputError) as e:
        fit(meas)
    assert e.value.key == "model" and "design model" in str(e.value)


def test_a_fitted_file_naming_a_missing_design_model(tmp_path):
    path = _fitted_file(tmp_path)
    path.write_text(path.read_text().replace(str(MODEL), str(tmp_path / "gone.toml")))
    with pytest.raises(InputError) as e:
        load_case(_case(tmp_path, path))
    assert e.value.key == "design_model" and "gone.toml" in str(e.value)


def test_a_fitted_file_naming_a_fitted_file(tmp_path):
    # itself, or another fitted file: refused naming the key (it looped without end)
    path = _fitted_file(tmp_path)
    other = tmp_path / "other.toml"
    template = path.read_text(encoding="utf-8")
    other.write_text(template, encoding="utf-8")
    for target in (path.name, other.name):
        path.write_text(template.replace(json.dumps(str(MODEL)), json.dumps(target)),
                        encoding="utf-8")
        with pytest.raises(InputError) as e:
            load_model(path)
        assert e.value.key == "design_model" and "fitted model file" in str(e.value)


def test_a_study_point_is_not_re_solved_with_other_fitted_values(tmp_path):
    # the point report of a study re-solves the point from its case: after a new fit
    # the case file is unchanged but the machine is not, so the point is refused
    # rather than shown with other values than the file holds
    from partload.present.report import study_point

    body = "\n[sweep]\nthrottle_flow_fraction = [0.6, 0.8]\n"
    out = tmp_path / "study.h5"
    run_study_file(_case(tmp_path, _fitted_file(tmp_path), body), output=out, workers=1)
    case, cond, *_ = study_point(out, 0)
    assert case.model.fitted == (("stage_group.HP1.efficiency", FITTED_EFFICIENCY),)
    _fitted_file(tmp_path, 0.70)
    with pytest.raises(ResultFileError, match="fitted values then") as e:
        study_point(out, 0)
    assert "stage_group.HP1.efficiency = 0.7" in str(e.value)


def test_a_fitted_file_of_a_design_model_with_crlf_line_ends(tmp_path):
    # the fit writes the design model's SHA-256 as the model has it (of the text read);
    # a design model with Windows line ends is the same model, not "changed since the fit"
    crlf = tmp_path / "design.toml"
    crlf.write_bytes(MODEL.read_bytes().replace(b"\n", b"\r\n"))
    design = load_model(crlf)
    path = tmp_path / "as_tested.toml"
    path.write_text('basis = "as tested"\ndesign_model = "design.toml"\n'
                    f'design_model_sha256 = "{design.sha256}"\n\n'
                    '[tunables."stage_group.HP1.efficiency"]\nvalue = 0.8\n', encoding="utf-8")
    assert load_model(path).fitted == (("stage_group.HP1.efficiency", 0.8),)


def test_check_names_the_fitted_file_its_design_model_and_values(tmp_path, capsys):
    from partload.cli.main import main

    fitted = _fitted_file(tmp_path)
    assert main(["check", str(fitted)]) == 0
    head = capsys.readouterr().out.splitlines()[:3]
    assert str(fitted) in head[0] and str(MODEL) in head[0]
    assert "stage_group.HP1.efficiency = 0.8" in "\n".join(head)
    assert main(["check", str(fitted), "--json"]) == 0
    data = json.loads(capsys.readouterr().out)
    assert data["fitted_file"] == str(fitted) and data["file"] == str(MODEL)
    assert data["fitted"] == {"stage_group.HP1.efficiency": FITTED_EFFICIENCY}
    # a fitted file has no design bleeds of its own to balance
    assert main(["check", str(fitted), "--write-balanced", str(tmp_path / "b.toml")]) == 2
    err = capsys.readouterr().err
    assert "balance its design model" in err and "basis" in err
    # the design model's own check is unchanged: no fitted lines
    assert main(["check", str(MODEL)]) == 0
    assert "fitted" not in capsys.readouterr().out.splitlines()[1]


def test_a_point_report_names_the_fitted_file(tmp_path):
    from partload.present.report import point_report

    case = _case(tmp_path, _fitted_file(tmp_path))
    html = point_report(case)
    assert "as_tested.toml" in html and "demo_reheat_unit.toml" in html
    assert "stage_group.HP1.efficiency = 0.8" in html
