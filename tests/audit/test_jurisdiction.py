"""One jurisdiction per audit, one issuing body by default, superseded sets only by name.

Sources of the dates checked here: ARPANSA replaced its 2018 adult MDCT DRLs on 1 July 2025
(ARPANSA, "Update: multi-detector computed tomography adult diagnostic reference levels,
July 2025"); the UK NDRL page "National Diagnostic Reference Levels: 22 January 2016 to
14 November 2018" (gov.uk) gives the validity of the 2016 radiography set; UKHSA adult CT
NDRLs adopted 2022 (NDRLs from 20 November 2024, Table 1); ARPANSA's first adult MDCT DRLs
(2012) were updated in 2018 (Lee et al., J Med Radiat Sci 2020;67:5-15).
"""

import datetime as dt

import pytest

from pipeline.errors import ConfigError
from pipeline.jurisdiction import choose_reference_sets, is_in_force
from pipeline.reference import load_reference_sets

AUTUMN_2026 = (dt.date(2026, 9, 1), dt.date(2026, 11, 30))
SPRING_2024 = (dt.date(2024, 3, 1), dt.date(2024, 3, 31))


@pytest.fixture(scope="module")
def shipped():
    sets = {}
    for row in load_reference_sets(include_unverified=True):
        s = sets.setdefault(row["set_id"], {**{k: row[k] for k in (
            "set_id", "issuing_body", "country", "effective_date", "valid_to")},
            "origin": "shipped", "all_verified": True})
        s["all_verified"] &= row["verified"]
    return list(sets.values())


def test_shipped_sets_record_country_and_supersession(shipped):
    by_id = {s["set_id"]: s for s in shipped}
    assert by_id["arpansa_adult_ct_2018"]["valid_to"] == "2025-06-30"      # replaced 1 July 2025
    assert by_id["uk_adult_radiography_2016"]["valid_to"] == "2018-11-14"
    assert by_id["arpansa_adult_ct_2012"]["valid_to"] == "2018"
    assert by_id["ukhsa_adult_ct_2022"]["valid_to"] is None
    assert {s["country"] for s in shipped} == {"GB", "AU"}


def test_superseded_set_is_not_in_force_after_its_end(shipped):
    arpansa_2018 = next(s for s in shipped if s["set_id"] == "arpansa_adult_ct_2018")
    assert is_in_force(arpansa_2018, dt.date(2025, 6, 1), dt.date(2025, 6, 30))
    assert not is_in_force(arpansa_2018, dt.date(2025, 7, 1), dt.date(2025, 7, 31))


def test_default_is_one_issuing_body_named(shipped):
    for period in (AUTUMN_2026, SPRING_2024):   # in 2024 ARPANSA 2018 was in force too
        choice = choose_reference_sets(shipped, *period)
        assert choice.primary == ["ukhsa_adult_ct_2022"] and choice.fallback == []
        assert choice.body == "UK Health Security Agency (UKHSA)"


def test_a_jurisdiction_uses_only_its_own_sets_in_force(shipped):
    choice = choose_reference_sets(shipped, *SPRING_2024, jurisdiction="AU")
    assert choice.primary == ["arpansa_adult_ct_2018"]          # 2012 edition superseded in 2018
    with pytest.raises(ConfigError, match=r"no verified reference set of jurisdiction AU is in "
                                          r"force .*arpansa_adult_ct_2018"):
        choose_reference_sets(shipped, *AUTUMN_2026, jurisdiction="AU")


def test_fallback_fills_gaps_only_when_configured(shipped):
    choice = choose_reference_sets(shipped, *SPRING_2024, jurisdiction="GB", fallback=["AU"])
    assert choice.primary == ["ukhsa_adult_ct_2022"] and choice.fallback == ["arpansa_adult_ct_2018"]
    assert choice.ordered == ["ukhsa_adult_ct_2022", "arpansa_adult_ct_2018"]


def test_a_superseded_or_unverified_set_is_used_only_by_name(shipped):
    choice = choose_reference_sets(shipped, *AUTUMN_2026, explicit=["uk_adult_radiography_2016"])
    assert choice.primary == ["uk_adult_radiography_2016"]
    with pytest.raises(ConfigError, match="unknown reference set"):
        choose_reference_sets(shipped, *AUTUMN_2026, explicit=["no_such_set"])
