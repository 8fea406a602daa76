"""Reference-level comparison and distributions (box summaries computed in SQL)."""

from __future__ import annotations

from collections.abc import Mapping

import pandas as pd
import plotly.graph_objects as go

from ..theme import (
    NETWORK_COLOUR,
    PALETTE,
    POPULATION_COLOURS,
    quantity_name,
    unit_label,
)
from .common import (
    _as_figure,
    _axis,
    _titled,
    _hline,
    _new_layout,
    INSUFFICIENT_SYMBOL,
    _PHANTOM_SHORT,
    _POPULATION_ORDER,
    _REFERENCE_SET_MARKS,
    _alpha,
    _fmt,
    _unit_text,
    _value_ticks,
    _missing,
    _num,
    _panel_axis_title,
    _panel_rows,
    _panels,
    _require,
    _site_colour,
    _stratum_short,
    _wants_log,
)

__all__ = ["build_distribution", "build_reference_comparison"]


# --- reference-level comparison -----------------------------------------------------------
def build_reference_comparison(frame: pd.DataFrame, *, site_colours: Mapping[str, str],
                               title: str) -> go.Figure:
    """Room medians with their 95 % CI against the reference level and the network's 75th percentile.

    Expects rows of ``dash_room_medians.sql`` for one quantity and population: exam_label,
    phantom, site_label, room_label, n, median, median_ci_low, median_ci_high, unit, quantity,
    reference_value, reference_set, network_p75, is_sample_adequate. One row per room per
    exam type on a two-level axis (exam type, then room). A room whose sample is below the
    audit's minimum is drawn with an open marker and labelled "too few".
    """
    _require(frame, ["exam_label", "phantom", "site_label", "room_label", "n", "median",
                     "median_ci_low", "median_ci_high", "unit", "quantity", "reference_value",
                     "reference_set", "network_p75", "is_sample_adequate"],
             "build_reference_comparison")
    rows = frame.reset_index(drop=True)
    exam_axis = [f"{e} · {_PHANTOM_SHORT.get(str(p), str(p))}" if not _missing(p) else str(e)
                 for e, p in zip(rows["exam_label"], rows["phantom"], strict=True)]
    # short row labels (room and n); the site is the marker's colour, named in the legend
    strata = rows["stratum"] if "stratum" in rows.columns else [None] * len(rows)
    room_axis = [f"{r}{_stratum_short(b)} (n {int(n)})"
                 for r, b, n in zip(rows["room_label"], strata, rows["n"], strict=True)]
    quantity, unit = str(rows["quantity"].iloc[0]), rows["unit"].iloc[0]
    # plain lists, read by position (``Series.iloc`` per value cost most of this builder)
    col = {c: rows[c].tolist() for c in ("site_label", "is_sample_adequate", "n", "median",
                                         "median_ci_low", "median_ci_high", "reference_set",
                                         "reference_value", "network_p75")}
    # An invisible first trace fixes the category order to the rows' order (exam, then room).
    traces: list[dict] = [dict(type="scatter", x=[_num(v) for v in col["median"]],
                               y=[exam_axis, room_axis], mode="markers", marker={"opacity": 0},
                               showlegend=False, hoverinfo="skip", name="")]
    for site in sorted(rows["site_label"].unique()):
        # adequate samples first: the legend shows the first point's (filled) marker
        idx = sorted((i for i in range(len(rows)) if col["site_label"][i] == site),
                     key=lambda i: not bool(col["is_sample_adequate"][i]))
        adequate = [bool(col["is_sample_adequate"][i]) for i in idx]
        med = [_num(col["median"][i]) for i in idx]
        lo = [_num(col["median_ci_low"][i]) for i in idx]
        hi = [_num(col["median_ci_high"][i]) for i in idx]
        colour = _site_colour(site_colours, site)
        traces.append(dict(type="scatter",
            name=site, legendgroup=site, mode="markers",
            x=med, y=[[exam_axis[i] for i in idx], [room_axis[i] for i in idx]],
            marker={"color": colour, "size": 10,
                    "symbol": ["circle" if a else INSUFFICIENT_SYMBOL for a in adequate],
                    "line": {"color": colour, "width": 2}},
            error_x={"type": "data", "symmetric": False, "color": colour, "thickness": 1.5,
                     "width": 4,
                     "array": [None if h is None or m is None else _num(h - m) for h, m in zip(hi, med, strict=True)],
                     "arrayminus": [None if w is None or m is None else _num(m - w) for w, m in zip(lo, med, strict=True)]},
            customdata=[[int(col["n"][i]), _fmt(lo[k]), _fmt(hi[k]),
                         "adequate" if adequate[k] else "below the audit minimum"]
                        for k, i in enumerate(idx)],
            hovertemplate=("%{y}<br>median %{x:.4g} " + unit_label(unit)
                           + "<br>95 % CI %{customdata[1]} to %{customdata[2]}"
                           + "<br>n %{customdata[0]} (%{customdata[3]})<extra>" + site + "</extra>"),
        ))
    by_use = rows["reference_set"].dropna().value_counts()
    by_use = by_use[by_use > 0]   # a categorical column counts every category, seen or not
    for k, ref_set in enumerate(sorted(by_use.index, key=lambda v: (-int(by_use[v]), str(v)))):
        sel = [i for i, v in enumerate(col["reference_set"]) if v == ref_set]
        symbol, colour = _REFERENCE_SET_MARKS[k % len(_REFERENCE_SET_MARKS)]
        traces.append(dict(type="scatter",
            name=f"Reference level ({ref_set})", mode="markers",
            x=[_num(col["reference_value"][i]) for i in sel],
            y=[[exam_axis[i] for i in sel], [room_axis[i] for i in sel]],
            marker={"symbol": symbol, "size": 22, "color": colour,
                    "line": {"color": colour, "width": 3}},
            hovertemplate="reference level %{x:.4g} " + unit_label(unit) + f"<extra>{ref_set}</extra>",
        ))
    sel = rows.index[rows["network_p75"].notna()].tolist()
    if sel:
        traces.append(dict(type="scatter",
            name="Network 75th percentile of room medians", mode="markers",
            x=[_num(col["network_p75"][i]) for i in sel],
            y=[[exam_axis[i] for i in sel], [room_axis[i] for i in sel]],
            marker={"symbol": "diamond-tall-open", "size": 12,
                    "line": {"color": NETWORK_COLOUR, "width": 2}, "color": NETWORK_COLOUR},
            hovertemplate="network 75th percentile %{x:.4g} " + unit_label(unit) + "<extra></extra>",
        ))
    layout, _ = _new_layout()
    values = [*rows["median_ci_low"], *rows["median_ci_high"], *rows["median"],
              *rows["reference_value"], *rows["network_p75"]]
    log = _wants_log(values)
    # the layout as update_xaxes, update_yaxes, _layout and update_layout leave it (an update sets
    # a value's nested properties before its plain ones)
    layout["xaxis"] = {"title": {"text": "Room median with 95 % CI: "
                                         + f"{quantity_name(quantity)} ({_unit_text(unit)})"
                                         + (", log scale" if log else "")},
                       "type": "log" if log else "linear", **_value_ticks(values, unit, log)}
    layout["yaxis"] = {"title": {"text": "Exam type · room (n exams)"}, "tickfont": {"size": 11},
                       "type": "multicategory", "autorange": "reversed"}
    _titled(layout, title, height=max(200, 90 + 24 * len(rows)))
    # the legend above the plot, not beside it: the data area keeps most of the width
    layout["legend"] = {"orientation": "h", "x": 0.0, "xanchor": "left", "y": 1.0, "yanchor": "bottom"}
    layout["margin"] = {"t": 96, "r": 16,
                        "l": 40 + 6 * (max(map(len, exam_axis)) + max(map(len, room_axis)))}
    # a fixed left margin from the labels' length: plotly's automargin re-lays out every
    # multicategory plot several times, the main cost of drawing this page
    layout["yaxis"]["automargin"] = False
    return _as_figure(traces, layout)




# --- distributions --------------------------------------------------------------------------
def build_distribution(frame: pd.DataFrame, *, title: str) -> go.Figure:
    """Box per room and population from precomputed order statistics, one panel per quantity.

    Expects rows of ``dash_distribution.sql`` for one exam type: quantity, unit, phantom,
    population, site_label, room_label, n, p05, p25, median, p75, p95, reference_value,
    reference_set, is_sample_adequate. Box: interquartile range and median; whiskers: 5th
    and 95th percentiles. A group below the audit minimum is drawn unfilled in grey. The
    reference level is a dashed line with its value and set written on it.
    """
    _require(frame, ["quantity", "unit", "phantom", "population", "site_label", "room_label",
                     "n", "p05", "p25", "median", "p75", "p95", "reference_value",
                     "reference_set", "is_sample_adequate"], "build_distribution")
    panels = _panels(frame)
    layout, cells = _new_layout(1, len(panels), horizontal_spacing=0.1 if len(panels) > 1 else 0.0)
    legend_done: set[str] = set()
    parts = [(col, quantity, phantom, _panel_rows(frame, quantity, phantom))
             for col, (quantity, phantom) in enumerate(panels, start=1)]
    # every panel's traces first (plain dicts), added at once; then the reference lines, which
    # go on panels with traces
    traces: list[dict] = []
    cols: list[int] = []
    for col, quantity, phantom, part in parts:
        unit = part["unit"].iloc[0]
        # plain lists read by position (pandas' groupby and a boolean mask per trace cost most of
        # this builder)
        c = {k: part[k].tolist() for k in ("site_label", "room_label", "population", "n", "p05",
                                           "p25", "median", "p75", "p95", "is_sample_adequate")}
        rooms = sorted(set(zip(c["site_label"], c["room_label"], strict=True)))
        counts = {room: {} for room in rooms}
        for s, r, pop, n in zip(c["site_label"], c["room_label"], c["population"], c["n"], strict=True):
            counts[(s, r)][pop] = int(n)
        # adult, paediatric, unknown age (its own group), all (mammography: no age split)
        present = [pop for pop in _POPULATION_ORDER if pop in set(c["population"])]
        labels = {room: f"{room[1]}<br>{room[0]}<br>n " + " / ".join(
            f"{counts[room].get(pop, 0)}" for pop in present) for room in rooms}
        for population in present:
            colour = POPULATION_COLOURS.get(population, PALETTE[2])
            rows = [i for i, pop in enumerate(c["population"]) if pop == population]
            single = [i for i in rows if c["n"][i] == 1]
            if single:    # one exam: a point, not a box of five equal quantiles
                name = f"{population}, a single exam"
                traces.append(dict(type="scatter",
                    name=name, legendgroup=name, showlegend=name not in legend_done, mode="markers",
                    x=[labels[(c["site_label"][i], c["room_label"][i])] for i in single],
                    y=[_num(c["median"][i]) for i in single],
                    marker={"color": "rgba(255,255,255,0)", "size": 9, "symbol": "circle",
                            "line": {"color": colour, "width": 2}},
                    hovertemplate="%{x}<br>one exam: %{y:.4g} " + unit_label(unit) + "<extra></extra>",
                    **cells[0][col - 1],
                ))
                cols.append(col)
                legend_done.add(name)
            for adequate in (True, False):
                sel = [i for i in rows if c["is_sample_adequate"][i] == adequate and c["n"][i] > 1]
                if not sel:
                    continue
                name = population if adequate else f"{population}, sample below the audit minimum"
                traces.append(dict(type="box",
                    name=name, legendgroup=name, showlegend=name not in legend_done,
                    offsetgroup=population, alignmentgroup=f"panel{col}",
                    x=[labels[(c["site_label"][i], c["room_label"][i])] for i in sel],
                    q1=[_num(c["p25"][i]) for i in sel], median=[_num(c["median"][i]) for i in sel],
                    q3=[_num(c["p75"][i]) for i in sel], lowerfence=[_num(c["p05"][i]) for i in sel],
                    upperfence=[_num(c["p95"][i]) for i in sel],
                    marker={"color": colour},
                    line={"color": colour, "width": 1.5},
                    fillcolor=_alpha(colour, 0.35) if adequate else "rgba(255,255,255,0)",
                    hoverinfo="x+y", boxpoints=False,
                    **cells[0][col - 1],
                ))
                cols.append(col)
                legend_done.add(name)
    # the shapes and annotations add_hline makes per reference value (on panels with traces)
    shapes: list[dict] = []
    notes: list[dict] = []
    for col, quantity, phantom, part in parts:
        cell = cells[0][col - 1]
        unit = part["unit"].iloc[0]
        refs = part.dropna(subset=["reference_value"])
        for (value, ref_set, population) in sorted(
                {(float(v), str(s), str(p)) for v, s, p in
                 zip(refs["reference_value"], refs["reference_set"], refs["population"], strict=True)}):
            if col not in cols:
                continue
            shape, note = _hline(value, f"Reference level {_fmt(value)} {unit_label(unit)} "
                                        f"({population}, {ref_set})", cell)
            shapes.append(shape)
            notes.append(note)
        values = [*part["p05"], *part["p95"], *refs["reference_value"]]
        log = _wants_log(values)
        _axis(layout, cell["yaxis"]).update(
            title={"text": _panel_axis_title(quantity, unit, phantom, log)},
            type="log" if log else "linear", **_value_ticks(values, unit, log))
        _axis(layout, cell["xaxis"]).update(
            title={"text": "Room · site (n adult / paediatric exams)"}, type="category")
    if shapes:
        layout["shapes"] = shapes
        layout["annotations"] = notes
    layout["boxmode"] = "group"
    width_rooms = max(len(set(zip(frame["site_label"], frame["room_label"], strict=True))), 2)
    _titled(layout, title, height=380 + 12 * width_rooms)
    _room_label_axes(layout, cells[0], traces)
    return _as_figure(traces, layout)


_CHAR_PX = 7            # a generous mean width of a 12 px tick-label character (DejaVu Sans)
_LINE_PX = 15           # one line of a 12 px tick label
_JOIN = " · "           # between the lines of a room label written on one line
_PLOT_PX = 900          # the plotting width at a 1280 px window, less the legend (measured)


def _room_label_axes(layout: dict, cells: tuple[dict, ...], traces: list[dict]) -> None:
    """Tick angle of the room axes and the bottom margin, set here rather than left to
    plotly's automargin and automatic angle, which measured and re-laid out every panel of every
    figure (about half of the drawing time of the distributions page at 10M events). As plotly's
    own choice among 0, 30 and 90 degrees: flat when the widest line of every room fits its
    share of a panel, 30 degrees when the slanted labels clear each other, upright otherwise."""
    rooms: dict[str, set[str]] = {}
    for t in traces:
        rooms.setdefault(t["xaxis"], set()).update(t["x"])
    lines = [line for labels in rooms.values() for label in labels for line in label.split("<br>")]
    widest = _CHAR_PX * max(map(len, lines), default=10)
    depth = _LINE_PX * max((label.count("<br>") + 1 for labels in rooms.values() for label in labels),
                           default=1)
    spacing = _PLOT_PX / max(1, len(cells)) / max(map(len, rooms.values()), default=1)
    if widest + 12 <= spacing:
        angle, labels_px = 0, depth
    elif depth <= spacing * 0.5:                       # sin 30 degrees
        angle, labels_px = 30, widest * 0.5 + depth * 0.87
    elif depth > max(spacing, _LINE_PX):
        # upright labels of several lines are wider than a room's share of the panel (three
        # lines: 45 px; 24 rooms in one of two panels: ~19 px) and overlap their neighbours: the
        # lines of a label are written one after the other on one line, and the figure grows
        # by the longer labels, so the plot keeps its height
        for t in traces:
            t["x"] = [label.replace("<br>", _JOIN) for label in t["x"]]
        joined = _CHAR_PX * max((len(label) for t in traces for label in t["x"]), default=10)
        layout["height"] += joined - widest
        angle, labels_px = 90, joined
    else:
        angle, labels_px = 90, widest
    for cell in cells:
        _axis(layout, cell["xaxis"]).update(tickangle=angle, automargin=False)
    layout["margin"] = {"b": 36 + round(labels_px)}   # and the axis title
