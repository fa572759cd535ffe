"""Result files of batch studies: HDF5, readable with plain h5py.

Result files (HDF5)
===================

A study writes one HDF5 file (``results/<case file name>.h5`` by default).  Every
number in it is in **SI units**, and every numeric dataset says its unit in
its ``unit`` attribute (``"-"`` for dimensionless, ``"J/J"`` for a heat rate:
multiply by 3600 for kJ/kWh) and what it is in its ``description``
attribute.  Text is UTF-8 (read it with ``dataset.asstr()[...]``).  Points are
numbered ``0 .. n-1``: one *series* after the other (one series per
combination of the swept values other than the load), the load increasing
inside a series of a sweep; a profile keeps its file order.

Root attributes
    ``format`` = ``"partload-study"``, ``format_version`` (1), ``software``
    (``"partload"``), ``software_version``, ``created`` (UTC, ISO 8601),
    ``property_backend``, ``units`` (a reminder that all is SI),
    ``model_name``, ``model_file``, ``model_sha256``, ``case_name``,
    ``case_description``, ``case_file``, ``case_sha256``, ``profile_file``
    and ``profile_sha256`` (profile studies), ``throttle_node`` and
    ``valve_outlet_node`` (the throttle valves' nodes),
    ``design_throttle_flow`` [kg/s], ``generator_rating`` [W],
    ``check_limits`` (1: points beyond valves wide open fail; 0: solved as
    what-ifs, ``--beyond-limits``), ``study_kind`` (``sweep``, ``profile`` or
    ``profile+sweep``), ``n_points``, ``limit`` (``--limit N`` of a trial run
    of the first N points; -1: the whole plan), ``n_chunks``, ``chunk_size``,
    ``axes`` (the inputs varied), ``continuation_axis``.
``/model_file``, ``/case_file``, ``/profile_file``
    The full text of the model file, the case file and the profile CSV
    (scalar string datasets), so a result can be reproduced.
``/points/``
    ``done`` (n, uint8): 1 once the point is finished (solved or failed);
    ``label`` (n, text): the point's inputs in words; ``series`` (n, int32)
    with ``series_labels`` (one text per series); ``chunk`` (n, int32): the
    chunk the point was solved in (a chunk's points are solved by increasing
    load, the first from the design-scaled guess, every other from the point
    solved before it).
``/inputs/<name>`` (n)
    What was asked at each point: ``throttle_flow`` [kg/s] or ``output`` [W]
    (the other is NaN), ``governing``, ``throttle_pressure`` [Pa] (NaN under
    sliding pressure), ``throttle_temperature`` [K], ``reheat_temperature``
    [K], ``exhaust_pressure`` [Pa] (design values where the case leaves them
    unset), ``heaters_out_of_service``, ``extractions_closed`` and
    ``extraction_setpoints`` (text), and each swept or profile input that is
    not among these (``throttle_flow_fraction`` [-], ``output_fraction`` [-],
    ``heater_out``, ``extraction_closed``, ``extraction_flow.NAME`` [kg/s];
    for profiles ``profile_line`` and ``time``).
``/solver/`` (n)
    ``status`` (int8: -1 not solved yet, 0 converged, 1 failed, 2 internal
    error), ``converged`` (uint8), ``iterations``, ``evaluations`` (int32, -1
    not known), ``residual`` [-] (largest normalised residual), ``error`` (the
    error class of a failed point: ``ConvergenceError``, ``InfeasibleError``,
    ``PropertyRangeError``), ``message`` (why it failed; cut to 256 bytes).
``/nodes/``
    ``names`` (nodes, text) and, each (n, nodes): ``pressure`` [Pa],
    ``temperature`` [K], ``enthalpy`` [J/kg], ``entropy`` [J/(kg K)],
    ``quality`` [-] (steam quality; moisture = 1 - quality).
``/stage_groups/``
    ``names``, ``inlet``, ``outlet`` (groups, text: node names) and, each
    (n, groups): ``flow`` [kg/s], ``efficiency`` [-], ``isentropic_drop``
    [J/kg], ``power`` [W], ``annulus_velocity`` [m/s], ``exhaust_loss``
    [J/kg], ``outlet_moisture`` [-].
``/extractions/``
    ``names``, ``nodes`` (extractions, text) and, each (n, extractions):
    ``flow`` [kg/s], ``pressure`` [Pa], ``enthalpy`` [J/kg], ``control``
    (text: heater, closed, flow or fraction).
``/heaters/``
    ``names`` (heaters, text) and, each (n, heaters): ``in_service`` (uint8),
    ``bleed`` [kg/s], ``shell_pressure`` [Pa], ``saturation_temperature``,
    ``feedwater_in_temperature``, ``feedwater_out_temperature``,
    ``drain_temperature`` [K], ``feedwater_in_enthalpy``,
    ``feedwater_out_enthalpy``, ``drain_enthalpy``, ``bleed_enthalpy``
    [J/kg], ``feedwater_flow``, ``drain_flow`` [kg/s], ``duty``,
    ``steam_release`` [W], ``ttd``, ``dca`` [K] (NaN where a value has no
    meaning: most values of a heater out of service; ttd and dca of a
    deaerator).
``/paths/``
    ``names``, ``inlet``, ``outlet``, ``kind`` (text): the reheaters and
    pipes between nodes (no per-point data; their end states are node states).
``/totals/<name>`` (n)
    ``throttle_flow`` [kg/s], ``throttle_pressure`` [Pa],
    ``generator_output`` [W], ``shaft_power`` [W], ``heat_rate`` [J/J],
    ``steam_rate`` [kg/J], ``final_feedwater_temperature`` [K],
    ``heat_added`` [W], ``condenser_duty`` [W], ... (every total of a point
    result; each dataset has its unit and description).
``/cautions/`` (present when the operating-limit checks are installed)
    ``names`` (codes, text: every caution code) and, per point, ``count`` (n,
    int16; -1 not checked), ``codes`` (n, text: the codes that fired,
    separated by spaces), ``flags`` (n, codes, uint8: 1 where that code
    fired), ``messages`` (n, text: one caution a line, cut to 1024 bytes).

Points that are not finished hold NaN (numbers), -1 (counts) or empty text.
A failed point holds NaN results and its reason in ``/solver/message``.

Reading with h5py alone::

    import h5py
    with h5py.File("results/reheat_load_sweep.h5", "r") as f:
        ok = f["solver/status"][:] == 0
        flow = f["totals/throttle_flow"][ok]                 # kg/s
        output = f["totals/generator_output"][ok] / 1e6       # MW
        nodes = list(f["nodes/names"].asstr()[:])
        p_crossover = f["nodes/pressure"][ok, nodes.index("crossover")] / 1e5  # bar

Safety
    Every dataset is created at its full size when the file is created (the
    plan is known), fully allocated, and the file is moved into place only
    when complete.  Finishing points then only writes numbers into the space
    already allocated: the HDF5 structure never changes again, so a study
    killed at any moment (Ctrl-C, SIGTERM, SIGKILL) leaves a valid file.  A
    chunk's results are written and flushed before its ``done`` flags are set
    and flushed, so every point marked done is complete.  ``--resume``
    re-solves what is not done after checking that the model, case and
    profile are unchanged.  Flushing hands the data to the operating system,
    which keeps it when the process is killed; a power cut may still lose the
    last chunks written.  A study holds the file locked for writing; the
    finished points of a running study can be read with
    ``h5py.File(path, "r", locking=False)``, safe here because the layout never
    changes.  The file is not compressed (``h5repack`` can compress a copy).
"""

from __future__ import annotations

import csv
import datetime as _dt
import math
import os
from dataclasses import dataclass, field
from pathlib import Path
from typing import TYPE_CHECKING

import h5py
import numpy as np

from .. import __version__
from ..errors import ResultFileError

if TYPE_CHECKING:  # pragma: no cover
    from ..study import ChunkResult, ResultLayout, StudyPlan

__all__ = [
    "FORMAT",
    "FORMAT_VERSION",
    "StudyFile",
    "StudyData",
    "check_target",
    "open_result",
    "read_study",
    "export_csv",
    "to_display",
]

FORMAT = "partload-study"
FORMAT_VERSION = 1
_HDF5_SIGNATURE = b"\x89HDF\r\n\x1a\n"
_TEXT = h5py.string_dtype("utf-8")


def _is_hdf5(path: Path) -> bool:
    try:
        with open(path, "rb") as fh:
            head = fh.read(8)
    except OSError:
        return False
    return head == _HDF5_SIGNATURE


def _open(path: Path, mode: str) -> h5py.File:
    """Open ``path`` as HDF5 or raise a :class:`ResultFileError` saying why not."""
    if not path.exists():
        raise ResultFileError(f"{path}: no such file")
    if not _is_hdf5(path):
        raise ResultFileError(f"{path} is not an HDF5 file, so not a partload result "
                              f"(another program's file, or damaged)")
    try:
        if mode == "r":
            # the layout never changes after creation, so reading needs no lock: the
            # finished points of a running study can be read
            return h5py.File(path, "r", locking=False)
        return h5py.File(path, mode)
    except OSError as exc:
        text = str(exc)
        if "unable to lock file" in text.lower():
            raise ResultFileError(f"{path} is in use by another process (a study still "
                                  f"running?): {text}") from None
        raise ResultFileError(f"{path} cannot be read as HDF5; it is damaged ({text})") from None


def _in_use(path: Path) -> bool:
    """Whether another process holds the file open for writing (its HDF5 lock)."""
    try:
        h5py.File(path, "r").close()  # a locking open: refused while a writer holds it
    except OSError as exc:
        return "unable to lock file" in str(exc).lower()
    return False


def _check_ours(f: h5py.File, path: Path) -> None:
    fmt = f.attrs.get("format")
    if isinstance(fmt, bytes):
        fmt = fmt.decode()
    if fmt != FORMAT:
        raise ResultFileError(f"{path} is an HDF5 file from another program, not a partload "
                              f"study result (its root attribute 'format' is {fmt!r}, "
                              f"expected {FORMAT!r})")
    version = int(f.attrs.get("format_version", -1))
    if version != FORMAT_VERSION:
        raise ResultFileError(f"{path} has result format version {version}; this partload "
                              f"reads version {FORMAT_VERSION}")
    for name in ("points/done", "solver/status", "model_file", "case_file"):
        if name not in f:
            raise ResultFileError(f"{path} is a partload result but lacks {name!r}; it is "
                                  f"damaged")


def open_result(path: str | Path) -> h5py.File:
    """Open a study result for reading, after checking it is one.

    Raises
    ------
    ResultFileError
        When the file is missing, not HDF5, damaged, or from another program.
    """
    path = Path(path)
    f = _open(path, "r")
    try:
        _check_ours(f, path)
    except ResultFileError:
        f.close()
        raise
    return f


def check_target(path: str | Path, *, resume: bool = False, force: bool = False) -> str:
    """Decide what to do with the result path of a study.

    Returns
    -------
    str
        ``"create"`` (no file yet), ``"resume"`` (continue the file) or
        ``"replace"`` (``force``: replace an earlier partload result).

    Raises
    ------
    ResultFileError
        When the file exists and neither ``resume`` nor ``force`` is given;
        when it is not a partload result (never replaced, even with
        ``force``); when ``resume`` is asked of a damaged file.
    """
    path = Path(path)
    if not path.exists():
        return "create"
    if path.is_dir():
        raise ResultFileError(f"{path} is a folder; give a file name ending in .h5")
    if not _is_hdf5(path):
        raise ResultFileError(f"{path} exists and is not an HDF5 file; partload will not "
                              f"overwrite it, even with --force (move or delete it, or choose "
                              f"another --output)")
    if force and _in_use(path):  # checked before this process opens it (HDF5 shares handles)
        raise ResultFileError(f"{path} is in use by another process (a study still "
                              f"running?); partload will not replace it while it is being "
                              f"written")
    try:
        f = _open(path, "r")
    except ResultFileError:
        if force:  # a damaged file of ours (killed while being created): replace it
            return "replace"
        raise
    with f:
        fmt = f.attrs.get("format")
        fmt = fmt.decode() if isinstance(fmt, bytes) else fmt
        if fmt != FORMAT:
            raise ResultFileError(f"{path} is an HDF5 file from another program (no "
                                  f"'format = {FORMAT}' attribute); partload will not "
                                  f"overwrite it, even with --force")
        if force:
            return "replace"
        if resume:
            return "resume"
        done = int(np.sum(f["points/done"][:])) if "points/done" in f else 0
        n = int(f.attrs.get("n_points", 0))
        case = f.attrs.get("case_name", "?")
        raise ResultFileError(f"{path} already exists (study of case {case!r}, {done} of {n} "
                              f"points done); use --resume to continue it, --force to replace "
                              f"it, or --output to write elsewhere")


def _utc_now() -> str:
    return _dt.datetime.now(_dt.UTC).replace(microsecond=0).isoformat()


def _dcpl() -> h5py.h5p.PropDCID:
    dcpl = h5py.h5p.create(h5py.h5p.DATASET_CREATE)
    dcpl.set_alloc_time(h5py.h5d.ALLOC_TIME_EARLY)  # all space now, none later
    return dcpl


def _preallocated(group: h5py.Group, name: str, shape: tuple, dtype, fill) -> h5py.Dataset:
    if isinstance(dtype, str) and dtype.startswith("S"):
        dt = h5py.string_dtype("utf-8", int(dtype[1:]))
        fill = np.array(fill, dtype=dt)
    else:
        dt = np.dtype(dtype)
    return group.create_dataset(name, shape=shape, dtype=dt, fillvalue=fill, dcpl=_dcpl(),
                                track_times=False)


def _text_array(group: h5py.Group, name: str, values) -> h5py.Dataset:
    return group.create_dataset(name, data=np.array(list(values), dtype=object), dtype=_TEXT,
                                track_times=False)


def _same(a, b) -> bool:
    a = np.asarray(a)
    b = np.asarray(b)
    if a.shape != b.shape:
        return False
    if a.dtype.kind == "f" and b.dtype.kind == "f":
        return bool(np.array_equal(a, b, equal_nan=True))
    return bool(np.array_equal(a, b))


class StudyFile:
    """A study result file open for writing.

    Use :meth:`create` for a new study and :meth:`resume` to continue one;
    then :meth:`write` each finished chunk and :meth:`close`.
    """

    def __init__(self, path: Path, f: h5py.File, layout: ResultLayout):
        self.path = path
        self.f = f
        self.layout = layout
        self._ds = {fl.path: f[fl.path] for fl in layout.fields()}
        self._done = f["points/done"]

    # ---------------------------------------------------------------- create
    @classmethod
    def create(cls, path: str | Path, plan: StudyPlan, layout: ResultLayout,
               check_limits: bool = True) -> StudyFile:
        """Write the file's whole structure, then move it to ``path``.

        The structure is built in ``<path>.creating`` and renamed into place
        when complete, so ``path`` (or the earlier result it replaces) is never
        half-made.
        """
        path = Path(path)
        path.parent.mkdir(parents=True, exist_ok=True)
        tmp = path.with_name(path.name + ".creating")
        if tmp.exists():
            tmp.unlink()
        try:
            with h5py.File(tmp, "w", track_order=True) as f:
                _write_structure(f, plan, layout)
                f.attrs["check_limits"] = int(check_limits)
                f.flush()
            os.replace(tmp, path)
        except OSError as exc:
            raise ResultFileError(f"cannot create {path}: {exc}") from None
        return cls(path, _open(path, "r+"), layout)

    # ---------------------------------------------------------------- resume
    @classmethod
    def resume(cls, path: str | Path, plan: StudyPlan, layout: ResultLayout,
               check_limits: bool = True) -> StudyFile:
        """Open an earlier result of the same study to finish it.

        Raises
        ------
        ResultFileError
            When the file is not ours or damaged, or when the model, case,
            profile, property backend, software version or plan differ from
            those the file was made with.
        """
        path = Path(path)
        f = _open(path, "r+")
        try:
            _check_ours(f, path)
            _check_same_study(f, path, plan)
            if int(f.attrs.get("check_limits", 1)) != int(check_limits):
                was = "with" if int(f.attrs.get("check_limits", 1)) else "without"
                raise ResultFileError(f"cannot resume {path}: it was solved {was} the limit "
                                      f"check (--beyond-limits); resume it the same way")
            layout.cautions = "cautions" in f
            if layout.cautions:
                layout.caution_codes = (list(f["cautions/names"].asstr()[:])
                                        if "cautions/names" in f else [])
            missing = [fl.path for fl in layout.fields() if fl.path not in f]
            if missing:
                raise ResultFileError(f"{path} lacks {missing[0]!r}; it was written with "
                                      f"another layout and cannot be resumed")
            return cls(path, f, layout)
        except BaseException:
            f.close()
            raise

    # ----------------------------------------------------------------- write
    @property
    def done(self) -> np.ndarray:
        """Finished flag of every point (bool)."""
        return self._done[:].astype(bool)

    def done_chunks(self, plan: StudyPlan) -> set[int]:
        """Indices of the chunks of ``plan`` whose points are all done."""
        d = self.done
        return {c.index for c in plan.chunks if d[c.start:c.stop].all()}

    def write(self, res: ChunkResult) -> None:
        """Store a finished chunk: results first, flushed, then its done flags, flushed."""
        a, b = res.start, res.stop
        try:
            for name, arr in res.arrays.items():
                ds = self._ds[name]
                if ds.dtype.kind == "S":
                    arr = arr.astype(ds.dtype)  # numpy bytes to HDF5 UTF-8 text
                ds[a:b] = arr
            self.f.flush()
            self._done[a:b] = 1
            self.f.flush()
        except OSError as exc:
            raise ResultFileError(f"cannot write to {self.path} ({exc}); the points marked "
                                  f"done so far are safe, continue with --resume") from None

    def close(self) -> None:
        if self.f.id.valid:
            self.f.flush()
            self.f.close()

    def __enter__(self) -> StudyFile:
        return self

    def __exit__(self, *exc) -> None:
        self.close()


def _write_structure(f: h5py.File, plan: StudyPlan, layout: ResultLayout) -> None:
    case = plan.case
    model = case.model
    n = plan.n_points
    a = f.attrs
    a["format"] = FORMAT
    a["format_version"] = FORMAT_VERSION
    a["software"] = "partload"
    a["software_version"] = __version__
    a["created"] = _utc_now()
    a["property_backend"] = plan.backend
    a["units"] = "SI; every numeric dataset states its unit in its 'unit' attribute"
    a["model_name"] = model.name
    # as the case file names it (relative to the case), not this machine's path
    try:
        a["model_file"] = os.path.relpath(model.file, Path(case.file).resolve().parent)
    except ValueError:  # another drive
        a["model_file"] = Path(model.file).name
    a["model_sha256"] = model.sha256
    a["case_name"] = case.name
    a["case_description"] = case.description
    a["case_file"] = str(case.file)
    a["case_sha256"] = case.sha256
    if plan.profile is not None:
        a["profile_file"] = plan.profile.file
        a["profile_sha256"] = plan.profile.sha256
    a["throttle_node"] = layout.valve[0]
    a["valve_outlet_node"] = layout.valve[1]
    a["design_throttle_flow"] = layout.design_throttle_flow
    a["generator_rating"] = layout.generator_rating
    a["study_kind"] = plan.kind
    a["n_points"] = n
    a["limit"] = plan.limit if plan.limit is not None else -1
    a["n_chunks"] = len(plan.chunks)
    a["chunk_size"] = max((c.size for c in plan.chunks), default=0)
    a["axes"] = np.array(plan.axes, dtype=object).astype(_TEXT) if plan.axes else ""
    a["continuation_axis"] = plan.continuation
    f.create_dataset("model_file", data=model.text, dtype=_TEXT, track_times=False)
    f.create_dataset("case_file", data=case.text, dtype=_TEXT, track_times=False)
    if plan.profile is not None:
        f.create_dataset("profile_file", data=plan.profile.text, dtype=_TEXT, track_times=False)
    pts = f.create_group("points", track_order=True)
    d = _preallocated(pts, "done", (n,), "u1", 0)
    d.attrs["description"] = "1 once the point is finished (solved or failed)"
    _text_array(pts, "label", plan.labels).attrs["description"] = "the point's inputs in words"
    ds = pts.create_dataset("series", data=plan.series.astype(np.int32), track_times=False)
    ds.attrs["description"] = "series of the point (index into series_labels)"
    _text_array(pts, "series_labels", plan.series_labels).attrs["description"] = (
        "values of the fixed axes of each series")
    ds = pts.create_dataset("chunk", data=plan.chunk_of_point, track_times=False)
    ds.attrs["description"] = ("chunk the point was solved in; a chunk's points are solved by "
                               "increasing load, the first from the design-scaled guess, every "
                               "other from the point solved before it")
    inp = f.create_group("inputs", track_order=True)
    inp.attrs["axes"] = a["axes"]
    inp.attrs["continuation_axis"] = plan.continuation
    for name, col in plan.inputs.items():
        if isinstance(col.values, np.ndarray):
            ds = inp.create_dataset(name, data=col.values, track_times=False)
            ds.attrs["unit"] = col.unit
        else:
            ds = _text_array(inp, name, col.values)
        ds.attrs["description"] = col.description
    groups = {
        "nodes": {"names": layout.nodes},
        "stage_groups": {"names": layout.groups, "inlet": layout.group_inlet,
                         "outlet": layout.group_outlet},
        "extractions": {"names": layout.extractions, "nodes": layout.extraction_nodes},
        "heaters": {"names": layout.heaters},
        **({"cautions": {"names": layout.caution_codes}} if layout.cautions else {}),
        "paths": {"names": [p[0] for p in layout.paths], "inlet": [p[1] for p in layout.paths],
                  "outlet": [p[2] for p in layout.paths], "kind": [p[3] for p in layout.paths]},
    }
    for gname, texts in groups.items():
        g = f.create_group(gname, track_order=True)
        for tname, values in texts.items():
            _text_array(g, tname, values)
    for fl in layout.fields():
        gname, dname = fl.path.split("/")
        g = f[gname] if gname in f else f.create_group(gname, track_order=True)
        shape = (n, fl.width) if fl.width else (n,)
        ds = _preallocated(g, dname, shape, fl.dtype, fl.fill)
        if fl.unit:
            ds.attrs["unit"] = fl.unit
        ds.attrs["description"] = fl.description

    def dimensionless(name, obj):  # every numeric dataset states a unit
        if isinstance(obj, h5py.Dataset) and obj.dtype.kind in "iuf" and "unit" not in obj.attrs:
            obj.attrs["unit"] = "-"

    f.visititems(dimensionless)


def _check_same_study(f: h5py.File, path: Path, plan: StudyPlan) -> None:
    a = f.attrs
    model = plan.case.model

    def attr(k):
        v = a.get(k, "")
        return v.decode() if isinstance(v, bytes) else str(v)

    fix = (f"Start afresh with --force (the {int(np.sum(f['points/done'][:]))} points stored "
           f"are then lost) or write elsewhere with --output.")
    if attr("model_sha256") != model.sha256:
        raise ResultFileError(
            f"cannot resume {path}: the model has changed since this study was started. The "
            f"file was made with model {attr('model_name')!r} ({attr('model_file')}, sha256 "
            f"{attr('model_sha256')[:12]}...), but {model.file} now has sha256 "
            f"{model.sha256[:12]}...; resuming would mix results of two models. {fix}")
    if attr("case_sha256") != plan.case.sha256:
        raise ResultFileError(
            f"cannot resume {path}: the case file {plan.case.file} has changed since this "
            f"study was started (sha256 {attr('case_sha256')[:12]}... in the file, "
            f"{plan.case.sha256[:12]}... now). {fix}")
    if plan.profile is not None and attr("profile_sha256") != plan.profile.sha256:
        raise ResultFileError(
            f"cannot resume {path}: the profile {plan.profile.file} has changed since this "
            f"study was started. {fix}")
    if attr("property_backend") != plan.backend:
        raise ResultFileError(
            f"cannot resume {path}: it was solved with property backend "
            f"{attr('property_backend')!r}, this run uses {plan.backend!r}. {fix}")
    if attr("software_version") != __version__:
        raise ResultFileError(
            f"cannot resume {path}: it was written by partload {attr('software_version')}, "
            f"this is {__version__}; results of two versions are not mixed. {fix}")
    stored_limit = int(a.get("limit", -1))
    limit = plan.limit if plan.limit is not None else -1
    if stored_limit != limit:
        was = (f"a trial run of the first {stored_limit} points (--limit {stored_limit})"
               if stored_limit > 0 else "the whole plan")
        now = f"--limit {limit}" if limit > 0 else "no --limit"
        raise ResultFileError(f"cannot resume {path}: it holds {was}, and this run has {now}; "
                              f"resume with the same --limit. {fix}")
    same = (int(a.get("n_points", -1)) == plan.n_points
            and _same(f["points/chunk"][:], plan.chunk_of_point))
    if same:
        for name, col in plan.inputs.items():
            if name not in f["inputs"]:
                same = False
                break
            stored = f["inputs"][name]
            stored = (stored[:] if isinstance(col.values, np.ndarray)
                      else list(stored.asstr()[:]))
            if not _same(stored, col.values):
                same = False
                break
    if not same:
        raise ResultFileError(f"cannot resume {path}: the points planned now differ from those "
                              f"stored (same files, another planning rule?). {fix}")


# ------------------------------------------------------------------ reading back
@dataclass
class StudyData:
    """A study result read into memory (SI units, as stored).

    Attributes
    ----------
    path : the file
    attrs : root attributes
    labels, series, series_labels : see ``/points``
    done : finished flags (bool)
    status : solver status per point (see ``/solver/status``)
    names : ``{"nodes": [...], "stage_groups": [...], "extractions": [...],
        "heaters": [...]}``
    data : every per-point dataset by path (``"totals/heat_rate"``); text as str
    units : unit of each dataset by path
    inputs : per-point inputs by name
    texts : ``model_file``, ``case_file`` (and ``profile_file``) text
    topology : ``group_inlet``, ``group_outlet``, ``path_names``,
        ``path_inlet``, ``path_outlet``, ``path_kind`` (node names)
    """

    path: Path
    attrs: dict
    labels: list[str]
    series: np.ndarray
    series_labels: list[str]
    done: np.ndarray
    status: np.ndarray
    names: dict[str, list[str]]
    data: dict[str, np.ndarray]
    units: dict[str, str]
    descriptions: dict[str, str]
    inputs: dict[str, np.ndarray]
    texts: dict[str, str] = field(default_factory=dict)
    topology: dict[str, list[str]] = field(default_factory=dict)

    @property
    def n_points(self) -> int:
        return len(self.labels)

    @property
    def ok(self) -> np.ndarray:
        """Points that converged (bool)."""
        return self.status == 0

    @property
    def name(self) -> str:
        return str(self.attrs.get("case_name", self.path.stem))

    def total(self, name: str) -> np.ndarray:
        """A total by name [SI], NaN where not solved."""
        return self.data[f"totals/{name}"]

    def column(self, group: str, quantity: str, item: str) -> np.ndarray:
        """One column of a 2-D dataset, e.g. ``column("nodes", "pressure", "crossover")``."""
        return self.data[f"{group}/{quantity}"][:, self.names[group].index(item)]

    @property
    def cautions(self) -> np.ndarray | None:
        """Number of cautions per point, or ``None`` when the file has none stored."""
        return self.data.get("cautions/count")


def _attr_value(v):
    if isinstance(v, bytes):
        return v.decode()
    if isinstance(v, np.ndarray) and v.dtype.kind in "OS":
        return [x.decode() if isinstance(x, bytes) else str(x) for x in v]
    if isinstance(v, np.generic):
        return v.item()
    return v


def read_study(path: str | Path) -> StudyData:
    """Read a whole study result file (checked to be ours) into memory."""
    path = Path(path)
    with open_result(path) as f:
        attrs = {k: _attr_value(v) for k, v in f.attrs.items()}
        names = {g: list(f[g]["names"].asstr()[:]) for g in
                 ("nodes", "stage_groups", "extractions", "heaters") if g in f}
        data, units, desc = {}, {}, {}
        for gname in ("solver", "nodes", "stage_groups", "extractions", "heaters", "totals",
                      "cautions"):
            if gname not in f:
                continue
            for dname, ds in f[gname].items():
                if dname in ("names", "inlet", "outlet", "nodes", "kind") and gname != "totals":
                    continue
                key = f"{gname}/{dname}"
                data[key] = ds.asstr()[...] if ds.dtype.kind in "SO" else ds[...]
                units[key] = _attr_value(ds.attrs.get("unit", ""))
                desc[key] = _attr_value(ds.attrs.get("description", ""))
        inputs = {}
        for name, ds in f["inputs"].items():
            inputs[name] = ds.asstr()[...] if ds.dtype.kind in "SO" else ds[...]
            units[f"inputs/{name}"] = _attr_value(ds.attrs.get("unit", ""))
            desc[f"inputs/{name}"] = _attr_value(ds.attrs.get("description", ""))
        texts = {k: f[k].asstr()[()] for k in ("model_file", "case_file", "profile_file")
                 if k in f}
        topo = {"group_inlet": list(f["stage_groups/inlet"].asstr()[:]),
                "group_outlet": list(f["stage_groups/outlet"].asstr()[:])}
        if "paths" in f:
            for k in ("names", "inlet", "outlet", "kind"):
                topo[f"path_{k}"] = list(f["paths"][k].asstr()[:])
        return StudyData(
            path=path, attrs=attrs, labels=list(f["points/label"].asstr()[:]),
            series=f["points/series"][:], series_labels=list(f["points/series_labels"].asstr()[:]),
            done=f["points/done"][:].astype(bool), status=f["solver/status"][:],
            names=names, data=data, units=units, descriptions=desc, inputs=inputs, texts=texts,
            topology=topo)


# ----------------------------------------------------------------- display units
# SI unit -> (display unit, factor, offset): display = SI * factor + offset
_DISPLAY = {
    "Pa": ("bar", 1e-5, 0.0),
    "K": ("degC", 1.0, -273.15),
    "J/kg": ("kJ/kg", 1e-3, 0.0),
    "J/(kg K)": ("kJ/(kg K)", 1e-3, 0.0),
    "W": ("MW", 1e-6, 0.0),
    "J/J": ("kJ/kWh", 3600.0, 0.0),
    "kg/J": ("kg/kWh", 3.6e6, 0.0),
}
# datasets whose kelvin are differences, and dimensionless ones shown in percent
_DIFFERENCES = ("heaters/ttd", "heaters/dca")
_PERCENT = ("stage_groups/efficiency", "stage_groups/outlet_moisture", "totals/exhaust_moisture")
_KEEP = ("totals/energy_imbalance",)


def to_display(values, unit: str, path: str = "") -> tuple[np.ndarray, str]:
    """Convert SI values to the engineer's units used in tables, CSV and plots.

    Pressure in bar, temperature in degC (differences stay in K), enthalpy in
    kJ/kg, power in MW, heat rate in kJ/kWh, steam rate in kg/kWh,
    efficiencies and moisture in %.

    Parameters
    ----------
    values : array in SI units
    unit : its SI unit (the dataset's ``unit`` attribute)
    path : the dataset path, for the exceptions above

    Returns
    -------
    values, unit : converted array and its unit
    """
    v = np.asarray(values, dtype=float)
    if path in _KEEP or path in _DIFFERENCES:
        return v, unit
    if path in _PERCENT:
        return v * 100.0, "%"
    if unit in _DISPLAY:
        u, k, b = _DISPLAY[unit]
        return v * k + b, u
    return v, unit


# -------------------------------------------------------------------- CSV export
def _fmt(col: np.ndarray) -> list[str]:
    col = np.asarray(col)
    if col.dtype.kind in "fc":
        out = np.char.mod("%.12g", col.astype(float)).tolist()
        return ["" if not math.isfinite(x) else s for s, x in zip(out, col.tolist())]
    if col.dtype.kind in "iub":
        return [str(int(x)) for x in col.tolist()]
    return [str(x) for x in col.tolist()]


def export_csv(path: str | Path, out_dir: str | Path | None = None, si: bool = False) -> list[Path]:
    """Write a study result as CSV files for spreadsheets.

    Files ``<stem>_points.csv`` (inputs, solver record, totals, cautions),
    ``<stem>_nodes.csv``, ``<stem>_stage_groups.csv``, ``<stem>_extractions.csv``
    and ``<stem>_heaters.csv``; one row per point, in the order of the file.
    Headers give the unit in brackets, e.g. ``generator_output [MW]`` or
    ``pressure crossover [bar]``; ``input`` columns hold what was asked.
    Values are in display units (see :func:`to_display`), or SI with ``si``.
    Points not solved yet, and results of failed points, are empty cells.
    Existing CSV files of the same names are replaced (they are derived data).

    Returns
    -------
    list of Path
        The files written.
    """
    st = read_study(path)
    out_dir = Path(out_dir) if out_dir is not None else st.path.parent
    out_dir.mkdir(parents=True, exist_ok=True)
    stem = st.path.stem
    n = st.n_points

    def conv(key, values):
        unit = st.units.get(key, "")
        if si or np.asarray(values).dtype.kind not in "fiu" or not unit:
            return np.asarray(values), unit
        return to_display(values, unit, key)

    def head(name, unit):
        return f"{name} [{unit}]" if unit else name

    base_cols = [("point", np.arange(n)), ("label", np.array(st.labels, dtype=object)),
                 ("series", st.series)]
    files = []
    # points: inputs, solver, totals, cautions
    cols = list(base_cols) + [("done", st.done.astype(np.int8))]
    for key in ("solver/status", "solver/converged", "solver/iterations",
                "solver/evaluations", "solver/residual", "solver/error", "solver/message"):
        cols.append((key.split("/")[1], st.data[key]))
    for name, values in st.inputs.items():
        v, u = conv(f"inputs/{name}", values)
        cols.append((head(f"input {name}", u), v))
    for key in [k for k in st.data if k.startswith("totals/")]:
        v, u = conv(key, st.data[key])
        cols.append((head(key.split("/")[1], u), v))
    if st.cautions is not None:
        cols.append(("cautions", st.data["cautions/count"]))
        cols.append(("caution codes", st.data["cautions/codes"]))
        cols.append(("caution messages", np.array([m.replace("\n", " | ") for m in
                                                   st.data["cautions/messages"]], dtype=object)))
    files.append(_write_csv(out_dir / f"{stem}_points.csv", cols))
    for group in ("nodes", "stage_groups", "extractions", "heaters"):
        items = st.names.get(group, [])
        cols = list(base_cols)
        for key in [k for k in st.data if k.startswith(group + "/")]:
            arr = st.data[key]
            if arr.ndim != 2:
                continue
            v, u = conv(key, arr)
            for j, item in enumerate(items):
                cols.append((head(f"{key.split('/')[1]} {item}", u), v[:, j]))
        files.append(_write_csv(out_dir / f"{stem}_{group}.csv", cols))
    return files


def _write_csv(path: Path, cols: list[tuple[str, np.ndarray]]) -> Path:
    texts = [_fmt(c) for _, c in cols]
    try:
        with open(path, "w", newline="", encoding="utf-8") as fh:
            w = csv.writer(fh)
            w.writerow([name for name, _ in cols])
            w.writerows(zip(*texts))
    except OSError as exc:
        raise ResultFileError(f"cannot write {path}: {exc}") from None
    return path
