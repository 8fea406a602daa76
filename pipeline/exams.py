"""Standard exam types and the user-editable rules that map what units send onto them.

Exam types follow how reference levels are published (anatomy, and the clinical indication
where the tables use one). Radiography types are per radiograph, as radiography reference
doses are quoted per radiograph; the others are per examination.
"""

from __future__ import annotations

import re
import tomllib
from dataclasses import dataclass
from importlib import resources
from pathlib import Path
from typing import Any

from .errors import ConfigError

__all__ = ["EXAM_TYPES", "ExamType", "FIELDS", "ExamRule", "IndicationRule", "load_exam_rules",
           "load_indication_rules", "normalise", "rule_rows"]


@dataclass(frozen=True, slots=True)
class ExamType:
    id: str
    modality: str          # CT | DX | RF | XA | MG (DX covers CR rooms too)
    label: str
    per: str               # examination | radiograph | view
    region: str | None     # effective-dose region for DLP -> E (CT only)
    quantities: tuple[str, ...]


def _t(id, modality, label, per, region, *quantities) -> ExamType:
    return ExamType(id, modality, label, per, region, quantities)


EXAM_TYPES: dict[str, ExamType] = {t.id: t for t in [
    _t("ct_head", "CT", "CT head", "examination", "head", "dlp", "ctdivol"),
    _t("ct_sinuses", "CT", "CT paranasal sinuses", "examination", "head", "dlp", "ctdivol"),
    _t("ct_cervical_spine", "CT", "CT cervical spine", "examination", "neck", "dlp", "ctdivol"),
    _t("ct_chest", "CT", "CT chest", "examination", "chest", "dlp", "ctdivol"),
    _t("ct_pulmonary_angiography", "CT", "CT pulmonary angiography", "examination", "chest", "dlp", "ctdivol"),
    _t("ct_abdomen_pelvis", "CT", "CT abdomen and pelvis", "examination", "abdomen_pelvis", "dlp", "ctdivol"),
    _t("ct_chest_abdomen_pelvis", "CT", "CT chest, abdomen and pelvis", "examination", "chest_abdomen_pelvis", "dlp", "ctdivol"),
    _t("ct_kub", "CT", "CT kidneys, ureters, bladder", "examination", "abdomen_pelvis", "dlp", "ctdivol"),
    _t("ct_lumbar_spine", "CT", "CT lumbar spine", "examination", "abdomen_pelvis", "dlp", "ctdivol"),
    _t("ct_neck", "CT", "CT neck (soft tissue)", "examination", "neck", "dlp", "ctdivol"),
    _t("ct_chest_high_resolution", "CT", "CT chest, high resolution", "examination", "chest", "dlp", "ctdivol"),
    _t("ct_chest_abdomen", "CT", "CT chest and abdomen", "examination", "chest_abdomen_pelvis", "dlp", "ctdivol"),
    _t("ct_neck_chest_abdomen_pelvis", "CT", "CT neck, chest, abdomen and pelvis", "examination", "chest_abdomen_pelvis", "dlp", "ctdivol"),
    _t("ct_colonography", "CT", "CT colonography", "examination", "abdomen_pelvis", "dlp", "ctdivol"),
    _t("ct_urogram", "CT", "CT urogram", "examination", "abdomen_pelvis", "dlp", "ctdivol"),
    _t("dx_chest_pa", "DX", "Chest PA radiograph", "radiograph", None, "dap", "ka_e"),
    _t("dx_abdomen_ap", "DX", "Abdomen AP radiograph", "radiograph", None, "dap", "ka_e"),
    _t("dx_pelvis_ap", "DX", "Pelvis AP radiograph", "radiograph", None, "dap", "ka_e"),
    _t("dx_lumbar_spine_ap", "DX", "Lumbar spine AP radiograph", "radiograph", None, "dap", "ka_e"),
    _t("dx_lumbar_spine_lat", "DX", "Lumbar spine lateral radiograph", "radiograph", None, "dap", "ka_e"),
    _t("rf_barium_swallow", "RF", "Barium swallow", "examination", None, "dap", "dose_rp", "fluoro_time"),
    _t("xa_coronary_angiography", "XA", "Coronary angiography", "examination", None, "dap", "dose_rp", "fluoro_time"),
    _t("xa_coronary_intervention", "XA", "Percutaneous coronary intervention", "examination", None, "dap", "dose_rp", "fluoro_time"),
    _t("mg_screening", "MG", "Screening mammography", "view", None, "agd"),
]}

# Field order in which rules are tried (the order: codes, then protocol, then text).
FIELDS = ("procedure_code", "acquisition_protocol", "study_description", "series_description",
          "body_part")

_NON_ALNUM = re.compile(r"[^0-9a-z]+")


def normalise(text: str | None) -> str:
    """Lower case, punctuation to spaces, single spaces: 'CT ABDO/PELVIS C+' -> 'ct abdo pelvis c'.

    The same rule is applied in SQL (queries/staging/stg_exam_text.sql)."""
    return _NON_ALNUM.sub(" ", (text or "").lower()).strip()


@dataclass(frozen=True, slots=True)
class ExamRule:
    exam: str
    field: str
    modality: tuple[str, ...]
    any: tuple[str, ...]
    none: tuple[str, ...]
    source: str


def _rule(raw: dict[str, Any], source: str, n: int) -> ExamRule:
    where = f"{source}, rule {n}"
    exam = raw.get("exam")
    if exam not in EXAM_TYPES:
        raise ConfigError(f"{where}: unknown exam type {exam!r} (known: {', '.join(EXAM_TYPES)})")
    field = raw.get("field")
    if field not in FIELDS:
        raise ConfigError(f"{where}: field must be one of {', '.join(FIELDS)}, not {field!r}")
    modality = raw.get("modality", ())
    modality = (modality,) if isinstance(modality, str) else tuple(modality)
    phrases = raw.get("codes") if field == "procedure_code" else raw.get("any")
    if not phrases:
        raise ConfigError(f"{where}: needs at least one phrase in "
                          f"{'codes' if field == 'procedure_code' else 'any'}")
    unknown = set(raw) - {"exam", "field", "modality", "any", "none", "codes"}
    if unknown:
        raise ConfigError(f"{where}: unknown key(s) {', '.join(sorted(unknown))}")
    return ExamRule(exam, field, tuple(m.upper() for m in modality),
                    tuple(normalise(p) for p in phrases),
                    tuple(normalise(p) for p in raw.get("none", ())), source)


def load_exam_rules(user_config: Path | None = None) -> list[ExamRule]:
    """User rules (kerma.toml [[exam_rule]]) first, then the shipped defaults."""
    rules: list[ExamRule] = []
    if user_config is not None and Path(user_config).exists():
        try:
            raw = tomllib.loads(Path(user_config).read_text(encoding="utf-8"))
        except tomllib.TOMLDecodeError as exc:
            raise ConfigError(f"{user_config} is not valid TOML: {exc}") from exc
        rules += [_rule(r, str(user_config), n + 1) for n, r in enumerate(raw.get("exam_rule", []))]
    text = resources.files(__package__).joinpath("exam_rules.toml").read_text("utf-8")
    rules += [_rule(r, "exam_rules.toml", n + 1)
              for n, r in enumerate(tomllib.loads(text).get("rule", []))]
    return rules


def rule_rows(rules: list[ExamRule]) -> list[dict]:
    """One row per phrase for the raw_exam_rule table (rule order = precedence)."""
    rows = []
    for order, rule in enumerate(rules, start=1):
        for modality in rule.modality or (None,):
            for kind, phrases in (("any", rule.any), ("none", rule.none)):
                for phrase in phrases:
                    rows.append({"rule_id": order, "exam_type": rule.exam, "field": rule.field,
                                 "field_priority": FIELDS.index(rule.field), "modality": modality,
                                 "kind": kind, "phrase": phrase, "source": rule.source})
    return rows


@dataclass(frozen=True, slots=True)
class IndicationRule:
    """Studies of `exam` whose texts contain one of `any` are for the clinical `indication`."""

    exam: str
    indication: str
    any: tuple[str, ...]
    source: str


def _indication_rule(raw: dict[str, Any], source: str, n: int) -> IndicationRule:
    where = f"{source}, indication rule {n}"
    if raw.get("exam") not in EXAM_TYPES:
        raise ConfigError(f"{where}: unknown exam type {raw.get('exam')!r}")
    unknown = set(raw) - {"exam", "indication", "any"}
    if unknown:
        raise ConfigError(f"{where}: unknown key(s) {', '.join(sorted(unknown))}")
    if not str(raw.get("indication") or "").strip() or not raw.get("any"):
        raise ConfigError(f"{where}: needs an `indication` and at least one phrase in `any`")
    return IndicationRule(raw["exam"], str(raw["indication"]).strip(),
                          tuple(normalise(p) for p in raw["any"]), source)


def load_indication_rules(user_config: Path | None = None) -> list[IndicationRule]:
    """Indication rules: kerma.toml [[indication_rule]] first, then the shipped defaults
    (``[[indication_rule]]`` in exam_rules.toml).

    Raises
    ------
    ConfigError
        Unknown exam type or key, or a rule without an indication or phrases.
    """
    rules: list[IndicationRule] = []
    if user_config is not None and Path(user_config).exists():
        try:
            raw = tomllib.loads(Path(user_config).read_text(encoding="utf-8"))
        except tomllib.TOMLDecodeError as exc:
            raise ConfigError(f"{user_config} is not valid TOML: {exc}") from exc
        rules += [_indication_rule(r, str(user_config), n + 1)
                  for n, r in enumerate(raw.get("indication_rule", []))]
    text = resources.files(__package__).joinpath("exam_rules.toml").read_text("utf-8")
    rules += [_indication_rule(r, "exam_rules.toml", n + 1)
              for n, r in enumerate(tomllib.loads(text).get("indication_rule", []))]
    return rules
