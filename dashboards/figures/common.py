"""Shared pieces of the figure builders: constants, number formatting, log ticks, layout."""

from __future__ import annotations

import copy
import functools
import math
import re
from collections.abc import Iterable, Mapping
from typing import Any

import pandas as pd
import plotly.graph_objects as go

from ..theme import (
    NETWORK_COLOUR,
    PALETTE,
    REFERENCE_COLOUR,
    TEMPLATE,
    quantity_name,
    unit_label,
)

__all__ = ["DRIFT_COLOUR", "INSUFFICIENT_SYMBOL", "LOG_SPAN", "NO_CHECK"]

# Figures and traces are built without plotly's per-property validation (``_validate=False``):
# at a million events it was most of the time spent building pages (about 3 ms a trace, 430
# traces on the trends page alone). The builders pass only plain lists, numbers and strings,
# and tests/dashboards re-validates every figure of a built site (a validating go.Figure of
# each one's dict), so an invalid property still fails there.
NO_CHECK = {"_validate": False}

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


def _figure() -> go.Figure:
    """An empty figure that skips plotly's validation (see ``NO_CHECK``), in the site's template
    from the start: a new figure otherwise copies plotly's whole default template into its
    layout, only for ``_layout`` to replace it."""
    return go.Figure(layout={"template": TEMPLATE}, **NO_CHECK)


@functools.cache
def _grid(rows: int, cols: int, vertical_spacing: float | None,
          horizontal_spacing: float | None) -> go.Figure:
    from plotly.subplots import make_subplots

    spacing = {k: v for k, v in (("vertical_spacing", vertical_spacing),
                                 ("horizontal_spacing", horizontal_spacing)) if v is not None}
    return make_subplots(rows=rows, cols=cols, figure=_figure(), **spacing)


def _subplots(*, rows: int = 1, cols: int = 1, vertical_spacing: float | None = None,
              horizontal_spacing: float | None = None) -> go.Figure:
    """``plotly.subplots.make_subplots`` into a figure that skips validation; the grid's layout
    is made once per shape and copied (make_subplots costs about 30 ms a figure)."""
    grid = _grid(rows, cols, vertical_spacing, horizontal_spacing)
    fig = go.Figure(layout=copy.deepcopy(grid.layout.to_plotly_json()), **NO_CHECK)
    fig.__dict__["_grid_ref"] = grid._grid_ref   # as make_subplots attaches them
    fig.__dict__["_grid_str"] = grid._grid_str
    return fig


# --- figures as plain dicts, made into one go.Figure at the end -----------------------------
# Every plotly call on a figure (update_layout, update_xaxes, add_hline, a new go.Figure of an
# old one's layout) walks plotly's property machinery and copies the site template; most of the
# time of the trend and distribution pages at a million events. The busy builders therefore
# write the layout as a plain dict, in the key order plotly's calls would have left (the page
# text is byte-identical), and make one unvalidated go.Figure of it.
_NUMBERED_AXIS = re.compile(r"[a-z]+axis[0-9]+")


@functools.cache
def _skeleton(rows: int | None, cols: int | None, vertical_spacing: float | None,
              horizontal_spacing: float | None) -> tuple[dict[str, Any], tuple[tuple[dict, ...], ...]]:
    """The layout of a new figure (the site template; a grid's axes when `rows`), and per grid
    cell the axes of its traces ({'xaxis': 'x2', 'yaxis': 'y2'})."""
    if rows is None:
        return _figure().to_dict()["layout"], ()
    fig = _subplots(rows=rows, cols=cols or 1, vertical_spacing=vertical_spacing,
                    horizontal_spacing=horizontal_spacing)
    cells = tuple(tuple(dict(cell[0].trace_kwargs) for cell in line) for line in fig._grid_ref)
    return fig.to_dict()["layout"], cells


def _new_layout(rows: int | None = None, cols: int | None = None, *,
                vertical_spacing: float | None = None, horizontal_spacing: float | None = None
                ) -> tuple[dict[str, Any], tuple[tuple[dict, ...], ...]]:
    """A fresh copy of ``_skeleton``'s layout, and the grid cells' trace axes (shared: read only)."""
    layout, cells = _skeleton(rows, cols, vertical_spacing, horizontal_spacing)
    return copy.deepcopy(layout), cells


def _as_figure(traces: list[dict[str, Any]], layout: dict[str, Any]) -> go.Figure:
    """One unvalidated go.Figure of plain trace dicts and a plain layout dict (its first key the
    template), the layout's keys kept in their order: a go.Figure made of a layout dict sorts
    them, so they are set one by one."""
    fig = go.Figure(data=traces, layout={"template": layout["template"]}, **NO_CHECK)
    for key, value in layout.items():
        if key == "template":
            continue
        if _NUMBERED_AXIS.fullmatch(key) and isinstance(value, dict) and value:
            # plotly validates a numbered axis set on the layout (which sorts its keys): its first
            # key is set so, the others one by one on the axis, unvalidated like the figure
            (first, first_value), *rest = value.items()
            fig.layout[key] = {first: first_value}
            axis = fig.layout[key]
            axis._validate = False
            for name, item in rest:
                axis[name] = item
        else:
            fig.layout[key] = value
    return fig


def _validated_order(value: Any) -> Any:
    """`value` with the keys of its nested dicts sorted, as a validating trace constructor (which
    ``Figure.add_trace`` uses) leaves them; lists of values are left as they are."""
    if isinstance(value, dict):
        return {k: _validated_order(v) for k, v in sorted(value.items())} if value else value
    return value


def _hline(value: float, text: str, cell: Mapping[str, str]) -> tuple[dict[str, Any], dict[str, Any]]:
    """The shape and annotation that ``Figure.add_hline(y=value, line=REFERENCE_COLOUR dashed 2 px,
    annotation_text=text, annotation_position="top left", annotation_font={"size": 10}, row, col)``
    adds on the grid cell whose trace axes are `cell` ({'xaxis': 'x2', 'yaxis': 'y2'})."""
    x, y = cell["xaxis"], cell["yaxis"]
    shape = {"line": {"color": REFERENCE_COLOUR, "dash": "dash", "width": 2}, "type": "line",
             "x0": 0, "x1": 1, "xref": f"{x} domain", "y0": value, "y1": value, "yref": y}
    note = {"font": {"size": 10}, "showarrow": False, "text": text, "x": 0, "xanchor": "left",
            "xref": f"{x} domain", "y": value, "yanchor": "bottom", "yref": y}
    return shape, note


_TITLE_SPACE = 60   # px above the plot for its title, added to each figure's height


def _layout(fig: go.Figure, title: str, height: int) -> go.Figure:
    """Template, title and height (the legend sits right of the plot, see theme.TEMPLATE)."""
    fig.update_layout(template=TEMPLATE, title={"text": title}, height=height + _TITLE_SPACE)
    return fig


def _titled(layout: dict[str, Any], title: str, height: int) -> None:
    """What `_layout` sets, on a plain layout dict of `_new_layout` (its template already set)."""
    layout.update(title={"text": title}, height=height + _TITLE_SPACE)


def _axis(layout: dict[str, Any], ref: str) -> dict[str, Any]:
    """The layout's axis that a trace's axis reference names ('x' -> xaxis, 'y2' -> yaxis2)."""
    return layout[ref[0] + "axis" + ref[1:]]


def _site_colour(colours: Mapping[str, str], site: str) -> str:
    return colours.get(site, PALETTE[len(colours) % len(PALETTE)])


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


def _min_s(seconds: float) -> str:
    total = round(seconds)
    return f"{total // 60}:{total % 60:02d}"


def _value_ticks(values: Iterable[Any], unit: Any, log: bool) -> dict[str, Any]:
    """Ticks of a value axis: full values on a log axis; fluoroscopy time (unit s) as min:s at
    whole minutes (linear) or at the log ticks."""
    if unit != "s":
        return _log_ticks(values) if log else {}
    positive = [float(v) for v in values if not _missing(v) and float(v) > 0]
    if not positive:
        return {}
    if log:   # whole seconds, then whole minutes
        lo, hi = min(positive) / 1.3, max(positive) * 1.3
        ticks = [float(t) for t in (1, 2, 5, 10, 15, 30, 60, 120, 300, 600, 900, 1800, 3600, 7200, 14400)
                 if lo <= t <= hi]
        return {"tickvals": ticks, "ticktext": [_min_s(t) for t in ticks]}
    hi = max(positive)
    step = next((m for m in (30, 60, 120, 300, 600, 900, 1800, 3600, 7200) if hi / m <= 8), 14400)
    ticks = [float(step * k) for k in range(int(hi // step) + 2)]
    return {"tickvals": ticks, "ticktext": [_min_s(t) for t in ticks]}


def _unit_text(unit: Any) -> str:
    """Unit on an axis title: 'min:s' for a time in seconds (ticks in min:s)."""
    return "min:s" if unit == "s" else unit_label(unit)


def _panel_axis_title(quantity: str, unit: Any, phantom: Any, log: bool, prefix: str = "") -> str:
    """'CTDIvol, 16 cm head phantom (mGy), log scale'."""
    name = quantity_name(quantity) + (f", {_phantom_text(phantom)}" if phantom else "")
    return f"{prefix}{name} ({_unit_text(unit)})" + (", log scale" if log else "")


def _alpha(hex_colour: str, alpha: float) -> str:
    h = hex_colour.lstrip("#")
    r, g, b = (int(h[i:i + 2], 16) for i in (0, 2, 4))
    return f"rgba({r},{g},{b},{alpha})"



_POPULATION_ORDER = ("adult", "paediatric", "unknown_age", "all")
