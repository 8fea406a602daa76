"""The overview page: data checks first, then tiles (each linking to its own detail section),
findings to review and the reference sets used."""

from __future__ import annotations

from dataclasses import dataclass

import pandas as pd

from ..model import Block, Column, Context, Note, Page, Section, SiteData, Table
from .alerts import detail_studies
from .common import ALERT_COLUMNS, DATA_ALERT_COLUMNS, NO_DATA, ROOM_COLUMNS, alert_rows, empty, \
    first_int, room_flags

__all__ = ["Tile", "data_checks", "overview", "tiles"]


@dataclass(frozen=True)
class Tile:
    """One headline count; `href` is the page and anchor of its own detail section."""

    value: str
    label: str
    detail: str
    href: str
    state: str      # review | ok | info


def _pct(part: int, whole: int) -> str:
    return f"{100.0 * part / whole:.1f} %" if whole else "–"


def _count(n: int) -> str:
    return f"{n:,}".replace(",", "\u2009")


def _state(n: int) -> str:
    return "review" if n else "ok"


def tiles(o: pd.DataFrame) -> list[Tile]:
    """The headline tiles of the period from the row of ``dash_overview.sql``."""
    n = {c: first_int(o, c) for c in o.columns} if not o.empty else {}
    g = n.get
    studies = g("n_studies", 0)
    return [
        Tile(_count(studies), "Studies in the period", f"{g('n_devices', 0)} devices at {g('n_sites', 0)} sites",
             "data-quality.html#studies", "info"),
        Tile(str(g("n_devices", 0)), "Irradiating devices", "rooms with at least one study in the period",
             "data-quality.html#table-dq-rooms", "info"),
        Tile(str(g("n_sites", 0)), "Sites", "compared in the funnel plot", "sites.html#summary", "info"),
        Tile(f"{g('n_exam_types_above', 0)} of {g('n_exam_types_with_reference', 0)}",
             "Exam types above their reference level",
             f"{g('n_groups_above', 0)} room groups above, {g('n_groups_above_adequate', 0)} of them "
             "with an adequate sample", "reference-levels.html#tables", _state(g("n_exam_types_above", 0))),
        Tile(str(g("n_alerts", 0)), "Individual-exam alerts", f"in {g('n_alert_studies', 0)} studies",
             "alerts.html#list", _state(g("n_alerts", 0))),
        Tile(str(g("n_drift_flags", 0)), "Drift flags", "changes of a room's monthly median",
             "trends.html#drift", _state(g("n_drift_flags", 0))),
        Tile(_pct(g("n_unmapped", 0), studies), "Studies not mapped to an exam type",
             f"{g('n_unmapped', 0)} of {studies}", "data-quality.html#unmapped", _state(g("n_unmapped", 0))),
        Tile(str(g("n_quarantined", 0)), "Quarantined files",
             f"of {g('n_files', 0)} files of the period; {g('n_not_dose', 0)} were not dose objects",
             "data-quality.html#files", _state(g("n_quarantined", 0))),
        Tile(_pct(g("n_with_weight", 0), studies), "Studies with patient weight",
             "needed for standard-size medians and SSDE", "data-quality.html#weight", "info"),
    ]


def data_checks(data: SiteData, n_studies: int) -> Section:
    """The data_check tier, shown before the dose findings: no data is never a clean month."""
    blocks: list[Block] = []
    if n_studies == 0:
        blocks.append(Note("no-data", {"no_data": NO_DATA}))
    rows = data.data_alerts
    device_rows = rows[rows["device_key"].notna()] if not rows.empty else rows
    blocks.append(Table("overview-data-alerts", "Feeds of dose reports to check (data_check)", device_rows,
                        DATA_ALERT_COLUMNS, note="feeds"))
    epochs = data.key_epochs
    if len(epochs) > 1:
        since = ", ".join(f"epoch {int(r.epoch)} from {pd.Timestamp(r.started_at):%Y-%m-%d}"
                          for r in epochs.iloc[1:].itertuples(index=False))
        blocks.append(Note("key-epochs", {"since": since}))
    return Section("data-checks", "Data checks (review first)", tuple(blocks))


def overview(data: SiteData, ctx: Context, drift: Table, listing: pd.DataFrame | None = None) -> Page:
    """index.html; `listing`: ``alert_rows(data.alerts)`` when the caller has it already."""
    n_studies = first_int(data.overview, "n_studies")
    rm = data.room_medians
    above_rows = rm[rm["is_above_reference"].fillna(False).astype(bool)].sort_values(
        ["ratio_to_reference", "exam_label", "site_label", "room_label"], ascending=[False, True, True, True]) \
        if not rm.empty else rm
    findings = Table("overview-above-reference", "Room medians above their reference level", above_rows,
                     ROOM_COLUMNS, flags=room_flags, note="above-reference")
    sets = Table("overview-reference-sets", "Reference-level sets used by this audit", ctx.reference_sets,
                 (Column("set_id", "Set"), Column("issuing_body", "Issuing body"),
                  Column("version", "Version"), Column("effective_date", "Effective", "date"),
                  Column("citation_title", "Source"), Column("is_verified", "Verified", "bool"),
                  Column("n_groups", "Groups compared", "int")))
    listing = alert_rows(data.alerts) if listing is None else listing
    alerts = Table("overview-top-alerts", "The ten most urgent alerts (patient follow-up first)",
                   listing.head(10), ALERT_COLUMNS, note="top-alerts",
                   details=frozenset(detail_studies(listing)))
    title = "Monthly dose audit: overview" if ctx.is_one_month else "Dose audit of the period: overview"
    return Page(
        "index.html", "Overview", title,
        (data_checks(data, n_studies),
         Section("glance", "At a glance", (Note("tiles", {"tiles": tiles(data.overview)}),)),
         Section("findings", "Findings to review",
                 (findings, drift, alerts) if n_studies else (empty(f"No dose findings can be made: {NO_DATA}."),)),
         Section("sets", "Reference sets", (sets,))),
        values={"one_month": ctx.is_one_month})
