"""The HDF5 layout of study result files, and the checks that a file is one.

Result files (HDF5)
===================

A study writes one HDF5 file (``results/<case file name>.h5`` by default).  Every
number in it is in **SI units**, and every numeric dataset says its unit in
its ``units`` attribute, spelled as the CF conventions ask (``"1"`` for
dimensionless, ``"J/J"`` for a heat rate: multiply by 3600 for kJ/kWh), again
in ``unit`` (format 2's attribute, ``"-"`` for dimensionless), and what it is
in its ``description`` and ``long_name`` attributes (a heat rate's names which
one).  The file opens in xarray (``engine="h5netcdf"``) with named dimensions
(:mod:`partload.store.dimensions`).  Text is UTF-8 (read it with
``dataset.asstr()[...]``).  Points are numbered ``0 .. n-1``: one *series*
after the other (one series per combination of the swept values other than
the load), the load increasing inside a series of a sweep; a profile keeps its
file order.

Versions
    3 (this partload writes it): as 2, plus named dimensions (HDF5 dimension
    scales: ``/point`` linked into every per-point group, a coordinate of item
    names per result group named after it, ``/points/series_labels``), the
    ``units`` and ``long_name`` attributes, and the root attributes naming the
    input files renamed ``model_path``, ``case_path``, ``profile_path`` (they
    were ``model_file``, ... as the datasets holding the texts).
    2: one result group per kind of component
    (``/throttle_valve``, ``/reheaters``, ``/pipes``, ``/control_valves`` are
    new), ``/inputs/valve_mode`` and ``/inputs/pressure_mode`` instead of
    ``/inputs/governing``, control valves in ``/paths``, text columns of 16
    bytes.  1: the first layout.  All three are read (plots, export); only
    files of the version this partload writes are resumed.

Root attributes
    ``format`` = ``"partload-study"``, ``format_version`` (2), ``software``
    (``"partload"``), ``software_version``, ``created`` (UTC, ISO 8601),
    ``property_backend``, ``units`` (a reminder that all is SI),
    ``model_name``, ``model_path``, ``model_sha256``, ``model_fitted`` (a
    fitted, as tested, model only: its fitted tunables, ``KEY = VALUE`` a line,
    set after calibrating the design model of ``/model_file``; the SHA-256
    then covers them too), ``case_name``,
    ``case_description``, ``case_path``, ``case_sha256``, ``profile_path``
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
    (the other is NaN), ``valve_mode``, ``pressure_mode``, ``throttle_pressure``
    [Pa] (NaN under sliding pressure), ``throttle_temperature`` [K], ``reheat_temperature``
    [K], ``exhaust_pressure`` [Pa] (design values where the case leaves them
    unset), ``heaters_out_of_service``, ``extractions_closed`` and
    ``extraction_setpoints`` (text), and each swept or profile input that is
    not among these (``throttle_flow_fraction`` [-], ``output_fraction`` [-],
    ``heater_out``, ``extraction_closed``, ``extraction_flow.NAME`` [kg/s], a
    component setting ``TABLE.NAME.SETTING`` [its SI unit]; for profiles
    ``profile_line`` and ``time``).
``/solver/`` (n)
    ``status`` (int8: -1 not solved yet, 0 converged, 1 failed, 2 internal
    error), ``converged`` (uint8), ``iterations``, ``evaluations`` (int32, -1
    not known), ``residual`` [-] (largest normalised residual), ``error`` (the
    error class of a failed point: ``ConvergenceError``, ``InfeasibleError``,
    ``PropertyRangeError``), ``message`` (why it failed; cut to 256 bytes).
Result groups
    One group per result group of a point, generated from the declared
    columns (:mod:`simulator.store.layout`): ``/nodes/`` and one group for
    each kind of component the model has (``/throttle_valve/``,
    ``/stage_groups/``, ``/reheaters/``, ``/pipes/``, ``/control_valves/``,
    ``/extractions/``, ``/heaters/``, and any kind added later).  Each holds
    ``names`` (items, text), ``inlet`` and ``outlet`` (node names) for
    components between two nodes or ``nodes`` for those at one node, and one
    (n, items) dataset per declared column with its ``unit`` and
    ``description``.  Those of the demo units:
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
``/throttle_valve/``, ``/reheaters/``, ``/pipes/``, ``/control_valves/``
    (n, items): ``flow`` [kg/s], ``pressure_drop`` [Pa]; the throttle
    valves' ``wide_open_drop`` [Pa] at the point's flow; a reheater's
    ``heat`` [W]; a control valve's ``wide_open`` (uint8: 1 wide open, its
    inlet pressure floating; 0 holding it).
``/paths/``
    ``names``, ``inlet``, ``outlet``, ``kind`` (text: the component's table):
    the components other than stage groups and the throttle valves that join
    two nodes (reheaters, pipes, control valves), for drawing the expansion
    line.
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

Checks
    :func:`check_format` says whether an open file is a partload result this
    software reads (format name, format version, core datasets);
    :func:`check_shapes` that its datasets agree with each other (every
    dataset of a group has the file's row count, name lists match the
    columns, the status has one value a point), so a damaged file is called
    damaged instead of being read wrong; :func:`open_hdf5` opens a path as
    HDF5 or says why not (missing, not HDF5, damaged, read-only, locked by a
    running study); :func:`in_use` tells whether a study holds the file for
    writing; :func:`looks_ours` recognises a damaged result of ours, which
    ``--force`` may replace.
"""

from __future__ import annotations

import os
from pathlib import Path

import h5py
import numpy as np

from ..errors import ResultFileError

__all__ = [
    "FORMAT",
    "FORMAT_VERSION",
    "READABLE_VERSIONS",
    "TEXT",
    "is_hdf5",
    "open_hdf5",
    "open_for_rows",
    "small_metadata_cache",
    "in_use",
    "format_name",
    "check_format",
    "check_shapes",
    "damaged",
    "looks_ours",
    "attr_value",
    "H5_ERRORS",
    "READ_ERRORS",
    "NAME_LISTS",
    "is_scale",
]

FORMAT = "partload-study"
FORMAT_VERSION = 3  # the version this software writes
READABLE_VERSIONS = (1, 2, 3)  # the versions this software reads
HDF5_SIGNATURE = b"\x89HDF\r\n\x1a\n"
TEXT = h5py.string_dtype("utf-8")  # variable-length UTF-8 text
# what h5py raises for a file it cannot read or write (damaged, full disk, ...)
H5_ERRORS = (OSError, RuntimeError, ValueError)
# and what reading a damaged file raises besides (an object or attribute gone, a wrong kind)
READ_ERRORS = (*H5_ERRORS, KeyError, TypeError, IndexError, AttributeError)
# text datasets of a result group naming its items (one per column of its datasets)
NAME_LISTS = ("names", "inlet", "outlet", "nodes", "kind")
OUR_MARK = FORMAT.encode()  # the root attribute 'format', stored near the start
HEAD_BYTES = 1 << 16  # [B] the part of a file searched for it


def is_scale(ds) -> bool:
    """Whether an HDF5 dataset is a dimension scale (a coordinate of format 3) [-]."""
    return isinstance(ds, h5py.Dataset) and h5py.h5ds.is_scale(ds.id)


def damaged(path: Path, exc: BaseException | str) -> ResultFileError:
    """The error for a result file that cannot be read as it should (``exc``: what failed)."""
    return ResultFileError(f"{path} is damaged and cannot be read ({exc}); run its study "
                           f"again with --force to replace it")


def looks_ours(path: Path) -> bool:
    """Whether the file at ``path`` [-] is a partload result, even a damaged one.

    Its first 64 KiB hold the text of the root attribute ``format`` and an
    HDF5 object header (``OHDR``): a file of ours whose other bytes are
    damaged (a study killed while writing, a bad copy) still has them, a
    foreign file or a text file does not.
    """
    try:
        with open(path, "rb") as fh:
            head = fh.read(HEAD_BYTES)
    except OSError:
        return False
    return OUR_MARK in head and b"OHDR" in head


def _read_only_reason(path: Path) -> str | None:
    """Why ``path`` [-] cannot be written, when it is read-only; else ``None``."""
    if os.access(path, os.W_OK):
        return None
    try:
        if os.statvfs(path).f_flag & os.ST_RDONLY:
            return "it is on a read-only file system"
    except OSError:
        pass
    return "it is read-only (no write permission)"


def is_hdf5(path: Path) -> bool:
    """Whether the file at ``path`` [-] starts with the HDF5 signature."""
    try:
        with open(path, "rb") as fh:
            head = fh.read(8)
    except OSError:
        return False
    return head == HDF5_SIGNATURE


METADATA_CACHE = 512 * 1024  # [B] largest metadata cache of a study file being written


def small_metadata_cache(target) -> None:
    """Keep HDF5's metadata cache of a file being written at most
    :data:`METADATA_CACHE` bytes (HDF5's default grows it to 32 MiB).

    Parameters
    ----------
    target : an open file's ``FileID`` or a file access property list [-]

    Writing a study file's structure put every text of the per-point label and
    input lists (8,760 of each for a year) into cached heap blocks: 3 MB more
    when the structure of the demo year is written, which the forked workers
    inherited (in the whole study, measured: 1.5 MB less in the study process
    and 1 MB in each worker).  A file written once, start to end, gains nothing
    from a larger cache; the data written are the same, and the time (measured).
    """
    config = target.get_mdc_config()
    config.set_initial_size = True
    config.initial_size = METADATA_CACHE // 2
    config.min_size = METADATA_CACHE // 4
    config.max_size = METADATA_CACHE
    target.set_mdc_config(config)


def open_for_rows(path: Path) -> h5py.File:
    """``path`` [-] opened for writing, as ``h5py.File(path, "r+")`` (HDF5's lock
    taken), for a writer that only puts rows into datasets allocated at creation.

    HDF5's data sieve buffer is off: a write of rows goes to the operating system
    at once, where by default each dataset written keeps a buffer of up to 64 KiB
    until the file is flushed or closed (about 5 MB for the 80 datasets of a study,
    held in the study process for the whole run) and a flush copies it again.
    The bytes in the file are the same.
    """
    fapl = h5py.h5p.create(h5py.h5p.FILE_ACCESS)
    fapl.set_libver_bounds(h5py.h5f.LIBVER_EARLIEST, h5py.h5f.LIBVER_LATEST)  # as h5py
    fapl.set_sieve_buf_size(0)
    small_metadata_cache(fapl)
    return h5py.File(h5py.h5f.open(os.fsencode(path), h5py.h5f.ACC_RDWR, fapl=fapl))


def open_hdf5(path: Path, mode: str) -> h5py.File:
    """Open ``path`` as HDF5 or raise a :class:`ResultFileError` saying why not.

    Parameters
    ----------
    path : the file [-]
    mode : h5py mode, ``"r"`` (no lock: the layout never changes, so the
        finished points of a running study can be read) or ``"r+"`` (for
        writing rows, :func:`open_for_rows`) [-]
    """
    if not path.exists():
        raise ResultFileError(f"{path}: no such file")
    if not is_hdf5(path):
        raise ResultFileError(f"{path} is not an HDF5 file, so not a partload result "
                              f"(another program's file, or damaged)")
    if mode != "r":
        why = _read_only_reason(path)
        if why is not None:
            raise ResultFileError(f"cannot write to {path}: {why}; the file is not damaged. "
                                  f"Plot or export it as it is, or copy it to a writable "
                                  f"folder and continue it there")
    try:
        if mode == "r":
            # the layout never changes after creation, so reading needs no lock: the
            # finished points of a running study can be read
            try:
                return h5py.File(path, "r", locking=False)
            except OSError as exc:
                if "locking flag values don't match" not in str(exc):
                    raise
                # this process holds the file open already with a lock (xarray or
                # h5py in a notebook): HDF5 shares that handle, opened as it was
                return h5py.File(path, "r")
        return open_for_rows(path) if mode == "r+" else h5py.File(path, mode)
    except OSError as exc:
        text = str(exc)
        if "unable to lock file" in text.lower():
            raise ResultFileError(f"{path} is in use by another process (a study still "
                                  f"running?): {text}") from None
        if "errno = 30," in text or "errno = 13," in text:
            raise ResultFileError(f"cannot open {path} for writing: it is read-only ({text}); "
                                  f"the file is not damaged") from None
        raise ResultFileError(f"{path} cannot be read as HDF5; it is damaged ({text})") from None


def in_use(path: Path) -> bool:
    """Whether another process holds the file at ``path`` [-] open for writing (its HDF5 lock)."""
    try:
        h5py.File(path, "r").close()  # a locking open: refused while a writer holds it
    except OSError as exc:
        return "unable to lock file" in str(exc).lower()
    return False


def format_name(f: h5py.File):
    """The root attribute ``format`` of an open file as text (``None`` when missing)."""
    fmt = f.attrs.get("format")
    return fmt.decode() if isinstance(fmt, bytes) else fmt


def _versions() -> str:
    return ", ".join(str(v) for v in READABLE_VERSIONS)


def check_format(f: h5py.File, path: Path) -> None:
    """Refuse an open HDF5 file that is not a partload result this software reads.

    Parameters
    ----------
    f : the open file
    path : its path, for the messages [-]

    Raises
    ------
    ResultFileError
        When the root attribute ``format`` is not :data:`FORMAT`; when
        ``format_version`` is missing or not in :data:`READABLE_VERSIONS`
        (the message names the file, the version found and the versions
        read); when a core dataset is missing (damaged).
    """
    try:
        fmt = format_name(f)
        has_version = "format_version" in f.attrs
        found = attr_value(f.attrs["format_version"]) if has_version else None
        missing = [k for k in ("points/done", "solver/status", "model_file", "case_file")
                   if k not in f]
    except READ_ERRORS as exc:
        raise damaged(path, exc) from None
    if fmt != FORMAT:
        raise ResultFileError(f"{path} is an HDF5 file from another program, not a partload "
                              f"study result (its root attribute 'format' is {fmt!r}, "
                              f"expected {FORMAT!r})")
    if not has_version:
        raise ResultFileError(f"{path} is marked as a partload result but has no root "
                              f"attribute 'format_version'; this partload reads result format "
                              f"version {_versions()}")
    if not (isinstance(found, int) and found in READABLE_VERSIONS):
        newer = (", newer than this partload knows (a newer partload wrote it)"
                 if isinstance(found, int) and found > max(READABLE_VERSIONS) else "")
        raise ResultFileError(f"{path} has result format version {found!r}{newer}; this "
                              f"partload reads result format version {_versions()}")
    if missing:
        raise ResultFileError(f"{path} is a partload result but lacks {missing[0]!r}; it is "
                              f"damaged")


def check_shapes(f: h5py.File, path: Path) -> None:
    """Refuse a result whose datasets disagree with each other (damaged).

    Every dataset of ``/points``, ``/inputs``, ``/solver``, ``/totals`` and the
    result groups has one row a point (the length of ``/points/done`` and the
    root attribute ``n_points``); the name lists of a group (``names``,
    ``inlet``, ``outlet``, ``nodes``) have one entry a column of its 2-D
    datasets; ``/paths`` has lists of one length; ``/points/series`` points
    into ``/points/series_labels``.

    Parameters
    ----------
    f : the open file, already checked by :func:`check_format`
    path : its path, for the messages [-]

    Raises
    ------
    ResultFileError
        Naming the first dataset that disagrees, and calling the file damaged.
    """
    try:
        done = f["points/done"]
        if done.ndim != 1:
            raise damaged(path, f"/points/done has shape {done.shape}, not one row a point")
        n = done.shape[0]
        if "n_points" in f.attrs and int(attr_value(f.attrs["n_points"])) != n:
            raise damaged(path, f"the root attribute n_points is "
                                f"{attr_value(f.attrs['n_points'])}, and /points/done has "
                                f"{n} rows")
        status = f["solver/status"]
        if status.shape != (n,):
            raise damaged(path, f"/solver/status has shape {status.shape}, the file has "
                                f"{n} points")
        if "point" in f and f["point"].shape != (n,):
            raise damaged(path, f"/point has shape {f['point'].shape}, the file has {n} points")
        for gname, g in f.items():
            if not isinstance(g, h5py.Group):
                continue
            lists = {k: g[k] for k in NAME_LISTS if k in g and isinstance(g[k], h5py.Dataset)}
            if gname == "paths":
                lengths = {k: ds.shape for k, ds in lists.items()}
                if len(set(lengths.values())) > 1:
                    raise damaged(path, f"the lists of /paths differ in length ({lengths})")
                continue
            if gname == "totals":
                lists = {}
            width = lists["names"].shape[0] if "names" in lists else None
            for k, ds in lists.items():
                if ds.ndim != 1 or (width is not None and ds.shape[0] != width):
                    raise damaged(path, f"/{gname}/{k} has shape {ds.shape}, and "
                                        f"/{gname}/names has {width} entries")
            for dname, ds in g.items():
                if not isinstance(ds, h5py.Dataset) or dname in lists:
                    continue
                if is_scale(ds):  # a coordinate: the point numbers or the item names
                    if gname != "points" and (ds.ndim != 1 or ds.shape[0] not in (n, width)):
                        raise damaged(path, f"/{gname}/{dname} has shape {ds.shape}, and the "
                                            f"file has {n} points and {width} items there")
                    continue
                if gname == "points" and dname == "series_labels":
                    continue
                if ds.ndim == 0 or ds.shape[0] != n:
                    rows = ds.shape[0] if ds.ndim else "no"
                    raise damaged(path, f"/{gname}/{dname} has {rows} rows, and the file has "
                                        f"{n} points")
                if ds.ndim > 2 or (ds.ndim == 2 and ds.shape[1] != width):
                    raise damaged(path, f"/{gname}/{dname} has shape {ds.shape}, and "
                                        f"/{gname}/names names {width} columns")
        if "points/series" in f and "points/series_labels" in f and n:
            series = f["points/series"][:]
            n_labels = f["points/series_labels"].shape[0]
            if series.min() < 0 or series.max() >= n_labels:
                raise damaged(path, f"/points/series refers to series {int(series.max())}, "
                                    f"and /points/series_labels has {n_labels}")
    except ResultFileError:
        raise
    except READ_ERRORS as exc:
        raise damaged(path, exc) from None


def attr_value(v):
    """An HDF5 attribute as plain Python: text as str, numpy scalars as numbers."""
    if isinstance(v, bytes):
        return v.decode()
    if isinstance(v, np.ndarray) and v.dtype.kind in "OS":
        return [x.decode() if isinstance(x, bytes) else str(x) for x in v]
    if isinstance(v, np.generic):
        return v.item()
    return v
