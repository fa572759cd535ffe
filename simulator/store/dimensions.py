"""Named dimensions, coordinates and CF unit attributes of result files (format 3).

A result file is plain HDF5; this module adds what netCDF-aware readers
(xarray through h5netcdf, ncdump, Panoply) need to see it as labelled arrays:

* HDF5 dimension scales (the HDF5 Dimension Scales specification, which
  netCDF-4 builds on): ``/point`` numbers the points ``0 .. n-1`` and is
  linked (an HDF5 hard link: the same dataset, stored once) into every group
  whose datasets have one row a point, so each group opened alone has its
  ``point`` coordinate; each result group has one more scale named after the
  group (``/nodes/nodes``, ``/stage_groups/stage_groups``, ``/heaters/heaters``,
  ...) holding its item names; ``/points/series_labels`` is the scale of the
  series.  Every per-point dataset has its dimensions attached, so
  ``xarray.open_dataset(path, group="nodes", engine="h5netcdf")`` gives
  ``pressure(point, nodes)`` with both coordinates.
* ``units`` in the spelling of the CF conventions (UDUNITS; pint reads it
  too): the stored SI unit, ``"1"`` for a dimensionless number; ``long_name``
  the dataset's description.  ``unit`` (format 2's attribute) is kept.

Version 2 files have none of this; they are still read.
"""

from __future__ import annotations

import h5py
import numpy as np

from .format import NAME_LISTS, TEXT, attr_value, is_scale

__all__ = ["add_dimensions", "cf_unit", "POINT", "item_dimension"]

POINT = "point"  # the name of the points' dimension and of its coordinate
# groups without an item dimension: one row a point, nothing else
_POINT_ONLY = ("points", "inputs", "solver", "totals")


def cf_unit(unit: str) -> str:
    """The CF spelling of a stored unit: ``"-"`` (and no unit) is ``"1"``; the
    others (``"Pa"``, ``"J/(kg K)"``, ``"m^3/kg"``, ``"J/J"``) are already
    UDUNITS spellings that pint reads as well [-]."""
    return "1" if unit in ("", "-") else unit


def item_dimension(group: str) -> str:
    """The name of the item dimension of result group ``group`` [-]: the group's name."""
    return group


def _attach(ds: h5py.Dataset, axis: int, scale: h5py.Dataset) -> None:
    ds.dims[axis].attach_scale(scale)


def add_dimensions(f: h5py.File, n: int) -> None:
    """Make the scales, attach them to every dataset, and write ``units`` and
    ``long_name`` (a file being created, whose structure is otherwise complete).

    Parameters
    ----------
    f : the open file [-]
    n : the number of points [-]
    """
    point = f.create_dataset(POINT, data=np.arange(n, dtype=np.int64), track_times=False)
    point.make_scale(POINT)
    point.attrs["long_name"] = "point number (the row of every per-point dataset)"
    point.attrs["units"] = "1"
    for gname, g in list(f.items()):
        if not isinstance(g, h5py.Group):
            continue
        items = None
        if gname not in _POINT_ONLY and "names" in g:
            dim = item_dimension(gname)
            names = list(g["names"].asstr()[:])
            if dim in g:  # a dataset of the group already has the name: a bug
                raise ValueError(f"/{gname}/{dim} exists; cannot name a dimension so")
            items = g.create_dataset(dim, data=np.array(names, dtype=object), dtype=TEXT,
                                     track_times=False)
            items.make_scale(dim)
            items.attrs["long_name"] = f"names of the {gname.replace('_', ' ')}"
        if gname == "points" and "series_labels" in g:
            g["series_labels"].make_scale("series_labels")
        per_point = False
        for dname, ds in list(g.items()):
            if not isinstance(ds, h5py.Dataset) or is_scale(ds):
                continue
            if gname == "paths" or (dname in NAME_LISTS and gname not in _POINT_ONLY):
                if items is not None and ds.ndim == 1:
                    _attach(ds, 0, items)
                continue
            if ds.ndim >= 1 and ds.shape[0] == n:
                per_point = True
                _attach(ds, 0, point)
                if ds.ndim == 2 and items is not None:
                    _attach(ds, 1, items)
        if per_point:
            g[POINT] = point  # a hard link: the group's own coordinate, stored once

    def units(name, obj):
        if not isinstance(obj, h5py.Dataset) or is_scale(obj):
            return
        if obj.dtype.kind in "iuf" and "unit" in obj.attrs:
            obj.attrs["units"] = cf_unit(attr_value(obj.attrs["unit"]))
        if "description" in obj.attrs:
            text = attr_value(obj.attrs["description"])
            if attr_value(obj.attrs.get("unit", "")) in ("J/J", "kg/J"):  # say which rate
                text = f"{name.rsplit('/', 1)[-1].replace('_', ' ')}: {text}"
            obj.attrs["long_name"] = text

    f.visititems(units)
