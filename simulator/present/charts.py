"""The charts engineers look at, drawn from study result files (PNG).

Each chart is drawn from one result file, or from two overlaid (heater in
versus out of service, two exhaust pressures): the first file in solid lines
with round markers, the second dashed with square markers.  Inside a file,
every series (one combination of the swept values other than the load) has
its own colour.  Sweeps are drawn as lines through their points; profiles,
whose points are not ordered by load, as dots.

Charts (:data:`CHARTS`), each 8 x 5 in at 100 dpi, i.e. 800 x 500 pixels:

``willans``
    Generator output [MW] versus throttle flow [kg/s]: the Willans line.
``heat_rate``
    Heat rate [kJ/kWh] versus generator output [MW].
``node_pressures``
    Pressure at every node [bar, log scale] versus throttle flow [kg/s]: the
    ellipse law's near-proportional lines.
``bleed_flows``
    Bleed flow of every extraction [kg/s] versus generator output [MW].
``expansion``
    Expansion lines on the h-s (Mollier) chart with the saturation line, for
    chosen loads (default: the lowest, a middle and the highest throttle flow
    of each file's first series).

Points that failed are not drawn; points with operating-limit cautions are
ringed in red, and a note under each chart counts both.  Drawing uses
matplotlib's Agg backend through :class:`matplotlib.figure.Figure`, so it
needs no display and leaves pyplot's global state alone.
"""

from __future__ import annotations

import math
import textwrap
from collections.abc import Sequence
from pathlib import Path

import numpy as np
from matplotlib.backends.backend_agg import FigureCanvasAgg
from matplotlib.figure import Figure
from matplotlib.lines import Line2D

from ..errors import InputError, ResultFileError
from ..store import StudyData, read_study, to_display, write_whole
from ..units import to_display_unit

__all__ = ["CHARTS", "FIGSIZE", "DPI", "plot_study", "plot_willans", "plot_heat_rate",
           "plot_node_pressures", "plot_bleed_flows", "plot_expansion", "saturation_line",
           "PROFILE_CHARTS", "plot_time_series", "plot_load_duration", "profile_times"]

FIGSIZE = (8.0, 5.0)  # [in]
DPI = 100  # [1/in] so a chart is 800 x 500 pixels
_STYLES = [("-", "o"), ("--", "s"), (":", "^"), ("-.", "D")]
_CAUTION = "#d62728"


def _figure() -> Figure:
    fig = Figure(figsize=FIGSIZE, dpi=DPI)
    FigureCanvasAgg(fig)
    return fig


def _label(st: StudyData, others: Sequence[StudyData]) -> str:
    """A short name for a file: its case name, or file name when names clash."""
    names = [o.name for o in others]
    return st.name if names.count(st.name) == 1 else st.path.stem


def _curves(st: StudyData):
    """``(series index, series label, point indices)`` of the converged points."""
    ok = st.ok
    out = []
    for s, text in enumerate(st.series_labels):
        idx = np.flatnonzero((st.series == s) & ok)
        if idx.size:
            out.append((s, text, idx))
    return out


def _is_profile(st: StudyData) -> bool:
    return "profile" in str(st.attrs.get("study_kind", ""))


def _note(fig: Figure, studies: Sequence[StudyData]) -> None:
    parts = []
    for st in studies:
        n = st.n_points
        failed = int(np.sum(st.status > 0))
        pending = int(np.sum(st.status < 0))
        c = st.cautions
        n_c = int(np.sum(c > 0)) if c is not None else None
        bits = [f"{n} points"]
        if failed:
            bits.append(f"{failed} failed (not drawn)")
        if pending:
            bits.append(f"{pending} not solved yet")
        if n_c is not None:
            bits.append(f"{n_c} with cautions (red rings)" if n_c else "no cautions")
        label = _label(st, studies) if len(studies) > 1 else st.name
        parts.append(f"{label}: " + ", ".join(bits))
    models = sorted({str(st.attrs.get("model_name", "")) for st in studies})
    text = "; ".join(parts) + f".  Model: {', '.join(models)}."
    fig.text(0.01, 0.01, textwrap.fill(text, 170), fontsize=7, color="0.3")


def _item_colours(items: Sequence[str]) -> dict:
    """Distinct colours: the default cycle up to 10 items, 'tab20' up to 20."""
    if len(items) <= 10:
        return {name: f"C{j}" for j, name in enumerate(items)}
    import matplotlib

    cmap = matplotlib.colormaps["tab20"]
    return {name: cmap(j % 20) for j, name in enumerate(items)}


def _dots(n: int, scale: float = 1.0) -> dict:
    """Marker size and opacity for a cloud of ``n`` profile points."""
    if n <= 500:
        return {"marker": "o", "markersize": 3.5 * scale, "alpha": 0.9}
    return {"marker": ".", "markersize": 2.0 * scale, "alpha": 0.4}


def _disp(st: StudyData, key: str) -> np.ndarray:
    return to_display(st.data[key], st.units.get(key, ""), key, st.display.get(key))[0]


def _xy_chart(studies: Sequence[StudyData], xkey: str, ykey: str, xlabel: str, ylabel: str,
              title: str) -> Figure:
    fig = _figure()
    ax = fig.add_subplot(111)
    colour = 0
    for k, st in enumerate(studies):
        ls, marker = _STYLES[k % len(_STYLES)]
        x_all = _disp(st, xkey)
        y_all = _disp(st, ykey)
        profile = _is_profile(st)
        for _s, text, idx in _curves(st):
            x, y = x_all[idx], y_all[idx]
            name = text or ("profile points" if profile else "all points")
            if len(studies) > 1:
                name = f"{_label(st, studies)}: {name}" if text else _label(st, studies)
            c = f"C{colour % 10}"
            colour += 1
            if profile:
                ax.plot(x, y, linestyle="none", color=c, label=name, **_dots(len(x)))
            else:
                order = np.argsort(x, kind="stable")
                ax.plot(x[order], y[order], linestyle=ls, marker=marker, markersize=4, color=c,
                        label=name)
            if not profile:
                _mark_valve_points(ax, st, idx, x, y)
            cz = st.cautions
            if cz is not None:
                ring = cz[idx] > 0
                if ring.any():
                    ax.plot(x[ring], y[ring], linestyle="none", marker="o",
                            markersize=6 if profile else 9, markerfacecolor="none",
                            markeredgecolor=_CAUTION, markeredgewidth=0.8)
    ax.set_xlabel(xlabel)
    ax.set_ylabel(ylabel)
    ax.set_title(title)
    ax.grid(True, alpha=0.3)
    if ax.lines:
        ax.legend(fontsize=8, loc="best")
    fig.subplots_adjust(left=0.11, right=0.97, top=0.92, bottom=0.15)
    _note(fig, studies)
    return fig


def _mark_valve_points(ax, st: StudyData, idx: np.ndarray, x: np.ndarray,
                       y: np.ndarray) -> None:
    """Mark the valve points of a nozzle-governed unit on a curve: where a control
    valve reaches its full opening between two points of the curve (interpolated
    linearly in its opening), a black diamond labelled with the valve."""
    key = "governing_valves/opening"
    if key not in st.data or len(idx) < 2:
        return
    opening = np.asarray(st.data[key])[idx]
    names = st.names.get("governing_valves")
    load = np.asarray(st.data["totals/throttle_flow"])[idx]
    order = np.argsort(load, kind="stable")
    opening, x, y = opening[order], x[order], y[order]
    for k in range(opening.shape[1]):
        o = opening[:, k]
        for i in range(len(o) - 1):
            if o[i] < 1.0 - 1e-9 and o[i + 1] >= 1.0 - 1e-9 and o[i + 1] > o[i]:
                t = (1.0 - o[i]) / (o[i + 1] - o[i])
                xv, yv = x[i] + t * (x[i + 1] - x[i]), y[i] + t * (y[i + 1] - y[i])
                ax.plot([xv], [yv], linestyle="none", marker="D", markersize=6,
                        markerfacecolor="none", markeredgecolor="k", markeredgewidth=1.0)
                label = names[k] if names is not None and k < len(names) else f"valve {k + 1}"
                ax.annotate(label, (xv, yv), textcoords="offset points", xytext=(4, 6),
                            fontsize=7)


def plot_willans(studies: Sequence[StudyData]) -> Figure:
    """Generator output [MW] versus throttle flow [kg/s] (the Willans line)."""
    return _xy_chart(studies, "totals/throttle_flow", "totals/generator_output",
                     "throttle flow [kg/s]", "generator output [MW]",
                     "Output versus throttle flow (Willans line)")


def plot_heat_rate(studies: Sequence[StudyData]) -> Figure:
    """Heat rate [kJ/kWh] versus generator output [MW]."""
    for st in studies:
        if "totals/heat_rate" not in st.data:
            raise ResultFileError(f"{st.path} has no heat rate (the model has no feedwater "
                                  f"train), so no heat-rate chart")
    return _xy_chart(studies, "totals/generator_output", "totals/heat_rate",
                     "generator output [MW]", "heat rate [kJ/kWh]",
                     "Heat rate versus output")


def _multi_chart(studies: Sequence[StudyData], xkey: str, group: str, quantity: str,
                 xlabel: str, ylabel: str, title: str, log: bool = False,
                 skip_zero: bool = False) -> Figure:
    """One colour per item (node, extraction), one line style per file and series."""
    fig = _figure()
    ax = fig.add_subplot(111)
    items = []
    for st in studies:
        for name in st.names.get(group, []):
            if name not in items:
                items.append(name)
    colours = _item_colours(items)
    curve_styles = []
    k_style = 0
    for st in studies:
        x_all = _disp(st, xkey)
        y_all = _disp(st, f"{group}/{quantity}")
        profile = _is_profile(st)
        for _s, text, idx in _curves(st):
            ls, marker = _STYLES[k_style % len(_STYLES)]
            k_style += 1
            name = text or "all points"
            if len(studies) > 1:
                name = f"{_label(st, studies)}: {name}" if text else _label(st, studies)
            curve_styles.append((ls, marker, name))
            x = x_all[idx]
            order = np.argsort(x, kind="stable")
            for j, item in enumerate(st.names[group]):
                y = y_all[idx, j]
                if skip_zero and np.all(np.nan_to_num(y) == 0.0):
                    continue  # closed throughout: nothing to draw
                if profile:
                    ax.plot(x, y, linestyle="none", color=colours[item],
                            **_dots(len(x), 0.75))
                else:
                    ax.plot(x[order], y[order], linestyle=ls, marker=marker, markersize=3,
                            linewidth=1.2, color=colours[item])
    if log:
        ax.set_yscale("log")
    ax.set_xlabel(xlabel)
    ax.set_ylabel(ylabel)
    ax.set_title(title)
    ax.grid(True, which="both", alpha=0.25)
    handles = [Line2D([], [], color=colours[i], label=i) for i in items]
    leg = ax.legend(handles=handles, fontsize=7, loc="upper left", bbox_to_anchor=(1.01, 1.0),
                    title=group.replace("_", " "), title_fontsize=7)
    ax.add_artist(leg)
    if len(curve_styles) > 1:
        style_handles = [Line2D([], [], color="0.2", linestyle=ls, marker=m, markersize=3,
                                label=name) for ls, m, name in curve_styles]
        ax.legend(handles=style_handles, fontsize=7, loc="lower left",
                  bbox_to_anchor=(1.01, 0.0))
    fig.subplots_adjust(left=0.10, right=0.74, top=0.92, bottom=0.15)
    _note(fig, studies)
    return fig


def plot_node_pressures(studies: Sequence[StudyData]) -> Figure:
    """Pressure at every node [bar, log scale] versus throttle flow [kg/s]."""
    return _multi_chart(studies, "totals/throttle_flow", "nodes", "pressure",
                        "throttle flow [kg/s]", "pressure [bar]",
                        "Node pressures versus throttle flow", log=True)


def plot_bleed_flows(studies: Sequence[StudyData]) -> Figure:
    """Bleed flow of every extraction [kg/s] versus generator output [MW]."""
    return _multi_chart(studies, "totals/generator_output", "extractions", "flow",
                        "generator output [MW]", "bleed flow [kg/s]",
                        "Bleed flows versus load", skip_zero=True)


def saturation_line(steam=None, n: int = 120) -> tuple[np.ndarray, np.ndarray]:
    """The saturation line (liquid side, then vapour side) on the h-s chart.

    Parameters
    ----------
    steam : property backend (default seuif97)
    n : points on each side [-]

    Returns
    -------
    s, h : entropy [J/(kg K)] and enthalpy [J/kg] from the triple point up
        the liquid side to near the critical point and down the vapour side
    """
    from ..steam.if97 import P_CRIT, P_MIN, get_backend

    steam = steam or get_backend("seuif97")
    p = np.geomspace(P_MIN * 1.001, P_CRIT * 0.999, n)
    h_f = np.array([steam.h_liq_sat(x) for x in p])
    h_g = np.array([steam.h_vap_sat(x) for x in p])
    # entropy 1 J/kg inside each single-phase region, so that no backend has to decide
    # on which side of the line a state exactly on it lies (error about 1/T_sat, below
    # 0.004 J/(kg K))
    s_f = np.array([steam.s_ph(x, h - 1.0) for x, h in zip(p, h_f)])
    s_g = np.array([steam.s_ph(x, h + 1.0) for x, h in zip(p, h_g)])
    return np.concatenate([s_f, s_g[::-1]]), np.concatenate([h_f, h_g[::-1]])


def _pick_points(st: StudyData, loads: Sequence[float] | None) -> list[int]:
    """Points for expansion lines: the given loads [fraction of design throttle
    flow], else the lowest, a middle and the highest flow of the first series."""
    curves = _curves(st)
    if not curves:
        return []
    idx = curves[0][2]
    flow = st.total("throttle_flow")[idx]
    if loads:
        design = float(st.attrs.get("design_throttle_flow", np.nan))
        if not math.isfinite(design):
            design = float(np.nanmax(flow))
        picks = []
        for f in loads:
            k = int(idx[np.argmin(np.abs(flow - f * design))])
            if k not in picks:
                picks.append(k)
        return picks
    order = idx[np.argsort(flow, kind="stable")]
    picks = [int(order[0]), int(order[len(order) // 2]), int(order[-1])]
    return list(dict.fromkeys(picks))


def plot_expansion(studies: Sequence[StudyData], loads: Sequence[float] | None = None,
                   steam=None) -> Figure:
    """Expansion lines on the h-s chart with the saturation line.

    Parameters
    ----------
    studies : one or two result files
    loads : throttle flows as fractions of design [-] (the nearest converged
        point of each file's first series is drawn); default: lowest, middle
        and highest flow
    steam : property backend for the saturation line (default seuif97)
    """
    fig = _figure()
    ax = fig.add_subplot(111)
    s_sat, h_sat = saturation_line(steam)
    s_lo, s_hi, h_lo, h_hi = math.inf, -math.inf, math.inf, -math.inf
    colour = 0
    for k, st in enumerate(studies):
        ls, marker = _STYLES[k % len(_STYLES)]
        names = st.names["nodes"]
        pos = {n: j for j, n in enumerate(names)}
        top = st.topology
        segments = [(a, b, "-") for a, b in zip(top["group_inlet"], top["group_outlet"])]
        thr, after = st.attrs.get("throttle_node", ""), st.attrs.get("valve_outlet_node", "")
        if thr in pos and after in pos:
            segments.append((thr, after, ":"))
        for a, b in zip(top.get("path_inlet", []), top.get("path_outlet", [])):
            segments.append((a, b, ":"))
        S = to_display_unit(st.data["nodes/entropy"], "J/(kg K)")[0]  # kJ/(kg K)
        H = to_display_unit(st.data["nodes/enthalpy"], "J/kg")[0]  # kJ/kg
        for i in _pick_points(st, loads):
            c = f"C{colour % 10}"
            colour += 1
            P = float(to_display_unit(st.total("generator_output")[i], "W")[0])  # MW
            m = st.total("throttle_flow")[i]
            name = f"{P:.0f} MW, {m:.0f} kg/s"
            if len(studies) > 1:
                name = f"{_label(st, studies)}: {name}"
            for a, b, style in segments:
                ia, ib = pos[a], pos[b]
                xs, ys = [S[i, ia], S[i, ib]], [H[i, ia], H[i, ib]]
                ax.plot(xs, ys, linestyle=ls if style == "-" else ":", color=c,
                        linewidth=1.4 if style == "-" else 0.9,
                        marker=marker if style == "-" else None, markersize=3)
            ax.plot([], [], linestyle=ls, marker=marker, color=c, label=name)
            ok = np.isfinite(S[i]) & np.isfinite(H[i])
            s_lo, s_hi = min(s_lo, S[i, ok].min()), max(s_hi, S[i, ok].max())
            h_lo, h_hi = min(h_lo, H[i, ok].min()), max(h_hi, H[i, ok].max())
    ax.plot(to_display_unit(s_sat, "J/(kg K)")[0], to_display_unit(h_sat, "J/kg")[0],
            color="0.35", linewidth=1.0, label="saturation line")
    if math.isfinite(s_lo):
        ds, dh = max(s_hi - s_lo, 0.2), max(h_hi - h_lo, 200.0)
        ax.set_xlim(s_lo - 0.15 * ds, s_hi + 0.15 * ds)
        ax.set_ylim(h_lo - 0.12 * dh, h_hi + 0.08 * dh)
    ax.set_xlabel("specific entropy [kJ/(kg K)]")
    ax.set_ylabel("specific enthalpy [kJ/kg]")
    ax.set_title("Expansion lines (h-s chart); dotted: valves, reheater, pipes")
    ax.grid(True, alpha=0.3)
    ax.legend(fontsize=7, loc="lower left")
    fig.subplots_adjust(left=0.11, right=0.97, top=0.92, bottom=0.15)
    _note(fig, studies)
    return fig


CHARTS = {
    "willans": plot_willans,
    "heat_rate": plot_heat_rate,
    "node_pressures": plot_node_pressures,
    "bleed_flows": plot_bleed_flows,
    "expansion": plot_expansion,
}


def plot_study(paths: Sequence[str | Path], out_dir: str | Path | None = None,
               loads: Sequence[float] | None = None,
               charts: Sequence[str] | None = None) -> list[Path]:
    """Draw the charts of one result file, or of two overlaid, as PNG files.

    Parameters
    ----------
    paths : one or two study result files
    out_dir : folder for the PNG files (default: that of the first file)
    loads : throttle flows for the expansion lines, fractions of design [-]
    charts : names from :data:`CHARTS` (default all)

    Returns
    -------
    list of Path
        ``<stem>_<chart>.png``, or ``<stem>_vs_<other stem>_<chart>.png`` for
        two files; existing files of these names are replaced.
    """
    if not 1 <= len(paths) <= 2:
        raise InputError("give one result file, or two to overlay")
    studies = [read_study(p) for p in paths]
    chosen = list(charts) if charts else list(CHARTS)
    for c in chosen:
        if c not in CHARTS:
            raise InputError(f"unknown chart {c!r}; valid: {', '.join(CHARTS)}")
    first = studies[0].path
    out_dir = Path(out_dir) if out_dir is not None else first.parent
    out_dir.mkdir(parents=True, exist_ok=True)
    stem = first.stem if len(studies) == 1 else f"{first.stem}_vs_{studies[1].path.stem}"
    written = []
    for c in chosen:
        if c == "heat_rate" and any("totals/heat_rate" not in st.data for st in studies):
            continue
        fig = (CHARTS[c](studies, loads) if c == "expansion" else CHARTS[c](studies))
        out = out_dir / f"{stem}_{c}.png"
        write_whole(out, lambda tmp, fig=fig: fig.savefig(tmp, dpi=DPI))
        written.append(out)
    return written


def profile_times(st: StudyData):
    """Time stamps of a profile's points and the hours each stands for.

    Parameters
    ----------
    st : a profile study [-]

    Returns
    -------
    times, hours : list of datetime or None, float
        The points' time stamps (``None`` when the profile has no ``time``
        column or one cannot be read) and the duration of one point [h]: the
        median step between stamps, else 1 h.
    """
    import datetime as _dt

    raw = st.inputs.get("time")
    if raw is None:
        return None, 1.0
    try:
        times = [_dt.datetime.fromisoformat(str(t).strip()) for t in raw]
    except ValueError:
        return None, 1.0
    if len(times) > 1:
        steps = np.diff([t.timestamp() for t in times]) / 3600.0
        steps = steps[steps > 0]
        if steps.size:
            return times, float(np.median(steps))
    return times, 1.0


def plot_time_series(studies: Sequence[StudyData]) -> Figure:
    """Generator output [MW] and heat rate [kJ/kWh] of a profile against time."""
    fig = _figure()
    ax1 = fig.add_subplot(211)
    ax2 = fig.add_subplot(212, sharex=ax1)
    for k, st in enumerate(studies):
        times, _dt_h = profile_times(st)
        x_all = np.array(times, dtype=object) if times is not None else \
            np.arange(st.n_points, dtype=float)
        ok = st.ok
        c = f"C{k % 10}"
        name = _label(st, studies)
        P = _disp(st, "totals/generator_output")
        ax1.plot(x_all[ok], P[ok], color=c, linewidth=0.6, label=name)
        if "totals/heat_rate" in st.data:
            HR = _disp(st, "totals/heat_rate")
            ax2.plot(x_all[ok], HR[ok], color=c, linewidth=0.6, label=name)
        cz = st.cautions
        if cz is not None:
            ring = ok & (cz > 0)
            if ring.any():
                ax1.plot(x_all[ring], P[ring], linestyle="none", marker="o", markersize=5,
                         markerfacecolor="none", markeredgecolor=_CAUTION, markeredgewidth=0.7,
                         label="cautions")
    ax1.set_ylabel("output [MW]")
    ax2.set_ylabel("heat rate [kJ/kWh]")
    ax2.set_xlabel("time" if any(profile_times(s)[0] is not None for s in studies)
                   else "profile point")
    ax1.set_title("Output and turbine-cycle heat rate over the profile")
    for ax in (ax1, ax2):
        ax.grid(True, alpha=0.3)
    ax1.legend(fontsize=7, loc="upper right")
    fig.autofmt_xdate()
    fig.subplots_adjust(left=0.11, right=0.97, top=0.93, bottom=0.2, hspace=0.15)
    _note(fig, studies)
    return fig


def plot_load_duration(studies: Sequence[StudyData]) -> Figure:
    """Load-duration curve: generator output [MW] against the hours [h] it is
    reached or exceeded over the profile."""
    fig = _figure()
    ax = fig.add_subplot(111)
    for k, st in enumerate(studies):
        _times, dt_h = profile_times(st)
        P = _disp(st, "totals/generator_output")[st.ok]
        P = np.sort(P)[::-1]
        hours = dt_h * np.arange(1, len(P) + 1)
        ax.step(hours, P, where="pre", color=f"C{k % 10}", label=_label(st, studies))
    ax.set_xlabel("hours at or above this output [h]")
    ax.set_ylabel("generator output [MW]")
    ax.set_title("Load-duration curve")
    ax.grid(True, alpha=0.3)
    ax.legend(fontsize=8, loc="upper right")
    fig.subplots_adjust(left=0.11, right=0.97, top=0.92, bottom=0.15)
    _note(fig, studies)
    return fig


PROFILE_CHARTS = {
    "time_series": plot_time_series,
    "load_duration": plot_load_duration,
}
