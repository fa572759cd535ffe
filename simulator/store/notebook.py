"""Study results for notebooks: an xarray Dataset or a pandas DataFrame of one group.

Both are built from :func:`~partload.store.reader.read_study` (so files of
every version read, checked first), not by opening the file through netCDF:
the file itself opens in xarray too (format 3 has named dimensions, see
:mod:`partload.store.dimensions`), this adds the point labels and series as
coordinates and a choice of units.  xarray and pandas are optional
(``pip install 'partload[notebook]'``) and imported here only.
"""

from __future__ import annotations

from pathlib import Path

import numpy as np

from ..errors import InputError
from ..units import SYSTEMS, to_display_unit
from .dimensions import cf_unit, item_dimension
from .reader import StudyData, read_study

__all__ = ["open_dataset", "to_dataframe", "groups_of"]


def groups_of(st: StudyData) -> list[str]:
    """The groups of a study that hold per-point data [-]: ``inputs``, ``solver``,
    ``totals``, the result groups and ``cautions``."""
    out = ["inputs"]
    for key in st.data:
        g = key.split("/")[0]
        if g not in out:
            out.append(g)
    return out


def _need(module: str):
    import importlib

    try:
        return importlib.import_module(module)
    except ImportError:
        raise InputError(f"{module} is needed for this; install it with "
                         f"pip install 'partload[notebook]'", key=module) from None


def _columns(st: StudyData, group: str, units: str):
    """``{name: (values, unit, description)}`` of a group, converted to ``units``."""
    if units not in ("si", *SYSTEMS):
        raise InputError(f"units must be 'si' or one of {', '.join(SYSTEMS)}, not {units!r}",
                         key="units")
    groups = groups_of(st)
    if group not in groups:
        raise InputError(f"{st.path} has no group {group!r}; it has {', '.join(groups)}",
                         file=str(st.path), key="group")
    if group == "inputs":
        keys = [(name, f"inputs/{name}", st.inputs[name]) for name in st.inputs]
    else:
        keys = [(k.split("/", 1)[1], k, st.data[k]) for k in st.data
                if k.startswith(group + "/")]
    out = {}
    for name, key, values in keys:
        unit = st.units.get(key, "")
        values = np.asarray(values)
        if units != "si" and values.dtype.kind == "f" and unit:
            values, unit = to_display_unit(values, unit, st.display.get(key), system=units,
                                           quantity=name)
        out[name] = (values, unit, st.descriptions.get(key, ""))
    return out


def open_dataset(path: str | Path, group: str = "totals", units: str = "si"):
    """One group of a study result as an :class:`xarray.Dataset`.

    Dimensions ``point`` and, for a result group, its items (named after the
    group: ``nodes``, ``stage_groups``, ``heaters``, ...); coordinates ``point``,
    the items, ``label`` and ``series`` (each point's inputs in words and its
    series); each variable has ``units`` (CF spelling) and ``long_name``.

    Parameters
    ----------
    path : the study result file [-]
    group : ``"totals"`` (default), ``"inputs"``, ``"solver"``, ``"nodes"``, a
        kind's result group or ``"cautions"`` [-]
    units : ``"si"`` (as stored, default), ``"metric"`` or ``"us"`` (the
        display units of tables and CSV) [-]
    """
    xr = _need("xarray")
    st = read_study(path)
    cols = _columns(st, group, units)
    items = st.names.get(group)
    dim = item_dimension(group)
    data_vars = {}
    for name, (values, unit, desc) in cols.items():
        dims = ("point", dim) if values.ndim == 2 else ("point",)
        attrs = {"long_name": desc} if desc else {}
        if values.dtype.kind in "iuf":
            attrs["units"] = cf_unit(unit)
        data_vars[name] = (dims, values, attrs)
    coords = {"point": np.arange(st.n_points),
              "label": ("point", np.array(st.labels, dtype=object)),
              "series": ("point", np.asarray(st.series))}
    if items is not None and any(v.ndim == 2 for v, _, _ in cols.values()):
        coords[dim] = np.array(items, dtype=object)
    attrs = {k: v for k, v in st.attrs.items() if isinstance(v, (str, int, float))}
    attrs["group"] = group
    attrs["units_system"] = units
    return xr.Dataset(data_vars, coords=coords, attrs=attrs)


def to_dataframe(path: str | Path, group: str = "totals", units: str = "si",
                 solved_only: bool = False):
    """One group of a study result as a :class:`pandas.DataFrame`, a row a point.

    Columns: ``label``, ``series`` and the group's datasets; a dataset with one
    column an item (nodes, stage groups, ...) gives one column an item named
    ``"<quantity> <item>"`` (as in the CSV export).  ``df.attrs["units"]`` maps
    each column to its unit.

    Parameters
    ----------
    path : the study result file [-]
    group : as for :func:`open_dataset` [-]
    units : ``"si"`` (default), ``"metric"`` or ``"us"`` [-]
    solved_only : keep only the points that converged [-]
    """
    pd = _need("pandas")
    st = read_study(path)
    cols = _columns(st, group, units)
    items = st.names.get(group, [])
    table = {"label": st.labels, "series": np.asarray(st.series)}
    unit_of = {}
    for name, (values, unit, _) in cols.items():
        if values.ndim == 2:
            for j, item in enumerate(items):
                table[f"{name} {item}"] = values[:, j]
                unit_of[f"{name} {item}"] = unit
        else:
            table[name] = values
            unit_of[name] = unit
    df = pd.DataFrame(table, index=pd.RangeIndex(st.n_points, name="point"))
    if solved_only:
        df = df[st.ok]
    df.attrs["units"] = unit_of
    df.attrs["units_system"] = units
    return df
