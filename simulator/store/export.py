"""Study results in the engineer's units: display conversion and CSV export.

:func:`to_display` converts a stored dataset to the units of tables, CSV and
charts, using the one table of display units, :data:`partload.units.DISPLAY`,
plus the few datasets shown otherwise (efficiencies and moisture in %,
temperature differences in K).  :func:`export_csv` writes a result file as
CSV files for spreadsheets.
"""

from __future__ import annotations

import csv
import math
import os
from collections.abc import Callable
from pathlib import Path

import numpy as np

from ..errors import InputError, ResultFileError
from ..units import to_display_unit
from .reader import read_study

__all__ = ["to_display", "export_csv", "write_whole", "exhaust_nodes", "CSV_DIGITS",
           "csv_text"]

# display rules of files of format version 1, which do not store them
_V1_DISPLAY = {"heaters/ttd": "K", "heaters/dca": "K", "stage_groups/efficiency": "%",
               "stage_groups/outlet_moisture": "%", "totals/exhaust_moisture": "%",
               "totals/energy_imbalance": "W"}


def to_display(values, unit: str, path: str = "",
               display: str | None = None, system: str = "metric",
               quantity: str | None = None) -> tuple[np.ndarray, str]:
    """Convert SI values to the engineer's units used in tables, CSV and plots.

    Metric: pressure in bar (a back pressure in kPa), temperature in degC
    (differences stay in K), enthalpy in kJ/kg, power in MW, heat rate in
    kJ/kWh, steam rate in kg/kWh, efficiencies and moisture in %.  US
    customary (``system="us"``): psia (a back pressure in inHg), degF
    (differences in delta_degF), Btu/lb, MW, Btu/kWh, lb/kWh, klb/h; see
    :data:`partload.units.DISPLAY_US`.

    Parameters
    ----------
    values : array in SI units [unit]
    unit : its SI unit, the dataset's ``unit`` attribute [-]
    path : the dataset path [-]
    display : the dataset's ``display`` attribute, the declared column's rule:
        ``"%"`` (a fraction shown in per cent) or a unit kept as it is (a
        temperature difference in K); a file of format version 1 has none, and
        the rules of its datasets are known by path [-]
    system : ``"metric"`` (default) or ``"us"`` [-]
    quantity : the quantity's name where it decides the unit (a back pressure);
        default: the last part of ``path`` [-]

    Returns
    -------
    values, unit : converted array and its unit
    """
    if quantity is None:
        quantity = path.rsplit("/", 1)[-1]
    return to_display_unit(values, unit, display or _V1_DISPLAY.get(path), system, quantity)


#: significant digits of a number in a CSV file of display units, and of SI values
CSV_DIGITS = 6
CSV_DIGITS_SI = 9


def csv_text(col: np.ndarray, digits: int = CSV_DIGITS) -> list[str]:
    """Text of a CSV column: numbers to ``digits`` significant figures [-] (six in
    display units: a sweep's neighbouring points differ in the fourth or fifth,
    and the model itself is good to a few tenths of a per cent), no ``-0``."""
    col = np.asarray(col)
    if col.dtype.kind in "fc":
        x = col.astype(float)
        out = np.char.mod(f"%.{digits}g", x + 0.0).tolist()
        return ["" if not math.isfinite(v) else ("0" if s == "-0" else s)
                for s, v in zip(out, x.tolist())]
    if col.dtype.kind in "iub":
        return [str(int(x)) for x in col.tolist()]
    return [str(x) for x in col.tolist()]


def export_csv(path: str | Path, out_dir: str | Path | None = None, si: bool = False,
               units: str = "metric") -> list[Path]:
    """Write a study result as CSV files for spreadsheets.

    Files ``<stem>_points.csv`` (inputs, solver record, totals, cautions) and
    one file per result group of the file (``<stem>_nodes.csv``,
    ``<stem>_stage_groups.csv``, ``<stem>_heaters.csv``, one per kind of
    component); one row per point, in the order of the file.
    Headers give the unit in brackets, e.g. ``generator_output [MW]`` or
    ``pressure crossover [bar]``; ``input`` columns hold what was asked.
    Values are in display units (see :func:`to_display`) to six significant
    figures, a back pressure (the exhaust pressure asked, the pressure of a
    node a stage group exhausts to) in kPa or inHg; or SI with ``si``, to
    nine.
    Points not solved yet, and results of failed points, are empty cells.
    Existing CSV files of the same names are replaced (they are derived data).

    Parameters
    ----------
    path : the study result file [-]
    out_dir : folder for the CSV files (default: that of the result file) [-]
    si : write SI values instead of display units [-]
    units : the display units, ``"metric"`` (default) or ``"us"`` [-]

    Returns
    -------
    list of Path
        The files written.
    """
    from ..units import SYSTEMS

    if units not in SYSTEMS:
        raise InputError(f"units must be one of {', '.join(SYSTEMS)}, not {units!r}",
                         key="units")
    st = read_study(path)
    out_dir = Path(out_dir) if out_dir is not None else st.path.parent
    out_dir.mkdir(parents=True, exist_ok=True)
    stem = st.path.stem
    n = st.n_points

    back = exhaust_nodes(st)

    def conv(key, values, item=None):
        unit = st.units.get(key, "")
        if si or np.asarray(values).dtype.kind not in "fiu" or not unit:
            return np.asarray(values), unit
        quantity = ("back_pressure" if key == "nodes/pressure" and item in back
                    else key.rsplit("/", 1)[-1])
        return to_display(values, unit, key, st.display.get(key), units, quantity)

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
    digits = CSV_DIGITS_SI if si else CSV_DIGITS
    files.append(_write_csv(out_dir / f"{stem}_points.csv", cols, digits))
    for group, items in st.names.items():  # the nodes and one group per kind
        cols = list(base_cols)
        for key in [k for k in st.data if k.startswith(group + "/")]:
            arr = st.data[key]
            if arr.ndim != 2:
                continue
            for j, item in enumerate(items):
                v, u = conv(key, arr[:, j], item)
                cols.append((head(f"{key.split('/')[1]} {item}", u), v))
        files.append(_write_csv(out_dir / f"{stem}_{group}.csv", cols, digits))
    return files


def exhaust_nodes(st) -> set[str]:
    """The nodes a stage group exhausts to (one with an annulus velocity at some
    point): their pressure is a back pressure [-]."""
    key = "stage_groups/annulus_velocity"
    if key not in st.data or "group_outlet" not in st.topology:
        return set()
    with np.errstate(invalid="ignore"):
        hits = np.nanmax(np.where(np.isfinite(st.data[key]), st.data[key], 0.0), axis=0) \
            if st.n_points else np.zeros(len(st.topology["group_outlet"]))
    return {node for node, v in zip(st.topology["group_outlet"], hits) if v > 0.0}


def write_whole(path: Path, write: Callable[[Path], None]) -> Path:
    """Write a file whole or not at all: ``write`` fills a temporary file in the
    same folder, which then replaces ``path`` [-]; on any failure (a full disk,
    Ctrl-C) the temporary file is removed and ``path`` is left as it was, so no
    empty or cut file is ever left under the name.

    Parameters
    ----------
    path : the file to write [-]
    write : called with the temporary path (same suffix as ``path``) [-]

    Raises
    ------
    ResultFileError
        When the file cannot be written (the reason named).
    """
    tmp = path.with_name(f".{path.stem}.{os.getpid()}.partial{path.suffix}")
    try:
        write(tmp)
        os.replace(tmp, path)
    except BaseException as exc:
        try:
            tmp.unlink()
        except OSError:
            pass
        if isinstance(exc, OSError):
            raise ResultFileError(f"cannot write {path}: {exc.strerror or exc}") from None
        raise
    return path


def _write_csv(path: Path, cols: list[tuple[str, np.ndarray]], digits: int) -> Path:
    texts = [csv_text(c, digits) for _, c in cols]

    def write(tmp: Path) -> None:
        # text read from a damaged file may hold bytes that are not UTF-8: written
        # escaped rather than failing
        with open(tmp, "w", newline="", encoding="utf-8", errors="backslashreplace") as fh:
            w = csv.writer(fh)
            w.writerow([name for name, _ in cols])
            w.writerows(zip(*texts))

    return write_whole(path, write)
