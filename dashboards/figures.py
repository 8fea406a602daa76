"""Figure builders: PURE functions from mart rows (a pandas DataFrame) to a plotly Figure.

Each builder documents the columns it expects (the SELECT in ``queries/dashboards/`` that
produces them is named) and draws only what those rows say: no statistics are computed
here, so a figure can never disagree with the SQL. Builders raise ``ValueError`` for an
empty frame; the page decides what to show instead.
"""

from __future__ import annotations

import datetime as dt
import math
from collections.abc import Iterable, Mapping
from typing import Any

import pandas as pd
import plotly.graph_objects as go
from plotly.subplots import make_subplots

from .theme import (
    MUTED,
    NETWORK_COLOUR,
    PALETTE,
    POPULATION_COLOURS,
    REFERENCE_COLOUR,
    TEMPLATE,
    axis_title,
    quantity_name,
    unit_label,
)

__all__ = [
    "DRIFT_COLOUR",
    "INSUFFICIENT_SYMBOL",
    "LOG_SPAN",
    "build_alert_counts",
    "build_distribution",
    "build_file_status",
    "build_funnel",
    "build_reference_comparison",
    "build_skin_dose_map",
    "build_trend",
    "build_weight_share",
]

LOG_SPAN = 12.0           # use a log axis when the values span more than this factor
INSUFFICIENT_SYMBOL = "circle-open"
_ROOM_SYMBOLS = ("circle", "square", "diamond", "triangle-up", "triangle-down", "pentagon",
                 "hexagon", "star")
# Reference levels and thresholds are black or grey, never a site's colour; sets differ by shape.
_REFERENCE_SET_MARKS = (("line-ns", REFERENCE_COLOUR), ("x-thin", REFERENCE_COLOUR),
                        ("cross-thin", NETWORK_COLOUR))
DRIFT_COLOUR = "#555555"
_PHANTOM_SHORT = {"head_16cm": "16 cm", "body_32cm": "32 cm", "mixed": "mixed phantoms"}
_PHANTOMS = {"head_16cm": "16 cm head phantom", "body_32cm": "32 cm body phantom",
             "mixed": "mixed phantoms"}


# --- small pure helpers -------------------------------------------------------------------
def _missing(value: Any) -> bool:
    return value is None or (isinstance(value, float) and math.isnan(value)) or value is pd.NA


def _num(value: Any) -> float | None:
    """A float to 7 significant figures (stable against last-bit noise, and small pages), or
    None for SQL NULL / NaN (plotly then leaves a gap)."""
    return None if _missing(value) else float(f"{float(value):.7g}")


def _fmt(value: Any, digits: int = 3) -> str:
    """Significant-figure formatting for hover text and labels."""
    if _missing(value):
        return "–"
    v = float(value)
    if v == 0:
        return "0"
    magnitude = math.floor(math.log10(abs(v)))
    decimals = max(0, digits - 1 - magnitude)
    return f"{v:,.{decimals}f}"


def _stratum_short(stratum: Any) -> str:
    """' · 15-<30 kg' for 'weight 15-<30 kg' (the band's unit says what it is); '' for none."""
    if _missing(stratum):
        return ""
    kind, _, band = str(stratum).partition(" ")
    return f" · {band if any(c.isdigit() for c in band) else stratum}"


def _phantom_text(phantom: Any) -> str:
    return "" if _missing(phantom) else _PHANTOMS.get(str(phantom), str(phantom))


def _wants_log(values: Iterable[Any]) -> bool:
    positive = [float(v) for v in values if not _missing(v) and float(v) > 0]
    return bool(positive) and max(positive) / min(positive) > LOG_SPAN


def _log_ticks(values: Iterable[Any], *, fine: bool = False) -> dict[str, Any]:
    """Explicit ticks for a log axis with their full values ('0.9', '20'), never plotly's bare
    mantissas: a 1-2-5 sequence, or 1-1.25-1.5-2-2.5-3-4-5-6-8 when `fine` (ratio axes)."""
    positive = [float(v) for v in values if not _missing(v) and float(v) > 0]
    if not positive:
        return {}
    lo, hi = min(positive), max(positive)
    steps = (1, 1.25, 1.5, 2, 2.5, 3, 4, 5, 6, 8) if fine else (1, 2, 5)
    ticks = [m * 10.0 ** e for e in range(math.floor(math.log10(lo)) - 1, math.ceil(math.log10(hi)) + 1)
             for m in steps]
    ticks = [t for t in ticks if lo / 1.3 <= t <= hi * 1.3]
    if fine and len(ticks) > 14:
        ticks = [t for t in ticks if float(f"{t:.3g}") / 10 ** math.floor(math.log10(t)) in (1, 2, 5)]
    return {"tickvals": [float(f"{t:.6g}") for t in ticks], "ticktext": [f"{t:,.6g}" for t in ticks]}


def _require(frame: pd.DataFrame, columns: Iterable[str], builder: str) -> None:
    if frame.empty:
        raise ValueError(f"{builder}: no rows to draw")
    missing = [c for c in columns if c not in frame.columns]
    if missing:
        raise ValueError(f"{builder}: missing column(s) {', '.join(missing)}")


def _layout(fig: go.Figure, title: str, height: int) -> go.Figure:
    """Template, title and height (the legend sits right of the plot, see theme.TEMPLATE)."""
    fig.update_layout(template=TEMPLATE, title={"text": title}, height=height + 60)
    return fig


def _site_colour(colours: Mapping[str, str], site: str) -> str:
    return colours.get(site, PALETTE[len(colours) % len(PALETTE)])


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
    fig = go.Figure()
    # An invisible first trace fixes the category order to the rows' order (exam, then room).
    fig.add_trace(go.Scatter(x=[_num(v) for v in rows["median"]], y=[exam_axis, room_axis],
                             mode="markers", marker={"opacity": 0}, showlegend=False,
                             hoverinfo="skip", name=""))
    for site in sorted(rows["site_label"].unique()):
        # adequate samples first: the legend shows the first point's (filled) marker
        idx = sorted((i for i in range(len(rows)) if rows["site_label"].iloc[i] == site),
                     key=lambda i: not bool(rows["is_sample_adequate"].iloc[i]))
        adequate = [bool(rows["is_sample_adequate"].iloc[i]) for i in idx]
        med = [_num(rows["median"].iloc[i]) for i in idx]
        lo = [_num(rows["median_ci_low"].iloc[i]) for i in idx]
        hi = [_num(rows["median_ci_high"].iloc[i]) for i in idx]
        colour = _site_colour(site_colours, site)
        fig.add_trace(go.Scatter(
            name=site, legendgroup=site, mode="markers",
            x=med, y=[[exam_axis[i] for i in idx], [room_axis[i] for i in idx]],
            marker={"color": colour, "size": 10,
                    "symbol": ["circle" if a else INSUFFICIENT_SYMBOL for a in adequate],
                    "line": {"color": colour, "width": 2}},
            error_x={"type": "data", "symmetric": False, "color": colour, "thickness": 1.5,
                     "width": 4,
                     "array": [None if h is None or m is None else _num(h - m) for h, m in zip(hi, med, strict=True)],
                     "arrayminus": [None if w is None or m is None else _num(m - w) for w, m in zip(lo, med, strict=True)]},
            customdata=[[int(rows["n"].iloc[i]), _fmt(lo[k]), _fmt(hi[k]),
                         "adequate" if adequate[k] else "below the audit minimum"]
                        for k, i in enumerate(idx)],
            hovertemplate=("%{y}<br>median %{x:.4g} " + unit_label(unit)
                           + "<br>95 % CI %{customdata[1]} to %{customdata[2]}"
                           + "<br>n %{customdata[0]} (%{customdata[3]})<extra>" + site + "</extra>"),
        ))
    by_use = rows["reference_set"].dropna().value_counts()
    for k, ref_set in enumerate(sorted(by_use.index, key=lambda v: (-int(by_use[v]), str(v)))):
        sel = rows.index[rows["reference_set"] == ref_set].tolist()
        symbol, colour = _REFERENCE_SET_MARKS[k % len(_REFERENCE_SET_MARKS)]
        fig.add_trace(go.Scatter(
            name=f"Reference level ({ref_set})", mode="markers",
            x=[_num(rows["reference_value"].iloc[i]) for i in sel],
            y=[[exam_axis[i] for i in sel], [room_axis[i] for i in sel]],
            marker={"symbol": symbol, "size": 22, "color": colour,
                    "line": {"color": colour, "width": 3}},
            hovertemplate="reference level %{x:.4g} " + unit_label(unit) + f"<extra>{ref_set}</extra>",
        ))
    sel = rows.index[rows["network_p75"].notna()].tolist()
    if sel:
        fig.add_trace(go.Scatter(
            name="Network 75th percentile of room medians", mode="markers",
            x=[_num(rows["network_p75"].iloc[i]) for i in sel],
            y=[[exam_axis[i] for i in sel], [room_axis[i] for i in sel]],
            marker={"symbol": "diamond-tall-open", "size": 12,
                    "line": {"color": NETWORK_COLOUR, "width": 2}, "color": NETWORK_COLOUR},
            hovertemplate="network 75th percentile %{x:.4g} " + unit_label(unit) + "<extra></extra>",
        ))
    values = [*rows["median_ci_low"], *rows["median_ci_high"], *rows["median"],
              *rows["reference_value"], *rows["network_p75"]]
    log = _wants_log(values)
    fig.update_xaxes(title={"text": "Room median with 95 % CI: " + axis_title(quantity, unit)
                                    + (", log scale" if log else "")},
                     type="log" if log else "linear", **(_log_ticks(values) if log else {}))
    fig.update_yaxes(title={"text": "Exam type · room (n: exams in the period)"},
                     type="multicategory", autorange="reversed", tickfont={"size": 11})
    fig = _layout(fig, title, height=max(150, 90 + 24 * len(rows)))
    # the legend above the plot, not beside it: the data area keeps most of the width
    fig.update_layout(legend={"orientation": "h", "x": 0.0, "xanchor": "left", "y": 1.0,
                              "yanchor": "bottom"},
                      margin={"t": 96, "r": 16})
    return fig


# --- distributions --------------------------------------------------------------------------
def _panels(frame: pd.DataFrame) -> list[tuple[str, Any]]:
    """(quantity, phantom) panels in a stable order."""
    seen: list[tuple[str, Any]] = []
    for q, p in zip(frame["quantity"], frame["phantom"], strict=True):
        key = (str(q), None if _missing(p) else str(p))
        if key not in seen:
            seen.append(key)
    return sorted(seen, key=lambda k: (k[0], k[1] or ""))


def _panel_rows(frame: pd.DataFrame, quantity: str, phantom: Any) -> pd.DataFrame:
    same_phantom = frame["phantom"].isna() if phantom is None else frame["phantom"] == phantom
    return frame[(frame["quantity"] == quantity) & same_phantom]


def _panel_axis_title(quantity: str, unit: Any, phantom: Any, log: bool, prefix: str = "") -> str:
    """'CTDIvol, 16 cm head phantom (mGy), log scale'."""
    name = quantity_name(quantity) + (f", {_phantom_text(phantom)}" if phantom else "")
    return f"{prefix}{name} ({unit_label(unit)})" + (", log scale" if log else "")


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
    fig = make_subplots(rows=1, cols=len(panels), horizontal_spacing=0.1 if len(panels) > 1 else 0.0)
    legend_done: set[str] = set()
    for col, (quantity, phantom) in enumerate(panels, start=1):
        part = _panel_rows(frame, quantity, phantom)
        unit = part["unit"].iloc[0]
        rooms = sorted({(s, r) for s, r in zip(part["site_label"], part["room_label"], strict=True)})
        counts = {room: {} for room in rooms}
        for s, r, pop, n in zip(part["site_label"], part["room_label"], part["population"], part["n"], strict=True):
            counts[(s, r)][pop] = int(n)
        # adult, paediatric, unknown age (its own group), all (mammography: no age split)
        present = [pop for pop in _POPULATION_ORDER if pop in set(part["population"])]
        labels = {room: f"{room[1]}<br>{room[0]}<br>n " + " / ".join(
            f"{counts[room].get(pop, 0)}" for pop in present) for room in rooms}
        for population in present:
            colour = POPULATION_COLOURS.get(population, PALETTE[2])
            single = part[(part["population"] == population) & (part["n"] == 1)]
            if not single.empty:    # one exam: a point, not a box of five equal quantiles
                name = f"{population}, a single exam"
                fig.add_trace(go.Scatter(
                    name=name, legendgroup=name, showlegend=name not in legend_done, mode="markers",
                    x=[labels[(s, r)] for s, r in zip(single["site_label"], single["room_label"], strict=True)],
                    y=[_num(v) for v in single["median"]],
                    marker={"color": "rgba(255,255,255,0)", "size": 9, "symbol": "circle",
                            "line": {"color": colour, "width": 2}},
                    hovertemplate="%{x}<br>one exam: %{y:.4g} " + unit_label(unit) + "<extra></extra>",
                ), row=1, col=col)
                legend_done.add(name)
            for adequate in (True, False):
                sel = part[(part["population"] == population) & (part["is_sample_adequate"] == adequate)
                           & (part["n"] > 1)]
                if sel.empty:
                    continue
                name = population if adequate else f"{population}, sample below the audit minimum"
                fig.add_trace(go.Box(
                    name=name, legendgroup=name, showlegend=name not in legend_done,
                    offsetgroup=population, alignmentgroup=f"panel{col}",
                    x=[labels[(s, r)] for s, r in zip(sel["site_label"], sel["room_label"], strict=True)],
                    q1=[_num(v) for v in sel["p25"]], median=[_num(v) for v in sel["median"]],
                    q3=[_num(v) for v in sel["p75"]], lowerfence=[_num(v) for v in sel["p05"]],
                    upperfence=[_num(v) for v in sel["p95"]],
                    marker={"color": colour},
                    line={"color": colour, "width": 1.5},
                    fillcolor=_alpha(colour, 0.35) if adequate else "rgba(255,255,255,0)",
                    hoverinfo="x+y", boxpoints=False,
                ), row=1, col=col)
                legend_done.add(name)
        refs = part.dropna(subset=["reference_value"])
        for (value, ref_set, population) in sorted(
                {(float(v), str(s), str(p)) for v, s, p in
                 zip(refs["reference_value"], refs["reference_set"], refs["population"], strict=True)}):
            fig.add_hline(y=value, line={"color": REFERENCE_COLOUR, "dash": "dash", "width": 2},
                          annotation_text=f"Reference level {_fmt(value)} {unit_label(unit)} ({population}, {ref_set})",
                          annotation_position="top left", annotation_font={"size": 10},
                          row=1, col=col)
        values = [*part["p05"], *part["p95"], *refs["reference_value"]]
        log = _wants_log(values)
        fig.update_yaxes(title={"text": _panel_axis_title(quantity, unit, phantom, log)},
                         type="log" if log else "linear", **(_log_ticks(values) if log else {}),
                         row=1, col=col)
        fig.update_xaxes(title={"text": "Room · site (n adult / paediatric exams)"}, type="category",
                         row=1, col=col)
    fig.update_layout(boxmode="group")
    width_rooms = max(len(set(zip(frame["site_label"], frame["room_label"], strict=True))), 2)
    return _layout(fig, title, height=380 + 12 * width_rooms)


def _alpha(hex_colour: str, alpha: float) -> str:
    h = hex_colour.lstrip("#")
    r, g, b = (int(h[i:i + 2], 16) for i in (0, 2, 4))
    return f"rgba({r},{g},{b},{alpha})"


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
    fig = make_subplots(rows=len(panels), cols=1,
                        vertical_spacing=min(0.25, 0.4 / len(panels)) if len(panels) > 1 else 0.0)
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
    for row, (quantity, phantom) in enumerate(panels, start=1):
        part = _panel_rows(frame, quantity, phantom)
        unit = part["unit"].iloc[0]
        for site in sorted(rooms_by_site):
            for k, room in enumerate(rooms_by_site[site]):
                series = part[(part["site_label"] == site) & (part["room_label"] == room)].sort_values("month")
                if series.empty:
                    continue
                name = f"{room} · {site}"
                colour = _site_colour(site_colours, site)
                med = [_num(v) for v in series["median"]]
                fig.add_trace(go.Scatter(
                    name=name, legendgroup=name, showlegend=name not in shown,
                    mode="lines+markers", x=[_month_mid(m, dodge[(site, room)]) for m in series["month"]], y=med,
                    line={"color": colour, "width": 2, "dash": ("solid", "dot", "dash")[k % 3]},
                    marker={"color": colour, "size": 8, "symbol": _ROOM_SYMBOLS[k % len(_ROOM_SYMBOLS)]},
                    error_y={"type": "data", "symmetric": False, "color": colour, "thickness": 1,
                             "width": 3,
                             "array": [None if _missing(h) or m is None else _num(float(h) - m)
                                       for h, m in zip(series["p75"], med, strict=True)],
                             "arrayminus": [None if _missing(w) or m is None else _num(m - float(w))
                                            for w, m in zip(series["p25"], med, strict=True)]},
                    customdata=[[int(n), _month_text(m)] for n, m in zip(series["n"], series["month"], strict=True)],
                    hovertemplate=("%{customdata[1]}: median %{y:.4g} " + unit_label(unit)
                                   + " (n %{customdata[0]})<extra>" + name + "</extra>"),
                ), row=row, col=1)
                shown.add(name)
        refs = part.dropna(subset=["reference_value"])
        for value, ref_set in sorted({(float(v), str(s)) for v, s in
                                      zip(refs["reference_value"], refs["reference_set"], strict=True)}):
            fig.add_hline(y=value, line={"color": REFERENCE_COLOUR, "dash": "dash", "width": 2},
                          annotation_text=f"Reference level {_fmt(value)} {unit_label(unit)} ({ref_set})",
                          annotation_position="top left", annotation_font={"size": 10},
                          row=row, col=1)
        flags = drift[drift["quantity"] == quantity] if not drift.empty else drift
        axis = "" if row == 1 else str(row)
        ordered = flags.sort_values(["change_month", "room_label"]) if not flags.empty else flags
        for k, flag in enumerate(ordered.itertuples(index=False)):
            x = f"{flag.change_month}-01"
            fig.add_shape(type="line", x0=x, x1=x, y0=0, y1=1, xref=f"x{axis}", yref=f"y{axis} domain",
                          line={"color": DRIFT_COLOUR, "dash": "dashdot", "width": 2})
            change = (float(flag.ratio_after_to_before) - 1.0) * 100.0
            fig.add_annotation(x=x, y=1.0 - 0.12 * k, xref=f"x{axis}", yref=f"y{axis} domain",
                               text=f"drift flag: {flag.room_label} {change:+.0f} % from {_month_text(flag.change_month)}",
                               showarrow=False, xanchor="left", yanchor="top", xshift=4,
                               font={"size": 10, "color": DRIFT_COLOUR}, bgcolor="rgba(255,255,255,0.85)")
        values = [*part["p25"], *part["p75"], *refs["reference_value"]]
        log = _wants_log(values)
        fig.update_yaxes(title={"text": _panel_axis_title(quantity, unit, None, log, "Median ")},
                         type="log" if log else "linear", **(_log_ticks(values) if log else {}),
                         row=row, col=1)
        fig.update_xaxes(title={"text": "Month of study (calendar month)"}, type="date",
                         tickvals=[_month_mid(m) for m in ticks], ticktext=[_month_text(m) for m in ticks],
                         range=x_range, row=row, col=1)
    return _layout(fig, title, height=40 + 290 * len(panels))


_POPULATION_ORDER = ("adult", "paediatric", "unknown_age", "all")


# --- site comparison: funnel ----------------------------------------------------------------
def build_funnel(points: pd.DataFrame, limits: pd.DataFrame, *, site_colours: Mapping[str, str],
                 title: str) -> go.Figure:
    """Ratio of each room median to the network typical value against the number of exams.

    Expects rows of ``dash_funnel_points.sql`` for one quantity (site_label, room_label,
    exam_label, population, n, ratio_to_typical, reference_ratio_to_typical,
    is_sample_adequate, funnel_zone, unit, quantity, median, typical_value, reference_value)
    and of ``dash_funnel_limits.sql`` (n, upper_95, upper_998). Both axes are logarithmic; the
    line at ratio 1 is the network typical value (ICRP 135); each group's reference level, where
    one applies, is its own mark; groups above the 99.8 % limit are labelled.
    """
    _require(points, ["site_label", "room_label", "exam_label", "population", "n",
                      "ratio_to_typical", "reference_ratio_to_typical", "is_sample_adequate",
                      "funnel_zone", "quantity", "unit", "median", "typical_value",
                      "reference_value"], "build_funnel")
    quantity, unit = str(points["quantity"].iloc[0]), points["unit"].iloc[0]
    fig = go.Figure()
    if not limits.empty:
        lim = limits.sort_values("n")
        n = [int(v) for v in lim["n"]]
        for column, name, dash in (("upper_998", "99.8 % upper control limit", "dot"),
                                   ("upper_95", "95 % upper control limit", "dash")):
            fig.add_trace(go.Scatter(
                name=name, legendgroup=name, mode="lines", x=n, y=[_num(v) for v in lim[column]],
                line={"color": NETWORK_COLOUR, "dash": dash, "width": 1.5},
                hovertemplate="n %{x}: limit %{y:.3f}<extra>" + name + "</extra>",
            ))
        x_max = max(n)
    else:
        x_max = int(points["n"].max()) * 2
    fig.add_trace(go.Scatter(
        name="Network typical value (ratio 1)", mode="lines", x=[1, x_max], y=[1.0, 1.0],
        line={"color": NETWORK_COLOUR, "width": 2}, hoverinfo="skip",
    ))
    refs = points[[not _missing(v) for v in points["reference_ratio_to_typical"]]]
    if not refs.empty:
        fig.add_trace(go.Scatter(
            name="Reference level of the group", mode="markers",
            x=[int(v) for v in refs["n"]], y=[_num(v) for v in refs["reference_ratio_to_typical"]],
            marker={"color": REFERENCE_COLOUR, "symbol": "line-ew-open", "size": 18,
                    "line": {"color": REFERENCE_COLOUR, "width": 2}},
            customdata=[[e, _fmt(r)] for e, r in zip(refs["exam_label"], refs["reference_value"], strict=True)],
            hovertemplate="%{customdata[0]}: reference level %{customdata[1]} " + unit_label(unit)
                          + " = %{y:.2f} x typical<extra></extra>",
        ))
    for site in sorted(points["site_label"].unique()):
        part = points[points["site_label"] == site]
        colour = _site_colour(site_colours, site)
        adequate = [bool(v) for v in part["is_sample_adequate"]]
        labelled = [z == "above 99.8 % limit" for z in part["funnel_zone"]]
        fig.add_trace(go.Scatter(
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
    ratios = [v for v in [*points["ratio_to_typical"], *points["reference_ratio_to_typical"]]
              if not _missing(v) and v > 0]
    lo = min([*ratios, 0.5])
    hi = max([*ratios, *([v for v in limits["upper_998"]] if not limits.empty else []), 2.0])
    fig.update_xaxes(title={"text": "Exams in the room's audit group (count, log scale)"},
                     type="log", range=[0, math.log10(x_max * 1.05)], **_log_ticks([1, x_max]))
    fig.update_yaxes(title={"text": f"{quantity_name(quantity)}: median ÷ network typical value "
                                    "(ratio, log scale)"},
                     type="log", range=[math.log10(lo) - 0.05, math.log10(hi) + 0.05],
                     **_log_ticks([lo, hi], fine=True))
    return _layout(fig, title, height=460)


# --- alerts and data quality ------------------------------------------------------------------
def build_alert_counts(frame: pd.DataFrame, *, site_colours: Mapping[str, str], title: str) -> go.Figure:
    """Alerts per rule, stacked by site. Expects rows of ``dash_alert_counts.sql``
    (rule, site_label, n_alerts)."""
    _require(frame, ["rule", "site_label", "n_alerts"], "build_alert_counts")
    if "rule_text" in frame.columns:    # the rule in plain words (pipeline.report.words)
        frame = frame.assign(rule=frame["rule_text"])
    rules = sorted(frame["rule"].unique())
    fig = go.Figure()
    for site in sorted(frame["site_label"].unique()):
        part = frame[frame["site_label"] == site]
        count = {r: int(n) for r, n in zip(part["rule"], part["n_alerts"], strict=True)}
        fig.add_trace(go.Bar(name=site, orientation="h", y=rules, x=[count.get(r, 0) for r in rules],
                             marker={"color": _site_colour(site_colours, site)},
                             hovertemplate="%{y}: %{x} alerts<extra>" + site + "</extra>"))
    fig.update_layout(barmode="stack")
    fig.update_xaxes(title={"text": "Individual-exam alerts in the period (count)"}, type="linear")
    fig.update_yaxes(title={"text": "Alert rule"}, type="category", autorange="reversed")
    return _layout(fig, title, height=120 + 34 * len(rules))


def build_weight_share(frame: pd.DataFrame, *, title: str) -> go.Figure:
    """Share of studies with a patient weight, per site and modality. Expects rows of
    ``dash_weight_share.sql`` (site_label, modality, n_studies, n_with_weight, pct_with_weight)."""
    _require(frame, ["site_label", "modality", "n_studies", "n_with_weight", "pct_with_weight"],
             "build_weight_share")
    sites = sorted(frame["site_label"].unique())
    fig = go.Figure()
    for k, modality in enumerate(sorted(frame["modality"].dropna().unique())):
        part = frame[frame["modality"] == modality]
        fig.add_trace(go.Bar(
            name=str(modality), x=list(part["site_label"]), y=[_num(v) for v in part["pct_with_weight"]],
            marker={"color": PALETTE[k % len(PALETTE)]},
            customdata=[[int(a), int(b)] for a, b in zip(part["n_with_weight"], part["n_studies"], strict=True)],
            hovertemplate="%{x}, " + str(modality) + ": %{y:.0f} % (%{customdata[0]} of %{customdata[1]})<extra></extra>",
        ))
    fig.update_layout(barmode="group")
    fig.update_xaxes(title={"text": "Site"}, type="category", categoryorder="array", categoryarray=sites)
    fig.update_yaxes(title={"text": "Studies with patient weight recorded (%)"}, type="linear", range=[0, 100])
    return _layout(fig, title, height=340)


def build_file_status(frame: pd.DataFrame, *, title: str) -> go.Figure:
    """Input files by outcome and reason. Expects rows of ``dash_source_status.sql``
    (status, reason, n_files). Logarithmic when loaded files dwarf the rest."""
    _require(frame, ["status", "reason", "n_files"], "build_file_status")
    labels = [f"{s}: {r}" if r else str(s) for s, r in zip(frame["status"], frame["reason"], strict=True)]
    # the status is written on each bar's row; colour only separates unused files (grey) from
    # loaded ones (dark), so no site colour gets a second meaning on the page
    colours = {"loaded": "#444444"}
    fig = go.Figure(go.Bar(
        orientation="h", y=labels, x=[int(v) for v in frame["n_files"]], name="files",
        marker={"color": [colours.get(str(s), NETWORK_COLOUR) for s in frame["status"]]},
        text=[str(int(v)) for v in frame["n_files"]], textposition="outside",
        hovertemplate="%{y}: %{x} files<extra></extra>", showlegend=False,
    ))
    log = _wants_log(frame["n_files"])
    fig.update_xaxes(title={"text": "Input files (count" + (", log scale)" if log else ")")},
                     type="log" if log else "linear",
                     **(_log_ticks([1, *frame["n_files"]]) if log else {}))
    fig.update_yaxes(title={"text": "Outcome: reason"}, type="category", autorange="reversed")
    return _layout(fig, title, height=100 + 34 * len(labels))


# --- skin-dose map (peak skin dose follow-up) ---------------------------------------------
def build_skin_dose_map(frame: pd.DataFrame, *, title: str) -> go.Figure:
    """Skin dose of one study on the unrolled phantom surface, cells in Gy. Expects the rows of
    one study from ``dash_skin_dose_maps.sql`` (around_mm, along_mm, dose_gy, psd_gy); cells
    not in the rows received no dose."""
    _require(frame, ["around_mm", "along_mm", "dose_gy", "psd_gy"], "build_skin_dose_map")
    grid = frame.pivot_table(index="along_mm", columns="around_mm", values="dose_gy",
                             aggfunc="sum").fillna(0.0)
    fig = go.Figure(go.Heatmap(
        x=[float(c) / 10.0 for c in grid.columns], y=[float(r) / 10.0 for r in grid.index],
        z=grid.to_numpy(), colorscale="Inferno", zmin=0.0,
        colorbar={"title": {"text": "Skin dose (Gy)"}},
        hovertemplate="around %{x:.0f} cm, along %{y:.0f} cm: %{z:.2f} Gy<extra></extra>"))
    fig.update_xaxes(title={"text": "Around the trunk from the front midline via the patient's right; "
                                        "back at the centre (cm)"},
                     type="linear")
    fig.update_yaxes(title={"text": "Along the body, towards the head (cm)"}, type="linear",
                     scaleanchor="x", scaleratio=1.0)
    peak = float(frame["psd_gy"].iloc[0])
    return _layout(fig, f"{title}: peak skin dose estimate {peak:.1f} Gy", height=420)
