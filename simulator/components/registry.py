"""The registry of component kinds: model-file table name -> kind.

The order is the order in which the model reader reads the tables and in
which steam-path components leave a node.  Adding a kind is one line here
(or :func:`register` from outside the package, as the tests do).
"""

from __future__ import annotations

from .base import Component
from .condenser import Condenser
from .control_valve import ControlValve
from .extraction import Extraction
from .feed_pump_turbine import FeedPumpTurbine
from .generator import Generator
from .governing_stage import GoverningStage
from .heater import Heater
from .inlet_header import InletHeader
from .leakoff import Leakoff
from .pipe import Pipe
from .plant_balance import Auxiliaries, Boiler
from .pump import Pump
from .reheater import Reheater
from .stage_group import StageGroup
from .throttle_valve import ThrottleValve

__all__ = ["KINDS", "register", "unregister", "kind_of_results"]

KINDS: dict[str, type[Component]] = {
    cls.table: cls
    for cls in (ThrottleValve, GoverningStage, InletHeader, StageGroup, Reheater, Pipe,
                ControlValve, Extraction, Generator, Heater, Pump, Condenser, Auxiliaries, Boiler,
                FeedPumpTurbine, Leakoff)
}


def register(cls: type[Component]) -> type[Component]:
    """Add a kind (usable as a class decorator); its table name must be new."""
    if not cls.table or cls.table in KINDS:
        raise ValueError(f"a kind needs a new table name, not {cls.table!r}")
    KINDS[cls.table] = cls
    return cls


def unregister(table: str) -> None:
    """Remove a kind added by :func:`register`."""
    KINDS.pop(table, None)


def kind_of_results(group: str) -> type[Component] | None:
    """The kind whose per-point results are stored under ``group``."""
    for cls in KINDS.values():
        if cls.results == group:
            return cls
    return None
