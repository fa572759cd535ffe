"""Correction curves (zero at reference, the back-pressure identity, files) and the
shape-preserving exhaust-loss interpolation (slope continuity)."""

from __future__ import annotations

import csv
import json

import h5py
import numpy as np
import partload
import pytest
from helpers import MODELS, demo_data
from partload.cli.main import main
from partload.physics.exhaust import exhaust_loss, exhaust_loss_pchip, pchip_pieces
from partload.plant.model import build_model

# the demo reheat unit's loss curve (models/demo_reheat_unit.toml) [m/s], [J/kg]
V = [50.0, 80.0, 120.0, 160.0, 200.0, 250.0, 300.0, 350.0]
L = [120e3, 60e3, 28e3, 20e3, 22e3, 32e3, 50e3, 75e3]


@pytest.fixture(scope="module")
def curves(reheat_model):
    return partload.correction_curves(reheat_model, loads=(0.5, 0.9))


def test_zero_correction_at_the_reference(reheat_model, curves):
    """At the reference value every curve holds the same point: the unit at the
    held design throttle pressure and its design conditions (solved alone here),
    so every factor is 1 and every change 0 there, for every curve."""
    names = [c.name for c in curves.curves]
    assert names == ["throttle_pressure", "throttle_temperature", "reheat_temperature",
                     "reheater_pressure_drop", "exhaust_pressure", "heaters_out"]
    for i, load in enumerate(curves.loads):
        ref = partload.point(reheat_model, throttle_flow_fraction=load, pressure_mode="fixed")
        for c in curves.curves:
            k = c.reference_index
            assert c.output[i, k] == pytest.approx(ref.totals["generator_output"], rel=1e-9)
            assert c.heat_rate[i, k] == pytest.approx(ref.totals["heat_rate"], rel=1e-9)
            assert c.output_factor[i, k] == 1.0 and c.heat_rate_factor[i, k] == 1.0
            assert c.output_change[i, k] == 0.0
    # and away from it the corrections are not zero (hand reasoning: a hotter throttle
    # gives more output at the same flow, a higher back pressure less)
    t = curves.curve("throttle_temperature")
    assert t.output_factor[0, -1] > 1.0 > t.output_factor[0, 0]
    b = curves.curve("exhaust_pressure")
    assert (np.diff(b.output[0]) < 0).all()
    # the reheater's design drop is restored after its curve (as calibrated afresh)
    fresh = partload.load_model(MODELS / "demo_reheat_unit.toml")
    assert reheat_model.reheaters[0].dp_design == fresh.reheaters[0].dp_design


def test_back_pressure_correction_is_the_output_difference_of_two_points(reheat_model,
                                                                        curves):
    """Identity: the back-pressure correction at a value equals the output
    difference of two points solved on their own at that back pressure and at
    the reference one."""
    b = curves.curve("exhaust_pressure")
    for i, load in enumerate(curves.loads):
        for j in (0, 3, 8, 10):
            at = partload.point(reheat_model, throttle_flow_fraction=load,
                                pressure_mode="fixed", exhaust_pressure=b.values[j])
            ref = partload.point(reheat_model, throttle_flow_fraction=load,
                                 pressure_mode="fixed", exhaust_pressure=b.reference)
            diff = at.totals["generator_output"] - ref.totals["generator_output"]
            assert b.output_change[i, j] == pytest.approx(diff, rel=1e-8, abs=1e-3)
            assert b.heat_rate_factor[i, j] == pytest.approx(
                at.totals["heat_rate"] / ref.totals["heat_rate"], rel=1e-12)


def test_a_heater_out_curve_is_the_point_with_that_heater_out(reheat_model, curves):
    h = curves.curve("heaters_out")
    j = h.values.index("HP8")
    r = partload.point(reheat_model, throttle_flow_fraction=0.5, pressure_mode="fixed",
                       heaters_out=["HP8"])
    assert h.output[0, j] == pytest.approx(r.totals["generator_output"], rel=1e-9)


def test_pchip_loss_passes_the_points_with_a_continuous_slope():
    """Fritsch and Carlson's interpolant passes through every point of the curve
    and its slope is the same on both sides of each inner point; the linear one's
    is not (which is what makes kinks in correction curves)."""
    pieces = pchip_pieces(V, L)
    for v, loss in zip(V, L):
        assert exhaust_loss_pchip(v, V, pieces) == pytest.approx(loss, rel=1e-12)
    h = 1e-4  # [m/s]
    jumps_pchip, jumps_linear = [], []
    for v in V[1:-1]:
        for f, jumps in ((lambda x: exhaust_loss_pchip(x, V, pieces), jumps_pchip),
                         (lambda x: exhaust_loss(x, V, L), jumps_linear)):
            left = (f(v) - f(v - h)) / h
            right = (f(v + h) - f(v)) / h
            jumps.append(abs(right - left))
    assert max(jumps_pchip) < 1.0  # [J/kg per m/s]; slopes are ~100-2000
    assert min(jumps_linear) > 50.0
    # shape kept: monotone between points where the data are, no new minimum
    grid = np.linspace(V[0], V[-1], 3001)
    vals = np.array([exhaust_loss_pchip(x, V, pieces) for x in grid])
    assert vals.min() == pytest.approx(min(L), rel=1e-12)
    falling = grid <= 160.0
    assert (np.diff(vals[falling]) <= 1e-9).all() and (np.diff(vals[~falling]) >= -1e-9).all()
    # held at the end values outside the curve (as the linear interpolation)
    assert exhaust_loss_pchip(10.0, V, pieces) == L[0]
    assert exhaust_loss_pchip(500.0, V, pieces) == pytest.approx(L[-1], rel=1e-12)


def _pchip_model():
    data = demo_data()
    data["exhaust"]["loss_curves"]["lp_last_stage"]["interpolation"] = "pchip"
    return build_model(data, file="demo_reheat_unit-pchip")


def test_output_slope_is_continuous_across_the_loss_curve_points_with_pchip(reheat_model):
    """Output against back pressure on a fine grid (100 Pa steps): with the linear
    curve its slope jumps where an annulus velocity crosses a curve point, a
    change of slope many times those of the neighbouring steps (a kink); with
    PCHIP the slope is continuous, so each step's change of slope is close to
    its neighbours' (the second derivative may step at a curve point, but does
    not spike).  Measured: the largest ratio of a step's change of slope to the
    larger of its two neighbours' (regression values: 16 linear, 1.2 PCHIP)."""
    smooth = _pchip_model()
    grid = np.linspace(4e3, 12e3, 81)  # [Pa]

    def kink(model):
        out = np.array([partload.point(model, throttle_flow_fraction=0.9,
                                       exhaust_pressure=p).totals["generator_output"]
                        for p in grid])
        change = np.abs(np.diff(np.diff(out) / np.diff(grid)))
        return (change[1:-1] / np.maximum(change[:-2], change[2:])).max()

    assert kink(reheat_model) > 5.0
    assert kink(smooth) < 2.0


def test_the_interpolation_key_is_checked(tmp_path):
    data = demo_data()
    data["exhaust"]["loss_curves"]["lp_last_stage"]["interpolation"] = "spline"
    with pytest.raises(partload.InputError) as err:
        build_model(data, file="m.toml")
    assert "exhaust.loss_curves.lp_last_stage" in str(err.value)
    assert "interpolation" in str(err.value) and "pchip" in str(err.value)


def test_the_default_interpolation_stays_linear(reheat_model):
    """Recorded answers rely on it: a curve without the key is linear."""
    ex = [g.exhaust for g in reheat_model.groups if g.exhaust]
    assert ex and all(e.interpolation == "linear" and e.pieces is None for e in ex)
    assert _pchip_model().groups[-1].exhaust.interpolation == "pchip"


def test_corrections_command_tables_csv_hdf5(tmp_path, capsys):
    xr = pytest.importorskip("xarray")
    pytest.importorskip("h5netcdf")
    model = MODELS / "demo_reheat_unit.toml"
    csv_path, h5_path = tmp_path / "cc.csv", tmp_path / "cc.h5"
    assert main(["corrections", str(model), "--loads", "60,80", "--conditions",
                 "exhaust_pressure,heaters_out", "--csv", str(csv_path), "--hdf5",
                 str(h5_path), "--units", "us"]) == 0
    text = capsys.readouterr().out
    assert "Back pressure" in text and "[inHg]" in text and "dHR 60%" in text
    assert "PTC 6" in text
    with open(csv_path, newline="") as fh:
        rows = list(csv.DictReader(fh))
    # 11 back pressures and 1 + 7 heaters (the demo unit's closed heaters), 2 loads
    assert len(rows) == 2 * (11 + 8)
    assert {r["unit"] for r in rows if r["condition"] == "exhaust_pressure"} == {"inHg"}
    ref = [r for r in rows if r["reference"] == "1"]
    assert len(ref) == 4 and all(r["output_factor [-]"] == "1" for r in ref)
    with xr.open_dataset(h5_path, group="exhaust_pressure", engine="h5netcdf") as ds:
        assert ds["output"].dims == ("load", "value")
        assert not [d for d in ds.dims if str(d).startswith("phony_dim")]
        assert list(ds["load"].values) == [0.6, 0.8]
        assert ds["heat_rate"].attrs["units"] == "J/J"
    with h5py.File(h5_path, "r") as f:
        assert f.attrs["format"] == "partload-corrections"
        assert "heaters_out" in f
    assert main(["corrections", str(model), "--loads", "60", "--conditions",
                 "throttle_temperature", "--json"]) == 0
    d = json.loads(capsys.readouterr().out)
    assert d["units"]["heat_rate"] == "kJ/kWh"
    assert d["curves"]["throttle_temperature"]["output_factor"][0][2] == 1.0
    with pytest.raises(SystemExit) as exit_:  # argparse refuses it, naming the known ones
        main(["corrections", str(model), "--conditions", "nope"])
    assert exit_.value.code == 2
    assert "throttle_temperature" in capsys.readouterr().err
