"""The audit finds the demo's stories and its numbers agree with independent recomputation.

Check values: UKHSA adult CT NDRL head (acute stroke) DLP 790 mGy cm, CTDIvol 47 mGy (UKHSA,
NDRLs from 20 Nov 2024, Table 1, adopted 2022); NCRP Report No. 168 (2010) substantial
radiation dose level Ka,r 5 Gy; ICRP Publication 135 (2017): national/local DRL = 75th
percentile of facility medians, typical value = median; standard-size adult 50-90 kg.
"""

import csv
import shutil

import duckdb
import numpy as np
import pytest
from scipy.stats import quantile_test
from typer.testing import CliRunner

from pipeline.cli import app


@pytest.fixture(scope="module")
def con(audited):
    db, _, _ = audited
    connection = duckdb.connect(str(db), read_only=True)
    yield connection
    connection.close()


def _device(con, serial):
    return con.execute("select device_key from device where serial_number = ?", [serial]).fetchall()[0][0]


def test_high_ct_head_unit_is_above_the_national_level(con):
    tgh = _device(con, "VX128-00417")
    rows = con.execute("select quantity, median, reference_value, ratio_to_reference, "
                       "is_above_reference, is_sample_adequate, reference_set from audit_medians "
                       "where device_key = ? and exam_type = 'ct_head' and population = 'adult' "
                       "order by quantity", [tgh]).fetchall()
    by_q = {r[0]: r for r in rows}
    assert by_q["dlp"][2] == 790 and by_q["dlp"][6] == "ukhsa_adult_ct_2022"
    assert 1.25 < by_q["dlp"][3] < 1.6 and by_q["dlp"][4] and by_q["dlp"][5]
    # UKHSA's CTDIvol 47 mGy row: its phantom is not in the retrieved source, so not compared
    assert by_q["ctdivol"][2] is None and not by_q["ctdivol"][4]
    others = con.execute("select count(*) from audit_medians where exam_type = 'ct_head' "
                         "and device_key <> ? and is_above_reference", [tgh]).fetchall()[0][0]
    assert others == 0


def test_step_change_is_flagged_in_the_right_month_and_nowhere_else(con):
    room = _device(con, "FDR-30511")
    flags = con.execute("select device_key, exam_type, quantity, change_month, ratio_after_to_before "
                        "from drift_flags").fetchall()
    assert {f[0] for f in flags} == {room}
    chest = [f for f in flags if f[1] == "dx_chest_pa" and f[2] == "dap"]
    assert len(chest) == 1 and chest[0][3] == "2026-10"
    assert 0.5 < chest[0][4] < 0.8  # the scenario's detector change: x 0.65


def test_a_change_inside_the_period_gives_the_median_after_it(con):
    # the detector change of tgh-dx1 at 2026-10 lies inside the audited Sep-Nov period
    room = _device(con, "FDR-30511")
    change, after, median = con.execute(
        "select change_month, median_after_change, median from audit_medians where device_key = ? "
        "and exam_type = 'dx_chest_pa' and quantity = 'dap' and population = 'adult'", [room]).fetchone()
    values = [r[0] for r in con.execute(
        "select value from audit_observation where device_key = ? and exam_type = 'dx_chest_pa' "
        "and quantity = 'dap' and patient_age_years >= 16 and period >= '2026-10' "
        "and study_date < date '2026-12-01'", [room]).fetchall()]
    assert change == "2026-10" and after == pytest.approx(np.median(values)) and after < median
    others = con.execute("select count(*) from audit_medians where change_month is not null "
                         "and device_key <> ?", [room]).fetchone()[0]
    assert others == 0


def test_interventional_case_triggers_the_substantial_dose_alert(con):
    rows = con.execute("select rule, value, threshold, unit, source, exam_type from dose_alerts "
                       "where rule like 'ncrp168%' order by rule").fetchall()
    rules = {r[0]: r for r in rows}
    assert rules["ncrp168_srdl_dose_rp"][1] == pytest.approx(6200, rel=0.01)
    assert rules["ncrp168_srdl_dose_rp"][2:4] == (5000.0, "mGy")
    assert "NCRP Report No. 168" in rules["ncrp168_srdl_dose_rp"][4]
    assert rules["ncrp168_srdl_dose_rp"][5] == "xa_coronary_intervention"
    n_studies = con.execute("select count(distinct study_key) from dose_alerts "
                            "where rule = 'ncrp168_srdl_dose_rp'").fetchall()[0][0]
    assert n_studies == 1


def test_public_interface_columns(con):
    expected = {
        "audit_medians": ["period", "site", "device_key", "exam_type", "quantity", "unit", "n",
                          "median", "p25", "p75", "median_ci_low", "median_ci_high",
                          "n_standard_size", "median_standard_size", "reference_set",
                          "reference_value", "ratio_to_reference", "is_above_reference",
                          "is_sample_adequate", "stratum", "min_sample", "reference_body",
                          "reference_country", "reference_indication", "reference_population",
                          "reference_scope_note"],
        "network_reference": ["period", "exam_type", "quantity", "unit", "n_rooms",
                              "typical_value", "p75_of_room_medians", "is_local_drl",
                              "min_rooms_local_drl", "local_drl", "stratum", "reference_body",
                              "reference_country", "reference_indication",
                              "reference_population", "reference_scope_note"],
        "dose_alerts": ["study_key", "patient_key", "device_key", "exam_type", "rule", "value",
                        "threshold", "unit", "source"],
        "drift_flags": ["device_key", "exam_type", "quantity", "change_month", "median_before",
                        "median_after", "statistic_z"],
        "reference_level": ["set_id", "issuing_body", "version", "effective_date", "exam_type",
                            "quantity", "value", "unit", "population", "phantom",
                            "citation_title", "citation_year", "citation_table", "country",
                            "indication", "valid_to", "superseded_by", "phantom_stated"],
    }
    for table, columns in expected.items():
        have = {r[0] for r in con.execute(f"describe {table}").fetchall()}
        assert set(columns) <= have, (table, set(columns) - have)


def test_medians_percentiles_and_ci_agree_with_numpy_and_scipy(con):
    group = con.execute("select site, device_key, exam_type, quantity, n, median, p25, p75, "
                        "median_ci_low, median_ci_high, n_standard_size, median_standard_size "
                        "from audit_medians where population = 'adult' and n >= 30 "
                        "order by n desc limit 1").fetchall()[0]
    rows = con.execute(
        "select value, patient_weight_kg from audit_observation where device_key = ? and "
        "exam_type = ? and quantity = ? and patient_age_years >= 16",
        list(group[1:4])).fetchall()
    values = np.array([r[0] for r in rows])
    weights = np.array([np.nan if r[1] is None else r[1] for r in rows], dtype=float)
    assert len(values) == group[4]
    assert np.allclose(group[5:8], np.percentile(values, [50, 25, 75]), rtol=1e-12)
    ci = quantile_test(values, q=np.median(values), p=0.5).confidence_interval(0.95)
    assert (group[8], group[9]) == (ci.low, ci.high)
    standard = values[(weights >= 50) & (weights <= 90)]
    assert group[10] == len(standard) and group[11] == pytest.approx(np.median(standard))


def test_network_values_follow_icrp_135(con):
    rows = con.execute("select exam_type, quantity, n_rooms, typical_value, p75_of_room_medians, "
                       "is_local_drl, local_drl from network_reference "
                       "where population = 'adult' and n_rooms >= 2").fetchall()
    assert rows
    for exam, quantity, n_rooms, typical, p75, is_local_drl, local_drl in rows:
        # the demo has 3 CT rooms: ICRP 135 sets a local DRL from a reasonable number of rooms
        # (10-20), so 3 rooms give a typical value but no local DRL
        assert n_rooms < 10 and is_local_drl is False and local_drl is None
        medians = [r[0] for r in con.execute(
            "select median from audit_medians where exam_type = ? and quantity = ? and "
            "population = 'adult' and is_sample_adequate", [exam, quantity]).fetchall()]
        assert len(medians) == n_rooms
        assert typical == pytest.approx(np.percentile(medians, 50))
        assert p75 == pytest.approx(np.percentile(medians, 75))


def test_effective_dose_uses_the_cited_k_factor(con):
    # default basis ICRP 103: adult (30 y phantom) chest k = 0.0210 mSv/(mGy cm), head 0.0017
    # (NCI ED103 at 120 kVp, Med Phys 2012;39:2129, Table XII)
    rows = dict(con.execute(
        "select e.exam_type, median(e.k_msv_per_mgy_cm) from study_estimate as e "
        "join study_dose as s using (study_key, device_key) where s.patient_age_years >= 18 "
        "and e.exam_type in ('ct_chest', 'ct_head') group by 1").fetchall())
    assert rows == {"ct_chest": pytest.approx(0.0210), "ct_head": pytest.approx(0.0017)}
    basis = {r[0] for r in con.execute("select distinct effective_dose_basis from study_estimate "
                                       "where effective_dose_msv is not null").fetchall()}
    assert basis == {"ICRP 103"}


def test_exactly_the_unmapped_archetypes_are_unmapped(audited, con):
    # the demo gives a few per cent of studies descriptions no default rule maps (scenario.toml
    # unmapped_share); every other study maps, and the summary counts the rest
    import pandas as pd

    from tests.helpers import pseudonymiser

    _, summary, corpus = audited
    studies = pd.read_parquet(corpus / "studies.parquet")
    pseudonymise = pseudonymiser()
    expected = {pseudonymise("study", u) for u in studies.loc[studies.is_unmapped, "study_instance_uid"]}
    got = {r[0] for r in con.execute("select study_key from study_dose "
                                     "where exam_type is null").fetchall()}
    assert got == expected and 0.01 < len(got) / len(studies) < 0.06
    assert summary.n_unmapped == len(got)


def test_unverified_set_is_installed_but_not_used_by_default(audited, con):
    _, summary, _ = audited
    # one issuing body by default; ARPANSA 2018 was superseded on 1 July 2025, 2012 in 2018
    assert summary.reference_sets == ["ukhsa_adult_ct_2022"]
    assert summary.reference_body == "UK Health Security Agency (UKHSA)"
    verified = con.execute("select bool_and(verified) from reference_level "
                           "where set_id = 'uk_adult_radiography_2016'").fetchall()[0][0]
    assert verified is False


def _copy(audited, tmp_path):
    db, _, _ = audited
    copy = tmp_path / "copy.duckdb"
    shutil.copy(db, copy)
    return copy


def test_import_a_local_set_and_audit_against_it(audited, tmp_path):
    db = _copy(audited, tmp_path)
    path = tmp_path / "local_2026.csv"
    with open(path, "w", newline="") as handle:
        w = csv.writer(handle)
        w.writerow(["set_id", "exam_type", "quantity", "value", "unit", "population",
                    "citation_title", "citation_year"])
        w.writerow(["local_2026", "dx_chest_pa", "dap", "0.05", "Gy.cm2", "adult",
                    "Local reference levels of the demo network (test)", "2026"])
    runner = CliRunner()
    result = runner.invoke(app, ["reference", "import", str(path), "--warehouse", str(db)])
    assert result.exit_code == 0, result.output
    result = runner.invoke(app, ["audit", "--warehouse", str(db), "--from", "2026-09-01",
                                 "--to", "2026-11-30", "--reference", "local_2026"])
    assert result.exit_code == 0, result.output
    assert "dx_chest_pa" in result.output and "local_2026" in result.output
    con = duckdb.connect(str(db), read_only=True)
    refs = {r[0] for r in con.execute("select distinct reference_set from audit_medians "
                                      "where reference_set is not null").fetchall()}
    assert refs == {"local_2026"}


def test_bad_reference_csv_is_refused_with_the_row(audited, tmp_path):
    db = _copy(audited, tmp_path)
    path = tmp_path / "bad.csv"
    path.write_text("set_id,exam_type,quantity,value,unit\nx,ct_head,dlp,790,mGy\n")
    result = CliRunner().invoke(app, ["reference", "import", str(path), "--warehouse", str(db)])
    assert result.exit_code == 2
    assert "row 2" in result.output and "mGy" in result.output


def test_three_rooms_are_not_a_local_drl_and_derive_refuses(audited, tmp_path):
    # ICRP 135: a local DRL from a reasonable number of rooms (10-20); the demo has 3 CT rooms
    db = _copy(audited, tmp_path)
    result = CliRunner().invoke(app, ["reference", "derive", "network_local", "--warehouse", str(db)])
    assert result.exit_code == 2
    assert "fewer than 10 rooms" in result.output and "--allow-few-rooms" in result.output
    result = CliRunner().invoke(app, ["reference", "derive", "network_local", "--warehouse", str(db),
                                      "--allow-few-rooms"])
    assert result.exit_code == 0, result.output
    con = duckdb.connect(str(db), read_only=True)
    derived = {(e, q): (v, note) for e, q, v, note in con.execute(
        "select exam_type, quantity, value, note from reference_level where set_id = 'network_local'"
    ).fetchall()}
    network = dict(((e, q), v) for e, q, v in con.execute(
        "select exam_type, quantity, p75_of_room_medians from network_reference "
        "where p75_of_room_medians is not null and population = 'adult'").fetchall())
    assert derived and all(derived[k][0] == pytest.approx(network[k]) for k in derived)
    assert all("not a local DRL" in note for _, note in derived.values())


def test_audit_command_prints_the_summary_and_the_caution(audited, tmp_path):
    db = _copy(audited, tmp_path)
    result = CliRunner().invoke(app, ["audit", "--warehouse", str(db), "--from", "2026-09-01",
                                      "--to", "2026-11-30"])
    assert result.exit_code == 0, result.output
    assert "Audit 2026-09-01..2026-11-30" in result.output
    assert "investigation level, not a dose limit" in result.output
    assert "ncrp168_srdl_dose_rp: 1" in result.output
    assert "issuing body: UK Health Security Agency (UKHSA)" in " ".join(result.output.split())
    text = " ".join(result.output.split())   # the console wraps long lines
    assert "Groups compared with a reference level:" in text
    assert "n below min_sample: CR 20, CT 20, DX 20, MG 50" in text


def test_unknown_reference_set_is_a_clear_error(audited, tmp_path):
    db = _copy(audited, tmp_path)
    result = CliRunner().invoke(app, ["audit", "--warehouse", str(db), "--period", "2026-10",
                                      "--reference", "no_such_set"])
    assert result.exit_code == 2 and "unknown reference set" in result.output
