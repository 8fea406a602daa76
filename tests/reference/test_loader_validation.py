"""The reference-level loader rejects bad rows with a message naming the file and the row."""

import csv

import pytest

from pipeline.reference import REFERENCE_LEVEL_COLUMNS, load_alert_thresholds, load_reference_sets

GOOD = dict(set_id="local_test_set", issuing_body="Test body", country="GB", version="v1",
            effective_date="2024", valid_to="", superseded_by="", indication="",
            exam_type="ct_head", quantity="dlp", value="790", unit="mGy.cm", population="adult",
            age_min_years="", age_max_years="", weight_min_kg="", weight_max_kg="", phantom="",
            citation_title="A test table", citation_year="2024", citation_table="Table 1",
            citation_url="https://example.org/t1", verified="true", note="")


def write(folder, *rows, name="local_test_set", columns=REFERENCE_LEVEL_COLUMNS):
    path = folder / f"{name}.csv"
    with path.open("w", newline="", encoding="utf-8") as fh:
        w = csv.DictWriter(fh, fieldnames=columns, lineterminator="\n")
        w.writeheader()
        for r in rows:
            w.writerow({c: r.get(c, "") for c in columns})
    return path


def test_a_good_file_loads(tmp_path):
    write(tmp_path, GOOD, dict(GOOD, quantity="ctdivol", value="47", unit="mGy", phantom="head_16cm",
                               phantom_stated="true"))
    rows = load_reference_sets(directory=tmp_path)
    assert [(r["quantity"], r["value"], r["phantom"], r["phantom_stated"]) for r in rows] == [
        ("dlp", 790.0, None, None), ("ctdivol", 47.0, "head_16cm", True)]


def test_bad_unit_is_rejected_naming_the_row(tmp_path):
    write(tmp_path, GOOD, dict(GOOD, exam_type="ct_chest", unit="mGy cm"))
    with pytest.raises(ValueError, match=r"local_test_set\.csv row 3: unit 'mGy cm' is not 'mGy\.cm'"):
        load_reference_sets(directory=tmp_path)


@pytest.mark.parametrize("change, message", [
    ({"quantity": "dose"}, r"row 2: unknown quantity 'dose'"),
    ({"exam_type": "ct_brain"}, r"row 2: unknown exam_type 'ct_brain'"),
    ({"unit": "Gy.cm"}, r"row 2: unit 'Gy\.cm' is not 'mGy\.cm'"),
    ({"value": "-1"}, r"row 2: value '-1' must be a finite positive number"),
    ({"value": "0"}, r"row 2: value '0' must be a finite positive number"),
    ({"value": "lots"}, r"row 2: value 'lots' is not a number"),
    ({"population": "child"}, r"row 2: population must be adult, paediatric or all"),
    ({"phantom": "head_16cm"}, r"row 2: phantom 'head_16cm' given for dlp"),
    ({"quantity": "ctdivol", "unit": "mGy", "phantom": "body_16cm"}, r"row 2: phantom must be"),
    ({"quantity": "ctdivol", "unit": "mGy", "phantom": "head_16cm"},
     r"row 2: phantom_stated must be given"),
    ({"country": "gb"}, r"row 2: country 'gb' is not an ISO 3166-1 alpha-2"),
    ({"country": ""}, r"row 2: country is empty"),
    ({"valid_to": "2023"}, r"row 2: valid_to '2023' is not a date .* on or after effective_date"),
    ({"verified": "yes"}, r"row 2: verified must be true or false"),
    ({"citation_url": "gov.uk"}, r"row 2: citation_url 'gov.uk' is not an http"),
    ({"citation_year": "22"}, r"row 2: citation_year '22' is not a four-digit year"),
    ({"effective_date": "Nov 2022"}, r"row 2: effective_date 'Nov 2022'"),
    ({"age_min_years": "10", "age_max_years": "5"}, r"row 2: age_min_years 10 must be below"),
    ({"set_id": "another_set"}, r"row 2: set_id 'another_set' differs from the file name"),
    ({"citation_title": ""}, r"row 2: citation_title is empty"),
])
def test_bad_rows_are_rejected(tmp_path, change, message):
    write(tmp_path, dict(GOOD, **change))
    with pytest.raises(ValueError, match=r"local_test_set\.csv " + message):
        load_reference_sets(directory=tmp_path)


def test_duplicate_rows_are_rejected(tmp_path):
    write(tmp_path, GOOD, dict(GOOD, value="800"))
    with pytest.raises(ValueError, match=r"local_test_set\.csv row 3: duplicates row 2"):
        load_reference_sets(directory=tmp_path)


def test_bands_make_rows_distinct(tmp_path):
    write(tmp_path, dict(GOOD, population="paediatric", age_min_years="0", age_max_years="1"),
          dict(GOOD, population="paediatric", age_min_years="1", age_max_years="6"))
    assert len(load_reference_sets(directory=tmp_path)) == 2


def test_wrong_header_is_rejected(tmp_path):
    cols = tuple(c for c in REFERENCE_LEVEL_COLUMNS if c != "note")
    write(tmp_path, GOOD, columns=cols)
    with pytest.raises(ValueError, match=r"local_test_set\.csv row 1: header must be exactly"):
        load_reference_sets(directory=tmp_path)


def test_unverified_rows_need_asking_for(tmp_path):
    write(tmp_path, GOOD, dict(GOOD, exam_type="ct_chest", verified="false", note="from memory"))
    assert [r["exam_type"] for r in load_reference_sets(directory=tmp_path)] == ["ct_head"]
    assert len(load_reference_sets(True, directory=tmp_path)) == 2


def test_an_edited_file_is_re_read(tmp_path):
    write(tmp_path, GOOD)
    assert load_reference_sets(directory=tmp_path)[0]["value"] == 790
    write(tmp_path, dict(GOOD, value="7900"))
    assert load_reference_sets(directory=tmp_path)[0]["value"] == 7900


def test_alert_file_with_a_bad_unit_is_rejected(tmp_path):
    path = tmp_path / "alerts.csv"
    path.write_text("rule,quantity,threshold,unit,basis,source_title,source_year,source_url,verified,note\n"
                    "x,dose_rp,5,Gy,b,t,2010,https://example.org,true,\n", encoding="utf-8")
    with pytest.raises(ValueError, match=r"alerts\.csv row 2: unit 'Gy' is not 'mGy'"):
        load_alert_thresholds(path=path)
