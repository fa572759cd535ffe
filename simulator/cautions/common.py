"""What every operating-limit check shares: the caution, the point it looks at,
the words of its messages, and the last stages' states (:mod:`simulator.cautions.checks`)."""

from __future__ import annotations

import math
from dataclasses import dataclass, field

from ..plant.case import Conditions
from ..plant.limits import Limits
from ..plant.model import Model
from ..solve.point import PointResult
from ..steam.if97 import SteamTables
from ..units import FOOT, to_display_unit

__all__ = ["Caution", "Point", "DEFERENCE", "BACK", "pct", "others", "last_groups",
           "last_stage_state", "design_last_stage_volume_flow"]

DEFERENCE = "Engineering estimate; the manufacturer's limits govern."
BACK = "back_pressure"  # the quantity name a back pressure is shown by (kPa, inHg)


@dataclass(frozen=True)
class Caution:
    """One operating limit exceeded at one point.

    Attributes
    ----------
    code
        Which check fired, a key of :data:`CHECKS`.
    message
        Plain words: what, how much against the limit, where, why it matters,
        and that it is an engineering estimate.
    value
        The checked quantity at its worst location [``unit``].
    limit
        The limit it is checked against [``unit``]; NaN when it could not be
        evaluated.
    where
        The node, stage group or component of the worst location.
    unit
        SI unit of ``value`` and ``limit``: ``"-"`` for fractions, ``"K"``,
        ``"kg/s"``.
    """

    code: str
    message: str
    value: float
    limit: float
    where: str
    unit: str

    def to_dict(self) -> dict:
        """A JSON-ready dict (NaN becomes ``None``)."""
        def plain(v: float) -> float | None:
            v = float(v)
            return None if math.isnan(v) else v

        return {"code": self.code, "message": self.message, "value": plain(self.value),
                "limit": plain(self.limit), "unit": self.unit, "where": self.where}


@dataclass
class Point:
    """What every check needs: the model, the request, the answer, properties."""

    model: Model
    cond: Conditions
    result: PointResult
    steam: SteamTables
    limits: Limits
    units: str = "metric"  # the messages' display units: "metric" or "us"
    # what more than one check works out, found once per point (the pressure rises,
    # the last stage groups and their states)
    memo: dict = field(default_factory=dict, repr=False, compare=False)

    def node_index(self, name: str) -> int:
        return self.result.node_names.index(name)

    def last_groups(self) -> list[int]:
        """:func:`last_groups` of the model, found once for the point's checks [-]."""
        if "last_groups" not in self.memo:
            self.memo["last_groups"] = last_groups(self.model)
        return self.memo["last_groups"]

    def last_stage(self, k: int) -> tuple[float, float, float]:
        """:func:`last_stage_state` of stage group ``k`` at the point, found once [-]."""
        key = ("last_stage", k)
        if key not in self.memo:
            self.memo[key] = last_stage_state(self.model, self.result, k, self.steam)
        return self.memo[key]

    def limit_text(self, name: str, shown: str) -> str:
        return f"limit {shown}, {self.limits.source(name)}"

    def q(self, value: float, si_unit: str, spec: str, quantity: str | None = None) -> str:
        """``value`` [``si_unit``] as message text in the point's display units
        (:func:`simulator.units.to_display_unit`; ``quantity`` names a back
        pressure), formatted by ``spec`` (``".4g"``), with its unit."""
        if si_unit == "m^3/s" and self.units == "us":
            return f"{value / FOOT**3:{spec}} ft^3/s"
        v, unit = to_display_unit(value, si_unit, system=self.units, quantity=quantity)
        return f"{float(v):{spec}} {unit}"

    def dt(self, value: float, spec: str) -> str:
        """A temperature difference ``value`` [K] as message text: K, or degF in US
        units."""
        v, _unit = to_display_unit(value, "K", "K", system=self.units)
        return f"{float(v):{spec}} {'degF' if self.units == 'us' else 'K'}"

    def temperature(self, T: float) -> str:
        """A temperature ``T`` [K] as message text, one decimal: degC or degF."""
        return self.q(T, "K", ".1f")


def pct(x: float) -> str:
    return f"{x * 100:.1f} %"


def others(items: list[tuple[str, str]], shown: int = 3) -> str:
    """``"; also a (1 %), b (2 %) and 4 more"`` for further locations beyond a limit."""
    if not items:
        return ""
    text = "; also " + ", ".join(f"{w} ({v})" for w, v in items[:shown])
    if len(items) > shown:
        text += f" and {len(items) - shown} more"
    return text


def last_groups(model: Model) -> list[int]:
    """Indices into ``model.groups`` [-] of the stage groups that end at an exhaust node."""
    ends = set(model.exhaust_nodes)
    return [k for k, c in enumerate(model.groups) if c.outlet in ends]


def last_stage_state(model: Model, result: PointResult, k: int,
                     steam: SteamTables) -> tuple[float, float, float]:
    """Flow, volume flow and used-energy end point leaving stage group ``k`` at a point.

    Taken from the point result: the used-energy end point (UEEP) from the
    group's power, ``h_used = h_in - P / m``; the volume flow at the
    expansion-line end point from the annulus velocity, ``q = V A``, when the
    group has an annulus, else ``q = m v(p_out, h_used)`` (no exhaust loss, so
    the two end points coincide).

    Parameters
    ----------
    model
        The model the point was solved with.
    result
        The solved point.
    k
        Index of the stage group in ``model.groups`` [-].
    steam
        Property backend.

    Returns
    -------
    tuple of float
        ``(m, q, h_used)``: mass flow [kg/s], volume flow [m^3/s], UEEP
        enthalpy [J/kg].
    """
    c = model.groups[k]
    names = result.node_names
    m = float(result.group_flow[k])
    h_in = float(result.node_h[names.index(c.inlet)])
    h_used = h_in - float(result.group_power[k]) / m if m > 0.0 else h_in
    if c.exhaust is not None:
        q = float(result.group_velocity[k]) * c.exhaust.area
    else:
        q = m * steam.v_ph(float(result.node_p[names.index(c.outlet)]), h_used)
    return m, q, h_used


def design_last_stage_volume_flow(model: Model, k: int, steam: SteamTables) -> float:
    """Design volume flow leaving stage group ``k`` at its expansion-line end point.

    From the calibration: the design flow of the group, the design inlet
    enthalpy, and the stated design efficiency, which is the effective (wet)
    efficiency at design, so ``h_ELEP = h_in - eta_design dh_s_design``.

    Parameters
    ----------
    model
        A calibrated model.
    k
        Index of the stage group in ``model.groups`` [-].
    steam
        Property backend.

    Returns
    -------
    float
        Design volume flow [m^3/s].
    """
    c = model.groups[k]
    h_elep = model.design_enthalpy[c.inlet] - c.eta_design * c.dh_s_design
    return model.design_group_flow[c.name] * steam.v_ph(model.design_pressure[c.outlet], h_elep)


