"""Patient position per irradiation event (PS3.16 TID 10003: Patient Table Relationship CID 21,
Patient Orientation CID 19 with its Modifier CID 20), parsed from a dose report that DCMTK's
dump2dcm encoded (an independent writer), and the legacy SNOMED-RT codes older units send
(F-10310 prone, F-10480 feet-first: pydicom's SRT -> SCT mapping)."""

import pytest

from pipeline.ingest import process_file
from tests.helpers import projection_report_dump, pseudonymiser, require_tool, write_with_dump2dcm

pytestmark = pytest.mark.external

BASE = dict(dose_rp_gy=1.0, kvp=80, primary=0, secondary=0, sod_mm=750, sid_mm=1000,
            area_m2=0.04, table_height_mm=-150)


@pytest.fixture(scope="module")
def report(tmp_path_factory):
    events = [
        {**BASE, "uid": "2.25.4150001", "modifier": ("1240000", "SCT", "prone"),
         "relationship": ("102541007", "SCT", "feet-first")},
        {**BASE, "uid": "2.25.4150002", "modifier": ("F-10340", "SRT", "supine"),
         "relationship": ("F-10470", "SRT", "headfirst")},
        {**BASE, "uid": "2.25.4150003", "modifier": ("102536004", "SCT", "left lateral decubitus")},
        {**BASE, "uid": "2.25.4150004"},
    ]
    path = write_with_dump2dcm(tmp_path_factory.mktemp("position"), "position", projection_report_dump(
        sop="2.25.4150000", study="2.25.4150009", events=events))
    outcome = process_file(str(path), path.read_bytes(), pseudonymiser())
    assert outcome.status == "loaded", outcome.detail
    return path, {e.event_uid: e for e in outcome.obj.projection_events}


def test_orientation_items_are_parsed_by_code(report):
    _, events = report
    got = {uid: (e.patient_orientation, e.patient_orientation_modifier, e.patient_table_relationship)
           for uid, e in events.items()}
    assert got == {
        "2.25.4150001": ("recumbent", "prone", "feet-first"),
        "2.25.4150002": ("recumbent", "supine", "headfirst"),        # legacy SRT codes
        "2.25.4150003": ("recumbent", "left lateral decubitus", None),
        "2.25.4150004": (None, None, None),                          # not sent: nothing guessed
    }


def test_dcmdump_sees_the_codes_the_parser_read(report):
    import subprocess
    path, _ = report
    out = subprocess.run([require_tool("dcmdump"), "+P", "0008,0100", "+s", str(path)],
                         check=True, capture_output=True, text=True).stdout
    for code in ("1240000", "102541007", "F-10340", "F-10470", "102536004", "102538003"):
        assert f"[{code}]" in out


def test_the_synthetic_interventional_room_reports_supine_head_first_and_a_stray_modifier_is_read():
    """The demo XA room sends the position in every event (synthetic_studies/sampling.py); a
    modifier sent beside its Patient Orientation instead of under it is still read."""
    from pipeline import concepts as C
    from pipeline.parsing import parse_dose_object
    from tests.helpers import demo_dataset, round_trip

    _, ds = demo_dataset("tgh-xa1")
    events = [i for i in ds.ContentSequence if i.ValueType == "CONTAINER"
              and i.ConceptNameCodeSequence[0].CodeValue == C.IRRADIATION_EVENT_XRAY_DATA.value]
    orientation = next(i for i in events[0].ContentSequence
                       if i.ConceptNameCodeSequence[0].CodeValue == C.PATIENT_ORIENTATION.value)
    stray = orientation.ContentSequence.pop(0)
    stray.RelationshipType = "CONTAINS"
    events[0].ContentSequence.append(stray)
    parsed = parse_dose_object(round_trip(ds), pseudonymiser()).projection_events
    assert len(parsed) == len(events) > 5
    assert {(e.patient_orientation, e.patient_orientation_modifier, e.patient_table_relationship)
            for e in parsed} == {("recumbent", "supine", "headfirst")}
