"""Batch studies: sweeps and profiles of operating points, solved with continuation.

A study is a case file with a ``[sweep]`` table, a ``[profile]`` table, or
both.  :func:`plan_study` turns it into a :class:`StudyPlan`: an ordered list
of :class:`~simulator.case.Conditions` cut into chunks of consecutive points.
:func:`run_study` solves the chunks in this process, on a pool of local
processes, or on an existing Dask cluster, and hands each finished chunk (a
:class:`ChunkResult` of plain numpy arrays) to a callback, usually
:meth:`simulator.store.StudyFile.write`.

Sweep (case file)::

    [sweep]
    throttle_flow_fraction = {from = 0.30, to = 1.00, points = 15}
    exhaust_pressure = ["5 kPa", "8 kPa", "11 kPa"]
    heater_out = ["none", "HP8", ["HP7", "HP8"]]

Every key of :data:`AXES` may be an axis: a list of values, a range
``{from = A, to = B, points = N}`` or ``{from = A, to = B, step = S}`` (the
end is included when the steps land on it), or a single value.  Quantities
carry units as in ``[operation]``; fractions are numbers or ``"60 %"``.
``extraction_flow`` is a table of extraction names::

    [sweep.extraction_flow]
    process_steam = ["0 kg/s", "10 kg/s", "25 kg/s"]

``heater_out`` and ``extraction_closed`` name what is out of service at a
point *in addition* to what the case itself takes out; ``"none"`` adds
nothing.  Several axes form their Cartesian product.

Profile (case file)::

    [profile]
    file = "reheat_hourly_profile.csv"     # relative to the case file

The CSV file has one header row naming the columns by the same keys as the
sweep axes, each with its unit in square brackets, e.g.
``time,output [MW],exhaust_pressure [kPa]``.  Fractions need no unit (or
``[%]``); ``heater_out`` and ``extraction_closed`` columns hold names separated
by spaces (empty or ``none``: nothing).  A column ``time`` (or the one named by
``label_column``) is kept as the point label.  Lines starting with ``#`` are
comments.  Every row is one point.  A profile may be combined with a sweep of
other keys (for example ``heater_out = ["none", "HP8"]``): the whole profile is
then run once for every combination of the sweep axes.

Order and continuation
    The points of a study are grouped in *series*: one series per combination
    of all axes but one, the continuation axis (the load axis if there is one,
    else the exhaust pressure, the held throttle pressure, the temperatures,
    the extraction flows, in that order of preference).  Inside a series the
    continuation axis runs in increasing order; a profile runs in file order.
    This is also the order in which points are stored.  Each series is cut
    into *chunks* of at most :data:`CHUNK_MAX` consecutive points; a chunk is
    the unit of work and of storage.  Inside a chunk the points are solved by
    increasing load (:func:`solve_order`; a sweep's chunk already is, a
    profile's is reordered): the first starts from the design-scaled guess and
    every other from the solution of the one solved before it, scaled by the
    ellipse law with a secant predictor along the load, guarded and with
    fallbacks (:class:`~simulator.study.run.Continuation`).
    The chunking depends only on the plan, never on the number of workers, so a
    study gives bit-for-bit the same numbers with one worker, several workers,
    a Dask cluster, or after an interrupted run is resumed.

Modules: :mod:`.axes` (sweep axes), :mod:`.profile` (profile CSV files),
:mod:`.plan` (the plan and its chunks), :mod:`.layout` (the result arrays),
:mod:`.run` (solving a chunk), :mod:`.progress` (progress and summary),
:mod:`.executors` (this process, local processes or Dask).

A point that cannot be solved (:class:`~simulator.errors.SolveError`) is
recorded with its reason and the study goes on; so is an unexpected exception
in one point (recorded as an internal error, to be reported as a bug).
"""

from __future__ import annotations

from ..store.layout import STATUS, Field, ResultLayout, result_layout
from .axes import AXES, MAX_POINTS, Axis, AxisKind, read_sweep
from .executors import run_study
from .plan import CHUNK_MAX, CHUNK_MIN, Chunk, InputColumn, StudyPlan, chunk_size, plan_study
from .profile import ProfileSource, read_profile
from .progress import Progress, StudySummary
from .run import ChunkResult, SolveSpec, solve_chunk, solve_order

__all__ = [
    "AXES",
    "CHUNK_MAX",
    "CHUNK_MIN",
    "MAX_POINTS",
    "STATUS",
    "Axis",
    "AxisKind",
    "Chunk",
    "ChunkResult",
    "Field",
    "InputColumn",
    "ProfileSource",
    "Progress",
    "ResultLayout",
    "SolveSpec",
    "StudyPlan",
    "StudySummary",
    "chunk_size",
    "plan_study",
    "read_profile",
    "read_sweep",
    "result_layout",
    "run_study",
    "solve_chunk",
    "solve_order",
]
