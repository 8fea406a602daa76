"""`kerma schema`: the data dictionary comes from the SQL files' comments and DuckDB's own
column types, so it cannot drift; docs/schema.md is that output, byte for byte."""

from __future__ import annotations

import json
import shutil
from pathlib import Path

import pytest
from typer.testing import CliRunner

from pipeline.cli import app
from pipeline.dictionary import (PUBLIC_RELATIONS, build_dictionary, check_dictionary,
                                 column_comments, fresh_public_columns, relation_file,
                                 render_json, render_markdown, unit_from_name)
from queries import ROOT

DOCS = ROOT.parent / "docs" / "schema.md"


@pytest.fixture(scope="module")
def described():
    """Columns and types of a warehouse created from scratch (schema + empty audit)."""
    return fresh_public_columns()


@pytest.fixture(scope="module")
def relations(described):
    return build_dictionary(described)


def test_every_public_column_has_a_comment_and_no_comment_is_stale(relations):
    assert check_dictionary(relations) == []
    assert [r.name for r in relations] == list(PUBLIC_RELATIONS)
    assert sum(len(r.columns) for r in relations) > 300


def test_committed_docs_schema_md_is_the_generated_text(relations):
    expected = render_markdown(relations)
    assert DOCS.read_text(encoding="utf-8") == expected, (
        "docs/schema.md is stale: regenerate it with `.venv/bin/kerma schema > docs/schema.md`")


def test_every_mart_and_audit_output_is_public():
    """A new view in queries/marts or a new (non-temporary) table of the audit is public and
    must be added to PUBLIC_RELATIONS (and so documented)."""
    marts = {p.stem for p in (ROOT / "marts").glob("*.sql")}
    audit_tables = set()
    for path in (ROOT / "audit").glob("*.sql"):
        for line in path.read_text(encoding="utf-8").splitlines():
            words = line.lower().split()
            if words[:4] == ["create", "or", "replace", "table"]:
                audit_tables.add(words[4])
    assert marts <= set(PUBLIC_RELATIONS), marts - set(PUBLIC_RELATIONS)
    assert audit_tables <= set(PUBLIC_RELATIONS), audit_tables - set(PUBLIC_RELATIONS)
    assert {"study_dose", "dose_alerts", "study_estimate", "skin_dose"} <= audit_tables | marts


def test_types_units_and_meanings_as_the_warehouse_has_them(relations):
    by_name = {r.name: r for r in relations}
    study = {c.name: c for c in by_name["study_dose"].columns}
    assert (study["dlp_total_mgy_cm"].type, study["dlp_total_mgy_cm"].unit) == ("DOUBLE", "mGy·cm")
    assert (study["dap_total_gy_cm2"].unit, study["fluoro_time_total_s"].unit) == ("Gy·cm²", "s")
    assert (study["study_date"].type, study["study_date"].unit) == ("DATE", None)
    assert study["patient_key"].meaning.startswith("pseudonymous patient key")
    event = {c.name: c for c in by_name["irradiation_event"].columns}
    assert event["kvp"].unit == "kV" and event["positioner_primary_angle_deg"].unit == "degree"
    estimate = {c.name: c for c in by_name["study_estimate"].columns}
    # the bracketed unit of the comment wins over the name's suffix (_mgy_cm)
    assert estimate["k_msv_per_mgy_cm"].unit == "mSv/(mGy·cm)"
    assert "not an individual's dose or risk" in estimate["effective_dose_msv"].meaning
    alerts = {c.name: c for c in by_name["dose_alerts"].columns}
    assert alerts["value"].unit == "unit column" and alerts["item_id"].type == "VARCHAR"
    assert by_name["study_dose"].kind == "view" and by_name["dose_alerts"].kind == "table"
    assert by_name["study_dose"].file == "queries/marts/study_dose.sql"
    assert by_name["skin_dose"].file == "queries/audit/create_skin_dose.sql"


def test_kerma_schema_prints_markdown_and_json(relations):
    result = CliRunner().invoke(app, ["schema", "--format", "json"])
    assert result.exit_code == 0, result.output
    assert json.loads(result.output) == json.loads(render_json(relations))
    assert json.loads(result.output)["relations"][0]["columns"][0] == {
        "name": "study_key", "type": "VARCHAR", "unit": None,
        "meaning": "pseudonymous study key: keyed HMAC-SHA256 of the Study Instance UID (128 bits, hex)"}
    result = CliRunner().invoke(app, ["schema", "--format", "html"])
    assert result.exit_code == 2 and "--format must be markdown or json" in result.output


def test_comment_block_convention():
    text = """-- grain: one row per thing
create view thing as select 1 as a_mm, 2 as b, 3 as c_mgy
-- columns:
--   a_mm: first
--     continued [cm]
--   b: plain

-- columns:
--   c_mgy: from a second block
-- not part of a block: ignored
"""
    assert column_comments(text) == {"a_mm": ("first continued", "cm"), "b": ("plain", None),
                                     "c_mgy": ("from a second block", None)}
    with pytest.raises(ValueError, match="documented twice"):
        column_comments("-- columns:\n--   a: x\n--   a: y\n")
    assert [unit_from_name(n) for n in ("dap_gy_cm2", "dose_rp_mgy", "scanning_length_mm",
                                        "patient_age_years", "n_events", "pulse_width_ms",
                                        "collimated_field_area_m2")] == \
        ["Gy·cm²", "mGy", "mm", "year", None, "ms", "m²"]


def test_a_column_added_without_comment_or_a_stale_comment_fails_the_check(described, tmp_path):
    root = tmp_path / "queries"
    shutil.copytree(ROOT, root, ignore=shutil.ignore_patterns("*.py", "__pycache__"))
    changed = {k: (kind, list(cols)) for k, (kind, cols) in described.items()}
    changed["device"][1].append(("room_colour", "VARCHAR"))          # added in SQL, not documented
    path = relation_file("value_issue", root)
    path.write_text(path.read_text(encoding="utf-8") + "--   retired_column: gone\n", encoding="utf-8")
    problems = check_dictionary(build_dictionary(changed, root), root)
    assert problems == [
        "queries/marts/device.sql: column device.room_colour has no comment",
        "queries/marts/value_issue.sql: comment for value_issue.retired_column, which has no such column",
    ]
    markdown = render_markdown(build_dictionary(changed, root))
    assert "| `room_colour` | VARCHAR |  | **undocumented** |" in markdown
