"""TID 10003B/C geometry of a projection event: UCUM units converted once, signed table
positions kept, Collimated Field Height x Width when no area is reported (PS3.16 TID 10003B)."""

import pytest
from pydicom.dataset import Dataset
from pydicom.sequence import Sequence

from pipeline import concepts as C
from pipeline.parsing import parse_dose_object
from synthetic_studies.defects import find_num
from synthetic_studies.sr import code_sequence_item, num_item
from tests.helpers import demo_dataset, pseudonymiser, round_trip


def _set(item: Dataset, value: str, unit: str) -> None:
    measured = item.MeasuredValueSequence[0]
    measured.NumericValue = value
    measured.MeasurementUnitsCodeSequence = Sequence([code_sequence_item(C._ucum(unit))])


def _first_event(ds: Dataset) -> Dataset:
    return next(i for i in ds.ContentSequence if i.ValueType == "CONTAINER"
                and i.ConceptNameCodeSequence[0].CodeValue == C.IRRADIATION_EVENT_XRAY_DATA.value)


def _parse(ds):
    return parse_dose_object(round_trip(ds), pseudonymiser())


def test_the_interventional_unit_sends_geometry_for_every_event():
    spec, ds = demo_dataset("tgh-xa1")
    report = _parse(ds)
    truth = {e.event_uid: e for e in spec.projection_events}
    assert len(report.projection_events) == len(truth) > 5
    for e in report.projection_events:
        t = truth[e.event_uid]
        assert (e.positioner_primary_angle_deg, e.positioner_secondary_angle_deg) == \
            (t.primary_angle_deg, t.secondary_angle_deg)
        assert (e.table_longitudinal_mm, e.table_lateral_mm, e.table_height_mm) == \
            (t.table_longitudinal_mm, t.table_lateral_mm, t.table_height_mm)
        assert e.collimated_field_area_cm2 == pytest.approx(t.field_area_m2 * 1e4, rel=1e-12)
        assert e.reference_point_definition == "15cm from Isocenter toward Source"
    # plane B of the biplane unit looks from the side (LAO 60-90 in the scenario's view set)
    lateral = [e.positioner_primary_angle_deg for e in report.projection_events
               if e.acquisition_plane == "B"]
    assert lateral and min(lateral) > 45.0
    assert report.issues == []


def test_table_positions_in_cm_are_converted_and_may_be_negative():
    _, ds = demo_dataset("tgh-xa1")
    event = _first_event(ds)
    _set(find_num(event, C.TABLE_HEIGHT_POSITION), "-12.5", "cm")      # UCUM cm -> 125 mm
    _set(find_num(event, C.TABLE_LONGITUDINAL_POSITION), "0.25", "m")  # UCUM m -> 250 mm
    first = _parse(ds).projection_events[0]
    assert first.table_height_mm == -125.0
    assert first.table_longitudinal_mm == 250.0


def test_field_area_from_height_and_width_when_no_area_is_reported():
    _, ds = demo_dataset("tgh-xa1")
    event = _first_event(ds)
    event.ContentSequence = Sequence(
        [i for i in event.ContentSequence
         if i.ConceptNameCodeSequence[0].CodeValue != C.COLLIMATED_FIELD_AREA.value]
        + [num_item(C.COLLIMATED_FIELD_HEIGHT, 200.0, C.UNIT_MM),
           num_item(C.COLLIMATED_FIELD_WIDTH, 15.0, C.UNIT_CM)])
    first = _parse(ds).projection_events[0]
    assert first.collimated_field_area_cm2 == pytest.approx(20.0 * 15.0)   # 300 cm2


def test_an_angle_in_a_unit_other_than_degrees_is_an_issue_not_a_guess():
    _, ds = demo_dataset("tgh-xa1")
    _set(find_num(_first_event(ds), C.POSITIONER_PRIMARY_ANGLE), "0.5", "rad")
    report = _parse(ds)
    assert report.projection_events[0].positioner_primary_angle_deg is None
    assert [(i.concept_code, i.raw_unit) for i in report.issues] == [("DCM:112011", "rad")]
    assert "not deg" in report.issues[0].detail


def test_an_event_without_its_own_reference_point_takes_its_planes():
    # PS3.16 TID 10002 states the Reference Point Definition per plane; TID 10003 may repeat it
    _, ds = demo_dataset("tgh-xa1")
    for item in ds.ContentSequence:
        if item.ValueType == "CONTAINER" and \
                item.ConceptNameCodeSequence[0].CodeValue == C.IRRADIATION_EVENT_XRAY_DATA.value:
            item.ContentSequence = Sequence(
                [c for c in item.ContentSequence
                 if c.ConceptNameCodeSequence[0].CodeValue != C.REFERENCE_POINT_DEFINITION.value])
    events = _parse(ds).projection_events
    assert {e.reference_point_definition for e in events} == {"15cm from Isocenter toward Source"}
