"""Operating limits of a turbine model: the ``[limits]`` table of a model file.

Each point the solver answers is checked against these limits by
:mod:`simulator.cautions`.  A model file may state its own values, the
manufacturer's where they are known::

    [limits]
    max_exhaust_moisture = "12 %"           # at the last-stage exit (ELEP)
    min_last_stage_volume_flow = "30 %"     # of the design volume flow
    max_pressure_rise = "5 %"               # any node above its design pressure
    max_exhaust_temperature = "80 degC"     # steam leaving a last-stage annulus
    max_steam_temperature_rise = "0 K"      # throttle and reheat above design
    max_generator_output = "100 %"          # of the generator rating
    max_back_pressure = "250 %"             # of the design exhaust pressure
    max_first_stage_pressure = "100 %"      # of its design value (governing stage)
    max_cooling_water_rise = "12 K"         # through a condenser circuit

Keys left out take the defaults below.  The defaults are common practice of
the trade, not taken from a published source or from any one manufacturer;
they are marked so wherever they are shown.  A manufacturer's limits always
take precedence.

Defaults and why
    ``max_exhaust_moisture`` 12 %
        Above about 12 % moisture at the last-stage exit, erosion of the
        leading edges of the last moving blades by water droplets becomes a
        concern (common practice, no source).
    ``min_last_stage_volume_flow`` 30 % of design
        Below about 30 % of design volume flow the last stages stop expanding
        steam and churn it instead (ventilation): the steam and the blades
        heat up, and long last-stage blades may be excited to vibrate by
        the unsteady flow (common practice, no source).
    ``max_pressure_rise`` 5 % above design
        A stage pressure more than about 5 % above its design value means
        more steam than designed passes the groups downstream of it, for
        example behind a closed extraction: stage overload, higher blade
        loading and thrust, extraction lines and heater shells above their
        design pressure (common practice, no source).
    ``max_exhaust_temperature`` 80 degC
        Chosen as the temperature at which exhaust-hood water sprays commonly
        start: beyond it an operating point relies on protective equipment,
        which a planner should know.  Alarm and trip settings are usually
        higher, about 100-120 degC, and too late to plan by (common practice,
        no source).
    ``max_steam_temperature_rise`` 0 K
        Steam hotter than design at the throttle or after the reheater spends
        the creep life of steam chests, valves, inlet blading and boiler
        outlet headers faster than designed; short excursions are usually
        allowed by the manufacturer, continuous operation is not (common
        practice, no source).
    ``max_generator_output`` 100 % of rating
        Above its rating the generator's windings run hotter than designed
        (common practice, no source).
    ``max_back_pressure`` 250 % of the design exhaust pressure
        A condenser pressure far above design loads the last-stage blades
        harder and, at low flow, heats the exhaust and can excite blade
        flutter; 250 % is roughly where alarms are set on condensing units
        designed for 5-10 kPa (common practice, no source).
    ``max_first_stage_pressure`` 100 % of design
        The first-stage pressure after a governing stage measures the load on
        the governing and HP stages; above its design (rated) value they carry
        more than their rated loading and thrust, which the manufacturer
        allows only up to a stated overload, often with the last control valve
        (common practice, no source).
    ``max_cooling_water_rise`` 12 K
        Discharge permits commonly bound how much warmer the cooling water
        returns to a river or the sea; about 10-12 K is a usual figure, and the
        site's permit governs (common practice, no source).
"""

from __future__ import annotations

from collections.abc import Iterator, Mapping
from dataclasses import dataclass

from ..inputs.reading import Problems, TableReader
from ..steam.if97 import P_CRIT, T_MAX, T_MIN
from ..units import Where, format_like, parse

__all__ = ["LimitSpec", "LIMITS", "Limits", "read_limits", "default_limits",
           "DEFAULT_SOURCE", "check_set_pressures"]

DEFAULT_SOURCE = "common practice, no source"


@dataclass(frozen=True)
class LimitSpec:
    """One configurable operating limit.

    Attributes
    ----------
    name
        Key in the ``[limits]`` table.
    dimension
        Dimension of the value (see :data:`simulator.units.DIMENSIONS`).
    default
        Default as written in a file, e.g. ``"12 %"``.
    lo, hi
        Range a stated value must lie in [SI unit of ``dimension``]; ``lo`` is
        exclusive, ``hi`` inclusive.
    meaning
        What the limit bounds, in plain words.
    source
        Where the default comes from.
    """

    name: str
    dimension: str
    default: str
    lo: float
    hi: float
    meaning: str
    source: str = DEFAULT_SOURCE

    @property
    def default_si(self) -> float:
        """The default in SI units [SI unit of ``dimension``]."""
        return parse(self.default, self.dimension, Where(key=self.name))


LIMITS: dict[str, LimitSpec] = {spec.name: spec for spec in (
    LimitSpec("max_exhaust_moisture", "fraction", "12 %", 0.0, 0.5,
              "largest moisture at the exit of a last stage (expansion-line end point) [-]"),
    LimitSpec("min_last_stage_volume_flow", "fraction", "30 %", 0.0, 1.0,
              "smallest volume flow leaving a last stage, over its design value [-]"),
    LimitSpec("max_pressure_rise", "fraction", "5 %", 0.0, 1.0,
              "largest rise of a node pressure above its design value, over that value [-]"),
    LimitSpec("max_exhaust_temperature", "temperature", "80 degC", T_MIN, T_MAX,
              "highest temperature of the steam leaving a last-stage annulus [K]"),
    LimitSpec("max_steam_temperature_rise", "temperature_difference", "0 K", -1e-9, 100.0,
              "largest excess of throttle or reheat temperature over its design value [K]"),
    LimitSpec("max_generator_output", "fraction", "100 %", 0.0, 2.0,
              "largest generator output, over the rating [-]"),
    LimitSpec("max_back_pressure", "fraction", "250 %", 0.0, 100.0,
              "largest exhaust (back) pressure, over its design value [-]"),
    LimitSpec("max_cooling_water_rise", "temperature_difference", "12 K", 0.0, 100.0,
              "largest rise of the cooling water through a condenser circuit [K]"),
    LimitSpec("max_first_stage_pressure", "fraction", "100 %", 0.0, 2.0,
              "highest first-stage pressure after a governing stage, over its design value "
              "[-]"),
)}


class Limits(Mapping):
    """The operating limits of one model: a read-only mapping name -> SI value.

    Every name of :data:`LIMITS` is present; those the model file did not state
    hold their defaults.

    Parameters
    ----------
    values
        Stated limits by name [SI units]; missing names take the default.
    given
        Names stated in the model file.
    """

    def __init__(self, values: Mapping[str, float] | None = None,
                 given: frozenset[str] = frozenset()):
        stated = dict(values or {})
        unknown = set(stated) - set(LIMITS)
        if unknown:  # a bug in the caller, not a user mistake
            raise ValueError(f"unknown limits {sorted(unknown)}")
        self._values = {name: float(stated.get(name, spec.default_si))
                        for name, spec in LIMITS.items()}
        self.given = frozenset(given)

    def __getitem__(self, name: str) -> float:
        return self._values[name]

    def __iter__(self) -> Iterator[str]:
        return iter(self._values)

    def __len__(self) -> int:
        return len(self._values)

    def __repr__(self) -> str:
        return f"Limits({self._values!r}, given={sorted(self.given)!r})"

    def source(self, name: str) -> str:
        """Where the value of limit ``name`` comes from, for messages."""
        return "the model file's [limits]" if name in self.given else LIMITS[name].source


def default_limits() -> Limits:
    """The limits of a model that states none."""
    return Limits()


def read_limits(reader: TableReader) -> Limits:
    """Read a ``[limits]`` table; problems are recorded in ``reader.problems``.

    Unknown keys are reported with the closest valid name; values of the wrong
    dimension or out of range are reported with the key.

    Parameters
    ----------
    reader
        A :class:`~simulator.reading.TableReader` on the ``[limits]`` table.

    Returns
    -------
    Limits
        The stated limits, defaults for the rest (and for wrong values, whose
        problems stop the model from loading anyway).
    """
    values: dict[str, float] = {}
    for name, spec in LIMITS.items():
        if spec.dimension == "fraction":
            v = reader.number(name, default=None, lo=spec.lo, hi=spec.hi, lo_open=True)
        else:
            v = reader.quantity(name, spec.dimension, default=None, lo=spec.lo, hi=spec.hi,
                                reason="the validity range of IAPWS-IF97")
        if v is not None:
            values[name] = v
    reader.finish()
    return Limits(values, frozenset(values))


def check_set_pressures(model, data: dict, file: str, problems: Problems, *,
                        exhaust_pressure: float | None, pressure_mode: str,
                        throttle_pressure: float | None, held_pressures) -> None:
    """Refuse pressures a case sets where no steam can get, before solving.

    Not operating limits (those only caution) but bounds of the machine's
    shape, each named by its case key and in the unit the case wrote:

    * the exhaust pressure must be below the throttle pressure (held, or the
      highest allowed ``[throttle] max_pressure`` with sliding pressure), and,
      when the exhaust feeds the heater train, below the critical pressure of
      water (above it the exhaust steam cannot condense: no IAPWS-IF97
      saturation state exists);
    * a control valve holds its inlet node below the design pressure of every
      node from which steam reaches that inlet: a higher setting leaves the
      component feeding it no pressure drop (a probable mistake).

    Parameters
    ----------
    model : the case's :class:`~simulator.plant.model.Model`
    data : the case file's tables (for the values as written)
    file : the case file, for messages
    problems : where problems are recorded
    exhaust_pressure : the case's exhaust pressure, ``None`` for design [Pa]
    pressure_mode : ``"sliding"`` or ``"fixed"``
    throttle_pressure : the held throttle pressure, ``None`` for design [Pa]
    held_pressures : ``(control valve name, held pressure [Pa])`` pairs
    """
    op = data.get("operation", {}) if isinstance(data.get("operation"), dict) else {}
    if exhaust_pressure is not None:
        text = op.get("exhaust_pressure", exhaust_pressure)
        w = Where(file, "operation", "exhaust_pressure")
        if pressure_mode == "fixed":
            ceiling = throttle_pressure or model.throttle.pressure
            what = "the held throttle pressure"
        else:
            ceiling = model.throttle.max_pressure
            what = "the highest allowed throttle pressure ([throttle] max_pressure)"
        if exhaust_pressure >= ceiling:
            problems.add(w.error(
                f"{text!r} is not below {what}, {format_like(ceiling, 'pressure', text)}: "
                f"steam cannot flow from the throttle to the exhaust"))
        elif model.feedwater is not None and exhaust_pressure >= P_CRIT:
            problems.add(w.error(
                f"{text!r} is not below the critical pressure of water, "
                f"{format_like(P_CRIT, 'pressure', text)}: the exhaust steam could not "
                f"condense for the feedwater train"))
    valves = data.get("control_valves", {}) if isinstance(data.get("control_valves"),
                                                          dict) else {}
    for name, held in held_pressures:
        valve = next(c for c in model.control_valves if c.name == name)
        text = (valves.get(name) or {}).get("pressure", held)
        for up in model.graph.predecessors(valve.inlet):
            p_up = model.design_pressure[up]
            if held >= p_up:
                comp = model.graph.edges[up, valve.inlet]["component"]
                design = format_like(model.design_pressure[valve.inlet], "pressure", text)
                problems.add(Where(file, f"control_valves.{name}", "pressure").error(
                    f"{text!r} is not below the design pressure of node {up!r}, "
                    f"{format_like(p_up, 'pressure', text)}, from which {comp.title} "
                    f"{comp.name!r} feeds the valve's inlet {valve.inlet!r}: the valve "
                    f"cannot hold its inlet above the steam arriving there (its design "
                    f"setting is {design})"))
                break
