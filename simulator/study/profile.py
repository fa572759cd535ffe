"""Profile CSV files: one header row of ``key [unit]`` columns, one point a row.

:func:`read_profile` reads the file named in a case's ``[profile]`` table into
:class:`ProfileSource` (columns as :class:`~.axes.Axis` values in SI units).
Column units are converted with :func:`simulator.units.linear_factors`.
"""

from __future__ import annotations

import hashlib
import re
from dataclasses import dataclass
from pathlib import Path

import numpy as np

from ..errors import InputError
from ..inputs.reading import csv_table
from ..plant.case import Case
from ..units import Where, linear_factors
from .axes import (
    Axis,
    AxisKind,
    axis_kind,
    canonical_key,
    check_extraction_flow,
    check_range,
    switch_names,
    validate_value,
)

__all__ = ["ProfileSource", "read_profile"]


@dataclass
class ProfileSource:
    """The CSV file of a profile: its path, text, hash and columns."""

    file: str
    text: str
    sha256: str
    axes: list[Axis]
    labels: list[str]
    lines: np.ndarray  # [-] line number of each row in the file


_HEADER = re.compile(r"^\s*([A-Za-z_][\w.]*)\s*(?:\[\s*(.*?)\s*\])?\s*$")


def _linear_unit(kind: AxisKind, unit: str, w: Where) -> tuple[float, float]:
    """``(a, b)`` so that ``si = a * value + b`` for values written in ``unit``."""
    if kind.dimension == "fraction":
        if unit not in ("", "-", "%", "percent"):
            raise w.error(f"a fraction column takes no unit or [%], got [{unit}]")
    elif not unit:
        raise w.error(f"this column needs its unit in the header, for example "
                      f"'{w.key} [{_EXAMPLE_UNIT.get(kind.dimension, 'unit')}]'")
    try:
        return linear_factors(unit, kind.dimension, w)
    except InputError:
        ex = _EXAMPLE_UNIT.get(kind.dimension, "unit")
        raise w.error(f"the column header '{w.key} [{unit}]' gives the unit [{unit}], which is "
                      f"not an absolute {kind.dimension.replace('_', ' ')} unit; write for "
                      f"example '{w.key} [{ex}]'") from None


_EXAMPLE_UNIT = {"mass_flow": "kg/s", "power": "MW", "pressure": "kPa", "temperature": "degC"}


def read_profile(case: Case) -> ProfileSource:
    """Read the CSV file named in the case's ``[profile]`` table."""
    w = Where(case.file, "profile")
    spec = case.data.get("profile")
    if not isinstance(spec, dict):
        raise w.error("expected a table [profile] with key 'file'")
    for k in spec:
        if k not in ("file", "label_column"):
            raise w.child(k).error("unknown key; valid keys: file, label_column")
    name = spec.get("file")
    if not isinstance(name, str) or not name:
        raise w.child("file").error("expected the name of a CSV file, relative to the case file")
    label_col = spec.get("label_column", None)
    path = (Path(case.file).parent / name)
    try:
        raw = path.read_bytes()
    except FileNotFoundError:
        raise w.child("file").error(f"profile file {name!r} not found (looked at {path})") from None
    except OSError as exc:
        raise w.child("file").error(f"cannot read profile file {name!r}: {exc}") from None
    try:
        text = raw.decode("utf-8-sig")
    except UnicodeDecodeError as exc:
        raise InputError(f"not UTF-8 text ({exc})", file=str(path)) from None
    sha = hashlib.sha256(raw).hexdigest()
    fname = str(path)
    hline, names, rows = csv_table(text, fname)
    if label_col is None:
        label_col = "time" if "time" in names else None
    elif label_col not in names:
        raise w.child("label_column").error(f"no column {label_col!r} in {fname}")
    columns = []  # (index, Axis key, kind, a, b)
    seen = set()
    for j, h in enumerate(names):
        if h == label_col:
            continue
        m = _HEADER.match(h)
        wh = Where(fname, f"line {hline}", h)
        if not m:
            raise wh.error("cannot read this column header; write it as 'key [unit]', "
                           "e.g. 'output [MW]'")
        key, unit = canonical_key(m.group(1)), m.group(2) or ""
        kind = axis_kind(key, Where(fname, f"line {hline}"), case.model)
        if key in seen:
            raise wh.error("this column appears twice")
        seen.add(key)
        if key.startswith("extraction_flow."):
            check_extraction_flow(case.model, key.split(".", 1)[1], Where(fname, f"line {hline}"))
        a, b = (0.0, 0.0) if kind.role == "switch" else _linear_unit(kind, unit,
                                                                    wh.child(key))
        columns.append((j, key, kind, a, b))
    if not columns:
        raise InputError("the profile has no column of inputs", file=fname)
    n = len(rows)
    lines = np.array([r[0] for r in rows], dtype=np.int64)
    labels = []
    raw_cols = {key: [] for _, key, _, _, _ in columns}
    for lineno, row in rows:
        if len(row) != len(names):
            raise InputError(f"{len(row)} cells where the header has {len(names)}",
                             file=fname, table=f"line {lineno}")
        labels.append(row[names.index(label_col)].strip() if label_col else f"line {lineno}")
        for j, key, _, _, _ in columns:
            raw_cols[key].append(row[j].strip())
    axes = []
    for j, key, kind, a, b in columns:
        cells = raw_cols[key]
        if kind.role == "switch":
            cache: dict[str, tuple] = {}
            values = []
            for (lineno, _), c in zip(rows, cells):
                if c not in cache:
                    cache[c] = switch_names(key, c, Where(fname, f"line {lineno}", names[j]),
                                      case.model)
                values.append(cache[c])
            texts = [" ".join(v) if v else "none" for v in values]
        else:
            try:
                x = np.array(cells, dtype=float)
            except ValueError:
                for (lineno, _), c in zip(rows, cells):
                    try:
                        float(c)
                    except ValueError:
                        raise InputError(f"cannot read {c!r} as a number", file=fname,
                                         table=f"line {lineno}", key=names[j]) from None
                raise  # pragma: no cover - one cell above must have failed
            si = a * x + b
            hi = case.model.throttle.max_pressure if key == "throttle_pressure" else kind.hi
            bad = ~np.isfinite(si)
            if kind.lo is not None:
                bad |= (si <= kind.lo) if kind.lo_open else (si < kind.lo)
            if hi is not None:
                bad |= si > hi
            if bad.any():
                i = int(np.argmax(bad))
                wl = Where(fname, f"line {rows[i][0]}", names[j])
                check_range(kind, float(si[i]), cells[i], wl, hi)
                raise wl.error(f"{cells[i]!r} is not a usable value")
            # the extremes also pass the case reader's checks
            for i in (int(np.argmin(si)), int(np.argmax(si))):
                probe = f"{float(si[i])!r} {kind.unit}" if kind.unit != "-" else float(si[i])
                validate_value(case, key, probe, Where(fname, f"line {rows[i][0]}", names[j]))
            values = [float(v) for v in si]
            texts = cells
        axes.append(Axis(key, kind, values, texts))
    assert all(len(ax.values) == n for ax in axes)
    return ProfileSource(fname, text, sha, axes, labels, lines)
