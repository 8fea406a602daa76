"""Every coded concept we write or read is the one PS3.16 defines (pydicom's PS3.16-derived
concept dictionary, generated from the standard, is the independent reference)."""

from pydicom.sr._concepts_dict import concepts as PS3_16

from pipeline import concepts as C

# Meanings that differ only in wording between the PS3.16 template text and the SNOMED CT
# fully specified name that pydicom stores (code values are identical; we match on codes).
TEMPLATE_WORDING = {"HAS_INTENT": "Has intent (attribute)"}


def test_every_concept_exists_with_its_meaning():
    checked = 0
    for name in C.__all__:
        code = getattr(C, name)
        if code.scheme_designator == "UCUM":
            continue
        meanings = {v[code.value][0] for v in PS3_16[code.scheme_designator].values() if code.value in v}
        assert meanings, f"{name}: ({code.value}, {code.scheme_designator}) is not in PS3.16"
        assert code.meaning in meanings or TEMPLATE_WORDING.get(name) in meanings, (name, meanings)
        checked += 1
    assert checked > 100


def test_ucum_units_are_the_template_units():
    # PS3.16 TID 10003/10004/10007 (Gy.m2, Gy, s), TID 10013 (mGy, mGy.cm, mm, kV, mA)
    assert [C.UNIT_GY_M2.value, C.UNIT_GY.value, C.UNIT_MGY.value, C.UNIT_MGY_CM.value] == \
        ["Gy.m2", "Gy", "mGy", "mGy.cm"]
