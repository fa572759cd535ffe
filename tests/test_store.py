"""Tests of partload.store: the HDF5 layout, CSV export, and "nothing lost".

Result files are read back with h5py alone.  Reference values are the demo
reheat unit (invented data) solved point by point with
:func:`partload.solve.point.solve_point`; stored points reached by continuation
agree with those to ``rtol = 1e-8`` (see tests/test_study.py for the reason).
Kill and resume tests run ``partload study`` in a real subprocess.
"""

from __future__ import annotations

import csv
import json
import os
import shutil
import signal
import subprocess
import sys
import time
from pathlib import Path

import h5py
import numpy as np
import pytest
from partload import __version__
from partload.cli.main import main
from partload.errors import ResultFileError
from partload.plant.case import load_case
from partload.solve.point import solve_point
from partload.store import FORMAT, StudyFile, export_csv, read_study
from partload.study import SolveSpec, plan_study, result_layout, run_study, solve_chunk

ROOT = Path(__file__).resolve().parents[1]
MODEL = ROOT / "models" / "demo_reheat_unit.toml"
RTOL = 1e-8

SWEEP = """
[operation]
governing = "sliding"

[sweep]
output_fraction = [0.45, 0.6, 0.75, 0.9, 1.2]
heater_out = ["none", "HP8"]
"""

# 150 flows x 4 condenser pressures = 600 points in 16 chunks of 38: long enough
# (about 2 s) for a kill to land in the middle of the run
LONG = """
[operation]
governing = "sliding"

[sweep]
exhaust_pressure = ["5 kPa", "6.5 kPa", "8 kPa", "9.5 kPa"]
throttle_flow_fraction = {from = 0.35, to = 1.0, points = 150}
"""


def write_case(folder: Path, body: str, name: str = "study.toml", model: Path = MODEL) -> Path:
    path = folder / name
    path.write_text(f"model = {json.dumps(str(model))}\n" + body, encoding="utf-8")
    return path


def run_cli(*args) -> int:
    return main([str(a) for a in args])


@pytest.fixture(scope="module")
def sweep_file(tmp_path_factory):
    folder = tmp_path_factory.mktemp("sweep")
    case = write_case(folder, SWEEP)
    out = folder / "sweep.h5"
    assert run_cli("study", case, "--workers", "1", "--output", out, "--quiet") == 0
    return case, out


# --------------------------------------------------------------- layout
def test_layout_reads_back_with_h5py_alone(sweep_file):
    case_path, out = sweep_file
    case = load_case(case_path)
    plan = plan_study(case)
    with h5py.File(out, "r") as f:
        a = f.attrs
        assert a["format"] == FORMAT and a["format_version"] == 3
        assert a["software_version"] == __version__
        assert a["model_sha256"] == case.model.sha256 and a["case_sha256"] == case.sha256
        assert a["property_backend"] == "seuif97" and a["n_points"] == 10
        assert a["created"].endswith("+00:00")
        assert f["model_file"].asstr()[()] == MODEL.read_text(encoding="utf-8")
        assert f["case_file"].asstr()[()] == case_path.read_text(encoding="utf-8")
        assert f["points/done"][:].all()
        nodes = list(f["nodes/names"].asstr()[:])
        assert nodes == list(case.model.order)
        assert list(f["heaters/names"].asstr()[:]) == list(case.model.heaters)
        # every per-point number says its unit
        for group in ("nodes", "stage_groups", "extractions", "heaters", "totals"):
            for name, ds in f[group].items():
                if ds.dtype.kind == "f":
                    assert ds.attrs["unit"], f"{group}/{name} has no unit"
                    assert ds.shape[0] == 10
        assert f["nodes/pressure"].attrs["unit"] == "Pa"
        assert f["totals/heat_rate"].attrs["unit"] == "J/J"
        assert f["totals/final_feedwater_temperature"].attrs["unit"] == "K"
        assert f["inputs/output"].attrs["unit"] == "W"
        # 1.2 x rating is beyond the machine (InfeasibleError), the rest converged
        status = f["solver/status"][:]
        frac = f["inputs/output_fraction"][:]
        assert (status[frac > 1.0] == 1).all() and (status[frac < 1.0] == 0).all()
        assert set(f["solver/error"].asstr()[status == 1]) == {"InfeasibleError"}
        assert np.isnan(f["nodes/pressure"][status == 1]).all()
        # the README example
        ok = f["solver/status"][:] == 0
        p_cross = f["nodes/pressure"][ok, nodes.index("crossover")] / 1e5
        # crossover above 1 bar at any load of this sweep (design 4.6 bar; regression)
        assert p_cross.shape == (8,) and (p_cross > 1.0).all()
        # values equal a point solved on its own
        for i in (1, 7):
            r = solve_point(case.model, plan.conditions[i])
            np.testing.assert_allclose(f["nodes/pressure"][i], r.node_p, rtol=RTOL)
            np.testing.assert_allclose(f["totals/generator_output"][i],
                                       r.totals["generator_output"], rtol=RTOL)
            np.testing.assert_allclose(f["stage_groups/power"][i], r.group_power, rtol=RTOL)
        # HP8 out: its heater row says so and its bleed is zero
        k = list(f["heaters/names"].asstr()[:]).index("HP8")
        series = f["points/series"][:]
        assert (f["heaters/in_service"][series == 1, k] == 0).all()
        assert (f["heaters/bleed"][ok & (series == 1), k] == 0).all()
        assert np.isnan(f["heaters/shell_pressure"][ok & (series == 1), k]).all()


def test_csv_export_matches_the_hdf5_file(sweep_file, tmp_path):
    _, out = sweep_file
    assert run_cli("export", out, "--output", tmp_path) == 0
    with open(tmp_path / "sweep_points.csv", newline="", encoding="utf-8") as fh:
        rows = list(csv.DictReader(fh))
    with open(tmp_path / "sweep_nodes.csv", newline="", encoding="utf-8") as fh:
        node_rows = list(csv.DictReader(fh))
    with open(tmp_path / "sweep_heaters.csv", newline="", encoding="utf-8") as fh:
        heater_rows = list(csv.DictReader(fh))
    with h5py.File(out, "r") as f:
        n = f.attrs["n_points"]
        assert len(rows) == len(node_rows) == len(heater_rows) == n
        status = f["solver/status"][:]
        labels = f["points/label"].asstr()[:]
        # written with 6 significant digits (store.export.CSV_DIGITS): within 5e-6
        for i, row in enumerate(rows):
            assert row["label"] == labels[i]
            assert int(row["status"]) == status[i]
            if status[i] != 0:
                assert row["generator_output [MW]"] == ""
                assert "maximum output" in row["message"]
                continue
            assert float(row["generator_output [MW]"]) == pytest.approx(
                f["totals/generator_output"][i] / 1e6, rel=5e-6)
            assert float(row["heat_rate [kJ/kWh]"]) == pytest.approx(
                f["totals/heat_rate"][i] * 3600.0, rel=5e-6)
            assert float(row["final_feedwater_temperature [degC]"]) == pytest.approx(
                f["totals/final_feedwater_temperature"][i] - 273.15, rel=5e-6)
            assert float(row["input output [MW]"]) == pytest.approx(
                f["inputs/output"][i] / 1e6, rel=5e-6)
        nodes = list(f["nodes/names"].asstr()[:])
        heaters = list(f["heaters/names"].asstr()[:])
        for i, row in enumerate(node_rows):
            for j, node in enumerate(nodes):
                v = f["nodes/pressure"][i, j]
                # the condenser's is a back pressure, in kPa; the others in bar
                unit, scale = ("kPa", 1e3) if node == "condenser" else ("bar", 1e5)
                cell = row[f"pressure {node} [{unit}]"]
                assert (cell == "") if np.isnan(v) else float(cell) == pytest.approx(
                    v / scale, rel=5e-6)
        ttd = f["heaters/ttd"][:]
        for i, row in enumerate(heater_rows):
            for j, h in enumerate(heaters):
                cell = row[f"ttd {h} [K]"]  # a difference: stays in K
                assert (cell == "") if np.isnan(ttd[i, j]) else float(cell) == pytest.approx(
                    ttd[i, j], rel=5e-6, abs=1e-12)


def test_csv_export_in_si(sweep_file, tmp_path):
    _, out = sweep_file
    files = export_csv(out, tmp_path, si=True)
    header = files[0].read_text(encoding="utf-8").splitlines()[0]
    assert "generator_output [W]" in header and "input exhaust_pressure [Pa]" in header


def test_structure_never_changes_after_creation(tmp_path):
    """Only preallocated data bytes change when points are written, so a kill at
    any moment cannot damage the HDF5 structure."""
    case = load_case(write_case(tmp_path, SWEEP))
    plan = plan_study(case)
    layout = result_layout(case.model)
    path = tmp_path / "r.h5"
    sf = StudyFile.create(path, plan, layout)
    before = np.frombuffer(path.read_bytes(), np.uint8)
    spec = SolveSpec(case.model.text, case.model.file, case.model.sha256, "seuif97", layout)
    for c in plan.chunks:
        sf.write(solve_chunk(spec, c, plan.conditions[c.start:c.stop]))
    after = np.frombuffer(path.read_bytes(), np.uint8)
    regions = []
    sf.f.visititems(lambda name, obj: regions.append(
        (obj.id.get_offset(), obj.id.get_storage_size())) if isinstance(obj, h5py.Dataset)
        and obj.id.get_offset() is not None else None)
    sf.close()
    assert after.size == before.size
    changed = np.flatnonzero(after != before)
    assert changed.size > 0
    inside = np.zeros(changed.size, bool)
    for off, size in regions:
        inside |= (changed >= off) & (changed < off + size)
    assert inside.all(), f"{(~inside).sum()} bytes changed outside dataset storage"


# ------------------------------------------------------------ no overwrite
def test_second_study_never_silently_overwrites(sweep_file, tmp_path, capsys):
    case, out = sweep_file
    copy = tmp_path / "copy.h5"
    shutil.copy(out, copy)
    before = copy.read_bytes()
    assert run_cli("study", case, "--workers", "1", "--output", copy, "-q") == 3
    assert "already exists" in capsys.readouterr().err
    assert copy.read_bytes() == before
    assert run_cli("study", case, "--workers", "1", "--output", copy, "-q", "--force") == 0
    with h5py.File(copy, "r") as f, h5py.File(out, "r") as g:
        np.testing.assert_array_equal(f["nodes/pressure"][:], g["nodes/pressure"][:])


def test_foreign_and_damaged_files_are_refused(sweep_file, tmp_path, capsys):
    case, out = sweep_file
    foreign = tmp_path / "foreign.h5"
    with h5py.File(foreign, "w") as f:
        f["x"] = np.arange(3)
    text = tmp_path / "notes.h5"
    text.write_text("my notes", encoding="utf-8")
    for path, words in ((foreign, "another program"), (text, "not an HDF5 file")):
        before = path.read_bytes()
        for extra in ((), ("--force",), ("--resume",)):
            assert run_cli("study", case, "--workers", "1", "--output", path, "-q",
                           *extra) == 3
            assert words in capsys.readouterr().err
        assert path.read_bytes() == before
        with pytest.raises(ResultFileError, match=words):
            read_study(path)
    damaged = tmp_path / "damaged.h5"
    data = out.read_bytes()
    damaged.write_bytes(data[: len(data) // 3])
    assert run_cli("export", damaged) == 3
    assert "damaged" in capsys.readouterr().err
    assert run_cli("study", case, "--workers", "1", "--output", damaged, "-q", "--resume") == 3
    # a damaged file with the HDF5 signature may be replaced on request
    assert run_cli("study", case, "--workers", "1", "--output", damaged, "-q", "--force") == 0
    assert read_study(damaged).done.all()


def test_a_result_being_written_is_not_replaced(sweep_file, tmp_path, capsys):
    # another process holds the file open for writing (as a running study does)
    case, out = sweep_file
    busy = tmp_path / "busy.h5"
    shutil.copy(out, busy)
    holder = subprocess.Popen(
        [sys.executable, "-c", "import h5py, sys, time; f = h5py.File(sys.argv[1], 'r+'); "
         "print('open', flush=True); time.sleep(30)", str(busy)], stdout=subprocess.PIPE,
        text=True)
    try:
        assert holder.stdout.readline().strip() == "open"
        before = busy.read_bytes()
        assert run_cli("study", case, "--workers", "1", "--output", busy, "-q", "--force") == 3
        assert "in use" in capsys.readouterr().err
        assert busy.read_bytes() == before
    finally:
        holder.kill()
        holder.wait()


def test_damaged_file_is_called_damaged_not_in_use(sweep_file, tmp_path, capsys):
    _, out = sweep_file
    cut = tmp_path / "cut.h5"
    cut.write_bytes(out.read_bytes()[:5000])
    assert run_cli("plot", cut, "--output", tmp_path) == 3
    err = capsys.readouterr().err
    assert "damaged" in err and "in use" not in err


def test_unwritable_output_folder_is_a_clear_error(sweep_file, tmp_path, capsys):
    _, out = sweep_file
    blocker = tmp_path / "afile"
    blocker.write_text("x", encoding="utf-8")
    assert run_cli("export", out, "--output", blocker / "sub") == 3
    err = capsys.readouterr().err
    assert "afile" in err and "Traceback" not in err


# ------------------------------------------------------ kill and resume
@pytest.fixture(scope="module")
def long_case(tmp_path_factory):
    folder = tmp_path_factory.mktemp("long")
    case = write_case(folder, LONG)
    ref = folder / "reference.h5"
    assert run_cli("study", case, "--workers", "1", "--output", ref, "-q") == 0
    return case, ref


def _done(path: Path) -> int:
    """Points done so far, read while the study writes (the layout never changes,
    so reading needs no lock)."""
    try:
        with h5py.File(path, "r", locking=False) as f:
            return int(f["points/done"][:].sum())
    except (OSError, KeyError):
        return 0


def _children(pid: int) -> list[int]:
    kids = []
    for task in Path(f"/proc/{pid}/task").glob("*"):
        try:
            kids += [int(x) for x in (task / "children").read_text().split()]
        except OSError:
            pass
    return kids


def _start_and_stop(case: Path, out: Path, sig: int, workers: int):
    cmd = [sys.executable, "-m", "partload.cli", "study", str(case), "--workers", str(workers),
           "--output", str(out), "--quiet"]
    # the test hook of study.run: each chunk waits 0.05 s, so the signal lands mid-study
    # on a fast machine too
    env = {**os.environ, "PARTLOAD_TEST_CHUNK_PAUSE": "0.05"}
    proc = subprocess.Popen(cmd, stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True,
                            cwd=out.parent, env=env)
    deadline = time.monotonic() + 60
    while _done(out) < 76 and time.monotonic() < deadline and proc.poll() is None:
        time.sleep(0.02)  # wait for two chunks of 38 points
    kids = _children(proc.pid)
    proc.send_signal(sig)
    stdout, stderr = proc.communicate(timeout=60)
    return proc.returncode, stdout, stderr, kids


def _assert_same_contents(a: Path, b: Path) -> None:
    """Every dataset equal (bit for bit); root attributes equal but the creation time."""
    with h5py.File(a, "r") as f, h5py.File(b, "r") as g:
        names_f, names_g = [], []
        f.visit(names_f.append)
        g.visit(names_g.append)
        assert names_f == names_g
        for name in names_f:
            if isinstance(f[name], h5py.Dataset):
                x, y = f[name][()], g[name][()]
                if isinstance(x, np.ndarray) and x.dtype.kind == "f":
                    np.testing.assert_array_equal(x, y, err_msg=name)
                else:
                    assert np.array_equal(x, y), name
        for k in f.attrs:
            if k not in ("created", "case_path"):
                assert np.array_equal(f.attrs[k], g.attrs[k]), k


@pytest.mark.parametrize("workers", [1, 2])
def test_sigkill_then_resume_gives_the_uninterrupted_file(long_case, tmp_path, workers):
    case, ref = long_case
    local_case = shutil.copy(case, tmp_path / case.name)  # same text, so same sha256
    out = tmp_path / "killed.h5"
    code, _, _, kids = _start_and_stop(Path(local_case), out, signal.SIGKILL, workers)
    assert code == -signal.SIGKILL
    # the file is valid HDF5 holding finished points, and only finished ones are marked
    with h5py.File(out, "r") as f:
        done = f["points/done"][:].astype(bool)
        status = f["solver/status"][:]
        assert 0 < done.sum() < done.size, "the kill should land mid-run"
        assert (status[done] >= 0).all()
        assert not np.isnan(f["nodes/pressure"][done & (status == 0)]).any()
    # worker processes of a killed study do not linger
    if workers > 1 and Path(f"/proc/{os.getpid()}/task/{os.getpid()}/children").exists():
        assert kids, "the study should have had worker processes"
    deadline = time.monotonic() + 20
    while any(Path(f"/proc/{k}").exists() for k in kids) and time.monotonic() < deadline:
        time.sleep(0.1)
    assert not any(Path(f"/proc/{k}/status").exists() and "zombie" not in
                   Path(f"/proc/{k}/status").read_text() for k in kids)
    assert run_cli("study", local_case, "--workers", "1", "--output", out, "-q",
                   "--resume") == 0
    _assert_same_contents(out, ref)


def test_sigterm_stops_cleanly_and_resume_finishes(long_case, tmp_path):
    case, ref = long_case
    local_case = shutil.copy(case, tmp_path / case.name)
    out = tmp_path / "stopped.h5"
    code, stdout, stderr, _ = _start_and_stop(Path(local_case), out, signal.SIGTERM, 2)
    assert code == 130
    assert "interrupted" in stderr and "--resume" in stderr
    n = read_study(out).done.sum()
    assert 0 < n < 600
    assert f"({n} of 600 points done)" in stdout
    assert run_cli("study", local_case, "--output", out, "-q", "--resume") == 0
    _assert_same_contents(out, ref)


def test_changed_model_refuses_to_resume(tmp_path, capsys):
    model = tmp_path / "model.toml"
    model.write_text(MODEL.read_text(encoding="utf-8"), encoding="utf-8")
    case = write_case(tmp_path, SWEEP, model=model)
    out = tmp_path / "r.h5"
    plan = plan_study(load_case(case))
    layout = result_layout(plan.case.model)
    with StudyFile.create(out, plan, layout) as sf:  # an interrupted study: one chunk done
        run_study(plan, sf.write, workers=1, layout=layout, skip={c.index for c in
                                                                  plan.chunks[1:]})
    model.write_text(model.read_text(encoding="utf-8").replace("efficiency = 0.84",
                                                               "efficiency = 0.845"))
    before = out.read_bytes()
    assert run_cli("study", case, "--workers", "1", "--output", out, "-q", "--resume") == 3
    err = capsys.readouterr().err
    assert "the model has changed since this study was started" in err
    assert "--force" in err
    assert out.read_bytes() == before
    # an edited case is refused the same way
    model.write_text(MODEL.read_text(encoding="utf-8"), encoding="utf-8")
    case.write_text(case.read_text(encoding="utf-8") + "\n# edited\n", encoding="utf-8")
    assert run_cli("study", case, "--workers", "1", "--output", out, "-q", "--resume") == 3
    assert "case file" in capsys.readouterr().err


def test_resume_of_a_complete_file_does_nothing(sweep_file, tmp_path, capsys):
    case, out = sweep_file
    copy = tmp_path / "complete.h5"
    shutil.copy(out, copy)
    assert run_cli("study", case, "--workers", "1", "--output", copy, "--resume") == 0
    assert "nothing to do" in capsys.readouterr().out
    _assert_same_contents(copy, out)


def test_reading_checks_the_format(tmp_path):
    path = tmp_path / "x.h5"
    with h5py.File(path, "w") as f:
        f.attrs["format"] = FORMAT
        f.attrs["format_version"] = 99
    with pytest.raises(ResultFileError, match="format version 99"):
        read_study(path)
    with pytest.raises(ResultFileError, match="no such file"):
        read_study(tmp_path / "missing.h5")
    os.remove(path)


def test_result_format_versions(sweep_file, tmp_path, capsys):
    """Version 1, 2 and 3 files read; a newer or missing ``format_version`` is
    refused with the file, the version found and the versions read (this partload
    reads 1, 2 and 3 and writes 3); a version 1 file is not resumed."""
    case, out = sweep_file
    copy = tmp_path / "versions.h5"
    shutil.copy(out, copy)
    assert read_study(copy).attrs["format_version"] == 3
    with h5py.File(copy, "r+") as f:
        f.attrs["format_version"] = 4
    before = copy.read_bytes()
    with pytest.raises(ResultFileError) as info:
        read_study(copy)
    text = str(info.value)
    assert str(copy) in text and "version 4" in text and "newer" in text
    assert "reads result format version 1, 2, 3" in text
    assert run_cli("export", copy) == 3
    assert "version 4" in capsys.readouterr().err
    assert run_cli("study", case, "--workers", "1", "--output", copy, "-q", "--resume") == 3
    assert "version 4" in capsys.readouterr().err
    assert copy.read_bytes() == before
    with h5py.File(copy, "r+") as f:  # an older layout reads, but is not resumed
        f.attrs["format_version"] = 1
    assert read_study(copy).done.all()
    before = copy.read_bytes()
    assert run_cli("study", case, "--workers", "1", "--output", copy, "-q", "--resume") == 3
    err = capsys.readouterr().err
    assert "format version 1" in err and "writes version 3" in err
    assert copy.read_bytes() == before
    with h5py.File(copy, "r+") as f:
        del f.attrs["format_version"]
    with pytest.raises(ResultFileError) as info:
        read_study(copy)
    text = str(info.value)
    assert str(copy) in text and "no root attribute 'format_version'" in text
    assert "reads result format version 1, 2, 3" in text
    with h5py.File(copy, "r+") as f:  # the same file marked version 3 again reads as before
        f.attrs["format_version"] = 3
    assert read_study(copy).done.all()


def test_importing_the_store_leaves_the_solver_alone():
    """The store is reached without loading the solver or the study runner."""
    code = ("import sys, partload.store\n"
            "print(' '.join(m for m in sys.modules if m.startswith('partload')))")
    run = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True,
                         check=True)
    loaded = run.stdout.split()
    assert "partload.store.writer" in loaded
    heavy = [m for m in loaded if m.split(".")[:2] in (["partload", "solve"],
                                                        ["partload", "study"])]
    assert heavy == []


def test_resume_needs_the_same_limit(tmp_path, capsys):
    case = write_case(tmp_path, SWEEP)
    out = tmp_path / "trial.h5"
    assert run_cli("study", case, "--workers", "1", "-o", out, "-q", "--limit", "4") == 0
    assert read_study(out).n_points == 4
    assert run_cli("study", case, "--workers", "1", "-o", out, "-q", "--resume") == 3
    assert "--limit 4" in capsys.readouterr().err
    assert run_cli("study", case, "--workers", "1", "-o", out, "-q", "--resume",
                   "--limit", "4") == 0


def test_beyond_limits_solves_what_ifs_and_marks_them(tmp_path, capsys):
    # 1.2 x rating needs about 217 bar at the throttle, above the 175 bar allowed
    # (models/demo_reheat_unit.toml, max_pressure): refused normally, a what-if here
    case = write_case(tmp_path, SWEEP)
    out = tmp_path / "whatif.h5"
    assert run_cli("study", case, "--workers", "1", "-o", out, "-q", "--beyond-limits") == 0
    with h5py.File(out, "r") as f:
        assert f.attrs["check_limits"] == 0
        frac = f["inputs/output_fraction"][:]
        assert (f["solver/status"][:] == 0).all()
        beyond = frac > 1.0
        assert (f["totals/throttle_pressure"][beyond] > 175e5).all()
        if "cautions" in f:
            codes = f["cautions/codes"].asstr()[:]
            assert all("valves_wide_open" in c for c in codes[beyond])
    assert run_cli("study", case, "--workers", "1", "-o", out, "-q", "--resume") == 3
    assert "--beyond-limits" in capsys.readouterr().err
