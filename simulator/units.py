"""Quantities with units, parsed once at the edge of the program.

Inside partload every number is SI: pressure [Pa], temperature [K], specific
enthalpy [J/kg], specific entropy [J/(kg K)], specific volume [m^3/kg],
mass flow [kg/s], power [W], area [m^2], velocity [m/s].  Files and the command
line speak in the engineer's units; this module converts strings such as
``"166 bar"``, ``"538 degC"``, ``"1000 t/h"``, ``"2400 psia"`` or ``"3 %"`` to
those SI numbers and refuses anything of the wrong dimension with an
:class:`~simulator.errors.InputError` that names the file, table and key.

Gauge pressures (``barg``, ``psig``, ``kPag``) are accepted only when the file
states its local atmospheric pressure; absolute units (``bar``, ``bara``,
``psia``, ``kPa``, ``MPa``, ``inHg``, ``mmHg``) always are.

On the way out, :data:`DISPLAY` is the one table of display units: the SI unit
of a stored or computed value and the engineer's unit it is shown in, with
:func:`to_display_unit` to convert.
"""

from __future__ import annotations

import functools
import math
import re
from dataclasses import dataclass

import numpy as np

from .errors import InputError

__all__ = ["Where", "parse", "linear_factors", "format_like", "DIMENSIONS", "DISPLAY",
           "DISPLAY_US", "SYSTEMS", "BACK_PRESSURE_NAMES", "to_display_unit"]

_NUMBER = re.compile(r"^\s*([-+]?(?:\d+\.?\d*|\.\d+)(?:[eE][-+]?\d+)?)\s*(.*?)\s*$")
_GAUGE = {"barg": "bar", "psig": "psia", "kpag": "kPa", "mpag": "MPa"}


@dataclass(frozen=True)
class Where:
    """Location of a value in an input file, used in error messages."""

    file: str | None = None
    table: str | None = None
    key: str | None = None

    def error(self, message: str) -> InputError:
        return InputError(message, file=self.file, table=self.table, key=self.key)

    def child(self, key: str) -> Where:
        return Where(self.file, self.table, key)

    def sub(self, table: str) -> Where:
        t = f"{self.table}.{table}" if self.table else table
        return Where(self.file, t, None)


@functools.lru_cache(maxsize=1)
def _registry():
    """The pint unit registry, built once per process on first use.

    pint looks for Dask when it is imported and imports it when found; partload
    passes pint no Dask arrays, so Dask is hidden while pint is imported (it is
    imported later, and only by the commands that use it).
    """
    import sys

    hide = "dask" not in sys.modules
    if hide:
        sys.modules["dask"] = None  # import dask raises ImportError; find_spec gives None
    try:
        import pint
    finally:
        if hide and sys.modules.get("dask", 0) is None:
            del sys.modules["dask"]

    ureg = pint.UnitRegistry(autoconvert_offset_to_baseunit=True)
    ureg.define("bara = bar")
    ureg.define("psia = psi")
    ureg.define("kPaa = kPa")
    ureg.define("MPaa = MPa")
    return ureg


# Units read without pint: unit -> (dimensions, factor, offset), SI = value * factor +
# offset.  Each gives the same float as pint's conversion, bit for bit (tests/test_units.py
# compares them); any other unit, and every mistake, goes through pint.
_PRESSURE = ("pressure", "pressure_difference")
_FAST = {
    "Pa": (_PRESSURE, 1.0, 0.0), "kPa": (_PRESSURE, 1e3, 0.0), "MPa": (_PRESSURE, 1e6, 0.0),
    "bar": (_PRESSURE, 1e5, 0.0), "bara": (_PRESSURE, 1e5, 0.0), "mbar": (_PRESSURE, 1e2, 0.0),
    "kPaa": (_PRESSURE, 1e3, 0.0), "MPaa": (_PRESSURE, 1e6, 0.0),
    "K": (("temperature",), 1.0, 0.0), "degC": (("temperature",), 1.0, 273.15),
    "kg/s": (("mass_flow",), 1.0, 0.0), "t/h": (("mass_flow",), 1000.0 / 3600.0, 0.0),
    "kg/h": (("mass_flow",), 1.0 / 3600.0, 0.0),
    "W": (("power",), 1.0, 0.0), "kW": (("power",), 1e3, 0.0), "MW": (("power",), 1e6, 0.0),
    "m^2": (("area",), 1.0, 0.0), "m/s": (("velocity",), 1.0, 0.0),
    "J/kg": (("specific_enthalpy",), 1.0, 0.0), "kJ/kg": (("specific_enthalpy",), 1e3, 0.0),
    "W/K": (("heat_transfer_coefficient_area",), 1.0, 0.0),
    "kW/K": (("heat_transfer_coefficient_area",), 1e3, 0.0),
    "MW/K": (("heat_transfer_coefficient_area",), 1e6, 0.0),
}

# dimension name -> (SI unit, example written in files)
DIMENSIONS = {
    "pressure": ("Pa", "166 bar"),
    "pressure_difference": ("Pa", "22 bar"),
    "temperature": ("K", "538 degC"),
    "temperature_difference": ("K", "2.8 K"),
    "mass_flow": ("kg/s", "280 kg/s"),
    "power": ("W", "350 MW"),
    "area": ("m^2", "8.5 m^2"),
    "length": ("m", "25.4 mm"),
    "specific_enthalpy": ("J/kg", "25 kJ/kg"),
    "velocity": ("m/s", "250 m/s"),
    "fraction": ("", "3 %"),
    "heat_transfer_coefficient_area": ("W/K", "2.5 MW/K"),
}


def _article(dimension: str) -> str:
    return "an" if dimension[0] in "aeiou" else "a"


def _what_unit(unit: str, dimension: str) -> str:
    """Say what the user's unit measures, for a wrong-dimension message."""
    if not unit:
        return " (no unit)"
    ureg = _registry()
    try:
        q = ureg.Quantity(1.0, unit.replace("^", "**"))
    except Exception:  # pint raises several types for an unknown unit
        return f" ({unit!r} is not a unit partload knows)"
    for name, (si, _example) in DIMENSIONS.items():
        if name in ("fraction", "temperature_difference", "pressure_difference"):
            continue
        try:
            q.to(si.replace("^", "**"))
        except Exception:  # not this dimension
            continue
        return f", which is {_article(name)} {name.replace('_', ' ')}"
    return f" ({unit!r} is not a unit of {dimension.replace('_', ' ')})"


def _split(text: str, where: Where) -> tuple[float, str]:
    m = _NUMBER.match(text)
    if not m:
        raise where.error(f"cannot read {text!r} as a number with a unit")
    return float(m.group(1)), m.group(2)


def parse(value, dimension: str, where: Where, atmosphere: float | None = None) -> float:
    """Convert a value from a file to its SI number.

    Parameters
    ----------
    value
        A string such as ``"166 bar"``; a bare number is accepted only for
        ``fraction`` (where it means the fraction itself, 0.03 = 3 %).
    dimension
        One of :data:`DIMENSIONS`.
    where
        Location used in the error message.
    atmosphere
        Local atmospheric pressure [Pa], needed for gauge units.

    Returns
    -------
    float
        The value in SI units (see the module docstring).
    """
    if dimension not in DIMENSIONS:  # a bug, not a user mistake
        raise ValueError(f"unknown dimension {dimension!r}")
    example = DIMENSIONS[dimension][1]
    if isinstance(value, bool):
        raise where.error(f"expected {_article(dimension)} {dimension.replace('_', ' ')} such "
                          f"as {example!r}, got {value!r}")
    if isinstance(value, (int, float)):
        if not math.isfinite(value):
            raise where.error(f"{value!r} is not a finite number")
        if dimension == "fraction":
            return float(value)
        raise where.error(
            f"a {dimension.replace('_', ' ')} needs a unit, for example {example!r}; "
            f"got the bare number {value!r}")
    if not isinstance(value, str):
        raise where.error(f"expected {_article(dimension)} {dimension.replace('_', ' ')} such "
                          f"as {example!r}, got {value!r}")
    number, unit = _split(value, where)
    if dimension == "pressure" and unit == "psi":
        raise where.error(f"{value!r}: write 'psia' (absolute) or 'psig' (gauge); bare 'psi' "
                          f"is read both ways in practice")
    if dimension == "fraction":
        if unit in ("", "-"):
            return number
        if unit in ("%", "percent"):
            return number / 100.0
        raise where.error(f"expected a fraction such as 0.03 or '3 %', got {value!r}")
    if dimension == "temperature_difference":
        factors = {"K": 1.0, "degC": 1.0, "delta_degC": 1.0, "°C": 1.0,
                   "degF": 5.0 / 9.0, "delta_degF": 5.0 / 9.0, "°F": 5.0 / 9.0,
                   "R": 5.0 / 9.0}
        if unit not in factors:
            raise where.error(f"expected a temperature difference such as '2.8 K' or "
                              f"'5 degF', got {value!r}")
        return number * factors[unit]
    if dimension == "pressure" and unit.lower() in _GAUGE:
        if atmosphere is None:
            raise where.error(
                f"{value!r} is a gauge pressure; state the local atmospheric pressure "
                f"(key 'atmospheric_pressure' in the file's [about] table) or use an "
                f"absolute unit such as bar or psia")
        number_abs = parse(f"{number} {_GAUGE[unit.lower()]}", "pressure", where)
        return number_abs + atmosphere
    fast = _FAST.get(unit)
    if fast is not None and dimension in fast[0]:
        result = number * fast[1] + fast[2]
    else:
        ureg = _registry()
        try:
            q = ureg.Quantity(number, unit.replace("^", "**") if unit else "dimensionless")
            si = q.to(DIMENSIONS[dimension][0].replace("^", "**"))
        except Exception:  # pint raises several types; all mean the same to the user
            raise where.error(
                f"expected {_article(dimension)} {dimension.replace('_', ' ')} such as "
                f"{example!r}, got {value!r}{_what_unit(unit, dimension)}") from None
        result = float(si.magnitude)
    if not math.isfinite(result):
        raise where.error(f"{value!r} is not a finite number")
    if dimension in ("temperature", "pressure") and result <= 0.0:
        raise where.error(f"{value!r} is not above absolute zero")
    if dimension == "pressure_difference" and result < 0.0:
        raise where.error(f"{value!r} is negative; a pressure drop is zero or positive")
    return result


def linear_factors(unit: str, dimension: str, where: Where) -> tuple[float, float]:
    """The conversion of numbers written in ``unit``, e.g. the unit of a table column.

    Parameters
    ----------
    unit
        The unit as written, e.g. ``"kPa"``, ``"degC"`` or ``"%"`` (``""`` for a
        bare fraction) [-].
    dimension
        One of :data:`DIMENSIONS` [-].
    where
        Location used in the error message [-].

    Returns
    -------
    tuple[float, float]
        ``(a, b)`` so that ``si = a * value + b`` [SI unit per ``unit``, SI unit];
        ``b`` is nonzero only for temperatures with an offset (``degC``, ``degF``).
        Both come from :func:`parse` of one and two of ``unit``, so a column
        accepts exactly the units a single value does (gauge pressures excepted:
        there is no atmosphere to add).
    """
    y1 = parse(f"1 {unit}".strip(), dimension, where)
    y2 = parse(f"2 {unit}".strip(), dimension, where)
    return y2 - y1, 2.0 * y1 - y2


def format_like(si: float, dimension: str, value) -> str:
    """Write the SI number ``si`` in the unit the user wrote ``value`` in.

    Used to state a bound in an error message in the user's own terms, e.g.
    ``format_like(1073.15, "temperature", "900 degC")`` gives ``"800 degC"``.
    Falls back to the SI unit when the user's unit is a gauge unit, a bare
    number or cannot be read.

    Parameters
    ----------
    si
        The value in SI units (see the module docstring).
    dimension
        One of :data:`DIMENSIONS`.
    value
        What the user wrote, such as ``"900 degC"``.

    Returns
    -------
    str
        The number to four significant figures with a unit.
    """
    si_unit = DIMENSIONS[dimension][0]
    if dimension == "fraction":
        return f"{si * 100:.4g} %"
    unit = ""
    if isinstance(value, str):
        m = _NUMBER.match(value)
        unit = m.group(2) if m else ""
    if unit and unit.lower() not in _GAUGE and dimension != "temperature_difference":
        try:
            q = _registry().Quantity(si, si_unit.replace("^", "**")).to(unit.replace("^", "**"))
            return f"{float(q.magnitude):.4g} {unit}"
        except Exception:  # pint raises several types; fall back to SI
            pass
    return f"{si:.4g} {si_unit}"



# SI unit -> (display unit, factor, offset): display = SI * factor + offset.
# Units not listed (kg/s, m/s, m^2, "-") are shown as they are.
DISPLAY = {
    "Pa": ("bar", 1e-5, 0.0),
    "K": ("degC", 1.0, -273.15),
    "J/kg": ("kJ/kg", 1e-3, 0.0),
    "J/(kg K)": ("kJ/(kg K)", 1e-3, 0.0),
    "W": ("MW", 1e-6, 0.0),
    "J/J": ("kJ/kWh", 3600.0, 0.0),
    "kg/J": ("kg/kWh", 3.6e6, 0.0),
}

# US customary display units.  Factors from NIST Special Publication 811
# (B. N. Taylor and A. Thompson, "Guide for the Use of the International System
# of Units (SI)", NIST SP 811, 2008 edition, Appendix B.8 and B.9): pound
# (avoirdupois) = 0.45359237 kg (exact), British thermal unit (International
# Table) = 1055.05585262 J (exact), pound-force per square inch =
# 6894.757293168 Pa (from the exact lbf and inch), foot = 0.3048 m (exact),
# inch of mercury (conventional) = 3386.389 Pa, degF = K * 1.8 - 459.67 (exact).
LB = 0.45359237  # [kg]
BTU = 1055.05585262  # [J], International Table
PSI = 6894.757293168  # [Pa], lbf/in^2
INHG = 3386.389  # [Pa], conventional inch of mercury
FOOT = 0.3048  # [m]
DISPLAY_US = {
    "Pa": ("psia", 1.0 / PSI, 0.0),
    "K": ("degF", 1.8, -459.67),
    "J/kg": ("Btu/lb", LB / BTU, 0.0),
    "J/(kg K)": ("Btu/(lb degR)", LB / BTU / 1.8, 0.0),
    "W": ("MW", 1e-6, 0.0),
    "J/J": ("Btu/kWh", 3.6e6 / BTU, 0.0),
    "kg/J": ("lb/kWh", 3.6e6 / LB, 0.0),
    "kg/s": ("klb/h", 3600.0 / LB / 1000.0, 0.0),
    "m/s": ("ft/s", 1.0 / FOOT, 0.0),
    "m^2": ("ft^2", 1.0 / FOOT**2, 0.0),
    "m^3/kg": ("ft^3/lb", LB / FOOT**3, 0.0),
}

#: the display systems: name -> table of display units
SYSTEMS = {"metric": DISPLAY, "us": DISPLAY_US}

# a back (exhaust, condenser) pressure is shown in its own unit: these names
# of quantities are back pressures
BACK_PRESSURE_NAMES = ("exhaust_pressure", "condenser_pressure", "back_pressure")
BACK_PRESSURE = {"metric": ("kPa", 1e-3, 0.0), "us": ("inHg", 1.0 / INHG, 0.0)}
# a temperature difference (a column whose display rule is "K") in each system
DIFFERENCE = {"metric": ("K", 1.0), "us": ("delta_degF", 1.8)}


def to_display_unit(values, si_unit: str, display: str | None = None,
                    system: str = "metric", quantity: str | None = None
                    ) -> tuple[np.ndarray, str]:
    """Convert SI values to the display unit of a system of :data:`SYSTEMS`.

    Metric (:data:`DISPLAY`): pressure to bar, temperature to degC, specific
    enthalpy to kJ/kg, entropy to kJ/(kg K), power to MW, heat rate (J/J) to
    kJ/kWh, steam rate (kg/J) to kg/kWh.  US customary (:data:`DISPLAY_US`):
    psia, degF, Btu/lb, Btu/(lb degR), MW, Btu/kWh, lb/kWh, klb/h, ft/s, ft^2,
    ft^3/lb.  A back pressure (``quantity`` in :data:`BACK_PRESSURE_NAMES`) in
    kPa or inHg; a pressure drop (``quantity`` naming a drop) in psi, not
    psia.  A temperature in K is taken as a temperature, not a difference:
    keep differences (TTD, DCA) out of this function, or give them their
    display rule ``"K"``.

    Parameters
    ----------
    values
        Number or array in the SI unit ``si_unit`` [si_unit].
    si_unit
        The SI unit of ``values``, as in :data:`DISPLAY` [-].
    display
        A declared column's own rule (``Column.display``), which comes first:
        ``"%"`` shows a fraction in per cent; ``"K"`` a temperature
        difference (K, or delta_degF in US units); any other unit keeps the
        values as they are in it [-].
    system
        ``"metric"`` (default) or ``"us"`` [-].
    quantity
        The name of the quantity (``"exhaust_pressure"``), for the few shown
        by name rather than by unit [-].

    Returns
    -------
    values, unit : tuple
        The converted float array [display unit] and the display unit; the
        values as a float array and ``si_unit`` unchanged when the system
        has no rule for ``si_unit``.
    """
    v = np.asarray(values, dtype=float)
    if system not in SYSTEMS:  # a bug, not a user mistake: the edges check the choice
        raise ValueError(f"unknown units system {system!r}")
    if display == "%":
        return v * 100.0, "%"
    if display == "K" and si_unit in ("K", ""):
        unit, factor = DIFFERENCE[system]
        return v * factor, unit
    if display is not None:
        return v, display
    if si_unit == "Pa" and quantity in BACK_PRESSURE_NAMES:
        unit, factor, offset = BACK_PRESSURE[system]
        return v * factor + offset, unit
    if si_unit == "Pa" and system == "us" and quantity and "drop" in quantity:
        return v / PSI, "psi"  # a difference of pressures is not absolute
    table = SYSTEMS[system]
    if si_unit in table:
        unit, factor, offset = table[si_unit]
        return v * factor + offset, unit
    return v, si_unit
