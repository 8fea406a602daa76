"""The generator's speed-only paths give what the plain pydicom way gives.

sr.py builds content items from their elements (a blank Dataset's attributes, constant
elements copied from a template); encoder.py encodes with its own explicit VR little endian
writer that reuses the bytes of code items. Check values here come from pydicom itself
(keyword assignment, ``Dataset.save_as``), the independent reference.
"""

import io

from pydicom.dataset import Dataset
from pydicom.sequence import Sequence

from pipeline import concepts as C
from synthetic_studies.generator import make_dataset
from synthetic_studies.sampling import make_study
from synthetic_studies.scenario import load_scenario
from synthetic_studies.sr import code_item, num_item
from synthetic_studies.write import _encode, _strict_writing


def _code(code) -> Dataset:
    ds = Dataset()
    ds.CodeValue, ds.CodingSchemeDesignator, ds.CodeMeaning = \
        code.value, code.scheme_designator, code.meaning
    return ds


def test_num_item_equals_the_item_built_by_keyword():
    with _strict_writing():
        fast = num_item(C.KVP, 80.5, C.UNIT_KV)
        plain = Dataset()
        plain.RelationshipType = "CONTAINS"
        plain.ValueType = "NUM"
        plain.ConceptNameCodeSequence = Sequence([_code(C.KVP)])
        measured = Dataset()
        measured.NumericValue = "80.5"
        measured.MeasurementUnitsCodeSequence = Sequence([_code(C.UNIT_KV)])
        plain.MeasuredValueSequence = Sequence([measured])
    assert fast == plain
    assert vars(fast).keys() == vars(plain).keys()
    for a, b in ((fast, plain), (fast.ConceptNameCodeSequence[0], plain.ConceptNameCodeSequence[0])):
        for elem_a in a:
            elem_b = b[elem_a.tag]
            assert (elem_a.VR, elem_a.validation_mode) == (elem_b.VR, elem_b.validation_mode)


def test_items_of_the_same_code_share_nothing_that_can_change():
    with _strict_writing():
        one, two = code_item(C.ACQUISITION_PLANE, C.SINGLE_PLANE), \
            code_item(C.ACQUISITION_PLANE, C.SINGLE_PLANE)
    one.ConceptCodeSequence[0].CodeValue = "999"
    one.ValueType = "TEXT"
    one.ConceptNameCodeSequence[0]._private_blocks[(9, "x")] = None
    assert two.ConceptCodeSequence[0].CodeValue == C.SINGLE_PLANE.value
    assert two.ValueType == "CODE"
    assert two.ConceptNameCodeSequence[0]._private_blocks == {}
    with _strict_writing():
        three = code_item(C.ACQUISITION_PLANE, C.SINGLE_PLANE)
    assert three.ConceptCodeSequence[0].CodeValue == C.SINGLE_PLANE.value
    assert three.ValueType == "CODE"


def test_fast_encoder_writes_the_bytes_pydicom_writes_for_every_unit():
    scenario = load_scenario()
    todo = {d.id for d in scenario.devices}
    checked = 0
    with _strict_writing():
        for index in range(3000):
            if not todo:
                break
            spec = make_study(scenario, 7, index, 3000, 3)
            if spec.device not in todo:
                continue
            todo.discard(spec.device)
            for report in spec.reports[:2]:
                ds = make_dataset(scenario, spec, report)
                fast = _encode(ds)  # twice: the second reuses the remembered code items
                assert _encode(ds) == fast
                buffer = io.BytesIO()
                ds.save_as(buffer, enforce_file_format=True)
                assert fast == buffer.getvalue(), (spec.device, report.kind)
                checked += 1
    assert not todo and checked >= len(scenario.devices)
