"""The component protocol: what every kind of plant component declares.

A *kind* of plant component (a stage group, a reheater, a feedwater heater, ...)
is one class in one module of this package.  It declares, in one place:

=====================  =========================================================
declaration            used by
=====================  =========================================================
``table``, ``read``    the model reader: the component's table in the model file,
                       its keys, units, defaults and validation (messages name
                       file, table and key)
``check_design``,      the model reader, once every table is read: one component
``check_kind``         against the design state, all of a kind together
``calibrate``          plant calibration: fix its constants from the design heat
                       balance
``evaluate``           the march of one residual evaluation (steam-path kinds):
                       flow, outlet enthalpy, power, and the law it owns
``frees_node``         a kind at a node whose pressure it sets by its own law (a
                       condenser): ``calibrate_design``, ``node_state`` and
                       ``residual`` give its constants, its state at each
                       evaluation and the node's equation
``reads_totals``       a kind whose results follow from the point's totals
                       (auxiliaries, boiler): its ``point_row`` runs after them
``describe``           the lines ``partload check`` prints for the component
``settings``           the case reader (``[<settings_table>.NAME]`` keys)
``tunables``           constants measured plant data may fit later
``columns``            the point result, the HDF5 layout, console tables, JSON,
                       CSV (one dataset per column under ``/<results>/``)
``part_results``       a second result group with a row per part (the control
                       valves of a governing stage)
=====================  =========================================================

A registry (:mod:`simulator.components.registry`) maps each model-file table
to its kind.  Adding a kind is one physics module (its laws, with sources), one
module here and one registry line.

Steam-path kinds sit on an edge of the turbine graph between two nodes.  Each
either *sets its flow* from the pressures by its own flow law (a stage group:
Stodola's ellipse law), or *passes the net flow* arriving at its inlet node
and owns the pressure-drop law there (valves, reheaters, pipes); the solver
needs nothing else to know about it.

The steam-path kind leaving the throttle node *admits* the steam to the
turbine and governs it (``admits``: the throttle valve, or a governing stage
of nozzle groups).  Under a held throttle pressure it takes whatever pressure
the flow leaves and tells the solver when that flow is beyond what it can pass
wide open (``over_capacity``); ``valve_drop`` gives its valves' pressure drop.
A kind with no valves of its own (an inlet header) cannot take what the flow
leaves: ``held_refusal`` says why a held-pressure flow other than the one the
turbine swallows is refused.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import ClassVar

__all__ = ["Column", "Setting", "Tunable", "Component", "SteamPathComponent", "ReadContext"]



@dataclass(frozen=True)
class Column:
    """One result a component gives at every solved point.

    ``name`` is the dataset name (``/<results>/<name>`` in a result file) and the
    key in JSON; ``unit`` its SI unit (``"-"`` dimensionless, ``""`` for text and
    flags); ``dtype`` a numpy dtype string, or ``"text"``; ``display`` how it is
    shown where not in the display unit of its SI unit
    (:data:`simulator.units.DISPLAY`).
    """

    name: str
    unit: str
    description: str
    dtype: str = "f8"
    when_out: bool = True  # meaningful for a component out of service
    display: str | None = None  # "%" for a fraction shown in per cent; "K" for a
    # temperature difference kept in K; None: the display unit of the SI unit
    label: str = ""  # short heading of console tables (default: the name)
    console: bool = True  # shown in console tables
    words: tuple[str, str] = ("no", "yes")  # a flag's 0 and 1 in console tables


@dataclass(frozen=True)
class Setting:
    """A value a case file may set for one component, in ``[<settings_table>.NAME]``.

    ``dimension`` is a :data:`simulator.units.DIMENSIONS` name (a quantity with
    its unit, between ``lo`` and ``hi`` in SI), ``"number"`` (a plain number),
    ``"choice"`` (one of ``choices``) or ``"flag"`` (true or false).
    """

    name: str
    dimension: str
    description: str
    choices: tuple[str, ...] = ()
    lo: float | None = None
    hi: float | None = None

    def read(self, reader):
        """The value in ``reader``'s table, or ``None`` when absent or wrong."""
        if self.dimension == "choice":
            return reader.string(self.name, default=None, choices=self.choices)
        if self.dimension == "flag":
            return reader.boolean(self.name, default=None)
        if self.dimension == "number":
            return reader.number(self.name, default=None, lo=self.lo, hi=self.hi)
        return reader.quantity(self.name, self.dimension, default=None, lo=self.lo, hi=self.hi)


@dataclass(frozen=True)
class Tunable:
    """A calibrated constant that measured plant data may fit.

    ``attribute`` is the component attribute holding it, in ``unit``; ``lo``
    and ``hi`` bound a fitted value.
    """

    name: str
    attribute: str
    unit: str
    description: str
    lo: float = -math.inf
    hi: float = math.inf


@dataclass
class ReadContext:
    """What a kind's reader needs besides its own table.

    ``reader(data, table)`` makes a :class:`~simulator.inputs.reading.TableReader`
    that adds its problems to the file's list; ``curves`` are the exhaust-loss
    curves of ``[exhaust.loss_curves]``; ``steam`` the property backend.
    """

    file: str
    reader: object
    problems: object
    curves: dict
    steam: object
    atmosphere: float | None = None
    throttle_node: str | None = None
    design_pressure: dict | None = None  # [Pa] of every node, once [nodes] is read


class Component:
    """Base of every kind: its declarations.

    Class attributes
    ----------------
    table : the model-file table (``[[stage_group]]``: ``"stage_group"``)
    many : ``True`` for a list of tables (``[[...]]``), ``False`` for one table
    required : a single table the model file must have
    title : the kind in words, for messages
    results : result group name (``"stage_groups"``), ``None`` for no per-point results
    columns, settings, tunables : see the module docstring
    settings_table : the case file's table of per-component settings
    """

    table: ClassVar[str] = ""
    many: ClassVar[bool] = True
    required: ClassVar[bool] = False
    title: ClassVar[str] = ""
    results: ClassVar[str | None] = None
    columns: ClassVar[tuple[Column, ...]] = ()
    settings: ClassVar[tuple[Setting, ...]] = ()
    settings_table: ClassVar[str | None] = None
    tunables: ClassVar[tuple[Tunable, ...]] = ()
    # a second result group with one row per part of the component (the control
    # valves of a governing stage): its name, columns, row names and rows
    part_results: ClassVar[str | None] = None
    part_columns: ClassVar[tuple[Column, ...]] = ()
    # a kind at a node whose pressure it sets by its own law (a condenser at an
    # exhaust node): the pressure becomes an unknown and the law its residual.
    # Such a kind provides calibrate_design(duty, p, steam, circuit_duty),
    # node_state(duty, march, upstream, circuit_duty) -> record and
    # residual(p, record, steam) -> float; its record reaches point_row as
    # point.records[name]
    frees_node: ClassVar[bool] = False
    # a kind whose results follow from the point's totals (net output, fuel): its
    # point_row runs after the totals, and the point view gives ``totals``,
    # ``tables`` (the tables built before it), ``rating`` and ``setting``
    reads_totals: ClassVar[bool] = False

    name: str

    @property
    def where(self) -> str:
        """The component's table in words for messages: ``stage_group 'HP1'``."""
        return f"{self.table} '{self.name}'" if self.many else self.table

    @classmethod
    def read_all(cls, top, ctx: ReadContext) -> list:
        """Every component of this kind in the model file.

        ``top`` is the reader of the whole file; problems go to the file's list.
        """
        out = []
        if cls.many:
            tables = [(f"{cls.table}[{i}]", item)
                      for i, item in enumerate(top.table_list(cls.table))]
        elif top.has(cls.table):
            tables = [(cls.table, top.raw(cls.table))]
        else:
            tables = []
            if cls.required:
                ctx.problems.add(top.where.sub(cls.table).error("missing required table"))
        for table, item in tables:
            c = cls.read(ctx.reader(item, table), ctx)
            if c is not None:
                out.append(c)
        return out

    @classmethod
    def read(cls, reader, ctx: ReadContext):
        """One component from its table, or ``None`` when a required key is bad."""
        raise NotImplementedError

    @classmethod
    def check_kind(cls, comps: list, ctx: ReadContext, exhaust_nodes: list[str]) -> None:
        """Checks of all components of this kind together (names, order, nodes);
        problems go to ``ctx.problems``."""

    def check_design(self, ctx: ReadContext) -> None:
        """Checks of the read component against the design state of the file
        (``ctx.design_pressure``); problems go to ``ctx.problems``."""

    def apply_settings(self, values: dict, where, target) -> None:
        """Put a case's settings of this component (``values``: setting name -> SI
        value, absent ones left out) into ``target`` (a
        :class:`simulator.plant.case.SettingsTarget`); problems name ``where``.

        By default every value is kept as a generic setting, which the kind reads
        back with ``march.setting(self, name, default)`` when it evaluates."""
        for key, value in values.items():
            if value is not None:
                target.settings.append((self.settings_table, self.name, key, value))

    def point_row(self, point) -> tuple:
        """Values of :attr:`columns` at a solved point (kinds off the steam path);
        ``point`` is a :class:`simulator.solve.build.PointView`."""
        return ()

    def describe(self) -> list[str]:
        """Lines for ``partload check``: the constants this component works with
        beyond those of its kind's table of results (calibrated values and the
        defaults it took), so nothing it assumes is hidden."""
        return []

    def part_names(self) -> list[str]:
        """Row names of :attr:`part_results` (the parts of this component)."""
        return []

    def part_rows(self, record) -> list[tuple]:
        """Values of :attr:`part_columns` for each part, from the march ``record``."""
        return []


class SteamPathComponent(Component):
    """A kind that joins two nodes of the steam path (an edge of the graph).

    ``sets_flow`` is ``True`` for a kind with its own flow law (its flow follows
    from the pressures at its ends, and its inlet node keeps a mass balance) and
    ``False`` for a kind that passes the whole net flow of its inlet node (its
    pressure-drop law is the residual there, and it must be the only component
    leaving that node).
    """

    sets_flow: ClassVar[bool] = False
    expands: ClassVar[bool] = False  # expands the steam through blading (needs a falling
    # pressure at every answer)
    admits: ClassVar[bool] = False  # leaves the throttle node and governs the admission
    drives_generator: ClassVar[bool] = True  # its power turns the generator (not a pump)
    # its flow is an unknown of the point (a feed-pump turbine: the flow its pump's power
    # needs); it reads it as march.component_flow[name] and gives residual(power,
    # pump power) after the water side
    flow_unknown: ClassVar[bool] = False
    # joins two nodes of equal design pressure (an inlet header with no line drop)
    keeps_pressure: ClassVar[bool] = False
    # the key of the model file naming this component's inlet / outlet node
    inlet_key: ClassVar[str] = "from"
    outlet_key: ClassVar[str] = "to"
    calibration_key: ClassVar[str] = "to"  # key named when calibration fails here

    inlet: str
    outlet: str

    def calibrate(self, m: float, p_in: float, h_in: float, p_out: float, steam,
                  model) -> float:
        """Fix the constants at design flow ``m`` [kg/s] between ``(p_in, h_in)``
        [Pa, J/kg] and ``p_out`` [Pa]; return the outlet enthalpy [J/kg]."""
        raise NotImplementedError

    def evaluate(self, march, i: int, j: int, m_net: float):
        """One step of the march from node index ``i`` to ``j``.

        ``march`` gives ``steam``, the node pressures ``p`` and enthalpies ``h``
        and the conditions of the point.  Kinds that set their flow return
        ``(m, h_out, power, record)``; kinds that pass ``m_net`` return
        ``(h_out, dp, power, record)`` with ``dp`` the drop [Pa] their law
        requires, or ``None`` while they hold their inlet pressure (or, as the
        admission under a held throttle pressure, take what is left), and
        ``power`` [W] the work they take from the steam (0 for valves and lines).

        A step reads only ``march.p[i]``, ``march.p[j]``, ``march.h[i]``, the
        saturation enthalpies the march keeps at ``i`` (``march.hv``,
        ``march.hl``), ``m_net`` (kinds that pass it; a kind that sets its flow
        does not read it), its own unknown flow (``flow_unknown`` kinds) and the
        point's fixed conditions: the Jacobian moves exactly these
        (:mod:`simulator.solve.tangent`).
        """
        raise NotImplementedError

    def over_capacity(self, record, p_in: float, p_out: float) -> bool:
        """Admission kinds: whether at a held throttle pressure ``p_in`` [Pa] the
        flow of ``record`` needs more than the valves wide open pass to ``p_out`` [Pa]."""
        raise NotImplementedError

    def valve_drop(self, record, p_in: float, p_out: float) -> float:
        """Admission kinds: the pressure drop [Pa] across the admitting valves."""
        raise NotImplementedError

    def held_refusal(self, record, p_in: float, p_out: float) -> str | None:
        """Admission kinds: why the flow of ``record`` (its march record) [-] cannot
        pass at a held throttle pressure ``p_in`` [Pa] with ``p_out`` [Pa] after it,
        whatever the limit
        checks, or ``None`` when it can.  Valves take whatever drop the flow leaves
        (``None``); a kind with no valves (an inlet header) passes only the flow
        the turbine swallows."""
        return None

    def result_row(self, record, m: float, p_in: float, h_in: float, p_out: float,
                   h_out: float) -> tuple:
        """Values of :attr:`columns` at a solved point, from the march ``record``."""
        return ()
