"""Broken model and case files: every mistake is named by file, table and key, exit code 2.

Each broken file is built from a demo file by text substitution and written to
``tmp_path``.  For each, the command line is run in-process and must exit with
code 2, print nothing on stdout, print no traceback, and name the file, the
table and the key; the loader is also called directly, and one of the problems
it reports must carry exactly that table and key.  A few run as a real process
to prove that no traceback reaches the user (and that ``--debug`` shows one).
"""

from __future__ import annotations

import subprocess
import sys
from pathlib import Path

import pytest
from partload.cli.main import main
from partload.errors import InputError
from partload.plant.case import load_case
from partload.plant.model import load_model

ROOT = Path(__file__).resolve().parent.parent
REHEAT = ROOT / "models/demo_reheat_unit.toml"
INDUSTRIAL = ROOT / "models/demo_industrial_unit.toml"

# the [generator] table of the reheat demo, removed whole in one case
GENERATOR = ('[generator]\nrating = "350 MW"\nmechanical_loss = "1.0 MW"\nfixed_loss = "1.2 MW"\n'
             'load_loss = "2.8 MW"\n')


def broken(text: str, subs: list[tuple[str, str]]) -> str:
    """Apply text substitutions; each old text must occur (the first one is replaced)."""
    for old, new in subs:
        assert old in text, f"fixture text not found: {old!r}"
        text = text.replace(old, new, 1)
    return text


def problems_of(exc: InputError) -> list[InputError]:
    return list(getattr(exc, "problems", [exc]))


def named(exc: InputError, table: str | tuple | None, key: str | None) -> bool:
    tables = table if isinstance(table, tuple) else (table,)
    return any(p.table in tables and p.key == key for p in problems_of(exc))


def location(table: str | None, key: str | None) -> str:
    """How the message writes the place: ``[table] key:``."""
    parts = ([f"[{table}]"] if table else []) + ([key] if key else [])
    return " ".join(parts) + ":"


# (id, model file, substitutions, table, key, words the message must contain)
# The table may be a tuple when more than one component can be named (a loop).
MODEL_CASES = [
    # --- typos: unknown keys and tables, with the closest valid name
    ("typo-key", REHEAT, [("efficiency = 0.84", "efficency = 0.84")],
     "stage_group 'HP1'", "efficency", "did you mean 'efficiency'?"),
    ("typo-table", REHEAT, [("[about]", "[abuot]")], None, "abuot", "did you mean 'about'?"),
    ("typo-array-table", REHEAT, [("[[pump]]", "[[pumpp]]")], None, "pumpp",
     "did you mean 'pump'?"),
    ("typo-choice", REHEAT, [('loss_curve = "lp_last_stage"', 'loss_curve = "lp_last"')],
     "stage_group 'LPA3'", "loss_curve", "did you mean 'lp_last_stage'?"),
    ("typo-heater-type", REHEAT, [('type = "deaerator"', 'type = "deaerater"')],
     "heater 'deaerator'", "type", "did you mean 'deaerator'?"),
    ("typo-node-name", REHEAT, [('from = "crossover"\nto = "lpb_x1"',
                                 'from = "crossoverr"\nto = "lpb_x1"')],
     "stage_group 'LPB1'", "from", "'crossoverr' has no design pressure"),
    ("limits-typo", REHEAT, [("", "[limits]\nmax_exhaust_moistur = '12 %'\n\n")],
     "limits", "max_exhaust_moistur", "did you mean 'max_exhaust_moisture'?"),
    # --- missing keys and tables
    ("missing-key", REHEAT, [("efficiency = 0.88\n", "")], "stage_group 'HP2'", "efficiency",
     "missing required key"),
    ("missing-table", REHEAT, [(GENERATOR, "")], "generator", None, "missing required table"),
    ("not-toml", REHEAT, [('[throttle]\nnode = "throttle"', '[throttle\nnode = "throttle"')],
     None, None, "not valid TOML"),
    # --- wrong dimension or unit
    ("pressure-as-temperature", REHEAT, [('pressure = "166 bar"', 'pressure = "538 degC"')],
     "throttle", "pressure", "which is a temperature"),
    ("power-as-pressure", REHEAT, [('rating = "350 MW"', 'rating = "350 bar"')],
     "generator", "rating", "which is a pressure"),
    ("energy-for-power", REHEAT, [('rating = "350 MW"', 'rating = "350 MWh"')],
     "generator", "rating", "'MWh' is not a unit of power"),
    ("length-for-area", REHEAT, [('annulus_area = "8.0 m^2"', 'annulus_area = "8.0 m"')],
     "stage_group 'LPA3'", "annulus_area", "which is a length"),
    ("bare-number", REHEAT, [('condenser = "6.8 kPa"', "condenser = 6.8")],
     "nodes", "condenser", "needs a unit"),
    ("limits-wrong-dimension", REHEAT, [("", "[limits]\nmax_exhaust_temperature = '80 bar'\n\n")],
     "limits", "max_exhaust_temperature", "which is a pressure"),
    ("gauge-without-atmosphere", INDUSTRIAL,
     [('atmospheric_pressure = "1.013 bar"\n', "")], "nodes", "process", "gauge pressure"),
    # --- out of range
    ("above-if97-temperature", REHEAT, [('temperature = "538 degC"', 'temperature = "900 degC"')],
     "throttle", "temperature", "800 degC (the validity range of IAPWS-IF97)"),
    ("above-if97-pressure", REHEAT, [('pressure = "166 bar"', 'pressure = "1200 bar"')],
     "throttle", "pressure", "1000 bar"),
    ("below-triple-point", REHEAT, [('condenser = "6.8 kPa"', 'condenser = "0.3 kPa"')],
     "nodes", "condenser", "triple point"),
    ("negative-flow", REHEAT, [('flow = "280 kg/s"', 'flow = "-280 kg/s"')],
     "throttle", "flow", "must be positive"),
    ("negative-bleed", REHEAT, [('design_flow = "24.535 kg/s"', 'design_flow = "-3 kg/s"')],
     "extraction 'E8'", "design_flow", "below the allowed minimum"),
    ("efficiency-above-one", REHEAT, [("efficiency = 0.84", "efficiency = 1.2")],
     "stage_group 'HP1'", "efficiency", "must be <= 1.0"),
    ("efficiency-in-percent", REHEAT, [("efficiency = 0.84", "efficiency = 84")],
     "stage_group 'HP1'", "efficiency", "write 0.84 or '84 %'"),
    ("efficiency-zero", REHEAT, [("efficiency = 0.84", "efficiency = 0")],
     "stage_group 'HP1'", "efficiency", "must be > 0.0"),
    ("not-finite", REHEAT, [('to = "hp_inlet"', 'to = "hp_inlet"\nwide_open_drop = nan')],
     "throttle_valve", "wide_open_drop", "finite"),
    ("pressure-rises-along-group", REHEAT, [('hp_mid = "72 bar"', 'hp_mid = "30 bar"')],
     "stage_group 'HP2'", "to", "design pressure must fall"),
    ("bleeds-exceed-flow", REHEAT, [('design_flow = "24.535 kg/s"',
                                     'design_flow = "300 kg/s"')],
     "extraction 'E8'", "design_flow", "exceed the 280 kg/s arriving there"),
    ("max-pressure-below-design", REHEAT, [('max_pressure = "175 bar"',
                                            'max_pressure = "150 bar"')],
     "throttle", "max_pressure", "below the design throttle pressure"),
    ("throttle-water", REHEAT, [('temperature = "538 degC"', 'temperature = "300 degC"')],
     "throttle", "temperature", "saturation temperature 350.3 degC"),
    ("reheat-water", REHEAT, [('outlet_temperature = "538 degC"',
                               'outlet_temperature = "200 degC"')],
     "reheater 'reheater'", "outlet_temperature", "saturation temperature 245.8 degC"),
    ("losses-above-rating", REHEAT, [('mechanical_loss = "1.0 MW"',
                                      'mechanical_loss = "400 MW"')],
     "generator", "mechanical_loss", "add up to the rating"),
    ("negative-exhaust-loss", REHEAT, [('loss = ["120 kJ/kg"', 'loss = ["-120 kJ/kg"')],
     "exhaust.loss_curves.lp_last_stage", "loss", "must not be negative"),
    ("annulus-off-curve", REHEAT, [('annulus_area = "8.0 m^2"', 'annulus_area = "8.0 cm^2"')],
     "stage_group 'LPA3'", "annulus_area", "outside the loss curve"),
    ("negative-drop", REHEAT, [('boiler_pressure_drop = "22 bar"',
                                'boiler_pressure_drop = "-22 bar"')],
     "feedwater", "boiler_pressure_drop", "is negative"),
    ("correction-ratio", INDUSTRIAL, [("efficiency_ratio = [0.70", "efficiency_ratio = [1.70")],
     "stage_group 'LP1'.correction_table", "efficiency_ratio", "exceeds 1"),
    ("limits-out-of-range", REHEAT, [("", "[limits]\nmax_exhaust_moisture = '70 %'\n\n")],
     "limits", "max_exhaust_moisture", "must be <= 0.5"),
    # --- graph mistakes
    ("cycle", REHEAT, [('from = "lpb_x1"\nto = "condenser"', 'from = "lpb_x1"\nto = "crossover"')],
     ("stage_group 'LPB1'", "stage_group 'LPB2'"), "to", "form a loop"),
    ("unreachable-node", REHEAT, [('lpa_x1 = "1.6 bar"', 'lpa_x1 = "1.6 bar"\norphan = "1 bar"')],
     "nodes", "orphan", "cannot be reached from the throttle"),
    ("no-exhaust", REHEAT, [('nodes = ["condenser"]', "nodes = []")],
     "exhaust", "nodes", "no exhaust node"),
    ("branch-never-merges", REHEAT,
     [('from = "lpb_x1"\nto = "condenser"', 'from = "lpb_x1"\nto = "lpb_x2"'),
      ('lpb_x1 = "0.75 bar"', 'lpb_x1 = "0.75 bar"\nlpb_x2 = "0.07 bar"')],
     "nodes", "lpb_x2", "does a branch not merge again"),
    ("heater-on-missing-extraction", REHEAT, [('extraction = "E1"', 'extraction = "E9"')],
     "heater 'LP1'", "extraction", "'E9' does not exist"),
    ("extraction-on-missing-node", REHEAT, [('node = "hp_mid"', 'node = "hp_midd"')],
     "extraction 'E8'", "node", "'hp_midd' does not exist"),
    ("drain-to-itself", REHEAT, [('drain_to = "HP7"', 'drain_to = "HP8"')],
     "heater 'HP8'", "drain_to", "cannot drain to itself"),
    ("name-twice", REHEAT, [('name = "HP2"', 'name = "HP1"')],
     "stage_group 'HP1'", "name", "used twice"),
    ("train-unknown-item", REHEAT, [('"feed pump", "HP6"', '"feed pmp", "HP6"')],
     "feedwater", "train", "'feed pmp' (position 7) is neither a heater nor a pump"),
]

# (id, model file, case text after the model line, table, key, words in the message)
CASE_CASES = [
    ("typo-operation-key", REHEAT, "[operation]\nthrottle_flow_fracton = 0.6\n",
     "operation", "throttle_flow_fracton", "did you mean 'throttle_flow_fraction'?"),
    ("typo-governing", REHEAT, '[operation]\nthrottle_flow = "200 kg/s"\ngoverning = "throttl"\n',
     "operation", "governing", "did you mean 'throttle'?"),
    ("wrong-dimension", REHEAT, '[operation]\nexhaust_pressure = "538 degC"\n',
     "operation", "exhaust_pressure", "which is a temperature"),
    ("negative-output", REHEAT, '[operation]\noutput = "-10 MW"\n',
     "operation", "output", "must be positive"),
    ("fraction-out-of-range", REHEAT, "[operation]\nthrottle_flow_fraction = 3\n",
     "operation", "throttle_flow_fraction", "must be <= 2.0"),
    ("two-loads", REHEAT, '[operation]\nthrottle_flow = "280 kg/s"\noutput = "200 MW"\n',
     "operation", "output", "give only one of"),
    ("held-pressure-sliding", REHEAT,
     '[operation]\nthrottle_flow = "200 kg/s"\nthrottle_pressure = "160 bar"\n',
     "operation", "throttle_pressure", "needs pressure_mode = 'fixed'"),
    ("held-pressure-above-max", REHEAT,
     '[operation]\nthrottle_flow = "200 kg/s"\ngoverning = "throttle"\n'
     'throttle_pressure = "200 bar"\n',
     "operation", "throttle_pressure", "175 bar (the model's highest allowed"),
    ("held-pressure-water", REHEAT,
     '[operation]\nthrottle_flow = "200 kg/s"\ngoverning = "throttle"\n'
     'throttle_pressure = "166 bar"\nthrottle_temperature = "340 degC"\n',
     "operation", "throttle_temperature", "saturation temperature 350.3 degC"),
    ("exhaust-below-triple-point", REHEAT, '[operation]\nexhaust_pressure = "0.3 kPa"\n',
     "operation", "exhaust_pressure", "triple point"),
    ("no-reheater", INDUSTRIAL, '[operation]\nreheat_temperature = "500 degC"\n',
     "operation", "reheat_temperature", "no reheater"),
    ("unknown-heater", REHEAT, "[heaters.HP9]\nin_service = false\n",
     "heaters.HP9", None, "did you mean 'HP8'?"),
    ("not-a-boolean", REHEAT, '[heaters.HP8]\nin_service = "no"\n',
     "heaters.HP8", "in_service", "expected true or false"),
    ("deaerator-out", REHEAT, "[heaters.deaerator]\nin_service = false\n",
     "heaters.deaerator", "in_service", "cannot be taken out of service"),
    ("flow-on-heater-bleed", REHEAT, '[extractions.E8]\ncontrol = "flow"\nflow = "5 kg/s"\n',
     "extractions.E8", "control", "feeds heater 'HP8'"),
    ("typo-extraction", INDUSTRIAL, '[extractions.process_stem]\ncontrol = "closed"\n',
     "extractions.process_stem", None, "did you mean 'process_steam'?"),
]


@pytest.mark.parametrize("name, model, subs, table, key, words", MODEL_CASES,
                         ids=[c[0] for c in MODEL_CASES])
def test_broken_model_file(tmp_path, capsys, name, model, subs, table, key, words):
    path = tmp_path / f"{name}.toml"
    path.write_text(broken(model.read_text(), subs))
    assert main(["check", str(path)]) == 2
    out, err = capsys.readouterr()
    assert out == ""
    assert "Traceback" not in err
    assert err.startswith("partload: error in input: ")
    assert str(path) in err
    tables = table if isinstance(table, tuple) else (table,)
    assert any(location(t, key) in err for t in tables), err
    assert words in err, err
    with pytest.raises(InputError) as info:
        load_model(path)
    assert named(info.value, table, key), [(p.table, p.key) for p in problems_of(info.value)]


@pytest.mark.parametrize("name, model, body, table, key, words", CASE_CASES,
                         ids=[c[0] for c in CASE_CASES])
def test_broken_case_file(tmp_path, capsys, name, model, body, table, key, words):
    path = tmp_path / f"{name}.toml"
    path.write_text(f'model = "{model.as_posix()}"\n{body}')
    assert main(["point", str(path)]) == 2
    out, err = capsys.readouterr()
    assert out == ""
    assert "Traceback" not in err
    assert str(path) in err and location(table, key) in err, err
    assert words in err, err
    with pytest.raises(InputError) as info:
        load_case(path)
    assert named(info.value, table, key), [(p.table, p.key) for p in problems_of(info.value)]


def test_case_naming_a_missing_model(tmp_path, capsys):
    path = tmp_path / "lost.toml"
    path.write_text('model = "nowhere/unit.toml"\n[operation]\nthrottle_flow_fraction = 0.5\n')
    assert main(["point", str(path)]) == 2
    err = capsys.readouterr().err
    assert f"{path} model: model file 'nowhere/unit.toml' not found" in err


def test_at_least_thirty_broken_files():
    # issue 5 asks for a table of at least 30 broken model and case files
    assert len(MODEL_CASES) + len(CASE_CASES) >= 30
    assert len({c[0] for c in MODEL_CASES + CASE_CASES}) == len(MODEL_CASES) + len(CASE_CASES)


def test_all_problems_of_a_file_at_once(tmp_path, capsys):
    # a new user's first model file: a typo, a wrong unit and a node name misspelt
    path = tmp_path / "first_try.toml"
    path.write_text(broken(REHEAT.read_text(), [
        ("efficiency = 0.84", "efficency = 0.84"),
        ('rating = "350 MW"', 'rating = "350 bar"'),
        ('node = "hp_mid"', 'node = "hp_midd"'),
    ]))
    assert main(["check", str(path)]) == 2
    err = capsys.readouterr().err
    for where in ("[stage_group 'HP1'] efficency:", "[generator] rating:"):
        assert where in err
    # the graph is checked only once the tables read cleanly, so the bad node waits
    assert err.count("\n  - ") == 3  # missing 'efficiency', unknown 'efficency', 'rating'
    # one screen: at most 24 lines of 100 columns
    assert sum(1 + len(line) // 100 for line in err.splitlines()) <= 24


def test_impossible_demand_is_one_plain_message(tmp_path, capsys):
    path = tmp_path / "too_much.toml"
    path.write_text(f'model = "{REHEAT.as_posix()}"\n[operation]\noutput = "400 MW"\n')
    assert main(["point", str(path)]) == 1
    out, err = capsys.readouterr()
    assert out == ""
    assert err.count("\n") == 1 and "Traceback" not in err
    # what was asked, the limit hit and the most the machine can do
    assert "400.00 MW" in err and "175.00 bar" in err and "maximum output" in err


def _run(*args: str) -> subprocess.CompletedProcess:
    return subprocess.run([sys.executable, "-m", "partload.cli", *args], capture_output=True,
                          text=True, timeout=120, cwd=ROOT)


def test_process_prints_no_traceback_for_a_broken_model(tmp_path):
    path = tmp_path / "typo.toml"
    path.write_text(broken(REHEAT.read_text(), [('rating = "350 MW"', 'rating = "350 bar"')]))
    proc = _run("check", str(path))
    assert proc.returncode == 2
    assert proc.stdout == ""
    assert "Traceback" not in proc.stderr
    assert proc.stderr.strip().splitlines() == [
        f"partload: error in input: {path} [generator] rating: expected a power such as "
        f"'350 MW', got '350 bar', which is a pressure"]
    debug = _run("--debug", "check", str(path))
    assert debug.returncode == 2
    assert "Traceback" in debug.stderr and "InputError" in debug.stderr


def test_process_prints_no_traceback_for_a_broken_case(tmp_path):
    path = tmp_path / "typo_case.toml"
    path.write_text(f'model = "{REHEAT.as_posix()}"\n[operation]\ngoverning = "slidin"\n')
    proc = _run("point", str(path))
    assert proc.returncode == 2 and proc.stdout == ""
    assert "Traceback" not in proc.stderr
    assert "[operation] governing: 'slidin' is not one of" in proc.stderr


def test_former_governing_key_still_reads_and_says_how_to_write_it(tmp_path):
    # 'governing' was one key for two things; it now maps onto pressure_mode with a note
    old = tmp_path / "old.toml"
    old.write_text(f'model = "{REHEAT.as_posix()}"\n[operation]\nthrottle_flow_fraction = 0.7\n'
                   'governing = "throttle"\nthrottle_pressure = "150 bar"\n')
    new = tmp_path / "new.toml"
    new.write_text(f'model = "{REHEAT.as_posix()}"\n[operation]\nthrottle_flow_fraction = 0.7\n'
                   'pressure_mode = "fixed"\nthrottle_pressure = "150 bar"\n')
    a, b = load_case(old), load_case(new)
    assert a.conditions == b.conditions
    assert a.conditions.pressure_mode == "fixed" and a.conditions.valve_mode == "throttle"
    assert len(a.notes) == 1 and "pressure_mode = 'fixed'" in a.notes[0]
    assert b.notes == []
    both = tmp_path / "both.toml"
    both.write_text(f'model = "{REHEAT.as_posix()}"\n[operation]\n'
                    'governing = "throttle"\npressure_mode = "fixed"\n')
    with pytest.raises(InputError, match="pressure_mode only"):
        load_case(both)


def test_closest_name_hint():
    from partload.inputs.reading import closest

    # hand check: 'efficency' differs from 'efficiency' by one letter (ratio 0.95 >= 0.6)
    assert closest("efficency", ("name", "efficiency", "alpha")) == "; did you mean 'efficiency'?"
    # nothing alike: no hint (difflib ratio of 'xyz' and 'HP8' is 0)
    assert closest("xyz", {"HP8": 1, "LP1": 2}) == ""
    assert closest("HP9", {"HP8": 1, "LP1": 2}) == "; did you mean 'HP8'?"
    assert closest("HP9", []) == ""
