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


# a prone, feet-first single-event report written by DCMTK's dump2dcm (tests/helpers.py)
PRONE_EVENT = dict(uid="2.25.4151001", dose_rp_gy=4.0, kvp=80, primary=0, secondary=0,
                   sod_mm=750, sid_mm=1000, area_m2=0.04, table_height_mm=-150,
                   modifier=("1240000", "SCT", "prone"),
                   relationship=("102541007", "SCT", "feet-first"))


@pytest.fixture(scope="module")
def reports(tmp_path_factory):
    """One interventional report as sent, one with its positioner angles removed, and a
    dcmtk-written prone feet-first report, through `kerma ingest` and `kerma audit`
    (pipeline.ingest.ingest, pipeline.audit.run_audit)."""
    import datetime as dt

    from pipeline.audit import run_audit
    from pipeline.ingest import ingest
    from tests.helpers import (KEY, demo_dataset, encode, projection_report_dump,
                               write_with_dump2dcm)

    root = tmp_path_factory.mktemp("skin")
    inbox = root / "in"
    inbox.mkdir()
    spec, full = demo_dataset("tgh-xa1")
    spec_rf, bare = demo_dataset("tgh-rf1")
    _strip(bare, {"112011", "112012"})                 # Positioner Primary / Secondary Angle
    (inbox / "xa.dcm").write_bytes(encode(full))
    (inbox / "rf.dcm").write_bytes(encode(bare))
    write_with_dump2dcm(inbox, "prone", projection_report_dump(
        sop="2.25.4151000", study="2.25.4151009", events=[PRONE_EVENT]))
    db = root / "w.duckdb"
    ingest([inbox], db, KEY)
    run_audit(db, date_from=dt.date(2026, 9, 1), date_to=dt.date(2026, 11, 30))
    with duckdb.connect(str(db), read_only=True) as c:
        out = c.execute(
            "select k.modality, k.psd_mgy, k.n_events, k.n_events_with_geometry, k.is_upper_bound, "
            "k.method, k.ka_r_total_mgy from skin_dose as k").fetchall()
        rows = {m: r for m, *r, ka_r in out if ka_r != 4000.0}
        rows["prone"] = next(r for m, *r, ka_r in out if ka_r == 4000.0)
        factors = c.execute(
            "select f.factor, f.n_events, f.value_min, f.value_max, f.source, k.ka_r_total_mgy "
            "from skin_dose_factor as f join skin_dose as k using (study_key, device_key)"
        ).fetchall()
    return spec, spec_rf, rows, factors


def test_the_warehouse_path_gives_the_models_value_on_the_ground_truth(reports):
    from pipeline.skin_dose import SkinDoseEvent, compute_skin_dose

    spec, _, rows, _ = reports
    truth = compute_skin_dose([SkinDoseEvent(
        dose_rp_mgy=e.dose_rp_mgy, kvp=e.kvp, primary_angle_deg=e.primary_angle_deg,
        secondary_angle_deg=e.secondary_angle_deg, source_to_isocenter_mm=e.source_to_isocenter_mm,
        source_to_detector_mm=e.sid_mm, field_area_cm2=e.field_area_m2 * 1e4,
        table_longitudinal_mm=e.table_longitudinal_mm, table_lateral_mm=e.table_lateral_mm,
        table_height_mm=e.table_height_mm, added_cu_mm=e.filter_thickness_mm,
        patient_orientation_modifier=e.patient_orientation_modifier,
        patient_table_relationship=e.patient_table_relationship,
        reference_point_definition="15cm from Isocenter toward Source")
        for e in spec.projection_events], height_m=spec.patient.height_m,
        weight_kg=spec.patient.weight_kg)
    psd, n, n_geom, upper, _ = rows["XA"]
    assert psd == pytest.approx(truth.psd_mgy, rel=1e-9)
    assert (n, n_geom, upper) == (len(spec.projection_events),) * 2 + (False,)
    # the interventional room reports the position: nothing assumed
    assert "patient supine, head-first;" in rows["XA"][4] and "assumed" not in rows["XA"][4]


def test_events_without_angles_fall_back_to_a_labelled_upper_bound(reports):
    from pipeline.skin_dose import F_TISSUE_AIR, backscatter_factor

    _, spec, rows, _ = reports
    psd, n, n_geom, upper, method = rows["RF"]
    assert (n, n_geom, upper) == (len(spec.projection_events), 0, True)
    assert "upper bound" in method
    # sum of Ka,r x BSF(kVp, Cu, field side at the reference point) x f: every event on one spot
    expected = sum(e.dose_rp_mgy * backscatter_factor(
        e.kvp, (e.field_area_m2 * 1e4) ** 0.5 * (e.source_to_isocenter_mm - 150.0) / e.sid_mm,
        e.filter_thickness_mm) * F_TISSUE_AIR for e in spec.projection_events)
    assert psd == pytest.approx(expected, rel=1e-9)


def test_a_prone_feet_first_report_is_projected_as_sent(reports):
    from pipeline.skin_dose import SkinDoseEvent, compute_skin_dose

    *_, rows, _ = reports
    psd, n, n_geom, upper, method = rows["prone"]
    # no filter reported: the largest tabulated B over Cu (80 kV, 12 cm at the skin)
    truth = compute_skin_dose([SkinDoseEvent(
        dose_rp_mgy=4000.0, kvp=80.0, primary_angle_deg=0.0, secondary_angle_deg=0.0,
        source_to_isocenter_mm=750.0, source_to_detector_mm=1000.0, field_area_cm2=400.0,
        table_height_mm=-150.0, reference_point_definition="15cm from Isocenter toward Source",
        patient_orientation_modifier="prone", patient_table_relationship="feet-first")])
    assert psd == pytest.approx(truth.psd_mgy, rel=1e-9)
    assert (n, n_geom, upper) == (1, 1, False)
    assert "patient prone, feet-first;" in method and "largest tabulated BSF" in method


def test_every_factor_is_stored_with_its_source(reports):
    *_, factors = reports
    prone = {f: (n, lo, hi, src) for f, n, lo, hi, src, ka_r in factors if ka_r == 4000.0}
    assert set(prone) == {"inverse_square", "backscatter", "f_tissue_air", "table_transmission"}
    # Benmakhlouf et al. 2011 at 80 kV: B(0.9 mm Cu, 10 cm) 1.463, (20 cm) 1.605 -> 12 cm 1.4914
    assert prone["backscatter"][1] == pytest.approx(1.4914, rel=1e-4)   # skin at 600 mm +- a cell
    assert "Benmakhlouf" in prone["backscatter"][3]
    assert prone["f_tissue_air"][1:3] == (1.06, 1.06) and "NIST" in prone["f_tissue_air"][3]
    assert prone["table_transmission"][1] == 0.75 and "from memory" in prone["table_transmission"][3]
