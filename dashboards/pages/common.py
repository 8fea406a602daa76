"""Pieces several pages share: columns, row flags, the drift table, alerts in reading order."""

from __future__ import annotations

import pandas as pd

from ..model import Column, Note, Table, is_missing

__all__ = [
    "ALERT_COLUMNS",
    "DATA_ALERT_COLUMNS",
    "NO_DATA",
    "ROOM_COLUMNS",
    "alert_rows",
    "drift_table",
    "empty",
    "family_sections",
    "first_int",
    "room_flags",
]

NO_DATA = "no data for this period"


def empty(text: str) -> Note:
    """A note saying why a block is empty (rendered by base.html)."""
    return Note("empty", {"text": text})


def first_int(frame: pd.DataFrame, column: str) -> int:
    """The first row's integer in `column` (0 for no row or NULL)."""
    if frame.empty or is_missing(frame[column].iloc[0]):
        return 0
    return int(frame[column].iloc[0])


def room_flags(row: pd.Series) -> list[str]:
    """Words of the flag column of an audit group."""
    flags = []
    if bool(row.get("is_above_reference", False)):
        flags.append("above reference")
    if bool(row.get("is_well_below_reference", False)):
        flags.append("well below reference")
    if not bool(row.get("is_sample_adequate", True)):
        flags.append("too few")
    if is_missing(row.get("reference_value")):
        flags.append("no reference value")
    return flags


# Key columns only, so the table fits 1400 px; values carry their unit, the CI is one column.
# The CSV beside the table keeps every column (minimum n, scope note, citation...).
ROOM_COLUMNS = (
    Column("exam_label", "Exam type"), Column("population", "Population"), Column("stratum", "Band"),
    Column("site_label", "Site"), Column("room_label", "Room"), Column("quantity", "Quantity", "quantity"),
    Column("n", "n", "int"), Column("median", "Median", "value"),
    Column("median_ci_low..median_ci_high", "95 % CI", "range"),
    Column("reference_value", "Reference", "value"), Column("ratio_to_reference", "Ratio", "ratio"),
    Column("network_p75", "Network P75", "value"), Column("reference_set", "Set", "long"),
)

DATA_ALERT_COLUMNS = (
    Column("kind", "Kind"), Column("site_label", "Site"), Column("room_label", "Room"),
    Column("last_study_date", "Last study", "date"), Column("expected_per_week", "Usual studies / week", "num"),
    Column("observed_per_week", "Studies / week in period", "num"), Column("detail", "Detail"),
    Column("item_id", "Item", "key"))

ALERT_COLUMNS = (
    Column("action_text", "Action"),
    Column("study_date", "Date", "date"), Column("study_key", "Study (pseudonym)", "study"),
    Column("patient_key", "Patient (pseudonym)", "key"), Column("site_label", "Site"),
    Column("room_label", "Room"), Column("exam_label", "Exam type"),
    # the source says "from memory" when the threshold is not verified (CSV: threshold_verified)
    Column("rule_text", "Rule (source of the threshold; how the value was computed)",
           sub=(("Source", "source"), ("Value", "method"))),
    Column("quantity", "Quantity", "quantity"), Column("value_text", "Value", "text_num"),
    Column("threshold_text", "Threshold", "text_num"),
    Column("factor", "× threshold", "ratio"),
    Column("latest_note", "Latest review note"), Column("item_id", "Item", "key"),
)


def drift_table(drift: pd.DataFrame) -> Table:
    """Drift flags with the change in per cent (overview and trends)."""
    rows = drift.assign(change_pct=(drift["ratio_after_to_before"] - 1.0) * 100.0) if not drift.empty \
        else drift.assign(change_pct=pd.Series(dtype=float))
    return Table(
        "drift-flags", "Drift flags: a change of the monthly median at a month boundary", rows,
        (Column("site_label", "Site"), Column("room_label", "Room"), Column("exam_label", "Exam type"),
         Column("quantity", "Quantity", "quantity"),
         Column("change_month", "From month", "date"), Column("median_before", "Median before", "value"),
         Column("median_after", "Median after", "value"), Column("change_pct", "Change (%)", "num"),
         Column("n_before", "n before", "int"), Column("n_after", "n after", "int"),
         Column("p_value_bonferroni", "p (Bonferroni)", "p")))


def family_sections(frame: pd.DataFrame) -> list[tuple[str, pd.DataFrame]]:
    """(modality family, its rows) in the families' order."""
    if frame.empty:
        return []
    order = frame.groupby("modality_family", sort=False)["family_order"].min().sort_values(kind="stable")
    parts = dict(iter(frame.groupby("modality_family", sort=False)))   # one split, not a mask each
    return [(str(f), parts[f]) for f in order.index]


def alert_rows(alerts: pd.DataFrame) -> pd.DataFrame:
    """Alerts most urgent first (patient follow-up, protocol review, statistical review; then
    furthest beyond the threshold), with the rule in plain words and values in reading units
    (fluoroscopy time in min:s); the numeric columns stay for the CSV."""
    from pipeline.report.words import ACTION_WORDS, action_rank, format_value, rule_words

    if alerts.empty:
        return alerts.assign(action_text=pd.Series(dtype=str), rule_text=pd.Series(dtype=str),
                             value_text=pd.Series(dtype=str), threshold_text=pd.Series(dtype=str))
    # one pass over plain lists; the words of a rule are worded once per distinct rule (a
    # million events raise thousands of alerts of a few dozen rules)
    cols = {c: alerts[c].tolist() for c in ("rule", "family", "quantity", "threshold", "unit", "value")}
    words: dict[tuple, str] = {}
    rule_text = []
    for key in zip(cols["rule"], cols["family"], cols["quantity"], cols["threshold"], cols["unit"],
                   strict=True):
        text = words.get(key)
        if text is None:
            text = words[key] = rule_words(*key)
        rule_text.append(text)
    actions = alerts["action"].tolist()
    out = alerts.assign(
        action_text=[ACTION_WORDS.get(a, a) for a in actions],
        rule_text=rule_text,
        value_text=[format_value(v, u, q) for v, u, q in
                    zip(cols["value"], cols["unit"], cols["quantity"], strict=True)],
        threshold_text=[format_value(t, u, q) for t, u, q in
                        zip(cols["threshold"], cols["unit"], cols["quantity"], strict=True)],
        _tier=[action_rank(a) for a in actions])
    return out.sort_values("_tier", kind="stable").drop(columns="_tier").reset_index(drop=True)
