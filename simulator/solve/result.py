"""The result of one operating point: tables of declared columns, and totals.

Every per-component result is a :class:`ResultTable` whose columns are those
the component's kind declares (:attr:`simulator.components.Component.columns`);
node states and totals are declared here.  Console tables, JSON, the HDF5
layout and CSV are generated from these declarations, so a new kind's results
appear everywhere without further code.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np

from ..components.base import Column

__all__ = ["PointResult", "ResultTable", "NODE_COLUMNS", "STEAM_PATH_COLUMNS", "TOTALS",
           "UNITS"]

NODE_COLUMNS = (
    Column("pressure", "Pa", "pressure at each node"),
    Column("temperature", "K", "temperature at each node"),
    Column("enthalpy", "J/kg", "specific enthalpy at each node"),
    Column("entropy", "J/(kg K)", "specific entropy at each node"),
    Column("quality", "-", "steam quality at each node (1 dry or superheated; moisture = "
           "1 - quality)", display="%"),
)

# every steam-path component, whatever its kind: for balances and diagrams
STEAM_PATH_COLUMNS = (
    Column("flow", "kg/s", "steam flow"),
    Column("power", "W", "power taken from the steam"),
    Column("heat", "W", "heat added to the steam"),
)

# every total a point can report, in the order of tables and files
TOTALS = (
    Column("throttle_flow", "kg/s", "throttle steam flow"),
    Column("throttle_pressure", "Pa", "throttle pressure"),
    Column("throttle_temperature", "K", "throttle temperature"),
    Column("valve_pressure_drop", "Pa", "pressure drop across the throttle valves"),
    Column("shaft_power", "W", "shaft power of all stage groups"),
    Column("generator_output", "W", "generator output"),
    Column("generator_and_mechanical_losses", "W", "generator and mechanical losses"),
    Column("steam_rate", "kg/J", "throttle flow over generator output"),
    Column("exhaust_loss_power", "W", "exhaust loss"),
    Column("exhaust_moisture", "-", "largest exhaust moisture", display="%"),
    Column("exhaust_flow", "kg/s", "steam flow to the exhaust"),
    Column("reheat_heat", "W", "heat added in the reheater"),
    Column("final_feedwater_temperature", "K", "final feedwater temperature"),
    Column("heat_added", "W", "heat added in the boiler and reheater"),
    Column("heat_rate", "J/J", "turbine-cycle heat rate, gross: heat added to the steam over "
           "generator output, pump work in the feedwater (ASME PTC 6 terms; J/J, x 3600 = "
           "kJ/kWh)", label="turbine-cycle heat rate (gross)"),
    Column("pump_power", "W", "shaft power of all pumps of the feedwater train"),
    Column("reheater_spray_flow", "kg/s", "attemperator spray into the reheater (only with "
           "a spray)"),
    Column("superheater_spray_flow", "kg/s", "attemperator spray into the superheater (only "
           "with a spray)"),
    Column("spray_water_enthalpy", "J/kg", "enthalpy of the spray water after the spray pump "
           "(only with a spray)"),
    Column("pump_drive_turbine_power", "W", "power of the turbines that drive pumps "
           "(feed-pump turbines; only with one)"),
    Column("turbine_driven_pump_power", "W", "shaft power of the pumps driven by those "
           "turbines (not charged as auxiliary power)"),
    Column("makeup_flow", "kg/s", "makeup water flow"),
    Column("condenser_duty", "W", "heat rejected in the condenser"),
    Column("heater_heat_loss", "W", "heat lost by the heaters"),
    Column("process_steam_energy", "W", "energy leaving with process steam, less makeup"),
    Column("heat_rate_power", "J/J", "turbine-cycle heat rate of power: heat chargeable to "
           "power (heat added less net process-steam energy) over generator output (J/J; "
           "x 3600 = kJ/kWh)", label="turbine-cycle heat rate of power"),
    Column("energy_imbalance", "W", "cycle energy balance error (a check; near 0)",
           display="W"),
)

# SI units of every quantity in a PointResult, by quantity
UNITS = {
    "pressure": "Pa", "temperature": "K", "enthalpy": "J/kg", "entropy": "J/(kg K)",
    "moisture": "-", "flow": "kg/s", "efficiency": "-", "isentropic_drop": "J/kg",
    "power": "W", "velocity": "m/s", "exhaust_loss": "J/kg", "heat_rate": "J/J",
    "steam_rate": "kg/J",
}


@dataclass
class ResultTable:
    """Results of the components of one kind (or of the nodes) at one point.

    ``names`` of the rows; ``columns`` maps each declared column name to its
    values (a float array, or a list for text); ``declared`` the column
    declarations; ``inlet``/``outlet`` the end nodes of steam-path rows,
    ``node`` the node of an extraction.
    """

    names: list[str]
    columns: dict[str, object]
    declared: tuple[Column, ...]
    inlet: list[str] | None = None
    outlet: list[str] | None = None
    node: list[str] | None = None

    def row(self, name: str) -> dict:
        """One row as ``{column: value}``."""
        i = self.names.index(name)
        return {k: v[i] for k, v in self.columns.items()}

    def rows(self) -> dict[str, dict]:
        """Every row as ``{name: {column: value}}``."""
        return {n: self.row(n) for n in self.names}


def _column(table: str, column: str, doc: str):
    def get(self):
        return self.tables[table].columns[column]
    return property(get, doc=doc)


def _names(table: str, what: str = "names"):
    def get(self):
        return getattr(self.tables[table], what)
    return property(get)


@dataclass
class PointResult:
    """Everything predicted for one operating point (SI units).

    ``tables`` maps a result group (``"nodes"``, ``"steam_path"`` and each
    kind's :attr:`~simulator.components.Component.results`) to its
    :class:`ResultTable`; ``totals`` maps each name of :data:`TOTALS` the point
    has to its value.  ``heaters`` keeps the water side's state of every heater.
    The attributes below the table (``node_p``, ``group_flow``, ...) are views
    of the tables, kept for scripts.
    """

    converged: bool
    iterations: int
    residual: float
    evaluations: int
    message: str
    model_name: str
    valve_mode: str
    pressure_mode: str
    backend: str
    tables: dict[str, ResultTable]
    totals: dict[str, float]
    heaters: list = field(default_factory=list)
    unknowns: np.ndarray = field(repr=False, default=None)  # the solved unknowns of Newton
    jacobian: np.ndarray = field(repr=False, default=None)
    flow_ratio: float = 1.0
    unknowns_slope: np.ndarray = field(repr=False, default=None)
    unknowns_curvature: np.ndarray = field(repr=False, default=None)
    slope_from: float = math.nan  # flow ratio of the point the slope was taken from
    wide_open_valves: frozenset = frozenset()
    # at a held throttle pressure, the flow is more than the admitting valves pass wide
    # open (a what-if solved with the limit checks off)
    over_capacity: bool = False
    program_held: bool = False  # pressure program: the throttle pressure held at a bound

    @property
    def governing(self) -> str:
        """``"sliding"`` pressure or ``"throttle"`` governing (fixed pressure)."""
        return "throttle" if self.pressure_mode == "fixed" else "sliding"

    def table(self, group: str) -> dict[str, dict]:
        """The rows of one result group as ``{name: {column: value}}``."""
        return self.tables[group].rows() if group in self.tables else {}

    def node(self, name: str) -> dict:
        i = self.node_names.index(name)
        return {"p": self.node_p[i], "T": self.node_T[i], "h": self.node_h[i],
                "s": self.node_s[i], "x": self.node_x[i]}

    def group(self, name: str) -> dict:
        i = self.group_names.index(name)
        return {"flow": self.group_flow[i], "eta": self.group_eta[i],
                "power": self.group_power[i], "dh_s": self.group_dh_s[i]}

    # views kept for scripts and checks
    node_names = _names("nodes")
    node_p = _column("nodes", "pressure", "node pressures [Pa]")
    node_T = _column("nodes", "temperature", "node temperatures [K]")
    node_h = _column("nodes", "enthalpy", "node enthalpies [J/kg]")
    node_s = _column("nodes", "entropy", "node entropies [J/(kg K)]")
    node_x = _column("nodes", "quality", "node steam qualities [-]")
    group_names = _names("stage_groups")
    group_inlet = _names("stage_groups", "inlet")
    group_outlet = _names("stage_groups", "outlet")
    group_flow = _column("stage_groups", "flow", "[kg/s]")
    group_eta = _column("stage_groups", "efficiency", "[-]")
    group_dh_s = _column("stage_groups", "isentropic_drop", "[J/kg]")
    group_power = _column("stage_groups", "power", "[W]")
    group_velocity = _column("stage_groups", "annulus_velocity", "[m/s]")
    group_exhaust_loss = _column("stage_groups", "exhaust_loss", "[J/kg]")
    group_moisture_out = _column("stage_groups", "outlet_moisture", "[-]")
    extraction_names = _names("extractions")
    extraction_nodes = _names("extractions", "node")
    extraction_control = _column("extractions", "control", "how each bleed is set")
    extraction_flow = _column("extractions", "flow", "[kg/s]")
    extraction_p = _column("extractions", "pressure", "[Pa]")
    extraction_h = _column("extractions", "enthalpy", "[J/kg]")
