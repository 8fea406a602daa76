"""Shipped reference levels against the tables they cite.

Every verified value is in EXPECTED with its source beside it; a verified row without an entry
there fails `test_every_verified_value_is_checked`. Unverified rows are checked only for being
off by default and for saying why they are unverified.
"""

import pytest

from pipeline.reference import QUANTITY_UNITS, load_reference_sets

VERIFIED = load_reference_sets()
EVERYTHING = load_reference_sets(include_unverified=True)


def row(set_id, exam_type, quantity, rows=VERIFIED):
    """The value of the one row for (set, exam, quantity); fails unless exactly one matches."""
    found = [r for r in rows if (r["set_id"], r["exam_type"], r["quantity"]) == (set_id, exam_type, quantity)]
    assert len(found) == 1, f"{len(found)} rows for {set_id}/{exam_type}/{quantity}"
    return found[0]["value"]


UKHSA = "ukhsa_adult_ct_2022"      # UKHSA NDRLs from 20 November 2024, Table 1 Adult CT (adopted 2022)
AU18 = "arpansa_adult_ct_2018"     # Lee KL et al. J Med Radiat Sci 2020;67:5-15, abstract (Results)
AU12 = "arpansa_adult_ct_2012"     # ARPANSA adult MDCT DRLs page, Table 1 (adult 15+ years)

EXPECTED = {
    (UKHSA, "ct_head", "ctdivol"): 47,                      # Head, acute stroke: 47 mGy
    (UKHSA, "ct_head", "dlp"): 790,                         #   790 mGy cm
    (UKHSA, "ct_sinuses", "ctdivol"): 12,                   # Paranasal sinuses: 12 / 160
    (UKHSA, "ct_sinuses", "dlp"): 160,
    (UKHSA, "ct_cervical_spine", "ctdivol"): 16,            # Cervical spine, fracture: 16 / 400
    (UKHSA, "ct_cervical_spine", "dlp"): 400,
    (UKHSA, "ct_neck_chest_abdomen_pelvis", "dlp"): 850,    # Neck, chest, abdomen, pelvis: - / 850
    (UKHSA, "ct_chest", "ctdivol"): 8.5,                    # Chest, lung cancer: 8.5 / 290
    (UKHSA, "ct_chest", "dlp"): 290,
    (UKHSA, "ct_chest_abdomen", "dlp"): 470,                # Chest and abdomen: - / 470
    (UKHSA, "ct_chest_high_resolution", "ctdivol"): 8,      # Chest HR, ILD, helical: 8 / 300
    (UKHSA, "ct_chest_high_resolution", "dlp"): 300,
    (UKHSA, "ct_chest_abdomen_pelvis", "dlp"): 660,         # Chest, abdomen, pelvis: - / 660
    (UKHSA, "ct_pulmonary_angiography", "ctdivol"): 9.1,    # CTPA: 9.1 / 310
    (UKHSA, "ct_pulmonary_angiography", "dlp"): 310,
    (UKHSA, "ct_abdomen_pelvis", "ctdivol"): 10,            # Abdomen and pelvis, abscess: 10 / 530
    (UKHSA, "ct_abdomen_pelvis", "dlp"): 530,
    (UKHSA, "ct_colonography", "dlp"): 690,                 # Virtual colonoscopy: - / 690
    (UKHSA, "ct_kub", "ctdivol"): 6.3,                      # KUB, stones/colic: 6.3 / 290
    (UKHSA, "ct_kub", "dlp"): 290,
    (UKHSA, "ct_urogram", "dlp"): 890,                      # Urogram: - / 890
    (AU18, "ct_head", "ctdivol"): 52,                       # head 52 mGy / 880 mGycm
    (AU18, "ct_head", "dlp"): 880,
    (AU18, "ct_cervical_spine", "ctdivol"): 23,             # cervical spine 23 / 470
    (AU18, "ct_cervical_spine", "dlp"): 470,
    (AU18, "ct_neck", "ctdivol"): 17,                       # soft-tissue neck 17 / 450
    (AU18, "ct_neck", "dlp"): 450,
    (AU18, "ct_chest", "ctdivol"): 10,                      # chest 10 / 390
    (AU18, "ct_chest", "dlp"): 390,
    (AU18, "ct_abdomen_pelvis", "ctdivol"): 13,             # abdomen-pelvis 13 / 600
    (AU18, "ct_abdomen_pelvis", "dlp"): 600,
    (AU18, "ct_kub", "ctdivol"): 13,                        # kidney-ureter-bladder 13 / 600
    (AU18, "ct_kub", "dlp"): 600,
    (AU18, "ct_chest_abdomen_pelvis", "ctdivol"): 11,       # chest-abdomen-pelvis 11 / 940
    (AU18, "ct_chest_abdomen_pelvis", "dlp"): 940,
    (AU18, "ct_lumbar_spine", "ctdivol"): 26,               # lumbar spine 26 / 670
    (AU18, "ct_lumbar_spine", "dlp"): 670,
    (AU12, "ct_head", "dlp"): 1000,                         # Head 1000 / 60
    (AU12, "ct_head", "ctdivol"): 60,
    (AU12, "ct_neck", "dlp"): 600,                          # Neck 600 / 30
    (AU12, "ct_neck", "ctdivol"): 30,
    (AU12, "ct_chest", "dlp"): 450,                         # Chest 450 / 15
    (AU12, "ct_chest", "ctdivol"): 15,
    (AU12, "ct_abdomen_pelvis", "dlp"): 700,                # AbdoPelvis 700 / 15
    (AU12, "ct_abdomen_pelvis", "ctdivol"): 15,
    (AU12, "ct_chest_abdomen_pelvis", "dlp"): 1200,         # ChestAbdoPelvis 1200 / 30
    (AU12, "ct_chest_abdomen_pelvis", "ctdivol"): 30,
    (AU12, "ct_lumbar_spine", "dlp"): 900,                  # Lumbar Spine 900 / 40
    (AU12, "ct_lumbar_spine", "ctdivol"): 40,
}


@pytest.mark.parametrize("key", sorted(EXPECTED), ids=lambda k: "/".join(k))
def test_verified_value_matches_its_table(key):
    assert row(*key) == EXPECTED[key]


def test_every_verified_value_is_checked():
    # a verified row without an entry in EXPECTED (or an entry without a row) fails here
    shipped = {(r["set_id"], r["exam_type"], r["quantity"]) for r in VERIFIED}
    assert shipped == set(EXPECTED)


def test_ukhsa_head_example():
    assert row("ukhsa_adult_ct_2022", "ct_head", "dlp") == 790  # UKHSA NDRLs, Table 1, adopted 2022


def test_ukhsa_rows_without_a_published_ctdivol_have_none():
    # UKHSA Table 1 leaves CTDIvol blank for NCAP, chest+abdomen, CAP, colonography, urogram
    for exam in ("ct_neck_chest_abdomen_pelvis", "ct_chest_abdomen", "ct_chest_abdomen_pelvis",
                 "ct_colonography", "ct_urogram"):
        assert not [r for r in EVERYTHING if r["set_id"] == "ukhsa_adult_ct_2022"
                    and r["exam_type"] == exam and r["quantity"] == "ctdivol"]


def test_arpansa_2012_phantoms_as_the_page_states():
    # ARPANSA 2012 page note: head CTDIvol on the 16 cm PMMA phantom, chest and abdomen on 32 cm
    rows = {r["exam_type"]: r["phantom"] for r in VERIFIED
            if r["set_id"] == "arpansa_adult_ct_2012" and r["quantity"] == "ctdivol"}
    assert rows["ct_head"] == "head_16cm"
    assert rows["ct_chest"] == rows["ct_abdomen_pelvis"] == "body_32cm"
    assert all(r["age_min_years"] == 15 for r in VERIFIED if r["set_id"] == "arpansa_adult_ct_2012")


def test_versions_of_one_issuer_stay_apart():
    # ARPANSA CAP: 2012 30 mGy / 1200 mGy.cm (ARPANSA page) vs 2018 11 / 940 (Lee et al. 2020)
    assert row("arpansa_adult_ct_2012", "ct_chest_abdomen_pelvis", "dlp") == 1200
    assert row("arpansa_adult_ct_2018", "ct_chest_abdomen_pelvis", "dlp") == 940


def test_units_follow_the_quantity():
    assert {(r["quantity"], r["unit"]) for r in EVERYTHING} <= set(QUANTITY_UNITS.items())


def test_phantom_only_on_ctdivol_rows():
    assert all(r["phantom"] is None for r in EVERYTHING if r["quantity"] != "ctdivol")


def test_unverified_rows_are_off_by_default():
    assert all(r["verified"] for r in VERIFIED)
    unverified = [r for r in EVERYTHING if not r["verified"]]
    assert unverified, "the UK radiography set is shipped unverified"
    assert not [r for r in VERIFIED if r["set_id"] == "uk_adult_radiography_2016"]
    for r in unverified:
        assert "from memory" in r["note"], r


def test_uk_radiography_2016_values_as_shipped_from_memory():
    # NOT verified: recalled UK NDRLs 2016-2018 (HPA-CRCE-034), per radiograph; from memory
    s = "uk_adult_radiography_2016"
    assert row(s, "dx_chest_pa", "dap", EVERYTHING) == 0.1      # Gy.cm2, from memory
    assert row(s, "dx_chest_pa", "ka_e", EVERYTHING) == 0.15    # mGy, from memory
    assert row(s, "dx_abdomen_ap", "dap", EVERYTHING) == 2.5    # from memory
    assert row(s, "dx_lumbar_spine_lat", "ka_e", EVERYTHING) == 10   # from memory
    assert all("per radiograph" in r["note"] for r in EVERYTHING if r["set_id"] == s)


def test_every_row_carries_its_source():
    for r in EVERYTHING:
        assert r["citation_title"] and r["citation_table"] and r["citation_url"].startswith("http")
        assert 1990 < r["citation_year"] < 2100


@pytest.mark.parametrize("set_id", ["ukhsa_adult_ct_2022", "arpansa_adult_ct_2018",
                                    "arpansa_adult_ct_2012"])
def test_required_sets_are_present_and_verified(set_id):
    rows = [r for r in VERIFIED if r["set_id"] == set_id]
    assert rows and all(r["population"] == "adult" for r in rows)
