"""Sweep axes: what a ``[sweep]`` key or a profile column may vary, and the
reading of the ``[sweep]`` table into :class:`Axis` values (SI units).

Every value is checked the way the case reader checks ``[operation]``
(:func:`validate_value`), so a sweep accepts exactly what a case file would.
"""

from __future__ import annotations

import copy
import math
import re
from dataclasses import dataclass

import numpy as np

from ..components import KINDS
from ..errors import InputError
from ..inputs.reading import closest
from ..plant.case import Case, read_conditions
from ..plant.model import Model
from ..steam.if97 import P_MAX, P_MIN, T_MAX, T_MIN
from ..units import DIMENSIONS, Where, parse

__all__ = [
    "AXES",
    "Axis",
    "AxisKind",
    "CONTINUATION_ORDER",
    "MAX_POINTS",
    "axis_kind",
    "canonical_key",
    "setting_axis",
    "check_extraction_flow",
    "check_range",
    "read_sweep",
    "switch_names",
    "unused_with",
    "validate_value",
]

MAX_POINTS = 1_000_000  # a typo in a range should not plan a billion points


@dataclass(frozen=True)
class AxisKind:
    """What a sweep axis or profile column sets.

    Attributes
    ----------
    dimension : dimension for :func:`simulator.units.parse` (``None``: names)
    unit : SI unit of the stored values (``"-"`` dimensionless, ``""`` names)
    role : ``"load"``, ``"state"`` (another scalar input), ``"switch"``
        (heaters or extractions out of service) or ``"mode"`` (a word: the
        valve or pressure mode)
    lo, hi : allowed range in SI units (``None``: open)
    lo_open : ``lo`` itself is not allowed
    description : one line for the result file
    """

    dimension: str | None
    unit: str
    role: str
    lo: float | None
    hi: float | None
    lo_open: bool
    description: str


AXES: dict[str, AxisKind] = {
    "throttle_flow": AxisKind("mass_flow", "kg/s", "load", 0.0, None, True,
                              "throttle steam flow"),
    "throttle_flow_fraction": AxisKind("fraction", "-", "load", 0.0, 2.0, True,
                                       "throttle flow over its design value"),
    "output": AxisKind("power", "W", "load", 0.0, None, True,
                       "generator output demanded"),
    "output_fraction": AxisKind("fraction", "-", "load", 0.0, 2.0, True,
                                "generator output demanded over the generator rating"),
    "exhaust_pressure": AxisKind("pressure", "Pa", "state", P_MIN, P_MAX, False,
                                 "exhaust (condenser or back) pressure"),
    "throttle_pressure": AxisKind("pressure", "Pa", "state", P_MIN, P_MAX, False,
                                  "throttle pressure held (pressure mode 'fixed'; the "
                                  "highest of a program)"),
    "minimum_throttle_pressure": AxisKind("pressure", "Pa", "state", P_MIN, P_MAX, False,
                                          "lowest throttle pressure of a pressure program"),
    "valves_open": AxisKind("number", "-", "state", 1.0, None, False,
                            "governing-stage valves wide open at sliding pressure"),
    "valve_mode": AxisKind("choice", "", "mode", None, None, False,
                           "how the valves pass the steam: 'throttle' or 'nozzle_groups'"),
    "pressure_mode": AxisKind("choice", "", "mode", None, None, False,
                              "throttle pressure 'sliding', 'fixed' or 'program'"),
    "throttle_temperature": AxisKind("temperature", "K", "state", T_MIN, T_MAX, False,
                                     "throttle steam temperature"),
    "reheat_temperature": AxisKind("temperature", "K", "state", T_MIN, T_MAX, False,
                                   "hot reheat temperature"),
    "extraction_flow": AxisKind("mass_flow", "kg/s", "state", 0.0, None, False,
                                "flow of an extraction held at a set flow"),
    "heater_out": AxisKind(None, "", "switch", None, None, False,
                           "heaters taken out of service in addition to the case's"),
    "extraction_closed": AxisKind(None, "", "switch", None, None, False,
                                  "extractions closed in addition to the case's"),
}

# preferred continuation axis, first found wins
CONTINUATION_ORDER = ("throttle_flow", "throttle_flow_fraction", "output", "output_fraction",
                 "exhaust_pressure", "throttle_pressure", "throttle_temperature",
                 "reheat_temperature", "extraction_flow")
_LOAD_KEYS = ("throttle_flow", "throttle_flow_fraction", "output", "output_fraction")
_RANGE_KEYS = ("from", "to", "points", "step")


@dataclass
class Axis:
    """One sweep axis or profile column.

    Attributes
    ----------
    key : axis name, ``"extraction_flow.NAME"`` for an extraction flow
    kind : what it sets
    values : SI floats, sorted tuples of names for switches, words for modes
    texts : the values as the user wrote them (for point labels)
    """

    key: str
    kind: AxisKind
    values: list
    texts: list[str]

    @property
    def base(self) -> str:
        return self.key.split(".", 1)[0]


def axis_kind(key: str, where: Where, model: Model | None = None) -> AxisKind:
    """What the axis ``key`` sets: an input of :data:`AXES`, or a component's
    setting ``TABLE.NAME.SETTING`` (see :func:`setting_axis`, needs ``model``)."""
    base = key.split(".", 1)[0]
    if model is not None and base in _settings_tables():
        return setting_axis(key, model, where)
    if base not in AXES or (base == "extraction_flow") != ("." in key):
        valid = ([k for k in AXES if k != "extraction_flow"] + ["extraction_flow.NAME"]
                 + [f"{t}.NAME.SETTING" for t in _settings_tables()])
        mean = closest(key, valid)
        raise where.child(key).error(
            f"not an input that can be varied{mean} (valid: {', '.join(valid)})")
    return AXES[base]


def canonical_key(key: str) -> str:
    """The one name of an axis written two ways: an extraction's flow setting
    ``extractions.NAME.flow`` is the axis ``extraction_flow.NAME``."""
    parts = key.split(".")
    if parts[0] == "extractions" and len(parts) >= 3 and parts[-1] == "flow":
        return "extraction_flow." + ".".join(parts[1:-1])
    return key


def _settings_tables() -> dict:
    """Case tables of per-component settings -> their kind."""
    return {k.settings_table: k for k in KINDS.values() if k.settings_table}


def setting_axis(key: str, model: Model, where: Where) -> AxisKind:
    """The axis of a component setting ``TABLE.NAME.SETTING``, as a case file writes
    it in ``[TABLE.NAME] SETTING = ...``: every setting a kind declares with a
    dimension (:attr:`simulator.components.Component.settings`) can be varied,
    without code for it here."""
    parts = key.split(".")
    kind = _settings_tables().get(parts[0])
    if kind is None or len(parts) < 3:
        raise where.child(key).error(f"write a component setting as {parts[0]}.NAME.SETTING")
    name, setting = ".".join(parts[1:-1]), parts[-1]
    known = [c.name for c in model.of_kind(kind)]
    if name not in known:
        raise where.child(key).error(f"the model has no {kind.title} {name!r}"
                                     + closest(name, known))
    st = next((s for s in kind.settings if s.name == setting), None)
    numeric = [s.name for s in kind.settings if s.dimension in DIMENSIONS]
    if st is None or st.name not in numeric:
        raise where.child(key).error(
            f"{setting!r} is not a quantity of the {kind.title} that can be varied "
            f"(it has: {', '.join(numeric) or 'none'})")
    return AxisKind(st.dimension, DIMENSIONS[st.dimension][0] or "-", "state", st.lo, st.hi, False,
                    f"{kind.title} {name!r}: {st.description}")


def check_range(kind: AxisKind, si: float, text, w: Where, hi: float | None = None) -> None:
    """Range check of a profile value (sweep values go through the case reader)."""
    hi = kind.hi if hi is None else hi
    if (kind.lo is not None and (si < kind.lo or (kind.lo_open and si == kind.lo))) or (
            hi is not None and si > hi):
        lo_t = "" if kind.lo is None else (f"{'above' if kind.lo_open else 'at least'} "
                                           f"{kind.lo:.6g} {kind.unit}")
        hi_t = "" if hi is None else f"at most {hi:.6g} {kind.unit}"
        raise w.error(f"{text!r} is out of range: it must be "
                      f"{' and '.join(t for t in (lo_t, hi_t) if t)} (SI units)")


def _scalar(kind: AxisKind, value, w: Where) -> float:
    return parse(value, kind.dimension, w)


def validate_value(case: Case, key: str, value, w: Where) -> None:
    """Check one written value the way the case reader checks ``[operation]``.

    The value is put into a copy of the case's tables (a load replaces the
    case's load; an extraction flow sets that extraction to ``control =
    'flow'``) and read with :func:`simulator.case.read_conditions`, so a sweep
    accepts exactly what a case file would.
    """
    data = copy.deepcopy(case.data)
    base = key.split(".", 1)[0]
    if base in _settings_tables():
        parts = key.split(".")
        name, setting = ".".join(parts[1:-1]), parts[-1]
        tables = data.setdefault(base, {})
        tables[name] = {**tables.get(name, {}), setting: value}
    elif key.startswith("extraction_flow."):
        data.setdefault("extractions", {})[key.split(".", 1)[1]] = {"control": "flow",
                                                                   "flow": value}
    else:
        op = data.setdefault("operation", {})
        if key in _LOAD_KEYS:
            for k in _LOAD_KEYS:
                op.pop(k, None)
        for k in unused_with(key, value):
            op.pop(k, None)
        op[key] = value
    try:
        read_conditions(data, case.model, case.file)
    except InputError as exc:
        raise w.error(getattr(exc, "message", str(exc))) from None


def unused_with(key: str, value) -> tuple[str, ...]:
    """The ``[operation]`` keys a mode axis's ``value`` has no use for: a sweep of
    the pressure or valve mode takes the case's held and program pressures and
    its valves wide open only where the mode needs them."""
    if key == "pressure_mode":
        return {"sliding": ("throttle_pressure", "minimum_throttle_pressure"),
                "fixed": ("minimum_throttle_pressure", "valves_open")}.get(value, ())
    if key == "valve_mode" and value == "throttle":
        return ("valves_open",)
    return ()


def switch_names(kind_key: str, value, w: Where, model: Model) -> tuple[str, ...]:
    """A switch value: ``"none"``, a name, or a list of names."""
    if isinstance(value, str):
        items = [] if value.strip().lower() in ("none", "") else value.split()
    elif isinstance(value, list) and all(isinstance(v, str) for v in value):
        items = [v for v in value if v.lower() != "none"]
    else:
        raise w.error(f"expected 'none', a name or a list of names, got {value!r}")
    known = model.heaters if kind_key == "heater_out" else model.extractions
    what = "heater" if kind_key == "heater_out" else "extraction"
    for name in items:
        if name not in known:
            raise w.error(f"the model has no {what} {name!r}"
                          + (closest(name, known) or f"; valid: {', '.join(known)}"))
    return tuple(sorted(set(items)))


_NUM_UNIT = re.compile(r"^\s*([-+]?(?:\d+\.?\d*|\.\d+)(?:[eE][-+]?\d+)?)\s*(.*?)\s*$")


def _split_text(value) -> tuple[float, str] | None:
    if isinstance(value, bool):
        return None
    if isinstance(value, (int, float)):
        return float(value), ""
    if isinstance(value, str):
        m = _NUM_UNIT.match(value)
        if m:
            return float(m.group(1)), m.group(2)
    return None


def _range(kind: AxisKind, spec: dict, w: Where, check) -> tuple[list[float], list[str]]:
    """Values of ``{from, to, points}`` or ``{from, to, step}``."""
    unknown = [k for k in spec if k not in _RANGE_KEYS]
    if unknown:
        raise w.error(f"unknown key {unknown[0]!r} in a range; a range is "
                      f"{{from = A, to = B, points = N}} or {{from = A, to = B, step = S}}")
    if "from" not in spec or "to" not in spec or ("points" in spec) == ("step" in spec):
        raise w.error("a range needs 'from', 'to' and one of 'points' or 'step'")
    a = _scalar(kind, spec["from"], w)
    b = _scalar(kind, spec["to"], w)
    check(spec["from"])
    check(spec["to"])
    if "points" in spec:
        n = spec["points"]
        if isinstance(n, bool) or not isinstance(n, int) or n < 2:
            raise w.error(f"'points' must be a whole number of at least 2, got {n!r}")
        if n > MAX_POINTS:
            raise w.error(f"{n} points is more than the {MAX_POINTS} a study may have")
        k_all = np.arange(n)
        values = [float(v) for v in np.linspace(a, b, n)]
        frac = k_all / (n - 1)
    else:
        dim = "temperature_difference" if kind.dimension == "temperature" else kind.dimension
        step = parse(spec["step"], dim, w)
        if not step > 0.0:
            raise w.error(f"'step' must be positive, got {spec['step']!r}")
        span = abs(b - a)
        n_f = span / step
        if n_f + 1 > MAX_POINTS:
            raise w.error(f"this range has {int(n_f) + 1} points, more than the {MAX_POINTS} "
                          f"a study may have")
        n = int(math.floor(n_f + 1e-9)) + 1
        sign = 1.0 if b >= a else -1.0
        values = [a + sign * k * step for k in range(n)]
        if abs(values[-1] - b) <= 1e-9 * max(abs(a), abs(b), step):
            values[-1] = b  # land exactly on the end
        frac = np.array([(v - a) / (b - a) if b != a else 0.0 for v in values])
    # labels in the user's unit when 'from' and 'to' share it
    fa, fb = _split_text(spec["from"]), _split_text(spec["to"])
    if fa and fb and fa[1] == fb[1]:
        texts = [f"{fa[0] + f * (fb[0] - fa[0]):.6g}" + (f" {fa[1]}" if fa[1] else "")
                 for f in frac]
    else:
        texts = [f"{v:.6g} {kind.unit}" for v in values]
    return values, texts


def _read_axis(key: str, value, wk: Where, case: Case) -> Axis:
    """One axis of ``[sweep]``; ``wk`` locates its value in the case file."""
    kind = axis_kind(key, Where(wk.file, wk.table), case.model)

    def check(v):
        validate_value(case, key, v, wk)

    if kind.role == "switch":
        # a list holds alternatives: "none", a name, or a list of names out together
        if isinstance(value, list) and not value:
            raise wk.error("an empty list: give at least one value (or 'none')")
        items = value if isinstance(value, list) else [value]
        values = [switch_names(key, v, wk, case.model) for v in items]
        texts = [" ".join(v) if v else "none" for v in values]
    elif kind.role == "mode":
        items = value if isinstance(value, list) else [value]
        if not items or not all(isinstance(v, str) for v in items):
            raise wk.error("expected a list of words, such as ['fixed', 'sliding']")
        for v in items:
            check(v)
        values, texts = list(items), list(items)
    elif kind.dimension == "number":
        items = value if isinstance(value, list) else [value]
        if not items or not all(isinstance(v, int) and not isinstance(v, bool) for v in items):
            raise wk.error("expected a list of whole numbers")
        for v in items:
            check(v)
        values, texts = [int(v) for v in items], [str(v) for v in items]
    elif isinstance(value, dict):
        values, texts = _range(kind, value, wk, check)
    else:
        items = value if isinstance(value, list) else [value]
        if not items:
            raise wk.error("an empty list: give at least one value")
        values = []
        for v in items:
            values.append(_scalar(kind, v, wk))
            check(v)
        texts = [str(v) for v in items]
    if len(set(values)) != len(values):
        raise wk.error("the same value appears twice")
    return Axis(key, kind, values, texts)


def read_sweep(case: Case) -> list[Axis]:
    """The axes of the case's ``[sweep]`` table, in the order written."""
    data = case.data.get("sweep")
    w = Where(case.file, "sweep")
    if not isinstance(data, dict):
        raise w.error("expected a table [sweep] of inputs to vary")
    axes = []
    for key, value in data.items():
        if key == "extraction_flow":
            if not isinstance(value, dict) or any(k in _RANGE_KEYS for k in value):
                raise w.child(key).error(
                    "expected a table of extraction names, e.g. "
                    "[sweep.extraction_flow] process_steam = ['0 kg/s', '20 kg/s']")
            wt = Where(case.file, "sweep.extraction_flow")
            for name, v in value.items():
                check_extraction_flow(case.model, name, wt)
                axes.append(_read_axis(f"extraction_flow.{name}", v, wt.child(name), case))
            continue
        if key in _settings_tables():
            if not isinstance(value, dict) or not all(isinstance(v, dict)
                                                      for v in value.values()):
                raise w.child(key).error(
                    f"expected tables of component settings, e.g. [sweep.{key}.NAME] "
                    f"SETTING = [...]")
            for name, settings in value.items():
                wt = Where(case.file, f"sweep.{key}.{name}")
                for setting, v in settings.items():
                    akey = canonical_key(f"{key}.{name}.{setting}")
                    if akey.startswith("extraction_flow."):
                        check_extraction_flow(case.model, name, wt)
                    axes.append(_read_axis(akey, v, wt.child(setting), case))
            continue
        axes.append(_read_axis(key, value, w.child(key), case))
    if not axes:
        raise w.error("the [sweep] table is empty: name at least one input to vary")
    return axes


def check_extraction_flow(model: Model, name: str, w: Where) -> None:
    if name not in model.extractions:
        raise w.child(name).error(f"the model has no extraction {name!r}"
                                  + closest(name, model.extractions))
    if model.extractions[name].heater:
        raise w.child(name).error(
            f"extraction {name!r} feeds heater {model.extractions[name].heater!r}, which sets "
            f"its flow; vary 'heater_out' or 'extraction_closed' instead")
