"""The trends page (monthly medians, drift flags) and the site-comparison page (funnel plots)."""

from __future__ import annotations

import pandas as pd

from .. import figures
from ..model import Block, Column, DataLink, Note, Page, Plot, Section, SiteData, Table, is_missing, slug
from ..theme import quantity_name, unit_label
from .common import empty, family_sections, room_flags

__all__ = ["MAX_FUNNEL_POINTS", "MAX_TREND_ROOMS", "sites", "trends"]

MAX_TREND_ROOMS = 12    # rooms per trend plot; the CSV has every room
# groups drawn one by one per funnel plot (dash_funnel_drawn.sql); beyond it the groups within
# the limits are counted in cells (dash_funnel_cells.sql); sites-ranked.csv has every group
MAX_FUNNEL_POINTS = 200


def trends(data: SiteData, site_colours: dict[str, str], drift: Table) -> Page:
    """trends.html."""
    sections = []
    frame = data.monthly
    for family, part in family_sections(frame):
        blocks: list[Block] = []
        labels = part.groupby("exam_type")["exam_label"].first().to_dict()
        by_exam = dict(iter(part.groupby("exam_type", sort=False)))   # one split, not a mask per exam
        for exam_type in sorted(labels, key=lambda e: str(labels[e])):
            rows = by_exam[exam_type]
            flags = data.drift[data.drift["exam_type"] == exam_type] if not data.drift.empty else data.drift
            caption = ("Adult patients. Point: monthly median; bar: interquartile range (rooms side by side "
                       "within a month). Grey dash-dotted line: a drift flag at the first month after the "
                       "change; black dashed line: reference level.")
            rooms = rows.groupby(["site_label", "room_label"])["n"].sum()
            if len(rooms) > MAX_TREND_ROOMS:
                flagged = set(zip(flags["site_label"], flags["room_label"], strict=True)) if not flags.empty else set()
                exams = rooms.to_dict()
                ranked = sorted(exams, key=lambda k: (k not in flagged, -int(exams[k])))
                keep = set(ranked[:MAX_TREND_ROOMS])
                rows = rows[[k in keep for k in zip(rows["site_label"], rows["room_label"], strict=True)]]
                if not flags.empty:   # a flag is drawn on its own room's series only
                    flags = flags[[k in keep for k in zip(flags["site_label"], flags["room_label"], strict=True)]]
                caption += (f" Showing {MAX_TREND_ROOMS} of {len(rooms)} rooms (drift-flagged first, then the "
                            "most exams) and their drift flags; trends-monthly-medians.csv has every room, "
                            "the drift-flag table every flag.")
            blocks.append(Plot(f"fig-trend-{slug(exam_type)}",
                               figures.build_trend(rows, flags, site_colours=site_colours,
                                                   title=str(rows["exam_label"].iloc[0])),
                               caption))
        sections.append(Section(slug(family), family, tuple(blocks)))
    if not sections:
        sections.append(Section("none", "No monthly medians", (empty("No monthly medians up to the period end."),)))
    sections.append(Section("drift", "Drift flags", (
        drift, Note("drift-method"),
        DataLink("trends-monthly-medians", "monthly medians per room, exam type and quantity", frame))))
    return Page("trends.html", "Trends", "Monthly medians and drift", tuple(sections))


_FUNNEL_COLUMNS = (
    Column("rank", "Rank", "int"), Column("site_label", "Site"), Column("room_label", "Room"),
    Column("exam_label", "Exam type"), Column("population", "Population"),
    Column("quantity", "Quantity", "quantity"), Column("n", "n", "int"),
    Column("median", "Median", "value"), Column("typical_value", "Network typical", "value"),
    Column("ratio_to_typical", "Ratio to typical", "ratio"), Column("z", "z", "ratio"),
    Column("funnel_zone", "Funnel position"), Column("reference_value", "Reference", "value"),
    Column("ratio_to_reference", "Ratio to reference", "ratio"), Column("reference_set", "Set", "long"),
)


def sites(data: SiteData, site_colours: dict[str, str]) -> Page:
    """sites.html."""
    points = data.funnel_points
    blocks: list[Block] = []
    sigma = data.funnel_sigma
    drawn = points if data.funnel_drawn is None else data.funnel_drawn
    cells = data.funnel_cells if data.funnel_cells is not None else pd.DataFrame(columns=["quantity"])
    for q in sorted(points["quantity"].unique()) if not points.empty else []:
        part = drawn[drawn["quantity"] == q]
        rest = cells[cells["quantity"] == q]
        n_groups = int((points["quantity"] == q).sum())
        lim = data.funnel_limits[data.funnel_limits["quantity"] == q] if not data.funnel_limits.empty \
            else data.funnel_limits
        s = sigma[sigma["quantity"] == q]
        unit = points.loc[points["quantity"] == q, "unit"].iloc[0]
        s_text = (f"σ = {float(s['sigma_log'].iloc[0]):.2f} (log scale) pooled from "
                  f"{int(s['n_groups_pooled'].iloc[0])} room groups"
                  if not s.empty and not is_missing(s["sigma_log"].iloc[0]) else "spread not estimable")
        blocks.append(Plot(f"fig-funnel-{slug(q)}",
                           figures.build_funnel(part, lim, site_colours=site_colours, cells=rest,
                                                title=f"{quantity_name(q)} ({unit_label(unit)}): "
                                                      "ratio to the network typical value"),
                           "Each point is one room and exam type. Upper control limits above the network "
                           "typical value (ratio 1, the median of the room medians, ICRP 135) at 95 % and "
                           f"99.8 %, for log-normal doses with {s_text}. A point above the 99.8 % limit is "
                           "above the network's typical value by more than sampling noise explains; only "
                           "such points are counted. The reference level of each group, where one applies, "
                           "is its own black dash. Open marker: fewer exams than the audit minimum."
                           + ((f" Of {n_groups} room groups, the {len(part)} above a limit with the highest z "
                               "are drawn one by one; the other " if not part.empty else
                               f" None of the {n_groups} room groups is above a limit; all ")
                              + f"{n_groups - len(part)} are counted in grey squares (one per cell of the "
                              "plane, area by the number of groups; hover for the count and range); "
                              "sites-ranked.csv has every group." if not rest.empty else "")))
    if not blocks:
        blocks.append(empty("No audited group has a network typical value (too few adequate samples), so "
                            "there is no funnel to draw."))
    ranked_rows = points.assign(rank=range(1, len(points) + 1)) if not points.empty \
        else points.assign(rank=pd.Series(dtype="int64"))
    ranked = Table("sites-ranked", "Ranked: room groups by ratio to the network typical value", ranked_rows,
                   _FUNNEL_COLUMNS, flags=room_flags)
    summary = Table("sites-summary", "Per site", data.site_summary,
                    (Column("site_label", "Site"), Column("n_rooms", "Rooms", "int"),
                     Column("n_groups", "Groups with a reference", "int"), Column("n_exams", "Exams", "int"),
                     Column("n_above_reference", "Above reference", "int"),
                     Column("n_above_998", "Above 99.8 % limit", "int"),
                     Column("n_above_95", "Above 95 % limit only", "int"),
                     Column("n_insufficient", "Too few exams", "int"),
                     Column("median_ratio", "Median ratio", "ratio"), Column("max_ratio", "Highest ratio", "ratio")))
    return Page("sites.html", "Site comparison", "Site comparison: funnel plot and ranking",
                (Section("funnel", "Funnel plots", (*blocks, DataLink("sites-funnel-limits", "control limits",
                                                                      data.funnel_limits))),
                 Section("summary", "Per site", (summary,)),
                 Section("ranked", "Ranked table", (ranked,))))
