"""The alerts page: counts per rule (in plain words), the alert list, and the drill-down from
each alerted study to its irradiation events; skin-dose maps of peak-skin-dose alerts."""

from __future__ import annotations

from dataclasses import dataclass

import pandas as pd

from .. import figures
from ..model import MAX_TABLE_ROWS, Block, Column, DataLink, Note, Page, Plot, Section, SiteData, Table, slug
from ..render import cell_text
from .common import ALERT_COLUMNS, alert_rows, empty

__all__ = ["EVENT_COLUMNS", "MAX_DETAIL_STUDIES", "MAX_SKIN_MAPS", "MAX_STUDY_EVENTS", "StudyDetail", "alerts",
           "detail_studies", "rule_counts", "study_details"]

MAX_STUDY_EVENTS = 20    # events listed per study on the page; alert-events.csv has all of them
# (at 40, the study details were half of alerts.html: 1.47 MiB at a million events)
MAX_DETAIL_STUDIES = 60  # studies with details on the page (the most urgent first)

EVENT_COLUMNS = (
    Column("started_at", "Started", "datetime"), Column("event_type", "Event type"),
    Column("acquisition_protocol", "Protocol"), Column("target_region", "Target region"),
    Column("kvp", "kVp", "num"), Column("ctdivol_mgy", "CTDIvol (mGy)", "num"),
    Column("dlp_mgy_cm", "DLP (mGy·cm)", "num"), Column("ctdi_phantom", "Phantom"),
    Column("dap_gy_cm2", "DAP (Gy·cm²)", "num"), Column("dose_rp_mgy", "Ka,r (mGy)", "num"),
    Column("irradiation_duration_s", "Duration (s)", "num"),
)


@dataclass(frozen=True)
class StudyDetail:
    """One alerted study: what fired on it and its events as display text."""

    anchor: str
    study_key: str
    heading: str
    findings: tuple[str, ...]
    events: tuple[tuple[str, ...], ...]
    n_events: int


def detail_studies(listing: pd.DataFrame) -> list[str]:
    """The studies that get a details section: the first ``MAX_DETAIL_STUDIES`` distinct
    studies of the alert list in its order (most urgent first)."""
    if listing.empty:
        return []
    return [str(k) for k in listing["study_key"].head(MAX_TABLE_ROWS).drop_duplicates().head(MAX_DETAIL_STUDIES)]


def study_details(listing: pd.DataFrame, events: pd.DataFrame) -> list[StudyDetail]:
    """A detail per study of ``detail_studies`` (in their order), each with up to
    ``MAX_STUDY_EVENTS`` events (protocol, CTDIvol and DLP per CT acquisition, DAP and Ka,r
    per projection event)."""
    keys = detail_studies(listing)
    shown = listing[listing["study_key"].isin(keys)] if keys else listing.head(0)
    # only the shown studies' events: a frame per study of every alerted study costs seconds
    # at a million events; rows as plain dicts, grouped in their order (first seen first)
    mine = events[events["study_key"].isin(keys)] if keys and not events.empty else events.head(0)
    by_study: dict[str, list[dict]] = {}
    for r in mine.to_dict("records"):
        by_study.setdefault(r["study_key"], []).append(r)
    fired_by: dict[str, list[dict]] = {}
    for r in shown.to_dict("records"):
        fired_by.setdefault(r["study_key"], []).append(r)
    out = []
    for key, fired in fired_by.items():
        first = fired[0]
        heading = " · ".join(cell_text(first[c], k) for c, k in (
            ("study_date", "date"), ("site_label", "text"), ("room_label", "text"), ("exam_label", "text")))
        findings = tuple(f"{r['action_text']}: {r['rule_text']}, {r['value_text']}" for r in fired)
        rows = by_study.get(key, [])
        table = tuple(tuple(cell_text(r[c.key], c.kind) for c in EVENT_COLUMNS)
                      for r in rows[:MAX_STUDY_EVENTS])
        out.append(StudyDetail(f"study-{slug(key)}", str(key), heading, findings, table, len(rows)))
    return out


def rule_counts(counts: pd.DataFrame) -> pd.DataFrame:
    """``dash_alert_counts.sql`` rows with the rule in plain words (``rule_text``)."""
    from pipeline.report.words import rule_words

    if counts.empty:
        return counts.assign(rule_text=pd.Series(dtype=str))
    return counts.assign(rule_text=[rule_words(r.rule, r.family, r.quantity, r.threshold, r.unit)
                                    for r in counts.itertuples()])


_SKIN_NOTE = "skin-dose-caution"
_SKIN_MORE = "skin-dose-more"
MAX_SKIN_MAPS = 12       # maps drawn on the page (highest peak skin dose first); ~17 kB each


def _skin_dose_section(maps: pd.DataFrame) -> Section:
    """One skin-dose map per study with a peak-skin-dose alert (the highest `MAX_SKIN_MAPS`
    peak skin doses; the rows come highest first), and the cautions."""
    blocks: list[Block] = [Note(_SKIN_NOTE)]
    studies = list(maps.groupby(["study_key", "device_key"], sort=False))
    # dash_skin_dose_maps.sql returns the cells of the first MAX_SKIN_MAPS maps only, and the
    # number of maps there are (n_maps)
    total = int(maps["n_maps"].iloc[0]) if "n_maps" in maps.columns else len(studies)
    for (study_key, device_key), rows in studies[:MAX_SKIN_MAPS]:
        label = f"Study {rows['study_label'].iloc[0]} ({rows['site_label'].iloc[0]})"
        blocks.append(Plot(f"fig-skin-dose-{slug(study_key, device_key)}",
                           figures.build_skin_dose_map(rows, title=label), ""))
    if total > MAX_SKIN_MAPS:
        blocks.append(Note(_SKIN_MORE, {"shown": MAX_SKIN_MAPS, "total": total}))
    return Section("skin-dose", "Skin-dose maps of studies at the peak-skin-dose level", tuple(blocks))


def alerts(data: SiteData, site_colours: dict[str, str], listing: pd.DataFrame | None = None) -> Page:
    """alerts.html; `listing`: ``alert_rows(data.alerts)`` when the caller has it already."""
    counts_rows = rule_counts(data.alert_counts)
    blocks: list[Block] = []
    if not counts_rows.empty:
        blocks.append(Plot("fig-alert-counts", figures.build_alert_counts(
            counts_rows, site_colours=site_colours, title="Alerts per rule and site"), ""))
    else:
        blocks.append(empty("No individual-exam alert fired in the period."))
    counts = Table("alerts-by-rule", "Alerts per rule and site", counts_rows,
                   (Column("rule_text", "Rule"), Column("site_label", "Site"), Column("n_alerts", "Alerts", "int"),
                    Column("n_studies", "Studies", "int")))
    listing_rows = alert_rows(data.alerts) if listing is None else listing
    listing = Table("alerts", "Every alert, patient follow-up first, then furthest beyond its threshold",
                    listing_rows, ALERT_COLUMNS, note="alert-list",
                    details=frozenset(detail_studies(listing_rows)))
    details = study_details(listing_rows, data.alert_events)
    sections = [Section("counts", "By rule and site", (*blocks, counts)),
                Section("list", "Alert list", (listing,)),
                Section("events", "Study details: the events of each alerted study",
                        (Note("studies", {"studies": details, "columns": EVENT_COLUMNS,
                                          "n_studies": int(listing_rows["study_key"].nunique())
                                          if not listing_rows.empty else 0}),
                         DataLink("alert-events", "irradiation events of every study with an alert",
                                  data.alert_events)))]
    if not data.skin_dose_maps.empty:
        sections.append(_skin_dose_section(data.skin_dose_maps))
    return Page("alerts.html", "Alerts", "Individual-exam alerts", tuple(sections))
