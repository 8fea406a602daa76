"""The data dictionary of the public relations, generated from the SQL files themselves.

Each public table and view documents its columns in a comment block of the SQL file that
creates it (anywhere in the file; comments only, so the block never changes what runs)::

    -- columns:
    --   study_key: pseudonymous study key (HMAC-SHA256 of the Study Instance UID)
    --   dlp_total_mgy_cm: total dose-length product of the study
    --   value: the audited value [unit column]
    --   kvp: X-ray tube peak voltage
    --     (a line indented deeper continues the entry above) [kV]

A trailing ``[...]`` states the unit; without one the unit comes from the column name's
suffix (`unit_from_name`: ``_mgy`` mGy, ``_gy_cm2`` Gy·cm², ``_mgy_cm`` mGy·cm, ``_s`` s,
``_mm`` mm, ...). Column types come from DuckDB itself (`public_columns` on a freshly created
warehouse), and the relation's description is the file's first comment line (its grain). So a
column added, renamed or dropped in the SQL shows up as undocumented or stale
(`check_dictionary`), and ``docs/schema.md`` is regenerated, never edited (tests compare).
"""

from __future__ import annotations

import json
import re
import tempfile
from dataclasses import asdict, dataclass
from pathlib import Path

from queries import ROOT, sql

__all__ = ["PUBLIC_RELATIONS", "Column", "Relation", "build_dictionary", "check_dictionary",
           "column_comments", "fresh_public_columns", "public_columns", "relation_file",
           "render_json", "render_markdown", "unit_from_name"]

# The public interface of the warehouse, in the order the dictionary lists it: the marts
# (views over the raw tables), the reference and review tables, and the audit's output tables
# (replaced by each `kerma audit`), and what `kerma completeness` writes. raw_* tables and
# stg_* views are internal.
PUBLIC_RELATIONS = (
    "study_dose", "irradiation_event", "device", "source_object", "value_issue",
    "audit_observation", "key_epoch", "pipeline_run", "reference_level",
    "audit_medians", "network_reference", "dose_alerts", "data_alerts", "drift_flags",
    "monthly_medians", "audit_distribution", "study_estimate", "skin_dose", "skin_dose_map", "skin_dose_factor",
    "audit_finding", "audit_period", "review_note", "latest_review_note",
    "capture_completeness", "capture_missing_studies", "network_extract",
)

# Longest suffix first: `_mgy_cm` before `_cm`, `_gy_cm2` before `_cm2`.
_SUFFIX_UNITS = (
    ("_gy_cm2", "Gy·cm²"), ("_mgy_cm", "mGy·cm"), ("_per_week", "per week"), ("_per_s", "1/s"),
    ("_msv", "mSv"), ("_mgy", "mGy"), ("_gy", "Gy"), ("_m2", "m²"), ("_cm2", "cm²"),
    ("_mm", "mm"), ("_cm", "cm"), ("_kg", "kg"), ("_years", "year"), ("_ms", "ms"),
    ("_mas", "mAs"), ("_ma", "mA"), ("_kv", "kV"), ("_deg", "degree"), ("_pct", "%"),
    ("_bytes", "byte"), ("_s", "s"), ("_m", "m"),
)
_NAMED_UNITS = {"kvp": "kV"}
_BLOCK_START = re.compile(r"^--\s*columns:\s*$")
_ENTRY = re.compile(r"^--\s{1,3}([a-z_][a-z0-9_]*):\s*(.*)$")
_CONTINUATION = re.compile(r"^--\s{4,}(\S.*)$")
_UNIT = re.compile(r"\s*\[([^\[\]]+)\]\s*$")


@dataclass(frozen=True)
class Column:
    """One column of a public relation."""

    name: str
    type: str
    unit: str | None
    meaning: str | None


@dataclass(frozen=True)
class Relation:
    """One public table or view: its SQL file, grain and columns in order."""

    name: str
    kind: str          # table | view
    file: str          # path under queries/
    grain: str
    columns: tuple[Column, ...]


def unit_from_name(column: str) -> str | None:
    """The unit a column name states by the project's suffix convention (STYLE A.4), or None.

    >>> unit_from_name("dlp_total_mgy_cm"), unit_from_name("fluoro_time_total_s")
    ('mGy·cm', 's')
    """
    if column in _NAMED_UNITS:
        return _NAMED_UNITS[column]
    for suffix, unit in _SUFFIX_UNITS:
        if column.endswith(suffix):
            return unit
    return None


def column_comments(text: str) -> dict[str, tuple[str, str | None]]:
    """The ``-- columns:`` block(s) of an SQL text: {column: (meaning, unit or None)}.

    Raises
    ------
    ValueError
        A column documented twice, or a continuation line outside an entry.
    """
    entries: dict[str, list[str]] = {}
    current: str | None = None
    in_block = False
    for line in text.splitlines():
        line = line.rstrip()
        if _BLOCK_START.match(line):
            in_block, current = True, None
            continue
        if not in_block:
            continue
        if entry := _ENTRY.match(line):
            current = entry.group(1)
            if current in entries:
                raise ValueError(f"column {current} documented twice")
            entries[current] = [entry.group(2).strip()]
        elif continuation := _CONTINUATION.match(line):
            if current is None:
                raise ValueError(f"continuation line outside a column entry: {line!r}")
            entries[current].append(continuation.group(1).strip())
        else:
            in_block, current = False, None
    out = {}
    for name, parts in entries.items():
        meaning = " ".join(p for p in parts if p)
        unit = None
        if found := _UNIT.search(meaning):
            unit, meaning = found.group(1).strip(), meaning[:found.start()].rstrip()
        out[name] = (meaning, unit)
    return out


def relation_file(name: str, root: Path = ROOT) -> Path:
    """The one SQL file under `root` that creates table or view `name`.

    Raises
    ------
    KeyError
        No file, or more than one, creates it.
    """
    pattern = re.compile(rf"^\s*create\s+(?:or\s+replace\s+)?(?:table|view)\s+"
                         rf"(?:if\s+not\s+exists\s+)?{re.escape(name)}\b", re.I | re.M)
    found = [p for p in sorted(root.glob("*/*.sql")) if pattern.search(p.read_text(encoding="utf-8"))]
    if len(found) != 1:
        raise KeyError(f"expected one SQL file creating {name}, found {[str(p) for p in found]}")
    return found[0]


def _grain(text: str) -> str:
    """The file's first comment line, joined with the lines that continue its sentence (they
    start in lower case and are not a ``name: ...`` note of their own)."""
    parts: list[str] = []
    for line in text.splitlines():
        if not line.startswith("--"):
            if parts:
                break
            continue
        body = line.lstrip("-").strip()
        if parts and (not body[:1].islower() or re.match(r"[a-z_]+:", body)):
            break
        parts.append(body)
    return " ".join(parts)


def public_columns(con, relations: tuple[str, ...] = PUBLIC_RELATIONS) -> dict[str, tuple[str, list[tuple[str, str]]]]:
    """{relation: (kind, [(column, DuckDB type), ...])} as the connected warehouse has them."""
    rows = con.execute(sql("public_columns"), {"relations": list(relations)}).fetchall()
    out: dict[str, tuple[str, list[tuple[str, str]]]] = {}
    for relation, kind, column, data_type in rows:
        out.setdefault(relation, (kind, []))[1].append((column, data_type))
    return out


def fresh_public_columns() -> dict[str, tuple[str, list[tuple[str, str]]]]:
    """`public_columns` of a warehouse created from scratch in a temporary folder: the schema,
    then an audit of an empty month and a capture-completeness check against an empty archive
    (which create the audit's and the check's output tables)."""
    from .audit import run_audit
    from .net.completeness import check_completeness
    from .warehouse.connection import connection
    from .warehouse.load import ensure_schema

    with tempfile.TemporaryDirectory(prefix="kerma-schema-") as folder:
        db = Path(folder) / "kerma.duckdb"
        with connection(db, create=True) as con:
            ensure_schema(con)
        run_audit(db, period="2026-01")
        # no study is pseudonymised: the key only satisfies the function's contract
        check_completeness(list, db, b"kerma-schema-throwaway-key", period="2026-01")
        with connection(db, read_only=True) as con:
            return public_columns(con)


def build_dictionary(described: dict[str, tuple[str, list[tuple[str, str]]]],
                     root: Path = ROOT) -> list[Relation]:
    """Join DuckDB's columns and types with the comments of each relation's SQL file.

    Parameters
    ----------
    described : dict
        From `public_columns` / `fresh_public_columns`.
    root : Path
        The ``queries`` folder.

    Returns
    -------
    list of Relation
        In `PUBLIC_RELATIONS` order; a column without a comment has ``meaning`` None.

    Raises
    ------
    KeyError
        A public relation missing from `described` or created by no (or several) SQL files.
    """
    relations = []
    for name in PUBLIC_RELATIONS:
        if name not in described:
            raise KeyError(f"public relation {name} is not in the warehouse")
        kind, columns = described[name]
        path = relation_file(name, root)
        text = path.read_text(encoding="utf-8")
        notes = column_comments(text)
        relations.append(Relation(
            name=name, kind=kind, file=path.relative_to(root.parent).as_posix(), grain=_grain(text),
            columns=tuple(Column(column, data_type,
                                 (notes.get(column, ("", None))[1] or unit_from_name(column)),
                                 notes[column][0] if column in notes and notes[column][0] else None)
                          for column, data_type in columns)))
    return relations


def check_dictionary(relations: list[Relation], root: Path = ROOT) -> list[str]:
    """Problems that make the dictionary drift: one line per undocumented or stale column."""
    problems = []
    for relation in relations:
        names = {c.name for c in relation.columns}
        problems += [f"{relation.file}: column {relation.name}.{c.name} has no comment"
                     for c in relation.columns if c.meaning is None]
        stale = set(column_comments((root.parent / relation.file).read_text(encoding="utf-8"))) - names
        problems += [f"{relation.file}: comment for {relation.name}.{n}, which has no such column"
                     for n in sorted(stale)]
    return problems


_PREAMBLE = """\
# Kerma Ledger data dictionary

Every public table and view of the warehouse, with each column's DuckDB type, unit and
meaning. Generated by `kerma schema` from the `-- columns:` comment blocks of the SQL files
under `queries/` and the column types of a freshly created warehouse; do not edit by hand
(regenerate: `kerma schema > docs/schema.md`; a test fails when this file is stale).

Units: a unit in brackets in the SQL comment, else the column name's suffix (`_mgy` mGy,
`_gy_cm2` Gy·cm², `_mgy_cm` mGy·cm, `_s` s, `_mm` mm, ...). "unit column" means the unit is
given per row in the relation's `unit` column. Patients and studies appear only as
pseudonymous keys (`patient_key`, `study_key`); ages, never dates of birth.

Cautions: a diagnostic reference level is an investigation level, not a dose limit; effective
dose is a population quantity, not an individual's risk; skin-dose estimates are uncertain;
flagged exams need a qualified medical physicist; local regulations prevail.
"""


def _cell(text: str | None) -> str:
    return (text or "").replace("|", "\\|")


def render_markdown(relations: list[Relation]) -> str:
    """The dictionary as Markdown: a contents list, then one section and table per relation."""
    parts = [_PREAMBLE, "## Contents\n"]
    parts.append("\n".join(f"* [`{r.name}`](#{r.name}) ({r.kind}): {r.grain}"
                           for r in relations) + "\n")
    for r in relations:
        rows = "\n".join(f"| `{c.name}` | {c.type} | {_cell(c.unit)} | "
                         f"{_cell(c.meaning) or '**undocumented**'} |" for c in r.columns)
        parts.append(f"## {r.name}\n\n{r.kind.capitalize()}, defined in `{r.file}`. {r.grain}\n\n"
                     f"| column | type | unit | meaning |\n|---|---|---|---|\n{rows}\n")
    return "\n".join(parts)


def render_json(relations: list[Relation]) -> str:
    """The dictionary as JSON: {"relations": [{name, kind, file, grain, columns: [...]}]}."""
    return json.dumps({"relations": [asdict(r) for r in relations]}, indent=2,
                      ensure_ascii=False) + "\n"
