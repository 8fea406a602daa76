"""The committee report's content (pure): mart rows in, sections out.

`report_content` orders what needs action first: patients to follow up, then protocols to
review, then statistical findings; one line per study or room with every rule that fired on
it; each finding new, persisting, known (persisting with an ``explained`` or ``closed`` note)
or resolved against the previous period of the same length. The report template loops over
`ReportContent.sections`; a new kind of finding (e.g. data checks) is one more section here
and one more template in ``templates/sections/``.
"""

from __future__ import annotations

import datetime as dt
from dataclasses import dataclass, field
from typing import Any

from .figures import skin_map_figure
from .words import ACTION_TIERS, ACTION_WORDS, action_rank, format_value, rule_words

__all__ = ["CAUTIONS", "ReportContent", "ReportInput", "ReportSection", "change_status",
           "detailed_follow_up", "report_content", "summary_lines"]

CAUTIONS = (
    "A diagnostic reference level (DRL) is an investigation level for typical doses of groups "
    "of patients, not a dose limit and not a threshold for an individual patient (ICRP 135).",
    "Effective dose is a population quantity for comparing exposures; it does not measure an "
    "individual patient's risk (ICRP 103).",
    "Skin-dose and Ka,r values are estimates with large uncertainty; Ka,r at the reference point "
    "is not the peak skin dose.",
    "Every flagged examination, room and protocol needs review by a qualified medical physicist "
    "before any conclusion is drawn.",
    "Local regulations and the local radiation-protection adviser prevail over this report.",
    "Patients and studies appear only as keyed pseudonyms; only the holder of the "
    "re-identification key can name a patient, and each such access is logged.",
)
KNOWN_NOTE_STATUSES = ("explained", "closed")
# The report stays a readable document at any warehouse size (a network's year holds thousands
# of alerts): beyond these numbers a section shows the most urgent rows, says how many more there
# are and where every one of them is (the dashboards' CSVs, the audit tables). Patients needing
# follow-up are never cut from the executive summary. Common practice, no source: the sizes keep
# a month of a large site in full and the report within some tens of pages.
SUMMARY_LINES_PER_KIND = 30   # study lines and room lines per tier, below the follow-up tier
FOLLOW_UP_DETAILED = 12       # follow-up studies shown with alerts, events and skin-dose maps
FOLLOW_UP_EVENTS = 20         # events listed per detailed follow-up study
SECTION_ROWS = 100            # rows of the alert, median and drift sections
WHERE_ALL = ("every one is in the audit tables (kerma sql: dose_alerts, audit_medians, "
             "drift_flags) and the dashboards' CSV files (alerts.csv, reference-room-medians.csv, "
             "drift-flags.csv)")


@dataclass(frozen=True)
class ReportInput:
    """Everything the report reads from the audited warehouse (rows as dicts)."""

    period: str
    date_from: dt.date
    date_to: dt.date                 # last day, inclusive
    previous_from: dt.date
    previous_to: dt.date
    previous_audited: bool
    reference_sets: list[dict]
    findings: list[dict]             # audit_finding rows of the period
    previous_findings: list[dict]    # audit_finding rows of the previous period
    notes: dict[str, dict]           # item_id -> latest review note
    alerts: list[dict]               # queries/report/report_alerts.sql
    medians: list[dict]              # queries/report/report_flagged_medians.sql
    drift: list[dict]                # queries/report/report_drift.sql
    coverage: list[dict]             # queries/report/report_coverage.sql
    rooms: dict[str, tuple[str, str]]  # device_key -> (site label, room label)
    generated_at: dt.datetime
    version: str = ""
    events: list[dict] = field(default_factory=list)   # queries/report/report_follow_up_events.sql
    data_checks: list[dict] = field(default_factory=list)  # queries/report/report_data_alerts.sql
    skin_maps: list[dict] = field(default_factory=list)    # queries/report/report_skin_dose_maps.sql (detailed studies)


@dataclass(frozen=True)
class ReportSection:
    """One section: its template ``sections/<template>`` renders `data`; `wide` prints landscape."""

    id: str
    title: str
    template: str
    data: dict[str, Any]
    wide: bool = False


@dataclass(frozen=True)
class ReportContent:
    title: str
    period_text: str
    footer: str
    sections: list[ReportSection] = field(default_factory=list)


def _period_text(first: dt.date, last: dt.date) -> str:
    return f"{first:%d %b %Y} to {last:%d %b %Y}"


def change_status(current: list[dict], previous: list[dict], notes: dict[str, dict],
                  previous_audited: bool = True) -> tuple[dict[str, str], list[dict]]:
    """Per current item_id: ``new``, ``persisting`` or ``known``; and the resolved findings.

    A finding is persisting when its item_id was a finding of the previous period of the same
    length, and known when it persists and its latest note is ``explained`` or ``closed``.
    Resolved: previous findings whose item_id is not a finding now. Without an audit of the
    previous period every status is ``not compared`` and nothing is resolved.
    """
    before = {f["item_id"] for f in previous}
    status = {}
    for f in current:
        item = f["item_id"]
        if not previous_audited:
            status[item] = "not compared"
        elif item not in before:
            status[item] = "new"
        elif notes.get(item, {}).get("status") in KNOWN_NOTE_STATUSES:
            status[item] = "known"
        else:
            status[item] = "persisting"
    now = {f["item_id"] for f in current}
    resolved = [f for f in previous if f["item_id"] not in now] if previous_audited else []
    return status, resolved


def _line_status(statuses: list[str]) -> str:
    for s in ("new", "not compared", "persisting"):
        if s in statuses:
            return s
    return "known"


def _latest_note(items: list[str], notes: dict[str, dict]) -> dict | None:
    found = [notes[i] for i in items if i in notes]
    return max(found, key=lambda n: n["noted_at"]) if found else None


def summary_lines(inp: ReportInput, status: dict[str, str]) -> list[dict]:
    """One line per study (individual alerts) or room (medians, drift), most urgent tier first.

    A line's tier is the most urgent action among its rules; the line lists every rule that
    fired on that study or room, with value and threshold.
    """
    lines: dict[tuple[str, str], dict] = {}

    def line(kind: str, key: str, **labels: Any) -> dict:
        if (kind, key) not in lines:
            lines[(kind, key)] = {"kind": kind, "key": key, "rules": [], "items": [],
                                  "actions": [], "exams": [], **labels}
        return lines[(kind, key)]

    for a in inp.alerts:
        entry = line("study", a["study_key"], study_key=a["study_key"], patient_key=a["patient_key"],
                     date=a["study_date"], site=a["site_label"], room=a["room_label"])
        words = rule_words(a["rule"], a["family"], a["quantity"], a["threshold"], a["unit"])
        entry["rules"].append({"text": f"{words}: {format_value(a['value'], a['unit'], a['quantity'])}",
                               "item_id": a["item_id"]})
        entry["factor"] = max(entry.get("factor") or 0.0, a.get("factor") or 0.0)
        entry["items"].append(a["item_id"])
        entry["actions"].append(a["action"])
        if a["exam_label"] not in entry["exams"]:
            entry["exams"].append(a["exam_label"])
    for m in inp.medians:
        entry = line("room", m["device_key"], site=m["site_label"], room=m["room_label"])
        rule = "median_above_reference" if m["is_above_reference"] else "median_well_below_reference"
        sample = "" if m["is_sample_adequate"] else f", too few exams (n {m['n']} < {m['min_sample']})"
        entry["rules"].append({"item_id": m["item_id"], "text":
            f"{rule_words(rule)}: {m['exam_label']}, {m['quantity']} median "
            f"{format_value(m['median'], m['unit'], m['quantity'])} vs "
            f"{format_value(m['reference_value'], m['unit'], m['quantity'])} "
            f"(× {m['ratio_to_reference']:.2f}, n {m['n']}{sample})"})
        entry["items"].append(m["item_id"])
        entry["factor"] = max(entry.get("factor") or 0.0, m.get("ratio_to_reference") or 0.0)
        # fewer exams than the modality's minimum sample: a statistical finding, not yet a protocol's
        entry["actions"].append("protocol_review" if m["is_sample_adequate"] else "statistical_review")
        if m["exam_label"] not in entry["exams"]:
            entry["exams"].append(m["exam_label"])
    for d in inp.drift:
        entry = line("room", d["device_key"], site=d["site_label"], room=d["room_label"])
        entry["rules"].append({"item_id": d["item_id"], "text":
            f"{rule_words('median_drift')}: {d['exam_label']}, {d['quantity']} "
            f"{format_value(d['median_before'], d['unit'], d['quantity'])} → "
            f"{format_value(d['median_after'], d['unit'], d['quantity'])} from {d['change_month']}"})
        entry["items"].append(d["item_id"])
        entry["actions"].append("statistical_review")
        if d["exam_label"] not in entry["exams"]:
            entry["exams"].append(d["exam_label"])
    out = []
    for entry in lines.values():
        entry["action"] = min(entry["actions"], key=action_rank)
        entry["status"] = _line_status([status.get(i, "new") for i in entry["items"]])
        entry["note"] = _latest_note(entry["items"], inp.notes)
        entry["items"] = sorted(set(entry["items"]))
        for rule in entry["rules"]:
            rule["status"] = status.get(rule["item_id"], "new")
            rule["note"] = inp.notes.get(rule["item_id"])
        out.append(entry)
    out.sort(key=lambda e: (action_rank(e["action"]), e["kind"] != "study",
                            e.get("site") or "", e.get("room") or "", str(e.get("date") or "")))
    return out


def _shown_lines(action: str, lines: list[dict]) -> tuple[list[dict], dict[str, int]]:
    """The lines of one tier the summary lists, and how many of each kind it leaves out: every
    follow-up line; else at most SUMMARY_LINES_PER_KIND study lines and as many room lines, the
    largest factors (value / threshold, median / reference) kept, in the usual order."""
    if action == "patient_follow_up":
        return lines, {}
    keep: set[int] = set()
    hidden: dict[str, int] = {}
    for kind in ("study", "room"):
        mine = [x for x in lines if x["kind"] == kind]
        top = sorted(mine, key=lambda x: -(x.get("factor") or 0.0))[:SUMMARY_LINES_PER_KIND]
        keep |= {id(x) for x in top}
        if len(mine) > len(top):
            hidden[kind] = len(mine) - len(top)
    return [x for x in lines if id(x) in keep], hidden


def _resolved_lines(resolved: list[dict], rooms: dict[str, tuple[str, str]]) -> list[dict]:
    out = []
    for f in sorted(resolved, key=lambda f: (action_rank(f["action"]), f["subject"] or "")):
        site, room = rooms.get(f["subject"] or "", (f["site"], None))
        subject = (f"room {room}" if room else f"study {f['subject']}")
        out.append({"action": ACTION_WORDS.get(f["action"], f["action"]), "subject": subject,
                    "site": site or "", "exam_type": f["exam_type"] or "",
                    "rule": rule_words(f["rule"], None, f["quantity"]), "item_id": f["item_id"]})
    return out


def _skin_figures(cells: list[dict], study_key: str) -> list[dict]:
    """The skin-dose map of each of the study's rooms (a study may span two units)."""
    by_device: dict[str, list[dict]] = {}
    for c in cells:
        if c["study_key"] == study_key:
            by_device.setdefault(c["device_key"], []).append(c)
    out = []
    for rows in by_device.values():
        figure = skin_map_figure(rows, psd_mgy=rows[0]["psd_mgy"], study_label=study_key)
        out.append({"kind": "skin_map", "figure": figure, "caption": figure.caption,
                    "method": rows[0]["method"]})
    return out


def detailed_follow_up(inp: ReportInput) -> list[str]:
    """Study keys the follow-up section shows in detail (alerts, events, skin-dose maps), in
    order: the first FOLLOW_UP_DETAILED follow-up studies of the executive summary. The reader
    fetches events and map cells for these only (`ReportInput.events`, ``.skin_maps``)."""
    status, _ = change_status(inp.findings, inp.previous_findings, inp.notes, inp.previous_audited)
    lines = _follow_up_studies(summary_lines(inp, status))
    return [x["study_key"] for x in lines[:FOLLOW_UP_DETAILED]]


def _follow_up_studies(lines: list[dict]) -> list[dict]:
    """The summary's study lines whose most urgent action is patient follow-up, in order."""
    return [x for x in lines if x["action"] == "patient_follow_up" and x["kind"] == "study"]


def report_content(inp: ReportInput) -> ReportContent:
    """The report's sections in reading order (page 1: the executive summary).

    Parameters
    ----------
    inp : ReportInput
        Rows read from the audited warehouse (``pipeline.report.read``).

    Returns
    -------
    ReportContent
    """
    status, resolved = change_status(inp.findings, inp.previous_findings, inp.notes,
                                     inp.previous_audited)
    lines = summary_lines(inp, status)
    tiers = []
    for a in ACTION_TIERS:
        mine = [x for x in lines if x["action"] == a]
        shown, hidden = _shown_lines(a, mine)
        tiers.append({"action": a, "words": ACTION_WORDS[a], "lines": shown, "n_lines": len(mine),
                      "hidden": hidden})
    counts = {s: sum(1 for v in status.values() if v == s)
              for s in ("new", "persisting", "known", "not compared")}
    counts["resolved"] = len(resolved)
    sets = ", ".join(s["set_id"] for s in inp.reference_sets) or "none"
    period_text = _period_text(inp.date_from, inp.date_to)
    previous_text = _period_text(inp.previous_from, inp.previous_to)
    footer = (f"Period {inp.period} ({period_text}) · reference sets: {sets} · "
              f"generated {inp.generated_at:%Y-%m-%d %H:%M} UTC")
    alerts = [{**a, "rule_text": rule_words(a["rule"], a["family"], a["quantity"], a["threshold"],
                                            a["unit"]),
               "action_text": ACTION_WORDS.get(a["action"], a["action"]),
               "value_text": format_value(a["value"], a["unit"], a["quantity"]),
               "threshold_text": format_value(a["threshold"], a["unit"], a["quantity"]),
               "status": status.get(a["item_id"], ""), "note": inp.notes.get(a["item_id"])}
              for a in inp.alerts]
    by_study: dict[str, list[dict]] = {}
    for a in alerts:
        by_study.setdefault(a["study_key"], []).append(a)
    follow_up_lines = _follow_up_studies(lines)
    detailed = {e["study_key"] for e in follow_up_lines[:FOLLOW_UP_DETAILED]}
    events: dict[str, list[dict]] = {}
    for e in inp.events:
        if e["study_key"] in detailed:
            events.setdefault(e["study_key"], []).append(e)
    maps = [c for c in inp.skin_maps if c["study_key"] in detailed]
    follow_up = []
    for entry in follow_up_lines[:FOLLOW_UP_DETAILED]:
        mine = events.get(entry["study_key"], [])
        follow_up.append({**entry, "alerts": by_study.get(entry["study_key"], []),
                          "events": mine[:FOLLOW_UP_EVENTS], "n_events": len(mine),
                          "figures": _skin_figures(maps, entry["study_key"])})
    follow_up_more = follow_up_lines[FOLLOW_UP_DETAILED:]
    medians = [{**m, "status": status.get(m["item_id"], ""), "note": inp.notes.get(m["item_id"]),
                "median_text": format_value(m["median"], m["unit"], m["quantity"]),
                "reference_text": format_value(m["reference_value"], m["unit"], m["quantity"])}
               for m in inp.medians]
    drift = [{**d, "status": status.get(d["item_id"], ""), "note": inp.notes.get(d["item_id"])}
             for d in inp.drift]
    n_alerts, n_medians, n_drift = len(alerts), len(medians), len(drift)
    if n_drift > SECTION_ROWS:   # the largest changes, in the usual order (site, room, exam)
        size = {id(d): max(d["ratio_after_to_before"], 1 / d["ratio_after_to_before"])
                if d.get("ratio_after_to_before") else 0.0 for d in drift}
        kept = {id(d) for d in sorted(drift, key=lambda d: -size[id(d)])[:SECTION_ROWS]}
        drift = [d for d in drift if id(d) in kept]
    summary = {"tiers": tiers, "counts": counts, "previous_text": previous_text,
               "previous_audited": inp.previous_audited, "coverage": inp.coverage,
               "cautions": CAUTIONS, "resolved": _resolved_lines(resolved, inp.rooms),
               "data_checks": inp.data_checks, "where_all": WHERE_ALL}
    sections = [
        ReportSection("summary", "Executive summary", "summary.html", summary),
        ReportSection("follow_up", "Patients needing follow-up", "follow_up.html",
                      {"studies": follow_up, "more": follow_up_more,
                       "events_cap": FOLLOW_UP_EVENTS}, wide=True),
        ReportSection("alerts", "Every individual-exam alert" if n_alerts <= SECTION_ROWS else
                      f"Individual-exam alerts: the {SECTION_ROWS} most urgent of {n_alerts:,}",
                      "alerts.html", {"alerts": alerts[:SECTION_ROWS], "n_total": n_alerts,
                                      "where_all": WHERE_ALL}, wide=True),
        ReportSection("medians", "Room medians against reference levels", "medians.html",
                      {"medians": medians[:SECTION_ROWS], "n_total": n_medians,
                       "where_all": WHERE_ALL}, wide=True),
        ReportSection("drift", "Changes of room medians (drift)", "drift.html",
                      {"drift": drift, "n_total": n_drift, "where_all": WHERE_ALL}),
        ReportSection("resolved", f"Resolved since {previous_text}", "resolved.html", summary),
        ReportSection("references", "Reference sets and method", "references.html",
                      {"sets": inp.reference_sets, "version": inp.version}),
        ReportSection("cautions", "Cautions", "cautions.html", {"cautions": CAUTIONS}),
    ]
    return ReportContent(f"Radiation dose audit — committee report {inp.period}", period_text,
                         footer, sections)
