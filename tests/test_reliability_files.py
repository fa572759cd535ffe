"""Result files and study sizes under faults: full disks, races, interrupts,
damaged and read-only files, huge studies, too many workers.

Full disks and read-only mounts are real: a 3 MB tmpfs mounted by the test,
which needs root (the tests skip with the reason otherwise).  Races and
interrupts are forced between the steps of ``StudyFile.create`` through its
hook ``partload.store.writer.between_steps``, never by timing.  Damaged files
are made by the tests from a good result.  Expected values are the behaviour
the README's exit-code table states (common practice, no source) or hand
calculations named where used.
"""

from __future__ import annotations

import json
import os
import resource
import shutil
import subprocess
import sys
from pathlib import Path

import h5py
import numpy as np
import pytest
from partload.cli.main import main

ROOT = Path(__file__).resolve().parents[1]
MODEL = ROOT / "models" / "demo_reheat_unit.toml"

SMALL = """
[sweep]
throttle_flow_fraction = [0.5, 0.7, 0.9]
"""

OTHER = """
[sweep]
throttle_flow_fraction = [0.6, 0.8]
"""

# 2,000 points: a result file of about 9 MB (hand calculation: about 4.5 kB of
# preallocated columns a point), three times the small disk
BIG = """
[sweep]
throttle_flow_fraction = {from = 0.35, to = 1.0, points = 2000}
"""

# four axes of 1,000 values: 10^12 points (hand calculation: 1000^4)
HUGE = """
[sweep]
throttle_flow_fraction = {from = 0.4, to = 1.0, points = 1000}
exhaust_pressure = {from = "5 kPa", to = "9 kPa", points = 1000}
throttle_temperature = {from = "520 degC", to = "540 degC", points = 1000}
reheat_temperature = {from = "520 degC", to = "540 degC", points = 1000}
"""


def write_case(folder: Path, body: str, name: str = "study.toml") -> Path:
    path = folder / name
    path.write_text(f"model = {json.dumps(str(MODEL))}\n" + body, encoding="utf-8")
    return path


def cli(*args) -> int:
    return main([str(a) for a in args])


def cli_process(*args, limit_memory: int | None = None) -> subprocess.CompletedProcess:
    """``partload`` in its own process (a crash or a memory limit cannot hit the tests)."""
    def limit():  # pragma: no cover - runs in the child
        if limit_memory:
            resource.setrlimit(resource.RLIMIT_AS, (limit_memory, limit_memory))

    env = dict(os.environ, OPENBLAS_NUM_THREADS="1", OMP_NUM_THREADS="1")
    return subprocess.run([sys.executable, "-m", "partload.cli", *map(str, args)],
                          capture_output=True, text=True, timeout=120, preexec_fn=limit,
                          env=env, cwd=ROOT)


def leftovers(folder: Path) -> list[str]:
    """Temporary or empty files in ``folder``: none may stay after a failure."""
    return sorted(p.name for p in folder.iterdir()
                  if ".creating" in p.name or ".partial" in p.name
                  or (p.is_file() and p.stat().st_size == 0))


@pytest.fixture(scope="module")
def small_result(tmp_path_factory):
    folder = tmp_path_factory.mktemp("small")
    case = write_case(folder, SMALL)
    out = folder / "small.h5"
    assert cli("study", case, "--workers", "1", "--output", out, "-q") == 0
    other_case = write_case(folder, OTHER, "other.toml")
    other = folder / "other.h5"
    assert cli("study", other_case, "--workers", "1", "--output", other, "-q") == 0
    return case, out, other


@pytest.fixture
def small_disk(tmp_path):
    """A 3 MB tmpfs (root only)."""
    if os.geteuid() != 0:
        pytest.skip("needs root to mount a small tmpfs (full disk, read-only mount)")
    disk = tmp_path / "disk"
    disk.mkdir()
    done = subprocess.run(["mount", "-t", "tmpfs", "-o", "size=3m", "tmpfs", str(disk)],
                          capture_output=True, text=True)
    if done.returncode != 0:
        pytest.skip(f"cannot mount a tmpfs here: {done.stderr.strip()}")
    try:
        yield disk
    finally:
        subprocess.run(["umount", "-l", str(disk)], check=False)


def fill(folder: Path) -> None:
    """Fill the file system of ``folder`` to the last byte."""
    block = b"\0" * 65536
    with open(folder / "filler", "wb", buffering=0) as fh:
        while True:
            try:
                fh.write(block)
            except OSError:
                break
        while True:
            try:
                fh.write(b"\0")
            except OSError:
                break


# ----------------------------------------------------------- full disk (items 1, 8)
def test_full_disk_is_refused_before_writing_naming_needed_and_free(small_disk, tmp_path):
    case = write_case(tmp_path, BIG)
    out = small_disk / "big.h5"
    done = cli_process("study", case, "--workers", "1", "--output", out, "-q")
    assert done.returncode == 3, done.stderr  # README: file and infrastructure class
    err = done.stderr
    assert "Traceback" not in err
    assert "needs about" in err and "MB" in err and "is free" in err
    assert list(small_disk.iterdir()) == []  # nothing written, nothing left


def test_disk_filled_during_creation_fails_cleanly(small_disk, tmp_path, monkeypatch, capsys):
    import partload.store.writer as writer

    # the space is there when checked, and gone when the file is built
    monkeypatch.setattr(writer, "between_steps",
                        lambda step: fill(small_disk) if step == "checked" else None)
    case = write_case(tmp_path, SMALL)
    out = small_disk / "small.h5"
    assert cli("study", case, "--workers", "1", "--output", out, "-q") == 3
    err = capsys.readouterr().err
    assert "disk is full" in err and "needs about" in err and "Traceback" not in err
    assert sorted(p.name for p in small_disk.iterdir()) == ["filler"]


def test_interrupt_during_creation_leaves_nothing(tmp_path, monkeypatch, capsys):
    import partload.store.writer as writer

    def interrupt(step):
        if step == "built":
            raise KeyboardInterrupt

    monkeypatch.setattr(writer, "between_steps", interrupt)
    case = write_case(tmp_path, SMALL)
    out = tmp_path / "out" / "small.h5"
    assert cli("study", case, "--workers", "1", "--output", out, "-q") == 130
    assert list(out.parent.iterdir()) == []


def test_abandoned_temporary_files_are_removed_and_live_ones_kept(tmp_path, capsys):
    import fcntl

    case = write_case(tmp_path, SMALL)
    out = tmp_path / "small.h5"
    time_ago = 3600.0  # [s] older than the 600 s after which one is abandoned
    abandoned = tmp_path / ".small.h5.0123456789ab.creating"  # a creation killed long ago
    held = tmp_path / ".small.h5.ba9876543210.creating"  # old, but a process holds it
    fresh = tmp_path / ".small.h5.00000000aaaa.creating"  # just made
    for p in (abandoned, held, fresh):
        p.write_bytes(b"x" * 100)
    for p in (abandoned, held):
        t = os.stat(p).st_mtime - time_ago
        os.utime(p, (t, t))
    fd = os.open(held, os.O_RDONLY)
    try:
        fcntl.flock(fd, fcntl.LOCK_EX | fcntl.LOCK_NB)
        assert cli("study", case, "--workers", "1", "--output", out, "-q") == 0
    finally:
        os.close(fd)
    assert not abandoned.exists() and held.exists() and fresh.exists()


# ------------------------------------------------------------------ races (item 7)
def test_a_file_appearing_during_creation_is_never_replaced(small_result, tmp_path,
                                                             monkeypatch, capsys):
    import partload.store.writer as writer

    _, _, other = small_result
    case = write_case(tmp_path, SMALL)
    out = tmp_path / "shared.h5"

    def other_study_arrives(step):  # after this study found no file at `out`
        if step == "built":
            shutil.copy(other, out)

    monkeypatch.setattr(writer, "between_steps", other_study_arrives)
    assert cli("study", case, "--workers", "1", "--output", out, "-q") == 3
    assert "appeared" in capsys.readouterr().err
    assert out.read_bytes() == other.read_bytes()  # the other study's file is untouched
    assert leftovers(tmp_path) == []


def test_force_does_not_replace_a_file_a_study_started_writing(small_result, tmp_path,
                                                                monkeypatch, capsys):
    import partload.store.writer as writer

    case, good, _ = small_result
    out = tmp_path / "busy.h5"
    shutil.copy(good, out)
    holders = []

    def study_starts(step):  # another study opens the file between the checks and the rename
        if step == "built":
            holders.append(h5py.File(out, "r+"))

    monkeypatch.setattr(writer, "between_steps", study_starts)
    before = out.read_bytes()
    try:
        assert cli("study", case, "--workers", "1", "--output", out, "-q", "--force") == 3
    finally:
        for h in holders:
            h.close()
    assert "meanwhile" in capsys.readouterr().err
    assert out.read_bytes() == before
    assert leftovers(tmp_path) == []


# -------------------------------------------------------------- study size (item 2)
def test_a_huge_sweep_is_refused_before_anything_is_built(tmp_path):
    case = write_case(tmp_path, HUGE)
    # 1.5 GB of address space: enough to load partload, far too little for the
    # product of the axes as a list (10^12 tuples)
    done = cli_process("study", case, "--workers", "1", "--output", tmp_path / "huge.h5",
                       limit_memory=1_500_000_000)
    assert done.returncode == 2, done.stderr  # README: a mistake in a file
    assert "Traceback" not in done.stderr
    assert "1,000,000,000,000 points" in done.stderr  # hand calculation: 1000^4
    assert "[sweep]" in done.stderr and "study.toml" in done.stderr
    assert not (tmp_path / "huge.h5").exists()


def test_size_is_computed_from_the_lengths_alone():
    from partload.errors import InputError
    from partload.study.plan import check_size

    assert check_size([1000, 1000], ["a", "b"], "case.toml") == 1_000_000  # 1000 x 1000
    with pytest.raises(InputError, match="1,000,001 points"):
        check_size([1_000_001], ["a"], "case.toml")  # one over the limit of 1,000,000


# ---------------------------------------------------------- workers, size (item 14)
def test_workers_are_capped_at_the_cpus_available(small_result, tmp_path, monkeypatch,
                                                   capsys):
    import partload.cli.study_commands as commands
    from partload.api import default_workers

    asked = []
    real = commands.run_study_file

    def spy(*args, **kw):
        asked.append(kw["workers"])
        return real(*args, **kw)

    monkeypatch.setattr(commands, "run_study_file", spy)
    case, _, _ = small_result
    cpus = default_workers()
    out = tmp_path / "capped.h5"
    assert cli("study", case, "--workers", cpus + 98, "--output", out, "-q") == 0
    assert asked == [cpus]
    assert f"--workers {cpus + 98} is more than the {cpus} CPUs available; using {cpus}" \
        in capsys.readouterr().err
    assert cli("study", case, "--workers", cpus, "--output", out, "-q", "--force") == 0
    assert asked == [cpus, cpus]
    assert "more than" not in capsys.readouterr().err  # no note when within the CPUs


def test_a_large_preallocation_is_announced(small_result, tmp_path, monkeypatch, capsys):
    import partload.store.writer as writer

    monkeypatch.setattr(writer, "LARGE_FILE", 1)  # every file counts as large here
    case, _, _ = small_result
    out = tmp_path / "noted.h5"
    assert cli("study", case, "--workers", "1", "--output", out, "-q") == 0
    err = capsys.readouterr().err
    assert "takes about" in err and "allocated now" in err and "free" in err


# ----------------------------------------------------------- damaged files (item 3)
def damage(src: Path, dst: Path, edit) -> Path:
    shutil.copy(src, dst)
    with h5py.File(dst, "r+") as f:
        edit(f)
    return dst


def replace_dataset(f: h5py.File, name: str, data) -> None:
    attrs = dict(f[name].attrs)
    del f[name]
    ds = f.create_dataset(name, data=data)
    for k, v in attrs.items():
        ds.attrs[k] = v


SHAPE_DAMAGE = {
    # the status of 1 point in a file of 3
    "status": lambda f: replace_dataset(f, "solver/status", f["solver/status"][:1]),
    # one node name missing: every column after it would be mislabelled
    "names": lambda f: replace_dataset(f, "nodes/names",
                                       np.array(f["nodes/names"][:-1], dtype=object)),
    # a total with a row too few
    "rows": lambda f: replace_dataset(f, "totals/heat_rate", f["totals/heat_rate"][:-1]),
}


@pytest.mark.parametrize("kind", sorted(SHAPE_DAMAGE))
def test_inconsistent_shapes_are_called_damaged(small_result, tmp_path, capsys, kind):
    case, good, _ = small_result
    bad = damage(good, tmp_path / f"{kind}.h5", SHAPE_DAMAGE[kind])
    out = tmp_path / "csv"
    assert cli("export", bad, "--output", out) == 3
    assert "damaged" in capsys.readouterr().err
    assert not out.exists() or list(out.iterdir()) == []  # no CSV cut short
    assert cli("plot", bad, "--output", tmp_path / "png") == 3
    assert "damaged" in capsys.readouterr().err
    assert cli("study", case, "--workers", "1", "--output", bad, "-q", "--resume") == 3
    assert "damaged" in capsys.readouterr().err
    # a damaged file of ours is replaced on request
    assert cli("study", case, "--workers", "1", "--output", bad, "-q", "--force") == 0
    assert cli("export", bad, "--output", out) == 0


def overwrite(src: Path, dst: Path, offset: int, data: bytes) -> Path:
    raw = bytearray(src.read_bytes())
    raw[offset:offset + len(data)] = data
    dst.write_bytes(bytes(raw))
    return dst


def test_random_damage_never_gives_a_traceback(small_result, tmp_path, capsys):
    case, good, _ = small_result
    size = good.stat().st_size
    rng = np.random.default_rng(17)  # fixed seed: the same damage every run
    codes = []
    for k in range(24):
        # the first 8 kB hold the superblock and the root's headers, then anywhere
        offset = int(rng.integers(8, 8192 if k < 16 else size - 64))
        bad = overwrite(good, tmp_path / f"random{k}.h5", offset,
                        rng.integers(0, 256, 64, dtype=np.uint8).tobytes())
        for args in (("export", bad, "--output", tmp_path / f"csv{k}"),
                     ("study", case, "--workers", "1", "--output", bad, "-q", "--resume")):
            code = cli(*args)
            err = capsys.readouterr().err
            assert code in (0, 3), (k, args[0], err)
            if code == 3:
                assert "damaged" in err or "not an HDF5 file" in err or "another program" \
                    in err, err
            codes.append(code)
    assert 3 in codes  # some of the damage must be found (regression value: most is)


def test_force_replaces_a_result_with_a_damaged_beginning(small_result, tmp_path, capsys):
    case, good, _ = small_result
    bad = overwrite(good, tmp_path / "head.h5", 0, b"\0" * 8)  # the HDF5 signature gone
    assert cli("study", case, "--workers", "1", "--output", bad, "-q") == 3
    capsys.readouterr()
    assert cli("study", case, "--workers", "1", "--output", bad, "-q", "--force") == 0
    with h5py.File(bad, "r") as f:
        assert f["points/done"][:].all()
    # a text file is never replaced, even when it mentions the format
    notes = tmp_path / "notes.h5"
    notes.write_text("partload-study files are HDF5\n", encoding="utf-8")
    assert cli("study", case, "--workers", "1", "--output", notes, "-q", "--force") == 3
    assert notes.read_text(encoding="utf-8") == "partload-study files are HDF5\n"


# ------------------------------------------------------- failed export, plot (item 8)
def test_failed_export_and_plot_leave_no_empty_files(small_result, small_disk, capsys):
    _, good, _ = small_result
    result = small_disk / "small.h5"
    shutil.copy(good, result)
    fill(small_disk)
    assert cli("export", result) == 3
    assert cli("plot", result) == 3
    err = capsys.readouterr().err
    assert "cannot write" in err and "Traceback" not in err
    assert sorted(p.name for p in small_disk.iterdir()) == ["filler", "small.h5"]


# ------------------------------------------------------------- read-only (item 12)
def test_resume_on_a_read_only_file_says_read_only(small_result, tmp_path, capsys):
    case, good, _ = small_result
    if os.geteuid() == 0:
        disk = tmp_path / "ro"
        disk.mkdir()
        if subprocess.run(["mount", "-t", "tmpfs", "-o", "size=3m", "tmpfs", str(disk)],
                          capture_output=True).returncode != 0:
            pytest.skip("cannot mount a tmpfs here")
        try:
            shutil.copy(good, disk / "small.h5")
            subprocess.run(["mount", "-o", "remount,ro", str(disk)], check=True)
            code = cli("study", case, "--workers", "1", "--output", disk / "small.h5", "-q",
                       "--resume")
        finally:
            subprocess.run(["umount", "-l", str(disk)], check=False)
        words = "read-only file system"
    else:
        target = tmp_path / "small.h5"
        shutil.copy(good, target)
        target.chmod(0o444)
        code = cli("study", case, "--workers", "1", "--output", target, "-q", "--resume")
        words = "read-only"
    assert code == 3
    err = capsys.readouterr().err
    assert words in err and "not damaged" in err and "is damaged" not in err


# --------------------------------------------------------- model path (item 13)
def test_a_model_path_the_system_refuses_names_case_file_and_key(tmp_path, capsys):
    case = tmp_path / "long.toml"
    # 300 characters in one name: more than the 255 of Linux file systems (common
    # practice, no source)
    case.write_text(f'model = "{"m" * 300}.toml"\n[operation]\nthrottle_flow_fraction = 0.6\n',
                    encoding="utf-8")
    assert cli("point", case) == 2
    err = capsys.readouterr().err
    assert "long.toml" in err and "model" in err and "too long" in err
