"""Render pages with Jinja2 (autoescaped): ``templates/base.html`` and one template per page.

PURE: records in, text out. Cell values are formatted here as plain text (escaped by the
templates); the only markup not written in a template is plotly's own ``<div>`` of a figure.
Output is deterministic: plot div ids are fixed, and the only clock value is
``Context.generated_at``, printed in the footer.
"""

from __future__ import annotations

import json
import math
from functools import cache
from typing import Any, NamedTuple

import jinja2
from plotly.io._utils import validate_coerce_fig_to_dict
from plotly.io.json import to_json_plotly
from markupsafe import Markup

from .model import CAUTIONS, PAGES, PLOTLY_JS, Context, DataLink, Note, Page, Plot, Table, \
    is_missing, slug
from .theme import quantity_name, unit_label

__all__ = ["NUMERIC_KINDS", "PLOT_CONFIG", "cell_text", "render_page", "render_table"]

PLOT_CONFIG = {"displaylogo": False, "responsive": True,
               "modeBarButtonsToRemove": ["lasso2d", "select2d", "autoScale2d"]}
_CONFIG_JSON = json.dumps(PLOT_CONFIG)
NUMERIC_KINDS = frozenset({"int", "num", "ratio", "pct", "p", "text_num", "value", "range"})
_KEY_CHARS = 12


def _sig(value: float, digits: int = 3) -> str:
    if value == 0:
        return "0"
    magnitude = math.floor(math.log10(abs(value)))
    decimals = max(0, digits - 1 - magnitude)
    return f"{value:,.{decimals}f}".replace(",", "\u2009")


def cell_text(value: Any, kind: str, row: Any = None) -> str:
    """Display text of one value (plain text; the template escapes it).

    Parameters
    ----------
    value
        The cell's value; SQL NULL shows as an en dash.
    kind
        How to format it (``dashboards.model.Column.kind``).
    row
        The whole row, for kinds that need its ``unit`` and ``quantity`` ("value").

    Returns
    -------
    str
        The text shown; fluoroscopy time as min:s (``pipeline.report.words.format_value``).

    >>> cell_text(4080.0, "value", {"unit": "s", "quantity": "fluoro_time"})
    '68:00 min:s'
    >>> cell_text(1.234, "ratio")
    '1.23'
    """
    if is_missing(value):
        return "–"
    if kind == "int":
        return f"{int(value):,}".replace(",", "\u2009")
    if kind == "num":
        return _sig(float(value))
    if kind == "value":
        unit = None if row is None or is_missing(row.get("unit")) else str(row.get("unit"))
        if unit == "s" or (row is not None and row.get("quantity") == "fluoro_time"):
            from pipeline.report.words import format_value   # the report's min:s, shared
            return format_value(float(value), "s", "fluoro_time")
        return _sig(float(value)) + (f" {unit_label(unit)}" if unit else "")
    if kind == "ratio":
        return f"{float(value):.2f}"
    if kind == "pct":
        return f"{float(value):.0f} %"
    if kind == "p":
        return f"{float(value):.1e}"
    if kind == "date":
        return str(value)[:10]
    if kind == "datetime":
        return str(value)[:19]
    if kind in ("key", "study"):
        text = str(value)
        return f"{text[:_KEY_CHARS]}…" if len(text) > _KEY_CHARS + 2 else text
    if kind == "unit":
        return unit_label(str(value))
    if kind == "quantity":
        return quantity_name(str(value))
    if kind == "bool":
        return "yes" if bool(value) else "no"
    if kind == "long":   # ids and set names may break after an underscore (zero-width space)
        return str(value).replace("_", "_\u200b")
    return str(value)


def _cell_class(kind: str) -> str:
    if kind in NUMERIC_KINDS:
        return "n"
    return {"date": "date", "datetime": "date", "key": "k", "study": "k", "long": "wrap"}.get(kind, "")


def _plot_div(plot: Plot) -> Markup:
    """A figure's div and the script that hands its ``Plotly.newPlot`` call to ``kermaPlot``
    (``templates/plots.html``), which draws it when it nears the viewport, or after the page has
    loaded: drawn inline while the page was parsed, the figures of the long pages held the
    load event back past 2 s at 10M events. The div and the JSON are plotly's own (the figure
    validated, ``</`` escaped), as ``plotly.io.to_html`` writes them."""
    fig = validate_coerce_fig_to_dict(plot.figure, True)
    height = fig.get("layout", {}).get("height")
    height = f"{height}px" if isinstance(height, int | float) else "100%"
    div_id = plot.div_id
    data, layout = to_json_plotly(fig.get("data", [])), to_json_plotly(fig.get("layout", {}))
    return Markup(  # noqa: S704 - ids are fixed slugs, the JSON is plotly's (escaped)
        f'<div style="height:{height}; width:100%;"><div id="{div_id}" class="plotly-graph-div" '
        f'style="height:100%; width:100%;"></div><script>kermaPlot("{div_id}", function () {{ '
        f'return Plotly.newPlot("{div_id}", {data}, {layout}, {_CONFIG_JSON}); }});</script></div>')


def _kind(block: Any) -> str:
    return {Plot: "plot", Table: "table", Note: "note", DataLink: "data"}[type(block)]


class _Cell(NamedTuple):
    """One shown cell: text, css class, raw value (or None), column kind, sub-values."""

    text: str
    cls: str
    raw: str | None
    kind: str
    sub: list[tuple[str, str]]


class _Row(NamedTuple):
    cells: list[_Cell]
    flags: list[str]


def _table_rows(table: Table) -> list[_Row]:
    """The shown rows: per cell (text, css class, raw value), and the row's flags. Named tuples,
    not dicts: the template reads them by attribute, which Jinja tries before the item."""
    rows = []
    # plain dicts, not iterrows(): a Series per row cost most of the time of the long tables
    for row in table.rows.head(table.max_rows).to_dict("records"):
        cells = []
        for c in table.columns:
            if c.kind == "range":   # 'low..high': two columns shown as one 'low–high'
                low, high = (row[k] for k in c.key.split("..", 1))
                text = "–" if is_missing(low) or is_missing(high) else \
                    f"{cell_text(low, 'value', row).split(' ')[0]}\u2013{cell_text(high, 'value', row)}"
                cells.append(_Cell(text, "n", None, c.kind, []))
                continue
            value = row[c.key]
            cells.append(_Cell(cell_text(value, c.kind, row), _cell_class(c.kind),
                               None if is_missing(value) else str(value), c.kind,
                               [(label, str(row[k])) for label, k in c.sub if not is_missing(row[k])]))
        rows.append(_Row(cells, table.flags(row) if table.flags else []))
    return rows


@cache
def _environment() -> jinja2.Environment:
    env = jinja2.Environment(loader=jinja2.PackageLoader("dashboards", "templates"),
                             autoescape=jinja2.select_autoescape(("html", "css")),
                             undefined=jinja2.StrictUndefined, trim_blocks=True, lstrip_blocks=True,
                             keep_trailing_newline=True)
    env.filters.update(slug=slug, kind=_kind, plot_div=_plot_div, table_rows=_table_rows,
                       cell_class=_cell_class)
    env.globals.update(CAUTIONS=CAUTIONS, PAGES=PAGES, PLOTLY_JS=PLOTLY_JS,
                       numeric=NUMERIC_KINDS, is_missing=is_missing)
    return env


def _reference_text(ctx: Context) -> str:
    sets = ctx.reference_sets
    if sets.empty:
        return "none (no audited group had a reference value in the chosen sets)"
    parts = []
    for r in sets.itertuples(index=False):
        body = f"{r.set_id}"
        if not is_missing(r.issuing_body):
            body += f" ({r.issuing_body}"
            body += f", {r.effective_date})" if not is_missing(r.effective_date) else ")"
        if not bool(r.is_verified):
            body += " [contains unverified values]"
        parts.append(body)
    return "; ".join(parts)


def _period_text(ctx: Context) -> str:
    if ctx.date_from and ctx.date_to:
        dates = f"{ctx.date_from:%d %b %Y} to {ctx.date_to:%d %b %Y}"
        return dates if ".." in ctx.period else f"{ctx.period} ({dates})"
    return ctx.period


def render_page(page: Page, ctx: Context) -> str:
    """The complete HTML document of one page, from ``templates/<page file>``."""
    has_plot = any(isinstance(b, Plot) for s in page.sections for b in s.blocks)
    return _environment().get_template(page.file).render(
        page=page, ctx=ctx, v=page.values, has_plot=has_plot, period_text=_period_text(ctx),
        reference_text=_reference_text(ctx),
        generated=ctx.generated_at.strftime("%Y-%m-%d %H:%M %Z").strip())


def render_table(table: Table) -> str:
    """One table's markup alone (the ``table`` macro of ``templates/blocks.html``)."""
    module = _environment().get_template("blocks.html").module
    return str(module.table(table, None))

