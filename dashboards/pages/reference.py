"""The reference-levels and distributions pages (one plot per family, quantity and population;
at most ``MAX_PLOT_ROWS`` room groups per plot, the CSV holds every group)."""

from __future__ import annotations

import pandas as pd

from .. import figures
from ..model import Block, Column, DataLink, Page, Plot, Section, SiteData, Table, slug
from ..theme import quantity_name
from .common import ROOM_COLUMNS, empty, family_sections, room_flags

__all__ = ["MAX_PLOT_ROWS", "MAX_PLOT_ROOMS", "capped", "distributions", "reference_levels"]

MAX_PLOT_ROWS = 40      # room groups per reference-level plot (categorical rows)
MAX_PLOT_ROOMS = 24     # rooms per distribution plot


def capped(rows: pd.DataFrame, limit: int, order: list[str]) -> tuple[pd.DataFrame, int]:
    """The first `limit` rows by `order` (descending: the highest first) kept in their original
    order, and how many were left out."""
    if len(rows) <= limit:
        return rows, 0
    keep = rows.sort_values(order, ascending=False, na_position="last", kind="stable").head(limit).index
    return rows.loc[rows.index.isin(keep)], len(rows) - limit


def reference_levels(data: SiteData, site_colours: dict[str, str]) -> Page:
    """reference-levels.html."""
    sections = []
    for family, part in family_sections(data.room_medians):
        blocks: list[Block] = []
        keys = part[["quantity", "population"]].drop_duplicates().sort_values(
            ["population", "quantity"], kind="stable")
        # each group's rows taken when drawn: one group's copy at a time, not the family's
        positions = part.groupby(["quantity", "population"], sort=False).indices
        for q, pop in keys.itertuples(index=False):
            rows = part.take(positions[(q, pop)])
            shown, left_out = capped(rows, MAX_PLOT_ROWS, ["ratio_to_reference", "n"])
            n_ref = int(rows["reference_value"].notna().sum())
            caption = (f"{len(rows)} room groups; {n_ref} with a reference value. Dot: room median (colour: "
                       "site); bar: 95 % confidence interval of the median (order statistics); black or grey "
                       "tick: reference level (one shape per set); grey diamond: the network's 75th "
                       "percentile of room medians (a local DRL in the sense of ICRP 135 only when it comes "
                       "from at least 10 rooms). Open dot: fewer exams than the audit minimum; a single "
                       "exam has no interval.")
            if left_out:
                caption += (f" Showing the {len(shown)} groups furthest above their reference level; "
                            f"{left_out} more are in reference-room-medians.csv.")
            blocks.append(Plot(f"fig-ref-{slug(family, q, pop)}",
                               figures.build_reference_comparison(
                                   shown, site_colours=site_colours,
                                   title=f"{family}: {quantity_name(q)}, {pop} patients"),
                               caption))
        sections.append(Section(slug(family), family, tuple(blocks)))
    table = Table("reference-room-medians", "Every audit group: room median, interval, reference and network values",
                  data.room_medians, ROOM_COLUMNS, flags=room_flags, note="room-medians")
    network = Table("reference-network", "Network values per exam type (ICRP 135)", data.network,
                    (Column("exam_label", "Exam type"), Column("population", "Population"),
                     Column("stratum", "Band"), Column("quantity", "Quantity", "quantity"),
                     Column("n_rooms", "Rooms (adequate)", "int"), Column("n_rooms_all", "Rooms (all)", "int"),
                     Column("n_exams", "Exams", "int"), Column("typical_value", "Typical (median of medians)", "value"),
                     Column("p75_of_room_medians", "75th percentile of medians", "value"),
                     Column("local_drl", "Local DRL (≥ 10 rooms)", "value"),
                     Column("reference_value", "Reference", "value"),
                     Column("ratio_p75_to_reference", "P75 ÷ reference", "ratio"),
                     Column("reference_set", "Set", "long")),
                    note="network")
    if not sections:
        sections.append(Section("none", "No audited groups", (empty(
            "No exam in the period maps to a standard exam type with a dose value."),)))
    sections.append(Section("tables", "Tables", (table, network)))
    return Page("reference-levels.html", "Reference levels", "Room medians against reference levels",
                tuple(sections))


def distributions(data: SiteData) -> Page:
    """distributions.html: box summaries computed in SQL (dash_distribution.sql), never points."""
    sections = []
    frame = data.distribution
    for family, part in family_sections(frame):
        blocks: list[Block] = []
        by_exam = dict(iter(part.groupby("exam_label", sort=False)))
        for exam in sorted(part["exam_label"].unique()):
            rows = by_exam[exam]
            rooms = rows.groupby(["site_label", "room_label"])["n"].sum()
            caption = ("Box: interquartile range with the median; whiskers: 5th to 95th percentile. Unfilled "
                       "box: fewer exams than the audit minimum; a point: a single exam. Dashed line: "
                       "reference level.")
            if len(rooms) > MAX_PLOT_ROOMS:
                keep = set(rooms.sort_values(ascending=False, kind="stable").head(MAX_PLOT_ROOMS).index)
                rows = rows[[k in keep for k in zip(rows["site_label"], rows["room_label"], strict=True)]]
                caption += (f" Showing the {MAX_PLOT_ROOMS} rooms with the most exams of {len(rooms)}; "
                            "distributions.csv has every room.")
            blocks.append(Plot(f"fig-dist-{slug(rows['exam_type'].iloc[0])}",
                               figures.build_distribution(rows, title=str(exam)), caption))
        sections.append(Section(slug(family), family, tuple(blocks)))
    if not sections:
        sections.append(Section("none", "No audited values", (empty("No audited values in the period."),)))
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
        note="estimates")
    sections.append(Section("estimates", "CT dose estimates", (estimates,)))
    return Page("distributions.html", "Distributions", "Dose distributions per exam type and room",
                tuple(sections))
