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
