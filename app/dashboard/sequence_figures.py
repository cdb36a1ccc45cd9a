"""Pure figure builders of the sequence page: plain data in (``sequence_display``), ``go.Figure``
out. No Dash, no engine calls, no I/O; colours and fonts from ``theme.py``.

* :func:`sequence_arc_view_figure`: every leg of a candidate in its own colour, the body at each
  encounter (numbered in order), one orbit of each body met, the central body.
* :func:`encounter_chart_figure`: the encounter chart, three panels sharing the encounters in
  order: v∞ in and out as a pair of marks joined by a line (the gap is what the flyby's burn or
  the stop's burns make up), the periapsis altitude as a stem standing on its minimum (green
  above, red below), and each encounter's Δv as a bar; hovering any mark gives every number of
  the encounter with its unit.
* :func:`leg_map_figure`: the leg map, a window map over one leg's start x end dates coloured
  by a quantity of the whole sequence, with cells outside limits washed out, lines of constant
  leg TOF, the candidate shown (a ring) and, after a re-timing, the candidate as ranked (a
  star).
"""

from __future__ import annotations

import math
from html import escape

import numpy as np
import plotly.graph_objects as go

from . import theme
from .figures import colour_range, nice_step, tof_lines
from .sequence_display import EncounterChartData, LegMapData, SequenceScene

CONTOUR_LEVELS_TARGET = 7
CONTOUR_MAX_POINTS = 160
ENCOUNTER_SYMBOLS = {
    "departure": "circle",
    "flyby": "diamond",
    "stop": "square",
    "arrival": "cross",
}


def _text(value: str) -> str:
    """Text as Plotly shows it: Plotly reads a subset of HTML in titles, legends and hover
    labels, so names a case or an upload chose are escaped and show as typed."""
    return escape(str(value), quote=False)


# ---------------------------------------------------------------------------------------------
# Arc view


def sequence_arc_view_figure(scene: SequenceScene) -> go.Figure:
    """3D view of a whole candidate on equal axis scales (see the module docstring)."""
    extent = 1.08 * scene.extent
    unit = scene.unit
    hover = f"%{{x:.3f}}, %{{y:.3f}}, %{{z:.3f}} {unit}<extra>%{{fullData.name}}</extra>"
    traces: list = [
        go.Mesh3d(
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
            showlegend=False,
        )
    ]
    if scene.central_radius > 0:
        u = np.linspace(0.0, 2.0 * np.pi, 36)
        v = np.linspace(0.0, np.pi, 18)
        r = scene.central_radius
        traces.append(
            go.Surface(
                x=r * np.outer(np.cos(u), np.sin(v)),
                y=r * np.outer(np.sin(u), np.sin(v)),
                z=r * np.outer(np.ones_like(u), np.cos(v)),
                colorscale=[[0.0, theme.PLANET_SURFACE_COLOR], [1.0, theme.PLANET_SURFACE_COLOR]],
                showscale=False,
                opacity=0.55,
                hoverinfo="skip",
                name=_text(scene.central_name),
            )
        )
    else:
        traces.append(
            go.Scatter3d(
                x=[0.0],
                y=[0.0],
                z=[0.0],
                mode="markers",
                marker={"size": 8, "color": theme.CENTRAL_BODY_COLOR},
                name=_text(scene.central_name),
                hovertemplate=f"{_text(scene.central_name)}<extra></extra>",
            )
        )
    for orbit in scene.orbits:
        traces.append(
            go.Scatter3d(
                x=orbit.xyz[:, 0],
                y=orbit.xyz[:, 1],
                z=orbit.xyz[:, 2],
                mode="lines",
                line={"color": theme.ORBIT_COLOR, "width": 1.5, "dash": "dot"},
                name=f"{_text(orbit.body)} orbit",
                hoverinfo="skip",
                showlegend=False,
            )
        )
    for leg in scene.legs:
        traces.append(
            go.Scatter3d(
                x=leg.xyz[:, 0],
                y=leg.xyz[:, 1],
                z=leg.xyz[:, 2],
                mode="lines",
                line={"color": theme.leg_color(leg.index), "width": 5.0},
                name=_text(leg.label),
                hovertemplate=hover,
            )
        )
    if scene.encounters:
        xyz = np.array([m.xyz for m in scene.encounters])
        traces.append(
            go.Scatter3d(
                x=xyz[:, 0],
                y=xyz[:, 1],
                z=xyz[:, 2],
                mode="markers+text",
                text=[str(m.index) for m in scene.encounters],
                textposition="top center",
                textfont={"size": 12, "color": theme.INK},
                hovertext=[_text(m.label) for m in scene.encounters],
                hovertemplate="%{hovertext}<extra></extra>",
                marker={
                    "size": 6,
                    "color": theme.INK,
                    "symbol": [ENCOUNTER_SYMBOLS.get(m.kind, "circle") for m in scene.encounters],
                    "line": {"color": theme.PAPER, "width": 1},
                },
                name="bodies at the encounters",
            )
        )
    pieces = [leg.xyz for leg in scene.legs] + [o.xyz for o in scene.orbits]
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
    return go.Figure(
        data=traces,
        layout=theme.base_layout(
            title={
                "text": f"{_text(scene.title)}<br><span style='font-size:11px;"
                f"color:{theme.INK_MUTED}'>numbers: encounters in order · dotted: one orbit of "
                "each body met</span>",
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
                "domain": {"x": [0.0, 1.0], "y": [0.12, 1.0]},
                "xaxis": {**axis, "title": {"text": f"x ({unit})"}},
                "yaxis": {**axis, "title": {"text": f"y ({unit})"}},
                "zaxis": {**axis, "range": [-z_half, z_half], "title": {"text": f"z ({unit})"}},
                "aspectmode": "manual",
                "aspectratio": {"x": 1.0, "y": 1.0, "z": z_half / extent},
                "camera": {"eye": {"x": 0.2, "y": -1.1, "z": 0.9}, "up": {"x": 0, "y": 0, "z": 1}},
            },
            uirevision="sequence-arc-view",
        ),
    )


# ---------------------------------------------------------------------------------------------
# Encounter chart


ROW_DOMAINS = ((0.6732, 1.0), (0.3108, 0.6032), (0.0, 0.2408))
"""The encounter chart's three rows (v∞, altitude, Δv), top to bottom: heights 38, 34 and 28 %
of the plot less two gaps of 7 %."""


def encounter_chart_figure(data: EncounterChartData) -> go.Figure:
    """The encounter chart (see the module docstring)."""
    rows = data.rows
    x = list(range(len(rows)))
    labels = [row.label for row in rows]
    hover = [row.hover for row in rows]
    # Built as plain dicts and validated once (make_subplots and per-axis updates cost
    # ~90 ms of Plotly's validation, most of a candidate click's server time).
    traces: list[dict] = []

    def add(trace: dict, row: int) -> None:
        suffix = "" if row == 1 else str(row)
        traces.append({**trace, "xaxis": f"x{suffix}", "yaxis": f"y{suffix}"})

    vin = np.array([row.vinf_in_km_s for row in rows], dtype=float)
    vout = np.array([row.vinf_out_km_s for row in rows], dtype=float)
    # The pair of v∞ marks of each encounter, joined by a line: its length is the mismatch.
    join_x: list[float | None] = []
    join_y: list[float | None] = []
    for k in x:
        if math.isfinite(vin[k]) and math.isfinite(vout[k]):
            join_x += [k - 0.12, k + 0.12, None]
            join_y += [vin[k], vout[k], None]
    add(
        dict(
            type="scatter",
            x=join_x,
            y=join_y,
            mode="lines",
            line={"color": theme.INK_MUTED, "width": 1.5},
            hoverinfo="skip",
            showlegend=False,
        ),
        1,
    )
    for values, offset, name, symbol, color in (
        (vin, -0.12, "v∞ in", "triangle-right", theme.VINF_IN_COLOR),
        (vout, 0.12, "v∞ out", "triangle-up", theme.VINF_OUT_COLOR),
    ):
        keep = np.isfinite(values)
        add(
            dict(
                type="scatter",
                x=[k + offset for k in x if keep[k]],
                y=values[keep],
                mode="markers",
                marker={"symbol": symbol, "size": 11, "color": color},
                name=name,
                hovertext=[hover[k] for k in x if keep[k]],
                hovertemplate="%{hovertext}<extra></extra>",
            ),
            1,
        )
    alt = np.array([row.altitude_km for row in rows], dtype=float)
    alt_min = np.array([row.altitude_min_km for row in rows], dtype=float)
    floor = np.where(np.isfinite(alt_min), alt_min, 0.0)
    stem_x: list[float | None] = []
    stem_y: list[float | None] = []
    ok_x, ok_y, ok_h, low_x, low_y, low_h = [], [], [], [], [], []
    for k in x:
        if not math.isfinite(alt[k]):
            continue
        stem_x += [k, k, None]
        stem_y += [floor[k], alt[k], None]
        below = math.isfinite(alt_min[k]) and alt[k] < alt_min[k]
        (low_x if below else ok_x).append(k)
        (low_y if below else ok_y).append(alt[k])
        (low_h if below else ok_h).append(hover[k])
    add(
        dict(
            type="scatter",
            x=stem_x,
            y=stem_y,
            mode="lines",
            line={"color": theme.INK_MUTED, "width": 2},
            hoverinfo="skip",
            showlegend=False,
        ),
        2,
    )
    min_x = [k for k in x if math.isfinite(alt_min[k])]
    add(
        dict(
            type="scatter",
            x=min_x,
            y=alt_min[min_x] if min_x else [],
            mode="markers",
            marker={"symbol": "line-ew", "size": 26, "line": {"width": 3, "color": theme.INK}},
            name="minimum altitude",
            hovertext=[hover[k] for k in min_x],
            hovertemplate="%{hovertext}<extra></extra>",
        ),
        2,
    )
    for xs, ys, hs, name, color in (
        (ok_x, ok_y, ok_h, "periapsis altitude", theme.ALTITUDE_OK_COLOR),
        (low_x, low_y, low_h, "below its minimum", theme.ERROR_INK),
    ):
        add(
            dict(
                type="scatter",
                x=xs,
                y=ys,
                mode="markers",
                marker={"symbol": "circle", "size": 10, "color": color},
                name=name,
                hovertext=hs,
                hovertemplate="%{hovertext}<extra></extra>",
                showlegend=bool(xs) or name == "periapsis altitude",
            ),
            2,
        )
    dv = np.array([row.dv_km_s for row in rows], dtype=float)
    add(
        dict(
            type="bar",
            x=x,
            y=np.where(np.isfinite(dv), dv, 0.0),
            marker={"color": theme.DV_BAR_COLOR},
            width=0.5,
            name="Δv",
            hovertext=hover,
            hovertemplate="%{hovertext}<extra></extra>",
            text=[f"{v:.3f}" if math.isfinite(v) else "" for v in dv],
            textposition="outside",
            cliponaxis=False,
            textfont={"size": 10, "color": theme.INK_MUTED},
        ),
        3,
    )
    positive = alt[np.isfinite(alt) & (alt > 0)]
    log_altitude = (
        positive.size > 0 and float(positive.max()) / max(float(positive.min()), 1.0) > 50
    )
    altitude_axis: dict = {"title": {"text": "periapsis<br>altitude (km)"}}
    if log_altitude:
        lows = np.concatenate([positive, alt_min[np.isfinite(alt_min) & (alt_min > 0)]])
        altitude_axis.update(
            type="log",
            range=[math.log10(max(lows.min(), 1.0)) - 0.3, math.log10(lows.max()) + 0.3],
        )
    layout = theme.base_layout(
        title={"text": _text(data.title), "x": 0.01, "font": {"size": theme.TITLE_SIZE}},
        margin={"l": 74, "r": 12, "t": 40, "b": 70},
        legend={
            "orientation": "h",
            "x": 0.0,
            "y": 1.0,
            "yanchor": "bottom",
            "xanchor": "left",
            "font": {"size": 10},
            "bgcolor": "rgba(255,255,255,0)",
        },
        bargap=0.4,
        hovermode="closest",
        showlegend=True,
    )
    layout["title"].update(y=0.985, yanchor="top")
    layout["legend"]["y"] = 1.02
    common = theme.axis_style()
    for r, domain in enumerate(ROW_DOMAINS, start=1):
        suffix = "" if r == 1 else str(r)
        layout[f"xaxis{suffix}"] = {
            **common,
            "anchor": f"y{suffix}",
            "domain": [0.0, 1.0],
            "tickmode": "array",
            "tickvals": x,
            "ticktext": labels if r == 3 else [""] * len(x),
            "range": [-0.6, len(x) - 0.4],
            "tickfont": {"size": 10, "color": theme.INK_MUTED},
            **({} if r == 3 else {"matches": "x3"}),
        }
        layout[f"yaxis{suffix}"] = {**common, "anchor": f"x{suffix}", "domain": list(domain)}
    layout["yaxis"].update(title={"text": "v∞ (km/s)"}, rangemode="tozero")
    layout["yaxis2"].update(altitude_axis)
    layout["yaxis3"].update(title={"text": "Δv (km/s)"}, rangemode="tozero")
    return go.Figure(data=traces, layout=layout)


# ---------------------------------------------------------------------------------------------
# Leg map


def _ring(point, color: str, name: str) -> dict:
    r = 10
    return {
        "type": "circle",
        "xref": "x",
        "yref": "y",
        "xsizemode": "pixel",
        "ysizemode": "pixel",
        "xanchor": point.departure_ms,
        "yanchor": point.arrival_ms,
        "x0": -r,
        "x1": r,
        "y0": -r,
        "y1": r,
        "line": {"color": color, "width": 3},
        "name": name,
    }


def _decimated(values: np.ndarray, n: int) -> tuple[np.ndarray, np.ndarray]:
    ny, nx = values.shape
    i = np.unique(np.round(np.linspace(0, nx - 1, min(nx, n))).astype(int))
    j = np.unique(np.round(np.linspace(0, ny - 1, min(ny, n))).astype(int))
    return i, j


def leg_map_figure(data: LegMapData) -> go.Figure:
    """The leg map (see the module docstring)."""
    label = f"{data.metric_label} ({data.unit})" if data.unit else data.metric_label
    values = data.values
    if data.higher_is_better:
        finite = values[np.isfinite(values)]
        lo = float(np.percentile(finite, 50.0)) if finite.size else 0.0
        hi = float(finite.max()) if finite.size else 1.0
        if not hi > lo:
            hi = lo + 1.0
    else:
        lo, hi = colour_range(values, data.limit, data.metric)
    hover_lines = [
        "<b>start</b> %{x|%Y-%m-%d %H:%M} UTC",
        "<b>end</b> %{y|%Y-%m-%d %H:%M} UTC",
    ]
    for k, (_, name, unit, fmt) in enumerate(data.hover_fields):
        hover_lines.append(f"{name} %{{customdata[{k}]:{fmt}}} {unit}")
    hover_lines.append("<extra>click to re-time</extra>")
    heat = go.Heatmap(
        x=data.start_ms,
        y=data.end_ms,
        z=values,
        zmin=lo,
        zmax=hi,
        colorscale=theme.WINDOW_SCALE,
        reversescale=data.higher_is_better,
        colorbar={
            "title": {"text": label, "side": "right"},
            "thickness": 14,
            "len": 0.9,
            "outlinewidth": 0,
            "tickfont": {"size": 11},
        },
        customdata=data.hover,
        hovertemplate="<br>".join(hover_lines),
        hoverongaps=False,
        name=data.metric_label,
    )
    outside = go.Heatmap(
        x=data.start_ms,
        y=data.end_ms,
        z=np.where(data.outside, np.float32(1.0), np.float32(np.nan)),
        zmin=0.0,
        zmax=1.0,
        colorscale=[[0.0, theme.OUTSIDE_LIMITS_COLOR], [1.0, theme.OUTSIDE_LIMITS_COLOR]],
        showscale=False,
        hoverinfo="skip",
        name="outside limits",
    )
    i, j = _decimated(values, CONTOUR_MAX_POINTS)
    step = nice_step(hi - lo, CONTOUR_LEVELS_TARGET)
    contours = go.Contour(
        x=data.start_ms[i],
        y=data.end_ms[j],
        z=values[np.ix_(j, i)],
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
            "labelformat": ".3~g",
        },
        colorscale=theme.CONTOUR_LINE_SCALE,
        reversescale=data.higher_is_better,
        line={"width": 1.0, "smoothing": 0.8},
        showscale=False,
        hoverinfo="skip",
        showlegend=False,
        name="contours",
    )
    lx, ly, tx, ty, ttext = tof_lines(
        data.start_ms, data.end_ms, data.tof_days_min, data.tof_days_max
    )
    tof = go.Scatter(
        x=lx,
        y=ly,
        mode="lines",
        line={"color": theme.TOF_LINE_COLOR, "width": 1.0, "dash": "dot"},
        hoverinfo="skip",
        name="constant leg TOF",
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
    )
    no_arc = go.Heatmap(
        x=data.start_ms,
        y=data.end_ms,
        z=np.where(data.no_arc, np.float32(1.0), np.float32(np.nan)),
        zmin=0.0,
        zmax=1.0,
        colorscale=[[0.0, "rgba(0,0,0,0)"], [1.0, "rgba(0,0,0,0)"]],
        showscale=False,
        hovertemplate="%{x|%Y-%m-%d %H:%M} → %{y|%Y-%m-%d %H:%M} UTC<br>no arc on some leg: "
        "click to see why<extra></extra>",
        hoverongaps=False,
        name="no arc",
    )
    keys = [
        go.Scatter(
            x=[None],
            y=[None],
            mode="markers",
            marker={
                "symbol": "circle-open",
                "size": 13,
                "color": theme.ACCENT,
                "line": {"width": 3},
            },
            name="shown",
            hoverinfo="skip",
        ),
        go.Scatter(
            x=[None],
            y=[None],
            mode="markers",
            marker={"symbol": "square", "size": 12, "color": theme.OUTSIDE_LIMITS_COLOR},
            name="outside limits",
            hoverinfo="skip",
        ),
    ]
    shapes = []
    annotations = []
    if data.shown is not None:
        shapes.append(_ring(data.shown, theme.ACCENT, "shown"))
    if data.ranked is not None:
        annotations.append(
            {
                "x": data.ranked.departure_ms,
                "y": data.ranked.arrival_ms,
                "xref": "x",
                "yref": "y",
                "text": "★",
                "showarrow": False,
                "font": {"size": 18, "color": theme.BEST_MARKER["color"]},
                "hovertext": "the candidate as the search ranked it",
            }
        )
        keys.append(
            go.Scatter(
                x=[None],
                y=[None],
                mode="markers",
                marker={"symbol": "star", "size": 13, "color": theme.BEST_MARKER["color"]},
                name="as ranked",
                hoverinfo="skip",
            )
        )
    nx, ny = len(data.start_ms), len(data.end_ms)
    return go.Figure(
        data=[heat, outside, contours, tof, tof_text, no_arc, *keys],
        layout=theme.base_layout(
            title={"text": _text(data.title), "x": 0.01, "font": {"size": theme.TITLE_SIZE}},
            margin={"l": 78, "r": 10, "t": 40, "b": 112},
            plot_bgcolor=theme.NO_ARC_COLOR,
            legend={
                "orientation": "h",
                "x": 0.0,
                "y": -0.17,
                "yanchor": "top",
                "xanchor": "left",
                "font": {"size": 11},
                "bgcolor": "rgba(255,255,255,0)",
            },
            xaxis=theme.axis_style(
                type="date",
                title={"text": f"{_text(data.x_title)} — {nx} × {ny} cells", "standoff": 6},
                range=[data.start_ms[0], data.start_ms[-1]],
                hoverformat="%Y-%m-%d %H:%M",
            ),
            yaxis=theme.axis_style(
                type="date",
                title={"text": _text(data.y_title)},
                range=[data.end_ms[0], data.end_ms[-1]],
                hoverformat="%Y-%m-%d %H:%M",
            ),
            shapes=shapes,
            annotations=annotations,
            clickmode="event",
            dragmode="zoom",
            uirevision=f"leg-map-{data.title}",
        ),
    )


__all__ = ["encounter_chart_figure", "leg_map_figure", "sequence_arc_view_figure"]
