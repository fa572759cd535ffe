"""One-page reports as a single self-contained HTML file.

A report needs nothing but the file to be read: the heat-balance diagrams are
inline SVG, the charts PNG images embedded as base64 ``data:`` URLs, the style
sheet inline; there is no script and nothing is fetched from a network.

* **Point** (:func:`point_report`, from a case file): the heat-balance
  diagram, the same with the differences from design, the cautions, the
  totals and every result table of the point, and the provenance (model and
  case file names and SHA-256, partload version, property backend, date).
* **A point of a study** (:func:`study_point`): the same page for one point of a
  result file, re-solved from the study's case (checked unchanged).
* **Study** (:func:`study_report`, from a result file): the charts of
  :data:`simulator.present.charts.CHARTS`, a summary table per series and the
  provenance stored in the file.
* **Profile** (a study whose points are a time series): in addition the time
  series, the load-duration curve and monthly and annual totals: hours,
  generated energy [MWh], heat added [MWh] and the average turbine-cycle heat
  rate (heat added over energy generated, so weighted by energy) [kJ/kWh].

Numbers are shown in the display units of :mod:`simulator.units`, metric
(bar, degC, kg/s, MW, kJ/kWh; the default) or US customary (``units="us"``:
psia, degF, klb/h, MW, Btu/kWh, a back pressure in inHg), in the tables, the
diagrams and the charts alike.  :func:`write_report` picks the kind from the
file given and writes the page whole or not at all.
"""

from __future__ import annotations

import base64
import datetime as dt
import hashlib
import html
import io
import math
from pathlib import Path

import numpy as np

from ..errors import InputError
from ..version import __version__

__all__ = ["point_report", "study_report", "study_point", "profile_totals", "write_report",
           "stored_path"]

_STYLE = """
body{font-family:Helvetica,Arial,sans-serif;font-size:13px;margin:16px 24px;color:#111;
max-width:2100px}
h1{font-size:20px;margin:0 0 4px}h2{font-size:16px;margin:22px 0 6px;
border-bottom:1px solid #bbb}
table{border-collapse:collapse;margin:6px 0 10px}td,th{border:1px solid #ccc;
padding:2px 6px;text-align:right}th{background:#f0f0f0}td.t,th.t{text-align:left}
.note{color:#555;font-size:12px}.caution{color:#b2182b}.figure{overflow-x:auto;
margin:6px 0}.figure svg{max-width:none}img.chart{display:block;margin:6px 0}
code{font-size:12px}
"""
_NOTE = ("Engineering estimate from a model calibrated to one design heat balance; not a "
         "guarantee of what the machine will do. Operating decisions defer to the "
         "manufacturer's limits, local codes and licensed engineering practice.")


def _esc(x) -> str:
    return html.escape(str(x), quote=True)


def _num(v, digits: int = 2) -> str:
    if v is None:
        return "-"
    if isinstance(v, (bool, np.bool_)):
        return "yes" if v else "no"
    if isinstance(v, str):
        return _esc(v)
    v = float(v)
    if not math.isfinite(v):
        return "-"
    return f"{v:,.{digits}f}"


def _table(headers, rows, units=None, left: int = 1) -> str:
    """An HTML table; the first ``left`` columns are text."""
    out = ["<table><tr>"]
    for j, h in enumerate(headers):
        u = f"<br>[{_esc(units[j])}]" if units and units[j] else ""
        out.append(f'<th class="{"t" if j < left else ""}">{_esc(h)}{u}</th>')
    out.append("</tr>")
    for row in rows:
        out.append("<tr>" + "".join(
            f'<td class="{"t" if j < left else ""}">{c}</td>' for j, c in enumerate(row))
            + "</tr>")
    out.append("</table>")
    return "".join(out)


def _png(fig, alt: str) -> str:
    """A matplotlib figure as an embedded PNG image."""
    buf = io.BytesIO()
    fig.savefig(buf, format="png", dpi=fig.dpi)
    data = base64.b64encode(buf.getvalue()).decode("ascii")
    w, h = (int(round(v * fig.dpi)) for v in fig.get_size_inches())
    return (f'<img class="chart" alt="{_esc(alt)}" width="{w}" height="{h}" '
            f'src="data:image/png;base64,{data}">')


def _page(title: str, body: list[str]) -> str:
    return ("<!DOCTYPE html>\n<html lang=\"en\"><head><meta charset=\"utf-8\">"
            f"<title>{_esc(title)}</title><style>{_STYLE}</style></head><body>\n"
            + "\n".join(body) + f'\n<p class="note">{_esc(_NOTE)}</p>\n</body></html>\n')


def _now() -> str:
    return dt.datetime.now(dt.UTC).replace(microsecond=0).isoformat()


def stored_path(attrs: dict, what: str) -> str:
    """The path of the model, case or profile file a result file names [-]:
    attribute ``<what>_path`` (format 3), else ``<what>_file`` (earlier formats)."""
    return str(attrs.get(f"{what}_path", attrs.get(f"{what}_file", "")))


def _file_sha(path) -> str:
    try:
        return hashlib.sha256(Path(path).read_bytes()).hexdigest()
    except OSError:
        return "(file not readable)"


# --- a point ----------------------------------------------------------------------------

def point_report(case, *, backend: str | None = None, design: bool = True,
                 conditions=None, label: str = "", source: list | None = None,
                 check_limits: bool = True, units: str = "metric") -> str:
    """The report of one operating point of a case, as HTML text.

    Parameters
    ----------
    case : a case (:func:`simulator.plant.case.load_case`) or the path of its
        file [-]
    backend : steam properties (default: the case's) [-]
    design : also solve the design point and draw the difference view [-]
    conditions : the point's conditions (default: the case's own) [-]
    label : what the point is, shown with the case name (a study point) [-]
    source : further provenance rows ``[item, value]`` (HTML) [-]
    check_limits : refuse a point beyond the valves wide open (``False``: solve
        it as a what-if, as a study run with ``--beyond-limits`` did) [-]
    units : display units, ``"metric"`` (default) or ``"us"`` [-]
    """
    from ..cautions.checks import check_point
    from ..plant.case import design_conditions, load_case
    from ..solve.point import solve_point
    from .diagram import diagram_svg
    from .tables import model_files, point_to_dict, table_cells

    if isinstance(case, (str, Path)):
        case = load_case(case)
    model = case.model
    backend = backend or case.backend
    cond = conditions if conditions is not None else case.conditions
    r = solve_point(model, cond, backend, check_limits=check_limits)
    cautions = check_point(model, cond, r, units=units)
    d = solve_point(model, design_conditions(model), backend) if design else None
    info = point_to_dict(r, case.name, cautions, units)
    name = case.name + (f", {label}" if label else "")
    body = [f"<h1>Operating point: {_esc(name)}</h1>",
            f'<p>{_esc(model.name)}{": " + _esc(case.description) if case.description else ""}'
            f"</p>"]
    body.append("<h2>Provenance</h2>")
    body.append(_table(["item", "value"], [
        *([k, f"<code>{_esc(v)}</code>"] for k, v in model_files(model)),
        ["model SHA-256", f"<code>{_esc(model.sha256)}</code>"],
        ["case file", f"<code>{_esc(Path(case.file).name)}</code>"],
        ["case SHA-256", f"<code>{_esc(case.sha256)}</code>"],
        ["partload version", _esc(__version__)],
        ["steam properties", _esc(r.backend)],
        ["solver", _esc(f"converged in {r.iterations} Newton iterations, largest residual "
                        f"{r.residual:.1e}")],
        ["governing", _esc(f"valves {r.valve_mode}, throttle pressure {r.pressure_mode}")],
    ] + list(source or []) + [["report written", _esc(_now())]], left=2))
    body.append("<h2>Cautions</h2>")
    if cautions:
        body.append("<ul>" + "".join(
            f'<li class="caution"><b>{_esc(c.to_dict()["code"])}</b>: '
            f'{_esc(c.to_dict()["message"])}</li>' for c in cautions) + "</ul>")
    else:
        body.append("<p>None of the operating-limit checks is exceeded (the checks cover "
                    "only what the model knows).</p>")
    body.append("<h2>Heat balance</h2>")
    svg = diagram_svg(model, r, case_name=name, cautions=cautions, units=units)
    body.append(f'<div class="figure">{_svg_body(svg)}</div>')
    if d is not None:
        body.append("<h2>Difference from design</h2>")
        svg = diagram_svg(model, r, case_name=name, design=d, cautions=cautions, units=units)
        body.append(f'<div class="figure">{_svg_body(svg)}</div>')
    body.append("<h2>Totals</h2>")
    tu = info["units"]["totals"]
    rows = []
    dinfo = point_to_dict(d, "design", units=units) if d is not None else None
    for k, v in info["totals"].items():
        row = [_esc(k.replace("_", " ")), _num(v, 3), _esc(tu.get(k, ""))]
        if dinfo is not None:
            dv = dinfo["totals"].get(k)
            row += [_num(dv, 3), _num(None if v is None or dv is None else v - dv, 3)]
        rows.append(row)
    heads = ["total", "this point", "unit"] + (["design", "difference"] if dinfo else [])
    body.append(_table(heads, rows, left=1))
    body.append('<p class="note">heat rate: turbine-cycle heat rate, heat added to the steam '
                "in the boiler and reheater over generator output (boiler efficiency not "
                "included); heat rate power: heat chargeable to power (heat added less the "
                "energy of process steam) over generator output.</p>")
    for group, table in r.tables.items():
        if group == "steam_path" or not table.names:
            continue
        heads, units, raw, lead = table_cells(info, group, table)
        rows = [[_esc(v) if k < lead or isinstance(v, str) else _num(v, 3)
                 for k, v in enumerate(cells)] for cells in raw]
        body.append(f"<h2>{_esc(group.replace('_', ' ').capitalize())}</h2>")
        body.append(_table(heads, rows, units, left=lead))
    return _page(f"partload: {name}", body)


def _svg_body(svg: str) -> str:
    """An SVG document for inline use (the XML declaration, if any, removed)."""
    return svg[svg.index("<svg"):]


# --- a study -----------------------------------------------------------------------------

def _provenance(st) -> list[list[str]]:
    a = st.attrs
    rows = []
    for key, label in (("model_name", "model"), ("model_file", "model file"),
                       ("model_fitted", "fitted values"), ("model_sha256", "model SHA-256"),
                       ("case_file", "case file"), ("case_sha256", "case SHA-256"),
                       ("profile_file", "profile file"), ("profile_sha256", "profile SHA-256"),
                       ("software_version", "partload version of the study"),
                       ("property_backend", "steam properties"),
                       ("created", "study created")):
        if key.endswith("_file"):
            v = stored_path(a, key[:-len("_file")])
            if v:
                rows.append([label, f"<code>{_esc(Path(v).name)}</code>"])
        elif key in a:
            v = a[key]
            rows.append([label, f"<code>{_esc(v)}</code>" if key.endswith("sha256")
                         else _esc(v)])
    rows.append(["result file", f"<code>{_esc(st.path.name)}</code>"])
    rows.append(["result file SHA-256", f"<code>{_esc(_file_sha(st.path))}</code>"])
    rows.append(["partload version of this report", _esc(__version__)])
    rows.append(["report written", _esc(_now())])
    return rows


def _series_summary(st, units: str = "metric") -> str:
    from ..store import to_display

    def disp(key):
        return to_display(st.data[key], st.units.get(key, ""), key, st.display.get(key),
                          units)

    P, p_unit = disp("totals/generator_output")
    m, m_unit = disp("totals/throttle_flow")
    HR, hr_unit = disp("totals/heat_rate") if "totals/heat_rate" in st.data else (None, "")
    cz = st.cautions
    rows = []
    labels = st.series_labels or [""]
    for s, label in enumerate(labels):
        sel = st.series == s
        ok = sel & st.ok
        n_c = int(np.sum((cz > 0) & sel)) if cz is not None else 0
        row = [_esc(label or "all points"), str(int(sel.sum())), str(int(ok.sum())),
               str(int(np.sum(sel & (st.status > 0)))), str(n_c)]
        if ok.any():
            row += [_num(np.nanmin(m[ok]), 1), _num(np.nanmax(m[ok]), 1),
                    _num(np.nanmin(P[ok]), 1), _num(np.nanmax(P[ok]), 1)]
            if HR is not None:
                k = int(np.flatnonzero(ok)[np.nanargmax(P[ok])])
                row += [_num(HR[k], 1), _num(np.nanmin(HR[ok]), 1)]
        else:
            row += ["-"] * (6 if HR is not None else 4)
        rows.append(row)
    heads = ["series", "points", "converged", "failed", "with cautions", "flow min",
             "flow max", "output min", "output max"]
    shown = ["", "", "", "", "", m_unit, m_unit, p_unit, p_unit]
    if HR is not None:
        heads += ["heat rate at max output", "lowest heat rate"]
        shown += [hr_unit, hr_unit]
    return _table(heads, rows, shown)


def profile_totals(st, series: int | None = None) -> list[dict]:
    """Monthly and annual totals of a profile study.

    Parameters
    ----------
    st : a profile study read with :func:`simulator.store.read_study` [-]
    series : only the points of this series (a profile times a sweep axis has
        one series per swept value, each a whole profile) [-]

    Returns
    -------
    list of dict
        One per month present, then ``"year"`` (all points): ``period``,
        ``hours`` [h] the points stand for, ``solved_hours`` [h] of converged
        points, ``energy`` generated [MWh], ``heat`` added [MWh] and
        ``heat_rate`` [kJ/kWh], heat over energy of the converged points (the
        energy-weighted average turbine-cycle heat rate).  Points that did not
        converge count in ``hours`` only.  Without time stamps every point is
        one hour and the only period is the year.
    """
    from .charts import profile_times

    times, dt_h = profile_times(st)
    P = np.asarray(st.total("generator_output"), dtype=float)  # W
    Q = (np.asarray(st.total("heat_added"), dtype=float) if "totals/heat_added" in st.data
         else np.full(st.n_points, np.nan))
    ok = st.ok & np.isfinite(P)
    periods = [f"{t.year:04d}-{t.month:02d}" for t in times] if times is not None else None
    mine = np.ones(st.n_points, dtype=bool) if series is None else st.series == series

    def total(sel, name):
        s = sel & ok
        e = float(np.sum(P[s])) * dt_h / 1e6  # MWh
        q = float(np.sum(Q[s])) * dt_h / 1e6
        return {"period": name, "hours": float(np.sum(sel)) * dt_h,
                "solved_hours": float(np.sum(s)) * dt_h, "energy": e, "heat": q,
                "heat_rate": q / e * 3600.0 if e > 0 else math.nan}

    out = []
    if periods is not None:
        arr = np.array(periods)
        for name in dict.fromkeys(arr[mine].tolist()):
            out.append(total((arr == name) & mine, name))
    out.append(total(mine, "year" if periods else "all points"))
    return out


def study_report(path, units: str = "metric") -> str:
    """The report of a study result file (a sweep or a profile), as HTML text.

    Parameters
    ----------
    path : the result file (HDF5) [-]
    units : display units, ``"metric"`` (default) or ``"us"`` [-]
    """
    from ..store import read_study
    from ..units import to_display_unit
    from . import charts as ch

    st = read_study(path)
    profile = ch.is_profile(st)
    kind = "profile" if profile else "study"
    body = [f"<h1>{'Profile' if profile else 'Study'}: {_esc(st.name)}</h1>",
            f"<p>{_esc(st.attrs.get('model_name', ''))}"
            + (f": {_esc(st.attrs['case_description'])}" if st.attrs.get("case_description")
               else "") + "</p>"]
    body.append("<h2>Provenance</h2>")
    body.append(_table(["item", "value"], _provenance(st), left=2))
    body.append("<h2>Summary</h2>")
    n = st.n_points
    n_ok = int(st.ok.sum())
    cz = st.cautions
    body.append(f"<p>{n} points ({', '.join(st.attrs.get('axes', [])) or 'no axes'}): "
                f"{n_ok} converged, {int(np.sum(st.status > 0))} failed, "
                f"{int(np.sum(st.status < 0))} not solved"
                + (f", {int(np.sum(cz > 0))} with operating-limit cautions" if cz is not None
                   else "") + ".</p>")
    body.append(_series_summary(st, units))
    if profile:
        body.append("<h2>Monthly and annual totals</h2>")
        labels = st.series_labels if len(st.series_labels) > 1 else [None]
        for k, label in enumerate(labels):
            if label is not None:
                body.append(f"<h3>{_esc(label)}</h3>")
            rows = []
            for t in profile_totals(st, None if label is None else k):
                hr, hr_unit = to_display_unit(t["heat_rate"] / 3600.0, "J/J", system=units)
                rows.append([_esc(t["period"]), _num(t["hours"], 0),
                             _num(t["solved_hours"], 0), _num(t["energy"], 0),
                             _num(t["heat"], 0), _num(float(hr), 1)])
            body.append(_table(["period", "hours", "solved hours", "energy generated",
                                "heat added", "average heat rate"], rows,
                               ["", "h", "h", "MWh", "MWh", hr_unit]))
        body.append('<p class="note">Average heat rate: heat added over energy generated in '
                    "the period (converged points only), the turbine-cycle heat rate weighted "
                    "by energy.</p>")
        for name, fn in ch.PROFILE_CHARTS.items():
            body.append(f"<h2>{_esc(name.replace('_', ' ').capitalize())}</h2>")
            body.append(_png(fn([st], units=units), name))
    body.append("<h2>Charts</h2>")
    for name, fn in ch.CHARTS.items():
        if name == "heat_rate" and "totals/heat_rate" not in st.data:
            continue
        if n_ok == 0:
            break
        body.append(_png(fn([st], units=units), name))
    return _page(f"partload {kind}: {st.name}", body)


def study_point(path, index: int, backend: str | None = None):
    """The case and conditions of point ``index`` of a study result file.

    The case file is read from the path stored in the result (relative to the
    folder the study ran in, else to the result file's folder) and must be the
    one the study ran: same SHA-256, same number of points.

    Parameters
    ----------
    path : the result file [-]
    index : the point, counted from 0 as in the file's ``/points`` [-]
    backend : steam properties (default: the study's) [-]

    Returns
    -------
    case, conditions, label, rows, backend, check_limits
        ``rows``: provenance rows naming the result file and the point;
        ``check_limits`` as the study ran (off after ``--beyond-limits``).
    """
    from ..errors import ResultFileError
    from ..plant.case import load_case
    from ..store import read_study
    from ..study.plan import plan_study

    st = read_study(path)
    if not 0 <= index < st.n_points:
        raise InputError(f"{st.path}: point {index} does not exist; the study has points 0 "
                         f"to {st.n_points - 1}", key="--point")
    stored = stored_path(st.attrs, "case")
    if not stored:
        raise ResultFileError(f"{st.path} names no case file; its points cannot be re-solved")
    candidates = [Path(stored), st.path.parent / Path(stored).name]
    case_path = next((c for c in candidates if c.is_file()), None)
    if case_path is None:
        raise ResultFileError(f"{st.path}: its case file {stored} is not found (looked in "
                              f"{', '.join(str(c) for c in candidates)}); run the report "
                              f"from the folder the study ran in")
    case = load_case(case_path)
    if case.sha256 != st.attrs.get("case_sha256"):
        raise ResultFileError(f"{st.path}: the case file {case_path} changed since the study "
                              f"ran (SHA-256 differs); its points cannot be re-solved as "
                              f"they were")
    if st.attrs.get("model_sha256", case.model.sha256) != case.model.sha256:
        now = "; ".join(f"{k} = {v!r}" for k, v in case.model.fitted) or "none"
        then = str(st.attrs.get("model_fitted") or "none").replace("\n", "; ")
        raise ResultFileError(f"{st.path}: the model of {case_path} changed since the study ran "
                              f"(fitted values then: {then}; now: {now}); its points cannot "
                              f"be re-solved as they were")
    plan = plan_study(case, backend or str(st.attrs.get("property_backend", "")) or None)
    if plan.n_points < st.n_points:
        raise ResultFileError(f"{st.path}: the case plans {plan.n_points} points, the file "
                              f"has {st.n_points}")
    label = st.labels[index]
    rows = [["result file", f"<code>{_esc(st.path.name)}</code>"],
            ["point of the study", _esc(f"{index} ({label})")]]
    check = bool(int(st.attrs.get("check_limits", 1)))
    return case, plan.conditions[index], label, rows, plan.backend, check


def write_report(source, output=None, *, backend: str | None = None,
                 point: int | None = None, units: str = "metric") -> Path:
    """Write the report of a case file (one point) or a result file (a study).

    Parameters
    ----------
    source : a case file (``.toml``) or a study result file (``.h5``) [-]
    output : the HTML file (default: ``results/<case>_report.html`` for a
        case, ``<result stem>_report.html`` next to a result file,
        ``<result stem>_point<N>_report.html`` for one of its points) [-]
    backend : steam properties for a case (default: the case's) [-]
    point : with a result file, the report of this point (index from 0)
        instead of the study's: the point re-solved from the study's case [-]
    units : display units, ``"metric"`` (default) or ``"us"`` [-]

    Returns
    -------
    Path
        The file written (whole or not at all).
    """
    from ..store import write_whole
    from ..units import SYSTEMS

    if units not in SYSTEMS:
        raise InputError(f"units must be one of {', '.join(SYSTEMS)}, not {units!r}",
                         key="units")
    source = Path(source)
    if source.suffix.lower() == ".toml":
        text = point_report(source, backend=backend, units=units)
        default = Path("results") / f"{source.stem}_report.html"
    elif source.suffix.lower() in (".h5", ".hdf5") and point is not None:
        case, cond, label, rows, be, check = study_point(source, point, backend)
        text = point_report(case, backend=be, conditions=cond, label=label, source=rows,
                            check_limits=check, units=units)
        default = source.with_name(f"{source.stem}_point{point}_report.html")
    elif source.suffix.lower() in (".h5", ".hdf5"):
        text = study_report(source, units)
        default = source.with_name(f"{source.stem}_report.html")
    else:
        raise InputError(f"{source}: give a case file (.toml) for a point report or a study "
                         f"result file (.h5) for a study report")
    out = Path(output) if output is not None else default
    out.parent.mkdir(parents=True, exist_ok=True)
    return write_whole(out, lambda tmp: tmp.write_text(text, encoding="utf-8"))
