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
    # where attemperator sprays take their water: the pump whose discharge feeds them
    # (the reheater's always; the superheater's too unless it takes final feedwater)
    spray_pump: str | None = None
    superheater_spray_from: str = "final_feedwater"  # or "pump"


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
    order = fw.name_list("train", [], what="heater or pump") or []
    bdp = fw.quantity("boiler_pressure_drop", "pressure_difference", default=0.0)
    spray_pump = fw.string("spray_pump", default=None)
    sh_from = fw.string("superheater_spray_from", default="final_feedwater",
                        choices=("final_feedwater", "pump"))
    fw.finish()
    if spray_pump is not None and spray_pump not in pumps:
        problems.add(fw.where.child("spray_pump").error(
            f"{spray_pump!r} is not a pump of the model"))
    known = True
    for j, item in enumerate(order):
        if item not in heaters and item not in pumps:
            known = False
            problems.add(fw.where.child("train").error(
                f"{item!r} (position {j + 1}) is neither a heater nor a pump"))
    if known:
        for message in train_order_problems(order, heaters, pumps):
            problems.add(fw.where.child("train").error(message))
    if not cond:
        return None
    return FeedwaterTrain(cond, list(order), BoilerPressureDrop(bdp or 0.0, design_flow or 1.0),
                          spray_pump, sh_from or "final_feedwater")


def train_order_problems(order: list[str], heaters: dict, pumps: dict) -> list[str]:
    """Why a water-flow order no plant can have is wrong, one message a mistake.

    Water leaves the condenser, and a deaerator, as saturated liquid at that
    vessel's pressure: heated without first being pumped it would boil, and it
    reaches neither a deaerator at a higher pressure nor the boiler.  So a pump
    must come before the first heater, and after every deaerator a pump must come
    before the next closed heater; the feed pump (``discharge = "boiler"``) comes
    after every deaerator.  ``heaters`` and ``pumps`` map names to components
    (``heater_type``, ``discharge``).
    """
    out = []
    after = "the condenser"  # the last vessel that left the water saturated
    pumped = False
    last_da = None
    for j, item in enumerate(order):
        if item in pumps:
            pumped = True
            if pumps[item].discharge == "boiler":
                last_da = None
            continue
        if not pumped:
            out.append(
                f"heater {item!r} (position {j + 1}) comes after {after} with no pump "
                f"between: the water leaves {after} saturated at its pressure and would boil "
                f"when heated, or could not enter a vessel at a higher pressure; list a pump "
                f"before it (the train runs from the condenser to the boiler)")
            pumped = True  # one message for each unpumped stretch
        if heaters[item].heater_type == "deaerator":
            after, pumped, last_da = f"deaerator {item!r}", False, item
    if last_da is not None:
        out.append(
            f"no feed pump (discharge = 'boiler') follows deaerator {last_da!r}: the "
            f"feedwater leaves it saturated at its own pressure and cannot reach the boiler; "
            f"list the feed pump after it")
    return out
