"""Pure figure builders: plain arrays in (``prepare.py`` dataclasses), ``go.Figure`` out.

No Dash, no solver calls, no I/O: each builder is a function of its arguments, so unit tests
call them directly and the benchmark times them alone. Colours, fonts and line styles come from
``theme.py``.

The window map's traces keep a fixed order (``MAP_TRACE``) so callbacks can update the markers
or the metric with a ``dash.Patch`` instead of resending the heat map.
"""

from __future__ import annotations

import math

import numpy as np
import plotly.graph_objects as go
from numpy.typing import NDArray

from . import theme
from .prepare import HOVER_FIELDS, ArcScene, FamilyData, MapData, MapPoint

MAP_TRACE = {
    "values": 0,
    "outside": 1,
    "contours": 2,
    "type_boundary": 3,
    "tof_lines": 4,
    "tof_labels": 5,
    "best": 6,
    "selected": 7,
    "outside_key": 8,
}
"""Index of each window-map trace (kept stable for partial updates)."""

CONTOUR_LEVELS_TARGET = 8
TOF_LINES_TARGET = 6
# Cells whose transfer angle is this close to 0/360 deg are left out of the Type boundary
# contour: the angle wraps there, and a contour through the wrap would draw a false line.
_WRAP_MARGIN_DEG = 30.0


# ---------------------------------------------------------------------------------------------
# Number helpers


def nice_step(span: float, target: int) -> float:
    """A 1-2-2.5-5 x 10^k step that cuts ``span`` into about ``target`` pieces."""
    if not math.isfinite(span) or span <= 0:
        return 1.0
    raw = span / max(target, 1)
    power = 10.0 ** math.floor(math.log10(raw))
    for factor in (1.0, 2.0, 2.5, 5.0, 10.0):
        if raw <= factor * power * 1.0000001:
            return factor * power
    return 10.0 * power


def colour_range(values: NDArray, limit: float | None, metric: str) -> tuple[float, float]:
    """Colour-scale bounds: the whole range for TOF; else from the lowest value up to the limit
    (so every colour falls within the limits) or, with no limit, up to the median value."""
    finite = values[np.isfinite(values)]
    if finite.size == 0:
        return 0.0, 1.0
    lo = float(finite.min())
    if metric == "tof_days":
        hi = float(finite.max())
    elif limit is not None and limit > lo:
        hi = float(limit)
    else:
        hi = float(np.percentile(finite, 50.0))
    if not hi > lo:
        hi = lo + max(abs(lo) * 0.1, 1e-9)
    return lo, hi


def _hover_template(data: MapData) -> str:
    lines = [
        "<b>departure</b> %{x|%Y-%m-%d %H:%M} UTC",
        "<b>arrival</b> %{y|%Y-%m-%d %H:%M} UTC",
    ]
    if data.arc_text is not None:
        lines.append("<b>arc</b> %{text}")
    for k, (_, label, unit, fmt) in enumerate(HOVER_FIELDS):
        lines.append(f"{label} %{{customdata[{k}]:{fmt}}} {unit}")
    lines.append("<extra></extra>")
    return "<br>".join(lines)


def tof_lines(
    departure_ms: NDArray, arrival_ms: NDArray, tof_min: float, tof_max: float
) -> tuple[list[float | None], list[float | None], list[float], list[float], list[str]]:
    """Lines of constant TOF across the map: line x/y (None-separated) and label x/y/text."""
    day_ms = 86_400_000.0
    x0, x1 = float(departure_ms[0]), float(departure_ms[-1])
    y0, y1 = float(arrival_ms[0]), float(arrival_ms[-1])
    lo, hi = max(tof_min, 0.0), tof_max
    xs: list[float | None] = []
    ys: list[float | None] = []
    lx: list[float] = []
    ly: list[float] = []
    text: list[str] = []
    if not (hi > lo):
        return xs, ys, lx, ly, text
    hours = hi < 2.0
    step = nice_step((hi - lo) * (24.0 if hours else 1.0), TOF_LINES_TARGET)
    step_days = step / 24.0 if hours else step
    first = math.ceil(lo / step_days - 1e-9) * step_days
    tof = first
    while tof <= hi + 1e-12:
        if tof > 0:
            offset = tof * day_ms
            start = max(x0, y0 - offset)
            end = min(x1, y1 - offset)
            if end > start:
                xs += [start, end, None]
                ys += [start + offset, end + offset, None]
                lx.append(end)
                ly.append(end + offset)
                value = tof * 24.0 if hours else tof
                text.append(f"{value:g} h" if hours else f"{value:g} d")
        tof += step_days
    return xs, ys, lx, ly, text


def _point_trace(point: MapPoint | None, name: str, marker: dict, unit: str) -> go.Scatter:
    x = [point.departure_ms] if point else []
    y = [point.arrival_ms] if point else []
    text = [f"{point.label}: {point.value:.4g} {unit}"] if point else []
    return go.Scatter(
        x=x,
        y=y,
        mode="markers",
        name=name,
        marker=marker,
        text=text,
        hovertemplate="%{text}<br>%{x|%Y-%m-%d %H:%M} → %{y|%Y-%m-%d %H:%M}<extra></extra>",
        showlegend=True,
    )


# ---------------------------------------------------------------------------------------------
# Window map


def window_map_figure(data: MapData) -> go.Figure:
    """Heat map of one metric over departure x arrival dates with its reading aids.

    Traces, in ``MAP_TRACE`` order: the metric, the grey wash over cells outside the limits,
    labelled contour lines, the Type I / Type II boundary (transfer angle 180 deg), lines of
    constant TOF and their labels, the best arc, the selected cell, and a legend key for the
    wash.
    """
    lo, hi = colour_range(data.values, data.limit, data.metric)
    unit = data.unit
    label = f"{data.metric_label} ({unit})" if unit else data.metric_label
    step = nice_step(hi - lo, CONTOUR_LEVELS_TARGET)
    start = math.ceil(lo / step) * step
    heat = go.Heatmap(
        x=data.departure_ms,
        y=data.arrival_ms,
        z=data.values,
        zmin=lo,
        zmax=hi,
        colorscale=theme.WINDOW_SCALE,
        colorbar={
            "title": {"text": label, "side": "right"},
            "thickness": 14,
            "len": 0.9,
            "outlinewidth": 0,
            "tickfont": {"size": 11},
        },
        hoverongaps=False,
        name=data.metric_label,
    )
    if data.hover is not None:
        heat.update(customdata=data.hover, hovertemplate=_hover_template(data))
        if data.arc_text is not None:
            heat.update(text=data.arc_text)
    else:
        heat.update(
            hovertemplate=(
                "%{x|%Y-%m-%d %H:%M} → %{y|%Y-%m-%d %H:%M}<br>"
                f"{data.metric_label} %{{z:.4g}} {unit}<extra>preview</extra>"
            )
        )
    outside = go.Heatmap(
        x=data.departure_ms,
        y=data.arrival_ms,
        z=np.where(data.outside, np.float32(1.0), np.float32(np.nan)),
        zmin=0.0,
        zmax=1.0,
        colorscale=[[0.0, theme.OUTSIDE_LIMITS_COLOR], [1.0, theme.OUTSIDE_LIMITS_COLOR]],
        showscale=False,
        hoverinfo="skip",
        name="outside limits",
    )
    contours = go.Contour(
        x=data.departure_ms,
        y=data.arrival_ms,
        z=data.values,
        zmin=lo,
        zmax=hi,
        autocontour=False,
        contours={
            "start": start,
            "end": hi,
            "size": step,
            "coloring": "lines",
            "showlabels": True,
            "labelfont": {"size": 10, "family": theme.FONT_FAMILY},
            "labelformat": ".3~g",
        },
        colorscale=theme.CONTOUR_LINE_SCALE,
        line={"width": 1.0},
        showscale=False,
        hoverinfo="skip",
        name=f"{data.metric_label} contours",
        showlegend=False,
    )
    angle = data.transfer_angle_deg
    with np.errstate(invalid="ignore"):
        near_wrap = (angle < _WRAP_MARGIN_DEG) | (angle > 360.0 - _WRAP_MARGIN_DEG)
    boundary = go.Contour(
        x=data.departure_ms,
        y=data.arrival_ms,
        z=np.where(near_wrap, np.float32(np.nan), angle - np.float32(180.0)),
        autocontour=False,
        contours={"start": 0.0, "end": 0.0, "size": 1.0, "coloring": "lines"},
        colorscale=[[0.0, theme.TYPE_BOUNDARY_COLOR], [1.0, theme.TYPE_BOUNDARY_COLOR]],
        line={"width": 2.2, "dash": "dash"},
        showscale=False,
        hoverinfo="skip",
        name="Type I | Type II (180°)",
        showlegend=True,
    )
    lx, ly, tx, ty, ttext = tof_lines(
        data.departure_ms, data.arrival_ms, data.tof_days_min, data.tof_days_max
    )
    tof = go.Scatter(
        x=lx,
        y=ly,
        mode="lines",
        line={"color": theme.TOF_LINE_COLOR, "width": 1.0, "dash": "dot"},
        hoverinfo="skip",
        name="constant TOF",
    )
    tof_text = go.Scatter(
        x=tx,
        y=ty,
        text=ttext,
        mode="text",
        textposition="bottom left",
        textfont={"size": 10, "color": theme.INK_MUTED},
        hoverinfo="skip",
        showlegend=False,
        name="TOF labels",
    )
    best = _point_trace(data.best, "best arc", theme.BEST_MARKER, unit)
    selected = _point_trace(data.selected, "selected", theme.SELECTED_MARKER, unit)
    outside_key = go.Scatter(
        x=[None],
        y=[None],
        mode="markers",
        marker={"symbol": "square", "size": 12, "color": theme.OUTSIDE_LIMITS_COLOR},
        name="outside limits",
        hoverinfo="skip",
    )
    fig = go.Figure(
        data=[heat, outside, contours, boundary, tof, tof_text, best, selected, outside_key]
    )
    n_dep, n_arr = data.full_shape
    shown = data.values.shape
    note = (
        f"{n_dep} × {n_arr} cells"
        if shown == (n_arr, n_dep)
        else f"{n_dep} × {n_arr} cells, drawn at {shown[1]} × {shown[0]}"
    )
    title = data.title or f"{label} — {data.arcs_label}"
    if data.preview:
        title = f"{title} (preview while dragging)"
    fig.update_layout(
        **theme.base_layout(
            title={"text": title, "x": 0.01, "font": {"size": theme.TITLE_SIZE}},
            margin={"l": 78, "r": 10, "t": 64, "b": 58},
            plot_bgcolor=theme.NO_ARC_COLOR,
            legend={
                "orientation": "h",
                "x": 0.0,
                "y": 1.0,
                "yanchor": "bottom",
                "xanchor": "left",
                "font": {"size": 11},
                "bgcolor": "rgba(255,255,255,0)",
            },
            xaxis=theme.axis_style(
                type="date",
                title={"text": f"departure (UTC) — {note}"},
                range=[data.departure_ms[0], data.departure_ms[-1]],
                hoverformat="%Y-%m-%d %H:%M",
            ),
            yaxis=theme.axis_style(
                type="date",
                title={"text": "arrival (UTC)"},
                range=[data.arrival_ms[0], data.arrival_ms[-1]],
                hoverformat="%Y-%m-%d %H:%M",
            ),
            clickmode="event",
            dragmode="zoom",
        )
    )
    return fig


def map_metric_patch(patch, data: MapData):
    """Fill a ``dash.Patch`` of the window map with a new metric over the same grid.

    The grid, its hover numbers and the limit wash stay in the browser; only the metric values,
    colour range, contour levels, markers and titles travel.
    """
    fresh = window_map_figure(data)
    for name in ("values", "contours"):
        k = MAP_TRACE[name]
        src = fresh.data[k]
        patch["data"][k]["z"] = data.values
        patch["data"][k]["zmin"] = src.zmin
        patch["data"][k]["zmax"] = src.zmax
    k = MAP_TRACE["values"]
    patch["data"][k]["colorbar"]["title"]["text"] = fresh.data[k].colorbar.title.text
    patch["data"][k]["name"] = fresh.data[k].name
    patch["data"][MAP_TRACE["contours"]]["contours"] = fresh.data[MAP_TRACE["contours"]].contours
    patch["data"][MAP_TRACE["outside"]]["z"] = fresh.data[MAP_TRACE["outside"]].z
    for name in ("best", "selected"):
        set_point(patch, name, getattr(data, name), data.unit)
    patch["layout"]["title"]["text"] = fresh.layout.title.text
    return patch


def set_point(patch, name: str, point: MapPoint | None, unit: str):
    """Move the best-arc or selected-cell marker of a window-map ``Patch``."""
    trace = _point_trace(point, name, {}, unit)
    k = MAP_TRACE[name]
    patch["data"][k]["x"] = list(trace.x)
    patch["data"][k]["y"] = list(trace.y)
    patch["data"][k]["text"] = list(trace.text)
    return patch


# ---------------------------------------------------------------------------------------------
# Arc view


def _line3d(xyz: NDArray, name: str, color: str, width: float, dash: str = "solid", **kw):
    return go.Scatter3d(
        x=xyz[:, 0],
        y=xyz[:, 1],
        z=xyz[:, 2],
        mode="lines",
        line={"color": color, "width": width, "dash": dash},
        name=name,
        **kw,
    )


def _point3d(xyz: NDArray, name: str, symbol: str, color: str, size: int = 6, **kw):
    return go.Scatter3d(
        x=[xyz[0]],
        y=[xyz[1]],
        z=[xyz[2]],
        mode="markers",
        marker={
            "symbol": symbol,
            "color": color,
            "size": size,
            "line": {"color": color, "width": 2},
        },
        name=name,
        **kw,
    )


def _sphere(radius: float, color: str, name: str) -> go.Surface:
    u = np.linspace(0.0, 2.0 * np.pi, 36)
    v = np.linspace(0.0, np.pi, 18)
    x = radius * np.outer(np.cos(u), np.sin(v))
    y = radius * np.outer(np.sin(u), np.sin(v))
    z = radius * np.outer(np.ones_like(u), np.cos(v))
    return go.Surface(
        x=x,
        y=y,
        z=z,
        colorscale=[[0.0, color], [1.0, color]],
        showscale=False,
        opacity=0.55,
        hoverinfo="skip",
        name=name,
        showlegend=True,
    )


def arc_view_figure(scene: ArcScene) -> go.Figure:
    """3D view: central body, both orbits, the transfer arc, the bodies at departure and arrival,
    and the reference plane, on equal axis scales."""
    extent = 1.08 * scene.extent
    unit = scene.unit
    hover = f"%{{x:.3f}}, %{{y:.3f}}, %{{z:.3f}} {unit}<extra>%{{fullData.name}}</extra>"
    plane = go.Mesh3d(
        x=[-extent, extent, extent, -extent],
        y=[-extent, -extent, extent, extent],
        z=[0.0, 0.0, 0.0, 0.0],
        i=[0, 0],
        j=[1, 2],
        k=[2, 3],
        color=theme.REFERENCE_PLANE_COLOR,
        opacity=0.10,
        hoverinfo="skip",
        name=f"{scene.plane_label} plane",
        showlegend=True,
    )
    traces: list = [plane]
    if scene.central_radius > 0:
        traces.append(_sphere(scene.central_radius, theme.PLANET_SURFACE_COLOR, scene.central_name))
    else:
        traces.append(
            _point3d(
                np.zeros(3),
                scene.central_name,
                "circle",
                theme.CENTRAL_BODY_COLOR,
                9,
                hovertemplate=f"{scene.central_name}<extra></extra>",
            )
        )
    for track, color in (
        (scene.departure, theme.DEPARTURE_BODY_COLOR),
        (scene.target, theme.TARGET_BODY_COLOR),
    ):
        name = track.name.capitalize()
        if track.orbit is not None:
            traces.append(
                _line3d(
                    track.orbit,
                    f"{name} orbit",
                    color,
                    1.5,
                    "dot",
                    hoverinfo="skip",
                    legendgroup=name,
                    showlegend=False,
                )
            )
        traces.append(
            _line3d(
                track.path,
                f"{name} during transfer",
                color,
                3.0,
                hovertemplate=hover,
                legendgroup=name,
            )
        )
        traces.append(
            _point3d(
                track.at_departure,
                f"{name} at departure",
                "circle",
                color,
                6,
                hovertemplate=hover,
                legendgroup=name,
            )
        )
        traces.append(
            _point3d(
                track.at_arrival,
                f"{name} at arrival",
                "diamond",
                color,
                6,
                hovertemplate=hover,
                legendgroup=name,
            )
        )
    if len(scene.arc):
        traces.append(
            _line3d(scene.arc, "transfer arc", theme.TRANSFER_ARC_COLOR, 5.0, hovertemplate=hover)
        )
    axis = {
        "range": [-extent, extent],
        "showbackground": False,
        "gridcolor": theme.RULE,
        "zerolinecolor": theme.RULE,
        "tickfont": {"size": 10, "color": theme.INK_MUTED},
    }
    fig = go.Figure(data=traces)
    fig.update_layout(
        **theme.base_layout(
            title={"text": scene.title, "x": 0.01, "font": {"size": theme.TITLE_SIZE}},
            margin={"l": 0, "r": 0, "t": 36, "b": 0},
            legend={
                "x": 0.0,
                "y": 0.0,
                "yanchor": "bottom",
                "font": {"size": 10},
                "bgcolor": "rgba(255,255,255,0.75)",
            },
            scene={
                "xaxis": {**axis, "title": {"text": f"x ({unit})"}},
                "yaxis": {**axis, "title": {"text": f"y ({unit})"}},
                "zaxis": {**axis, "title": {"text": f"z ({unit})"}},
                "aspectmode": "cube",
                "camera": {
                    "eye": {"x": 0.35, "y": -1.45, "z": 0.95},
                    "up": {"x": 0, "y": 0, "z": 1},
                },
            },
            uirevision=scene.title.split(",")[0],
        )
    )
    return fig


# ---------------------------------------------------------------------------------------------
# Family chart


def family_chart_figure(data: FamilyData) -> go.Figure:
    """Normalized energy ε against normalized time τ for one geometry λ: every family and
    revolution count, the parabola, the minimum-energy points and the cell's arcs."""
    traces: list = []
    seen_revs: set[int] = set()
    for curve in data.curves:
        if curve.tau.size == 0:
            continue
        after = "after minimum-energy" in curve.name
        hyperbola = "hyperbola" in curve.name
        name = f"N = {curve.revolutions}"
        traces.append(
            go.Scatter(
                x=curve.tau,
                y=curve.epsilon,
                mode="lines",
                line={
                    "color": theme.revolution_color(curve.revolutions),
                    "width": 2.0 if curve.revolutions == 0 else 1.6,
                    "dash": "dash" if after else ("solid" if not hyperbola else "dashdot"),
                },
                name=name,
                legendgroup=name,
                showlegend=curve.revolutions not in seen_revs,
                text=[curve.name] * len(curve.tau),
                hovertemplate="%{text}<br>τ %{x:.3f}, ε %{y:.3f}<extra></extra>",
            )
        )
        seen_revs.add(curve.revolutions)
    tau_all = np.concatenate([c.tau for c in data.curves if c.tau.size] or [np.array([0.0, 1.0])])
    tau_hi = float(np.nanmax(tau_all)) if tau_all.size else 1.0
    traces.append(
        go.Scatter(
            x=[0.0, tau_hi],
            y=[0.0, 0.0],
            mode="lines",
            line={"color": theme.PARABOLA_COLOR, "width": 1.2, "dash": "dot"},
            name="parabola (ε = 0)",
            hovertemplate="parabola, ε = 0<extra></extra>",
        )
    )
    traces.append(
        go.Scatter(
            x=[data.parabolic_tau],
            y=[0.0],
            mode="markers",
            marker={"symbol": "triangle-up", "size": 9, "color": theme.PARABOLA_COLOR},
            name="parabolic arc",
            hovertemplate="parabolic arc<br>τ %{x:.3f}<extra></extra>",
        )
    )
    traces.append(
        go.Scatter(
            x=[p.tau for p in data.minimum_energy],
            y=[p.epsilon for p in data.minimum_energy],
            text=[p.label for p in data.minimum_energy],
            mode="markers",
            marker={"symbol": "diamond", "size": 8, "color": theme.MIN_ENERGY_COLOR},
            name="minimum energy (ε = −1)",
            hovertemplate="%{text}<br>τ %{x:.3f}<extra></extra>",
        )
    )
    others = [p for p in data.cell_arcs if p is not data.selected]
    if others:
        traces.append(
            go.Scatter(
                x=[p.tau for p in others],
                y=[p.epsilon for p in others],
                text=[p.label for p in others],
                mode="markers",
                marker={
                    "symbol": "circle-open",
                    "size": 9,
                    "color": theme.INK_MUTED,
                    "line": {"width": 1.5},
                },
                name="other arcs of this cell",
                hovertemplate="%{text}<br>τ %{x:.3f}, ε %{y:.3f}<extra></extra>",
            )
        )
    annotations = []
    if data.selected is not None:
        p = data.selected
        traces.append(
            go.Scatter(
                x=[p.tau],
                y=[p.epsilon],
                text=[p.label],
                mode="markers",
                marker=theme.SELECTED_MARKER,
                name="selected arc",
                hovertemplate="<b>selected arc</b><br>%{text}<br>τ %{x:.3f}, ε %{y:.3f}"
                "<extra></extra>",
            )
        )
        annotations.append(
            {
                "x": p.tau,
                "y": p.epsilon,
                "text": p.label,
                "showarrow": True,
                "arrowhead": 0,
                "ax": 30,
                "ay": -36,
                "font": {"size": 10, "color": theme.INK},
                "bgcolor": "rgba(255,255,255,0.85)",
                "bordercolor": theme.RULE,
            }
        )
    eps_values = np.concatenate([c.epsilon for c in data.curves if c.epsilon.size] or [[0.0]])
    eps_hi = float(np.nanmax(eps_values)) if eps_values.size else 1.0
    fig = go.Figure(data=traces)
    fig.update_layout(
        **theme.base_layout(
            title={"text": data.title, "x": 0.01, "font": {"size": theme.TITLE_SIZE}},
            margin={"l": 64, "r": 12, "t": 36, "b": 50},
            xaxis=theme.axis_style(
                title={"text": "normalized time τ = t·√(μ / a_m³)"}, range=[0.0, tau_hi]
            ),
            yaxis=theme.axis_style(
                title={"text": "normalized energy ε = −a_m / a"},
                range=[-1.08, max(eps_hi, 0.2) * 1.04],
            ),
            legend={"x": 0.99, "xanchor": "right", "y": 0.99, "font": {"size": 10}},
            annotations=annotations,
            hovermode="closest",
        )
    )
    return fig


__all__ = [
    "MAP_TRACE",
    "arc_view_figure",
    "colour_range",
    "family_chart_figure",
    "map_metric_patch",
    "nice_step",
    "set_point",
    "tof_lines",
    "window_map_figure",
]
