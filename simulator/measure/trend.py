"""Degradation over time: the tunables fitted period by period, stored and drawn.

Online data (daily averages, say) are cut into periods of consecutive rows
(``[trend] points_per_period`` in the map, default 1); each period is fitted on
its own (:func:`simulator.measure.fit.fit`), so each constant becomes a time
series with its 95 % band.  A period that cannot be fitted is recorded with its
reason and the trend goes on.

The HDF5 file (``format`` = ``"partload-trend"``), every number SI with its
``unit`` attribute:

=============================  ===========  ====================================
dataset                        shape        contents
=============================  ===========  ====================================
``/periods/label``             (n)          label of the period's first row
``/periods/first_line``        (n)          its line in the CSV file
``/periods/points``            (n)          rows in the period
``/periods/status``            (n) int8     0 fitted, 1 failed
``/periods/message``           (n)          why a period failed
``/tunables/names``, ``units`` (t)          the fitted tunables
``/tunables/design``           (t)          their design values
``/tunables/value``            (n, t)       fitted values (NaN: failed)
``/tunables/uncertainty``      (n, t)       95 % uncertainties
``/quality/chi2``, ``dof``,    (n)          quality criterion of each period
``chi2_limit``, ``passed``
``/quality/suspects``          (n)          suspect readings (tag and z), text
``/quality/offsets``            (n)          tags whose readings deviate together
                                            (tag and Z), text
=============================  ===========  ====================================
"""

from __future__ import annotations

import datetime as _dt
import os
from dataclasses import dataclass
from pathlib import Path

import numpy as np

from ..errors import InputError, SolveError
from ..units import Where
from ..version import __version__
from .fit import fit
from .tags import Measurements, resolve_tunable

__all__ = ["Trend", "fit_trend", "write_trend", "read_trend", "draw_trend", "FORMAT"]

FORMAT = "partload-trend"


@dataclass
class Trend:
    """Tunables fitted per period (SI units); see the module docstring."""

    labels: list[str]
    first_lines: np.ndarray
    points: np.ndarray
    status: np.ndarray
    messages: list[str]
    names: list[str]
    units: list[str]
    design: np.ndarray
    value: np.ndarray
    uncertainty: np.ndarray
    chi2: np.ndarray
    dof: np.ndarray
    chi2_limit: np.ndarray
    passed: np.ndarray
    suspects: list[str]
    offsets: list[str]


def _period_size(meas: Measurements) -> int:
    spec = meas.trend
    for k in spec:
        if k != "points_per_period":
            raise Where(meas.file, "trend", k).error("unknown key; valid key: "
                                                     "points_per_period")
    n = spec.get("points_per_period", 1)
    if not isinstance(n, int) or isinstance(n, bool) or n < 1:
        raise Where(meas.file, "trend", "points_per_period").error(
            "expected a whole number of rows, 1 or more")
    return n


def fit_trend(meas: Measurements, backend: str = "seuif97", progress=None) -> Trend:
    """Fit the map's tunables period by period.

    Parameters
    ----------
    meas : the measurements, rows in time order [-]
    backend : steam property backend [-]
    progress : called with ``(period, periods)`` after each period, or ``None`` [-]

    Returns
    -------
    Trend
    """
    if not meas.tunables:
        raise InputError("no tunables to fit: list them in [fit] tunables", file=meas.file,
                         table="fit", key="tunables")
    size = _period_size(meas)
    n_rows = len(meas.values)
    starts = list(range(0, n_rows, size))
    n, t = len(starts), len(meas.tunables)
    refs = [resolve_tunable(meas.model, k, Where(meas.file, "fit", "tunables"))
            for k in meas.tunables]
    out = Trend([meas.labels[s] for s in starts], np.array([meas.lines[s] for s in starts]),
                np.array([min(size, n_rows - s) for s in starts]), np.zeros(n, np.int8),
                [""] * n, list(meas.tunables), [r.tunable.unit for r in refs],
                np.array([r.design for r in refs]), np.full((n, t), np.nan),
                np.full((n, t), np.nan), np.full(n, np.nan), np.zeros(n, np.int64),
                np.full(n, np.nan), np.zeros(n, np.uint8), [""] * n, [""] * n)
    for i, s in enumerate(starts):
        try:
            f = fit(meas.subset(range(s, min(s + size, n_rows))), backend=backend)
        except (SolveError, InputError) as exc:
            out.status[i] = 1
            out.messages[i] = str(exc)[:512]
        else:
            for c, key in enumerate(meas.tunables):
                out.value[i, c], out.uncertainty[i, c] = f.tunable(key)
            out.chi2[i], out.dof[i], out.chi2_limit[i] = f.rec.chi2, f.rec.dof, f.rec.chi2_limit
            out.passed[i] = f.rec.passed
            out.suspects[i] = " ".join(f"{tag}@{label}:{z:+.2f}"
                                       for label, tag, z in f.suspects())
            out.offsets[i] = " ".join(f"{tag}:{z:+.2f}" for tag, z, _ in f.offsets())
        if progress is not None:
            progress(i + 1, n)
    return out


def write_trend(trend: Trend, meas: Measurements, path: str | Path) -> Path:
    """Write a trend to HDF5 (under a temporary name, then renamed: whole or not at all).

    Parameters
    ----------
    trend : the fitted trend [-]
    meas : its measurements (files named in the attributes) [-]
    path : the HDF5 file [-]
    """
    import h5py

    path = Path(path)
    path.parent.mkdir(parents=True, exist_ok=True)
    tmp = path.with_name(f".{path.name}.{os.getpid()}.tmp")
    text = h5py.string_dtype("utf-8")
    try:
        with h5py.File(tmp, "w") as f:
            f.attrs.update(format=FORMAT, format_version=1, software="partload",
                           software_version=__version__,
                           created=_dt.datetime.now(_dt.UTC).isoformat(timespec="seconds"),
                           model_name=meas.model.name, model_file=meas.model.file,
                           model_sha256=meas.model.sha256, measurements_file=meas.file,
                           data_file=meas.data_file, data_sha256=meas.data_sha256,
                           units="SI")

            def put(name, data, unit, description, dtype=None):
                d = f.create_dataset(name, data=data, dtype=dtype)
                d.attrs["unit"] = unit
                d.attrs["description"] = description

            put("periods/label", trend.labels, "", "label of the first row", text)
            put("periods/first_line", trend.first_lines, "-", "line of the first row in the CSV")
            put("periods/points", trend.points, "-", "rows in the period")
            put("periods/status", trend.status, "-", "0 fitted, 1 failed")
            put("periods/message", trend.messages, "", "why a period failed", text)
            put("tunables/names", trend.names, "", "fitted tunables", text)
            put("tunables/units", trend.units, "", "SI unit of each tunable", text)
            put("tunables/design", trend.design, "(tunables/units)", "design values")
            put("tunables/value", trend.value, "(tunables/units)", "fitted values")
            put("tunables/uncertainty", trend.uncertainty, "(tunables/units)",
                "95 % uncertainty of the fitted values")
            put("quality/chi2", trend.chi2, "-", "weighted sum of squared corrections")
            put("quality/dof", trend.dof, "-", "degrees of freedom")
            put("quality/chi2_limit", trend.chi2_limit, "-", "95 % chi-square quantile")
            put("quality/passed", trend.passed, "-", "1: quality criterion met at 95 %")
            put("quality/suspects", trend.suspects, "", "suspect readings: tag@label:z", text)
            put("quality/offsets", trend.offsets, "",
                "tags whose readings deviate together: tag:Z", text)
        os.replace(tmp, path)
    finally:
        if tmp.exists():
            tmp.unlink()
    return path


def read_trend(path: str | Path) -> Trend:
    """Read a trend file written by :func:`write_trend`."""
    import h5py

    from ..errors import ResultFileError

    try:
        f = h5py.File(path, "r")
    except OSError as exc:
        raise ResultFileError(f"{path}: cannot open as HDF5 ({exc})") from None
    with f:
        if f.attrs.get("format") != FORMAT:
            raise ResultFileError(f"{path}: not a partload trend file")
        s = lambda name: list(f[name].asstr()[:])  # noqa: E731
        return Trend(s("periods/label"), f["periods/first_line"][:], f["periods/points"][:],
                     f["periods/status"][:], s("periods/message"), s("tunables/names"),
                     s("tunables/units"), f["tunables/design"][:], f["tunables/value"][:],
                     f["tunables/uncertainty"][:], f["quality/chi2"][:], f["quality/dof"][:],
                     f["quality/chi2_limit"][:], f["quality/passed"][:], s("quality/suspects"),
                     s("quality/offsets"))


def _times(labels: list[str]):
    """The labels as dates when every one is an ISO date or time, else ``None``."""
    try:
        return [_dt.datetime.fromisoformat(x) for x in labels]
    except ValueError:
        return None


def draw_trend(trend: Trend, path: str | Path) -> Path:
    """Draw each tunable against time with its 95 % band and its design value (PNG).

    Parameters
    ----------
    trend : the fitted trend [-]
    path : the PNG file [-]
    """
    import matplotlib

    matplotlib.use("Agg")
    import matplotlib.pyplot as plt

    t = len(trend.names)
    x = _times(trend.labels) or list(range(len(trend.labels)))
    fig, axes = plt.subplots(t, 1, figsize=(8, 2.4 * t + 0.6), sharex=True, squeeze=False)
    for c, ax in enumerate(axes[:, 0]):
        scale, unit = (100.0, "%") if trend.units[c] == "-" else (1.0, trend.units[c])
        v = trend.value[:, c] * scale
        u = trend.uncertainty[:, c] * scale
        ax.fill_between(x, v - u, v + u, alpha=0.25, label="95 % band")
        ax.plot(x, v, lw=1.2, label="fitted")
        ax.axhline(trend.design[c] * scale, color="k", ls="--", lw=0.8, label="design")
        ax.set_ylabel(f"{trend.names[c]}\n[{unit}]", fontsize=8)
        ax.grid(alpha=0.3)
    axes[0, 0].legend(fontsize=8, loc="best")
    axes[0, 0].set_title("Fitted constants per period (engineering estimate)")
    fig.autofmt_xdate()
    fig.tight_layout()
    path = Path(path)
    path.parent.mkdir(parents=True, exist_ok=True)
    tmp = path.with_name(f".{path.name}.{os.getpid()}.tmp.png")
    try:
        fig.savefig(tmp, dpi=110)
        os.replace(tmp, path)
    finally:
        plt.close(fig)
        if tmp.exists():
            tmp.unlink()
    return path
