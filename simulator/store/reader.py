"""Reading study result files back: checked, whole, into memory.

:func:`open_result` opens a file for reading after checking that it is a
partload result of a format version this software reads (see
:mod:`partload.store.format`); :func:`read_study` reads the whole of it into
a :class:`StudyData` (SI units, as stored).  Reading takes no lock, so the
finished points of a study still running can be read.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from pathlib import Path

import h5py
import numpy as np

from ..errors import ResultFileError
from .format import (
    READ_ERRORS,
    attr_value,
    check_format,
    check_shapes,
    damaged,
    is_scale,
    open_hdf5,
)

__all__ = ["StudyData", "open_result", "read_study"]


def open_result(path: str | Path) -> h5py.File:
    """Open a study result for reading, after checking it is one.

    Parameters
    ----------
    path : the result file [-]

    Raises
    ------
    ResultFileError
        When the file is missing, not HDF5, damaged (datasets that disagree
        with each other included, see :func:`check_shapes`), or from another
        program.
    """
    path = Path(path)
    f = open_hdf5(path, "r")
    try:
        check_format(f, path)
        check_shapes(f, path)
    except ResultFileError:
        f.close()
        raise
    return f



@dataclass
class StudyData:
    """A study result read into memory (SI units, as stored).

    Attributes
    ----------
    path : the file
    attrs : root attributes
    labels, series, series_labels : see ``/points``
    done : finished flags (bool)
    status : solver status per point (see ``/solver/status``)
    names : ``{"nodes": [...], "stage_groups": [...], "extractions": [...],
        "heaters": [...]}``
    data : every per-point dataset by path (``"totals/heat_rate"``); text as str
    units : unit of each dataset by path
    inputs : per-point inputs by name
    texts : ``model_file``, ``case_file`` (and ``profile_file``) text
    topology : ``group_inlet``, ``group_outlet``, ``path_names``,
        ``path_inlet``, ``path_outlet``, ``path_kind`` (node names)
    """

    path: Path
    attrs: dict
    labels: list[str]
    series: np.ndarray
    series_labels: list[str]
    done: np.ndarray
    status: np.ndarray
    names: dict[str, list[str]]
    data: dict[str, np.ndarray]
    units: dict[str, str]
    descriptions: dict[str, str]
    inputs: dict[str, np.ndarray]
    texts: dict[str, str] = field(default_factory=dict)
    display: dict[str, str] = field(default_factory=dict)  # display rules by path
    topology: dict[str, list[str]] = field(default_factory=dict)

    @property
    def n_points(self) -> int:
        return len(self.labels)

    @property
    def ok(self) -> np.ndarray:
        """Points that converged (bool)."""
        return self.status == 0

    @property
    def name(self) -> str:
        return str(self.attrs.get("case_name", self.path.stem))

    def total(self, name: str) -> np.ndarray:
        """A total by name [SI], NaN where not solved."""
        return self.data[f"totals/{name}"]

    def column(self, group: str, quantity: str, item: str) -> np.ndarray:
        """One column of a 2-D dataset, e.g. ``column("nodes", "pressure", "crossover")``."""
        return self.data[f"{group}/{quantity}"][:, self.names[group].index(item)]

    @property
    def cautions(self) -> np.ndarray | None:
        """Number of cautions per point, or ``None`` when the file has none stored."""
        return self.data.get("cautions/count")


def read_study(path: str | Path) -> StudyData:
    """Read a whole study result file (checked to be ours) into memory.

    Parameters
    ----------
    path : the result file [-]
    """
    path = Path(path)
    with open_result(path) as f:
        try:
            return _read(f, path)
        except READ_ERRORS as exc:  # bytes damaged inside a dataset or a header
            raise damaged(path, exc) from None


def _read(f: h5py.File, path: Path) -> StudyData:
    """Everything of an open, checked result file (see :func:`read_study`)."""
    attrs = {k: attr_value(v) for k, v in f.attrs.items()}
    for old in ("model", "case", "profile"):  # format 1 and 2 named these as the datasets
        if f"{old}_file" in attrs:
            attrs.setdefault(f"{old}_path", attrs.pop(f"{old}_file"))
    # every group of per-point results: the solver record, the totals, the
    # cautions and one group per result group of the point (nodes, each kind)
    result_groups = [g for g, obj in f.items() if isinstance(obj, h5py.Group)
                     and g not in ("points", "inputs", "paths")]
    names = {g: list(f[g]["names"].asstr()[:]) for g in result_groups
             if "names" in f[g] and g != "cautions"}
    data, units, desc, display = {}, {}, {}, {}
    for gname in result_groups:
        for dname, ds in f[gname].items():
            if dname in ("names", "inlet", "outlet", "nodes", "kind") and gname != "totals":
                continue
            if is_scale(ds):  # the coordinates of format 3: point numbers, item names
                continue
            key = f"{gname}/{dname}"
            data[key] = ds.asstr()[...] if ds.dtype.kind in "SO" else ds[...]
            units[key] = attr_value(ds.attrs.get("unit", ""))
            desc[key] = attr_value(ds.attrs.get("description", ""))
            if "display" in ds.attrs:
                display[key] = attr_value(ds.attrs["display"])
    inputs = {}
    for name, ds in f["inputs"].items():
        if is_scale(ds):
            continue
        inputs[name] = ds.asstr()[...] if ds.dtype.kind in "SO" else ds[...]
        units[f"inputs/{name}"] = attr_value(ds.attrs.get("unit", ""))
        desc[f"inputs/{name}"] = attr_value(ds.attrs.get("description", ""))
    texts = {k: f[k].asstr()[()] for k in ("model_file", "case_file", "profile_file")
             if k in f}
    topo = {"group_inlet": list(f["stage_groups/inlet"].asstr()[:]),
            "group_outlet": list(f["stage_groups/outlet"].asstr()[:])}
    if "paths" in f:
        for k in ("names", "inlet", "outlet", "kind"):
            topo[f"path_{k}"] = list(f["paths"][k].asstr()[:])
    return StudyData(
        path=path, attrs=attrs, labels=list(f["points/label"].asstr()[:]),
        series=f["points/series"][:], series_labels=list(f["points/series_labels"].asstr()[:]),
        done=f["points/done"][:].astype(bool), status=f["solver/status"][:],
        names=names, data=data, units=units, descriptions=desc, display=display,
        inputs=inputs, texts=texts,
        topology=topo)
