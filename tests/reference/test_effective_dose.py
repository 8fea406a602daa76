"""DLP -> effective dose coefficients k, mSv/(mGy.cm).

ICRP 60 basis: Shrimpton et al. coefficients as reproduced in Med Phys 2012;39:2129, Table XII
(https://pmc.ncbi.nlm.nih.gov/articles/PMC3326072/table/t12). ICRP 103 basis: the NCI values
of the same table, 120 kVp. Age-band edges are this project's convention.
"""

import pytest

from pipeline.reference import UnverifiedReferenceError, effective_dose_msv

TABLE = "Table XII"


def k(region, age, basis="ICRP 60"):
    value, got_basis, source = effective_dose_msv(1.0, region, age, basis=basis)
    assert got_basis == basis and TABLE in source
    return value


def test_adult_chest_icrp60():
    assert k("chest", 40) == 0.014                              # Shrimpton, adult chest
    value, basis, _ = effective_dose_msv(400, "chest", 40)
    assert value == pytest.approx(5.6) and basis == "ICRP 60"   # 400 mGy.cm x 0.014


def test_adult_head_icrp60():
    assert k("head", 40) == 0.0021                              # Shrimpton, adult head
    assert effective_dose_msv(1000, "head", 40)[0] == pytest.approx(2.1)


def test_adult_abdomen_pelvis_and_trunk_icrp60():
    assert k("abdomen_pelvis", 40) == 0.015                     # Shrimpton, adult abdomen/pelvis
    assert k("chest_abdomen_pelvis", 40) == 0.015               # Shrimpton 'Trunk', adult


@pytest.mark.parametrize("age, expected", [
    (0.1, 0.011), (1, 0.0067), (5, 0.0040), (10, 0.0032), (18, 0.0021)])
def test_paediatric_head_icrp60(age, expected):
    assert k("head", age) == expected                           # Shrimpton head 0/1/5/10 y/adult


@pytest.mark.parametrize("age, expected", [
    (0.1, 0.039), (1, 0.026), (5, 0.018), (10, 0.013)])
def test_paediatric_chest_icrp60(age, expected):
    assert k("chest", age) == expected                          # Shrimpton chest 0/1/5/10 y


def test_icrp103_adult_values():
    # NCI ED103, 120 kVp, 30 y column
    assert k("head", 40, "ICRP 103") == 0.0017
    assert k("chest", 40, "ICRP 103") == 0.0210
    assert k("abdomen_pelvis", 40, "ICRP 103") == 0.0179
    assert k("chest_abdomen_pelvis", 40, "ICRP 103") == 0.0180


def test_icrp103_fifteen_year_old_as_published():
    # NCI ED103 120 kVp, 15 y: chest 0.0121 (published lower than the 30 y value)
    assert k("chest", 15, "ICRP 103") == 0.0121


def test_band_edges():
    assert k("head", 0.49) == 0.011 and k("head", 0.5) == 0.0067
    assert k("head", 14.99) == 0.0032 and k("head", 15) == 0.0021


def test_neck_is_unverified_and_off_by_default():
    with pytest.raises(UnverifiedReferenceError, match="unverified"):
        effective_dose_msv(100, "neck", 40)
    value, _, _ = effective_dose_msv(100, "neck", 40, include_unverified=True)
    assert value == pytest.approx(0.59)                         # 0.0059 adult neck, from memory


def test_no_factor():
    with pytest.raises(ValueError, match="no ICRP 60 k factor for region 'neck' at age 5"):
        effective_dose_msv(100, "neck", 5, include_unverified=True)
    with pytest.raises(ValueError, match="region 'legs'"):
        effective_dose_msv(100, "legs", 40)
    with pytest.raises(ValueError, match="no ICRP 26"):
        effective_dose_msv(100, "head", 40, basis="ICRP 26")


@pytest.mark.parametrize("dlp, age", [(-1, 40), (float("nan"), 40), (100, -2)])
def test_bad_input(dlp, age):
    with pytest.raises(ValueError):
        effective_dose_msv(dlp, "chest", age)
