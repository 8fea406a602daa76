"""Plain words for rule ids, quantities and values (pure; shared by the report and the pages).

Rule ids such as ``aapm_ct_notification_adult_head`` are for machines; a committee reads
"CT dose-check notification, adult head, 80 mGy". Fluoroscopy time is shown in min:s.
"""

from __future__ import annotations

import math
from typing import Any

__all__ = ["ACTION_TIERS", "ACTION_WORDS", "QUANTITY_WORDS", "action_rank", "format_value",
           "rule_words"]

# The order a reader needs: a patient to follow up first, then a protocol to review, then a
# statistical finding. issue 16 may put a data_check tier in front.
ACTION_TIERS = ("patient_follow_up", "protocol_review", "statistical_review")
ACTION_WORDS = {"patient_follow_up": "Patient follow-up",
                "protocol_review": "Protocol review",
                "statistical_review": "Statistical review"}

QUANTITY_WORDS = {"dose_rp": "Ka,r (air kerma at the reference point)",
                  "dap": "DAP (kerma-area product)", "fluoro_time": "fluoroscopy time",
                  "ctdivol": "CTDIvol", "dlp": "DLP", "effective_dose": "effective dose (estimate)",
                  "ka_e": "entrance air kerma", "entrance_dose": "entrance dose",
                  "agd": "average glandular dose", "ssde": "SSDE"}

_FAMILY_WORDS = {
    "fluoro_substantial_dose": "Substantial radiation dose level (NCRP 168)",
    "ct_dose_check_notification": "CT dose-check notification",
    "ct_dose_check_alert": "CT dose-check alert (CTDIvol accumulated at a table position)",
    "device_dose_check": "The scanner's own dose-check value",
    "robust_outlier": "Unusual dose for this room and exam type",
    "cumulative_effective_dose": "Cumulative effective-dose estimate over 12 months",
    "peak_skin_dose": "Peak skin dose estimate at the follow-up level (NCRP 168)",
}
_RULE_WORDS = {
    "robust_outlier_high": "Unusually high dose for this room and exam type (robust outlier)",
    "robust_outlier_low": "Unusually low dose for this room and exam type (robust outlier; check image quality)",
    "median_above_reference": "Room median above the reference level",
    "median_well_below_reference": "Room median below half the reference level (check image quality)",
    "median_drift": "Room median changed during the months (drift)",
    "device_dose_check_notification": "The scanner's own dose-check notification value",
    "device_dose_check_alert": "The scanner's own dose-check alert value",
}
_PROTOCOL_WORDS = {"head": "head", "torso": "body", "brain_perfusion": "brain perfusion",
                   "cardiac": "cardiac"}


def action_rank(action: str | None) -> int:
    """Position of an action tier in `ACTION_TIERS` (unknown tiers last)."""
    return ACTION_TIERS.index(action) if action in ACTION_TIERS else len(ACTION_TIERS)


def _missing(value: Any) -> bool:
    return value is None or (isinstance(value, float) and math.isnan(value))


def format_value(value: Any, unit: str | None = None, quantity: str | None = None) -> str:
    """A value with its unit for reading: 3 significant figures; fluoroscopy time as min:s.

    >>> format_value(4080.0, "s", "fluoro_time")
    '68:00 min:s'
    >>> format_value(6200.0, "mGy")
    '6200 mGy'
    """
    if _missing(value):
        return "–"
    number = float(value)
    if quantity == "fluoro_time" or unit == "s":
        total = round(number)
        return f"{total // 60}:{total % 60:02d} min:s"
    digits = f"{number:.3g}" if abs(number) < 1000 else f"{number:.0f}"
    if "e" in digits:
        digits = f"{number:.3f}"
    return f"{digits} {unit}".strip() if unit else digits


def rule_words(rule: str, family: str | None = None, quantity: str | None = None,
               threshold: float | None = None, unit: str | None = None,
               method: str | None = None) -> str:
    """The rule in plain words, e.g. "CT dose-check notification, adult head, 80 mGy".

    Parameters
    ----------
    rule, family, quantity
        The rule id, its family and the quantity it checks (columns of ``dose_alerts``).
    threshold, unit
        Shown after the words for fixed-threshold rules (not for outliers, whose threshold is
        computed per room).
    method
        Unused words of the method are not repeated; accepted for symmetry with dose_alerts rows.
    """
    if rule in _RULE_WORDS:
        return _RULE_WORDS[rule]
    if family == "ct_dose_check_notification":
        parts = rule.removeprefix("aapm_ct_notification_").split("_")
        population = "paediatric" if parts and parts[0] == "paediatric" else "adult"
        region = next((w for key, w in _PROTOCOL_WORDS.items() if key.split("_")[0] in parts), "")
        age = ""
        if "under" in parts:
            age = "under " + parts[parts.index("under") + 1].replace("y", " y")
        elif "to" in parts:
            i = parts.index("to")
            age = f"{parts[i - 1]} to {parts[i + 1].replace('y', ' y')}"
        extra = " ".join(p for p in ("retrospective" if "retrospective" in parts else "",
                                     "prospective" if "prospective" in parts else "") if p)
        phantom = next((f"{p[:-2]} cm phantom" for p in parts if p.endswith("cm")), "")
        words = ", ".join(w for w in (_FAMILY_WORDS[family],
                                      " ".join(w for w in (population, region, extra) if w),
                                      age, phantom) if w)
    else:
        words = _FAMILY_WORDS.get(family or "", rule.replace("_", " "))
        if quantity and family in ("fluoro_substantial_dose",):
            words += f", {QUANTITY_WORDS.get(quantity, quantity)}"
    if threshold is not None and not _missing(threshold) and family not in ("robust_outlier",):
        words += f", {format_value(threshold, unit, quantity)}"
    return words
