"""Pure figure builders: plain arrays in (``prepare.py`` dataclasses), ``go.Figure`` out.

No Dash, no solver calls, no I/O: each builder is a function of its arguments, so unit tests
call them directly and the benchmark times them alone. Colours, fonts and line styles come from
``theme.py``.

The window map keeps its traces in a fixed order (``MAP_TRACE``) and draws the best-arc and
selected-cell markers as layout annotations and shapes, so a click moves them with a
``dash.Patch`` of the layout alone: the browser then redraws no trace, however large the map.
"""

from __future__ import annotations

import base64
import html
import math

import numpy as np
import plotly.graph_objects as go
from numpy.typing import NDArray

from solver.time_units import MS_PER_DAY

from . import theme
from .display_data import ArcScene, FamilyData, MapData, MapPoint, display_name

MAP_TRACE = {
    "values": 0,
    "outside": 1,
    "contours": 2,
    "type_boundary": 3,
    "tof_lines": 4,
    "tof_labels": 5,
    "best_key": 6,
    "selected_key": 7,
    "outside_key": 8,
    "no_value": 9,
    "limit": 10,
}
"""Index of each window-map trace (kept stable for partial updates)."""

CONTOUR_LEVELS_TARGET = 8
TOF_LINES_TARGET = 6
SELECTED_RADIUS_PX = 10
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


def colour_range(
    values: NDArray, limit: float | None, metric: str, higher_is_better: bool = False
) -> tuple[float, float]:
    """Colour-scale bounds: the whole range for TOF; else from the best value to the limit (so
    every colour falls within the limits) or, with no limit, to the median value. The best
    value is the lowest, or the highest for a metric where more is better (kilograms)."""
    finite = values[np.isfinite(values)]
    if finite.size == 0:
        return 0.0, 1.0
    if metric == "tof_days":
        lo, hi = float(finite.min()), float(finite.max())
    elif higher_is_better:
        hi = float(finite.max())
        lo = float(limit) if limit is not None and limit < hi else float(np.median(finite))
    else:
        lo = float(finite.min())
        hi = float(limit) if limit is not None and limit > lo else float(np.median(finite))
    if not hi > lo:
        spread = max(abs(hi if higher_is_better else lo) * 0.1, 1e-9)
        lo, hi = (hi - spread, hi) if higher_is_better else (lo, lo + spread)
    return lo, hi


def label_format(step: float) -> str:
    """Contour labels with as many decimals as the step between levels needs, thousands
    separated (``1,200`` kg, ``12.5`` km²/s², ``0.25`` km/s)."""
    decimals = max(0, -math.floor(math.log10(step) + 1e-9)) if step > 0 else 0
    if step > 0 and abs(step * 10**decimals - round(step * 10**decimals)) > 1e-6:
        decimals += 1  # 2.5, 0.25
    return f",.{decimals}~f"


def tof_lines(
    departure_ms: NDArray, arrival_ms: NDArray, tof_min: float, tof_max: float
) -> tuple[list[float | None], list[float | None], list[float], list[float], list[str]]:
    """Lines of constant TOF across the map: line x/y (None-separated) and label x/y/text."""
    day_ms = MS_PER_DAY
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
    k = math.ceil(lo / step_days - 1e-9)
    while k * step_days <= hi + 1e-12:
        tof = k * step_days
        k += 1
        if tof <= 0:
            continue
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
    return xs, ys, lx, ly, text


# ---------------------------------------------------------------------------------------------
# Window map


def _label(data: MapData) -> str:
    return f"{data.metric_label} ({data.unit})" if data.unit else data.metric_label


def _text(value: str) -> str:
    """Text as Plotly shows it: Plotly reads a subset of HTML (links, bold, line breaks) in titles,
    legends and hover labels, so names a case or an upload chose are escaped and show as typed."""
    return html.escape(str(value), quote=False)


def _title(data: MapData) -> str:
    title = _text(data.title) if data.title else f"{_label(data)} — {data.arcs_label}"
    return f"{title} (preview while dragging)" if data.preview else title


def _hover_template(data: MapData) -> str:
    lines = [
        "<b>departure</b> %{x|%Y-%m-%d %H:%M} UTC",
        "<b>arrival</b> %{y|%Y-%m-%d %H:%M} UTC",
    ]
    if data.arc_text is not None:
        lines.append("<b>arc</b> %{text}")
    for k, (_, label, unit, fmt) in enumerate(data.hover_fields):
        lines.append(f"{label} %{{customdata[{k}]:{fmt}}} {unit}")
    lines.append("<extra></extra>")
    return "<br>".join(lines)


def _metric_traces(data: MapData) -> tuple[go.Heatmap, go.Contour]:
    """The heat map and its labelled contour lines for the metric of ``data``.

    The scale's pale end is the good end: the lowest values, or the highest where more is
    better (``reversescale``), so a map of kilograms reads like a map of C3.
    """
    lo, hi = colour_range(data.values, data.limit, data.metric, data.higher_is_better)
    step = nice_step(hi - lo, CONTOUR_LEVELS_TARGET)
    heat = go.Heatmap(
        x=data.heat.departure_ms,
        y=data.heat.arrival_ms,
        z=data.heat.values,
        zmin=lo,
        zmax=hi,
        colorscale=theme.WINDOW_SCALE,
        reversescale=data.higher_is_better,
        colorbar={
            "title": {"text": _label(data), "side": "right"},
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
                f"{data.metric_label} %{{z:.4g}} {data.unit}<extra>preview</extra>"
            )
        )
    contours = go.Contour(
        x=data.lines.departure_ms,
        y=data.lines.arrival_ms,
        z=data.lines.values,
        zmin=lo,
        zmax=hi,
        autocontour=False,
        contours={
            "start": math.ceil(lo / step) * step,
            "end": hi,
            "size": step,
            "coloring": "lines",
            "showlabels": True,
            "labelfont": {"size": 10, "family": theme.FONT_FAMILY},
            "labelformat": label_format(step),
        },
        colorscale=theme.CONTOUR_LINE_SCALE,
        reversescale=data.higher_is_better,
        line={"width": 1.0, "smoothing": 0.8},
        showscale=False,
        hoverinfo="skip",
        name=f"{data.metric_label} contours",
        showlegend=False,
    )
    return heat, contours


def _limit_trace(data: MapData) -> go.Contour:
    """The line where the metric meets the case's limit on it (hidden when there is none)."""
    level = data.limit if data.limit is not None else 0.0
    return go.Contour(
        x=data.lines.departure_ms,
        y=data.lines.arrival_ms,
        z=data.lines.values,
        autocontour=False,
        contours={"start": level, "end": level, "size": 1.0, "coloring": "lines"},
        colorscale=[[0.0, theme.LIMIT_LINE_COLOR], [1.0, theme.LIMIT_LINE_COLOR]],
        line={"width": 2.4, "smoothing": 0.8},
        showscale=False,
        hoverinfo="skip",
        name=data.limit_label or "limit",
        visible=data.limit is not None,
        showlegend=data.limit is not None,
    )


def _no_value_trace(data: MapData) -> go.Heatmap:
    """Cells with no value of the metric: invisible, but they answer a click (the details then
    say why: no arc, or no mass for the arc)."""
    return go.Heatmap(
        x=data.heat.departure_ms,
        y=data.heat.arrival_ms,
        z=np.where(data.no_value, np.float32(1.0), np.float32(np.nan)),
        zmin=0.0,
        zmax=1.0,
        colorscale=[[0.0, "rgba(0,0,0,0)"], [1.0, "rgba(0,0,0,0)"]],
        showscale=False,
        hovertemplate=_no_value_hover(data),
        hoverongaps=False,
        name="no value",
    )


def _no_value_hover(data: MapData) -> str:
    dates = "%{x|%Y-%m-%d %H:%M} → %{y|%Y-%m-%d %H:%M} UTC"
    return f"{dates}<br>{data.no_value_text}<extra></extra>"


def _marker_value(value: float, unit: str) -> str:
    if not math.isfinite(value):
        return ""
    number = f"{value:,.0f}" if unit == "kg" else f"{value:.4g}"
    return f"{number} {unit}".strip()


def marker_layout(
    best: MapPoint | None, selected: MapPoint | None, unit: str, note: str = ""
) -> dict:
    """Layout ``annotations`` (the best arc's star, and a note when there is none) and
    ``shapes`` (a ring on the selected cell) that mark the map; sizes are in pixels so they read
    the same at any zoom."""
    annotations = []
    if note:
        annotations.append(
            {
                "x": 0.5,
                "y": 1.0,
                "xref": "paper",
                "yref": "paper",
                "yanchor": "top",
                "text": note,
                "showarrow": False,
                "font": {"size": 12, "color": theme.ERROR_INK},
                "bgcolor": "rgba(255,255,255,0.9)",
                "bordercolor": theme.RULE,
                "name": "note",
            }
        )
    shapes = []
    if best is not None:
        value = _marker_value(best.value, unit)
        annotations.append(
            {
                "x": best.departure_ms,
                "y": best.arrival_ms,
                "xref": "x",
                "yref": "y",
                "text": "★",
                "showarrow": False,
                "font": {"size": 20, "color": theme.BEST_MARKER["color"]},
                "hovertext": f"{best.label}: {value}",
                "name": "best arc",
            }
        )
    if selected is not None:
        r = SELECTED_RADIUS_PX
        shapes.append(
            {
                "type": "circle",
                "xref": "x",
                "yref": "y",
                "xsizemode": "pixel",
                "ysizemode": "pixel",
                "xanchor": selected.departure_ms,
                "yanchor": selected.arrival_ms,
                "x0": -r,
                "x1": r,
                "y0": -r,
                "y1": r,
                "line": {"color": theme.ACCENT, "width": 3},
                "name": "selected",
            }
        )
    return {"annotations": annotations, "shapes": shapes}


def _date_ticks(ms: NDArray) -> tuple[dict, str]:
    """Tick labels for windows of hours, and the day to name in the axis title.

    Plotly's default puts the date on a second line, which collides with the axis title, and on
    a narrow map it tilts long labels into the title and the legend below. A window inside one
    UTC day is labelled by the time alone, its day named once in the title; a longer window of
    hours gets one-line labels, few and upright.
    """
    first, last = float(ms[0]), float(ms[-1])
    if (last - first) / MS_PER_DAY >= 3.0:
        return {}, ""
    day_first = np.datetime64(int(first), "ms").astype("datetime64[D]")
    day_last = np.datetime64(int(last), "ms").astype("datetime64[D]")
    if day_first == day_last:
        return {"tickformat": "%H:%M", "tickangle": 0}, f", {day_first}"
    return {"tickformat": "%d %b %H:%M", "tickangle": 0, "nticks": 5}, ""


def _key_trace(name: str, marker: dict) -> go.Scatter:
    """A legend entry with no data (the markers themselves live in the layout)."""
    return go.Scatter(
        x=[None], y=[None], mode="markers", marker=marker, name=name, hoverinfo="skip"
    )


def window_map_figure(data: MapData) -> go.Figure:
    """Heat map of one metric over departure x arrival dates with its reading aids.

    Traces, in ``MAP_TRACE`` order: the metric, the pale wash over cells outside the limits,
    labelled contour lines, the Type I / Type II boundary (transfer angle 180 deg), lines of
    constant TOF and their labels, legend keys for the markers and the wash, the cells with no
    value (they answer clicks) and the line of the case's limit on the metric. The best arc
    (a star) and the selected cell (a ring) are layout annotations and shapes.
    """
    heat, contours = _metric_traces(data)
    outside = go.Heatmap(
        x=data.heat.departure_ms,
        y=data.heat.arrival_ms,
        z=np.where(data.outside, np.float32(1.0), np.float32(np.nan)),
        zmin=0.0,
        zmax=1.0,
        colorscale=[[0.0, theme.OUTSIDE_LIMITS_COLOR], [1.0, theme.OUTSIDE_LIMITS_COLOR]],
        showscale=False,
        hoverinfo="skip",
        name="outside limits",
    )
    angle = data.lines.transfer_angle_deg
    with np.errstate(invalid="ignore"):
        near_wrap = (angle < _WRAP_MARGIN_DEG) | (angle > 360.0 - _WRAP_MARGIN_DEG)
    boundary = go.Contour(
        x=data.lines.departure_ms,
        y=data.lines.arrival_ms,
        z=np.where(near_wrap, np.float32(np.nan), angle - np.float32(180.0)),
        autocontour=False,
        contours={"start": 0.0, "end": 0.0, "size": 1.0, "coloring": "lines"},
        colorscale=[[0.0, theme.TYPE_BOUNDARY_COLOR], [1.0, theme.TYPE_BOUNDARY_COLOR]],
        line={"width": 2.2, "dash": "dash", "smoothing": 1.0},
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
    keys = [
        _key_trace("best arc", {"symbol": "star", "size": 14, "color": theme.BEST_MARKER["color"]}),
        _key_trace(
            "selected",
            {"symbol": "circle-open", "size": 13, "color": theme.ACCENT, "line": {"width": 3}},
        ),
        _key_trace(
            "outside limits", {"symbol": "square", "size": 12, "color": theme.OUTSIDE_LIMITS_COLOR}
        ),
    ]
    n_dep, n_arr = data.full_shape
    shown = data.values.shape
    note = (
        f"{n_dep} × {n_arr} cells"
        if shown == (n_arr, n_dep)
        else f"{n_dep} × {n_arr} cells, drawn at {shown[1]} × {shown[0]}"
    )
    x_ticks, x_day = _date_ticks(data.departure_ms)
    y_ticks, y_day = _date_ticks(data.arrival_ms)
    # The layout goes to the constructor: update_layout() costs ~20x more per figure.
    return go.Figure(
        data=[
            heat,
            outside,
            contours,
            boundary,
            tof,
            tof_text,
            *keys,
            _no_value_trace(data),
            _limit_trace(data),
        ],
        layout=theme.base_layout(
            title={"text": _title(data), "x": 0.01, "font": {"size": theme.TITLE_SIZE}},
            # The legend sits under the axis title: wrapped onto two lines on a narrow screen
            # it grows downward into the margin instead of over the title.
            margin={"l": 78, "r": 10, "t": 40, "b": 112},
            plot_bgcolor=theme.NO_ARC_COLOR,
            legend={
                "orientation": "h",
                "x": 0.0,
                "y": -0.15,
                "yanchor": "top",
                "xanchor": "left",
                "font": {"size": 11},
                "bgcolor": "rgba(255,255,255,0)",
            },
            xaxis=theme.axis_style(
                type="date",
                title={"text": f"departure (UTC{x_day}) — {note}", "standoff": 6},
                range=[data.departure_ms[0], data.departure_ms[-1]],
                hoverformat="%Y-%m-%d %H:%M",
                **x_ticks,
            ),
            yaxis=theme.axis_style(
                type="date",
                title={"text": f"arrival (UTC{y_day})"},
                range=[data.arrival_ms[0], data.arrival_ms[-1]],
                hoverformat="%Y-%m-%d %H:%M",
                **y_ticks,
            ),
            clickmode="event",
            dragmode="zoom",
            **marker_layout(data.best, data.selected, data.unit, data.note),
        ),
    )


_TYPED_DTYPES = {
    np.dtype("float32"): "f4",
    np.dtype("float64"): "f8",
    np.dtype("int8"): "i1",
    np.dtype("uint8"): "u1",
    np.dtype("int32"): "i4",
}


def typed_array(values: NDArray) -> dict:
    """A numpy array as plotly.js's typed-array spec (base64 bytes, dtype, shape).

    Inside a ``dash.Patch`` numpy arrays would travel as JSON lists of numbers, several times
    larger and slower to encode; plotly.js reads this spec wherever it reads an array.
    """
    arr = np.ascontiguousarray(values)
    spec = {"dtype": _TYPED_DTYPES[arr.dtype], "bdata": base64.b64encode(arr.tobytes()).decode()}
    if arr.ndim > 1:
        spec["shape"] = ", ".join(str(n) for n in arr.shape)
    return spec


def map_metric_patch(patch, data: MapData):
    """Fill a ``dash.Patch`` of the window map with a new metric over the same cells.

    The hover numbers, the limit wash, the Type boundary and the TOF lines stay in the browser;
    the metric values, colour range and direction, contour levels, the cells with no value, the
    limit line, markers and title travel.
    """
    heat, contours = _metric_traces(data)
    for name, trace in (("values", heat), ("contours", contours)):
        k = MAP_TRACE[name]
        patch["data"][k]["z"] = typed_array(trace.z)
        patch["data"][k]["zmin"] = trace.zmin
        patch["data"][k]["zmax"] = trace.zmax
        patch["data"][k]["name"] = trace.name
        patch["data"][k]["reversescale"] = trace.reversescale
    no_value = _no_value_trace(data)
    k = MAP_TRACE["no_value"]
    patch["data"][k]["z"] = typed_array(no_value.z)
    patch["data"][k]["hovertemplate"] = no_value.hovertemplate
    limit = _limit_trace(data)
    k = MAP_TRACE["limit"]
    patch["data"][k]["z"] = typed_array(limit.z)
    patch["data"][k]["contours"] = limit.contours.to_plotly_json()
    for prop in ("name", "visible", "showlegend"):
        patch["data"][k][prop] = limit[prop]
    k = MAP_TRACE["values"]
    patch["data"][k]["colorbar"]["title"]["text"] = heat.colorbar.title.text
    if data.hover is None:
        patch["data"][k]["hovertemplate"] = heat.hovertemplate
    patch["data"][MAP_TRACE["contours"]]["contours"] = contours.contours.to_plotly_json()
    patch["layout"]["title"]["text"] = _title(data)
    return set_markers(patch, data.best, data.selected, data.unit, data.note)


def set_markers(patch, best: MapPoint | None, selected: MapPoint | None, unit: str, note: str = ""):
    """Move the best-arc and selected-cell markers of a window-map ``Patch`` (layout only)."""
    layout = marker_layout(best, selected, unit, note)
    patch["layout"]["annotations"] = layout["annotations"]
    patch["layout"]["shapes"] = layout["shapes"]
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
        name=f"{_text(scene.plane_label)} plane",
        showlegend=True,
    )
    traces: list = [plane]
    if scene.central_radius > 0:
        traces.append(
            _sphere(scene.central_radius, theme.PLANET_SURFACE_COLOR, _text(scene.central_name))
        )
    else:
        traces.append(
            _point3d(
                np.zeros(3),
                _text(scene.central_name),
                "circle",
                theme.CENTRAL_BODY_COLOR,
                9,
                hovertemplate=f"{_text(scene.central_name)}<extra></extra>",
            )
        )
    for track, color in (
        (scene.departure, theme.DEPARTURE_BODY_COLOR),
        (scene.target, theme.TARGET_BODY_COLOR),
    ):
        name = _text(display_name(track.name))
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
        traces.append(_line3d(track.path, name, color, 3.0, hovertemplate=hover, legendgroup=name))
        traces.append(
            _point3d(
                track.at_departure,
                f"{name} at departure",
                "circle",
                color,
                6,
                hovertemplate=hover,
                legendgroup=name,
                showlegend=False,
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
                showlegend=False,
            )
        )
    if len(scene.arc):
        traces.append(
            _line3d(scene.arc, "transfer arc", theme.TRANSFER_ARC_COLOR, 5.0, hovertemplate=hover)
        )
    pieces = [scene.arc, scene.departure.path, scene.target.path]
    pieces += [t.orbit for t in (scene.departure, scene.target) if t.orbit is not None]
    z_values = np.concatenate([np.abs(p[:, 2]) for p in pieces if len(p)] or [np.zeros(1)])
    z_extent = float(np.nanmax(z_values)) if np.isfinite(z_values).any() else 0.0
    z_half = max(0.3 * extent, 1.15 * z_extent, scene.central_radius * 1.1)
    axis = {
        "range": [-extent, extent],
        "showbackground": False,
        "gridcolor": theme.RULE,
        "zerolinecolor": theme.RULE,
        "tickfont": {"size": 10, "color": theme.INK_MUTED},
    }
    # The layout goes to the constructor: update_layout() costs ~20x more per figure.
    return go.Figure(
        data=traces,
        layout=theme.base_layout(
            title={
                "text": f"{_text(scene.title)}<br><span style='font-size:11px;"
                f"color:{theme.INK_MUTED}'>"
                "● at departure  ◆ at arrival; dotted: one full orbit</span>",
                "x": 0.01,
                "font": {"size": theme.TITLE_SIZE},
            },
            margin={"l": 0, "r": 0, "t": 56, "b": 4},
            legend={
                "orientation": "h",
                "x": 0.0,
                "y": 0.0,
                "yanchor": "bottom",
                "font": {"size": 11},
                "bgcolor": "rgba(255,255,255,0)",
            },
            scene={
                "domain": {"x": [0.0, 1.0], "y": [0.08, 1.0]},
                "xaxis": {**axis, "title": {"text": f"x ({unit})"}},
                "yaxis": {**axis, "title": {"text": f"y ({unit})"}},
                "zaxis": {**axis, "range": [-z_half, z_half], "title": {"text": f"z ({unit})"}},
                # Equal scales on all axes: the box's proportions follow its ranges.
                "aspectmode": "manual",
                "aspectratio": {"x": 1.0, "y": 1.0, "z": z_half / extent},
                "camera": {
                    "eye": {"x": 0.3, "y": -1.2, "z": 0.8},
                    "up": {"x": 0, "y": 0, "z": 1},
                },
            },
            uirevision=scene.title.split(",")[0],
        ),
    )


# ---------------------------------------------------------------------------------------------
# Family chart


def _tau_span(data: FamilyData) -> float:
    taus = [c.tau for c in data.curves if c.tau.size]
    return float(np.nanmax(np.concatenate(taus))) if taus else 1.0


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
                hovertemplate=f"{curve.name}<br>τ %{{x:.3f}}, ε %{{y:.3f}}<extra></extra>",
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
                "text": p.label.replace(", ", ",<br>"),  # two short lines fit a narrow chart
                "showarrow": True,
                "arrowhead": 0,
                "ax": -40 if p.tau > 0.55 * _tau_span(data) else 40,
                "ay": -36,
                "xanchor": "right" if p.tau > 0.55 * _tau_span(data) else "left",
                "font": {"size": 10, "color": theme.INK},
                "bgcolor": "rgba(255,255,255,0.85)",
                "bordercolor": theme.RULE,
            }
        )
    eps_values = np.concatenate([c.epsilon for c in data.curves if c.epsilon.size] or [[0.0]])
    eps_hi = float(np.nanmax(eps_values)) if eps_values.size else 1.0
    # The layout goes to the constructor: update_layout() costs ~20x more per figure.
    return go.Figure(
        data=traces,
        layout=theme.base_layout(
            title={
                "text": f"{_text(data.title)}<br><span style='font-size:11px;"
                f"color:{theme.INK_MUTED}'>"
                "solid: before the minimum-energy time · dashed: after · dash-dot: hyperbolic"
                "</span>",
                "x": 0.01,
                "font": {"size": theme.TITLE_SIZE},
            },
            margin={"l": 64, "r": 12, "t": 60, "b": 96},
            xaxis=theme.axis_style(
                title={"text": "normalized time τ = t·√(μ / a<sub>m</sub>³)"}, range=[0.0, tau_hi]
            ),
            yaxis=theme.axis_style(
                title={"text": "normalized energy ε = −a<sub>m</sub> / a"},
                range=[-1.08, max(eps_hi, 0.2) * 1.04],
            ),
            legend={
                "orientation": "h",
                "x": 0.0,
                "y": -0.2,
                "yanchor": "top",
                "font": {"size": 10},
                "bgcolor": "rgba(255,255,255,0)",
            },
            annotations=annotations,
            hovermode="closest",
        ),
    )


__all__ = [
    "MAP_TRACE",
    "arc_view_figure",
    "colour_range",
    "family_chart_figure",
    "label_format",
    "map_metric_patch",
    "marker_layout",
    "nice_step",
    "set_markers",
    "tof_lines",
    "typed_array",
    "window_map_figure",
]
