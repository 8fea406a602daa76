"""What a page is made of: PURE frozen records (no HTML here; ``dashboards.render`` and the
Jinja2 templates in ``dashboards/templates/`` turn them into markup).

A page is a list of sections; a section is a list of blocks: a table (written in full as a
CSV beside the page), a plot (a plotly figure), a link to the CSV behind a figure, or a note
(prose that lives in the page's template, chosen by key, with values to fill in).
"""

from __future__ import annotations

import datetime as dt
import math
import re
from collections.abc import Callable, Mapping
from dataclasses import dataclass, field
from typing import Any

import pandas as pd
import plotly.graph_objects as go

__all__ = [
    "CAUTIONS",
    "MAX_TABLE_ROWS",
    "PAGES",
    "PLOTLY_JS",
    "Block",
    "Column",
    "Context",
    "DataLink",
    "Note",
    "Page",
    "Plot",
    "Section",
    "Site",
    "SiteData",
    "Table",
    "is_missing",
    "slug",
]

PLOTLY_JS = "plotly.min.js"
MAX_TABLE_ROWS = 300    # longer tables are cut on the page; the CSV beside it has every row

CAUTIONS: tuple[str, ...] = (
    "A diagnostic reference level is an investigation level for optimisation, not a dose "
    "limit, and not a boundary between good and bad practice.",
    "Effective-dose figures are population-average estimates for a reference patient, not an "
    "individual patient's risk.",
    "Every flagged room, exam or trend needs review by a qualified medical physicist before "
    "anything is concluded or changed.",
    "Local regulations and licensed practice prevail over anything this report shows.",
)

# (file, navigation label, page title); the overview's title depends on the period
PAGES: tuple[tuple[str, str, str], ...] = (
    ("index.html", "Overview", "Dose audit: overview"),
    ("reference-levels.html", "Reference levels", "Room medians against reference levels"),
    ("distributions.html", "Distributions", "Dose distributions per exam type and room"),
    ("trends.html", "Trends", "Monthly medians and drift"),
    ("sites.html", "Site comparison", "Site comparison: funnel plot and ranking"),
    ("alerts.html", "Alerts", "Individual-exam alerts"),
    ("data-quality.html", "Data quality", "Data quality"),
)


def is_missing(value: Any) -> bool:
    """True for None, pandas NA/NaT and float NaN (SQL NULL in a frame)."""
    if value is None or value is pd.NA or value is pd.NaT:
        return True
    return isinstance(value, float) and math.isnan(value)


def slug(*parts: Any) -> str:
    """A stable html id from the values a block shows: 'fig-ct-dlp-adult'."""
    text = "-".join("none" if is_missing(p) else str(p) for p in parts).lower()
    return re.sub(r"[^a-z0-9]+", "-", text).strip("-")


@dataclass(frozen=True)
class Column:
    """One displayed column: source key, header, and how to format its values.

    kind: text | int | num | ratio | pct | p | date | datetime | key | unit | quantity | bool |
    text_num (text aligned as a number) | value (a dose value in its row's unit, fluoroscopy
    time as min:s; the row needs ``unit`` and ``quantity``) | study (a study pseudonym linking
    to its events on the alerts page) | long (text that may break anywhere: ids, methods).
    """

    key: str
    label: str
    kind: str = "text"
    sub: tuple[tuple[str, str], ...] = ()   # (label, key): more values in small type below


@dataclass(frozen=True)
class Table:
    """A table on a page; `rows` is written in full as `<name>.csv` beside the page.

    `note` is the key of a note in the page's template (shown under the caption); `flags`
    gives the words of the flag column of a row; a "study" cell links to the study's details
    on the alerts page when its key is in `details`.
    """

    name: str
    caption: str
    rows: pd.DataFrame
    columns: tuple[Column, ...]
    note: str = ""
    max_rows: int = MAX_TABLE_ROWS
    flags: Callable[[pd.Series], list[str]] | None = None
    details: frozenset[str] = frozenset()   # study keys with a details section (kind "study")


@dataclass(frozen=True)
class Plot:
    """A plotly figure with a fixed div id and a plain-text caption."""

    div_id: str
    figure: go.Figure
    caption: str = ""


@dataclass(frozen=True)
class Note:
    """Prose from the page's template: the `note` macro renders `key` with `values`."""

    key: str
    values: Mapping[str, Any] = field(default_factory=dict)


@dataclass(frozen=True)
class DataLink:
    """A CSV of the rows behind a figure (no HTML table)."""

    name: str
    label: str
    rows: pd.DataFrame


Block = Plot | Table | Note | DataLink


@dataclass(frozen=True)
class Section:
    """A titled part of a page with its own anchor (the tiles and the table of contents link
    to it)."""

    anchor: str
    title: str
    blocks: tuple[Block, ...]


@dataclass(frozen=True)
class Page:
    """One page: its file, navigation label, title and sections; `values` go to its template."""

    file: str
    nav: str
    title: str
    sections: tuple[Section, ...]
    values: Mapping[str, Any] = field(default_factory=dict)


@dataclass(frozen=True)
class Context:
    """What every page states: the period, the reference sets and when it was generated."""

    period: str
    date_from: dt.date | None
    date_to: dt.date | None          # last day of the period (inclusive)
    reference_sets: pd.DataFrame     # rows of dash_reference_sets.sql
    generated_at: dt.datetime
    version: str = ""

    @property
    def is_one_month(self) -> bool:
        """The period is exactly one calendar month (only then is the audit "monthly")."""
        first, last = self.date_from, self.date_to
        return (first is not None and last is not None and first.day == 1
                and (last + dt.timedelta(days=1)).day == 1
                and (first.year, first.month) == (last.year, last.month))


@dataclass(frozen=True)
class SiteData:
    """Every mart frame the site needs, one per ``queries/dashboards/dash_*.sql``."""

    overview: pd.DataFrame
    devices: pd.DataFrame
    room_medians: pd.DataFrame
    network: pd.DataFrame
    distribution: pd.DataFrame
    estimates: pd.DataFrame
    monthly: pd.DataFrame
    drift: pd.DataFrame
    funnel_sigma: pd.DataFrame
    funnel_points: pd.DataFrame
    funnel_limits: pd.DataFrame
    site_summary: pd.DataFrame
    alerts: pd.DataFrame
    alert_counts: pd.DataFrame
    unmapped: pd.DataFrame
    source_status: pd.DataFrame
    files_not_loaded: pd.DataFrame
    weight_share: pd.DataFrame
    value_issues: pd.DataFrame
    value_issue_rows: pd.DataFrame
    # data_check tier (feeds) and pseudonymisation-key epochs; empty when not given
    data_alerts: pd.DataFrame = field(default_factory=pd.DataFrame)
    key_epochs: pd.DataFrame = field(default_factory=pd.DataFrame)
    capture: pd.DataFrame | None = None          # kerma completeness; None: never run
    capture_missing: pd.DataFrame | None = None
    skin_dose_maps: pd.DataFrame = field(default_factory=pd.DataFrame)   # dash_skin_dose_maps
    alert_events: pd.DataFrame = field(default_factory=pd.DataFrame)   # dash_alert_events.sql
    device_studies: pd.DataFrame = field(default_factory=pd.DataFrame)  # dash_device_studies.sql
    # funnel groups drawn one by one (dash_funnel_drawn.sql) and cells of the others
    # (dash_funnel_cells.sql); None: every group of funnel_points is drawn
    funnel_drawn: pd.DataFrame | None = None
    funnel_cells: pd.DataFrame | None = None


@dataclass
class Site:
    """The written site: file name -> HTML, and CSV stem -> rows."""

    pages: dict[str, str] = field(default_factory=dict)
    tables: dict[str, pd.DataFrame] = field(default_factory=dict)
