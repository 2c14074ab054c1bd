"""Plotly figures built from library results. Pure functions: no Streamlit, no physics.

The system drawing places each node at the height of its level from
:func:`lumped.node_levels` (supports at 0), spreads the nodes of one level sideways,
and draws one edge per element. Parallel elements between the same two nodes are
bowed apart so that each one stays visible.
"""

from __future__ import annotations

import html
import math
from collections import defaultdict

import numpy as np
import plotly.graph_objects as go
from plotly.subplots import make_subplots

import lumped
from dashboard.tables import force_text, length_text, mass_text, unit_text
from lumped.units import display

__all__ = [
    "EDGE_STYLE",
    "LABEL_LIMIT",
    "PLOT_POINTS",
    "mode_shape",
    "node_positions",
    "response_plot",
    "system_graph",
    "time_series",
]

#: Line style per element kind: colour, dash pattern and width.
EDGE_STYLE = {
    "spring": {"color": "#1f5a8c", "dash": "solid", "width": 2.6},
    "damper": {"color": "#b4582a", "dash": "dash", "width": 2.6},
    "inerter": {"color": "#5e4b8b", "dash": "dot", "width": 3.2},
}
BODY_FILL, BODY_EDGE = "#d9e6f2", "#1c3550"
SUPPORT_FILL = "#3d4650"

#: Systems with more nodes or elements than this are drawn without text labels
#: (values stay available on hover), so that large chains stay readable.
LABEL_LIMIT = 40

_PARALLEL_SPREAD = 0.24  # sideways distance between parallel elements, in node spacings
_BOW_START, _BOW_END = 0.18, 0.82  # where along the edge a bowed element runs offset


def node_positions(system: lumped.System) -> dict[str, tuple[float, float]]:
    """(x, y) of every body and support: y is the node's level; the nodes of one level
    are spaced one unit apart, centred on x = 0, ordered so that each node sits near the
    mean x of the lower nodes it is joined to."""
    levels = lumped.node_levels(system)
    order = {node: i for i, node in enumerate([*system.supports, *system.bodies])}
    by_level: dict[int, list[str]] = defaultdict(list)
    for node in sorted(levels, key=order.__getitem__):
        by_level[levels[node]].append(node)
    graph = system.graph
    positions: dict[str, tuple[float, float]] = {}
    for level in sorted(by_level):
        nodes = by_level[level]

        def barycentre(node, level=level):
            below = [
                positions[n][0]
                for n in graph.neighbors(node)
                if n in positions and levels[n] < level
            ]
            return sum(below) / len(below) if below else 0.0

        if level > min(by_level):
            nodes = sorted(nodes, key=lambda n: (barycentre(n), order[n]))
        width = len(nodes) - 1
        for i, node in enumerate(nodes):
            positions[node] = (i - width / 2, float(level))
    return positions


def _text(value: object) -> str:
    """User-written text made safe for plotly's HTML-like labels."""
    return html.escape(str(value), quote=False)


def _support_motion(system: lumped.System, support: lumped.Support) -> str:
    if not support.motion:
        return "fixed"
    inp = system.inputs.get(support.motion)
    kind = f" ({inp.kind})" if inp is not None else ""
    return f"moves with {support.motion}{kind}"


def system_graph(system: lumped.System, summary: lumped.SystemSummary | None = None) -> go.Figure:
    """The system drawn as a graph: bodies as squares, supports as triangles, one line
    per element (springs solid, dampers dashed, inerters dotted), labelled with the
    element's id and values; hover shows static values from ``summary`` (computed with
    :func:`lumped.summarize` when not given).

    Traces, in order: one line trace per element kind present (in the legend), one
    hover-point trace per kind at the elements' midpoints, the bodies, the supports.
    Element labels are layout annotations (none above :data:`LABEL_LIMIT`).
    """
    if summary is None:
        summary = lumped.summarize(system)
    positions = node_positions(system)
    labelled = len(positions) <= LABEL_LIMIT and len(system.elements) <= LABEL_LIMIT
    element_rows = {row["id"]: row for row in summary.elements}
    body_rows = {row["id"]: row for row in summary.bodies}

    # Group elements by the (unordered) pair of nodes they join, to spread parallels.
    pairs: dict[frozenset, list] = defaultdict(list)
    for element in system.elements.values():
        a, b = element.between
        if a in positions and b in positions and a != b:
            pairs[frozenset((a, b))].append(element)

    lines: dict[str, tuple[list, list]] = {}
    hover: dict[str, tuple[list, list, list]] = {}
    annotations = []
    for elements in pairs.values():
        count = len(elements)
        for j, element in enumerate(elements):
            a, b = element.between
            (xa, ya), (xb, yb) = positions[a], positions[b]
            if yb < ya or (yb == ya and xb < xa):  # draw from the lower node up
                (xa, ya), (xb, yb) = (xb, yb), (xa, ya)
            dx, dy = xb - xa, yb - ya
            norm = math.hypot(dx, dy) or 1.0
            px, py = dy / norm, -dx / norm  # unit normal: to the right of an upward edge
            offset = (j - (count - 1) / 2) * _PARALLEL_SPREAD
            if offset and not labelled:  # dense drawings: straight parallel lines
                path_x = [xa + offset * px, xb + offset * px]
                path_y = [ya + offset * py, yb + offset * py]
            elif offset:
                bend = (_BOW_START, _BOW_END)
                path_x = [xa, *(xa + t * dx + offset * px for t in bend), xb]
                path_y = [ya, *(ya + t * dy + offset * py for t in bend), yb]
            else:
                path_x, path_y = [xa, xb], [ya, yb]
            xs, ys = lines.setdefault(element.kind, ([], []))
            xs.extend([*path_x, None])
            ys.extend([*path_y, None])

            row = element_rows.get(element.id, {})
            mid_x, mid_y = xa + dx / 2 + offset * px, ya + dy / 2 + offset * py
            values = row.get("values", "")
            hx, hy, ht = hover.setdefault(element.kind, ([], [], []))
            hx.append(mid_x)
            hy.append(mid_y)
            ht.append(
                f"<b>{_text(element.id)}</b> · {element.kind}<br>"
                f"{_text(' → '.join(element.between))}<br>{_text(values)}<br>"
                f"static force {force_text(row.get('static_force'))} (tension +)<br>"
                f"static deflection {length_text(row.get('static_deflection'))} (extension +)"
            )
            if labelled:
                left = offset < 0
                annotations.append(
                    {
                        "x": mid_x,
                        "y": mid_y,
                        "xref": "x",
                        "yref": "y",
                        "text": f"<b>{_text(element.id)}</b><br>"
                        + "<br>".join(_text(part) for part in values.split(", ")),
                        "showarrow": False,
                        "xanchor": "right" if left else "left",
                        "align": "right" if left else "left",
                        "xshift": -9 if left else 9,
                        "font": {"size": 11, "color": EDGE_STYLE[element.kind]["color"]},
                    }
                )

    small = not labelled
    fig = go.Figure()
    for kind in EDGE_STYLE:
        if kind in lines:
            xs, ys = lines[kind]
            style = EDGE_STYLE[kind]
            fig.add_trace(
                go.Scatter(
                    x=xs, y=ys, mode="lines", name=kind, hoverinfo="skip",
                    line={"color": style["color"], "dash": style["dash"],
                          "width": 1.2 if small else style["width"]},
                )
            )  # fmt: skip
    for kind in EDGE_STYLE:
        if kind in hover:
            hx, hy, ht = hover[kind]
            fig.add_trace(
                go.Scatter(
                    x=hx, y=hy, mode="markers", name=f"{kind} values", showlegend=False,
                    hovertext=ht, hoverinfo="text",
                    marker={"size": 5 if small else 7, "color": EDGE_STYLE[kind]["color"],
                            "opacity": 0 if small else 1},
                )
            )  # fmt: skip

    bodies = [b for b in system.bodies.values() if b.id in positions]
    fig.add_trace(
        go.Scatter(
            x=[positions[b.id][0] for b in bodies],
            y=[positions[b.id][1] for b in bodies],
            mode="markers" if not labelled else "markers+text",
            name="body",
            text=[f"<b>{_text(b.id)}</b>  {mass_text(b.mass)}  " for b in bodies],
            textposition="middle left",
            textfont={"size": 12, "color": BODY_EDGE},
            hovertext=[
                f"<b>{_text(b.id)}</b> · body<br>{_text(b.label) + '<br>' if b.label else ''}"
                f"mass {mass_text(b.mass)}<br>"
                "static deflection "
                f"{length_text(body_rows.get(b.id, {}).get('static_deflection'))} (up +)"
                for b in bodies
            ],
            hoverinfo="text",
            marker={"symbol": "square", "size": 5 if small else 26, "color": BODY_FILL,
                    "line": {"color": BODY_EDGE, "width": 1 if small else 2}},
        )
    )  # fmt: skip
    supports = [s for s in system.supports.values() if s.id in positions]
    fig.add_trace(
        go.Scatter(
            x=[positions[s.id][0] for s in supports],
            y=[positions[s.id][1] for s in supports],
            mode="markers" if not labelled else "markers+text",
            name="support",
            text=[f"<b>{_text(s.id)}</b> · {_text(_support_motion(system, s))}" for s in supports],
            textposition="bottom center",
            textfont={"size": 12, "color": SUPPORT_FILL},
            hovertext=[
                f"<b>{_text(s.id)}</b> · support<br>{_text(s.label) + '<br>' if s.label else ''}"
                f"{_text(_support_motion(system, s))}"
                + (f", {display(s.delay, 'time')} late" if s.motion and s.delay else "")
                for s in supports
            ],
            hoverinfo="text",
            marker={"symbol": "triangle-up", "size": 14 if small else 24, "color": SUPPORT_FILL,
                    "line": {"color": SUPPORT_FILL, "width": 1}},
        )
    )  # fmt: skip

    xs = [p[0] for p in positions.values()] or [0.0]
    top = max((p[1] for p in positions.values()), default=0.0)
    levels = int(top) + 1
    if not labelled:
        annotations.append(
            {
                "x": 0, "y": 0, "xref": "paper", "yref": "paper", "xanchor": "left",
                "yanchor": "top", "yshift": -4, "showarrow": False,
                "font": {"size": 11, "color": "#5a6570"},
                "text": f"{len(positions)} nodes, {len(system.elements)} elements: "
                "labels hidden; hover for values",
            }
        )  # fmt: skip
    fig.update_layout(
        annotations=annotations,
        height=max(340, min(660, 150 + 125 * levels)),
        margin={"l": 10, "r": 10, "t": 46, "b": 30 if small else 10},
        plot_bgcolor="white",
        paper_bgcolor="white",
        hovermode="closest",
        dragmode="pan",
        legend={"orientation": "h", "x": 1, "xanchor": "right", "y": 1.0, "yanchor": "bottom",
                "font": {"size": 12}},
        xaxis={"visible": False, "range": [min(xs) - 1.5, max(xs) + 1.5], "fixedrange": False},
        yaxis={"visible": False, "range": [-0.45 if labelled else -0.02 * top - 0.5,
                                           top + (0.35 if labelled else 0.02 * top + 0.5)]},
    )  # fmt: skip
    return fig


# --------------------------------------------------------------------------- analysis plots

LINE_COLOURS = ["#1f5a8c", "#b4582a", "#3d7d4a", "#5e4b8b", "#8c6d1f", "#2a8a8f", "#8c2f4f",
                "#4d5660"]  # fmt: skip
PEAK_COLOUR = "#b4582a"
#: Peaks labelled with their frequency (the largest); the others are marked only.
PEAK_LABELS = 8
#: Decades of |H| shown below its largest value.
MAGNITUDE_DECADES = 10
#: Time plots keep at most about this many points per channel (every k-th sample).
PLOT_POINTS = 20_000

_AXIS = {"showline": True, "linecolor": "#9aa4ad", "gridcolor": "#e4e8ec", "zeroline": False,
         "exponentformat": "power"}  # fmt: skip


def _base_layout(fig: go.Figure, height: int, title: str) -> go.Figure:
    fig.update_layout(
        height=height,
        title={"text": title, "x": 0, "xanchor": "left", "font": {"size": 14}},
        margin={"l": 10, "r": 10, "t": 60, "b": 10},
        plot_bgcolor="white",
        paper_bgcolor="white",
        hovermode="x unified",
        legend={"orientation": "h", "x": 0, "y": 1.0, "yanchor": "bottom", "font": {"size": 12}},
    )
    fig.update_xaxes(**_AXIS)
    fig.update_yaxes(**_AXIS)
    return fig


def mode_shape(mode, number: int) -> go.Figure:
    """Bar chart of one mode's undamped shape (mass-normalised, by body, as
    :class:`lumped.modal.Mode` gives it), titled with its number, frequency and kind."""
    bodies = list(mode.shape)
    values = [mode.shape[b] for b in bodies]
    fig = go.Figure(
        go.Bar(
            x=[_text(b) for b in bodies], y=values, name="shape",
            marker={"color": [LINE_COLOURS[0] if v >= 0 else LINE_COLOURS[1] for v in values]},
            hovertemplate="%{x}: %{y:.4g} kg<sup>-½</sup><extra></extra>",
        )
    )  # fmt: skip
    if mode.rigid:
        what = "rigid-body mode"
    else:
        zeta = "" if mode.damping_ratio is None else f", damping ratio {mode.damping_ratio:.3g}"
        what = f"{mode.natural_frequency_hz:.4g} Hz{zeta}" + (
            ", overdamped" if mode.overdamped else ""
        )
    _base_layout(fig, 340, f"Mode {number} · {what}")
    fig.update_layout(hovermode="closest", showlegend=False)
    fig.update_yaxes(title={"text": "undamped shape, mass-normalised [kg<sup>-½</sup>]",
                            "font": {"size": 12}})  # fmt: skip
    fig.update_xaxes(title={"text": "body", "font": {"size": 12}}, type="category")
    return fig


def _peaks_to_label(peaks) -> set[int]:
    """Indices of the peaks labelled with their frequency: the largest first, at most
    :data:`PEAK_LABELS`, none within a factor 1.7 in frequency of one already labelled
    (many peaks of a long chain would bury the curve in text)."""
    chosen: list[int] = []
    for k in sorted(range(len(peaks)), key=lambda k: -peaks[k].magnitude):
        f = peaks[k].frequency_hz
        if all(not (f / 1.7 < peaks[j].frequency_hz < f * 1.7) for j in chosen):
            chosen.append(k)
        if len(chosen) == PEAK_LABELS:
            break
    return set(chosen)


def response_plot(transfer) -> go.Figure:
    """|H(f)| on log–log axes above its phase (degrees, log frequency) for a
    :class:`lumped.frequency.Transfer`; its peaks are marked on both."""
    unit = unit_text(transfer.unit)
    f = np.asarray(transfer.frequency, dtype=float)
    keep = f > 0  # a log axis cannot show 0 Hz
    f, magnitude, phase = f[keep], transfer.magnitude[keep], transfer.phase_deg[keep]
    fig = make_subplots(rows=2, cols=1, shared_xaxes=True, vertical_spacing=0.06,
                        row_heights=[0.64, 0.36])  # fmt: skip
    fig.add_trace(
        go.Scatter(x=f, y=magnitude, mode="lines", name="|H|",
                   line={"color": LINE_COLOURS[0], "width": 2},
                   hovertemplate=f"%{{x:.4g}} Hz: %{{y:.4g}} {unit}<extra>|H|</extra>"),
        row=1, col=1,
    )  # fmt: skip
    fig.add_trace(
        go.Scatter(x=f, y=phase, mode="lines", name="phase", showlegend=False,
                   line={"color": LINE_COLOURS[3], "width": 1.6},
                   hovertemplate="%{x:.4g} Hz: %{y:.1f}°<extra>phase</extra>"),
        row=2, col=1,
    )  # fmt: skip
    peaks = transfer.peaks
    if peaks:
        px = [p.frequency_hz for p in peaks]
        labelled = _peaks_to_label(peaks)
        small = len(peaks) > 4 * PEAK_LABELS
        fig.add_trace(
            go.Scatter(
                x=px, y=[p.magnitude for p in peaks], mode="markers+text", name="peaks",
                text=[f"{p.frequency_hz:.4g} Hz" if k in labelled else "" for k, p in enumerate(peaks)],
                textposition="top center", textfont={"size": 11, "color": PEAK_COLOUR},
                marker={"color": PEAK_COLOUR, "size": 5 if small else 9, "symbol": "diamond"},
                hovertemplate=f"peak %{{x:.5g}} Hz: %{{y:.4g}} {unit}<extra></extra>",
            ),
            row=1, col=1,
        )  # fmt: skip
        fig.add_trace(
            go.Scatter(x=px, y=[p.phase_deg for p in peaks], mode="markers", name="peak phase",
                       showlegend=False,
                       marker={"color": PEAK_COLOUR, "size": 4 if small else 7, "symbol": "diamond"},
                       hovertemplate="peak %{x:.5g} Hz: %{y:.1f}°<extra></extra>"),
            row=2, col=1,
        )  # fmt: skip
    _base_layout(fig, 520, _text(transfer.label) + f" [{_text(unit)}]")
    fig.update_layout(hovermode="closest")
    fig.update_xaxes(type="log")
    fig.update_xaxes(title={"text": "frequency [Hz]", "font": {"size": 12}}, row=2, col=1)
    fig.update_xaxes(dtick="D2")
    fig.update_yaxes(type="log", title={"text": f"|H| [{_text(unit)}]", "font": {"size": 12}},
                     row=1, col=1)  # fmt: skip
    shown = magnitude[magnitude > 0]
    if len(shown):
        top, bottom = math.log10(np.max(shown)), math.log10(np.min(shown))
        # At most MAGNITUDE_DECADES below the top (a response that falls to round-off
        # would squash the rest), and room above the top for the peak labels.
        bottom = max(bottom, top - MAGNITUDE_DECADES)
        span = max(top - bottom, 0.5)
        fig.update_yaxes(range=[bottom - 0.05 * span, top + 0.15 * span], row=1, col=1)
        if top - bottom > 2.5:
            fig.update_yaxes(dtick=1 if top - bottom <= 7 else 2, row=1, col=1)
    fig.update_yaxes(title={"text": "phase [°]", "font": {"size": 12}}, range=[-185, 185],
                     tickvals=[-180, -90, 0, 90, 180], row=2, col=1)  # fmt: skip
    return fig


def time_series(time, series, max_points: int = PLOT_POINTS) -> go.Figure:
    """Channels of a run against time, one stacked panel per unit (shared time axis).

    ``series`` is a list of ``(name, unit, values)``, e.g. from
    :meth:`lumped.simulate.RunResult.channels`. Long runs are thinned to every k-th
    sample so that at most about ``max_points`` points are drawn per channel.
    """
    time = np.asarray(time, dtype=float)
    stride = max(1, math.ceil(len(time) / max_points)) if max_points else 1
    units = list(dict.fromkeys(unit for _, unit, _ in series)) or ["m"]
    fig = make_subplots(rows=len(units), cols=1, shared_xaxes=True,
                        vertical_spacing=0.08 if len(units) > 1 else 0.02)  # fmt: skip
    for k, (name, unit, values) in enumerate(series):
        row = units.index(unit) + 1
        fig.add_trace(
            go.Scatter(
                x=time[::stride], y=np.asarray(values)[::stride], mode="lines", name=_text(name),
                line={"color": LINE_COLOURS[k % len(LINE_COLOURS)], "width": 1.6},
                hovertemplate=f"%{{y:.5g}} {_text(unit_text(unit))}<extra>{_text(name)}</extra>",
            ),
            row=row, col=1,
        )  # fmt: skip
        fig.update_yaxes(title={"text": f"[{_text(unit_text(unit))}]", "font": {"size": 12}},
                         row=row, col=1)  # fmt: skip
    note = f" · 1 sample in {stride} drawn" if stride > 1 else ""
    _base_layout(fig, 200 + 190 * len(units), f"Channels against time{note}")
    fig.update_xaxes(title={"text": "time [s]", "font": {"size": 12}}, row=len(units), col=1)
    return fig
