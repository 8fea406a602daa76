"""PURE: what a de-identified site extract holds, its manifest, and the checks a merge runs.

A site extract is one Parquet file per raw table (rows of one site and one period) plus
``manifest.json``. The network warehouse receives the rows into the same raw tables a site
warehouse has, so every view, ``kerma audit``, ``kerma dashboard`` and ``kerma report`` run on
it unchanged; ``network_extract`` records where each extract came from.

What an extract leaves out (DICOM PS3.15 Annex E, Basic Application Level Confidentiality
Profile, is the model): file paths and file hashes (``raw_dose_object.path``/``sha256``),
the site's run ids, the input-file table (``raw_source_object``: paths, messages) and the run
tables. Patients and studies are already pseudonyms in the warehouse (``pipeline.pseudonym``);
ages, never dates of birth, are stored. SOP Instance, Irradiation Event and Series Instance
UIDs are replaced by keyed pseudonyms ``2.25.<HMAC>`` (the same key as the patient pseudonyms,
namespace ``extract-uid``), also where a UID appears in a message text.

The manifest's checksums detect accidental damage (truncation, a changed file, an edited
manifest); they are not a signature: whoever can rewrite both files and manifest can forge an
extract, so extracts travel over an authenticated channel.
"""

from __future__ import annotations

import datetime as dt
import hashlib
import json
import re
from collections.abc import Callable, Iterable
from dataclasses import dataclass
from enum import Enum

import pyarrow as pa

from .errors import ExtractError
from .warehouse.tables import GRAIN, SCHEMAS

__all__ = ["EXTRACT_TABLES", "LAKE_RELATIONS", "MANIFEST_NAME", "PSEUDONYM_SCHEME",
           "SCHEMA_VERSION", "ExtractError", "ExtractTable", "KeyScope", "LakeRelation",
           "Manifest", "build_manifest", "expected_schema", "extract_id", "file_name",
           "parse_manifest", "pseudonymise_table", "pseudonymise_uid", "schema_problem",
           "scrub_uids"]

SCHEMA_VERSION = 1
"""Version of the extract layout (tables, columns, types). A merge refuses any other."""

MANIFEST_NAME = "manifest.json"
FORMAT = "kerma-ledger site extract"
PSEUDONYM_SCHEME = "kerma-hmac-sha256-v1"
"""patient_key / study_key: 32 hex of HMAC-SHA256(key, namespace|identifier) (RFC 2104,
pipeline.pseudonym); UIDs: 2.25.<integer of the same HMAC under namespace extract-uid>."""

UID_NAMESPACE = "extract-uid"
# A DICOM UID (PS3.5 9.1): digits and dots, at least three components; in message texts.
_UID_RE = re.compile(r"(?<![\d.])[0-2](?:\.\d+){3,}(?![\d.])")


class KeyScope(str, Enum):
    """Whose pseudonymisation key made an extract's pseudonyms (declared by the exporter)."""

    NETWORK = "network"   # shared by the network's sites: one patient links across sites
    SITE = "site"         # the site's own: patients link within the site only


@dataclass(frozen=True)
class ExtractTable:
    """One raw table as it travels in an extract."""

    name: str                       # raw_<name> in both warehouses; <name>.parquet in the extract
    omitted: tuple[str, ...]        # columns never exported (paths, hashes, the site's run ids)
    uid_columns: tuple[str, ...] = ()   # replaced by keyed pseudonyms
    text_columns: tuple[str, ...] = ()  # free text: UIDs inside are replaced too
    run_column: str = "run_id"          # set to the extract id in the network warehouse
    key: tuple[str, ...] = ()           # one row per value in an extract (the raw table's grain)


EXTRACT_TABLES: tuple[ExtractTable, ...] = (
    ExtractTable("device", ("first_run_id",), run_column="first_run_id", key=("device_key",)),
    ExtractTable("study", ("first_run_id",), run_column="first_run_id", key=("study_key",)),
    ExtractTable("dose_object", ("path", "sha256", "run_id"), ("sop_instance_uid",),
                 key=("sop_instance_uid",)),
    ExtractTable("ct_event", ("run_id",), ("event_uid", "sop_instance_uid", "series_instance_uid"),
                 key=GRAIN["ct_event"]),
    ExtractTable("projection_event", ("run_id",), ("event_uid", "sop_instance_uid"),
                 key=GRAIN["projection_event"]),
    ExtractTable("accumulated", ("run_id",), ("sop_instance_uid",), key=GRAIN["accumulated"]),
    ExtractTable("value_issue", ("run_id",), ("issue_id", "sop_instance_uid", "event_uid"),
                 ("detail",), key=GRAIN["value_issue"]),
)


@dataclass(frozen=True)
class LakeRelation:
    """One public relation of the Parquet lake and the columns it is partitioned by."""

    name: str
    partition_by: tuple[str, ...] = ()
    date_column: str | None = None   # year and month partitions come from this column
    omitted: tuple[str, ...] = ()    # columns left out of the lake


_MYM = ("modality", "year", "month")
# Partitioned by modality, year and month where the relation has them (Hive layout
# name=value/ folders). Left out on purpose: source_object.path and .detail (file paths,
# messages that quote them), review_note (reviewers' names and free text).
LAKE_RELATIONS: tuple[LakeRelation, ...] = (
    LakeRelation("study_dose", _MYM, "study_date"),
    LakeRelation("irradiation_event", _MYM, "started_at"),
    LakeRelation("audit_observation", _MYM, "study_date"),
    LakeRelation("device", ("modality",)),
    LakeRelation("value_issue"),
    LakeRelation("source_object", omitted=("path", "detail")),
    LakeRelation("key_epoch"),
    LakeRelation("pipeline_run"),
    LakeRelation("network_extract"),
    LakeRelation("audit_medians"),
    LakeRelation("network_reference"),
    LakeRelation("dose_alerts", ("year", "month"), "study_date"),
    LakeRelation("drift_flags"),
    LakeRelation("data_alerts"),
    LakeRelation("monthly_medians"),
    LakeRelation("audit_distribution"),
    LakeRelation("study_estimate", ("year", "month"), "study_date"),
    LakeRelation("skin_dose", _MYM, "study_date"),
    LakeRelation("audit_finding"),
)


def file_name(table: str) -> str:
    """File of raw table `table` inside an extract folder."""
    return f"{table}.parquet"


def expected_schema(table: ExtractTable) -> pa.Schema:
    """Arrow schema of the table's Parquet file at SCHEMA_VERSION (raw schema minus omitted)."""
    schema = SCHEMAS[table.name]
    for column in table.omitted:
        schema = schema.remove(schema.get_field_index(column))
    return schema


def schema_problem(actual: pa.Schema, expected: pa.Schema) -> str | None:
    """What differs between a file's schema and the expected one (None: they agree)."""
    if actual.names != expected.names:
        missing = [n for n in expected.names if n not in actual.names]
        extra = [n for n in actual.names if n not in expected.names]
        return (f"columns differ (missing: {', '.join(missing) or 'none'}; "
                f"unexpected: {', '.join(extra) or 'none'})")
    for field in expected:
        if not actual.field(field.name).type.equals(field.type):
            return f"column {field.name} is {actual.field(field.name).type}, expected {field.type}"
    return None


def pseudonymise_uid(uid: str, pseudonymise: Callable[[str, str], str]) -> str:
    """A UID as ``2.25.<decimal of the 128-bit HMAC>`` (a valid UID form, PS3.5 B.2)."""
    return f"2.25.{int(pseudonymise(UID_NAMESPACE, uid), 16)}"


def scrub_uids(text: str, pseudonymise: Callable[[str, str], str]) -> str:
    """`text` with every UID-shaped token replaced by its pseudonym."""
    return _UID_RE.sub(lambda m: pseudonymise_uid(m.group(0), pseudonymise), text)


def pseudonymise_table(table: pa.Table, spec: ExtractTable,
                       pseudonymise: Callable[[str, str], str]) -> pa.Table:
    """`table` with its UID columns pseudonymised and UIDs inside its text columns replaced."""
    cache: dict[str, str] = {}

    def uid(value: str | None) -> str | None:
        if value is None:
            return None
        if value not in cache:
            cache[value] = pseudonymise_uid(value, pseudonymise)
        return cache[value]

    for column in spec.uid_columns:
        values = [uid(v) for v in table.column(column).to_pylist()]
        table = table.set_column(table.schema.get_field_index(column),
                                 table.schema.field(column), pa.array(values, pa.string()))
    for column in spec.text_columns:
        values = [None if v is None else scrub_uids(v, pseudonymise)
                  for v in table.column(column).to_pylist()]
        table = table.set_column(table.schema.get_field_index(column),
                                 table.schema.field(column), pa.array(values, pa.string()))
    return table


@dataclass(frozen=True)
class Manifest:
    """A validated manifest.json."""

    extract_id: str
    site: str
    date_from: str
    date_to: str
    key_scope: KeyScope
    key_fingerprint: str
    pseudonym_scheme: str
    created_at: str
    kerma_version: str
    files: tuple[dict, ...]     # {"table", "file", "rows", "sha256"}

    def rows(self, table: str) -> int:
        """Row count the manifest states for `table`."""
        return next(f["rows"] for f in self.files if f["table"] == table)


def extract_id(site: str, date_from: str, date_to: str, key_fingerprint: str,
               files: Iterable[dict]) -> str:
    """32 hex of SHA-256 over what the extract is: site, period, key and each file's content.

    The creation time is not part of it, so exporting unchanged data again gives the same id
    (a merge then changes nothing); any edit of the manifest's facts changes it.
    """
    facts = {"site": site, "date_from": date_from, "date_to": date_to,
             "key_fingerprint": key_fingerprint,
             "files": sorted(([f["table"], f["file"], f["rows"], f["sha256"]] for f in files))}
    text = json.dumps(facts, sort_keys=True, separators=(",", ":"))
    return hashlib.sha256(text.encode("utf-8")).hexdigest()[:32]


def build_manifest(*, site: str, date_from: str, date_to: str, key_scope: KeyScope,
                   key_fingerprint: str, files: list[dict], created_at: str,
                   kerma_version: str) -> dict:
    """The manifest.json content of an extract.

    Parameters
    ----------
    site, date_from, date_to
        The site (as ``device.site`` names it) and the first and last study day (ISO dates).
    key_scope
        Whether the pseudonymisation key is shared by the network or the site's own.
    key_fingerprint
        ``pipeline.pseudonym.key_fingerprint`` of the key (never the key).
    files
        One dict per table: ``table``, ``file``, ``rows``, ``sha256`` (hex of the file bytes).
    created_at, kerma_version
        Recorded, not part of the extract id.

    Returns
    -------
    dict
        JSON-ready manifest with ``extract_id``.
    """
    return {
        "format": FORMAT,
        "schema_version": SCHEMA_VERSION,
        "extract_id": extract_id(site, date_from, date_to, key_fingerprint, files),
        "site": site,
        "period": {"from": date_from, "to": date_to},
        "pseudonymisation": {"scheme": PSEUDONYM_SCHEME, "key_scope": KeyScope(key_scope).value,
                             "key_fingerprint": key_fingerprint},
        "omitted": {t.name: list(t.omitted) for t in EXTRACT_TABLES}
                   | {"source_object": ["whole table"], "run": ["whole table"]},
        "created_at": created_at,
        "kerma_version": kerma_version,
        "files": [dict(f) for f in files],
    }


def _need(obj: dict, key: str, kind: type, where: str):
    value = obj.get(key) if isinstance(obj, dict) else None
    if not isinstance(value, kind) or isinstance(value, bool) and kind is int:
        raise ExtractError(f"{where}: field {key!r} is missing or not a {kind.__name__}")
    return value


def parse_manifest(text: str, where: str) -> Manifest:
    """Validate manifest.json text; ExtractError (one line, naming `where`) when it is unusable.

    Checks the format, the schema version, the fields and their types, the table list
    (exactly EXTRACT_TABLES) and that the extract id matches the manifest's facts (an edited
    manifest fails here). File checksums are checked by the caller, which reads the files.
    """
    try:
        raw = json.loads(text)
    except json.JSONDecodeError as exc:
        raise ExtractError(f"{where}: manifest is not valid JSON ({exc.msg} at line {exc.lineno})") from exc
    if not isinstance(raw, dict) or raw.get("format") != FORMAT:
        raise ExtractError(f"{where}: not a Kerma Ledger site extract manifest")
    version = raw.get("schema_version")
    if version != SCHEMA_VERSION:
        raise ExtractError(f"{where}: extract schema version {version!r} is not supported "
                           f"(this Kerma Ledger merges version {SCHEMA_VERSION}); re-export the "
                           "extract with a matching Kerma Ledger")
    period = _need(raw, "period", dict, where)
    pseudo = _need(raw, "pseudonymisation", dict, where)
    files = _need(raw, "files", list, where)
    for f in files:
        for key, kind in (("table", str), ("file", str), ("rows", int), ("sha256", str)):
            _need(f, key, kind, f"{where}: files entry")
    tables = sorted(f["table"] for f in files)
    if tables != sorted(t.name for t in EXTRACT_TABLES):
        raise ExtractError(f"{where}: manifest lists tables {', '.join(tables)}; expected "
                           f"{', '.join(sorted(t.name for t in EXTRACT_TABLES))}")
    if any(f["file"] != file_name(f["table"]) for f in files):
        raise ExtractError(f"{where}: manifest names a file other than <table>.parquet")
    scheme = _need(pseudo, "scheme", str, where)
    if scheme != PSEUDONYM_SCHEME:
        raise ExtractError(f"{where}: pseudonymisation scheme {scheme!r} is not {PSEUDONYM_SCHEME!r}")
    try:
        scope = KeyScope(_need(pseudo, "key_scope", str, where))
    except ValueError as exc:
        raise ExtractError(f"{where}: key_scope must be 'network' or 'site'") from exc
    manifest = Manifest(
        extract_id=_need(raw, "extract_id", str, where), site=_need(raw, "site", str, where),
        date_from=_need(period, "from", str, where), date_to=_need(period, "to", str, where),
        key_scope=scope, key_fingerprint=_need(pseudo, "key_fingerprint", str, where),
        pseudonym_scheme=scheme, created_at=str(raw.get("created_at", "")),
        kerma_version=str(raw.get("kerma_version", "")), files=tuple(files))
    try:
        first, last = (dt.date.fromisoformat(manifest.date_from),
                       dt.date.fromisoformat(manifest.date_to))
    except ValueError as exc:
        raise ExtractError(f"{where}: period dates must be YYYY-MM-DD ({exc})") from exc
    if last < first or not manifest.site.strip():
        raise ExtractError(f"{where}: period ends before it starts, or the site is empty")
    recomputed = extract_id(manifest.site, manifest.date_from, manifest.date_to,
                            manifest.key_fingerprint, files)
    if recomputed != manifest.extract_id:
        raise ExtractError(f"{where}: manifest was altered: its extract id does not match its "
                           "site, period, key and file list; ask the site to export again")
    return manifest
