"""Plant components: one module per kind, each declaring its model-file table,
calibration, part of the equations, case settings, tunables and result
columns (the protocol of :mod:`simulator.components.base`), and the registry
that maps a table name to its kind."""

from .base import Column, Component, ReadContext, Setting, SteamPathComponent, Tunable
from .condenser import Condenser, CondenserState
from .control_valve import ControlValve
from .extraction import EXTRACTION_CONTROLS, Extraction
from .feed_pump_turbine import FeedPumpTurbine
from .generator import Generator
from .governing_stage import GoverningStage
from .heater import HEATER_TYPES, TTD_METHODS, Heater
from .inlet_header import InletHeader
from .leakoff import Leakoff
from .pipe import Pipe
from .plant_balance import HEATING_VALUES, Auxiliaries, Boiler
from .pump import Pump
from .registry import KINDS, kind_of_results, register, unregister
from .reheater import Reheater
from .stage_group import ExhaustEnd, StageGroup
from .throttle_valve import ThrottleValve

__all__ = [
    "Column", "Component", "ReadContext", "Setting", "SteamPathComponent", "Tunable",
    "KINDS", "register", "unregister", "kind_of_results",
    "Auxiliaries", "Boiler", "HEATING_VALUES", "Condenser", "CondenserState",
    "ControlValve", "Extraction", "EXTRACTION_CONTROLS", "FeedPumpTurbine", "Leakoff",
    "Generator", "GoverningStage", "Heater", "HEATER_TYPES", "InletHeader",
    "TTD_METHODS", "Pipe", "Pump", "Reheater", "StageGroup", "ExhaustEnd", "ThrottleValve",
]
