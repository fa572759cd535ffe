"""Result files for notebooks and spreadsheets: named dimensions in xarray, CF
units that pint reads, CSV rounded to meaningful digits, US customary units."""

from __future__ import annotations

import csv
import math
import shutil

import h5py
import numpy as np
import partload
import pytest
from partload.cli.main import main
from partload.store import read_study
from partload.store import writer as writer_module
from partload.units import DISPLAY, DISPLAY_US, to_display_unit

xr = pytest.importorskip("xarray")
pytest.importorskip("h5netcdf")
pd = pytest.importorskip("pandas")

SWEEP = """model = "{model}"
name = "nb"
[operation]
pressure_mode = "sliding"
[sweep]
throttle_flow_fraction = {{from = 0.5, to = 1.0, points = 3}}
heater_out = ["none", "HP8"]
"""


@pytest.fixture(scope="module")
def sweep(tmp_path_factory):
    from pathlib import Path

    folder = tmp_path_factory.mktemp("nb")
    model = (Path(__file__).resolve().parents[1] / "models" / "demo_reheat_unit.toml")
    case = folder / "nb.toml"
    case.write_text(SWEEP.format(model=model.as_posix()))
    out = folder / "nb.h5"
    assert main(["study", str(case), "--workers", "1", "-o", str(out), "-q"]) == 0
    return case, out


def _groups(path):
    with h5py.File(path, "r") as f:
        return [None] + [g for g in f if isinstance(f[g], h5py.Group)]


def test_every_group_opens_in_xarray_with_named_dimensions(sweep):
    _, out = sweep
    groups = _groups(out)
    assert "nodes" in groups and "stage_groups" in groups and "heaters" in groups
    for g in groups:
        with xr.open_dataset(out, group=g, engine="h5netcdf") as ds:
            assert not [d for d in ds.dims if str(d).startswith("phony_dim")], g
            for name, var in ds.data_vars.items():
                if var.ndim == 0 or var.sizes.get("point") is None:
                    continue  # texts of the files; item lists (names, inlet, outlet)
                assert var.dims[0] == "point", (g, name)
    with xr.open_dataset(out, group="nodes", engine="h5netcdf") as ds:
        st = read_study(out)
        assert ds["pressure"].dims == ("point", "nodes")
        assert list(ds["nodes"].values) == st.names["nodes"]
        assert list(ds["point"].values) == list(range(6))
        # the same numbers as the reader's (h5py) view
        np.testing.assert_array_equal(ds["pressure"].values, st.data["nodes/pressure"])
        assert ds["pressure"].sel(nodes="crossover").shape == (6,)
    with xr.open_dataset(out, group="totals", engine="h5netcdf") as ds:
        hr = ds["heat_rate"]
        assert hr.attrs["units"] == "J/J" and "heat rate" in hr.attrs["long_name"]
        assert "3600" in hr.attrs["long_name"]  # says how to get kJ/kWh


def test_units_attributes_round_trip_through_pint(sweep):
    """Every numeric dataset's CF ``units`` parses in pint (default registry) and
    converting its values to the stored SI unit and back changes nothing; the
    display tables agree with pint's own conversions."""
    import pint

    ureg = pint.UnitRegistry()
    _, out = sweep
    seen = set()

    def check(name, obj):
        if not isinstance(obj, h5py.Dataset) or obj.dtype.kind not in "iuf":
            return
        units = obj.attrs["units"]
        units = units.decode() if isinstance(units, bytes) else units
        q = ureg.Quantity(1.0, units)  # parses
        seen.add(units)
        back = ureg.Quantity(q.to_base_units().magnitude, q.to_base_units().units).to(units)
        assert math.isclose(back.magnitude, 1.0, rel_tol=1e-12), name

    with h5py.File(out, "r") as f:
        f.visititems(check)
    assert {"Pa", "K", "J/kg", "J/(kg K)", "W", "J/J", "kg/s", "1"} <= seen
    # every display rule, metric and US, equals pint's conversion (pint's Btu is
    # 1055.056 J, the International Table value to seven digits: hence 1e-6)
    ureg.define("psia = psi")
    for table in (DISPLAY, DISPLAY_US):
        for si, (unit, factor, offset) in table.items():
            for x in (300.0, 1000.0):
                want = ureg.Quantity(x, si.replace("^", "**")).to(unit.replace("^", "**"))
                assert math.isclose(x * factor + offset, want.magnitude, rel_tol=1e-6), unit


def test_us_units_against_hand_conversions():
    """NIST SP 811 (2008), Appendix B: lb = 0.45359237 kg, Btu_IT = 1055.05585262 J,
    psi = 6894.757293168 Pa, inHg (conventional) = 3386.389 Pa, degF = 1.8 K - 459.67;
    each value below worked by hand from those factors."""
    def us(v, unit, display=None, quantity=None):
        return to_display_unit(v, unit, display, "us", quantity)

    assert us(811.15, "K") == (pytest.approx(1000.4), "degF")  # 538 degC
    assert us(166e5, "Pa") == (pytest.approx(2407.6264, rel=1e-7), "psia")
    assert us(8000.0 / 3600.0, "J/J") == (pytest.approx(7582.5370, rel=1e-7), "Btu/kWh")
    assert us(100.0, "kg/s") == (pytest.approx(793.66414, rel=1e-7), "klb/h")
    assert us(3400e3, "J/kg") == (pytest.approx(1461.7369, rel=1e-7), "Btu/lb")
    assert us(5000.0, "Pa", quantity="exhaust_pressure") == (
        pytest.approx(1.4764990, rel=1e-7), "inHg")
    assert us(5.0, "K", display="K") == (pytest.approx(9.0), "delta_degF")  # a TTD
    assert us(2e5, "Pa", quantity="pressure_drop") == (pytest.approx(29.007548, rel=1e-7),
                                                        "psi")
    # metric: a back pressure in kPa, other pressures in bar (unchanged)
    assert to_display_unit(5000.0, "Pa", quantity="exhaust_pressure") == (
        pytest.approx(5.0), "kPa")
    assert to_display_unit(5000.0, "Pa", quantity="pressure") == (pytest.approx(0.05), "bar")


def _significant(text: str) -> int:
    digits = text.lstrip("-").split("e")[0].replace(".", "").lstrip("0")
    return len(digits.rstrip("0")) if "." not in text.split("e")[0] else len(digits)


def test_csv_is_rounded_to_six_digits_and_back_pressure_in_kpa(sweep, tmp_path):
    _, out = sweep
    st = read_study(out)
    files = partload.to_dataframe  # the API exists (lazy import)
    assert callable(files)
    assert main(["export", str(out), "-o", str(tmp_path)]) == 0
    with open(tmp_path / "nb_points.csv", newline="") as fh:
        rows = list(csv.DictReader(fh))
    for row in rows:
        for key, text in row.items():
            if key in ("label", "message", "caution messages", "caution codes", "error"):
                continue
            try:
                float(text)
            except ValueError:
                continue
            assert _significant(text) <= 6, (key, text)
    # the exhaust pressure asked is in kPa (design 6.8 kPa of the demo unit: its model file)
    assert float(rows[0]["input exhaust_pressure [kPa]"]) == pytest.approx(6.8)
    # 538 degC written 538, not 537.999999999 (the demo unit's design throttle temperature)
    assert rows[0]["throttle_temperature [degC]"] == "538"
    # the values are the file's to six digits (rounding, not another number)
    hr = st.total("heat_rate") * 3600.0
    for i, row in enumerate(rows):
        assert float(row["heat_rate [kJ/kWh]"]) == pytest.approx(hr[i], rel=5e-6)
    with open(tmp_path / "nb_nodes.csv", newline="") as fh:
        head = next(csv.reader(fh))
    assert "pressure condenser [kPa]" in head and "pressure crossover [bar]" in head
    # US customary
    assert main(["export", str(out), "-o", str(tmp_path / "us"), "--units", "us"]) == 0
    with open(tmp_path / "us" / "nb_points.csv", newline="") as fh:
        rows_us = list(csv.DictReader(fh))
    assert float(rows_us[0]["input exhaust_pressure [inHg]"]) == pytest.approx(
        6800.0 / 3386.389, rel=5e-6)  # NIST SP 811 inHg, hand conversion
    assert float(rows_us[0]["heat_rate [Btu/kWh]"]) == pytest.approx(
        hr[0] / 1.05505585262, rel=5e-6)
    assert float(rows_us[0]["throttle_temperature [degF]"]) == pytest.approx(1000.4)


def test_api_dataset_and_dataframe(sweep):
    _, out = sweep
    st = read_study(out)
    ds = partload.open_dataset(out, "stage_groups")
    assert ds["power"].dims == ("point", "stage_groups")
    assert list(ds["label"].values) == st.labels
    assert ds["power"].attrs["units"] == "W"
    np.testing.assert_array_equal(ds["power"].values, st.data["stage_groups/power"])
    us = partload.open_dataset(out, "totals", units="us")
    assert us["heat_rate"].attrs["units"] == "Btu/kWh"
    np.testing.assert_allclose(us["heat_rate"].values,
                               st.total("heat_rate") * 3.6e6 / 1055.05585262, rtol=1e-12)
    df = partload.to_dataframe(out, "totals")
    assert len(df) == 6 and df.attrs["units"]["generator_output"] == "W"
    np.testing.assert_array_equal(df["generator_output"].values, st.total("generator_output"))
    nodes = partload.to_dataframe(out, "nodes", units="metric", solved_only=True)
    assert df.index.name == "point" and nodes.attrs["units"]["pressure crossover"] == "bar"
    with pytest.raises(partload.InputError, match="no group 'nope'"):
        partload.open_dataset(out, "nope")
    with pytest.raises(partload.InputError, match="units must be"):
        partload.to_dataframe(out, units="imperial")


def test_a_format_2_file_still_reads(sweep, tmp_path, monkeypatch):
    """A file without the dimension scales and with format 2's root attribute
    names (as partload wrote them before) reads, exports and opens in the API."""
    case, _ = sweep

    def format_2(f, n):
        for k in ("model", "case"):
            f.attrs[f"{k}_file"] = f.attrs[f"{k}_path"]
            del f.attrs[f"{k}_path"]
        f.attrs["format_version"] = 2

    monkeypatch.setattr(writer_module, "add_dimensions", format_2)
    out = tmp_path / "v2.h5"
    assert main(["study", str(case), "--workers", "1", "-o", str(out), "-q"]) == 0
    with h5py.File(out, "r") as f:
        assert "point" not in f and f.attrs["format_version"] == 2
    st = read_study(out)
    assert st.ok.all() and "model_path" in st.attrs
    assert main(["export", str(out), "-o", str(tmp_path / "csv")]) == 0
    assert partload.open_dataset(out, "nodes")["pressure"].dims == ("point", "nodes")
    copy = tmp_path / "copy.h5"
    shutil.copy(out, copy)
    assert read_study(copy).n_points == 6


def test_point_and_check_in_us_units(capsys):
    """``--units us`` on the tables and JSON of a point; the values are the metric
    ones converted with the NIST SP 811 factors (hand conversion in the asserts)."""
    import json
    from pathlib import Path

    case = Path(__file__).resolve().parents[1] / "cases" / "reheat_part_load.toml"
    assert main(["point", str(case), "--json"]) == 0
    si = json.loads(capsys.readouterr().out)
    assert main(["point", str(case), "--json", "--units", "us"]) == 0
    us = json.loads(capsys.readouterr().out)
    assert us["units"]["totals"]["heat_rate"] == "Btu/kWh"
    assert us["units"]["nodes"]["pressure"] == "psia"
    assert us["units"]["throttle_valve"]["pressure_drop"] == "psi"
    assert us["units"]["heaters"]["ttd"] == "delta_degF"
    assert us["totals"]["heat_rate"] == pytest.approx(si["totals"]["heat_rate"] / 1.05505585262)
    assert us["totals"]["throttle_flow"] == pytest.approx(
        si["totals"]["throttle_flow"] * 3.6 / 0.45359237)  # kg/s -> klb/h
    assert us["totals"]["throttle_pressure"] == pytest.approx(
        si["totals"]["throttle_pressure"] * 1e5 / 6894.757293168)  # bar -> psia
    assert main(["point", str(case), "--units", "us"]) == 0
    text = capsys.readouterr().out
    assert "[degF]" in text and "Btu/kWh" in text and "[bar]" not in text
    model = Path(__file__).resolve().parents[1] / "models" / "demo_reheat_unit.toml"
    assert main(["check", str(model), "--units", "us"]) == 0
    text = capsys.readouterr().out
    # the demo unit's design throttle: 166 bar, 538 degC (its model file) by hand
    # with NIST SP 811 factors: 2407.63 psia, 1000.4 degF
    assert "throttle: 2407.63 psia, 1000.4 degF" in text
    assert "Btu/kWh" in text and "[delta_degF]" in text
