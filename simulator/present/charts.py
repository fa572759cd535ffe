"""The charts engineers look at, drawn from study result files (PNG).

Each chart is drawn from one result file, or from two overlaid (heater in
versus out of service, two exhaust pressures): the first file in solid lines
with round markers, the second dashed with square markers.  Inside a file,
every series (one combination of the swept values other than the load) has
its own colour.  Sweeps are drawn as lines through their points; profiles,
whose points are not ordered by load, as dots.

Charts (:data:`CHARTS`), each 8 x 5 in at 100 dpi, i.e. 800 x 500 pixels, in
the display units of a system of :data:`partload.units.SYSTEMS` (``units=``:
``"metric"``, the default and the units named below, or ``"us"``: klb/h,
psia, Btu/kWh, Btu/lb, Btu/(lb degR), a back pressure in inHg; MW in both);
axis labels name the unit drawn:

``willans``
    Generator output [MW] versus throttle flow [kg/s]: the Willans line.
``heat_rate``
    Heat rate [kJ/kWh] versus generator output [MW].
``node_pressures``
    Two panels: pressure at every node [bar, log scale] versus throttle flow
    [kg/s], and beside it the pressure ratio to design versus the flow ratio
    to design with the line of pressure proportional to flow (the ellipse
    law's near-proportional lines, which the log scale hides).
``bleed_flows``
    Bleed flow of every extraction [kg/s] versus generator output [MW].
``expansion``
    Expansion lines on the h-s (Mollier) chart with the saturation line, for
    chosen loads (default: the lowest, a middle and the highest throttle flow)
    of every series of each file (or the series chosen); parallel branches
    (two LP casings) are separate lines, the second dash-dotted.

Profiles also have :data:`PROFILE_CHARTS`: the time series of output and
heat rate and the load-duration curve.

Styles: a colour and a marker for each series (distinct combinations up to
70), a line style per file; charts of one line per item (nodes, bleeds) turn
into small multiples, one panel per series, beyond four series.  Legends are
placed beside the axes and the axes shrink to leave them room, so none is
cut off.  Points that failed are not drawn; points with operating-limit
cautions are ringed in red on every chart, and a note under each chart counts
both and states which heat rate is drawn (turbine cycle), the governing
(valve and pressure mode) and the back pressure of the points.  Drawing uses
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

from ..errors import InputError, PartloadError, ResultFileError
from ..store import StudyData, read_study, to_display, write_whole
from ..units import to_display_unit

__all__ = ["CHARTS", "FIGSIZE", "DPI", "plot_study", "plot_willans", "plot_heat_rate",
           "plot_node_pressures", "plot_bleed_flows", "plot_expansion", "saturation_line",
           "PROFILE_CHARTS", "plot_time_series", "plot_load_duration", "profile_times"]

FIGSIZE = (8.0, 5.0)  # [in]
DPI = 100  # [1/in] so a chart is 800 x 500 pixels
_STYLES = [("-", "o"), ("--", "s"), (":", "^"), ("-.", "D")]
_MARKERS = ["o", "s", "^", "D", "v", "P", "X"]  # 7, prime to the 10 colours
_CAUTION = "#d62728"
HEAT_RATE_KIND = ("turbine-cycle heat rate: heat added to the steam in the boiler and "
                  "reheater over generator output (boiler efficiency not included)")


def series_style(j: int) -> tuple[str, str]:
    """Colour and marker of the ``j``-th curve of a chart [-]: the ten colours of
    the default cycle and seven markers, every pair distinct for j < 70."""
    return f"C{j % 10}", _MARKERS[j % len(_MARKERS)]


def _rings(ax, x, y, small: bool = False) -> None:
    """Red rings round points with operating-limit cautions (a scatter, so the
    lines of the axes stay the curves)."""
    if len(x):
        ax.scatter(x, y, s=36 if small else 81, facecolors="none", edgecolors=_CAUTION,
                   linewidths=0.8, zorder=5)


def _legend_beside(fig: Figure, handles, title: str | None = None, fontsize: float = 7,
                   top: float = 0.92, groups: Sequence | None = None) -> None:
    """Legends at the right of the figure; the axes shrink so that none is cut off.

    ``groups``: further lists of handles, each a legend of its own under the first.
    """
    sets = [(handles, title)] + [(g, None) for g in (groups or []) if g]
    sets = [(h, t) for h, t in sets if h]
    if not sets:
        return
    renderer = fig.canvas.get_renderer()
    legends, widest = [], 0.0
    y = top
    for h, t in sets:
        ncol = 1
        while True:
            leg = fig.legend(handles=h, loc="upper left", bbox_to_anchor=(0.0, y),
                             fontsize=fontsize, title=t, title_fontsize=fontsize, ncol=ncol,
                             frameon=True)
            bb = leg.get_window_extent(renderer)
            height = bb.height / fig.bbox.height
            if height <= y - 0.12 or ncol >= 3:
                break
            leg.remove()
            ncol += 1
        legends.append((leg, y))
        widest = max(widest, bb.width / fig.bbox.width)
        y -= height + 0.02
    x0 = 1.0 - widest - 0.01
    for leg, y in legends:
        leg.set_bbox_to_anchor((x0, y), transform=fig.transFigure)
    fig.subplots_adjust(right=min(fig.subplotpars.right, x0 - 0.02))


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


def is_profile(st: StudyData) -> bool:
    return "profile" in str(st.attrs.get("study_kind", ""))


def _note(fig: Figure, studies: Sequence[StudyData], units: str = "metric") -> None:
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
    text = "; ".join(parts) + f".  Model: {', '.join(models)}.  " + "  ".join(
        caption(st, len(studies) > 1 and _label(st, studies), units) for st in studies)
    if any("totals/heat_rate" in st.data for st in studies):
        text += "  Heat rate: " + HEAT_RATE_KIND.split(": ", 1)[1] + "."
    fig.text(0.01, 0.005, textwrap.fill(text, 160), fontsize=6.5, color="0.3",
             va="bottom")


def exhaust_nodes(st: StudyData) -> list[str]:
    """Nodes of a result file where steam leaves the turbine: outlets of stage
    groups and other steam-path components that are no component's inlet."""
    top = st.topology
    outs = list(top.get("group_outlet", [])) + list(top.get("path_outlet", []))
    ins = set(top.get("group_inlet", [])) | set(top.get("path_inlet", []))
    return [n for n in dict.fromkeys(outs) if n not in ins]


def caption(st: StudyData, label=None, units: str = "metric") -> str:
    """Governing (valve and pressure modes) and back pressure of a file's points
    (in kPa, or inHg for ``units="us"``)."""
    ok = st.ok
    bits = []
    for key, word in (("valve_mode", "valves"), ("pressure_mode", "throttle pressure")):
        vals = st.inputs.get(key)
        if vals is not None:
            vals = sorted({str(v) for v in np.asarray(vals)[ok]} - {""})
            if vals:
                bits.append(f"{word} {' / '.join(vals)}")
    nodes = st.names.get("nodes", [])
    ex = [nodes.index(n) for n in exhaust_nodes(st) if n in nodes]
    if ex and ok.any() and "nodes/pressure" in st.data:
        p, unit = to_display_unit(np.asarray(st.data["nodes/pressure"])[ok][:, ex], "Pa",
                                  system=units, quantity="back_pressure")
        lo, hi = float(np.nanmin(p)), float(np.nanmax(p))
        bits.append(f"back pressure {lo:.2f} {unit}" if hi - lo < 0.005
                    else f"back pressure {lo:.2f} to {hi:.2f} {unit}")
    head = f"{label}: " if label else ""
    return head + ("Governing: " + ", ".join(bits) + "." if bits else "")


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


def _shown(st: StudyData, key: str, units: str = "metric") -> tuple[np.ndarray, str]:
    """A dataset of a file in the display units of ``units``, and that unit [-]."""
    return to_display(st.data[key], st.units.get(key, ""), key, st.display.get(key), units)


def _disp(st: StudyData, key: str, units: str = "metric") -> np.ndarray:
    return _shown(st, key, units)[0]


def _axis(name: str, unit: str) -> str:
    """An axis label: the quantity and its unit in brackets."""
    return f"{name} [{unit}]" if unit else name


def _check_units(units: str) -> None:
    from ..units import SYSTEMS

    if units not in SYSTEMS:
        raise InputError(f"units must be one of {', '.join(SYSTEMS)}, not {units!r}",
                         key="units")


def _xy_chart(studies: Sequence[StudyData], xkey: str, ykey: str, xlabel: str, ylabel: str,
              title: str, units: str = "metric") -> Figure:
    """``ykey`` against ``xkey``; the labels name the quantities, the units are added."""
    fig = _figure()
    ax = fig.add_subplot(111)
    fig.subplots_adjust(left=0.10, right=0.97, top=0.92, bottom=0.2)
    colour = 0
    for k, st in enumerate(studies):
        ls, _m = _STYLES[k % len(_STYLES)]
        x_all, x_unit = _shown(st, xkey, units)
        y_all, y_unit = _shown(st, ykey, units)
        profile = is_profile(st)
        for _s, text, idx in _curves(st):
            x, y = x_all[idx], y_all[idx]
            name = text or ("profile points" if profile else "all points")
            if len(studies) > 1:
                name = f"{_label(st, studies)}: {name}" if text else _label(st, studies)
            c, marker = series_style(colour)
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
                _rings(ax, x[ring], y[ring], small=profile)
    ax.set_xlabel(_axis(xlabel, x_unit))
    ax.set_ylabel(_axis(ylabel, y_unit))
    ax.set_title(title)
    ax.grid(True, alpha=0.3)
    handles = [ln for ln in ax.lines if not ln.get_label().startswith("_")]
    if any(st.cautions is not None and (st.cautions > 0).any() for st in studies):
        handles.append(Line2D([], [], linestyle="none", marker="o", markerfacecolor="none",
                              markeredgecolor=_CAUTION, label="cautions"))
    _legend_beside(fig, handles)
    _note(fig, studies, units)
    return fig


def _mark_valve_points(ax, st: StudyData, idx: np.ndarray, x: np.ndarray,
                       y: np.ndarray) -> None:
    """Mark the valve points of a nozzle-governed unit on a curve: where the first
    ``k`` control valves are fully open and the next has not started (the sum of
    the openings passes ``k``, interpolated linearly between two points of the
    curve), a black diamond labelled with the ``k``-th valve."""
    key = "governing_valves/opening"
    if key not in st.data or len(idx) < 2:
        return
    modes = st.inputs.get("valve_mode")
    if modes is None or any(str(m) != "nozzle_groups" for m in np.asarray(modes)[idx]):
        return  # valves that open together have no valve points
    opening = np.asarray(st.data[key])[idx]
    names = st.names.get("governing_valves")
    load = np.asarray(st.data["totals/throttle_flow"])[idx]
    order = np.argsort(load, kind="stable")
    opening, x, y = opening[order], x[order], y[order]
    s = opening.sum(axis=1)
    for k in range(opening.shape[1]):
        for i in range(len(s) - 1):
            if s[i] < k + 1 - 1e-9 and s[i + 1] >= k + 1 - 1e-9:
                t = (k + 1 - s[i]) / (s[i + 1] - s[i])
                xv, yv = x[i] + t * (x[i + 1] - x[i]), y[i] + t * (y[i + 1] - y[i])
                ax.plot([xv], [yv], linestyle="none", marker="D", markersize=6,
                        markerfacecolor="none", markeredgecolor="k", markeredgewidth=1.0)
                label = names[k] if names is not None and k < len(names) else f"valve {k + 1}"
                ax.annotate(label, (xv, yv), textcoords="offset points", xytext=(4, 6),
                            fontsize=7)


def plot_willans(studies: Sequence[StudyData], units: str = "metric") -> Figure:
    """Generator output [MW] versus throttle flow [kg/s, klb/h in US units] (the
    Willans line)."""
    return _xy_chart(studies, "totals/throttle_flow", "totals/generator_output",
                     "throttle flow", "generator output",
                     "Output versus throttle flow (Willans line)", units)


def plot_heat_rate(studies: Sequence[StudyData], units: str = "metric") -> Figure:
    """Heat rate [kJ/kWh, Btu/kWh in US units] versus generator output [MW]."""
    for st in studies:
        if "totals/heat_rate" not in st.data:
            raise ResultFileError(f"{st.path} has no heat rate (the model has no feedwater "
                                  f"train), so no heat-rate chart")
    return _xy_chart(studies, "totals/generator_output", "totals/heat_rate",
                     "generator output", "turbine-cycle heat rate",
                     "Heat rate (turbine cycle) versus output", units)


def _multi_chart(studies: Sequence[StudyData], xkey: str, group: str, quantity: str,
                 xlabel: str, ylabel: str, title: str, log: bool = False,
                 skip_zero: bool = False, fig: Figure | None = None, slot=(1, 1, 1),
                 transform=None, allow_multiples: bool = True,
                 units: str = "metric") -> Figure:
    """One colour per item (node, extraction), one line style per file and series;
    beyond four series, small multiples: one panel per series.  ``xlabel`` and
    ``ylabel`` name the quantities; the display unit of ``units`` is added to each
    (none to a ratio drawn through ``transform``).

    ``slot``: ``(rows, columns, index)`` of the figure's grid this chart takes;
    ``transform(st, x, y, j, idx)`` -> ``(x, y)`` replaces the values drawn;
    ``allow_multiples=False`` keeps one panel, and beyond four series draws them
    all in thin plain lines (the item colours only).
    """
    own = fig is None
    fig = fig or _figure()
    items = []
    for st in studies:
        for name in st.names.get(group, []):
            if name not in items:
                items.append(name)
    colours = _item_colours(items)
    curves = [(st, text, idx) for st in studies for _s, text, idx in _curves(st)]
    many = len(curves) > 4
    multiples = many and allow_multiples
    rows, cols, index = slot
    if multiples:
        n = len(curves)
        gc = math.ceil(math.sqrt(n))
        gr = math.ceil(n / gc)
        outer = fig.add_gridspec(rows, cols)[index - 1].subgridspec(gr, gc, hspace=0.45,
                                                                     wspace=0.25)
        axes = [fig.add_subplot(outer[j // gc, j % gc]) for j in range(n)]
        for ax in axes[1:]:
            ax.sharex(axes[0])
            ax.sharey(axes[0])
    else:
        axes = [fig.add_subplot(rows, cols, index)] * max(len(curves), 1)
    curve_styles = []
    for k_style, (st, text, idx) in enumerate(curves):
        ax = axes[k_style]
        ls, marker = (("-", "o") if multiples else ("-", None) if many
                      else _STYLES[k_style % len(_STYLES)])
        x_all, x_unit = _shown(st, xkey, units)
        y_all, y_unit = _shown(st, f"{group}/{quantity}", units)
        profile = is_profile(st)
        name = text or "all points"
        if len(studies) > 1:
            name = f"{_label(st, studies)}: {name}" if text else _label(st, studies)
        curve_styles.append((ls, marker, name))
        x = x_all[idx]
        order = np.argsort(x, kind="stable")
        cz = st.cautions
        ring = (cz[idx] > 0) if cz is not None else np.zeros(len(idx), bool)
        for j, item in enumerate(st.names[group]):
            y = y_all[idx, j]
            if skip_zero and np.all(np.nan_to_num(y) == 0.0):
                continue  # closed throughout: nothing to draw
            xx, yy = (x, y) if transform is None else transform(st, x, y, j, idx)
            if profile:
                ax.plot(xx, yy, linestyle="none", color=colours[item], **_dots(len(x), 0.75))
            else:
                ax.plot(xx[order], yy[order], linestyle=ls, marker=marker, markersize=3,
                        linewidth=0.7 if many and not multiples else 1.2,
                        color=colours[item])
            _rings(ax, xx[ring], yy[ring], small=True)
        if multiples:
            ax.set_title(name, fontsize=6)
            ax.tick_params(labelsize=6)
    if transform is None and curves:
        xlabel, ylabel = _axis(xlabel, x_unit), _axis(ylabel, y_unit)
    done = []
    for ax in axes:
        if ax in done:
            continue
        done.append(ax)
        if log:
            ax.set_yscale("log")
        ax.grid(True, which="both", alpha=0.25)
    if multiples:
        axes[0].figure.text(0.5 * ((index - 1) % cols * 2 + 1) / cols, 0.955, title,
                            ha="center", fontsize=10)
        gc = math.ceil(math.sqrt(len(axes)))
        for j in range(0, len(axes), gc):
            axes[j].set_ylabel(ylabel, fontsize=7)
        for j in range(len(axes) - gc, len(axes)):
            axes[j].set_xlabel(xlabel, fontsize=7)
    else:
        axes[0].set_xlabel(xlabel)
        axes[0].set_ylabel(ylabel)
        axes[0].set_title(title)
    if own:
        fig.subplots_adjust(left=0.10, right=0.97, top=0.90, bottom=0.2)
        _finish_multi(fig, studies, group, items, colours, curve_styles, many, units)
    return fig, (items, colours, curve_styles, many)


def _finish_multi(fig, studies, group, items, colours, curve_styles, multiples,
                  units: str = "metric") -> None:
    handles = [Line2D([], [], color=colours[i], label=i) for i in items]
    styles = []
    if len(curve_styles) > 1 and not multiples:
        styles = [Line2D([], [], color="0.2", linestyle=ls, marker=m, markersize=3,
                         label=name) for ls, m, name in curve_styles]
    if any(st.cautions is not None and (st.cautions > 0).any() for st in studies):
        styles.append(Line2D([], [], linestyle="none", marker="o", markerfacecolor="none",
                             markeredgecolor=_CAUTION, label="cautions"))
    _legend_beside(fig, handles, title=group.replace("_", " "), groups=[styles])
    _note(fig, studies, units)


def _design_pressures(st: StudyData) -> dict:
    """Design pressure of every node [Pa], from the model text stored in the file."""
    import tomllib

    from ..plant.model import build_model

    text = st.texts.get("model_file", "")
    name = st.attrs.get("model_path", st.attrs.get("model_file", "<model>"))
    model = build_model(tomllib.loads(text), text, file=str(name))
    return dict(model.design_pressure)


def plot_node_pressures(studies: Sequence[StudyData], units: str = "metric") -> Figure:
    """Pressure at every node [bar, psia in US units; log scale] versus throttle
    flow [kg/s, klb/h] (left), and the pressure ratio to design [-] versus the flow
    ratio to design [-] with the line of pressure proportional to flow (right)."""
    fig = _figure()
    _f, (items, colours, styles, multiples) = _multi_chart(
        studies, "totals/throttle_flow", "nodes", "pressure", "throttle flow",
        "pressure", "Node pressures", log=True, fig=fig, slot=(1, 2, 1),
        allow_multiples=False, units=units)
    try:
        design = {id(st): _design_pressures(st) for st in studies}
    except (PartloadError, ValueError, KeyError):
        design = None
    if design is not None:
        def ratio(st, x, y, j, idx):
            # x and y come in display units: the design values go the same way
            p0 = to_display_unit(design[id(st)].get(st.names["nodes"][j], math.nan), "Pa",
                                 system=units)[0]
            m0 = to_display_unit(float(st.attrs.get("design_throttle_flow", math.nan)),
                                 "kg/s", system=units)[0]
            return x / m0, y / p0

        _multi_chart(studies, "totals/throttle_flow", "nodes", "pressure",
                     "flow / design [-]", "pressure / design [-]",
                     "Pressure ratio versus flow ratio", fig=fig, slot=(1, 2, 2),
                     transform=ratio, units=units)
        for ax in fig.axes[1:]:
            lim = max(ax.get_xlim()[1], 1.05)
            ax.plot([0, lim], [0, lim], color="0.5", linewidth=0.8, linestyle="--")
            ax.set_xlim(0.0, lim)
            ax.set_ylim(bottom=0.0)
    fig.subplots_adjust(left=0.08, right=0.97, top=0.90, bottom=0.2, wspace=0.3)
    _finish_multi(fig, studies, "nodes", items, colours, styles, multiples, units)
    return fig


def plot_bleed_flows(studies: Sequence[StudyData], units: str = "metric") -> Figure:
    """Bleed flow of every extraction [kg/s, klb/h in US units] versus generator
    output [MW]."""
    return _multi_chart(studies, "totals/generator_output", "extractions", "flow",
                        "generator output", "bleed flow",
                        "Bleed flows versus load", skip_zero=True, units=units)[0]


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


def _pick_points(st: StudyData, loads: Sequence[float] | None, idx: np.ndarray) -> list[int]:
    """Points of one series (``idx``) for expansion lines: the given loads
    [fraction of design throttle flow], else the lowest, a middle and the
    highest flow."""
    if not len(idx):
        return []
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


def _branches(st: StudyData) -> list[tuple[list[tuple[str, str, str]], int]]:
    """The steam path as polylines: ``([(inlet, outlet, kind), ...], row)`` where
    kind is ``"group"`` or ``"path"`` (valves, reheaters, pipes) and row 0 is the
    main path, other rows parallel branches (as in the heat-balance diagram)."""
    import networkx as nx

    from .diagram import layout

    top = st.topology
    g = nx.DiGraph()
    for a, b in zip(top["group_inlet"], top["group_outlet"]):
        g.add_edge(a, b, kind="group")
    thr, after = st.attrs.get("throttle_node", ""), st.attrs.get("valve_outlet_node", "")
    if thr and after and thr != after:
        g.add_edge(thr, after, kind="path")
    for a, b in zip(top.get("path_inlet", []), top.get("path_outlet", [])):
        g.add_edge(a, b, kind="path")
    start = thr if thr in g else next(iter(nx.topological_sort(g)))
    lay = layout(g, start)
    lines: dict = {}
    for a, b in nx.topological_sort(nx.line_graph(g)):
        row = max(lay.row[a], lay.row[b])
        lines.setdefault(row, []).append((a, b, g.edges[a, b]["kind"]))
    return [(segs, row) for row, segs in sorted(lines.items())]


def plot_expansion(studies: Sequence[StudyData], loads: Sequence[float] | None = None,
                   steam=None, series: Sequence[int] | None = None,
                   units: str = "metric") -> Figure:
    """Expansion lines on the h-s chart with the saturation line.

    Parameters
    ----------
    studies : one or two result files
    loads : throttle flows as fractions of design [-] (the nearest converged
        point of each series is drawn); default: lowest, middle and highest
        flow of each series
    steam : property backend for the saturation line (default seuif97)
    series : indices of the series to draw [-] (default every series)
    units : ``"metric"`` (kJ/(kg K), kJ/kg; default) or ``"us"`` (Btu/(lb degR),
        Btu/lb) [-]
    """
    fig = _figure()
    ax = fig.add_subplot(111)
    fig.subplots_adjust(left=0.10, right=0.97, top=0.92, bottom=0.2)
    s_sat, h_sat = saturation_line(steam)
    s_lo, s_hi, h_lo, h_hi = math.inf, -math.inf, math.inf, -math.inf
    colour = 0
    handles = []
    any_branch = False
    for k, st in enumerate(studies):
        ls, _m = _STYLES[k % len(_STYLES)]
        names = st.names["nodes"]
        pos = {n: j for j, n in enumerate(names)}
        branches = _branches(st)
        S, s_unit = to_display_unit(st.data["nodes/entropy"], "J/(kg K)", system=units)
        H, h_unit = to_display_unit(st.data["nodes/enthalpy"], "J/kg", system=units)
        M, m_unit = to_display_unit(st.total("throttle_flow"), "kg/s", system=units)
        cz = st.cautions
        for s_index, text, idx in _curves(st):
            if series is not None and s_index not in series:
                continue
            for i in _pick_points(st, loads, idx):
                c, marker = series_style(colour)
                colour += 1
                P = float(to_display_unit(st.total("generator_output")[i], "W",
                                          system=units)[0])  # MW in both systems
                name = f"{P:.0f} MW, {M[i]:.0f} {m_unit}" + (f" ({text})" if text else "")
                if len(studies) > 1:
                    name = f"{_label(st, studies)}: {name}"
                for segs, row in branches:
                    any_branch |= row > 0
                    for a, b, kind in segs:
                        ia, ib = pos[a], pos[b]
                        xs, ys = [S[i, ia], S[i, ib]], [H[i, ia], H[i, ib]]
                        style = (":" if kind == "path" else ls if row == 0 else "-.")
                        ax.plot(xs, ys, linestyle=style, color=c,
                                linewidth=(1.4 if row == 0 else 1.0) if kind == "group"
                                else 0.9,
                                marker=marker if kind == "group" else None, markersize=3)
                handles.append(Line2D([], [], linestyle=ls, marker=marker, color=c,
                                      label=name))
                if cz is not None and cz[i] > 0:
                    j0 = pos.get(st.attrs.get("throttle_node", ""), 0)
                    _rings(ax, [S[i, j0]], [H[i, j0]])
                ok = np.isfinite(S[i]) & np.isfinite(H[i])
                s_lo, s_hi = min(s_lo, S[i, ok].min()), max(s_hi, S[i, ok].max())
                h_lo, h_hi = min(h_lo, H[i, ok].min()), max(h_hi, H[i, ok].max())
    s_sat, s_unit = to_display_unit(s_sat, "J/(kg K)", system=units)
    h_sat, h_unit = to_display_unit(h_sat, "J/kg", system=units)
    ax.plot(s_sat, h_sat, color="0.35", linewidth=1.0)
    keys = [Line2D([], [], color="0.35", linewidth=1.0, label="saturation line"),
            Line2D([], [], color="0.2", linestyle=":", label="valves, reheater, pipes")]
    if any_branch:
        keys.append(Line2D([], [], color="0.2", linestyle="-.",
                           label="parallel branch (second row)"))
    if any(st.cautions is not None and (st.cautions > 0).any() for st in studies):
        keys.append(Line2D([], [], linestyle="none", marker="o", markerfacecolor="none",
                           markeredgecolor=_CAUTION, label="cautions (at the throttle)"))
    if math.isfinite(s_lo):
        # at least 0.2 kJ/(kg K) and 200 kJ/kg wide, in the units drawn
        ds = max(s_hi - s_lo, float(to_display_unit(200.0, "J/(kg K)", system=units)[0]))
        dh = max(h_hi - h_lo, float(to_display_unit(200e3, "J/kg", system=units)[0]))
        ax.set_xlim(s_lo - 0.15 * ds, s_hi + 0.15 * ds)
        ax.set_ylim(h_lo - 0.12 * dh, h_hi + 0.08 * dh)
    ax.set_xlabel(_axis("specific entropy", s_unit))
    ax.set_ylabel(_axis("specific enthalpy", h_unit))
    ax.set_title("Expansion lines (h-s chart)")
    ax.grid(True, alpha=0.3)
    _legend_beside(fig, handles, fontsize=6.5, groups=[keys])
    _note(fig, studies, units)
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
               charts: Sequence[str] | None = None,
               series: Sequence[int] | None = None, units: str = "metric") -> list[Path]:
    """Draw the charts of one result file, or of two overlaid, as PNG files.

    Parameters
    ----------
    paths : one or two study result files
    out_dir : folder for the PNG files (default: that of the first file)
    loads : throttle flows for the expansion lines, fractions of design [-]
    charts : names from :data:`CHARTS` (default all)
    series : series indices for the expansion lines [-] (default every series)
    units : display units, ``"metric"`` (default) or ``"us"`` [-]

    Returns
    -------
    list of Path
        ``<stem>_<chart>.png``, or ``<stem>_vs_<other stem>_<chart>.png`` for
        two files; existing files of these names are replaced.
    """
    if not 1 <= len(paths) <= 2:
        raise InputError("give one result file, or two to overlay")
    _check_units(units)
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
        fig = (CHARTS[c](studies, loads, series=series, units=units) if c == "expansion"
               else CHARTS[c](studies, units=units))
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


def plot_time_series(studies: Sequence[StudyData], units: str = "metric") -> Figure:
    """Generator output [MW] and heat rate [kJ/kWh, Btu/kWh in US units] of a
    profile against time, one line per file and series."""
    fig = _figure()
    ax1 = fig.add_subplot(211)
    ax2 = fig.add_subplot(212, sharex=ax1)
    j = 0
    for st in studies:
        times, _dt_h = profile_times(st)
        x_all = np.array(times, dtype=object) if times is not None else \
            np.arange(st.n_points, dtype=float)
        P, p_unit = _shown(st, "totals/generator_output", units)
        HR, hr_unit = (_shown(st, "totals/heat_rate", units) if "totals/heat_rate" in st.data
                       else (None, ""))
        cz = st.cautions
        for _s, text, idx in _curves(st):
            c = f"C{j % 10}"
            j += 1
            name = _label(st, studies) + (f": {text}" if text else "")
            ax1.plot(x_all[idx], P[idx], color=c, linewidth=0.6, label=name)
            if HR is not None:
                ax2.plot(x_all[idx], HR[idx], color=c, linewidth=0.6)
            if cz is not None:
                ring = idx[cz[idx] > 0]
                _rings(ax1, x_all[ring], P[ring], small=True)
                if HR is not None:
                    _rings(ax2, x_all[ring], HR[ring], small=True)
    ax1.set_ylabel(_axis("output", p_unit))
    ax2.set_ylabel(_axis("heat rate", hr_unit))
    ax2.set_xlabel("time" if any(profile_times(s)[0] is not None for s in studies)
                   else "profile point")
    ax1.set_title("Output and turbine-cycle heat rate over the profile")
    for ax in (ax1, ax2):
        ax.grid(True, alpha=0.3)
    fig.autofmt_xdate()
    fig.subplots_adjust(left=0.11, right=0.97, top=0.93, bottom=0.2, hspace=0.15)
    _legend_beside(fig, [ln for ln in ax1.lines if not ln.get_label().startswith("_")])
    _note(fig, studies, units)
    return fig


def plot_load_duration(studies: Sequence[StudyData], units: str = "metric") -> Figure:
    """Load-duration curve: generator output [MW] against the hours [h] it is
    reached or exceeded over the profile, one line per file and series."""
    fig = _figure()
    ax = fig.add_subplot(111)
    fig.subplots_adjust(left=0.11, right=0.97, top=0.92, bottom=0.2)
    j = 0
    for st in studies:
        _times, dt_h = profile_times(st)
        P_all, p_unit = _shown(st, "totals/generator_output", units)
        cz = st.cautions
        for _s, text, idx in _curves(st):
            P = P_all[idx]
            order = np.argsort(-P, kind="stable")
            P = P[order]
            hours = dt_h * np.arange(1, len(P) + 1)
            ax.step(hours, P, where="pre", color=f"C{j % 10}",
                    label=_label(st, studies) + (f": {text}" if text else ""))
            j += 1
            if cz is not None:
                ring = (cz[idx] > 0)[order]
                _rings(ax, hours[ring], P[ring], small=True)
    ax.set_xlabel("hours at or above this output [h]")
    ax.set_ylabel(_axis("generator output", p_unit))
    ax.set_title("Load-duration curve")
    ax.grid(True, alpha=0.3)
    _legend_beside(fig, [ln for ln in ax.lines if not ln.get_label().startswith("_")])
    _note(fig, studies, units)
    return fig


PROFILE_CHARTS = {
    "time_series": plot_time_series,
    "load_duration": plot_load_duration,
}
