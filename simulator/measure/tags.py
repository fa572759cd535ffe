"""Measurement files: a TOML map of tags and a CSV file of their readings.

The map names the model (or a case, for its valve and pressure modes), the CSV
file, and for every tag either the model quantity it measures or the operating
input it sets, with its uncertainty at 95 % confidence (absolute with a unit,
or relative in %)::

    model = "../models/demo_reheat_unit.toml"
    data = "acceptance_test.csv"

    [tags.FT-101]
    sets = "throttle_flow"            # this reading sets the case's throttle flow
    uncertainty = "1.2 %"

    [tags.PT-210]
    quantity = "nodes.hp_mid.pressure"
    uncertainty = "0.4 bar"

    [fit]
    tunables = ["stage_group.HP1.efficiency", "stage_group.HP1.flow_constant"]

A quantity is ``GROUP.ITEM.COLUMN`` of a point result (``nodes.hp_mid.pressure``,
``stage_groups.HP1.flow``, ``extractions.E8.flow``,
``heaters.HP8.feedwater_out_temperature``) or ``totals.NAME``
(``totals.generator_output``, ``totals.final_feedwater_temperature``).  A tunable is
``TABLE.NAME.TUNABLE`` of a component kind's declared tunables
(:attr:`simulator.components.Component.tunables`), or ``TABLE.TUNABLE`` for a
single table (``generator.fixed_loss``).

The CSV file has one header row ``label, TAG [unit], ...`` and one row per test
point or period; ``#`` lines are comments; an empty cell of a measured tag
leaves the reading out of that point.
"""

from __future__ import annotations

import hashlib
import math
import re
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np

from ..components.registry import KINDS
from ..errors import InputError
from ..inputs.reading import closest, csv_table, load_toml
from ..plant.fitted import TunableRef, resolve_tunable
from ..units import Where, linear_factors, parse

__all__ = ["Tag", "TunableRef", "Measurements", "read_measurements", "read_tags", "COVERAGE",
           "SETTABLE", "resolve_tunable"]

#: coverage factor of a 95 % confidence interval of a normal distribution (VDI 2048
#: Part 1, 2000, states uncertainties at 95 % confidence)
COVERAGE = 1.959963984540054

#: operating inputs a reading may set, with their dimension
SETTABLE = {
    "throttle_flow": "mass_flow",
    "output": "power",
    "throttle_pressure": "pressure",
    "throttle_temperature": "temperature",
    "reheat_temperature": "temperature",
    "exhaust_pressure": "pressure",
}

# SI unit of a result column -> dimension a reading of it is written in
_DIMENSION_OF_UNIT = {"Pa": "pressure", "K": "temperature", "kg/s": "mass_flow",
                      "W": "power", "-": "fraction", "J/kg": "specific_enthalpy",
                      "m/s": "velocity"}
# the dimension an absolute uncertainty of a quantity is written in
_DIFFERENCE = {"pressure": "pressure_difference", "temperature": "temperature_difference"}
_MAP_KEYS = ("description", "model", "case", "data", "label_column", "tags", "fit", "trend")
_TAG_KEYS = ("quantity", "sets", "uncertainty", "description")
_HEADER = re.compile(r"^\s*([A-Za-z_][\w.\-]*)\s*(?:\[\s*(.*?)\s*\])?\s*$")


@dataclass(frozen=True)
class Tag:
    """One measured tag: what it measures or sets, and its uncertainty.

    ``quantity`` is ``(group, item, column)`` of a point result (``item`` is
    ``""`` for a total); ``sets`` the operating input the reading sets (then
    ``quantity`` is ``None``); ``relative`` the relative uncertainty at 95 % [-]
    or ``absolute`` in SI, one of the two set.
    """

    name: str
    quantity: tuple[str, str, str] | None
    sets: str | None
    dimension: str
    relative: float | None = None
    absolute: float | None = None
    description: str = ""

    @property
    def what(self) -> str:
        """The quantity or input in words of the map file."""
        if self.sets:
            return f"sets {self.sets}"
        g, i, c = self.quantity
        return f"{g}.{i}.{c}" if i else f"{g}.{c}"

    def sigma(self, value: float) -> float:
        """Standard uncertainty of a reading ``value`` [SI]: the 95 % uncertainty over
        the coverage factor [SI]."""
        u = self.absolute if self.absolute is not None else self.relative * abs(value)
        return u / COVERAGE


@dataclass
class Measurements:
    """A measurement map and its readings, SI units.

    ``values`` is (points, tags) with NaN where a cell is empty; ``labels`` the
    label of each row and ``lines`` its line in the CSV file.
    """

    file: str
    data_file: str
    data_sha256: str
    description: str
    model: object
    conditions: object
    tags: list[Tag]
    values: np.ndarray
    labels: list[str]
    lines: list[int]
    tunables: list[str] = field(default_factory=list)
    trend: dict = field(default_factory=dict)

    def tag(self, name: str) -> Tag:
        return next(t for t in self.tags if t.name == name)

    def subset(self, rows) -> Measurements:
        """The same map with only the points ``rows`` (indices)."""
        rows = list(rows)
        return Measurements(self.file, self.data_file, self.data_sha256, self.description,
                            self.model, self.conditions, self.tags, self.values[rows],
                            [self.labels[i] for i in rows], [self.lines[i] for i in rows],
                            list(self.tunables), dict(self.trend))


def _result_columns(model) -> dict[str, tuple[list[str] | None, dict[str, str]]]:
    """Result groups of ``model``: ``group -> (item names or None for totals,
    {column: SI unit})``, from the kinds' declarations."""
    from ..solve.result import NODE_COLUMNS, TOTALS

    groups: dict = {"nodes": (list(model.order), {c.name: c.unit for c in NODE_COLUMNS}),
                    "totals": (None, {c.name: c.unit for c in TOTALS})}
    for kind in KINDS.values():
        if kind.results is None:
            continue
        items = [c.name for c in model.of_kind(kind)]
        if items:
            groups[kind.results] = (items, {c.name: c.unit for c in kind.columns})
    return groups


def _quantity(text, model, w: Where) -> tuple[tuple[str, str, str], str]:
    """``(group, item, column)`` and the dimension of a quantity written in the map."""
    if not isinstance(text, str) or not text:
        raise w.error("expected a quantity such as 'nodes.hp_mid.pressure' or "
                      "'totals.generator_output'")
    groups = _result_columns(model)
    parts = text.split(".")
    group = parts[0]
    if group not in groups:
        raise w.error(f"no result group {group!r}; known: {', '.join(groups)}"
                      + closest(group, groups))
    items, columns = groups[group]
    if items is None:
        if len(parts) != 2:
            raise w.error(f"write a total as 'totals.NAME', not {text!r}")
        item, column = "", parts[1]
    else:
        if len(parts) < 3:
            raise w.error(f"write {group!r} quantities as '{group}.NAME.COLUMN', not {text!r}")
        item, column = ".".join(parts[1:-1]), parts[-1]
        if item not in items:
            raise w.error(f"the model has no {item!r} in {group}" + closest(item, items))
    if column not in columns:
        raise w.error(f"{group} have no column {column!r}" + closest(column, columns))
    unit = columns[column]
    dim = ("temperature_difference" if column in ("ttd", "dca")
           else _DIMENSION_OF_UNIT.get(unit))
    if dim is None:
        raise w.error(f"{text!r} is not a measurable quantity (unit {unit!r})")
    return (group, item, column), dim


def _uncertainty(text, dim: str, w: Where) -> tuple[float | None, float | None]:
    """``(relative, absolute)`` of an uncertainty written ``"1.5 %"`` or ``"0.4 bar"``."""
    if not isinstance(text, str):
        raise w.error("expected the 95 % uncertainty as a string: '1.5 %' (relative to the "
                      "reading) or a value with a unit such as '0.4 bar'")
    if text.strip().endswith("%"):
        rel = parse(text, "fraction", w)
        if not 0.0 < rel < 1.0:
            raise w.error(f"a relative uncertainty must lie between 0 and 100 %, got {text!r}")
        return rel, None
    absolute = parse(text, _DIFFERENCE.get(dim, dim), w)
    if not absolute > 0.0:
        raise w.error(f"the uncertainty must be positive, got {text!r}")
    return None, absolute


def read_tags(data: dict, model, file: str) -> list[Tag]:
    """The ``[tags.NAME]`` tables of a map's TOML ``data`` against ``model``; errors
    name ``file``, the tag's table and the key."""
    tables = data.get("tags")
    if not isinstance(tables, dict) or not tables:
        raise Where(file, "tags").error("expected tables [tags.NAME], one per measured tag")
    tags = []
    for name, t in tables.items():
        w = Where(file, f"tags.{name}")
        if not isinstance(t, dict):
            raise w.error("expected a table with quantity or sets, and uncertainty")
        for k in t:
            if k not in _TAG_KEYS:
                raise w.child(k).error(f"unknown key; valid keys: {', '.join(_TAG_KEYS)}"
                                       + closest(k, _TAG_KEYS))
        if ("quantity" in t) == ("sets" in t):
            raise w.error("give exactly one of 'quantity' (what the tag measures) and "
                          "'sets' (the operating input its reading sets)")
        if "sets" in t:
            sets = t["sets"]
            if sets not in SETTABLE:
                raise w.child("sets").error(f"{sets!r} is not an input a reading can set; "
                                            f"known: {', '.join(SETTABLE)}"
                                            + closest(str(sets), SETTABLE))
            quantity, dim = None, SETTABLE[sets]
        else:
            sets = None
            quantity, dim = _quantity(t["quantity"], model, w.child("quantity"))
        if "uncertainty" not in t:
            raise w.child("uncertainty").error("missing required key: the 95 % uncertainty")
        rel, absolute = _uncertainty(t["uncertainty"], dim, w.child("uncertainty"))
        tags.append(Tag(name, quantity, sets, dim, rel, absolute,
                        str(t.get("description", ""))))
    sets = [t.sets for t in tags if t.sets]
    for s in set(sets):
        if sets.count(s) > 1:
            raise Where(file, "tags").error(f"two tags set {s!r}; one reading sets an input")
    if "throttle_flow" in sets and "output" in sets:
        raise Where(file, "tags").error("the load is set once: either throttle_flow or output")
    return tags


def _read_csv(path: Path, tags: list[Tag], label_col, w: Where):
    try:
        raw = path.read_bytes()
    except FileNotFoundError:
        raise w.error(f"measurement file not found (looked at {path})") from None
    except OSError as exc:
        raise w.error(f"cannot read the measurement file: {exc}") from None
    try:
        text = raw.decode("utf-8-sig")
    except UnicodeDecodeError as exc:
        raise InputError(f"not UTF-8 text ({exc})", file=str(path)) from None
    fname = str(path)
    hline, names, rows = csv_table(text, fname)
    if label_col is None:
        label_col = names[0] if not _HEADER.match(names[0]) or "[" not in names[0] else None
    elif label_col not in names:
        raise w.error(f"no column {label_col!r} in {fname}")
    by_tag = {t.name: t for t in tags}
    cols = {}  # tag name -> (column index, a, b)
    for j, h in enumerate(names):
        if h == label_col:
            continue
        m = _HEADER.match(h)
        wh = Where(fname, f"line {hline}", h)
        if not m:
            raise wh.error("cannot read this column header; write it as 'TAG [unit]'")
        tag, unit = m.group(1), m.group(2) or ""
        if tag not in by_tag:
            raise wh.error(f"the map has no tag {tag!r}" + closest(tag, by_tag))
        if tag in cols:
            raise wh.error("this tag appears twice")
        dim = by_tag[tag].dimension
        if dim != "fraction" and not unit:
            raise wh.error(f"this column needs its unit in the header, e.g. '{tag} [unit]'")
        cols[tag] = (j, *linear_factors(unit, dim, wh))
    missing = [t.name for t in tags if t.name not in cols]
    if missing:
        raise InputError(f"no column for tag {missing[0]!r} of the map", file=fname,
                         table=f"line {hline}")
    values = np.full((len(rows), len(tags)), math.nan)
    labels, lines = [], []
    for i, (lineno, row) in enumerate(rows):
        if len(row) != len(names):
            raise InputError(f"{len(row)} cells where the header has {len(names)}",
                             file=fname, table=f"line {lineno}")
        labels.append(row[names.index(label_col)].strip() if label_col else f"line {lineno}")
        lines.append(lineno)
        for k, t in enumerate(tags):
            j, a, b = cols[t.name]
            cell = row[j].strip()
            wl = Where(fname, f"line {lineno}", t.name)
            if not cell:
                if t.sets:
                    raise wl.error(f"empty cell: this tag sets {t.sets} and needs a reading "
                                   f"at every point")
                continue
            try:
                x = float(cell)
            except ValueError:
                raise wl.error(f"cannot read {cell!r} as a number") from None
            if not math.isfinite(x):
                raise wl.error(f"{cell!r} is not a usable reading")
            values[i, k] = a * x + b
            if t.dimension in ("pressure", "temperature", "mass_flow") and values[i, k] <= 0:
                raise wl.error(f"{cell!r} is not a positive {t.dimension.replace('_', ' ')}")
    return values, labels, lines, hashlib.sha256(raw).hexdigest()


def read_measurements(path: str | Path) -> Measurements:
    """Read a measurement map (TOML), its model or case and its CSV readings.

    Parameters
    ----------
    path : the map file (TOML); the paths inside are relative to it [-]

    Returns
    -------
    Measurements
        Tags, readings in SI units, the calibrated model and the base conditions.

    Raises
    ------
    InputError
        A mistake in the map or the CSV file, naming file, table (or line) and key
        (or tag).
    """
    from ..plant.case import design_conditions, load_case
    from ..plant.model import load_model

    path = Path(path)
    file = str(path)
    data, _ = load_toml(path)
    for k in data:
        if k not in _MAP_KEYS:
            raise Where(file, None, k).error(f"unknown key; valid keys: {', '.join(_MAP_KEYS)}"
                                             + closest(k, _MAP_KEYS))
    if ("model" in data) == ("case" in data):
        raise Where(file).error("give exactly one of 'model' and 'case' (path relative to "
                                "this file)")
    key = "model" if "model" in data else "case"
    if not isinstance(data[key], str):
        raise Where(file, None, key).error("expected a path relative to this file")
    target = path.parent / data[key]
    if key == "model":
        model = load_model(target)
        cond = design_conditions(model)
    else:
        case = load_case(target)
        model, cond = case.model, case.conditions
    if not isinstance(data.get("data"), str):
        raise Where(file, None, "data").error("expected the CSV file of readings, relative to "
                                              "this file")
    tags = read_tags(data, model, file)
    label_col = data.get("label_column")
    if label_col is not None and not isinstance(label_col, str):
        raise Where(file, None, "label_column").error("expected a column name")
    csv_path = path.parent / data["data"]
    values, labels, lines, sha = _read_csv(csv_path, tags, label_col,
                                           Where(file, None, "data"))
    fit = data.get("fit", {})
    if not isinstance(fit, dict) or any(k != "tunables" for k in fit):
        raise Where(file, "fit").error("expected a table with the key 'tunables'")
    tunables = fit.get("tunables", [])
    if not isinstance(tunables, list):
        raise Where(file, "fit", "tunables").error("expected a list of tunables")
    for t in tunables:
        resolve_tunable(model, t, Where(file, "fit", "tunables"))
    if len(set(tunables)) != len(tunables):
        raise Where(file, "fit", "tunables").error("a tunable is listed twice")
    trend = data.get("trend", {})
    if not isinstance(trend, dict):
        raise Where(file, "trend").error("expected a table")
    for k in trend:
        if k != "points_per_period":
            raise Where(file, "trend", k).error("unknown key; valid key: points_per_period"
                                                + closest(k, ["points_per_period"]))
    return Measurements(file, str(csv_path), sha, str(data.get("description", "")), model,
                        cond, tags, values, labels, lines, list(tunables), trend)
