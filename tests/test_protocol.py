"""The component protocol: a new kind of plant component is one module and one
registry line, and the model reader, calibration, the equations, case settings,
study axes, point results, JSON and the HDF5 layout pick it up with no other code.

The kind below is written here, in the test, exactly as a contributor would
write it in ``simulator/components/``: a steam strainer (a screen in a steam
line, common in plants ahead of the turbine and in crossover lines) whose
pressure drop is a fixed fraction of its inlet pressure.  The fraction law is a
convention of its own (no source needed): the checks are identities.
"""

from __future__ import annotations

import copy
import csv
import json
from dataclasses import dataclass
from pathlib import Path
from typing import ClassVar

import h5py
import pytest
from helpers import demo_data, node_mass_imbalance
from partload.cli.main import main
from partload.components import (
    KINDS,
    Column,
    SteamPathComponent,
    Tunable,
    register,
    unregister,
)
from partload.components.base import Setting
from partload.components.reading import edge_names
from partload.errors import InputError
from partload.plant.case import Conditions, load_case
from partload.plant.model import build_model
from partload.solve.point import solve_point
from partload.store.layout import result_layout
from partload.study import plan_study


@dataclass
class Strainer(SteamPathComponent):
    """A steam strainer: isenthalpic, drop = fraction x inlet pressure."""

    table: ClassVar[str] = "strainer"
    title: ClassVar[str] = "strainer"
    results: ClassVar[str] = "strainers"
    settings_table: ClassVar[str] = "strainers"
    settings: ClassVar[tuple] = (
        Setting("drop_fraction", "fraction", "pressure drop over inlet pressure", lo=0.0,
                hi=0.5),
    )
    tunables: ClassVar[tuple] = (
        Tunable("drop_fraction", "fraction", "-", "pressure drop over inlet pressure", 0.0,
                0.5),
    )
    columns: ClassVar[tuple] = (
        Column("flow", "kg/s", "steam flow through the strainer"),
        Column("pressure_drop", "Pa", "pressure drop across the strainer"),
    )

    name: str
    inlet: str
    outlet: str
    fraction: float = 0.0

    @classmethod
    def read(cls, reader, ctx):
        name, a, b = edge_names(reader, cls.table)
        reader.finish()
        return None if None in (name, a, b) else cls(name, a, b)

    def calibrate(self, m, p_in, h_in, p_out, steam, model):
        self.fraction = (p_in - p_out) / p_in
        return h_in

    def evaluate(self, march, i, j, m_net):
        f = march.setting(self, "drop_fraction", self.fraction)
        return march.h[i], f * march.p[i], 0.0, None

    def result_row(self, record, m, p_in, h_in, p_out, h_out):
        return (m, p_in - p_out)


@pytest.fixture
def strainer_kind():
    register(Strainer)  # the one registry line
    yield Strainer
    unregister("strainer")


def _model_data():
    """The demo reheat unit with a strainer between the IP exhaust and the crossover."""
    data = copy.deepcopy(demo_data())
    data["nodes"]["ip_exhaust"] = "4.75 bar"
    for g in data["stage_group"]:
        if g["to"] == "crossover" and g["from"] == "ip_x2":
            g["to"] = "ip_exhaust"
    data["strainer"] = [{"name": "S1", "from": "ip_exhaust", "to": "crossover"}]
    return data


def test_a_new_kind_needs_one_module_and_one_registry_line(strainer_kind, tmp_path):
    model = build_model(_model_data(), file="strainer.toml")
    assert [c.name for c in model.of_kind(Strainer)] == ["S1"]
    # calibration: the design drop of 4.75 -> 4.6 bar is 0.15/4.75 of the inlet pressure
    assert model.of_kind(Strainer)[0].fraction == pytest.approx(0.15 / 4.75, rel=1e-12)
    # identity: at design inputs the design pressures come back, the strainer's included
    r = solve_point(model, Conditions(throttle_flow=model.throttle.flow))
    for i, n in enumerate(r.node_names):
        assert r.node_p[i] == pytest.approx(model.design_pressure[n], rel=1e-8), n
    # its results: a table of its declared columns; the flow is the IP3 group's
    row = r.table("strainers")["S1"]
    assert row["flow"] == pytest.approx(r.group("IP3")["flow"], rel=1e-12)
    assert row["pressure_drop"] == pytest.approx(0.15e5, rel=1e-8)
    # mass balance at every node, the new one included (an identity of the march)
    for node, err in node_mass_imbalance(model, r).items():
        assert abs(err) <= 1e-9 * model.throttle.flow, node
    # the HDF5 layout has its datasets, with the declared units
    fields = {f.path: f for f in result_layout(model).fields()}
    assert fields["strainers/pressure_drop"].unit == "Pa"
    assert fields["strainers/flow"].width == 1


def _toml(data: dict) -> str:
    """A small TOML writer for the model data of these tests (strings, numbers,
    lists of tables, nested tables)."""
    lines = []

    def value(v):
        if isinstance(v, str):
            return json.dumps(v)
        if isinstance(v, bool):
            return "true" if v else "false"
        if isinstance(v, list):
            return "[" + ", ".join(value(x) for x in v) + "]"
        return repr(v)

    def table(prefix, d):
        scalars = {k: v for k, v in d.items()
                   if not isinstance(v, dict) and not (isinstance(v, list) and v
                                                       and isinstance(v[0], dict))}
        if prefix:
            lines.append(f"[{prefix}]")
        for k, v in scalars.items():
            lines.append(f"{json.dumps(k)} = {value(v)}")
        for k, v in d.items():
            key = f"{prefix}.{json.dumps(k)}" if prefix else json.dumps(k)
            if isinstance(v, dict):
                table(key, v)
            elif isinstance(v, list) and v and isinstance(v[0], dict):
                for item in v:
                    lines.append(f"[[{key}]]")
                    for k2, v2 in item.items():
                        if isinstance(v2, dict):
                            inner = ", ".join(f"{json.dumps(a)} = {value(b)}"
                                              for a, b in v2.items())
                            lines.append(f"{json.dumps(k2)} = {{{inner}}}")
                        else:
                            lines.append(f"{json.dumps(k2)} = {value(v2)}")

    table("", data)
    return "\n".join(lines) + "\n"


def test_new_kind_through_files(strainer_kind, tmp_path, capsys):
    model_file = tmp_path / "strainer_unit.toml"
    model_file.write_text(_toml(_model_data()))
    # a case setting of the new kind, read from its declaration
    case_file = tmp_path / "case.toml"
    case_file.write_text(f'model = "{model_file.as_posix()}"\n[operation]\n'
                         'throttle_flow_fraction = 0.8\n'
                         '[strainers.S1]\ndrop_fraction = "5 %"\n')
    case = load_case(case_file)
    r = solve_point(case.model, case.conditions)
    p_in = r.node("ip_exhaust")["p"]
    assert r.table("strainers")["S1"]["pressure_drop"] == pytest.approx(0.05 * p_in, rel=1e-9)
    # JSON of the point carries its table and units
    assert main(["point", str(case_file), "--json"]) == 0
    d = json.loads(capsys.readouterr().out)
    assert d["units"]["strainers"]["pressure_drop"] == "bar"
    assert d["strainers"][0]["name"] == "S1" and d["strainers"][0]["from"] == "ip_exhaust"
    # a study axis of its setting, with no study code for it; each point equals the
    # same setting written in a case file (an independent path)
    sweep_file = tmp_path / "sweep.toml"
    sweep_file.write_text(f'model = "{model_file.as_posix()}"\n[operation]\n'
                          'throttle_flow_fraction = 0.8\n'
                          '[sweep.strainers.S1]\ndrop_fraction = ["2 %", "8 %"]\n')
    plan = plan_study(load_case(sweep_file))
    assert plan.axes == ["strainers.S1.drop_fraction"]
    for cond, frac in zip(plan.conditions, (0.02, 0.08)):
        swept = solve_point(plan.case.model, cond)
        case_file.write_text(f'model = "{model_file.as_posix()}"\n[operation]\n'
                             'throttle_flow_fraction = 0.8\n'
                             f'[strainers.S1]\ndrop_fraction = {frac}\n')
        direct = load_case(case_file)
        ref = solve_point(direct.model, direct.conditions)
        assert swept.node("crossover")["p"] == pytest.approx(ref.node("crossover")["p"],
                                                             rel=1e-9)
    # the study writes the new kind's datasets
    out = tmp_path / "sweep.h5"
    assert main(["study", str(sweep_file), "--workers", "1", "-o", str(out), "-q"]) == 0
    with h5py.File(out, "r") as f:
        assert list(f["strainers/names"].asstr()[:]) == ["S1"]
        drops = f["strainers/pressure_drop"][:, 0]
        p_in = f["nodes/pressure"][:, list(f["nodes/names"].asstr()[:]).index("ip_exhaust")]
        assert drops == pytest.approx([0.02 * p_in[0], 0.08 * p_in[1]], rel=1e-9)
    # and the CSV export has a file for it, in display units
    assert main(["export", str(out), "--output", str(tmp_path / "csv")]) == 0
    with open(tmp_path / "csv" / "sweep_strainers.csv") as fh:
        rows = list(csv.DictReader(fh))
    # six significant figures in display units (store.export.CSV_DIGITS)
    assert [float(r["pressure_drop S1 [bar]"]) for r in rows] == pytest.approx(drops / 1e5,
                                                                              rel=5e-6)


def test_a_new_kind_reports_its_mistakes_like_the_others(strainer_kind):
    data = _model_data()
    data["strainer"][0]["drop_fractoin"] = 0.1
    with pytest.raises(InputError) as err:
        build_model(data, file="strainer.toml")
    assert err.value.table == "strainer 'S1'" and err.value.key == "drop_fractoin"
    # and a name already taken by another kind is refused at registration
    with pytest.raises(ValueError):
        register(Strainer)
    assert "strainer" in KINDS


def test_every_declared_tunable_names_a_calibrated_number(reheat_model, industrial_model):
    # a declaration that names no attribute would let a later fit change nothing
    seen = set()
    for model in (reheat_model, industrial_model):
        for c in model.components:
            for t in type(c).tunables:
                value = getattr(c, t.attribute)
                assert value is None or isinstance(value, float), (c.name, t.name)
                assert value is None or t.lo <= value <= t.hi, (c.name, t.name, value)
                seen.add((type(c).table, t.name))
    assert ("stage_group", "efficiency") in seen and ("heater", "ttd") in seen


def test_an_input_written_two_ways_is_refused(tmp_path):
    # extraction_flow.NAME and extractions.NAME.flow set the same input: one study
    # cannot vary it twice (it would keep one and label the points with the other)
    case = tmp_path / "twice.toml"
    model = Path(__file__).resolve().parent.parent / "models" / "demo_industrial_unit.toml"
    case.write_text(f'model = "{model.as_posix()}"\n'
                    '[sweep.extraction_flow]\nprocess_steam = ["10 kg/s", "20 kg/s"]\n'
                    '[sweep.extractions.process_steam]\nflow = ["5 kg/s", "15 kg/s"]\n')
    with pytest.raises(InputError, match="varied twice"):
        plan_study(load_case(case))
    # written the second way alone it is the same axis as the first way
    case.write_text(f'model = "{model.as_posix()}"\n'
                    '[sweep.extractions.process_steam]\nflow = ["5 kg/s", "15 kg/s"]\n')
    plan = plan_study(load_case(case))
    assert plan.axes == ["extraction_flow.process_steam"]
    assert [dict(c.extraction_control)["process_steam"] for c in plan.conditions] == [
        ("flow", 5.0), ("flow", 15.0)]


def test_an_empty_settings_table_is_a_mistake(tmp_path):
    case = tmp_path / "empty.toml"
    model = Path(__file__).resolve().parent.parent / "models" / "demo_industrial_unit.toml"
    case.write_text(f'model = "{model.as_posix()}"\n[control_valves."LP control valve"]\n')
    with pytest.raises(InputError) as err:
        load_case(case)
    assert err.value.table == 'control_valves.LP control valve'
    assert "pressure" in str(err.value)
