"""The committee report stays a readable document however many findings a warehouse holds (issue
14): the executive summary lists every patient needing follow-up but caps the other tiers; the
follow-up, alert, median and drift sections cap their rows and say how many more there are and
where all of them are. Pure: ReportInput rows in, sections and HTML out."""

from __future__ import annotations

import dataclasses
import datetime as dt

from pipeline.report.content import (FOLLOW_UP_DETAILED, FOLLOW_UP_EVENTS, SECTION_ROWS,
                                     SUMMARY_LINES_PER_KIND, ReportInput, detailed_follow_up,
                                     report_content)
from pipeline.report.render import render_html

N_FOLLOW_UP, N_PROTOCOL, N_ROOMS = 40, 500, 70


def _alert(n: int, action: str, factor: float) -> dict:
    follow_up = action == "patient_follow_up"
    return {"item_id": f"A{n:05d}", "action": action, "study_date": dt.date(2026, 9, 1 + n % 28),
            "study_key": f"s{n:05d}", "patient_key": f"p{n:05d}", "site_label": "Site A",
            "room_label": f"R{n % 9}", "device_key": f"d{n % 9}", "exam_label": "CT head",
            "rule": "ncrp168_srdl_dose_rp" if follow_up else "robust_outlier_high",
            "family": "fluoro_substantial_dose" if follow_up else "robust_outlier",
            "quantity": "dose_rp" if follow_up else "dlp", "value": 5000.0 * factor,
            "threshold": 5000.0, "unit": "mGy" if follow_up else "mGy.cm", "factor": factor,
            "method": "study total " * 30, "threshold_verified": True, "source": "a source " * 30}


def _input() -> ReportInput:
    alerts = [_alert(n, "patient_follow_up", 1.0 + n / 100) for n in range(N_FOLLOW_UP)]
    alerts += [_alert(1000 + n, "protocol_review", 1.0 + n / 1000) for n in range(N_PROTOCOL)]
    medians = [{"item_id": f"M{n:04d}", "device_key": f"room{n}", "site_label": "Site A",
                "room_label": f"Room {n}", "is_above_reference": True, "is_sample_adequate": True,
                "n": 40, "min_sample": 20, "exam_label": "CT head", "quantity": "dlp",
                "median": 1000.0 + n, "unit": "mGy.cm", "reference_value": 970.0,
                "ratio_to_reference": (1000.0 + n) / 970.0, "population": "adult", "stratum": None,
                "reference_set": "a_set", "reference_scope_note": None} for n in range(N_ROOMS)]
    events = [{"study_key": f"s{n:05d}", "started_at": dt.datetime(2026, 9, 1, 8, 0, k),
               "event_type": "fluoroscopy", "event_uid": f"e{n}-{k}",
               **dict.fromkeys(("acquisition_protocol", "target_region", "acquisition_plane", "kvp",
                                "ctdivol_mgy", "dlp_mgy_cm", "ctdi_phantom", "dap_gy_cm2",
                                "dose_rp_mgy", "irradiation_duration_s"))}
              for n in range(N_FOLLOW_UP) for k in range(FOLLOW_UP_EVENTS + 5)]
    findings = [{"item_id": a["item_id"]} for a in alerts] + [{"item_id": m["item_id"]} for m in medians]
    inp = ReportInput(
        period="2026-09", date_from=dt.date(2026, 9, 1), date_to=dt.date(2026, 9, 30),
        previous_from=dt.date(2026, 8, 1), previous_to=dt.date(2026, 8, 31),
        previous_audited=False, reference_sets=[], findings=findings, previous_findings=[],
        notes={}, alerts=alerts, medians=medians, drift=[], coverage=[], rooms={},
        generated_at=dt.datetime(2026, 10, 1, 9, 0))
    keys = set(detailed_follow_up(inp))
    return dataclasses.replace(inp, events=[e for e in events if e["study_key"] in keys])


def test_every_follow_up_patient_is_listed_and_the_other_tiers_are_capped():
    content = report_content(_input())
    summary = next(s for s in content.sections if s.id == "summary").data
    follow_up, protocol = summary["tiers"][0], summary["tiers"][1]
    assert follow_up["n_lines"] == len(follow_up["lines"]) == N_FOLLOW_UP and not follow_up["hidden"]
    studies = [x for x in protocol["lines"] if x["kind"] == "study"]
    rooms = [x for x in protocol["lines"] if x["kind"] == "room"]
    assert len(studies) == len(rooms) == SUMMARY_LINES_PER_KIND
    assert protocol["hidden"] == {"study": N_PROTOCOL - SUMMARY_LINES_PER_KIND,
                                  "room": N_ROOMS - SUMMARY_LINES_PER_KIND}
    # the lines kept are those furthest above their threshold or reference
    assert min(x["factor"] for x in studies) > 1.0 + (N_PROTOCOL - SUMMARY_LINES_PER_KIND - 1) / 1000
    html = render_html(content)
    assert f"{N_PROTOCOL - SUMMARY_LINES_PER_KIND:,} more studies and " \
           f"{N_ROOMS - SUMMARY_LINES_PER_KIND:,} more rooms with this action" in " ".join(html.split())


def test_sections_cap_their_rows_and_say_where_every_row_is():
    content = report_content(_input())
    sections = {s.id: s for s in content.sections}
    detail = sections["follow_up"].data
    assert len(detail["studies"]) == FOLLOW_UP_DETAILED
    assert len(detail["more"]) == N_FOLLOW_UP - FOLLOW_UP_DETAILED
    assert all(len(s["events"]) == FOLLOW_UP_EVENTS and s["n_events"] == FOLLOW_UP_EVENTS + 5
               for s in detail["studies"])
    alerts = sections["alerts"]
    assert len(alerts.data["alerts"]) == SECTION_ROWS
    assert alerts.title == f"Individual-exam alerts: the {SECTION_ROWS} most urgent of " \
                          f"{N_FOLLOW_UP + N_PROTOCOL:,}"
    # most urgent first: every follow-up alert precedes the protocol reviews
    assert [a["action"] for a in alerts.data["alerts"][:N_FOLLOW_UP]] == ["patient_follow_up"] * N_FOLLOW_UP
    html = " ".join(render_html(content).split())
    assert f"Shown: the first {SECTION_ROWS} of {N_FOLLOW_UP + N_PROTOCOL:,}, most urgent first" in html
    assert f"{N_FOLLOW_UP - FOLLOW_UP_DETAILED} more studies needing follow-up" in html
    assert f"the first {FOLLOW_UP_EVENTS} of {FOLLOW_UP_EVENTS + 5}, by start time" in html
    # the alert table shortens long method texts (the follow-up detail above shows them whole)
    table = html[html.index(alerts.title):html.index("Room medians against reference levels")]
    assert "study total study total" in table and "study total " * 30 not in table
    assert "study total " * 30 in html[:html.index(alerts.title)]
