"""Result layout: the names, types and units of the per-point result arrays of a
study, generated from the declared result columns.

Every result group of a point (:class:`simulator.solve.result.ResultTable`:
the nodes, and each kind's :attr:`~simulator.components.Component.results`)
becomes an HDF5 group with one ``(points, items)`` dataset per declared column;
the totals (:data:`simulator.solve.result.TOTALS`) one ``(points,)`` dataset
each.  A new kind's results are stored without a change here.

The layout is built in the study process and handed (pickled) to the workers,
which fill the same arrays the writer stores (:meth:`ResultLayout.fill`).
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np

from ..components import KINDS, SteamPathComponent
from ..components.base import Column
from ..errors import ConvergenceError
from ..solve.result import NODE_COLUMNS, TOTALS

__all__ = [
    "CAUTION_BYTES",
    "CODES_BYTES",
    "MESSAGE_BYTES",
    "TEXT_BYTES",
    "STATUS",
    "Field",
    "ResultGroup",
    "ResultLayout",
    "cut_text",
    "result_layout",
]

MESSAGE_BYTES = 256  # fixed length of a stored solver message (UTF-8, truncated)
CODES_BYTES = 128  # fixed length of the stored caution codes of a point
CAUTION_BYTES = 1024  # fixed length of the stored caution messages of a point
TEXT_BYTES = 16  # fixed length of a stored text column value (a control word)

# solver status of a point, as stored in /solver/status
STATUS = {"not solved": -1, "converged": 0, "failed": 1, "internal error": 2}


@dataclass(frozen=True)
class Field:
    """One per-point result dataset.

    ``path`` below the file root; ``dtype`` a numpy dtype string (``"S400"``
    for fixed-length UTF-8 text); ``width`` the number of columns (``0``: a
    one-dimensional dataset); ``unit`` SI; ``fill`` the value before the point
    is solved; ``display`` the column's display rule (stored in the dataset's
    ``display`` attribute: ``"%"`` or a unit kept as it is).
    """

    path: str
    dtype: str
    width: int
    unit: str
    description: str
    fill: float | int | bytes = math.nan
    display: str | None = None  # how it is shown where not by its unit (Column.display)


@dataclass
class ResultGroup:
    """One result group of the file: ``name`` (``"stage_groups"``), the item
    ``names``, the declared ``columns``, and the text datasets that describe the
    items (``inlet``, ``outlet`` node names; ``nodes`` of a kind at a node)."""

    name: str
    names: list[str]
    columns: tuple[Column, ...]
    texts: dict[str, list[str]] = field(default_factory=dict)


def _dtype(col: Column) -> str:
    return f"S{TEXT_BYTES}" if col.dtype == "text" else col.dtype


def _fill(col: Column):
    if col.dtype == "text":
        return b""
    return math.nan if col.dtype == "f8" else 0


@dataclass
class ResultLayout:
    """Names and units of the per-point results of a model (fixed for a study).

    Built by :func:`result_layout`; picklable.  ``groups`` are the nodes and
    every kind with results in the model; ``valve`` is the throttle valve's
    (inlet, outlet) nodes; ``paths`` the other steam-path components that pass
    their inlet's whole flow (reheaters, pipes, control valves) as ``(name,
    inlet, outlet, kind)``; ``design_throttle_flow`` [kg/s] and
    ``generator_rating`` [W] come from the model.
    """

    groups: list[ResultGroup]
    totals: tuple[Column, ...] = TOTALS
    valve: tuple[str, str] = ("", "")
    paths: list[tuple[str, str, str, str]] = field(default_factory=list)
    design_throttle_flow: float = math.nan
    generator_rating: float = math.nan
    cautions: bool = False
    caution_codes: list[str] = field(default_factory=list)

    @property
    def nodes(self) -> list[str]:
        return self.groups[0].names

    def group(self, name: str) -> ResultGroup | None:
        return next((g for g in self.groups if g.name == name), None)

    def fields(self) -> list[Field]:
        """Every per-point result dataset, in the order of the file."""
        f = [
            Field("solver/status", "i1", 0, "",
                  "-1 not solved yet, 0 converged, 1 failed (cannot be solved), "
                  "2 internal error", -1),
            Field("solver/converged", "u1", 0, "", "1 when the point converged", 0),
            Field("solver/iterations", "i4", 0, "-", "Newton iterations (-1: not known)", -1),
            Field("solver/evaluations", "i4", 0, "-", "residual evaluations (-1: not known)",
                  -1),
            Field("solver/residual", "f8", 0, "-",
                  "largest normalised residual at the end (NaN: not known)"),
            Field("solver/error", "S32", 0, "",
                  "class of the error of a failed point (ConvergenceError, InfeasibleError, "
                  "PropertyRangeError, ...)", b""),
            Field("solver/message", f"S{MESSAGE_BYTES}", 0, "",
                  "solver message, or why the point failed (UTF-8, cut to "
                  f"{MESSAGE_BYTES} bytes)", b""),
        ]
        for g in self.groups:
            for col in g.columns:
                text = col.description + ("" if col.when_out else
                                          " (NaN when out of service)")
                f.append(Field(f"{g.name}/{col.name}", _dtype(col), len(g.names), col.unit,
                               text, _fill(col), col.display))
        for col in self.totals:
            f.append(Field(f"totals/{col.name}", "f8", 0, col.unit, col.description,
                           display=col.display))
        if self.cautions:
            f += [
                Field("cautions/count", "i2", 0, "-",
                      "number of operating-limit cautions (-1: not checked)", -1),
                Field("cautions/codes", f"S{CODES_BYTES}", 0, "",
                      "caution codes, separated by spaces", b""),
                Field("cautions/flags", "u1", len(self.caution_codes), "",
                      "1 where the caution of /cautions/names fired", 0),
                Field("cautions/messages", f"S{CAUTION_BYTES}", 0, "",
                      "caution messages, one a line (UTF-8, cut to "
                      f"{CAUTION_BYTES} bytes)", b""),
            ]
        return f

    def empty(self, k: int) -> dict[str, np.ndarray]:
        """Arrays for ``k`` points filled with the 'not solved' values."""
        out = {}
        for f in self.fields():
            shape = (k, f.width) if f.width else (k,)
            out[f.path] = np.full(shape, f.fill, dtype=f.dtype)
        return out

    def fill(self, arrays: dict[str, np.ndarray], i: int, r) -> None:
        """Copy point result ``r`` (a :class:`~simulator.solve.result.PointResult`)
        into row ``i`` of ``arrays``."""
        arrays["solver/status"][i] = STATUS["converged"]
        arrays["solver/converged"][i] = 1 if r.converged else 0
        arrays["solver/iterations"][i] = r.iterations
        arrays["solver/evaluations"][i] = r.evaluations
        arrays["solver/residual"][i] = r.residual
        arrays["solver/message"][i] = cut_text(r.message, MESSAGE_BYTES)
        groups, totals = self._fill_paths()
        for gname, names, columns in groups:
            table = r.tables.get(gname)
            if table is None:
                continue
            at = (slice(None) if table.names == names
                  else [names.index(n) for n in table.names])
            found = table.columns
            for name, path, text in columns:
                values = found[name]
                if text:
                    values = [str(v).encode()[:TEXT_BYTES] for v in values]
                arrays[path][i, at] = values
        found = r.totals
        for name, path in totals:
            v = found.get(name)
            if v is not None:
                arrays[path][i] = v

    def _fill_paths(self) -> tuple[list, list]:
        """The dataset path of every column :meth:`fill` copies, worked out once per
        layout (a point used to build them all anew): ``([(group, item names,
        [(column, path, is text)])], [(total, path)])``."""
        paths = self.__dict__.get("_paths")
        if paths is None:
            paths = ([(g.name, g.names, [(c.name, f"{g.name}/{c.name}", c.dtype == "text")
                                         for c in g.columns]) for g in self.groups],
                     [(c.name, f"totals/{c.name}") for c in self.totals])
            self.__dict__["_paths"] = paths
        return paths

    def fail(self, arrays: dict[str, np.ndarray], i: int, exc: BaseException,
             internal: bool = False) -> None:
        """Record in row ``i`` that the point could not be solved."""
        arrays["solver/status"][i] = STATUS["internal error" if internal else "failed"]
        arrays["solver/converged"][i] = 0
        if isinstance(exc, ConvergenceError):
            arrays["solver/iterations"][i] = exc.iterations
            arrays["solver/residual"][i] = exc.residual
        arrays["solver/error"][i] = type(exc).__name__.encode()[:32]
        text = str(exc) if not internal else (
            f"internal error ({type(exc).__name__}: {exc}); please report it as a bug")
        arrays["solver/message"][i] = cut_text(text, MESSAGE_BYTES)
        if self.cautions:
            arrays["cautions/count"][i] = 0


def cut_text(text: str, n: int) -> bytes:
    """``text`` as UTF-8, cut to at most ``n`` bytes on a character boundary."""
    b = text.encode("utf-8")
    if len(b) <= n:
        return b
    return b[:n - 3].decode("utf-8", "ignore").encode("utf-8") + b"..."


def _cautions_available() -> tuple[bool, list[str]]:
    """Whether the operating-limit checks are installed, and their codes."""
    try:
        from ..cautions.checks import CAUTION_CODES
    except ImportError:
        return False, []
    return True, [str(c) for c in CAUTION_CODES]


def result_layout(model) -> ResultLayout:
    """The result layout of ``model`` (a :class:`~simulator.plant.model.Model`),
    from the declared columns of the nodes, of every kind it has and of the
    totals."""
    groups = [ResultGroup("nodes", list(model.order), NODE_COLUMNS)]
    for kind in KINDS.values():
        comps = model.of_kind(kind)
        if not kind.results or not comps:
            continue
        texts = {}
        if issubclass(kind, SteamPathComponent):
            texts = {"inlet": [c.inlet for c in comps], "outlet": [c.outlet for c in comps]}
        elif hasattr(comps[0], "node"):
            texts = {"nodes": [c.node for c in comps]}
        groups.append(ResultGroup(kind.results, [c.name for c in comps], kind.columns, texts))
        if kind.part_results:
            groups.append(ResultGroup(kind.part_results,
                                      [n for c in comps for n in c.part_names()],
                                      kind.part_columns))
    cautions, codes = _cautions_available()
    paths = [(c.name, c.inlet, c.outlet, c.table) for c in model.steam_path
             if not c.sets_flow and c is not model.admission]
    return ResultLayout(
        groups=groups, valve=(model.admission.inlet, model.admission.outlet), paths=paths,
        design_throttle_flow=model.throttle.flow, generator_rating=model.generator.rating,
        cautions=cautions, caution_codes=codes)
