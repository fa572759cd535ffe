"""Correction curves to files: CSV for spreadsheets, HDF5 for notebooks.

The curves (:class:`partload.study.corrections.CorrectionCurves`, used by its
attributes only: the store sits below the study) are written whole or not at
all (:func:`~partload.store.export.write_whole`).

CSV: one row per condition, value and load: ``condition``, ``value`` and its
``unit`` (display units of the chosen system; a heater's name for
``heaters_out``), ``reference`` (1 on the reference value), ``load [%]`` (of
design throttle flow), ``throttle_flow``, ``output``, ``heat_rate``,
``output_factor``, ``heat_rate_factor``, ``output_change``, ``note`` (why a
point was not solved), six significant figures.

HDF5 (root attribute ``format`` = ``"partload-corrections"``,
``format_version`` 1, ``model_name``, ``case_name``, ``basis``,
``design_throttle_flow`` [kg/s], ``reference_throttle_pressure`` [Pa]):
``/load`` (loads, fractions of design throttle flow; a dimension scale); one
group per condition with ``value`` (its values, SI or heater names; the
group's dimension scale), ``reference`` (the reference value) and, each
(load, value): ``output`` [W], ``heat_rate`` [J/J], ``output_factor``,
``heat_rate_factor`` [-], ``output_change`` [W], ``note`` (text).  Every
number states ``units`` (CF spelling) and ``unit``; it opens in xarray
(``xarray.open_dataset(path, group="exhaust_pressure", engine="h5netcdf")``).
"""

from __future__ import annotations

import csv
from pathlib import Path

import h5py
import numpy as np

from ..units import to_display_unit
from .dimensions import cf_unit
from .export import CSV_DIGITS, csv_text, write_whole
from .format import TEXT

__all__ = ["CORRECTIONS_FORMAT", "write_corrections_csv", "write_corrections_hdf5",
           "display_values"]

CORRECTIONS_FORMAT = "partload-corrections"


def display_values(curve, units: str = "metric") -> tuple[list, str]:
    """A curve's values in display units, and that unit [-]."""
    if curve.name == "heaters_out":
        return list(curve.values), ""
    if curve.unit == "-":
        return [float(v) for v in curve.values], "x design"
    v, u = to_display_unit(np.asarray(curve.values, dtype=float), curve.unit, None, units,
                           curve.name)
    return v.tolist(), u


def write_corrections_csv(cc, path: str | Path, units: str = "metric") -> Path:
    """Write correction curves ``cc`` as one CSV file at ``path`` [-] in the display
    units ``units`` (``"metric"`` or ``"us"``) [-]."""
    path = Path(path)
    flow_unit_values = to_display_unit(np.array([1.0]), "kg/s", None, units)[1]
    _, p_unit = to_display_unit(0.0, "W", None, units)
    _, hr_unit = to_display_unit(0.0, "J/J", None, units)
    header = ["condition", "value", "unit", "reference", "load [%]",
              f"throttle_flow [{flow_unit_values}]", f"output [{p_unit}]",
              f"heat_rate [{hr_unit}]", "output_factor [-]", "heat_rate_factor [-]",
              f"output_change [{p_unit}]", "note"]
    rows = []
    for c in cc.curves:
        values, unit = display_values(c, units)
        out = to_display_unit(c.output, "W", None, units)[0]
        hr = to_display_unit(c.heat_rate, "J/J", None, units)[0]
        change = to_display_unit(c.output_change, "W", None, units)[0]
        fp, fhr = c.output_factor, c.heat_rate_factor
        for i, load in enumerate(cc.loads):
            flow = to_display_unit(load * cc.design_throttle_flow, "kg/s", None, units)[0]
            for j, v in enumerate(values):
                nums = csv_text(np.array([100.0 * load, float(flow), out[i, j], hr[i, j],
                                      fp[i, j], fhr[i, j], change[i, j]]), CSV_DIGITS)
                value = v if isinstance(v, str) else csv_text(np.array([v]), CSV_DIGITS)[0]
                rows.append([c.name, value, unit, int(j == c.reference_index), *nums,
                             c.failed.get((i, j), "")])

    def write(tmp: Path) -> None:
        with open(tmp, "w", newline="", encoding="utf-8") as fh:
            w = csv.writer(fh)
            w.writerow(header)
            w.writerows(rows)

    return write_whole(path, write)


def _number(g, name, data, unit, text):
    ds = g.create_dataset(name, data=data, track_times=False)
    ds.attrs["unit"] = unit
    ds.attrs["units"] = cf_unit(unit)
    ds.attrs["long_name"] = text
    ds.attrs["description"] = text
    return ds


def write_corrections_hdf5(cc, path: str | Path) -> Path:
    """Write correction curves ``cc`` as an HDF5 file at ``path`` [-] (layout in
    the module docstring), SI units."""
    path = Path(path)

    def write(tmp: Path) -> None:
        with h5py.File(tmp, "w", track_order=True) as f:
            a = f.attrs
            a["format"] = CORRECTIONS_FORMAT
            a["format_version"] = 1
            a["model_name"] = cc.model_name
            a["case_name"] = cc.case_name
            a["basis"] = cc.basis
            a["design_throttle_flow"] = cc.design_throttle_flow
            a["reference_throttle_pressure"] = cc.reference_throttle_pressure
            load = _number(f, "load", np.asarray(cc.loads, dtype=float), "-",
                           "load: throttle flow as a fraction of design")
            load.make_scale("load")
            for c in cc.curves:
                g = f.create_group(c.name, track_order=True)
                g.attrs["description"] = c.description
                g["load"] = load
                if c.name == "heaters_out":
                    value = g.create_dataset("value", data=np.array(c.values, dtype=object),
                                             dtype=TEXT, track_times=False)
                    value.attrs["long_name"] = "heater out of service (none: reference)"
                    g.create_dataset("reference", data=c.reference, dtype=TEXT)
                else:
                    value = _number(g, "value", np.asarray(c.values, dtype=float), c.unit,
                                    c.description)
                    _number(g, "reference", float(c.reference), c.unit, "reference value")
                value.make_scale("value")
                notes = [[c.failed.get((i, j), "") for j in range(len(c.values))]
                         for i in range(len(cc.loads))]
                arrays = [
                    _number(g, "output", c.output, "W", "generator output"),
                    _number(g, "heat_rate", c.heat_rate, "J/J",
                            "heat rate: heat added over generator output (J/J; x 3600 = "
                            "kJ/kWh)"),
                    _number(g, "output_factor", c.output_factor, "-",
                            "output over output at the reference value"),
                    _number(g, "heat_rate_factor", c.heat_rate_factor, "-",
                            "heat rate over heat rate at the reference value"),
                    _number(g, "output_change", c.output_change, "W",
                            "output minus output at the reference value"),
                    g.create_dataset("note", data=np.array(notes, dtype=object), dtype=TEXT),
                ]
                arrays[-1].attrs["long_name"] = "why the point was not solved (empty: solved)"
                for ds in arrays:
                    ds.dims[0].attach_scale(load)
                    ds.dims[1].attach_scale(value)

    return write_whole(path, write)
