"""The feedwater train's description: its order of heaters and pumps from the
condenser to the boiler, and the boiler's pressure drop (``[feedwater]``)."""

from __future__ import annotations

from dataclasses import dataclass, field

from ..physics.feedwater import boiler_pressure_drop
from ..units import Where

__all__ = ["FeedwaterTrain", "BoilerPressureDrop", "read_feedwater"]


@dataclass
class BoilerPressureDrop:
    """Pressure drop from the feed-pump discharge to the throttle: ``dp_design`` [Pa]
    at design flow ``m_design`` [kg/s], scaling with flow squared."""

    dp_design: float = 0.0
    m_design: float = 1.0

    def drop(self, m_dot: float) -> float:
        """The drop [Pa] at feedwater flow ``m_dot`` [kg/s]."""
        return boiler_pressure_drop(m_dot, self.dp_design, self.m_design)


@dataclass
class FeedwaterTrain:
    """The water side: condensate from the ``condenser`` exhaust node through the
    pumps and heaters named in ``order`` (water-flow order) to the boiler."""

    condenser: str
    order: list[str] = field(default_factory=list)
    boiler: BoilerPressureDrop = field(default_factory=BoilerPressureDrop)


def read_feedwater(top, reader, problems, heaters: dict, pumps: dict,
                   design_flow: float | None) -> FeedwaterTrain | None:
    """The ``[feedwater]`` table (required once there are heaters or pumps)."""
    data = top.data
    if not ("feedwater" in data or heaters or pumps):
        return None
    fw = reader(top.raw("feedwater", {}), "feedwater")
    if "feedwater" not in data:
        problems.add(Where(fw.where.file, "feedwater").error(
            "missing required table: heaters and pumps need the feedwater train order"))
    cond = fw.string("condenser")
    order = fw.raw("train", [])
    if not isinstance(order, list) or not all(isinstance(o, str) for o in order):
        problems.add(fw.where.child("train").error("expected a list of heater and pump "
                                                   "names in water-flow order"))
        order = []
    bdp = fw.quantity("boiler_pressure_drop", "pressure_difference", default=0.0)
    fw.finish()
    for j, item in enumerate(order):
        if item not in heaters and item not in pumps:
            problems.add(fw.where.child("train").error(
                f"{item!r} (position {j + 1}) is neither a heater nor a pump"))
    if not cond:
        return None
    return FeedwaterTrain(cond, list(order), BoilerPressureDrop(bdp or 0.0, design_flow or 1.0))
