"""Exam-type rules: normalisation, precedence, user rules first, unmapped listing."""

import datetime as dt

import pytest
from typer.testing import CliRunner

from pipeline.cli import app
from pipeline.errors import ConfigError
from pipeline.exams import EXAM_TYPES, load_exam_rules, normalise
from pipeline.ingest import ingest
from tests.helpers import KEY, demo_dataset, encode

REQUIRED = {"ct_head", "ct_sinuses", "ct_cervical_spine", "ct_chest", "ct_pulmonary_angiography",
            "ct_abdomen_pelvis", "ct_chest_abdomen_pelvis", "ct_kub", "ct_lumbar_spine",
            "dx_chest_pa", "dx_abdomen_ap", "dx_pelvis_ap", "dx_lumbar_spine_ap",
            "dx_lumbar_spine_lat", "rf_barium_swallow", "xa_coronary_angiography",
            "xa_coronary_intervention", "mg_screening"}


def test_taxonomy_has_the_required_ids():
    assert REQUIRED <= set(EXAM_TYPES)


def test_normalisation_is_case_and_punctuation_insensitive():
    assert normalise("CT ABDO/PELVIS C+") == "ct abdo pelvis c"
    assert normalise("  L-Spine_LAT ") == "l spine lat"


def test_bad_user_rule_is_refused(tmp_path):
    config = tmp_path / "kerma.toml"
    config.write_text('[[exam_rule]]\nexam = "ct_brain"\nfield = "study_description"\nany = ["x"]\n')
    with pytest.raises(ConfigError, match="unknown exam type 'ct_brain'"):
        load_exam_rules(config)


def _odd_radiograph_inbox(tmp_path):
    """An inbox holding one chest radiograph report whose texts no shipped rule maps: (inbox, ds)."""
    inbox = tmp_path / "in"
    inbox.mkdir()
    _, ds = demo_dataset("ovh-dx1", exam="dx_chest_pa")
    ds.StudyDescription = "XR Thoracic Inlet Special"
    for item in ds.ContentSequence:
        for child in item.get("ContentSequence", []):
            if child.ValueType == "TEXT" and child.ConceptNameCodeSequence[0].CodeValue == "125203":
                child.TextValue = "Inlet view"
    (inbox / "odd.dcm").write_bytes(encode(ds))
    return inbox, ds


def _warehouse_with_odd_descriptions(tmp_path):
    inbox, _ = _odd_radiograph_inbox(tmp_path)
    db = tmp_path / "w.duckdb"
    ingest([inbox], db, KEY)
    return db


def test_unmapped_descriptions_are_listed_with_counts(tmp_path):
    db = _warehouse_with_odd_descriptions(tmp_path)
    result = CliRunner().invoke(app, ["exams", "unmapped", "--warehouse", str(db)])
    assert result.exit_code == 0, result.output
    assert "XR Thoracic Inlet Special" in result.output and "Inlet view" in result.output


def test_a_user_rule_maps_it_and_takes_precedence(tmp_path):
    db = _warehouse_with_odd_descriptions(tmp_path)
    config = tmp_path / "kerma.toml"
    config.write_text('[[exam_rule]]\nexam = "dx_chest_pa"\nmodality = ["DX", "CR"]\n'
                      'field = "acquisition_protocol"\nany = ["inlet view"]\n')
    result = CliRunner().invoke(app, ["exams", "unmapped", "--warehouse", str(db), "--config", str(config)])
    assert result.exit_code == 0, result.output
    assert "Every study maps" in result.output


def test_bad_indication_rule_is_refused(tmp_path):
    from pipeline.exams import load_indication_rules
    config = tmp_path / "kerma.toml"
    config.write_text('[[indication_rule]]\nexam = "ct_brain"\nindication = "acute stroke"\nany = ["x"]\n')
    with pytest.raises(ConfigError, match="indication rule 1: unknown exam type 'ct_brain'"):
        load_indication_rules(config)
    config.write_text('[[indication_rule]]\nexam = "ct_head"\nany = ["stroke"]\n')
    with pytest.raises(ConfigError, match="needs an `indication`"):
        load_indication_rules(config)
    assert [r.indication for r in load_indication_rules()][:1] == ["acute stroke"]


def test_ingest_keeps_the_matches_of_the_rules_the_audit_uses(tmp_path, monkeypatch):
    """`kerma ingest --config` matches with kerma.toml's rules (then the defaults), as the audit
    does: the user rule maps the odd radiograph at ingest, and an audit with the same config finds
    the kept matches current (derived_state still records the ingest's refresh, not 'rules')."""
    import duckdb

    from pipeline.audit import run_audit

    inbox, ds = _odd_radiograph_inbox(tmp_path)
    config = tmp_path / "kerma.toml"
    config.write_text('[[exam_rule]]\nexam = "dx_chest_pa"\nmodality = ["DX", "CR"]\n'
                      'field = "acquisition_protocol"\nany = ["inlet view"]\n')
    db = tmp_path / "w.duckdb"
    monkeypatch.setenv("KERMA_PSEUDONYM_KEY", KEY.decode())
    result = CliRunner().invoke(app, ["ingest", str(inbox), "--warehouse", str(db),
                                      "--config", str(config)])
    assert result.exit_code == 0, result.output

    def state():
        con = duckdb.connect(str(db), read_only=True)
        try:
            return (con.execute("select mode, refreshed_at from derived_state").fetchall(),
                    con.execute("select exam_type from study_dose").fetchall())
        finally:
            con.close()

    after_ingest, exams = state()
    assert exams == [("dx_chest_pa",)]
    assert after_ingest[0][0] != "rules"
    day = dt.datetime.strptime(ds.StudyDate, "%Y%m%d").date()
    run_audit(db, date_from=day, date_to=day, config=config)
    assert state() == (after_ingest, exams)
