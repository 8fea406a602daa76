"""`kerma audit` writes skin_dose (one row per RF/XA study) and raises the NCRP 168 peak-skin-dose
follow-up alert (3 Gy, NCRP Report No. 168 (2010), from memory) on the hand-placed high-dose
intervention (Ka,r 6200 mGy, synthetic_studies/scenario.toml)."""

import duckdb
import pytest


@pytest.fixture(scope="module")
def con(audited):
    db, _, _ = audited
    with duckdb.connect(str(db), read_only=True) as c:
        yield c


def test_skin_dose_has_one_row_per_rf_xa_study(con):
    n_rows, n_keys, n_studies = con.execute(
        "select count(*), count(distinct (study_key, device_key)), "
        "(select count(*) from study_dose where modality in ('RF', 'XA') "
        " and study_date >= date '2026-09-01' and study_date < date '2026-12-01' "
        " and dose_rp_total_mgy is not null) from skin_dose").fetchone()
    assert n_rows > 0 and n_rows == n_keys == n_studies
    assert {m for (m,) in con.execute("select distinct modality from skin_dose").fetchall()} == {"RF", "XA"}


def test_every_synthetic_event_has_geometry_and_ka_r_matches_the_study_total(con):
    rows = con.execute(
        "select k.n_events, k.n_events_with_geometry, k.is_upper_bound, k.ka_r_total_mgy, "
        "s.dose_rp_total_mgy, k.psd_to_ka_r, k.method, k.factor_sources, k.uncertainty_note "
        "from skin_dose as k join study_dose as s using (study_key, device_key)").fetchall()
    for n, n_geom, upper, ka_r, total, ratio, method, sources, note in rows:
        assert n == n_geom and not upper
        assert ka_r == pytest.approx(total, rel=1e-6)
        # PSD / Ka,r of 0.2-1.6: the span reported for interventional procedures
        # (Jones & Pasciak 2011 Part I discuss it; range from memory)
        assert 0.2 <= ratio <= 1.6
        assert "Jones & Pasciak 2011" in method and "from memory" in sources
        assert "40 %" in note and "responsible physician" in note


def test_the_high_dose_intervention_gets_a_peak_skin_dose_follow_up_alert(con):
    rows = con.execute(
        "select a.value, a.threshold, a.unit, a.action, a.threshold_verified, a.source, a.method, "
        "k.ka_r_total_mgy from dose_alerts as a join skin_dose as k using (study_key, device_key) "
        "where a.rule = 'ncrp168_srdl_peak_skin_dose'").fetchall()
    assert len(rows) == 1
    value, threshold, unit, action, verified, source, method, ka_r = rows[0]
    assert (threshold, unit, action, verified) == (3000.0, "mGy", "patient_follow_up", False)
    assert value >= 3000.0 and ka_r == pytest.approx(6200, rel=0.01)
    assert "NCRP Report No. 168" in source and "from memory" in source
    assert "peak skin dose estimate" in method and "upper bound" not in method
    # every study at or above 3 Gy alerts, none below
    n_over = con.execute("select count(*) from skin_dose where psd_mgy >= 3000").fetchone()[0]
    assert n_over == 1


def _strip(ds, codes: set[str]) -> None:
    """Remove the NUM items with these DCM codes from every irradiation event."""
    from pydicom.sequence import Sequence
    for item in ds.ContentSequence:
        if item.ValueType == "CONTAINER" and item.ConceptNameCodeSequence[0].CodeValue == "113706":
            item.ContentSequence = Sequence([c for c in item.ContentSequence
                                             if c.ConceptNameCodeSequence[0].CodeValue not in codes])


@pytest.fixture(scope="module")
def reports(tmp_path_factory):
    """One interventional report as sent, and one with its positioner angles removed, through
    `kerma ingest` and `kerma audit` (pipeline.ingest.ingest, pipeline.audit.run_audit)."""
    import datetime as dt

    from pipeline.audit import run_audit
    from pipeline.ingest import ingest
    from tests.helpers import KEY, demo_dataset, encode

    root = tmp_path_factory.mktemp("skin")
    inbox = root / "in"
    inbox.mkdir()
    spec, full = demo_dataset("tgh-xa1")
    spec_rf, bare = demo_dataset("tgh-rf1")
    _strip(bare, {"112011", "112012"})                 # Positioner Primary / Secondary Angle
    (inbox / "xa.dcm").write_bytes(encode(full))
    (inbox / "rf.dcm").write_bytes(encode(bare))
    db = root / "w.duckdb"
    ingest([inbox], db, KEY)
    run_audit(db, date_from=dt.date(2026, 9, 1), date_to=dt.date(2026, 11, 30))
    with duckdb.connect(str(db), read_only=True) as c:
        rows = {m: (psd, n, n_geom, upper, method) for m, psd, n, n_geom, upper, method in c.execute(
            "select modality, psd_mgy, n_events, n_events_with_geometry, is_upper_bound, method "
            "from skin_dose").fetchall()}
    return spec, spec_rf, rows


def test_the_warehouse_path_gives_the_models_value_on_the_ground_truth(reports):
    from pipeline.skin_dose import SkinDoseEvent, compute_skin_dose

    spec, _, rows = reports
    truth = compute_skin_dose([SkinDoseEvent(
        dose_rp_mgy=e.dose_rp_mgy, kvp=e.kvp, primary_angle_deg=e.primary_angle_deg,
        secondary_angle_deg=e.secondary_angle_deg, source_to_isocenter_mm=e.source_to_isocenter_mm,
        source_to_detector_mm=e.sid_mm, field_area_cm2=e.field_area_m2 * 1e4,
        table_longitudinal_mm=e.table_longitudinal_mm, table_lateral_mm=e.table_lateral_mm,
        table_height_mm=e.table_height_mm,
        reference_point_definition="15cm from Isocenter toward Source")
        for e in spec.projection_events], height_m=spec.patient.height_m,
        weight_kg=spec.patient.weight_kg)
    psd, n, n_geom, upper, _ = rows["XA"]
    assert psd == pytest.approx(truth.psd_mgy, rel=1e-9)
    assert (n, n_geom, upper) == (len(spec.projection_events),) * 2 + (False,)


def test_events_without_angles_fall_back_to_a_labelled_upper_bound(reports):
    from pipeline.skin_dose import F_TISSUE_AIR, backscatter_factor

    _, spec, rows = reports
    psd, n, n_geom, upper, method = rows["RF"]
    assert (n, n_geom, upper) == (len(spec.projection_events), 0, True)
    assert "upper bound" in method
    # sum of Ka,r x BSF(kVp, field side at the reference point) x f: every event on one spot
    expected = sum(e.dose_rp_mgy * backscatter_factor(
        e.kvp, (e.field_area_m2 * 1e4) ** 0.5 * (e.source_to_isocenter_mm - 150.0) / e.sid_mm)
        * F_TISSUE_AIR for e in spec.projection_events)
    assert psd == pytest.approx(expected, rel=1e-9)
