"""The points of a study plan as numbers (:class:`PointConditions`), each point's
:class:`~simulator.plant.case.Conditions` made when it is asked for: in the study
process and in each worker, from its own model (:mod:`simulator.study.plan`
collects them with :class:`PointCollector`)."""

from __future__ import annotations

import dataclasses
import operator
from collections.abc import Sequence

import numpy as np

from ..plant.case import Conditions, apply_setting, without_unused
from ..plant.model import Model

__all__ = ["PointCollector", "PointConditions", "apply_input"]


def _field_changes(key: str, value: float, model: Model) -> dict | None:
    """The :class:`Conditions` fields one scalar input (SI) sets, or ``None`` for an
    input that is applied to the conditions as a whole (an extraction flow, a
    component setting; see :func:`apply_input`)."""
    if key == "throttle_flow":
        return {"throttle_flow": value, "output": None}
    if key == "throttle_flow_fraction":
        return {"throttle_flow": value * model.throttle.flow, "output": None}
    if key == "output":
        return {"output": value, "throttle_flow": None}
    if key == "output_fraction":
        return {"output": value * model.generator.rating, "throttle_flow": None}
    if "." in key:  # extraction_flow.NAME, or a component setting TABLE.NAME.SETTING
        return None
    return {key: value}


def apply_input(cond: Conditions, key: str, value: float, model: Model) -> Conditions:
    """Set one scalar input (SI) on a copy of ``cond``."""
    changes = _field_changes(key, value, model)
    if changes is not None:
        return dataclasses.replace(cond, **changes)
    if key.startswith("extraction_flow."):
        name = key.split(".", 1)[1]
        controls = dict(cond.extraction_control)
        controls[name] = ("flow", float(value))
        return dataclasses.replace(cond, extraction_control=tuple(sorted(controls.items())))
    return apply_setting(cond, model, key, value)  # see axes.setting_axis


def _point(cond: Conditions, items, model: Model, label: str) -> Conditions:
    """The conditions of one point: ``cond`` with the scalar inputs ``items``
    (``(key, SI value)`` pairs, applied in turn) set, without the values its modes
    have no use for (:func:`~simulator.plant.case.without_unused`) and labelled.

    The same conditions as applying each input with :func:`apply_input`, but the
    inputs that set fields of their own (the load, pressures, temperatures) are
    gathered and set in one copy: a profile of 8,760 rows made three copies a
    row before.  Extraction flows and component settings set fields no other
    input sets (the extraction controls, the settings), so applying them first
    changes nothing.
    """
    changes = {}
    for key, value in items:
        fields = _field_changes(key, value, model)
        if fields is None:
            cond = apply_input(cond, key, value, model)
        else:
            changes.update(fields)
    changes["label"] = label
    return without_unused(dataclasses.replace(cond, **changes))


class PointConditions(Sequence):
    """The conditions of a plan's points, each made when it is asked for.

    Point ``i`` is the base conditions of its block (a series, or the rows of a
    profile with the same heaters out) with the block's scalar inputs set to the
    point's values, and its label (:func:`_point`): the same
    :class:`~simulator.plant.case.Conditions` the plan made while planning.
    Kept as numbers, the 8,760 points of a year take 0.2 MB instead of the
    2 MB of their objects, in the study process and in each worker forked from
    it; a point costs about 4 us to make.  Indexing, slicing (a list) and
    iteration work as on a list.
    """

    def __init__(self, model: Model, blocks: list, block: np.ndarray, values: np.ndarray,
                 labels: list[str]):
        self._model = model
        self._blocks = blocks  # (base Conditions, keys of its scalar inputs) per block
        self._block = block  # [-] block of each point
        self._values = values  # (points, inputs): the inputs' values, SI
        self._labels = labels

    def __len__(self) -> int:
        return len(self._block)

    def __getitem__(self, i):
        n = len(self._block)
        if isinstance(i, slice):
            return [self._make(k) for k in range(*i.indices(n))]
        k = operator.index(i)
        if k < 0:
            k += n
        if not 0 <= k < n:
            raise IndexError(f"point {i} of a plan of {n} points")
        return self._make(k)

    def __eq__(self, other) -> bool:
        if not isinstance(other, Sequence) or len(other) != len(self):
            return NotImplemented if not isinstance(other, Sequence) else False
        return all(a == b for a, b in zip(self, other))

    __hash__ = None

    def __iter__(self):
        for k in range(len(self._block)):
            yield self._make(k)

    def head(self, n: int) -> PointConditions:
        """The first ``n`` points [-]."""
        return self.part(0, n)

    def part(self, start: int, stop: int) -> PointConditions:
        """Points ``start <= i < stop`` [-], still as numbers: what a chunk sends to a
        worker, which makes their conditions with its own model (see
        :meth:`with_model`; pickled, the model is left out)."""
        return PointConditions(self._model, self._blocks, self._block[start:stop],
                               self._values[start:stop], self._labels[start:stop])

    def with_model(self, model: Model) -> PointConditions:
        """The same points, made with ``model`` (a worker's copy of the plan's) [-]."""
        return PointConditions(model, self._blocks, self._block, self._values, self._labels)

    def __getstate__(self) -> dict:
        return {**self.__dict__, "_model": None}

    def _make(self, k: int) -> Conditions:
        if self._model is None:
            raise TypeError("these points came without their model: make them with "
                            "with_model(model) first")
        base, keys = self._blocks[self._block[k]]
        values = self._values[k, :len(keys)].tolist()
        return _point(base, zip(keys, values), self._model, self._labels[k])


class PointCollector:
    """Collects the points of a plan as :class:`PointConditions` while the plan
    is made: :meth:`add` keeps a point's base conditions and the values of its
    scalar inputs."""

    def __init__(self, model: Model, n: int, width: int):
        self.model = model
        self.blocks: list = []
        self._block_of: dict = {}
        self.block = np.empty(n, dtype=np.int32)
        self.values = np.empty((n, width), dtype=np.float64)
        self.n = 0

    def add(self, base: Conditions, items: list) -> None:
        keys = tuple(k for k, _ in items)
        b = self._block_of.get((id(base), keys))
        if b is None:
            b = self._block_of[(id(base), keys)] = len(self.blocks)
            self.blocks.append((base, keys))
        values = [v for _, v in items]
        if any(type(v) is not float for v in values) and self.values.dtype != object:
            self.values = self.values.astype(object)  # kept as given (not made floats)
        self.block[self.n] = b
        self.values[self.n, :len(values)] = values
        self.n += 1

    def conditions(self, labels: list[str]) -> PointConditions:
        return PointConditions(self.model, self.blocks, self.block[:self.n],
                               self.values[:self.n], labels)
