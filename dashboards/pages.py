"""Pages: PURE assembly of mart rows, figures and tables into HTML strings (the one place HTML is written).

``build_site(data, context)`` returns every page's HTML and every table's rows (written as
CSV beside the page by ``dashboards.site``). Output is deterministic: plot ``div`` ids are
derived from what they show, rows are sorted by the SQL, and the only clock value is
``context.generated_at``, printed in the footer.
"""

from __future__ import annotations

import datetime as dt
import html
import math
import re
from collections.abc import Callable, Iterable, Sequence
from dataclasses import dataclass, field
from typing import Any

import pandas as pd
import plotly.graph_objects as go
import plotly.io as pio

from . import figures
from .theme import PALETTE, colour_map, quantity_name, unit_label

__all__ = [
    "CAUTIONS",
    "PAGES",
    "Column",
    "Context",
    "Page",
    "Plot",
    "Section",
    "Site",
    "SiteData",
    "Table",
    "build_site",
    "render_page",
]

PLOTLY_JS = "plotly.min.js"
PLOT_CONFIG = {"displaylogo": False, "responsive": True,
               "modeBarButtonsToRemove": ["lasso2d", "select2d", "autoScale2d"]}
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

# (file, navigation label, page title)
PAGES: tuple[tuple[str, str, str], ...] = (
    ("index.html", "Overview", "Monthly dose audit: overview"),
    ("reference-levels.html", "Reference levels", "Room medians against reference levels"),
    ("distributions.html", "Distributions", "Dose distributions per exam type and room"),
    ("trends.html", "Trends", "Monthly medians and drift"),
    ("sites.html", "Site comparison", "Site comparison: funnel plot and ranking"),
    ("alerts.html", "Alerts", "Individual-exam alerts"),
    ("data-quality.html", "Data quality", "Data quality"),
)


# --- data model ---------------------------------------------------------------------------
@dataclass(frozen=True)
class Column:
    """One displayed column: source key, header, and how to format its values."""

    key: str
    label: str
    kind: str = "text"   # text | int | num | ratio | pct | date | key | p | flag | unit | quantity


@dataclass(frozen=True)
class Table:
    """A table on a page; `rows` is written in full as `<name>.csv` beside the page."""

    name: str
    caption: str
    rows: pd.DataFrame
    columns: tuple[Column, ...]
    note: str = ""
    max_rows: int = MAX_TABLE_ROWS
    flags: Callable[[pd.Series], list[str]] | None = None


@dataclass(frozen=True)
class Plot:
    div_id: str
    figure: go.Figure
    caption: str = ""


@dataclass(frozen=True)
class Note:
    """A paragraph of trusted markup built in this module (inputs already escaped)."""

    markup: str


@dataclass(frozen=True)
class DataLink:
    """A CSV of the rows behind a figure (no HTML table)."""

    name: str
    label: str
    rows: pd.DataFrame


Block = Plot | Table | Note | DataLink


@dataclass(frozen=True)
class Section:
    anchor: str
    title: str
    blocks: tuple[Block, ...]
    intro: str = ""


@dataclass(frozen=True)
class Page:
    file: str
    nav: str
    title: str
    lede: str
    sections: tuple[Section, ...]


@dataclass(frozen=True)
class Context:
    """What every page states: the period, the reference sets and when it was generated."""

    period: str
    date_from: dt.date | None
    date_to: dt.date | None          # last day of the period (inclusive)
    reference_sets: pd.DataFrame     # rows of dash_reference_sets.sql
    generated_at: dt.datetime
    version: str = ""


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


@dataclass
class Site:
    pages: dict[str, str] = field(default_factory=dict)
    tables: dict[str, pd.DataFrame] = field(default_factory=dict)


# --- formatting -----------------------------------------------------------------------------
def _e(value: Any) -> str:
    return html.escape("" if _missing(value) else str(value), quote=True)


def _missing(value: Any) -> bool:
    if value is None or value is pd.NA or value is pd.NaT:
        return True
    return isinstance(value, float) and math.isnan(value)


def _sig(value: float, digits: int = 3) -> str:
    if value == 0:
        return "0"
    magnitude = math.floor(math.log10(abs(value)))
    decimals = max(0, digits - 1 - magnitude)
    return f"{value:,.{decimals}f}".replace(",", "\u2009")


def _cell(value: Any, kind: str) -> str:
    """Escaped display text of one value."""
    if _missing(value):
        return "–"
    if kind == "int":
        return f"{int(value):,}".replace(",", "\u2009")
    if kind == "num":
        return _sig(float(value))
    if kind == "ratio":
        return f"{float(value):.2f}"
    if kind == "pct":
        return f"{float(value):.0f} %"
    if kind == "p":
        return f"{float(value):.1e}"
    if kind == "date":
        return f'<span class="nowrap">{_e(str(value)[:10])}</span>'
    if kind == "key":
        text = str(value)
        return f'<span class="key" title="{_e(text)}">{_e(text[:12])}…</span>' if len(text) > 14 else _e(text)
    if kind == "unit":
        return _e(unit_label(str(value)))
    if kind == "quantity":
        return _e(quantity_name(str(value)))
    if kind == "bool":
        return "yes" if bool(value) else "no"
    return _e(value)


_NUMERIC = {"int", "num", "ratio", "pct", "p", "text_num"}


def slug(*parts: Any) -> str:
    """A stable html id from the values a block shows: 'fig-ct-dlp-adult'."""
    text = "-".join("none" if _missing(p) else str(p) for p in parts).lower()
    return re.sub(r"[^a-z0-9]+", "-", text).strip("-")


# --- rendering --------------------------------------------------------------------------------
def _render_table(table: Table) -> str:
    rows = table.rows
    shown = rows.head(table.max_rows)
    head = "".join(f'<th scope="col" class="{"n" if c.kind in _NUMERIC else ""}">{_e(c.label)}</th>'
                   for c in table.columns)
    if table.flags is not None:
        head += '<th scope="col">Flags</th>'
    body = []
    for _, row in shown.iterrows():
        cells = "".join(f'<td class="{"n" if c.kind in _NUMERIC else ""}">{_cell(row[c.key], c.kind)}</td>'
                        for c in table.columns)
        if table.flags is not None:
            cells += "<td>" + " ".join(f'<span class="flag flag-{slug(f)}">{_e(f)}</span>'
                                       for f in table.flags(row)) + "</td>"
        body.append(f"<tr>{cells}</tr>")
    if not body:
        width = len(table.columns) + (1 if table.flags is not None else 0)
        body.append(f'<tr><td colspan="{width}" class="empty">No rows for this period.</td></tr>')
    cut = (f'<p class="cut">Showing the first {len(shown)} of {len(rows)} rows; '
           f'<a href="{table.name}.csv">{table.name}.csv</a> has all of them.</p>'
           if len(rows) > len(shown) else "")
    note = f'<p class="note">{table.note}</p>' if table.note else ""
    return (f'<figure class="table" id="table-{table.name}">'
            f'<figcaption><span>{_e(table.caption)}</span>'
            f'<a class="csv" href="{table.name}.csv" download>CSV ({len(rows)} rows)</a></figcaption>'
            f'{note}<div class="scroll"><table><thead><tr>{head}</tr></thead>'
            f'<tbody>{"".join(body)}</tbody></table></div>{cut}</figure>')


def _render_plot(plot: Plot) -> str:
    div = pio.to_html(plot.figure, full_html=False, include_plotlyjs=False, div_id=plot.div_id,
                      config=PLOT_CONFIG, validate=True)
    caption = f"<figcaption>{plot.caption}</figcaption>" if plot.caption else ""
    return f'<figure class="plot">{div}{caption}</figure>'


def _render_block(block: Block) -> str:
    if isinstance(block, Plot):
        return _render_plot(block)
    if isinstance(block, Table):
        return _render_table(block)
    if isinstance(block, DataLink):
        return (f'<p class="data-link">Data behind the figures: <a href="{block.name}.csv" download>'
                f'{_e(block.label)} ({block.name}.csv, {len(block.rows)} rows)</a></p>')
    return f'<div class="note-block">{block.markup}</div>'


def _reference_text(ctx: Context) -> str:
    sets = ctx.reference_sets
    if sets.empty:
        return "none (no audited group had a reference value in the chosen sets)"
    parts = []
    for r in sets.itertuples(index=False):
        body = f"{r.set_id}"
        if not _missing(r.issuing_body):
            body += f" ({r.issuing_body}"
            body += f", {r.effective_date})" if not _missing(r.effective_date) else ")"
        if not bool(r.is_verified):
            body += " [contains unverified values]"
        parts.append(_e(body))
    return "; ".join(parts)


def _period_text(ctx: Context) -> str:
    if ctx.date_from and ctx.date_to:
        dates = f"{ctx.date_from:%d %b %Y} to {ctx.date_to:%d %b %Y}"
        return dates if ".." in ctx.period else f"{_e(ctx.period)} ({dates})"
    return _e(ctx.period)


def render_page(page: Page, ctx: Context) -> str:
    """The complete HTML document of one page."""
    has_plot = any(isinstance(b, Plot) for s in page.sections for b in s.blocks)
    current = ' aria-current="page"'
    nav = "".join(f'<li><a href="{f}"{current if f == page.file else ""}>{_e(label)}</a></li>'
                  for f, label, _ in PAGES)
    toc = "".join(f'<li><a href="#{s.anchor}">{_e(s.title)}</a></li>' for s in page.sections)
    sections = []
    for s in page.sections:
        intro = f'<p class="intro">{s.intro}</p>' if s.intro else ""
        blocks = "".join(_render_block(b) for b in s.blocks)
        sections.append(f'<section id="{s.anchor}"><h2>{_e(s.title)}</h2>{intro}{blocks}</section>')
    cautions = "".join(f"<li>{_e(c)}</li>" for c in CAUTIONS)
    generated = ctx.generated_at.strftime("%Y-%m-%d %H:%M %Z").strip()
    script = f'<script src="{PLOTLY_JS}" charset="utf-8"></script>' if has_plot else ""
    return f"""<!DOCTYPE html>
<html lang="en">
<head>
<meta charset="utf-8">
<meta name="viewport" content="width=device-width, initial-scale=1">
<meta name="generator" content="Kerma Ledger {_e(ctx.version)}">
<title>{_e(page.title)} · {_e(ctx.period)} · Kerma Ledger</title>
<style>{_CSS}</style>
{script}
</head>
<body>
<header class="masthead">
<div class="wrap">
<p class="brand">Kerma Ledger <span>patient dose audit</span></p>
<h1>{_e(page.title)}</h1>
<p class="period">Audit period <strong>{_period_text(ctx)}</strong></p>
</div>
<nav class="wrap" aria-label="Pages"><ul>{nav}</ul></nav>
</header>
<main class="wrap">
<aside class="cautions" aria-label="Cautions"><h2>Read before acting on this report</h2><ul>{cautions}</ul></aside>
<p class="lede">{page.lede}</p>
{f'<nav class="toc" aria-label="On this page"><ul>{toc}</ul></nav>' if len(page.sections) > 1 else ""}
{"".join(sections)}
</main>
<footer class="wrap">
<p><strong>Period:</strong> {_period_text(ctx)}.</p>
<p><strong>Reference set(s):</strong> {_reference_text(ctx)}.</p>
<p><strong>Generated:</strong> {_e(generated)} by Kerma Ledger {_e(ctx.version)}, from the audited warehouse. Patients and studies appear only as pseudonymous keys.</p>
<p class="cautions-short">{_e(" ".join(CAUTIONS))}</p>
</footer>
</body>
</html>
"""


# --- shared pieces ------------------------------------------------------------------------------
def _empty(text: str) -> Note:
    return Note(f'<p class="empty">{_e(text)}</p>')


def _room_flags(row: pd.Series) -> list[str]:
    flags = []
    if bool(row.get("is_above_reference", False)):
        flags.append("above reference")
    if bool(row.get("is_well_below_reference", False)):
        flags.append("well below reference")
    if not bool(row.get("is_sample_adequate", True)):
        flags.append("too few")
    if _missing(row.get("reference_value")):
        flags.append("no reference value")
    return flags


_ROOM_COLUMNS = (
    Column("exam_label", "Exam type"), Column("population", "Population"), Column("stratum", "Band"),
    Column("site_label", "Site"), Column("room_label", "Room"), Column("quantity", "Quantity", "quantity"),
    Column("unit", "Unit", "unit"), Column("n", "n", "int"), Column("min_sample", "Minimum n", "int"),
    Column("median", "Median", "num"),
    Column("median_ci_low", "95 % CI low", "num"), Column("median_ci_high", "95 % CI high", "num"),
    Column("reference_value", "Reference", "num"), Column("ratio_to_reference", "Ratio", "ratio"),
    Column("network_p75", "Network P75", "num"), Column("reference_set", "Set"),
    Column("reference_scope_note", "What the comparison means"),
)


def _drift_table(drift: pd.DataFrame) -> Table:
    rows = drift.assign(change_pct=(drift["ratio_after_to_before"] - 1.0) * 100.0) if not drift.empty \
        else drift.assign(change_pct=pd.Series(dtype=float))
    return Table(
        "drift-flags", "Drift flags: a change of the monthly median at a month boundary", rows,
        (Column("site_label", "Site"), Column("room_label", "Room"), Column("exam_label", "Exam type"),
         Column("quantity", "Quantity", "quantity"), Column("unit", "Unit", "unit"),
         Column("change_month", "From month"), Column("median_before", "Median before", "num"),
         Column("median_after", "Median after", "num"), Column("change_pct", "Change (%)", "num"),
         Column("n_before", "n before", "int"), Column("n_after", "n after", "int"),
         Column("p_value_bonferroni", "p (Bonferroni)", "p")))


def _tile(value: str, label: str, detail: str, href: str, state: str) -> str:
    word = {"review": "review", "ok": "none to review", "info": ""}[state]
    badge = f'<span class="state">{word}</span>' if word else ""
    return (f'<a class="tile tile-{state}" href="{href}"><span class="value">{value}</span>'
            f'<span class="label">{_e(label)}</span><span class="detail">{detail}</span>{badge}</a>')


def _int(frame: pd.DataFrame, column: str) -> int:
    if frame.empty or _missing(frame[column].iloc[0]):
        return 0
    return int(frame[column].iloc[0])


def _pct(part: int, whole: int) -> str:
    return f"{100.0 * part / whole:.1f} %" if whole else "–"


_DATA_ALERT_COLUMNS = (
    Column("kind", "Kind"), Column("site_label", "Site"), Column("room_label", "Room"),
    Column("last_study_date", "Last study", "date"), Column("expected_per_week", "Usual studies / week", "num"),
    Column("observed_per_week", "Studies / week in period", "num"), Column("detail", "Detail"),
    Column("item_id", "Item", "key"))

NO_DATA = "no data for this period"


def _data_checks(data: SiteData, n_studies: int) -> Section:
    """The data_check tier, shown before the dose findings: no data is never a clean month."""
    blocks: list[Block] = []
    if n_studies == 0:
        blocks.append(Note(f'<p class="finding-no-data"><strong>Finding: {NO_DATA}.</strong> The warehouse '
                           "holds no study dated in the audit period, so no dose finding can be made. "
                           "This is not a clean audit: check that the period's dose reports were "
                           "received and ingested.</p>"))
    rows = data.data_alerts
    device_rows = rows[rows["device_key"].notna()] if not rows.empty else rows
    blocks.append(Table("overview-data-alerts", "Feeds of dose reports to check (data_check)", device_rows,
                        _DATA_ALERT_COLUMNS,
                        note="A device that sent nothing for several days at the end of the period, or far "
                             "fewer studies per week than over the previous months, may have lost its "
                             "export of dose reports: its exams are missing from the audit below."))
    epochs = data.key_epochs
    if len(epochs) > 1:
        since = ", ".join(f"epoch {int(r.epoch)} from {pd.Timestamp(r.started_at):%Y-%m-%d}"
                          for r in epochs.iloc[1:].itertuples(index=False))
        blocks.append(Note(f'<p class="key-epochs"><strong>Patients are not linked across key epochs</strong> '
                           f"({_e(since)}): files loaded from that date carry pseudonyms of a new key, so "
                           "cumulative-dose checks do not join a patient's studies across the change.</p>"))
    return Section("data-checks", "Data checks (review first)", tuple(blocks))


# --- the pages --------------------------------------------------------------------------------
def _overview(data: SiteData, ctx: Context, drift: Table) -> Page:
    o = data.overview
    n_studies = _int(o, "n_studies")
    above = _int(o, "n_exam_types_above")
    tiles = [
        _tile(f"{n_studies:,}".replace(",", "\u2009"), "Studies in the period",
              f"{_int(o, 'n_devices')} devices at {_int(o, 'n_sites')} sites", "data-quality.html#weight", "info"),
        _tile(str(_int(o, "n_devices")), "Irradiating devices", "rooms with at least one study",
              "distributions.html", "info"),
        _tile(str(_int(o, "n_sites")), "Sites", "compared in the funnel plot", "sites.html", "info"),
        _tile(f"{above} of {_int(o, 'n_exam_types_with_reference')}", "Exam types above their reference level",
              f"{_int(o, 'n_groups_above')} room groups above, {_int(o, 'n_groups_above_adequate')} of them "
              f"with an adequate sample", "reference-levels.html", "review" if above else "ok"),
        _tile(str(_int(o, "n_alerts")), "Individual-exam alerts",
              f"in {_int(o, 'n_alert_studies')} studies", "alerts.html",
              "review" if _int(o, "n_alerts") else "ok"),
        _tile(str(_int(o, "n_drift_flags")), "Drift flags", "changes of a room's monthly median",
              "trends.html", "review" if _int(o, "n_drift_flags") else "ok"),
        _tile(_pct(_int(o, "n_unmapped"), n_studies), "Studies not mapped to an exam type",
              f"{_int(o, 'n_unmapped')} of {n_studies}", "data-quality.html#unmapped",
              "review" if _int(o, "n_unmapped") else "ok"),
        _tile(str(_int(o, "n_quarantined")), "Quarantined files",
              f"of {_int(o, 'n_files')} files received; {_int(o, 'n_not_dose')} were not dose objects",
              "data-quality.html#files", "review" if _int(o, "n_quarantined") else "ok"),
        _tile(_pct(_int(o, "n_with_weight"), n_studies), "Studies with patient weight",
              "needed for standard-size medians and SSDE", "data-quality.html#weight", "info"),
    ]
    rm = data.room_medians
    above_rows = rm[rm["is_above_reference"].fillna(False).astype(bool)].sort_values(
        ["ratio_to_reference", "exam_label", "site_label", "room_label"], ascending=[False, True, True, True]) \
        if not rm.empty else rm
    findings = Table("overview-above-reference", "Room medians above their reference level", above_rows,
                     _ROOM_COLUMNS, flags=_room_flags,
                     note="Sorted by ratio to the reference level. A group marked <em>too few</em> has "
                          "fewer exams than the audit's minimum sample, so its median is uncertain.")
    sets = Table("overview-reference-sets", "Reference-level sets used by this audit", ctx.reference_sets,
                 (Column("set_id", "Set"), Column("issuing_body", "Issuing body"),
                  Column("version", "Version"), Column("effective_date", "Effective"),
                  Column("citation_title", "Source"), Column("is_verified", "Verified", "bool"),
                  Column("n_groups", "Groups compared", "int")))
    top_alerts = alert_rows(data.alerts).head(10)
    alerts = Table("overview-top-alerts", "The ten most urgent alerts (patient follow-up first)", top_alerts,
                   _ALERT_COLUMNS, note='All alerts are on the <a href="alerts.html">alerts page</a>.')
    one_month = (ctx.date_from is not None and ctx.date_to is not None and ctx.date_from.day == 1
                 and (ctx.date_to + dt.timedelta(days=1)).day == 1
                 and ctx.date_to.month == ctx.date_from.month and ctx.date_to.year == ctx.date_from.year)
    return Page(
        "index.html", "Overview", PAGES[0][2] if one_month else "Dose audit of the period: overview",
        f"The {'month' if one_month else 'period'}'s radiation-dose audit of the network at a glance. "
        "Each tile links to the page "
        "with the detail. Medians are compared with the reference levels by the ICRP Publication 135 "
        "method: the median per room and exam type, with its 95 % confidence interval.",
        (_data_checks(data, n_studies),
         Section("glance", "At a glance", (Note(f'<div class="tiles">{"".join(tiles)}</div>'),)),
         Section("findings", "Findings to review",
                 (findings, drift, alerts) if n_studies else
                 (_empty(f"No dose findings can be made: {NO_DATA}."),)),
         Section("sets", "Reference sets", (sets,))),
    )


def _family_sections(frame: pd.DataFrame) -> list[tuple[str, pd.DataFrame]]:
    if frame.empty:
        return []
    order = frame.groupby("modality_family", sort=False)["family_order"].min().sort_values(kind="stable")
    return [(str(f), frame[frame["modality_family"] == f]) for f in order.index]


def _reference_levels(data: SiteData, site_colours: dict[str, str]) -> Page:
    sections = []
    for family, part in _family_sections(data.room_medians):
        blocks: list[Block] = []
        keys = part[["quantity", "population"]].drop_duplicates().sort_values(
            ["population", "quantity"], kind="stable")
        for q, pop in keys.itertuples(index=False):
            rows = part[(part["quantity"] == q) & (part["population"] == pop)]
            n_ref = int(rows["reference_value"].notna().sum())
            title = f"{family}: {quantity_name(q)}, {pop} patients"
            caption = (f"{len(rows)} room groups; {n_ref} with a reference value. Dot: room median; bar: "
                       "95 % confidence interval of the median (order statistics); vertical tick: reference "
                       "level (one colour per set); grey diamond: the network's 75th percentile of room medians (a local "
                       "DRL in the sense of ICRP 135 only when it comes from at least 10 rooms). Open dot: fewer "
                       "exams than the audit minimum.")
            blocks.append(Plot(f"fig-ref-{slug(family, q, pop)}",
                               figures.build_reference_comparison(rows, site_colours=site_colours, title=title),
                               _e(caption)))
        sections.append(Section(slug(family), family, tuple(blocks)))
    table = Table("reference-room-medians", "Every audit group: room median, interval, reference and network values",
                  data.room_medians, _ROOM_COLUMNS, flags=_room_flags)
    network = Table("reference-network", "Network values per exam type (ICRP 135)", data.network,
                    (Column("exam_label", "Exam type"), Column("population", "Population"),
                     Column("stratum", "Band"),
                     Column("quantity", "Quantity", "quantity"), Column("unit", "Unit", "unit"),
                     Column("n_rooms", "Rooms (adequate)", "int"), Column("n_rooms_all", "Rooms (all)", "int"),
                     Column("n_exams", "Exams", "int"), Column("typical_value", "Typical (median of medians)", "num"),
                     Column("p75_of_room_medians", "75th percentile of medians", "num"),
                     Column("local_drl", "Local DRL (>= 10 rooms)", "num"),
                     Column("reference_value", "Reference", "num"),
                     Column("ratio_p75_to_reference", "P75 ÷ reference", "ratio"),
                     Column("reference_set", "Set"), Column("reference_scope_note", "What the comparison means")),
                    note="The network's 75th percentile uses only rooms with an adequate sample; it is a "
                         "local DRL (ICRP 135) only when it comes from at least min_rooms_local_drl rooms "
                         "(default 10). With fewer rooms, compare with the typical value.")
    if not sections:
        sections.append(Section("none", "No audited groups", (_empty(
            "No exam in the period maps to a standard exam type with a dose value."),)))
    sections.append(Section("tables", "Tables", (table, network)))
    return Page("reference-levels.html", "Reference levels", PAGES[1][2],
                "For each exam type, each room's median dose in the period with its 95 % confidence "
                "interval, against the reference level in force and the network's own 75th percentile. "
                "A median above the reference level is a prompt to investigate, not a verdict.",
                tuple(sections))


def _distributions(data: SiteData) -> Page:
    sections = []
    frame = data.distribution
    for family, part in _family_sections(frame):
        blocks: list[Block] = []
        for exam in sorted(part["exam_label"].unique()):
            rows = part[part["exam_label"] == exam]
            blocks.append(Plot(f"fig-dist-{slug(rows['exam_type'].iloc[0])}",
                               figures.build_distribution(rows, title=str(exam)),
                               "Box: interquartile range with the median; whiskers: 5th to 95th "
                               "percentile. Unfilled box: fewer exams than the audit minimum. "
                               "Dashed line: reference level."))
        sections.append(Section(slug(family), family, tuple(blocks)))
    if not sections:
        sections.append(Section("none", "No audited values", (_empty("No audited values in the period."),)))
    sections.append(Section("data", "Data", (DataLink("distributions", "order statistics per room, exam type, "
                                                                        "quantity and population", frame),)))
    estimates = Table(
        "ct-dose-estimates", "CT: SSDE and effective-dose estimates per exam type and room", data.estimates,
        (Column("exam_label", "Exam type"), Column("site_label", "Site"), Column("room_label", "Room"),
         Column("n_studies", "Studies", "int"), Column("n_with_effective_dose", "With E", "int"),
         Column("median_effective_dose_msv", "Median E (mSv)", "num"),
         Column("p25_effective_dose_msv", "E P25 (mSv)", "num"),
         Column("p75_effective_dose_msv", "E P75 (mSv)", "num"),
         Column("effective_dose_basis", "E basis"), Column("n_with_ssde", "With SSDE", "int"),
         Column("n_ssde_reported", "SSDE reported by device", "int"),
         Column("median_ssde_mgy", "Median SSDE (mGy)", "num")),
        note="Effective dose E = k × DLP with age- and region-specific coefficients: a population-average "
             "estimate for a reference patient, never an individual's risk. SSDE is the device's value, else "
             "the AAPM Report 204 fit at the water-equivalent diameter (AAPM Report 220).")
    sections.append(Section("estimates", "CT dose estimates", (estimates,)))
    return Page("distributions.html", "Distributions", PAGES[2][2],
                "The spread of the audited values per exam type and room in the period, adults and "
                "paediatric patients side by side, with the reference level drawn. Radiography and "
                "mammography values are per radiograph or view; the others per examination.",
                tuple(sections))


def _trends(data: SiteData, site_colours: dict[str, str], drift: Table) -> Page:
    sections = []
    frame = data.monthly
    for family, part in _family_sections(frame):
        blocks: list[Block] = []
        for exam_type in sorted(part["exam_type"].unique(), key=lambda e: str(part[part["exam_type"] == e]["exam_label"].iloc[0])):
            rows = part[part["exam_type"] == exam_type]
            flags = data.drift[data.drift["exam_type"] == exam_type] if not data.drift.empty else data.drift
            blocks.append(Plot(f"fig-trend-{slug(exam_type)}",
                               figures.build_trend(rows, flags, site_colours=site_colours,
                                                   title=str(rows["exam_label"].iloc[0])),
                               "Adult patients. Point: monthly median; bar: interquartile range. "
                               "Dash-dotted line: a drift flag at the first month after the change."))
        sections.append(Section(slug(family), family, tuple(blocks)))
    if not sections:
        sections.append(Section("none", "No monthly medians", (_empty("No monthly medians up to the period end."),)))
    sections.append(Section("drift", "Drift flags", (
        drift,
        Note('<p class="note">A drift flag is a change point of a room\'s monthly series: the '
             'Mann-Whitney test at every month boundary, the largest |z| kept, Bonferroni-corrected, '
             'and reported only when the median also moved by a material amount.</p>'),
        DataLink("trends-monthly-medians", "monthly medians per room, exam type and quantity", frame))))
    return Page("trends.html", "Trends", PAGES[3][2],
                "Monthly median per room and exam type over the available history up to the end of the "
                "period, with the reference level and the drift flags at the month they start.",
                tuple(sections))


_FUNNEL_COLUMNS = (
    Column("rank", "Rank", "int"), Column("site_label", "Site"), Column("room_label", "Room"),
    Column("exam_label", "Exam type"), Column("population", "Population"),
    Column("quantity", "Quantity", "quantity"), Column("unit", "Unit", "unit"), Column("n", "n", "int"),
    Column("median", "Median", "num"), Column("typical_value", "Network typical", "num"),
    Column("ratio_to_typical", "Ratio to typical", "ratio"), Column("z", "z", "ratio"),
    Column("funnel_zone", "Funnel position"), Column("reference_value", "Reference", "num"),
    Column("ratio_to_reference", "Ratio to reference", "ratio"), Column("reference_set", "Set"),
)


def _sites(data: SiteData, site_colours: dict[str, str]) -> Page:
    points = data.funnel_points
    blocks: list[Block] = []
    sigma = data.funnel_sigma
    for q in sorted(points["quantity"].unique()) if not points.empty else []:
        part = points[points["quantity"] == q]
        lim = data.funnel_limits[data.funnel_limits["quantity"] == q] if not data.funnel_limits.empty \
            else data.funnel_limits
        s = sigma[sigma["quantity"] == q]
        s_text = (f"σ = {float(s['sigma_log'].iloc[0]):.2f} (log scale) pooled from "
                  f"{int(s['n_groups_pooled'].iloc[0])} room groups"
                  if not s.empty and not _missing(s["sigma_log"].iloc[0]) else "spread not estimable")
        blocks.append(Plot(f"fig-funnel-{slug(q)}",
                           figures.build_funnel(part, lim, site_colours=site_colours,
                                                title=f"{quantity_name(q)} ({unit_label(part['unit'].iloc[0])}): "
                                                      "ratio to the network typical value"),
                           _e(f"Each point is one room and exam type. Upper control limits above the "
                              f"network typical value (ratio 1, the median of the room medians, ICRP 135) "
                              f"at 95 % and 99.8 %, for log-normal doses with {s_text}. A point above the "
                              "99.8 % limit is above the network's typical value by more than sampling noise "
                              "explains; only such points are counted. The reference level of each group, "
                              "where one applies, is its own red mark. Open marker: fewer exams than the "
                              "audit minimum.")))
    if not blocks:
        blocks.append(_empty("No audited group has a network typical value (too few adequate samples), so "
                             "there is no funnel to draw."))
    ranked_rows = points.assign(rank=range(1, len(points) + 1)) if not points.empty \
        else points.assign(rank=pd.Series(dtype="int64"))
    ranked = Table("sites-ranked", "Ranked: room groups by ratio to the network typical value", ranked_rows,
                   _FUNNEL_COLUMNS, flags=_room_flags)
    summary = Table("sites-summary", "Per site", data.site_summary,
                    (Column("site_label", "Site"), Column("n_rooms", "Rooms", "int"),
                     Column("n_groups", "Groups with a reference", "int"), Column("n_exams", "Exams", "int"),
                     Column("n_above_reference", "Above reference", "int"),
                     Column("n_above_998", "Above 99.8 % limit", "int"),
                     Column("n_above_95", "Above 95 % limit only", "int"),
                     Column("n_insufficient", "Too few exams", "int"),
                     Column("median_ratio", "Median ratio", "ratio"), Column("max_ratio", "Highest ratio", "ratio")))
    return Page("sites.html", "Site comparison", PAGES[4][2],
                "Every room's median relative to the network's typical value, against the number of exams "
                "behind it; reference levels are marked separately. Few exams give a wide funnel: a high "
                "ratio from a small sample may be chance.",
                (Section("funnel", "Funnel plots", (*blocks, DataLink("sites-funnel-limits", "control limits",
                                                                      data.funnel_limits))),
                 Section("summary", "Per site", (summary,)),
                 Section("ranked", "Ranked table", (ranked,))))


_ALERT_COLUMNS = (
    Column("action_text", "Action"),
    Column("study_date", "Date", "date"), Column("study_key", "Study (pseudonym)", "key"),
    Column("patient_key", "Patient (pseudonym)", "key"), Column("site_label", "Site"),
    Column("room_label", "Room"), Column("exam_label", "Exam type"), Column("rule_text", "Rule"),
    Column("quantity", "Quantity", "quantity"), Column("value_text", "Value", "text_num"),
    Column("threshold_text", "Threshold", "text_num"),
    Column("factor", "× threshold", "ratio"), Column("method", "How the value was computed"),
    Column("source", "Source of the threshold"),   # says "from memory" when not verified (CSV: threshold_verified)
    Column("latest_note", "Latest review note"), Column("item_id", "Item", "key"),
)


_EVENT_COLUMNS = (
    Column("study_key", "Study (pseudonym)", "key"), Column("started_at", "Started"),
    Column("event_type", "Event type"), Column("acquisition_protocol", "Protocol"),
    Column("target_region", "Target region"), Column("kvp", "kVp", "num"),
    Column("ctdivol_mgy", "CTDIvol (mGy)", "num"), Column("dlp_mgy_cm", "DLP (mGy·cm)", "num"),
    Column("ctdi_phantom", "Phantom"), Column("dap_gy_cm2", "DAP (Gy·cm²)", "num"),
    Column("dose_rp_mgy", "Ka,r (mGy)", "num"), Column("irradiation_duration_s", "Duration (s)", "num"),
)


def alert_rows(alerts: pd.DataFrame) -> pd.DataFrame:
    """Alerts most urgent first (patient follow-up, protocol review, statistical review; then
    furthest beyond the threshold), with the rule in plain words and values in reading units
    (fluoroscopy time in min:s); the numeric columns stay for the CSV."""
    from pipeline.report.words import ACTION_WORDS, action_rank, format_value, rule_words

    if alerts.empty:
        return alerts.assign(action_text=pd.Series(dtype=str), rule_text=pd.Series(dtype=str),
                             value_text=pd.Series(dtype=str), threshold_text=pd.Series(dtype=str))
    out = alerts.assign(
        action_text=[ACTION_WORDS.get(a, a) for a in alerts["action"]],
        rule_text=[rule_words(r.rule, r.family, r.quantity, r.threshold, r.unit)
                   for r in alerts.itertuples()],
        value_text=[format_value(r.value, r.unit, r.quantity) for r in alerts.itertuples()],
        threshold_text=[format_value(r.threshold, r.unit, r.quantity) for r in alerts.itertuples()],
        _tier=[action_rank(a) for a in alerts["action"]])
    return out.sort_values("_tier", kind="stable").drop(columns="_tier").reset_index(drop=True)


def _alerts(data: SiteData, site_colours: dict[str, str]) -> Page:
    blocks: list[Block] = []
    if not data.alert_counts.empty:
        blocks.append(Plot("fig-alert-counts", figures.build_alert_counts(
            data.alert_counts, site_colours=site_colours, title="Alerts per rule and site"), ""))
    else:
        blocks.append(_empty("No individual-exam alert fired in the period."))
    counts = Table("alerts-by-rule", "Alerts per rule and site", data.alert_counts,
                   (Column("rule", "Rule"), Column("site_label", "Site"), Column("n_alerts", "Alerts", "int"),
                    Column("n_studies", "Studies", "int")))
    listing = Table("alerts", "Every alert, patient follow-up first, then furthest beyond its threshold",
                    alert_rows(data.alerts), _ALERT_COLUMNS,
                    note="Patients and studies appear only as keyed pseudonyms; the pseudonymisation key "
                         "holder can re-identify a study for follow-up. For a low outlier the factor is "
                         "threshold ÷ value.")
    sections = [Section("counts", "By rule and site", (*blocks, counts)),
                Section("list", "Alert list", (listing,)),
                Section("events", "Study details: the events of each alerted study",
                        (Table("alert-events", "Irradiation events of the studies with an alert",
                               data.alert_events, _EVENT_COLUMNS,
                               note="Find a study by its pseudonym from the alert list: "
                                    "protocol, CTDIvol and DLP per CT acquisition, DAP and "
                                    "Ka,r per projection event."),))]
    if not data.skin_dose_maps.empty:
        sections.append(_skin_dose_section(data.skin_dose_maps))
    return Page("alerts.html", "Alerts", PAGES[5][2],
                "Single examinations that crossed a follow-up threshold: substantial-dose levels for "
                "fluoroscopy, CT dose-check values, robust outliers within a room and exam type, and "
                "cumulative effective-dose estimates. Each row gives the rule, the value, the threshold "
                "and where the threshold comes from.",
                tuple(sections))


_SKIN_DOSE_CAUTION = (
    "Each map is an <strong>estimate</strong> of skin dose from the dose report's geometry on a "
    "simple elliptical-cylinder phantom: typically within about &plusmn;40&nbsp;%, and it depends "
    "on the phantom, the table-height convention and the factors used (backscatter, tissue-to-air "
    "ratio, table and pad transmission; <code>skin_dose.factor_sources</code>). NCRP Report "
    "No.&nbsp;168 asks for patient follow-up at a peak skin dose of 3&nbsp;Gy: clinical follow-up "
    "is by the responsible physician, with a qualified medical physicist reviewing the estimate. "
    "Local regulations prevail.")


def _skin_dose_section(maps: pd.DataFrame) -> Section:
    """One skin-dose map per study with a peak-skin-dose alert, and the cautions."""
    blocks: list[Block] = [Note(f"<p>{_SKIN_DOSE_CAUTION}</p>")]
    for (study_key, device_key), rows in maps.groupby(["study_key", "device_key"], sort=False):
        label = f"Study {rows['study_label'].iloc[0]} ({rows['site_label'].iloc[0]})"
        blocks.append(Plot(f"fig-skin-dose-{slug(study_key, device_key)}",
                           figures.build_skin_dose_map(rows, title=label), ""))
    return Section("skin-dose", "Skin-dose maps of studies at the peak-skin-dose level", tuple(blocks))


def _data_quality(data: SiteData) -> Page:
    unmapped = Table("dq-unmapped", "Study descriptions no exam rule maps", data.unmapped,
                     (Column("modality", "Modality"), Column("study_description", "Study description"),
                      Column("acquisition_protocols", "Acquisition protocols"), Column("sites", "Sites"),
                      Column("n_studies", "Studies", "int")),
                     note="Add an <code>[[exam_rule]]</code> to kerma.toml for descriptions that should be "
                          "audited (<code>kerma exams unmapped</code> lists them too).")
    status = Table("dq-file-status", "Input files by outcome (all ingest runs)", data.source_status,
                   (Column("status", "Outcome"), Column("reason", "Reason"), Column("n_files", "Files", "int"),
                    Column("size_bytes", "Bytes", "int")))
    not_loaded = Table("dq-files-not-loaded", "Files not loaded, by content hash", data.files_not_loaded,
                       (Column("status", "Outcome"), Column("reason", "Reason"), Column("sha256", "SHA-256", "key"),
                        Column("size_bytes", "Bytes", "int"), Column("run_id", "Ingest run")),
                       note="File paths are not shown because folder names can identify patients; "
                            "<code>kerma sql</code> on <code>source_object</code> gives them to authorised staff.")
    weight = Table("dq-weight-share", "Patient weight, height and age recorded", data.weight_share,
                   (Column("site_label", "Site"), Column("modality", "Modality"),
                    Column("n_studies", "Studies", "int"), Column("n_with_weight", "With weight", "int"),
                    Column("pct_with_weight", "With weight", "pct"), Column("n_with_height", "With height", "int"),
                    Column("n_with_age", "With age", "int")))
    issues = Table("dq-value-issues", "Value-level issues by kind and concept", data.value_issues,
                   (Column("kind", "Kind"), Column("concept_code", "Concept code"), Column("concept", "Concept"),
                    Column("n_issues", "Issues", "int"), Column("n_studies", "Studies", "int")),
                   note="A value with a missing or unknown unit, or an implausible value, is stored as "
                        "empty (never guessed) and counted here.")
    issue_rows = Table("dq-value-issue-list", "Every value-level issue", data.value_issue_rows,
                       (Column("study_date", "Date", "date"), Column("study_key", "Study (pseudonym)", "key"),
                        Column("site_label", "Site"), Column("room_label", "Room"), Column("kind", "Kind"),
                        Column("concept", "Concept"), Column("raw_value", "Raw value"),
                        Column("raw_unit", "Raw unit"), Column("detail", "Detail")))
    weight_blocks: list[Block] = []
    if not data.weight_share.empty:
        weight_blocks.append(Plot("fig-weight-share", figures.build_weight_share(
            data.weight_share, title="Studies with a patient weight, per site and modality"), ""))
    file_blocks: list[Block] = []
    if not data.source_status.empty:
        file_blocks.append(Plot("fig-file-status", figures.build_file_status(
            data.source_status, title="Input files by outcome"), ""))
    feeds = Table("dq-data-alerts", "Feeds of dose reports: silent devices and volume drops", data.data_alerts,
                  _DATA_ALERT_COLUMNS)
    epochs = Table("dq-key-epochs", "Pseudonymisation-key epochs (fingerprints, never the key)", data.key_epochs,
                   (Column("epoch", "Epoch", "int"), Column("key_fingerprint", "Key fingerprint", "key"),
                    Column("started_at", "Started"), Column("is_current", "Current", "bool")),
                   note="Each epoch starts at the date shown; patients are not linked across epochs, "
                        "because their pseudonyms come from different keys.")
    if data.capture is None:
        capture_blocks: tuple[Block, ...] = (_empty(
            "No completeness check has run: `kerma completeness --warehouse FILE --period YYYY-MM "
            "--dicomweb URL` compares the archive's studies with the dose objects received."),)
    else:
        capture_blocks = (
            Table("dq-capture-completeness", "Archive studies with a dose object, per modality and station",
                  data.capture, (Column("modality", "Modality"), Column("station_name", "Station"),
                                 Column("site_label", "Site"), Column("n_archive_studies", "Studies in the archive", "int"),
                                 Column("n_with_dose_object", "With a dose object", "int"),
                                 Column("pct_with_dose_object", "Share", "pct"))),
            Table("dq-capture-missing", "Archive studies without any dose object", data.capture_missing,
                  (Column("study_date", "Date", "date"), Column("study_key", "Study (pseudonym)", "key"),
                   Column("modality", "Modality"), Column("station_name", "Station"), Column("site_label", "Site"))))
    return Page("data-quality.html", "Data quality", PAGES[6][2],
                "What limits the audit: descriptions no rule maps, files that could not be used, "
                "missing patient sizes and values kept out of the audit because their unit or size "
                "was wrong.",
                (Section("feeds", "Feeds and key epochs", (feeds, epochs)),
                 Section("capture", "Capture completeness against the archive", capture_blocks),
                 Section("unmapped", "Unmapped descriptions", (unmapped,)),
                 Section("files", "Quarantined and unused files", (*file_blocks, status, not_loaded)),
                 Section("weight", "Patient size recorded", (*weight_blocks, weight)),
                 Section("issues", "Value-level issues", (issues, issue_rows))))


def _collect_tables(pages: Iterable[Page]) -> dict[str, pd.DataFrame]:
    out: dict[str, pd.DataFrame] = {}
    for page in pages:
        for section in page.sections:
            for block in section.blocks:
                if isinstance(block, (Table, DataLink)):
                    previous = out.get(block.name)
                    if previous is not None and previous is not block.rows:
                        raise ValueError(f"two different tables are named {block.name!r}")
                    out[block.name] = block.rows
    return out


def _site_colours(devices: pd.DataFrame) -> dict[str, str]:
    sites: Sequence[str] = sorted(devices["site_label"].dropna().unique()) if not devices.empty else []
    colours = colour_map(list(sites))
    colours.setdefault("(site not known)", PALETTE[7])
    return colours


def build_site(data: SiteData, ctx: Context) -> Site:
    """Every page (file name -> HTML) and every table (CSV stem -> rows) of the site."""
    colours = _site_colours(data.devices)
    drift = _drift_table(data.drift)
    pages = [_overview(data, ctx, drift), _reference_levels(data, colours), _distributions(data),
             _trends(data, colours, drift), _sites(data, colours), _alerts(data, colours), _data_quality(data)]
    return Site(pages={p.file: render_page(p, ctx) for p in pages}, tables=_collect_tables(pages))


_CSS = """
:root{--ink:#1d2530;--muted:#5f6b78;--paper:#f4f3ef;--sheet:#fff;--rule:#d9dde2;--accent:#0072B2;
--warn:#D55E00;--ok:#009E73;--ochre:#8C6D1F}
*{box-sizing:border-box}
body{margin:0;background:var(--paper);color:var(--ink);font:14px/1.45 'Segoe UI','DejaVu Sans','Liberation Sans',Arial,sans-serif}
.wrap{max-width:1440px;margin:0 auto;padding:0 16px}
.masthead{background:var(--ink);color:#f4f3ef;border-bottom:4px solid #E69F00}
.masthead .wrap:first-child{padding-top:14px;padding-bottom:8px}
.brand{margin:0;font-size:12px;letter-spacing:.18em;text-transform:uppercase;color:#c9ced6}
.brand span{letter-spacing:.05em;text-transform:none;color:#9aa3ad;margin-left:.6em}
h1{margin:4px 0 2px;font-size:24px;font-weight:600}
.period{margin:0 0 6px;color:#c9ced6}
.period strong{color:#fff}
.masthead nav ul{list-style:none;margin:0;padding:0;display:flex;flex-wrap:wrap;gap:2px}
.masthead nav a{display:block;padding:8px 12px;color:#dfe3e8;text-decoration:none;border-bottom:3px solid transparent}
.masthead nav a:hover{color:#fff;background:rgba(255,255,255,.06)}
.masthead nav a[aria-current=page]{color:#fff;border-bottom-color:#56B4E9;font-weight:600}
main{padding-top:18px;padding-bottom:12px}
.cautions{background:#fbf7ea;border:1px solid #e9dfbf;border-left:6px solid var(--ochre);padding:8px 14px;margin-bottom:14px}
.cautions h2{font-size:13px;margin:0 0 2px;text-transform:uppercase;letter-spacing:.06em;color:#5d4810}
.cautions ul{margin:2px 0;padding-left:18px}
.cautions li{margin:1px 0}
.lede{font-size:15px;max-width:900px}
.toc ul{list-style:none;padding:0;margin:0 0 8px;display:flex;flex-wrap:wrap;gap:6px}
.toc a{display:block;padding:3px 10px;border:1px solid var(--rule);border-radius:12px;background:var(--sheet);color:var(--accent);text-decoration:none;font-size:13px}
section{background:var(--sheet);border:1px solid var(--rule);border-radius:6px;padding:12px 12px 14px;margin:14px 0}
section>h2{margin:0 0 8px;font-size:18px;padding-bottom:6px;border-bottom:1px solid var(--rule)}
.intro,.note{color:var(--muted);max-width:960px}
figure{margin:10px 0 16px}
figure.plot figcaption{color:var(--muted);font-size:12.5px;max-width:960px;margin-top:2px}
figure.table figcaption{display:flex;justify-content:space-between;align-items:baseline;gap:12px;font-weight:600;margin-bottom:4px}
a.csv{font-weight:400;font-size:12.5px;color:var(--accent);white-space:nowrap}
.scroll{overflow-x:auto;max-height:560px;overflow-y:auto;border:1px solid var(--rule)}
table{border-collapse:collapse;width:100%;font-size:12px;font-variant-numeric:tabular-nums}
th{position:sticky;top:0;background:#eef1f4;text-align:left;font-weight:600;padding:5px 6px;border-bottom:1px solid #c9ced6;vertical-align:bottom}
td{padding:4px 6px;border-bottom:1px solid #eceff2;vertical-align:top}
tbody tr:nth-child(even){background:#fafbfc}
.n{text-align:right;white-space:nowrap}
th.n{white-space:normal}
#table-alerts td:nth-child(n+13),#table-overview-top-alerts td:nth-child(n+13){overflow-wrap:anywhere}
td.empty,p.empty{color:var(--muted);font-style:italic}
.cut,.data-link{font-size:12.5px;color:var(--muted)}
.key{font-family:'DejaVu Sans Mono',Consolas,monospace;font-size:11px}
.flag{display:inline-block;padding:0 6px;margin:1px 2px 1px 0;border-radius:3px;font-size:11.5px;border:1px solid #c9ced6;background:#f4f5f7;white-space:nowrap}
.flag-above-reference{border-color:var(--warn);color:#8a3a00;background:#fdf0e8;font-weight:600}
.flag-too-few{border-style:dashed;color:var(--muted)}
.flag-well-below-reference{border-color:#56B4E9;color:#004f7c}
.tiles{display:grid;grid-template-columns:repeat(auto-fill,minmax(220px,1fr));gap:10px}
.tile{display:flex;flex-direction:column;padding:10px 12px;border:1px solid var(--rule);border-top:5px solid var(--accent);border-radius:4px;color:var(--ink);text-decoration:none;background:#fff;min-height:112px}
.tile:hover{box-shadow:0 1px 6px rgba(0,0,0,.12)}
.tile .value{font-size:26px;font-weight:600;line-height:1.1}
.tile .label{font-weight:600;margin-top:2px}
.tile .detail{color:var(--muted);font-size:12.5px}
.tile .state{margin-top:auto;align-self:flex-start;font-size:11px;text-transform:uppercase;letter-spacing:.06em;padding:1px 6px;border-radius:3px}
.tile-review{border-top-color:var(--warn)}
.tile-review .state{background:#fdf0e8;color:#8a3a00;border:1px solid var(--warn)}
.tile-ok{border-top-color:var(--ok)}
.tile-ok .state{background:#e8f6f1;color:#00573f;border:1px solid var(--ok)}
.tile-info{border-top-color:#9aa3ad}
code{font-family:'DejaVu Sans Mono',Consolas,monospace;font-size:12px;background:#f1f2f4;padding:0 3px}
footer{color:var(--muted);font-size:12.5px;border-top:1px solid var(--rule);padding-top:8px;padding-bottom:24px}
footer p{margin:3px 0}
.cautions-short{font-style:italic}
.nowrap{white-space:nowrap}
@media print{.masthead nav,.toc,a.csv{display:none}section{border:none}body{background:#fff}
.scroll{overflow:visible;max-height:none;border:none}table{width:100%;table-layout:auto}
thead{display:table-header-group}tr{break-inside:avoid}th{position:static;white-space:normal}
td{overflow-wrap:anywhere}td.n,.nowrap{white-space:nowrap}figure.table{break-inside:auto}
.key{font-size:9px}}
"""
