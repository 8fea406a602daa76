"""The monthly audit (the shell): choose the period and reference sets, run queries/audit/*.sql.

Tables written (replaced on each run, public interface): ``audit_medians``,
``network_reference``, ``dose_alerts``, ``drift_flags``, ``data_alerts`` (the data_check
tier: feeds that went quiet or thin), ``skin_dose`` (peak skin dose per RF/XA study) and
``skin_dose_map`` (its cells, for studies at a peak-skin-dose alert), ``skin_dose_factor``
(each study's factors and their sources); plus ``monthly_medians``
and ``study_estimate`` (SSDE and effective dose) for the dashboards. Every finding carries a
stable ``item_id`` (the same finding next period has the same id), and each run records its
period's findings in ``audit_finding`` (kept across runs: new / persisting / resolved).
"""

from __future__ import annotations

import datetime as dt
import tomllib
from dataclasses import dataclass, field
from functools import cache
from importlib import resources
from pathlib import Path

import pyarrow as pa

from queries import sql

from .errors import ConfigError
from .exams import load_exam_rules, load_indication_rules, rule_rows
from .metrics import median_ci_ranks
from .metrics.dose_check import METHOD_BY_POSITION, METHOD_UPPER_BOUND
from .warehouse.connection import connection
from .metrics.skin import skin_dose_rows
from .warehouse.derived import MAP_FLOOR_MGY, skin_rows_for
from .warehouse.load import ensure_schema, replace_exam_rules

__all__ = ["AUDIT_MEMORY_LIMIT", "AuditSettings", "AuditSummary", "audit_is_current",
           "load_alert_rules", "load_audit_settings", "period_bounds", "period_length",
           "previous_period", "run_audit", "skin_dose_rows"]


def _default_min_sample() -> dict[str, int]:
    from .strata import MIN_SAMPLE
    return {modality: n for modality, (n, _) in MIN_SAMPLE.items()}


@dataclass(frozen=True)
class AuditSettings:
    """Audit parameters; every default says where it comes from (kerma.toml ``[audit]``)."""

    adult_min_age_years: float = 16.0     # common practice (UK adult NDRLs), no source
    standard_weight_min_kg: float = 50.0  # ICRP Publication 135: standard-size adult 50-90 kg
    standard_weight_max_kg: float = 90.0
    # per modality; pipeline/strata.py MIN_SAMPLE gives each default's source (from memory)
    min_sample: dict[str, int] = field(default_factory=_default_min_sample)
    min_rooms_local_drl: int = 10         # ICRP 135: a local DRL from a reasonable number of rooms (10-20)
    mammography_thickness_band_mm: float = 10.0  # common practice, no source
    jurisdiction: str | None = None       # ISO 3166-1 alpha-2; None: one issuing body, see jurisdiction.py
    reference_sets: tuple[str, ...] = ()  # explicit sets, in order of precedence
    fallback: tuple[str, ...] = ()        # countries or set ids that fill gaps, labelled
    well_below_fraction: float = 0.5      # common practice, no source: review image quality
    outlier_min_n: int = 10               # common practice, no source
    drift_alpha: float = 0.001            # Bonferroni-corrected two-sided p
    drift_min_change: float = 0.2         # 20 % change of the median (common practice, no source)
    drift_min_n_side: int = 10
    # ICRP Publication 103 (2007) tissue weighting factors are the current ones; "ICRP 60" on request
    effective_dose_basis: str = "ICRP 103"
    # AAPM 204 fit coefficients are corroborated by secondary sources only (see
    # queries/seeds/ssde_coefficients.csv); used, and the method says so.
    ssde_use_unverified_fit: bool = True
    # Feed monitoring (data_alerts): common practice, no source. A device silent for this many
    # days at the end of the period, or whose weekly volume fell below this fraction of its
    # median week over the previous history_months, gets a data_check row.
    silent_days: int = 7
    volume_drop: float = 0.5
    history_months: int = 3
    min_history_weeks: int = 4


_SETTING_KEYS = {"adult_min_age_years", "standard_weight_min_kg", "standard_weight_max_kg",
                 "min_sample", "min_rooms_local_drl", "mammography_thickness_band_mm",
                 "jurisdiction", "reference_sets", "fallback", "well_below_fraction",
                 "outlier_min_n", "effective_dose_basis", "silent_days", "volume_drop",
                 "history_months", "min_history_weeks"}


def load_audit_settings(user_config: Path | None = None) -> AuditSettings:
    """AuditSettings from the ``[audit]`` table of kerma.toml (defaults for what it omits).

    Example::

        [audit]
        jurisdiction = "GB"            # or reference_sets = ["ukhsa_adult_ct_2022"]
        fallback = ["AU"]              # optional: another body's sets fill gaps, labelled
        min_rooms_local_drl = 10
        min_sample = { CT = 30 }       # per modality; others keep their defaults
        effective_dose_basis = "ICRP 103"
        silent_days = 7                # feed monitoring: a device quiet this long is flagged
        volume_drop = 0.5              # ... or below half its usual weekly volume

    Raises
    ------
    ConfigError
        Unknown key, or a value of the wrong kind, naming the file.
    """
    defaults = AuditSettings()
    if user_config is None or not Path(user_config).exists():
        return defaults
    try:
        raw = tomllib.loads(Path(user_config).read_text(encoding="utf-8")).get("audit", {})
    except tomllib.TOMLDecodeError as exc:
        raise ConfigError(f"{user_config} is not valid TOML: {exc}") from exc
    unknown = set(raw) - _SETTING_KEYS
    if unknown:
        raise ConfigError(f"{user_config}: unknown [audit] key(s) {', '.join(sorted(unknown))} "
                          f"(known: {', '.join(sorted(_SETTING_KEYS))})")
    values = dict(raw)
    if "min_sample" in values:
        if not isinstance(values["min_sample"], dict) or not all(
                isinstance(v, int) and v > 0 for v in values["min_sample"].values()):
            raise ConfigError(f"{user_config}: [audit] min_sample must map modalities to positive "
                              f"integers, e.g. min_sample = {{ CT = 30 }}")
        values["min_sample"] = {**defaults.min_sample,
                                **{k.upper(): v for k, v in values["min_sample"].items()}}
    for key in ("reference_sets", "fallback"):
        if key in values:
            item = values[key]
            values[key] = (item,) if isinstance(item, str) else tuple(item)
    if values.get("effective_dose_basis", "ICRP 103") not in ("ICRP 60", "ICRP 103"):
        raise ConfigError(f"{user_config}: [audit] effective_dose_basis must be 'ICRP 103' or 'ICRP 60'")
    for key in ("silent_days", "history_months", "min_history_weeks"):
        if key in values and not (isinstance(values[key], int) and values[key] > 0):
            raise ConfigError(f"{user_config}: [audit] {key} must be a positive integer")
    if "volume_drop" in values and not (isinstance(values["volume_drop"], (int, float))
                                        and 0 < values["volume_drop"] <= 1):
        raise ConfigError(f"{user_config}: [audit] volume_drop must be a fraction in (0, 1], e.g. 0.5")
    return AuditSettings(**values)


@dataclass
class AuditSummary:
    period: str
    date_from: dt.date
    date_to: dt.date
    reference_sets: list[str]
    n_studies: int = 0
    reference_body: str = ""
    reference_basis: str = ""
    fallback_sets: list[str] = field(default_factory=list)
    min_sample: dict[str, int] = field(default_factory=dict)
    min_rooms_local_drl: int = 10
    n_unmapped: int = 0
    n_groups: int = 0
    n_compared: int = 0      # groups compared with a reference level (the rest: reference_scope_note)
    n_too_few: int = 0       # groups below the minimum sample of their modality
    exceedances: list[dict] = field(default_factory=list)
    alerts_by_rule: dict[str, int] = field(default_factory=dict)
    drift: list[dict] = field(default_factory=list)
    data_alerts: list[dict] = field(default_factory=list)   # data_check tier, shown first

    @property
    def has_no_data(self) -> bool:
        """True when the period holds no study: "no data", never a clean audit."""
        return self.n_studies == 0

    @property
    def unmapped_share(self) -> float:
        return self.n_unmapped / self.n_studies if self.n_studies else 0.0


def period_bounds(period: str | None = None, date_from: dt.date | None = None,
                  date_to: dt.date | None = None) -> tuple[dt.date, dt.date, str]:
    """(first day, day after the last, label) for `--period YYYY-MM` or `--from D --to D`."""
    if period:
        try:
            first = dt.datetime.strptime(period, "%Y-%m").date()
        except ValueError:
            raise ConfigError(f"--period must be YYYY-MM, not {period!r}") from None
        nxt = dt.date(first.year + (first.month == 12), first.month % 12 + 1, 1)
        return first, nxt, period
    if date_from and date_to:
        if date_to < date_from:
            raise ConfigError("--to is before --from")
        return date_from, date_to + dt.timedelta(days=1), f"{date_from}..{date_to}"
    raise ConfigError("give --period YYYY-MM, or both --from and --to")


def period_length(first: dt.date, after: dt.date) -> str:
    """The length of the period [first, after): ``'N month(s)'`` for whole calendar months,
    else ``'N days'``; part of every finding's item_id (the same finding next period, same id)."""
    if first.day == 1 and after.day == 1:
        months = (after.year - first.year) * 12 + after.month - first.month
        return f"{months} month" + ("s" if months != 1 else "")
    return f"{(after - first).days} days"


def previous_period(first: dt.date, after: dt.date) -> tuple[dt.date, dt.date]:
    """(first day, day after the last) of the period of the same length just before [first, after).

    Whole calendar months step back by the same number of months; other periods by their days.
    """
    if first.day == 1 and after.day == 1:
        months = (after.year - first.year) * 12 + after.month - first.month
        index = first.year * 12 + first.month - 1 - months
        return dt.date(index // 12, index % 12 + 1, 1), first
    return first - (after - first), first


_ACTIONS = ("patient_follow_up", "protocol_review", "statistical_review")
_RULE_KEYS = {"rule", "family", "action", "quantity", "threshold", "unit", "source", "verified",
              "seed_rule", "protocol_family", "population", "age_min_years", "age_max_years",
              "phantom", "event_type"}


def load_alert_rules(user_config: Path | None = None) -> list[dict]:
    """Default alert rules (pipeline/alert_rules.toml), overridden by kerma.toml [[alert_rule]].

    A user's rule is taken as verified unless it says ``verified = false``; a default recalled
    from memory carries ``verified = false`` (dose_alerts.threshold_verified) and says so in
    its source text.

    Raises
    ------
    ConfigError
        A user rule without a name, lacking a required key, with an unknown key or action.
    """
    text = resources.files(__package__).joinpath("alert_rules.toml").read_text("utf-8")
    rules = {r["rule"]: dict(r) for r in tomllib.loads(text)["rule"]}
    if user_config is not None and Path(user_config).exists():
        raw = tomllib.loads(Path(user_config).read_text(encoding="utf-8"))
        for r in raw.get("alert_rule", []):
            if "rule" not in r:
                raise ConfigError(f"{user_config}: every [[alert_rule]] needs a `rule` name")
            unknown = set(r) - _RULE_KEYS
            if unknown:
                raise ConfigError(f"{user_config}: alert rule {r['rule']!r} has unknown key(s) "
                                  f"{', '.join(sorted(unknown))}")
            base = rules.get(r["rule"], {})
            merged = {**base, "verified": True, **r} if set(r) - {"rule"} else {**base, **r}
            missing = {"family", "action", "quantity", "threshold", "unit", "source"} - set(merged)
            if missing:
                raise ConfigError(f"{user_config}: alert rule {r['rule']!r} lacks {', '.join(sorted(missing))}")
            rules[r["rule"]] = merged
    for name, v in rules.items():
        if v.get("action") not in _ACTIONS:
            raise ConfigError(f"alert rule {name!r}: action must be one of {', '.join(_ACTIONS)}")
    return [{"rule": k, "family": v["family"], "action": v["action"], "quantity": v["quantity"],
             "phantom": v.get("phantom"), "threshold": float(v["threshold"]), "unit": v["unit"],
             "source": v["source"], "verified": bool(v.get("verified", False)),
             "protocol_family": v.get("protocol_family"), "population": v.get("population", "any"),
             "age_min_years": v.get("age_min_years"), "age_max_years": v.get("age_max_years"),
             "event_type": v.get("event_type")} for k, v in rules.items()]


_ALERT_SCHEMA = pa.schema([("rule", pa.string()), ("family", pa.string()), ("action", pa.string()),
                           ("quantity", pa.string()), ("phantom", pa.string()),
                           ("threshold", pa.float64()), ("unit", pa.string()),
                           ("source", pa.string()), ("verified", pa.bool_()),
                           ("protocol_family", pa.string()), ("population", pa.string()),
                           ("age_min_years", pa.float64()), ("age_max_years", pa.float64()),
                           ("event_type", pa.string())])
_ACCUMULATED_SCHEMA = pa.schema([("study_key", pa.string()), ("device_key", pa.string()),
                                 ("accumulated_ctdivol_mgy", pa.float64()), ("method", pa.string())])
_DRIFT_SCHEMA = pa.schema(
    [("period", pa.string()), ("device_key", pa.string()), ("site", pa.string()),
     ("exam_type", pa.string()), ("quantity", pa.string()), ("unit", pa.string()),
     ("change_month", pa.string()), ("median_before", pa.float64()),
     ("median_after", pa.float64()), ("ratio_after_to_before", pa.float64()),
     ("n_before", pa.int64()), ("n_after", pa.int64()), ("statistic_z", pa.float64()),
     ("p_value", pa.float64()), ("p_value_bonferroni", pa.float64()),
     ("n_candidates", pa.int64()), ("method", pa.string())])
_ESTIMATE_SCHEMA = pa.schema(
    [("study_key", pa.string()), ("patient_key", pa.string()), ("device_key", pa.string()),
     ("exam_type", pa.string()), ("study_date", pa.date32()), ("dlp_total_mgy_cm", pa.float64()),
     ("effective_dose_msv", pa.float64()), ("k_msv_per_mgy_cm", pa.float64()),
     ("effective_dose_basis", pa.string()), ("effective_dose_source", pa.string()),
     ("ssde_mgy", pa.float64()), ("ssde_method", pa.string())])
_SKIN_MAP_SCHEMA = pa.schema([("study_key", pa.string()), ("device_key", pa.string()),
                              ("around_mm", pa.float64()), ("along_mm", pa.float64()),
                              ("dose_mgy", pa.float64())])
_BAND_SCHEMA = pa.schema([("basis", pa.string()), ("stratum", pa.string()), ("low", pa.float64()),
                          ("high", pa.float64()), ("source", pa.string())])
_CI_SCHEMA = pa.schema([("n", pa.int64()), ("lower_rank", pa.int64()), ("upper_rank", pa.int64())])
_K_SCHEMA = pa.schema([("exam_type", pa.string()), ("patient_age_years", pa.float64()),
                       ("k_msv_per_mgy_cm", pa.float64()), ("basis", pa.string()),
                       ("source", pa.string())])
_FIT_SCHEMA = pa.schema([("phantom", pa.string()), ("a", pa.float64()), ("b_per_cm", pa.float64()),
                         ("d_min_cm", pa.float64()), ("d_max_cm", pa.float64()),
                         ("usable", pa.bool_())])
# Relations the audit reads many times and that join the configuration (site map, exam
# matches) to many columns, computed once per run into temporary tables that hide the views of
# the same name for the run's connection (queries/audit/materialise_*.sql). What depends on the
# data and the exam rules only (deduplicated events, exam texts, study totals, exam matches,
# audited values, skin dose) is kept as derived_* tables, refreshed per ingest run
# (pipeline/warehouse/derived.py); audit_observation is such a table with the site joined, read
# through its view: copying it with its site into a temporary table took 0.5 CPU seconds at 1M
# events, the join to the few hundred devices in each statement much less (measured, no other
# source). Kept instead of computed per audit: the audit at 1M events took 4.6 CPU seconds
# against 6.1 (bench/audit.py's warehouse, issue 14).
_MATERIALISED = ("study_dose",)
# DuckDB working memory of an audit run: beyond it, sorts, joins and the temporary tables above
# spill to the temp directory beside the warehouse, so memory stays flat however much history
# the warehouse holds (common practice, no source: well under half of a small 2-core, 4 GiB
# machine's RAM leaves room for Python and the OS). DuckDB fills its bound with cached blocks
# at 10M events, so the bound sets the audit's peak there, and a smaller warehouse stays under
# it: the peak RSS of run_audit (process with pandas, pyarrow and plotly loaded) was 1002 MiB at
# 10M events against 689 at 1M with 700 MB (1.45x), 805 with 500 MB, 708 against 593 with
# 400 MB (1.19x, flat within 25 %), for about 5-10 % more CPU (spilling); 500 MB ran out of
# memory before skin_dose stopped sorting its 2 KB rows (bench/audit.py's warehouses, issue
# 14; measured, no other source).
AUDIT_MEMORY_LIMIT = "400MB"
# Medians, quantiles, sorted lists and distinct counts hold their values in memory (DuckDB does
# not spill these aggregate states), so the statements that group every observation of the
# period per room (audit_medians, monthly_medians, the outlier rule of dose_alerts) run over
# parts of the rooms, by a hash of device_key, of about this many observations each: memory
# then stays flat however many rooms a network holds. Up to this many, one part: the plan and
# the row order are as before.
# Each part also rescans what the statement reads (about 0.2 s per part at 1M events), so parts
# are as large as fit: at 10M events (6.4M observations) one part ran out of a 1 GB limit,
# 7 parts of 1M fitted; 4 parts of 2M fitted 1 GB, 700 MB and 400 MB: see README (issue 14).
# Measured, no other source.
ROWS_PER_PART = 2_000_000


def _register_temp(con, name: str, table: pa.Table) -> None:
    con.register(f"incoming_{name}", table)
    try:
        con.execute(sql(f"create_{name}"))
    finally:
        con.unregister(f"incoming_{name}")


def _run_statements(con, text: str, params: dict) -> None:
    """Run a file of several statements, each with the parameters it names (DuckDB binds
    parameters per prepared statement)."""
    import re

    for statement in (s.strip() for s in text.split(";\n")):
        if re.sub(r"--[^\n]*", "", statement).strip():
            names = set(re.findall(r"\$(\w+)", statement))
            con.execute(statement, {k: v for k, v in params.items() if k in names})


def _by_parts(con, name: str, params: dict, parts: int) -> None:
    """Run queries/audit/<name>.sql, a ``create or replace table T as ...`` (or an ``insert into
    T``) whose rows each belong to one room and which keeps rows with ``hash(device_key) % $parts
    = $part``: the first part creates T, the others are inserted into it (an insert: every part
    is inserted). With several parts, T's row order is by part (the audit tables' order is not
    part of their interface: read them with ORDER BY)."""
    import re

    text = sql(name)
    head = re.search(r"create or replace table (\w+) as", text)
    for part in range(parts):
        if part and head is not None:
            text_part = text[:head.start()] + f"insert into {head.group(1)}" + text[head.end():]
        else:
            text_part = text
        # the part numbers go in as integer literals, not parameters: DuckDB evaluated
        # `hash(device_key) % $parts = $part` about 30x slower than the same with constants
        # (0.18 s against 0.007 s over 640k rows, DuckDB 2.0; measured, no other source)
        text_part = re.sub(r"\$parts\b", str(int(parts)), text_part)
        text_part = re.sub(r"\$part\b", str(int(part)), text_part)
        used = {k: v for k, v in params.items() if f"${k}" in text_part}
        con.execute(text_part, used)


def _records(cursor) -> list[dict]:
    """Rows of an executed query as dicts; NULL stays None (pandas would make it NaN, a float)."""
    columns = [d[0] for d in cursor.description]
    return [dict(zip(columns, row)) for row in cursor.fetchall()]


def _history_from(first: dt.date, months: int) -> dt.date:
    """Start of the feed history: whole 7-day weeks ending the day before `first`, within `months`."""
    days = (first - _months_before(first, months)).days
    return first - dt.timedelta(days=7 * (days // 7))


def _months_before(day: dt.date, months: int) -> dt.date:
    index = day.year * 12 + day.month - 1 - months
    return dt.date(index // 12, index % 12 + 1, 1) if day.day == 1 else \
        dt.date(index // 12, index % 12 + 1, min(day.day, 28))


def _effective_dose_factors(con, after: dt.date, settings: AuditSettings) -> pa.Table:
    """k (mSv per mGy.cm) for each exam type x patient age of the CT studies up to the period end:
    pipeline.reference.effective_dose_msv of 1 mGy.cm (an unknown age takes the adult
    coefficient; no row where no coefficient applies, e.g. an exam type without a body region)."""
    from .exams import EXAM_TYPES
    from .reference import UnverifiedReferenceError, effective_dose_msv

    rows = []
    for exam_type, age in con.execute(sql("select_ct_exam_ages"), {"date_to": after}).fetchall():
        exam = EXAM_TYPES.get(exam_type)
        if not (exam and exam.region):
            continue
        try:
            k, basis, source = effective_dose_msv(1.0, exam.region, age if age is not None else 40.0,
                                                  basis=settings.effective_dose_basis)
        except (ValueError, UnverifiedReferenceError):
            continue
        rows.append({"exam_type": exam_type, "patient_age_years": age, "k_msv_per_mgy_cm": k,
                     "basis": basis, "source": source})
    return pa.Table.from_pylist(rows, schema=_K_SCHEMA)


def _ssde_fits(settings: AuditSettings) -> pa.Table:
    """The AAPM Report 204 fit per CTDIvol phantom and whether the audit may use it."""
    from .reference import _ssde_fits as fits

    return pa.Table.from_pylist(
        [{"phantom": phantom, "a": f["a"], "b_per_cm": f["b"], "d_min_cm": f["d_min"],
          "d_max_cm": f["d_max"], "usable": bool(f["verified"] or settings.ssde_use_unverified_fit)}
         for phantom, f in fits().items()], schema=_FIT_SCHEMA)


def _drift_flags(con, after: dt.date, settings: AuditSettings):
    """Change points of the adult monthly series up to the period end (pipeline.metrics.drift):
    ranks and rank sums in DuckDB, the test per boundary in numpy, medians of the flagged
    candidates in DuckDB; never the raw values in Python."""
    from .metrics.drift import best_change_points, drift_flags

    _run_statements(con, sql("create_drift_observation"),
                    {"date_to": after, "adult_min_age": settings.adult_min_age_years})
    candidates = con.execute(sql("drift_candidates"), {"min_n_side": settings.drift_min_n_side}).df()
    best = best_change_points(candidates)
    chosen = best[best["p_value_bonferroni"] < settings.drift_alpha]
    con.register("drift_choice", pa.Table.from_pandas(
        chosen[["device_key", "site", "exam_type", "quantity", "unit", "change_month"]],
        preserve_index=False))
    try:
        medians = con.execute(sql("drift_medians")).df()
    finally:
        con.unregister("drift_choice")
    return drift_flags(chosen, medians, alpha=settings.drift_alpha,
                       min_change=settings.drift_min_change)


@cache
def _code_digest() -> str:
    """SHA-256 over the SQL, seeds and Python of the pipeline: a changed query or reference file
    makes every earlier audit stale."""
    import hashlib

    import queries

    h = hashlib.sha256()
    for root in (Path(queries.__file__).parent, Path(__file__).parent):
        for path in sorted(p for p in root.rglob("*") if p.suffix in (".sql", ".csv", ".py", ".toml")):
            h.update(str(path.relative_to(root)).encode() + b"\0" + path.read_bytes())
    return h.hexdigest()


def _inputs_fingerprint(con, first: dt.date, after: dt.date, reference_sets: list[str],
                        settings: AuditSettings, config: Path | None) -> str:
    """Digest of everything an audit of [first, after) reads: the warehouse's data (row counts
    and latest load run, queries/audit/audit_inputs_state.sql), the exam, indication and alert
    rules, the settings, the reference sets asked for, the version and the code."""
    import dataclasses
    import hashlib
    import json

    from . import __version__

    state = con.execute(sql("audit_inputs_state")).fetchone()
    inputs = {
        "period": [first.isoformat(), after.isoformat()], "version": __version__,
        "code": _code_digest(), "data": list(state), "reference_sets": list(reference_sets),
        "settings": dataclasses.asdict(settings), "alert_rules": load_alert_rules(config),
        "exam_rules": rule_rows(load_exam_rules(config)),
        "indication_rules": [dataclasses.astuple(r) for r in load_indication_rules(config)]}
    text = json.dumps(inputs, sort_keys=True, default=str)
    return hashlib.sha256(text.encode()).hexdigest()


def audit_is_current(warehouse: Path, *, period: str | None = None,
                     date_from: dt.date | None = None, date_to: dt.date | None = None,
                     reference_sets: list[str] | None = None, settings: AuditSettings | None = None,
                     config: Path | None = None, holds_tables: bool = True) -> bool:
    """True when an earlier `run_audit` of this period, with these arguments, is still current.

    Current: the audit run recorded for the period (audit_period) completed with the same
    inputs fingerprint as now: no data loaded since (row counts and latest load run of the raw
    tables), the same site map and reference levels, rules, settings, reference sets asked for,
    version and code. With `holds_tables` (default), that run must also be the latest audit of
    the warehouse, whose tables (audit_medians, dose_alerts, ...) the warehouse holds; without
    it, only its findings (audit_finding) need be current, e.g. the previous period of a report.

    Parameters are those of `run_audit`. Read-only; a warehouse never audited is not current.

    Raises
    ------
    ConfigError
        A bad period, setting or rule.
    WarehouseError
        The warehouse cannot be opened.
    """
    settings = settings or load_audit_settings(config)
    first, after, _ = period_bounds(period, date_from, date_to)
    last = after - dt.timedelta(days=1)
    with connection(warehouse, read_only=True) as con:
        names = {r[0] for r in con.execute(
            "select table_name from information_schema.columns "
            "where table_name = 'audit_period' and column_name = 'inputs_fingerprint'").fetchall()}
        if not names:
            return False
        latest = con.execute(sql("select_last_audit_run"), {
            "date_from": None if holds_tables else first,
            "date_last": None if holds_tables else last}).fetchone()
        if latest is None or (latest[1], latest[2]) != (first, last):
            return False
        explicit = reference_sets or list(settings.reference_sets)
        return latest[3] == _inputs_fingerprint(con, first, after, explicit, settings, config)


def _skin_dose(con, first: dt.date, after: dt.date, map_threshold_mgy: float | None) -> None:
    """Tables skin_dose, skin_dose_map and skin_dose_factor of the period, from the peak skin
    doses kept per study (derived_skin_dose*, pipeline/warehouse/derived.py); only the maps of
    studies below the kept maps' floor that `map_threshold_mgy` asks for are computed here."""
    con.execute(sql("create_skin_dose"), {"date_from": first, "date_to": after})
    con.execute(sql("create_skin_dose_factor"))
    extra = [_SKIN_MAP_SCHEMA.empty_table()]
    if map_threshold_mgy is not None and map_threshold_mgy < MAP_FLOOR_MGY:
        con.execute(sql("create_skin_map_wanted"),
                    {"threshold": map_threshold_mgy, "floor": MAP_FLOOR_MGY})
        reader = con.sql(sql("select_skin_map_events")).to_arrow_reader(50_000)
        extra += [cells for _, cells, _ in skin_rows_for(reader, map_threshold_mgy)]
    con.register("incoming_skin_dose_map", pa.concat_tables(extra))
    try:
        con.execute(sql("create_skin_dose_map"), {"threshold": map_threshold_mgy})
    finally:
        con.unregister("incoming_skin_dose_map")


def run_audit(warehouse: Path, *, period: str | None = None, date_from: dt.date | None = None,
              date_to: dt.date | None = None, reference_sets: list[str] | None = None,
              settings: AuditSettings | None = None, config: Path | None = None) -> AuditSummary:
    """Compute the audit tables for the period; returns what the summary prints.

    Parameters
    ----------
    warehouse : Path
        DuckDB warehouse file.
    period, date_from, date_to
        ``YYYY-MM``, or the first and last day (see `period_bounds`).
    reference_sets : list of str, optional
        Reference sets in order of precedence; overrides ``[audit]`` in `config` (see
        pipeline/jurisdiction.py for the default: one jurisdiction, one issuing body).
    settings : AuditSettings, optional
        Overrides the ``[audit]`` table of `config`.
    config : Path, optional
        kerma.toml: ``[audit]``, ``[[exam_rule]]``, ``[[indication_rule]]``, ``[[alert_rule]]``.

    Returns
    -------
    AuditSummary

    Raises
    ------
    ConfigError
        A bad period, setting or rule, an unknown reference set, or a jurisdiction with no set
        in force in the period.
    """
    from .exams import EXAM_TYPES
    from .jurisdiction import choose_reference_sets
    from .reference_store import install_reference_sets
    from .strata import stratum_basis, stratum_bands

    settings = settings or load_audit_settings(config)
    first, after, label = period_bounds(period, date_from, date_to)
    with connection(warehouse) as con:   # never creates one: a missing file is an error
        ensure_schema(con)
        # the derived tables: a no-op after an ingest (it refreshed them), the exam matches
        # again if these rules differ, a rebuild for a warehouse of an earlier version
        replace_exam_rules(con, rule_rows(load_exam_rules(config)))
        install_reference_sets(con)
        fingerprint = _inputs_fingerprint(con, first, after,
                                          reference_sets or list(settings.reference_sets),
                                          settings, config)
        con.execute(f"set memory_limit = '{AUDIT_MEMORY_LIMIT}'")
        for name in _MATERIALISED:
            con.execute(sql(f"materialise_{name}"), {"date_to": after})
        choice = choose_reference_sets(
            _records(con.execute(sql("select_reference_set_meta"))), first,
            after - dt.timedelta(days=1), explicit=reference_sets or list(settings.reference_sets),
            jurisdiction=settings.jurisdiction, fallback=settings.fallback)
        chosen = choice.ordered
        _register_temp(con, "chosen_reference_set", pa.table({
            "set_id": pa.array(chosen, pa.string()),
            "precedence": pa.array(range(1, len(chosen) + 1), pa.int64()),
            "is_fallback": pa.array([s in choice.fallback for s in chosen], pa.bool_())}))
        _register_temp(con, "stratum_band", pa.Table.from_pylist(
            stratum_bands(settings.mammography_thickness_band_mm), schema=_BAND_SCHEMA))
        _register_temp(con, "exam_stratum_basis", pa.Table.from_pylist(
            [{"exam_type": e.id, "basis": stratum_basis(e.id, e.modality), "region": e.region}
             for e in EXAM_TYPES.values()],
            schema=pa.schema([("exam_type", pa.string()), ("basis", pa.string()),
                              ("region", pa.string())])))
        _register_temp(con, "min_sample_rule", pa.Table.from_pylist(
            [{"modality": m, "min_sample": n} for m, n in settings.min_sample.items()],
            schema=pa.schema([("modality", pa.string()), ("min_sample", pa.int64())])))
        _register_temp(con, "indication_rule", pa.Table.from_pylist(
            [{"rule_id": n, "exam_type": r.exam, "indication": r.indication, "phrase": phrase}
             for n, r in enumerate(load_indication_rules(config), start=1) for phrase in r.any],
            schema=pa.schema([("rule_id", pa.int64()), ("exam_type", pa.string()),
                              ("indication", pa.string()), ("phrase", pa.string())])))
        con.execute(sql("create_study_indication"))
        con.execute(sql("create_audit_input"))
        con.execute(sql("reference_in_force"))
        max_n = con.execute(sql("max_group_size"), {"date_from": first, "date_to": after}).fetchall()[0][0] or 1
        _register_temp(con, "median_ci_rank", pa.Table.from_pylist(median_ci_ranks(max_n), schema=_CI_SCHEMA))
        rules = load_alert_rules(config)
        _register_temp(con, "alert_rule_in_force", pa.Table.from_pylist(rules, schema=_ALERT_SCHEMA))
        params = {"date_from": first, "date_to": after, "period": label,
                  "adult_min_age": settings.adult_min_age_years,
                  "weight_min": settings.standard_weight_min_kg,
                  "weight_max": settings.standard_weight_max_kg,
                  "low_fraction": settings.well_below_fraction}
        (n_obs,) = con.execute(sql("count_period_observations"),
                               {"date_to": after}).fetchall()[0]
        parts = max(1, -(-n_obs // ROWS_PER_PART))
        _by_parts(con, "audit_medians", params, parts)
        # the period's distribution per room group, for the dashboards (which then never sort
        # every observation again); the same parts as audit_medians
        _by_parts(con, "audit_distribution", {"date_from": first, "date_to": after,
                                              "adult_min_age": settings.adult_min_age_years},
                  parts)
        con.execute(sql("network_reference"), {"period": label,
                                               "min_rooms": settings.min_rooms_local_drl})
        con.execute(sql("create_ct_acquisition"), {"date_from": first, "date_to": after})
        con.execute(sql("create_ct_accumulated"), {
            "method_by_position": METHOD_BY_POSITION, "method_upper_bound": METHOD_UPPER_BOUND})
        # the rules on each study's own values over the whole period at once (per part, each
        # part re-read the studies and their CT events: 4 parts at 10M events), then the outlier
        # rule, whose medians hold the values, over the parts
        con.execute(sql("dose_alerts"), {"date_from": first, "date_to": after,
                                         "adult_min_age": settings.adult_min_age_years})
        con.execute(sql("drop_ct_acquisition"))
        _by_parts(con, "dose_alerts_outliers", {"date_from": first, "date_to": after,
                                                "outlier_min_n": settings.outlier_min_n}, parts)
        con.register("effective_dose_factor", _effective_dose_factors(con, after, settings))
        con.register("ssde_fit", _ssde_fits(settings))
        try:
            con.execute(sql("create_study_estimate"), {"date_to": after})
        finally:
            con.unregister("effective_dose_factor")
            con.unregister("ssde_fit")
        con.execute(sql("cumulative_alerts"), {"date_from": first, "date_to": after,
                                               "window_from": _months_before(after, 12)})
        psd_thresholds = [r["threshold"] for r in rules if r["family"] == "peak_skin_dose"]
        _skin_dose(con, first, after, min(psd_thresholds) if psd_thresholds else None)
        con.execute(sql("skin_dose_alerts"))
        adult = {"date_to": after, "adult_min_age": settings.adult_min_age_years}
        _by_parts(con, "monthly_medians", adult, parts)
        drift = _drift_flags(con, after, settings)
        drift.insert(0, "period", label)
        con.register("incoming_drift_flags",
                     pa.Table.from_pandas(drift, schema=_DRIFT_SCHEMA, preserve_index=False))
        try:
            con.execute(sql("create_drift_flags"))
        finally:
            con.unregister("incoming_drift_flags")
        con.execute(sql("update_median_after_change"), {"date_from": first, "date_to": after,
                                                        "adult_min_age": settings.adult_min_age_years})
        length = period_length(first, after)
        recorded_at = dt.datetime.now(dt.UTC).replace(tzinfo=None)
        for table in ("audit_medians", "dose_alerts", "drift_flags"):
            _run_statements(con, sql(f"set_item_id_{table}"), {"period_length": length})
        _run_statements(con, sql("record_audit_findings"), {
            "period": label, "date_from": first, "date_last": after - dt.timedelta(days=1),
            "period_length": length, "recorded_at": recorded_at})
        summary = AuditSummary(label, first, after - dt.timedelta(days=1), chosen,
                               reference_body=choice.body, reference_basis=choice.basis,
                               fallback_sets=list(choice.fallback),
                               min_sample=dict(settings.min_sample),
                               min_rooms_local_drl=settings.min_rooms_local_drl)
        summary.n_studies, summary.n_unmapped = con.execute(
            sql("count_unmapped"), {"date_from": first, "date_to": after}).fetchall()[0]
        summary.n_groups, summary.n_compared, summary.n_too_few = con.execute(
            sql("count_audit_groups")).fetchall()[0]
        summary.exceedances = con.execute(sql("select_exceedances")).df().to_dict("records")
        summary.alerts_by_rule = dict(con.execute(sql("count_alerts_by_rule")).fetchall())
        summary.drift = drift.to_dict("records")
        con.execute(sql("data_alerts"), {
            "period": label, "date_from": first, "date_to": after,
            "history_from": _history_from(first, settings.history_months),
            "silent_days": settings.silent_days, "volume_drop": float(settings.volume_drop),
            "min_history_weeks": settings.min_history_weeks})
        summary.data_alerts = _records(con.execute(sql("select_data_alerts")))
        # last: only a run that got this far counts as current (audit_is_current)
        con.execute(sql("set_audit_inputs_fingerprint"), {
            "fingerprint": fingerprint, "date_from": first,
            "date_last": after - dt.timedelta(days=1), "recorded_at": recorded_at})
    return summary

