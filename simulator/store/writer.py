"""Writing study result files: create a file whole, resume it, store finished chunks.

:func:`check_target` decides what to do with the result path of a study
(create, resume or replace) and refuses to overwrite anything that is not an
earlier partload result.  :class:`StudyFile` checks the free space against
the size the plan needs (:func:`study_file_size`), builds the whole layout
(see :mod:`partload.store.format`) under a unique temporary name in the
result's folder, opens it for writing (which takes its lock) and only then
puts it at the result path: a new result by a hard link that never replaces
a file (a file that appeared meanwhile, another study's, is left alone and
the study stops), a ``--force`` replacement by a rename while holding the
old file's lock (a study running on it stops this one).  Every failure on
the way, Ctrl-C included, removes the temporary file.  The file then only
receives numbers into space already allocated: each chunk's results,
flushed, then its ``done`` flags, flushed.  On ``--resume`` it checks that
the model, case, profile, property backend, software version and plan are
the ones the file was made with.
"""

from __future__ import annotations

import datetime as _dt
import errno
import fcntl
import os
import re
import secrets
import sys
import time
from collections.abc import Callable
from glob import escape as glob_escape
from pathlib import Path

import h5py
import numpy as np

from ..errors import ResultFileError
from ..plant.fitted import fitted_text
from ..version import __version__
from .dimensions import add_dimensions
from .format import (
    FORMAT,
    FORMAT_VERSION,
    H5_ERRORS,
    READ_ERRORS,
    TEXT,
    attr_value,
    check_format,
    check_shapes,
    damaged,
    format_name,
    in_use,
    is_hdf5,
    looks_ours,
    open_for_rows,
    open_hdf5,
    small_metadata_cache,
)

# The plan (``partload.study.StudyPlan``), the finished chunks
# (``partload.study.ChunkResult``) and the layout (:mod:`.layout`) a study hands
# over are used by their attributes only: the store sits below the study and
# never imports it, and reading results never loads the layout's declarations.

__all__ = ["LARGE_FILE", "StudyFile", "between_steps", "check_room", "check_target",
           "study_file_size"]

LARGE_FILE = 1 << 30  # [B] a result file this large is announced before it is allocated
ABANDONED_AFTER = 600.0  # [s] a temporary file unchanged this long, and unlocked, is abandoned


def between_steps(step: str) -> None:
    """Called by :meth:`StudyFile.create` after each of its steps: ``"checked"``
    (free space checked), ``"built"`` (the whole layout written under its
    temporary name and reopened for writing, so locked, just before it is put
    at the result path).  It does nothing; tests replace it to force a race, a full disk or
    an interrupt between two steps.

    Parameters
    ----------
    step : the name of the step just finished [-]
    """


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
    if not is_hdf5(path):
        if force and looks_ours(path):  # a result of ours with a damaged beginning
            return "replace"
        raise ResultFileError(f"{path} exists and is not an HDF5 file; partload will not "
                              f"overwrite it, even with --force (move or delete it, or choose "
                              f"another --output)")
    if force and in_use(path):  # checked before this process opens it (HDF5 shares handles)
        raise ResultFileError(f"{path} is in use by another process (a study still "
                              f"running?); partload will not replace it while it is being "
                              f"written")
    try:
        f = open_hdf5(path, "r")
    except ResultFileError:
        if force and looks_ours(path):  # a damaged file of ours (killed while being created)
            return "replace"
        raise
    with f:
        try:
            fmt = format_name(f)
        except READ_ERRORS as exc:
            if force and looks_ours(path):
                return "replace"
            raise damaged(path, exc) from None
        if fmt != FORMAT:
            raise ResultFileError(f"{path} is an HDF5 file from another program (no "
                                  f"'format = {FORMAT}' attribute); partload will not "
                                  f"overwrite it, even with --force")
        if force:
            return "replace"
        if resume:
            return "resume"
        try:
            done = int(np.sum(f["points/done"][:])) if "points/done" in f else 0
            n = int(f.attrs.get("n_points", 0))
            case = attr_value(f.attrs.get("case_name", "?"))
        except READ_ERRORS as exc:
            raise ResultFileError(f"{path} already exists and is damaged ({exc}); use --force "
                                  f"to replace it, or --output to write elsewhere") from None
        raise ResultFileError(f"{path} already exists (study of case {case!r}, {done} of {n} "
                              f"points done); use --resume to continue it, --force to replace "
                              f"it, or --output to write elsewhere")


def study_file_size(plan, layout) -> int:
    """The size [B] the result file of ``plan`` takes on disk, from the plan alone.

    Every per-point dataset is allocated at creation, so the size is known
    before anything is written: the declared columns (points x items x the
    bytes of their type), the inputs, labels and texts, and an allowance for
    HDF5's own structure (object headers, heaps; 256 KiB plus 1 KiB a
    dataset and 32 B a text, a generous estimate, not a measured bound).

    Parameters
    ----------
    plan : the study plan (``partload.study.StudyPlan``) [-]
    layout : its result layout (``partload.store.layout.ResultLayout``) [-]
    """
    n = plan.n_points

    def text(values) -> int:  # UTF-8 bytes of the texts, and 32 B each
        return len("".join(map(str, values)).encode()) + 32 * len(values)

    size = 256 * 1024
    for fl in layout.fields():
        size += n * max(fl.width, 1) * np.dtype(fl.dtype).itemsize + 1024
    size += n * (1 + 4 + 4)  # points/done, series, chunk
    size += n * 8 + 1024 * (len(layout.groups) + 8)  # /point and the item coordinates
    size += sum(text(g.names) for g in layout.groups)
    size += text(plan.labels) + text(plan.series_labels)
    for col in plan.inputs.values():
        size += (col.values.nbytes if isinstance(col.values, np.ndarray)
                 else text(col.values)) + 1024
    size += len(plan.case.text.encode()) + len(plan.case.model.text.encode())
    if plan.profile is not None:
        size += len(plan.profile.text.encode())
    return int(size)


def size_text(size: float) -> str:
    """A size in bytes [B] as text in kB, MB or GB (powers of 1000)."""
    for unit, scale in (("GB", 1e9), ("MB", 1e6), ("kB", 1e3)):
        if size >= scale:
            return f"{size / scale:.1f} {unit}"
    return f"{int(size)} B"


def check_room(path: str | Path, plan, layout) -> tuple[int, int, Path]:
    """Check that the folder of the result file ``path`` [-] has the room the file
    of ``plan`` needs (:func:`study_file_size`): before a study solves its first
    chunk (the file is made when that comes back) and when the file is made.

    Returns ``(needed, free, folder)`` [B, B, -], the folder being the nearest
    one that exists.

    Raises
    ------
    ResultFileError
        When less is free than the file needs (both named).
    """
    path = Path(path)
    needed = study_file_size(plan, layout)
    folder = path.parent.resolve()
    while not folder.exists() and folder != folder.parent:  # made with the file
        folder = folder.parent
    free = _free_space(folder)
    if needed > free:
        raise ResultFileError(
            f"cannot create {path}: the study needs about {size_text(needed)} for its "
            f"{plan.n_points} points (allocated when the file is made) and only "
            f"{size_text(free)} is free on {folder}; free some space, write elsewhere "
            f"with --output, or run fewer points")
    return needed, free, folder


def _free_space(folder: Path) -> int:
    st = os.statvfs(folder)
    return int(st.f_bavail * st.f_frsize)


def _no_space(exc: BaseException) -> bool:
    return (getattr(exc, "errno", None) == errno.ENOSPC or "errno = 28" in str(exc)
            or "No space left" in str(exc))


def _put_in_place(tmp: Path, path: Path, replace: bool) -> None:
    """Put the finished file ``tmp`` at ``path`` [-]: a link that never replaces
    anything for a new result, a rename under the old file's lock for ``replace``."""
    if replace:
        try:
            fd = os.open(path, os.O_RDONLY)
        except FileNotFoundError:  # gone meanwhile: nothing to hold
            fd = None
        try:
            if fd is not None:
                try:
                    fcntl.flock(fd, fcntl.LOCK_EX | fcntl.LOCK_NB)
                except OSError:
                    raise ResultFileError(
                        f"cannot replace {path}: a study started writing to it meanwhile; it "
                        f"was left as it is") from None
            os.replace(tmp, path)
        finally:
            if fd is not None:
                os.close(fd)
        return
    appeared = ResultFileError(
        f"cannot create {path}: a file of that name appeared while this study was being "
        f"prepared (another study writing to the same file?); it was left as it is. Use "
        f"--output to write elsewhere, or --force to replace it once that study is done")
    try:
        os.link(tmp, path)
    except FileExistsError:
        raise appeared from None
    except OSError:  # a file system without hard links: reserve the name, then rename
        try:
            os.close(os.open(path, os.O_CREAT | os.O_EXCL | os.O_WRONLY, 0o644))
        except FileExistsError:
            raise appeared from None
        os.replace(tmp, path)
    else:
        tmp.unlink()


def _remove_abandoned(path: Path) -> None:
    """Remove the temporary files of ``path`` [-] that no process holds and that
    have not changed for :data:`ABANDONED_AFTER` seconds: those of a creation
    killed with SIGKILL or a power cut (a creation under way holds the HDF5
    lock of its file, but for an instant between its build and its reopening,
    which the age covers)."""
    for old in path.parent.glob(f".{glob_escape(path.name)}.*.creating"):
        try:
            if time.time() - old.stat().st_mtime < ABANDONED_AFTER:
                continue
            fd = os.open(old, os.O_RDONLY)
        except OSError:
            continue
        try:
            fcntl.flock(fd, fcntl.LOCK_EX | fcntl.LOCK_NB)
            old.unlink()
        except OSError:  # held by a creation under way, or already gone
            pass
        finally:
            os.close(fd)


def _unique_temporary(path: Path) -> Path:
    """A new empty file ``.<name>.<random>.creating`` next to ``path`` [-], made with
    ``O_EXCL`` (never another study's) and the usual permissions (umask)."""
    for _ in range(100):
        tmp = path.with_name(f".{path.name}.{secrets.token_hex(6)}.creating")
        try:
            os.close(os.open(tmp, os.O_CREAT | os.O_EXCL | os.O_WRONLY, 0o666))
        except FileExistsError:
            continue
        except OSError as exc:
            raise ResultFileError(f"cannot create a file in {path.parent}: "
                                  f"{exc.strerror or exc}") from None
        return tmp
    raise ResultFileError(f"cannot find a free temporary name in {path.parent}")


def _discard(f, tmp: Path) -> None:
    """Close ``f`` (if open) and remove ``tmp`` [-], whatever state they are in."""
    if f is not None:
        try:
            f.close()
        except Exception:  # noqa: BLE001 - a full disk may fail the close; the file goes anyway
            pass
    try:
        tmp.unlink()
    except OSError:
        pass


def _note(text: str) -> None:
    print(f"partload: note: {text}", file=sys.stderr, flush=True)


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
    return group.create_dataset(name, data=np.array(list(values), dtype=object), dtype=TEXT,
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

    def __init__(self, path: Path, f: h5py.File, layout):
        self.path = path
        self.f = f
        self.layout = layout
        self._ds = {fl.path: f[fl.path] for fl in layout.fields()}
        self._done = f["points/done"]
        # per dataset, what a write of rows needs, found once (see _write_rows)
        self._rows: dict[str, tuple] = {}

    # ---------------------------------------------------------------- create
    @classmethod
    def create(cls, path: str | Path, plan, layout, check_limits: bool = True,
               replace: bool = False,
               note: Callable[[str], None] | None = None) -> StudyFile:
        """Write the file's whole structure, then put it at ``path``, open for writing.

        The structure is built under a unique temporary name in the same
        folder and put at ``path`` only when complete and locked, so ``path``
        (or the earlier result it replaces) is never half-made and a file that
        appears at ``path`` meanwhile is never replaced.

        Parameters
        ----------
        path : the result file [-]
        plan : the study plan [-]
        layout : its result layout [-]
        check_limits : stored as the root attribute ``check_limits`` [-]
        replace : ``True`` replaces the earlier result at ``path`` (``--force``);
            ``False`` refuses any file found there [-]
        note : called with a line of text when the file is larger than
            :data:`LARGE_FILE` (default: printed to stderr) [-]

        Raises
        ------
        ResultFileError
            When the free space is less than the file needs (both named), a
            file appeared at ``path`` meanwhile, a study holds the file being
            replaced, or HDF5 fails (full disk, ...); the temporary file is
            removed first.  Ctrl-C (KeyboardInterrupt) removes it too.
        """
        path = Path(path)
        path.parent.mkdir(parents=True, exist_ok=True)
        needed, free, folder = check_room(path, plan, layout)
        if needed >= LARGE_FILE:
            (note or _note)(f"{path} takes about {size_text(needed)} for {plan.n_points} "
                            f"points, allocated now ({size_text(free)} free on {folder})")
        between_steps("checked")
        _remove_abandoned(path)
        tmp = _unique_temporary(path)
        f = None
        try:
            f = h5py.File(tmp, "w", track_order=True)
            small_metadata_cache(f.id)
            _write_structure(f, plan, layout)
            f.attrs["check_limits"] = int(check_limits)
            f.close()  # closed once, so that its structure is final on disk
            # reopened for writing (HDF5 locks it) before it appears at path: a second
            # study finds it in use from its first moment there
            f = open_for_rows(tmp)
            between_steps("built")
            _put_in_place(tmp, path, replace)
        except ResultFileError:
            _discard(f, tmp)
            raise
        except H5_ERRORS as exc:
            _discard(f, tmp)
            if _no_space(exc):
                free = _free_space(folder) if folder.exists() else 0
                raise ResultFileError(
                    f"cannot create {path}: the disk is full; the study needs about "
                    f"{size_text(needed)} and {size_text(free)} is free on {folder}") from None
            raise ResultFileError(f"cannot create {path}: {exc}") from None
        except BaseException:  # Ctrl-C, SIGTERM: nothing is left behind
            _discard(f, tmp)
            raise
        return cls(path, f, layout)

    # ---------------------------------------------------------------- resume
    @classmethod
    def resume(cls, path: str | Path, plan, layout,
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
        f = open_hdf5(path, "r+")
        try:
            check_format(f, path)
            check_shapes(f, path)
            found = attr_value(f.attrs.get("format_version"))
            if found != FORMAT_VERSION:
                raise ResultFileError(
                    f"cannot resume {path}: it has result format version {found}, and this "
                    f"partload writes version {FORMAT_VERSION} (named dimensions and "
                    f"coordinates); plot or export it as it is, or run the study anew with "
                    f"--force or another --output")
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
        except ResultFileError:
            f.close()
            raise
        except READ_ERRORS as exc:
            f.close()
            raise damaged(path, exc) from None
        except BaseException:
            f.close()
            raise

    # ----------------------------------------------------------------- write
    @property
    def done(self) -> np.ndarray:
        """Finished flag of every point (bool)."""
        return self._done[:].astype(bool)

    def done_chunks(self, plan) -> set[int]:
        """Indices of the chunks of ``plan`` whose points are all done."""
        d = self.done
        return {c.index for c in plan.chunks if d[c.start:c.stop].all()}

    def write(self, res) -> None:
        """Store a finished chunk: results first, flushed, then its done flags, flushed."""
        a, b = res.start, res.stop
        try:
            for name, arr in res.arrays.items():
                self._write_rows(name, a, b, arr)
            self.f.flush()
            self._write_rows("points/done", a, b, np.ones(b - a, dtype=np.uint8))
            self.f.flush()
        except H5_ERRORS as exc:
            raise ResultFileError(f"cannot write to {self.path} ({exc}); the points marked "
                                  f"done so far are safe, continue with --resume") from None

    def _write_rows(self, name: str, a: int, b: int, arr: np.ndarray) -> None:
        """Write ``arr`` into rows ``a <= i < b`` of the dataset ``name`` [-].

        Through h5py's low-level interface (``DatasetID.write`` with a hyperslab of
        the file space): the same bytes as ``ds[a:b] = arr``, without the
        high-level selection machinery, which took three quarters of the study
        process's time for a chunk's 78 datasets.  Text is written as the
        dataset's fixed-length UTF-8 type, cut or padded to its length as
        ``astype`` does.
        """
        entry = self._rows.get(name)
        if entry is None:
            ds = self._ds[name] if name in self._ds else self.f[name]
            dsid = ds.id
            entry = self._rows[name] = (dsid, dsid.get_space(), h5py.h5t.py_create(ds.dtype),
                                        ds.shape[1:], ds.dtype)
        dsid, space, mtype, width, dtype = entry
        count = (b - a, *width)
        if arr.dtype != dtype or not arr.flags.c_contiguous:
            arr = np.ascontiguousarray(arr, dtype=dtype)
        if arr.shape != count:
            raise ValueError(f"{name}: {arr.shape[0]} rows of shape {arr.shape[1:]} given for "
                             f"rows {a} to {b} of shape {width}")
        space.select_hyperslab((a, *(0 for _ in width)), count)
        dsid.write(h5py.h5s.create_simple(count), space, arr, mtype)

    def close(self) -> None:
        if self.f.id.valid:
            self.f.flush()
            self.f.close()

    def __enter__(self) -> StudyFile:
        return self

    def __exit__(self, *exc) -> None:
        self.close()


def _write_structure(f: h5py.File, plan, layout) -> None:
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
    a["units"] = ("SI; every numeric dataset states its unit in its 'units' attribute (CF "
                  "spelling) and in 'unit'")
    a["model_name"] = model.name
    # as the case file names it (relative to the case), not this machine's path
    try:
        a["model_path"] = os.path.relpath(model.file, Path(case.file).resolve().parent)
    except ValueError:  # another drive
        a["model_path"] = Path(model.file).name
    a["model_sha256"] = model.sha256
    if model.fitted:  # a fitted model: /model_file is its design model
        a["model_fitted"] = fitted_text(model.fitted, "\n")
    a["case_name"] = case.name
    a["case_description"] = case.description
    a["case_path"] = str(case.file)
    a["case_sha256"] = case.sha256
    if plan.profile is not None:
        a["profile_path"] = plan.profile.file
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
    a["axes"] = np.array(plan.axes, dtype=object).astype(TEXT) if plan.axes else ""
    a["continuation_axis"] = plan.continuation
    f.create_dataset("model_file", data=model.text, dtype=TEXT, track_times=False)
    f.create_dataset("case_file", data=case.text, dtype=TEXT, track_times=False)
    if plan.profile is not None:
        f.create_dataset("profile_file", data=plan.profile.text, dtype=TEXT, track_times=False)
    pts = f.create_group("points", track_order=True)
    d = _preallocated(pts, "done", (n,), "u1", 0)
    d.attrs["description"] = "1 once the point is finished (solved or failed)"
    d.attrs["unit"] = "-"
    _text_array(pts, "label", plan.labels).attrs["description"] = "the point's inputs in words"
    ds = pts.create_dataset("series", data=plan.series.astype(np.int32), track_times=False)
    ds.attrs["description"] = "series of the point (index into series_labels)"
    ds.attrs["unit"] = "-"
    _text_array(pts, "series_labels", plan.series_labels).attrs["description"] = (
        "values of the fixed axes of each series")
    ds = pts.create_dataset("chunk", data=plan.chunk_of_point, track_times=False)
    ds.attrs["description"] = ("chunk the point was solved in; a chunk's points are solved by "
                               "increasing load, the first from the design-scaled guess, every "
                               "other from the point solved before it")
    ds.attrs["unit"] = "-"
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
    groups = {g.name: {"names": g.names, **g.texts} for g in layout.groups}
    if layout.cautions:
        groups["cautions"] = {"names": layout.caution_codes}
    groups["paths"] = {"names": [p[0] for p in layout.paths],
                       "inlet": [p[1] for p in layout.paths],
                       "outlet": [p[2] for p in layout.paths],
                       "kind": [p[3] for p in layout.paths]}
    for gname, texts in groups.items():
        g = f.create_group(gname, track_order=True)
        for tname, values in texts.items():
            _text_array(g, tname, values)
    for fl in layout.fields():
        gname, dname = fl.path.split("/")
        g = f[gname] if gname in f else f.create_group(gname, track_order=True)
        shape = (n, fl.width) if fl.width else (n,)
        ds = _preallocated(g, dname, shape, fl.dtype, fl.fill)
        if fl.unit or ds.dtype.kind in "iuf":  # every numeric dataset states a unit
            ds.attrs["unit"] = fl.unit or "-"
        ds.attrs["description"] = fl.description
        if fl.display:
            ds.attrs["display"] = fl.display
    add_dimensions(f, n)


def _check_same_study(f: h5py.File, path: Path, plan) -> None:
    a = f.attrs
    model = plan.case.model

    def attr(k):
        v = a.get(k, "")
        return v.decode() if isinstance(v, bytes) else str(v)

    fix = (f"Start afresh with --force (the {int(np.sum(f['points/done'][:]))} points stored "
           f"are then lost) or write elsewhere with --output.")
    for k in ("model_sha256", "case_sha256"):
        if not re.fullmatch(r"[0-9a-f]{64}", attr(k)):
            raise ResultFileError(
                f"{path} is damaged: its {k} attribute is not a SHA-256 digest. {fix}")
    was_fitted = f.attrs.get("model_fitted")
    if attr("model_sha256") != model.sha256 and (was_fitted is not None or model.fitted):
        now = fitted_text(model.fitted) or "none (the design model)"
        then = (attr("model_fitted").replace("\n", "; ") if was_fitted is not None
                else "none (the design model)")
        raise ResultFileError(
            f"cannot resume {path}: the model's fitted values have changed since this study "
            f"was started (then: {then}; now: {now}), or its design model has; resuming "
            f"would mix results of two machines. {fix}")
    if attr("model_sha256") != model.sha256:
        raise ResultFileError(
            f"cannot resume {path}: the model has changed since this study was started. The "
            f"file was made with model {attr('model_name')!r} ({attr('model_path')}, sha256 "
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
