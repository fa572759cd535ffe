"""The command line end to end on the demo files."""

from __future__ import annotations

import json
import re
import subprocess
import sys
from pathlib import Path

import pytest
from partload.cli.main import main
from partload.plant.model import load_model

ROOT = Path(__file__).resolve().parent.parent


def test_check_prints_constants_and_design_balance(capsys):
    assert main(["check", str(ROOT / "models/demo_reheat_unit.toml")]) == 0
    out = capsys.readouterr().out
    for text in ["Stage groups (constants from calibration)", "LPB2", "Design heat balance",
                 "heat rate", "closure"]:
        assert text in out


@pytest.mark.parametrize("name", ["demo_reheat_unit", "demo_industrial_unit"])
def test_check_states_the_heater_closures_once(capsys, name):
    # the closures belong to the closure report (with the given and closing bleeds);
    # the model's heater table no longer repeats them
    assert main(["check", str(ROOT / f"models/{name}.toml")]) == 0
    out = capsys.readouterr().out
    assert out.count("Heater balances at design") == 1
    # two lines name the closure: the report's heading and its column heads
    assert sum("closure" in line for line in out.splitlines()) == 2
    # and each heater has one row in it (its name, then its extraction, as printed)
    model = load_model(ROOT / f"models/{name}.toml")
    for h in model.heaters.values():
        rows = [line for line in out.splitlines()
                if re.match(rf"\s*{re.escape(h.name)}\s+{re.escape(h.extraction)}\s", line)]
        assert len(rows) == 1, (h.name, rows)


def test_point_json_round_trip(capsys):
    assert main(["point", str(ROOT / "cases/reheat_part_load.toml"), "--json"]) == 0
    d = json.loads(capsys.readouterr().out)
    assert d["converged"] is True
    assert d["units"]["totals"]["generator_output"] == "MW"
    assert d["units"]["nodes"]["pressure"] == "bar"
    t = d["totals"]
    assert t["throttle_flow"] == pytest.approx(0.6 * 280.0)
    # about 60 % of the 323 MW design output (common practice: output nearly
    # proportional to flow, the Willans line); a wide band, the value is tested elsewhere
    assert 150.0 < t["generator_output"] < 250.0
    assert {n["name"] for n in d["nodes"]} >= {"throttle", "condenser", "crossover"}
    assert len(d["heaters"]) == 8
    # heat rate in both unit systems: 1 kJ = 0.947817 Btu (International Table Btu)
    assert t["heat_rate_btu"] == pytest.approx(t["heat_rate"] * 0.947817, rel=1e-6)


def test_point_tables(capsys):
    assert main(["point", str(ROOT / "cases/reheat_top_heater_out.toml")]) == 0
    out = capsys.readouterr().out
    assert "OUT" in out and "Heaters" in out and "converged in" in out


def test_mistake_in_model_names_file_table_key(tmp_path, capsys):
    text = (ROOT / "models/demo_reheat_unit.toml").read_text()
    bad = tmp_path / "bad.toml"
    bad.write_text(text.replace('efficiency = 0.84', 'efficency = 0.84'))
    assert main(["check", str(bad)]) == 2
    err = capsys.readouterr().err
    assert "bad.toml" in err and "stage_group 'HP1'" in err and "efficency" in err
    assert "did you mean 'efficiency'" in err
    assert "Traceback" not in err


def test_impossible_demand_exit_code_and_message(tmp_path, capsys):
    case = tmp_path / "big.toml"
    case.write_text(f'model = "{ROOT / "models/demo_reheat_unit.toml"}"\n'
                    '[operation]\noutput = "500 MW"\n')
    assert main(["point", str(case)]) == 1
    err = capsys.readouterr().err
    assert "maximum output" in err and "500.00 MW" in err


def test_installed_command_runs():
    # the console script and python -m both reach the same entry point
    proc = subprocess.run([sys.executable, "-m", "partload.cli", "point",
                           str(ROOT / "cases/industrial_part_load.toml"), "--json"],
                          capture_output=True, text=True, timeout=120)
    assert proc.returncode == 0, proc.stderr
    assert json.loads(proc.stdout)["totals"]["makeup_flow"] == pytest.approx(25.0, rel=1e-6)


def test_wrong_kind_of_file_is_named(capsys):
    assert main(["check", str(ROOT / "cases/reheat_part_load.toml")]) == 2
    assert "this is a case file" in capsys.readouterr().err
    assert main(["point", str(ROOT / "models/demo_reheat_unit.toml")]) == 2
    assert "this is a model file" in capsys.readouterr().err


def test_bare_psi_is_refused_and_gauge_needs_the_atmosphere():
    from partload.errors import InputError
    from partload.units import Where, parse

    with pytest.raises(InputError, match="psia"):
        parse("2400 psi", "pressure", Where("m.toml", "nodes", "throttle"))
    # 100 psig at 1.01325 bar: 689,475.7 Pa + 101,325 Pa (1 psi = 6,894.757 Pa, NIST SP 811)
    assert parse("100 psig", "pressure", Where(), 101325.0) == pytest.approx(790800.7, rel=1e-7)
    with pytest.raises(InputError, match="atmospheric"):
        parse("100 psig", "pressure", Where("m.toml", "nodes", "x"))
