"""The deliberate stories are in the corpus, at the sizes the audit will look for.

Reference value used as a yardstick: UKHSA adult CT national DRL for head (acute stroke),
DLP 790 mGy cm per complete examination, adopted 2022 (UKHSA, "Diagnostic reference levels
(DRLs): national DRLs", Table 1, page of 20 Nov 2024). NCRP Report No. 168 (2010)
substantial radiation dose level for reference air kerma: 5 Gy (from memory, corroborated
by AAPM MPPG 12.a quotations; see shared reference notes).
"""

import pandas as pd
import pydicom
import pytest
from pydicom.sr.coding import Code

from synthetic_studies.sampling import make_study
from synthetic_studies.scenario import load_scenario
from synthetic_studies.specs import study_truth

UKHSA_2022_CT_HEAD_DLP = 790.0  # mGy cm
NCRP_168_KAR_SRDL_MGY = 5000.0
EVENT_UID = Code("113769", "DCM", "Irradiation Event UID")


@pytest.fixture(scope="module")
def demo_studies() -> pd.DataFrame:
    """The demo-sized draw (seed 7, 3 months, 2000 studies), as specs: no files needed."""
    scenario = load_scenario()
    rows = []
    for index in range(2000):
        spec = make_study(scenario, 7, index, 2000, 3)
        rows.append({"device": spec.device, "exam": spec.exam, "month": spec.study_datetime.month,
                     "age": spec.age_years, **study_truth(spec)})
    return pd.DataFrame(rows)


def test_one_ct_head_protocol_runs_about_1_4_times_the_national_level(demo_studies):
    head = demo_studies[(demo_studies.exam == "ct_head") & (demo_studies.age >= 16)]
    medians = head.groupby("device")["dlp_total_mgy_cm"].median() / UKHSA_2022_CT_HEAD_DLP
    assert 1.25 < medians["tgh-ct1"] < 1.6
    others = medians.drop("tgh-ct1")
    assert (others < 1.05).all()


def test_radiography_room_dose_drops_in_month_two(demo_studies):
    room = demo_studies[(demo_studies.device == "tgh-dx1") & (demo_studies.exam == "dx_chest_pa")]
    by_month = room.groupby("month")["dap_total_gy_cm2"].median()
    assert by_month[10] / by_month[9] < 0.8
    assert 0.8 < by_month[11] / by_month[10] < 1.25
    steady = demo_studies[(demo_studies.device == "ovh-dx1") & (demo_studies.exam == "dx_chest_pa")]
    steady_by_month = steady.groupby("month")["dap_total_gy_cm2"].median()
    assert 0.85 < steady_by_month[10] / steady_by_month[9] < 1.18


def test_an_interventional_case_is_over_the_substantial_dose_level(studies_manifest):
    xa = studies_manifest[studies_manifest.modality == "XA"]
    over = xa[xa.dose_rp_total_mgy > NCRP_168_KAR_SRDL_MGY]
    assert list(over.story) == ["high_dose_intervention"]
    assert over.fluoro_time_total_s.iloc[0] > 3600


def test_two_units_send_no_dose_report(studies_manifest, files_manifest):
    kinds = studies_manifest.groupby("device")["source_kind"].agg(set)
    assert kinds["mph-cr1"] == {"image_header"}
    assert kinds["cic-ct1"] == {"dose_screen"}    # a CT dose screen per study instead
    assert all(k == {"rdsr"} for d, k in kinds.items() if d not in ("mph-cr1", "cic-ct1"))
    screens = files_manifest[files_manifest.kind == "dose_screen"]
    assert len(screens) == (studies_manifest.device == "cic-ct1").sum()
    assert set(screens.sop_class_uid) == {"1.2.840.10008.5.1.4.1.1.7"}  # Secondary Capture


def test_cumulative_reports_repeat_earlier_events(corpus, files_manifest, studies_manifest):
    import highdicom as hd

    # two dose reports (a two-view radiograph on the header-only CR unit has two images: not this)
    multi = studies_manifest[(studies_manifest.n_reports == 2) & (studies_manifest.source_kind == "rdsr")]
    assert len(multi) > 0 and set(multi.device) == {"mph-ct1"}
    for study in multi.study:
        paths = sorted(files_manifest.loc[(files_manifest.study == study)
                                          & files_manifest.defect.isna()
                                          & (files_manifest.kind == "rdsr"), "path"])
        first, second = (pydicom.dcmread(corpus / p) for p in paths)
        uids = [{i.UID for i in hd.sr.utils.find_content_items(ds, name=EVENT_UID, recursive=True)}
                for ds in (first, second)]
        assert uids[0] < uids[1]
        assert first.SOPInstanceUID != second.SOPInstanceUID
        assert first.StudyInstanceUID == second.StudyInstanceUID


def test_a_few_per_cent_of_studies_have_descriptions_no_rule_maps(demo_studies):
    """Real departments always have unmapped descriptions; the demo has them on several
    modalities, at a few per cent (scenario.toml unmapped_share; invented, no source)."""
    scenario = load_scenario()
    unmapped = demo_studies[[scenario.exams[e].unmapped for e in demo_studies.exam]]
    share = len(unmapped) / len(demo_studies)
    assert 0.01 < share < 0.06
    assert {scenario.device(d).modality for d in unmapped.device} >= {"CT", "DX", "MG", "XA"}
