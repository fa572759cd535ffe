"""Reliability of the inputs: mistakes that used to pass silently, or were blamed
on the wrong key, are refused naming file, table and key; the Dask scheduler
address is checked before anything is created, and a scheduler that cannot be
reached or is lost gives one line and exit code 3.

Broken files are built from the demo files by text substitution in ``tmp_path``
(as in ``tests/test_inputs.py``).  Expected words come from the messages'
own wording; the physical reasons they state are hand reasoning noted at each
test.
"""

from __future__ import annotations

import json
import re
from pathlib import Path

import pytest
from partload.cli.main import main
from partload.errors import InputError
from partload.plant.case import load_case
from partload.plant.model import load_model

ROOT = Path(__file__).resolve().parent.parent
REHEAT = ROOT / "models/demo_reheat_unit.toml"
INDUSTRIAL = ROOT / "models/demo_industrial_unit.toml"
TRAIN = ('train = ["condensate pump", "LP1", "LP2", "LP3", "LP4", "deaerator", "feed pump", '
         '"HP6", "HP7", "HP8"]')


def broken(path: Path, subs: list[tuple[str, str]]) -> str:
    """The text of ``path`` with substitutions; each old text must occur (first one replaced)."""
    text = path.read_text(encoding="utf-8")
    for old, new in subs:
        assert old in text, f"fixture text not found: {old!r}"
        text = text.replace(old, new, 1)
    return text


def problems_of(exc: InputError) -> list[InputError]:
    return list(getattr(exc, "problems", [exc]))


def run_cli(args: list[str], capsys) -> tuple[int, str, str]:
    code = main([str(a) for a in args])
    out, err = capsys.readouterr()
    return code, out, err


def refused_model(tmp_path, capsys, subs, table, key, words, model=REHEAT):
    """The model with ``subs`` is refused by ``partload check`` (exit 2, no traceback) and
    by :func:`load_model` with a problem at exactly ``table`` and ``key``."""
    path = tmp_path / "broken_model.toml"
    path.write_text(broken(model, subs), encoding="utf-8")
    code, out, err = run_cli(["check", path], capsys)
    assert code == 2, err
    assert "Traceback" not in err and out == ""
    for w in words:
        assert w in err, err
    with pytest.raises(InputError) as info:
        load_model(path)
    assert any(p.table == table and p.key == key for p in problems_of(info.value)), \
        [(p.table, p.key) for p in problems_of(info.value)]
    return err


# --- item: list keys name a repeated entry -------------------------------------------

def test_an_exhaust_node_listed_twice_is_refused(tmp_path, capsys):
    # before: accepted, condenser duty and exhaust flow counted twice (771 MW for 386 MW)
    twice = 'nodes = ["condenser", "condenser"]'
    refused_model(tmp_path, capsys, [('nodes = ["condenser"]', twice)], "exhaust", "nodes",
                  ["[exhaust] nodes", "'condenser' is listed twice", "positions 1 and 2"])


def test_a_pump_listed_twice_in_the_train_is_refused(tmp_path, capsys):
    refused_model(tmp_path, capsys, [(TRAIN, TRAIN.replace('"HP8"]', '"HP8", "feed pump"]'))],
                  "feedwater", "train", ["[feedwater] train", "'feed pump' is listed twice",
                                         "positions 7 and 11"])


def test_a_heater_listed_twice_is_named_not_blamed_on_its_ttd(tmp_path, capsys):
    err = refused_model(tmp_path, capsys, [(TRAIN, TRAIN.replace('"HP8"]', '"HP8", "HP7"]'))],
                        "feedwater", "train", ["'HP7' is listed twice", "positions 9 and 11"])
    assert "ttd" not in err.lower() and "closure" not in err


def test_pumps_placed_last_name_the_train_and_why(tmp_path, capsys):
    # hand reasoning: condensate leaves the condenser saturated at 6.8 kPa; heated in LP1
    # before any pump it would boil, so the train needs a pump ahead of its first heater;
    # the same holds after the deaerator for HP6
    last = ('train = ["LP1", "LP2", "LP3", "LP4", "deaerator", "HP6", "HP7", "HP8", '
            '"condensate pump", "feed pump"]')
    err = refused_model(tmp_path, capsys, [(TRAIN, last)], "feedwater", "train",
                        ["[feedwater] train", "heater 'LP1' (position 1)",
                         "saturated", "no pump between", "heater 'HP6' (position 6)"])
    assert "IAPWS" not in err and "IF97" not in err


def test_a_feed_pump_before_the_deaerator_is_refused(tmp_path, capsys):
    # the deaerator leaves the water saturated at its ~10 bar: the boiler cannot be fed
    order = ('train = ["condensate pump", "LP1", "LP2", "LP3", "LP4", "feed pump", '
             '"HP6", "HP7", "HP8", "deaerator"]')
    refused_model(tmp_path, capsys, [(TRAIN, order)], "feedwater", "train",
                  ["no feed pump (discharge = 'boiler') follows deaerator 'deaerator'"])


def test_the_demo_trains_are_accepted():
    # the order rules refuse no train of the demo units (regression of the rules)
    assert load_model(REHEAT).feedwater.order[0] == "condensate pump"
    assert load_model(INDUSTRIAL).feedwater.order[-1] == "HP heater"


# --- item: TOML duplicate keys name the key and show the line --------------------------

LIMITS_TWICE = '\n[limits]\nmax_back_pressure = "250 %"\nmax_back_pressure = "300 %"\n'


@pytest.mark.parametrize("subs, extra, table, key, words, shown", [
    # a key written twice in one table
    ([('efficiency = 0.84', 'efficiency = 0.84\nefficiency = 0.85')], "", "stage_group",
     "efficiency", ["[stage_group] efficiency: given twice"], "efficiency = 0.85"),
    # the same on the last line of the file (the TOML reader says only "end of document")
    ([], LIMITS_TWICE, "limits", "max_back_pressure",
     ["[limits] max_back_pressure: given twice"], 'max_back_pressure = "300 %"'),
    # a table declared twice
    ([('[generator]', '[about]\nname = "again"\n\n[generator]')], "", "about", None,
     ["the table [about] is given twice"], "[about]"),
    # a key repeated inside an inline table
    ([('nodes = ["condenser"]', 'nodes = ["condenser"]\nx = {a = 1, a = 2}')], "", "exhaust",
     "x", ["the key 'a' is given twice in one inline table"], "x = {a = 1, a = 2}"),
])
def test_toml_duplicates_name_the_key_and_show_the_line(tmp_path, capsys, subs, extra, table,
                                                        key, words, shown):
    # before: "not valid TOML: Cannot overwrite a value (at line 58, column 18)" alone
    text = broken(REHEAT, subs) + extra
    path = tmp_path / "dup.toml"
    path.write_text(text, encoding="utf-8")
    code, out, err = run_cli(["check", path], capsys)
    assert code == 2 and out == "" and "Traceback" not in err
    for w in words:
        assert w in err, err
    # the repeated statement is the last line showing that text
    n = max(i for i, line in enumerate(text.splitlines(), 1) if line.strip() == shown)
    assert f"(line {n}: {shown})" in err, err
    with pytest.raises(InputError) as info:
        load_model(path)
    assert (info.value.table, info.value.key) == (table, key)


def test_other_toml_mistakes_show_their_line(tmp_path, capsys):
    path = tmp_path / "bad.toml"
    path.write_text(broken(REHEAT, [('efficiency = 0.84', 'efficiency = 0.84 0.85')]),
                    encoding="utf-8")
    code, _, err = run_cli(["check", path], capsys)
    assert code == 2 and "not valid TOML" in err and "efficiency = 0.84 0.85" in err


# --- item: partload point checks [sweep] and [profile] -------------------------------

def write_case(tmp_path: Path, body: str, model: Path = REHEAT, name="case.toml") -> Path:
    path = tmp_path / name
    path.write_text(f"model = {json.dumps(str(model))}\n" + body, encoding="utf-8")
    return path


@pytest.mark.parametrize("body, table, key, words", [
    # a misspelt axis
    ('[sweep]\nthrottle_flow_fracton = [0.5, 0.8]\n', "sweep", "throttle_flow_fracton",
     ["not an input that can be varied", "did you mean 'throttle_flow_fraction'?"]),
    # a value of the wrong dimension
    ('[sweep]\nexhaust_pressure = ["5 kPa", "40 degC"]\n', "sweep", "exhaust_pressure",
     ["temperature"]),
    # the load varied twice
    ('[sweep]\nthrottle_flow_fraction = [0.5, 0.8]\noutput_fraction = [0.5]\n', "sweep",
     "output_fraction", ["the load is set once"]),
    # a profile file that does not exist
    ('[profile]\nfile = "no_such_profile.csv"\n', "profile", "file",
     ["profile file 'no_such_profile.csv' not found"]),
])
def test_point_refuses_a_broken_sweep_or_profile(tmp_path, capsys, body, table, key, words):
    # before: 'partload point' solved the base point and exited 0
    path = write_case(tmp_path, '[operation]\nthrottle_flow_fraction = 0.7\n' + body)
    code, out, err = run_cli(["point", path], capsys)
    assert code == 2 and out == "" and "Traceback" not in err, err
    assert f"[{table}] {key}:" in err, err
    for w in words:
        assert w in err, err


def test_point_solves_the_base_point_of_a_sound_study(capsys):
    code, out, err = run_cli(["point", ROOT / "cases/reheat_load_sweep.toml"], capsys)
    assert code == 0 and "generator output" in out
    assert "also defines a study" in err


# --- items: the Dask scheduler address, an unreachable and a lost scheduler ------------

SWEEP_CASE = ROOT / "cases/reheat_load_sweep.toml"


@pytest.mark.parametrize("address, words", [
    ("tcp://127.0.0.1", "no port"),
    ("garbage", "no port"),
    ("udp://127.0.0.1:8786", "'udp://' is not a protocol of Dask"),
    ("tcp://127.0.0.1:99999", "not a whole number from 1 to 65535"),
    ("tcp://:8786", "no host"),
    ("tcp://bad host:8786", "contains a space"),
    ("tcp://[::1:8786", "is not closed"),
])
def test_a_malformed_scheduler_address_is_refused_before_anything(tmp_path, capsys, address,
                                                                  words):
    # before: a ValueError traceback or a 42 s hang, exit 1, and an empty result file
    out_file = tmp_path / "res" / "study.h5"
    code, out, err = run_cli(["study", SWEEP_CASE, "--scheduler", address, "--output",
                              out_file, "--quiet"], capsys)
    assert code == 2 and "Traceback" not in err, err
    assert "--scheduler" in err and words in err, err
    assert not out_file.parent.exists() or not any(out_file.parent.iterdir())


@pytest.mark.parametrize("address, words", [
    ("tcp://127.0.0.1:8786", ("tcp", "127.0.0.1", 8786)),
    ("127.0.0.1:8786", ("tcp", "127.0.0.1", 8786)),
    ("tls://scheduler.example:1", ("tls", "scheduler.example", 1)),
    ("tcp://[::1]:8786", ("tcp", "::1", 8786)),
])
def test_sound_scheduler_addresses_are_read(address, words):
    from partload.study.executors import check_scheduler_address

    assert check_scheduler_address(address)[1:] == words


def _closed_port() -> int:
    """A local TCP port nothing listens on (bound, then released)."""
    import socket

    with socket.socket() as s:
        s.bind(("127.0.0.1", 0))
        return s.getsockname()[1]


def test_an_unreachable_scheduler_is_exit_3_at_once_and_leaves_no_file(tmp_path, capsys):
    # before: reported after the 20 s timeout, exit 2, and an empty result file left behind
    pytest.importorskip("distributed")
    out_file = tmp_path / "study.h5"
    address = f"tcp://127.0.0.1:{_closed_port()}"
    code, out, err = run_cli(["study", SWEEP_CASE, "--scheduler", address, "--output",
                              out_file, "--quiet"], capsys)
    assert code == 3, err
    assert err.count("\n") == 1 and err.startswith("partload: cluster: cannot reach"), err
    assert "connection was refused" in err
    assert list(tmp_path.iterdir()) == []


@pytest.fixture
def scheduler_process():
    """A Dask scheduler and one worker in processes of their own: ``(address, scheduler
    process)``; both are ended after the test."""
    import subprocess
    import sys

    distributed = pytest.importorskip("distributed")
    port = _closed_port()
    address = f"tcp://127.0.0.1:{port}"
    quiet = {"stdout": subprocess.DEVNULL, "stderr": subprocess.DEVNULL}
    sched = subprocess.Popen([sys.executable, "-m", "distributed.cli.dask_scheduler", "--host",
                              "127.0.0.1", "--port", str(port), "--dashboard-address", ":0",
                              "--no-show"], **quiet)
    worker = subprocess.Popen([sys.executable, "-m", "distributed.cli.dask_worker", address,
                               "--nthreads", "1", "--nworkers", "1", "--no-dashboard",
                               "--no-nanny"], **quiet)
    try:
        with distributed.Client(address, timeout=60) as client:
            client.wait_for_workers(1, timeout=120)
        yield address, sched
    finally:
        for p in (worker, sched):
            if p.poll() is None:
                p.kill()
            p.wait()


def test_a_scheduler_lost_mid_study_is_one_line_and_exit_3(tmp_path, capfd, monkeypatch,
                                                           scheduler_process):
    # before: screens of the distributed library's traceback and exit 1 (a point failure)
    import h5py
    import partload.study.progress as progress

    address, sched = scheduler_process
    chunks = []
    add = progress.StudySummary.add

    def add_then_kill(self, res, labels):  # the hook: the scheduler dies after chunk one
        add(self, res, labels)
        chunks.append(res.stop - res.start)
        if sched.poll() is None:
            sched.kill()
            sched.wait()

    monkeypatch.setattr(progress.StudySummary, "add", add_then_kill)
    out_file = tmp_path / "study.h5"
    # capfd: the distributed library's log handlers write to the process's stderr itself
    code, out, err = run_cli(["study", SWEEP_CASE, "--scheduler", address, "--output",
                              out_file, "--quiet"], capfd)
    assert code == 3, err
    assert err.count("\n") == 1 and "Traceback" not in err, err
    assert err.startswith(f"partload: cluster: lost the Dask scheduler at {address}")
    assert "--resume" in err
    # the chunk finished before the loss is in the file, and only it
    with h5py.File(out_file, "r") as f:
        assert int(f["points/done"][:].sum()) == sum(chunks) > 0


# --- item: the right cause named ----------------------------------------------------

@pytest.mark.parametrize("operation", ['throttle_flow = "840 kg/s"', 'output = "900 MW"'])
def test_far_beyond_valves_wide_open_names_that_limit(tmp_path, capsys, operation):
    # before: "the condensate pump cannot feed the deaerator" (a consequence); the
    # maximum of the demo unit, 296.42 kg/s and 340.58 MW at its 175 bar, is the
    # regression value printed for requests just beyond it
    path = write_case(tmp_path, f"[operation]\n{operation}\n")
    code, out, err = run_cli(["point", path], capsys)
    assert code == 1 and out == "", err
    assert "above the highest allowed 175.00 bar" in err, err
    assert "maximum throttle flow 296.42 kg/s, maximum output 340.58 MW" in err
    assert "deaerator" not in err


def test_an_exhaust_pressure_above_the_lp_heaters_names_the_exhaust_pressure(tmp_path, capsys):
    # 5 bar is above the design crossover (LP inlet) pressure, 4.6 bar. Hand reasoning:
    # condensate saturated at 5 bar is about 152 degC (steam tables: T_sat(5 bar) =
    # 151.8 degC); LP1's shell, bled at a node pushed up to about 4.9 bar, gives less,
    # so LP1 would cool the water and its bleed would be negative
    path = write_case(tmp_path, '[operation]\nexhaust_pressure = "5 bar"\n')
    code, _, err = run_cli(["point", path], capsys)
    assert code == 1, err
    assert "heater 'LP1' would cool the water" in err, err
    assert "exhaust pressure 5 bar (design 0.068 bar)" in err
    # T_sat(5 bar) = 151.83 degC (IAPWS-IF97 saturation table, from memory); the
    # condensate pump's compression adds a few tenths of a kelvin at most
    t_in = float(re.search(r"it arrives at ([0-9.]+) degC", err).group(1))
    assert 151.83 <= t_in <= 152.5, err
    assert "would need a negative bleed" not in err


@pytest.mark.parametrize("where, body, key_text, words", [
    # before: an IF97 range message in Pa (p = 2.2064e+07), exit 1
    ("operation", '[operation]\nexhaust_pressure = "200 bar"\n', "[operation] exhaust_pressure:",
     ["'200 bar' is not below the highest allowed throttle pressure", "175 bar"]),
    ("operation", '[operation]\nexhaust_pressure = "2900 psia"\n',
     "[operation] exhaust_pressure:", ["2538 psia"]),
    # held throttle pressure 120 bar: an exhaust at 130 bar is above it
    ("operation", '[operation]\npressure_mode = "fixed"\nthrottle_pressure = "120 bar"\n'
                  'throttle_flow = "150 kg/s"\nexhaust_pressure = "130 bar"\n',
     "[operation] exhaust_pressure:", ["the held throttle pressure, 120 bar"]),
    # a sweep value is checked the same way
    ("sweep", '[sweep]\nexhaust_pressure = ["7 kPa", "200 bar"]\n', "[sweep] exhaust_pressure:",
     ["'200 bar' is not below the highest allowed throttle pressure"]),
])
def test_an_exhaust_pressure_above_the_throttle_is_an_input_mistake(tmp_path, capsys, where,
                                                                   body, key_text, words):
    path = write_case(tmp_path, body)
    code, out, err = run_cli(["point", path], capsys)
    assert code == 2 and out == "", err
    assert key_text in err and "IF97" not in err and "e+07" not in err, err
    for w in words:
        assert w in err, err


def test_a_control_valve_setting_above_its_inlet_names_the_setting(tmp_path, capsys):
    # before: "no steam reaches node 'process'"; steam reaches 'process' from 'hp_x'
    # (design 30 bar) through stage group HP2, so the valve cannot hold 35 bar there
    path = write_case(tmp_path, '[control_valves."LP control valve"]\npressure = "35 bar"\n',
                      model=INDUSTRIAL)
    code, out, err = run_cli(["point", path], capsys)
    assert code == 2 and out == "", err
    assert "[control_valves.LP control valve] pressure:" in err, err
    assert "'35 bar' is not below the design pressure of node 'hp_x', 30 bar" in err
    assert "stage group 'HP2'" in err and "no steam reaches" not in err
    with pytest.raises(InputError) as info:
        load_case(path)
    assert (info.value.table, info.value.key) == ("control_valves.LP control valve", "pressure")


def test_a_usual_control_valve_setting_still_solves(tmp_path, capsys):
    # a setting near design (13.01 bar) is accepted and held (regression of the check)
    path = write_case(tmp_path, '[control_valves."LP control valve"]\npressure = "14 bar"\n',
                      model=INDUSTRIAL)
    code, out, err = run_cli(["point", path, "--json"], capsys)
    assert code == 0, err
    d = json.loads(out)
    cv = d["control_valves"][0]
    assert cv["wide_open"] == 0


def test_a_setting_just_below_the_limit_that_cannot_be_met_is_named(tmp_path, capsys):
    # 29 bar passes the input check (below hp_x's 30 bar) but leaves no steam state at
    # full flow; the failure names the case's setting next to the solver's finding
    path = write_case(tmp_path, '[control_valves."LP control valve"]\npressure = "29 bar"\n',
                      model=INDUSTRIAL)
    code, _, err = run_cli(["point", path], capsys)
    assert code == 1, err
    assert "control valve 'LP control valve' holds 'process' at 29 bar, set by the case" in err


def test_the_python_api_checks_the_scheduler_before_creating_the_file(tmp_path):
    import partload
    from partload.errors import ClusterError

    with pytest.raises(InputError, match="no port"):
        partload.run_study(SWEEP_CASE, tmp_path / "a.h5", scheduler="tcp://127.0.0.1")
    pytest.importorskip("distributed")
    with pytest.raises(ClusterError, match="connection was refused"):
        partload.run_study(SWEEP_CASE, tmp_path / "b.h5",
                           scheduler=f"tcp://127.0.0.1:{_closed_port()}")
    assert list(tmp_path.iterdir()) == []
