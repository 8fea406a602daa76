"""Alert and follow-up thresholds (NCRP Report 168; AAPM CT dose check / NEMA XR 25).

None of these could be seen in a retrieved copy of its source, so every row is shipped with
verified = false and the default load returns none of them. The values are checked as shipped
(from memory) so that an accidental edit shows up.
"""

from pipeline.reference import load_alert_thresholds

ALL = {r["rule"]: r for r in load_alert_thresholds(include_unverified=True)}


def test_unverified_thresholds_are_off_by_default():
    assert all(r["verified"] for r in load_alert_thresholds())
    assert not any(r["verified"] for r in ALL.values())     # nothing could be verified
    assert load_alert_thresholds() == []
    assert all("from memory" in r["note"] for r in ALL.values())


def test_ncrp_168_substantial_radiation_dose_levels_as_shipped():
    # NCRP Report 168 (2010) SRDLs - from memory, unverified
    assert ALL["ncrp168_srdl_reference_air_kerma"]["threshold"] == 5000     # 5 Gy Ka,r, in mGy
    assert ALL["ncrp168_srdl_peak_skin_dose"]["threshold"] == 3000          # 3 Gy PSD, in mGy
    assert ALL["ncrp168_srdl_kerma_area_product"]["threshold"] == 500       # Gy.cm2
    assert ALL["ncrp168_srdl_fluoroscopy_time"]["threshold"] == 60 * 60     # 60 min in s


def test_ncrp_168_first_notifications_as_shipped():
    # NCRP Report 168 first notification levels - from memory (medium confidence), unverified
    assert ALL["ncrp168_first_notification_reference_air_kerma"]["threshold"] == 3000
    assert ALL["ncrp168_first_notification_peak_skin_dose"]["threshold"] == 2000
    assert ALL["ncrp168_first_notification_kerma_area_product"]["threshold"] == 300
    assert ALL["ncrp168_first_notification_fluoroscopy_time"]["threshold"] == 30 * 60


def test_aapm_ct_dose_check_values_as_shipped():
    # AAPM CT dose-check guidelines (2011) - from memory, unverified
    assert ALL["aapm_ct_notification_adult_head"]["threshold"] == 80        # CTDIvol mGy
    assert ALL["aapm_ct_notification_adult_torso"]["threshold"] == 50
    assert ALL["aapm_ct_notification_brain_perfusion"]["threshold"] == 600
    assert ALL["aapm_ct_alert_accumulated"]["threshold"] == 1000


def test_units_are_the_audit_units():
    assert {r["quantity"]: r["unit"] for r in ALL.values()} == {
        "dose_rp": "mGy", "peak_skin_dose": "mGy", "dap": "Gy.cm2", "fluoro_time": "s",
        "ctdivol": "mGy"}
