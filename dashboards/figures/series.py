"""Monthly trends with drift flags, and the site-comparison funnel."""

from __future__ import annotations

import datetime as dt
import math
from collections.abc import Mapping

import pandas as pd
import plotly.graph_objects as go

from ..theme import (
    NETWORK_COLOUR,
    REFERENCE_COLOUR,
    quantity_name,
    unit_label,
)
from .common import (
    _as_figure,
    _axis,
    _titled,
    _hline,
    _new_layout,
    _validated_order,
    DRIFT_COLOUR,
    INSUFFICIENT_SYMBOL,
    _ROOM_SYMBOLS,
    _fmt,
    _log_ticks,
    _missing,
    _num,
    _panel_axis_title,
    _panel_rows,
    _panels,
    _require,
    _site_colour,
    _value_ticks,
    _wants_log,
)

__all__ = ["build_funnel", "build_trend"]


# --- trends -------------------------------------------------------------------------------
def _month_mid(month: str, offset_days: float = 0.0) -> str:
    """Mid-month as an ISO date-time, moved by `offset_days` (dodging rooms within a month)."""
    if not offset_days:
        return f"{month}-15"
    moment = dt.datetime.fromisoformat(f"{month}-15T12:00:00") + dt.timedelta(days=offset_days)
    return moment.isoformat(timespec="minutes")


def _month_end(month: str) -> str:
    year, mon = (int(v) for v in month.split("-")[:2])
    year, mon = (year + 1, 1) if mon == 12 else (year, mon + 1)
    return f"{year:04d}-{mon:02d}-01"


def _month_text(month: str) -> str:
    names = ("Jan", "Feb", "Mar", "Apr", "May", "Jun", "Jul", "Aug", "Sep", "Oct", "Nov", "Dec")
    year, mon = month.split("-")[:2]
    return f"{names[int(mon) - 1]} {year}"


def build_trend(frame: pd.DataFrame, drift: pd.DataFrame, *, site_colours: Mapping[str, str],
                title: str) -> go.Figure:
    """Monthly median per room (bars: interquartile range), drift flags marked at their month.

    Expects rows of ``dash_monthly.sql`` for one exam type: quantity, unit, phantom, month
    ('YYYY-MM'), site_label, room_label, n, median, p25, p75, reference_value,
    reference_set; and rows of ``dash_drift.sql`` for the same exam type (quantity,
    room_label, change_month, ratio_after_to_before), possibly none. A drift flag is a
    vertical dashed line at the first day of the month the change starts, labelled with the
    room and the change of the median.
    """
    _require(frame, ["quantity", "unit", "phantom", "month", "site_label", "room_label", "n",
                     "median", "p25", "p75", "reference_value", "reference_set"], "build_trend")
    panels = _panels(frame)
    layout, cells = _new_layout(len(panels), 1, vertical_spacing=min(0.25, 0.4 / len(panels))
                                if len(panels) > 1 else 0.0)
    months = sorted(set(frame["month"]))
    step = max(1, math.ceil(len(months) / 12))
    ticks = months[::step]
    x_range = [f"{months[0]}-01", _month_end(months[-1])]
    rooms_by_site: dict[str, list[str]] = {}
    for s, r in sorted(set(zip(frame["site_label"], frame["room_label"], strict=True))):
        rooms_by_site.setdefault(s, []).append(r)
    shown: set[str] = set()
    all_rooms = [(s, r) for s in sorted(rooms_by_site) for r in rooms_by_site[s]]
    # rooms side by side within a month (dodged), so their interquartile bars never overlap
    step = min(3.0, 22.0 / max(1, len(all_rooms)))
    dodge = {room: (i - (len(all_rooms) - 1) / 2.0) * step for i, room in enumerate(all_rooms)}
    parts = [(row, quantity, _panel_rows(frame, quantity, phantom))
             for row, (quantity, phantom) in enumerate(panels, start=1)]
    # every panel's traces first (reference lines go on panels with traces), as plain dicts
    traces: list[dict] = []
    for row, quantity, part in parts:
        unit = part["unit"].iloc[0]
        # each room's rows by position in plain lists (pandas' groupby and a sort per room cost
        # most of this builder); rooms with a NULL site or room label are not drawn, as before
        col = {c: part[c].tolist() for c in ("site_label", "room_label", "month", "n", "median",
                                              "p25", "p75")}
        by_room: dict[tuple[str, str], list[int]] = {}
        for i, key in enumerate(zip(col["site_label"], col["room_label"], strict=True)):
            if not (_missing(key[0]) or _missing(key[1])):
                by_room.setdefault(key, []).append(i)
        for site in sorted(rooms_by_site):
            for k, room in enumerate(rooms_by_site[site]):
                rows = by_room.get((site, room))
                if rows is None:
                    continue
                rows = sorted(rows, key=col["month"].__getitem__)   # stable, as pandas' sort
                month = [col["month"][i] for i in rows]
                name = f"{room} · {site}"
                colour = _site_colour(site_colours, site)
                med = [_num(col["median"][i]) for i in rows]
                traces.append(dict(type="scatter",
                    name=name, legendgroup=name, showlegend=name not in shown,
                    mode="lines+markers", x=[_month_mid(m, dodge[(site, room)]) for m in month], y=med,
                    line={"color": colour, "width": 2, "dash": ("solid", "dot", "dash")[k % 3]},
                    marker={"color": colour, "size": 8, "symbol": _ROOM_SYMBOLS[k % len(_ROOM_SYMBOLS)]},
                    error_y={"type": "data", "symmetric": False, "color": colour, "thickness": 1,
                             "width": 3,
                             "array": [None if _missing(h) or m is None else _num(float(h) - m)
                                       for h, m in zip([col["p75"][i] for i in rows], med, strict=True)],
                             "arrayminus": [None if _missing(w) or m is None else _num(m - float(w))
                                            for w, m in zip([col["p25"][i] for i in rows], med, strict=True)]},
                    customdata=[[int(col["n"][i]), _month_text(col["month"][i])] for i in rows],
                    hovertemplate=("%{customdata[1]}: median %{y:.4g} " + unit_label(unit)
                                   + " (n %{customdata[0]})<extra>" + name + "</extra>"),
                    **cells[row - 1][0],
                ))
                shown.add(name)
    # reference lines and drift flags: the shapes and annotations (in this order) that
    # add_hline per reference value and then one update of the layout with the flags made
    shapes: list[dict] = []
    notes: list[dict] = []
    flag_shapes: list[dict] = []
    flag_notes: list[dict] = []
    for row, quantity, part in parts:
        cell = cells[row - 1][0]
        unit = part["unit"].iloc[0]
        refs = part.dropna(subset=["reference_value"])
        for value, ref_set in sorted({(float(v), str(s)) for v, s in
                                      zip(refs["reference_value"], refs["reference_set"], strict=True)}):
            shape, note = _hline(value, f"Reference level {_fmt(value)} {unit_label(unit)} ({ref_set})",
                                 cell)
            shapes.append(shape)
            notes.append(note)
        flags = drift[drift["quantity"] == quantity] if not drift.empty else drift
        x_axis, y_axis = cell["xaxis"], cell["yaxis"]
        ordered = flags.sort_values(["change_month", "room_label"]) if not flags.empty else flags
        for k, flag in enumerate(ordered.itertuples(index=False)):
            x = f"{flag.change_month}-01"
            flag_shapes.append({"line": {"color": DRIFT_COLOUR, "dash": "dashdot", "width": 2},
                                "type": "line", "x0": x, "x1": x, "xref": x_axis, "y0": 0, "y1": 1,
                                "yref": f"{y_axis} domain"})
            change = (float(flag.ratio_after_to_before) - 1.0) * 100.0
            flag_notes.append({
                "bgcolor": "rgba(255,255,255,0.85)", "font": {"color": DRIFT_COLOUR, "size": 10},
                "showarrow": False,
                "text": f"drift flag: {flag.room_label} {change:+.0f} % from {_month_text(flag.change_month)}",
                "x": x, "xanchor": "left", "xref": x_axis, "xshift": 4, "y": 1.0 - 0.12 * k,
                "yanchor": "top", "yref": f"{y_axis} domain"})
        values = [*part["p25"], *part["p75"], *refs["reference_value"]]
        log = _wants_log(values)
        _axis(layout, y_axis).update(
            title={"text": _panel_axis_title(quantity, unit, None, log, "Median ")},
            type="log" if log else "linear", **_value_ticks(values, unit, log))
        _axis(layout, x_axis).update(
            title={"text": "Month of study (calendar month)"}, type="date",
            tickvals=[_month_mid(m) for m in ticks], ticktext=[_month_text(m) for m in ticks],
            range=x_range)
    if shapes or flag_shapes:
        layout["shapes"] = [*shapes, *flag_shapes]
        layout["annotations"] = [*notes, *flag_notes]
    _titled(layout, title, height=40 + 290 * len(panels))
    return _as_figure(traces, layout)


# --- site comparison: funnel ----------------------------------------------------------------
def _funnel_cells(cells: pd.DataFrame) -> dict:
    """One grey square per cell of groups not drawn one by one; area ~ number of groups."""
    biggest = max(int(v) for v in cells["n_groups"])
    return dict(type="scatter",
        name="Room groups not drawn one by one (square area: number of groups)", mode="markers",
        x=[_num(v) for v in cells["n_mid"]], y=[_num(v) for v in cells["ratio_mid"]],
        marker={"color": NETWORK_COLOUR, "symbol": "square", "opacity": 0.55,
                "size": [round(4 + 10 * math.sqrt(int(k) / biggest), 1) for k in cells["n_groups"]]},
        customdata=[[int(k), int(i), int(a), int(b), _fmt(lo), _fmt(hi)] for k, i, a, b, lo, hi in
                    zip(cells["n_groups"], cells["n_insufficient"], cells["n_min"], cells["n_max"],
                        cells["ratio_min"], cells["ratio_max"], strict=True)],
        hovertemplate=("%{customdata[0]} room groups (%{customdata[1]} with too few exams)<br>n "
                       "%{customdata[2]} to %{customdata[3]}, ratio %{customdata[4]} to "
                       "%{customdata[5]} of the network typical value<extra></extra>"),
    )


def build_funnel(points: pd.DataFrame, limits: pd.DataFrame, *, site_colours: Mapping[str, str],
                 title: str, cells: pd.DataFrame | None = None) -> go.Figure:
    """Ratio of each room median to the network typical value against the number of exams.

    Expects rows of ``dash_funnel_points.sql`` for one quantity (site_label, room_label,
    exam_label, population, n, ratio_to_typical, reference_ratio_to_typical,
    is_sample_adequate, funnel_zone, unit, quantity, median, typical_value, reference_value)
    and of ``dash_funnel_limits.sql`` (n, upper_95, upper_998). Both axes are logarithmic; the
    line at ratio 1 is the network typical value (ICRP 135); each group's reference level, where
    one applies, is its own mark; groups above the 99.8 % limit are labelled.

    `cells` (rows of ``dash_funnel_cells.sql``: n_mid, ratio_mid, n_groups, n_insufficient,
    n_min, n_max, ratio_min, ratio_max) are the groups not drawn one by one (a quantity with
    more groups than a page can carry), drawn as one grey square per cell, its area growing
    with the number of groups in it.
    """
    has_cells = cells is not None and not cells.empty
    columns = ["site_label", "room_label", "exam_label", "population", "n", "ratio_to_typical",
               "reference_ratio_to_typical", "is_sample_adequate", "funnel_zone", "quantity", "unit",
               "median", "typical_value", "reference_value"]
    if has_cells and points.empty:   # every group of the quantity is in a cell
        _require(cells, ["quantity", "unit", "n_mid", "ratio_mid", "n_groups", "n_max"], "build_funnel")
        points = pd.DataFrame(columns=columns)
    else:
        _require(points, columns, "build_funnel")
    first = points if not points.empty else cells
    quantity, unit = str(first["quantity"].iloc[0]), first["unit"].iloc[0]
    layout, _ = _new_layout()
    traces: list[dict] = []   # plain dicts, as add_trace leaves them: see _validated_order
    if not limits.empty:
        lim = limits.sort_values("n")
        n = [int(v) for v in lim["n"]]
        for column, name, dash in (("upper_998", "99.8 % upper control limit", "dot"),
                                   ("upper_95", "95 % upper control limit", "dash")):
            traces.append(dict(type="scatter",
                name=name, legendgroup=name, mode="lines", x=n, y=[_num(v) for v in lim[column]],
                line={"color": NETWORK_COLOUR, "dash": dash, "width": 1.5},
                hovertemplate="n %{x}: limit %{y:.3f}<extra>" + name + "</extra>",
            ))
        x_max = max(n)
    else:
        x_max = max(int(v) for v in [*points["n"], *(cells["n_max"] if has_cells else [])]) * 2
    traces.append(dict(type="scatter",
        name="Network typical value (ratio 1)", mode="lines", x=[1, x_max], y=[1.0, 1.0],
        line={"color": NETWORK_COLOUR, "width": 2}, hoverinfo="skip",
    ))
    refs = points[[not _missing(v) for v in points["reference_ratio_to_typical"]]]
    if not refs.empty:
        traces.append(dict(type="scatter",
            name="Reference level of the group", mode="markers",
            x=[int(v) for v in refs["n"]], y=[_num(v) for v in refs["reference_ratio_to_typical"]],
            marker={"color": REFERENCE_COLOUR, "symbol": "line-ew-open", "size": 18,
                    "line": {"color": REFERENCE_COLOUR, "width": 2}},
            customdata=[[e, _fmt(r)] for e, r in zip(refs["exam_label"], refs["reference_value"], strict=True)],
            hovertemplate="%{customdata[0]}: reference level %{customdata[1]} " + unit_label(unit)
                          + " = %{y:.2f} x typical<extra></extra>",
        ))
    if has_cells:   # under the groups drawn one by one
        traces.append(_funnel_cells(cells))
    for site in sorted(points["site_label"].unique()):
        part = points[points["site_label"] == site]
        colour = _site_colour(site_colours, site)
        adequate = [bool(v) for v in part["is_sample_adequate"]]
        labelled = [z == "above 99.8 % limit" for z in part["funnel_zone"]]
        traces.append(dict(type="scatter",
            name=site, legendgroup=site, mode="markers+text",
            x=[int(v) for v in part["n"]], y=[_num(v) for v in part["ratio_to_typical"]],
            marker={"color": colour, "size": 11, "line": {"color": colour, "width": 2},
                    "symbol": ["circle" if a else INSUFFICIENT_SYMBOL for a in adequate]},
            text=[f"{e} · {r}" if lab else "" for e, r, lab in
                  zip(part["exam_label"], part["room_label"], labelled, strict=True)],
            textposition="middle left", textfont={"size": 10, "color": colour},
            customdata=[[e, r, p, z, _fmt(m), _fmt(t)] for e, r, p, z, m, t in
                        zip(part["exam_label"], part["room_label"], part["population"],
                            part["funnel_zone"], part["median"], part["typical_value"], strict=True)],
            hovertemplate=("%{customdata[0]} (%{customdata[2]})<br>%{customdata[1]} · " + site
                           + "<br>median %{customdata[4]} / network typical %{customdata[5]} "
                           + unit_label(unit) + " = %{y:.2f}<br>n %{x}: %{customdata[3]}<extra></extra>"),
        ))
    ratios = [v for v in [*points["ratio_to_typical"], *points["reference_ratio_to_typical"],
                          *(cells["ratio_min"] if has_cells else []),
                          *(cells["ratio_max"] if has_cells else [])]
              if not _missing(v) and v > 0]
    lo = min([*ratios, 0.5])
    hi = max([*ratios, *([v for v in limits["upper_998"]] if not limits.empty else []), 2.0])
    # the layout as update_xaxes, update_yaxes and _layout leave it
    layout["xaxis"] = {"title": {"text": "Exams in the room's audit group (count, log scale)"},
                       "type": "log", "range": [0, math.log10(x_max * 1.05)], **_log_ticks([1, x_max])}
    layout["yaxis"] = {"title": {"text": f"{quantity_name(quantity)}: median ÷ network typical value "
                                         "(ratio, log scale)"},
                       "type": "log", "range": [math.log10(lo) - 0.05, math.log10(hi) + 0.05],
                       **_log_ticks([lo, hi], fine=True)}
    _titled(layout, title, height=460)
    return _as_figure([_validated_order(t) for t in traces], layout)
