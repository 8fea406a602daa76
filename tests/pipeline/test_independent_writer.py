"""Dose reports written by another writer (DCMTK dump2dcm) ingest to the expected values.

The objects are described here in dcmdump text syntax and encoded by DCMTK's dump2dcm, not by
pydicom, with choices our generator never makes: implicit VR, explicit item lengths, no Content
Template Sequence, legacy SNOMED-RT codes (PS3.16 before 2019), DAP in dGy.cm2 and a
retired Irradiation Event UID code (113853).
"""

import subprocess

import pytest

from pipeline.ingest import process_file
from tests.helpers import pseudonymiser, require_tool


def _el(tag, vr, value):
    return [f"({tag}) {vr} [{value}]"]


def _seq(tag, items):
    lines = [f"({tag}) SQ (Sequence with undefined length)"]
    for item in items:
        lines += ["(fffe,e000) na (Item with undefined length)"]
        lines += ["  " + x for x in item]
        lines += ["(fffe,e00d) na (ItemDelimitationItem)"]
    return lines + ["(fffe,e0dd) na (SequenceDelimitationItem)"]


def _code(value, scheme, meaning):
    return _el("0008,0100", "SH", value) + _el("0008,0102", "SH", scheme) + _el("0008,0104", "LO", meaning)


def _name(value, scheme, meaning):
    return _seq("0040,a043", [_code(value, scheme, meaning)])


def _rel(rel):
    return _el("0040,a010", "CS", rel) if rel else []


def code(rel, concept, value, children=()):
    item = _rel(rel) + _el("0040,a040", "CS", "CODE") + _name(*concept) + _seq("0040,a168", [_code(*value)])
    return item + (_seq("0040,a730", list(children)) if children else [])


def num(rel, concept, value, unit):
    measured = _seq("0040,08ea", [_code(unit, "UCUM", unit)]) + _el("0040,a30a", "DS", value)
    return _rel(rel) + _el("0040,a040", "CS", "NUM") + _name(*concept) + _seq("0040,a300", [measured])


def uidref(rel, concept, uid):
    return _rel(rel) + _el("0040,a040", "CS", "UIDREF") + _name(*concept) + _el("0040,a124", "UI", uid)


def text(rel, concept, value):
    return _rel(rel) + _el("0040,a040", "CS", "TEXT") + _name(*concept) + _el("0040,a160", "UT", value)


def container(rel, concept, children):
    return (_rel(rel) + _el("0040,a040", "CS", "CONTAINER") + _name(*concept)
            + _el("0040,a050", "CS", "SEPARATE") + _seq("0040,a730", list(children)))


def header(sop_uid, study_uid, description):
    lines = []
    for tag, vr, value in [
        ("0008,0005", "CS", "ISO_IR 100"), ("0008,0016", "UI", "1.2.840.10008.5.1.4.1.1.88.67"),
        ("0008,0018", "UI", sop_uid), ("0008,0020", "DA", "20260115"), ("0008,0023", "DA", "20260115"),
        ("0008,0030", "TM", "101500"), ("0008,0033", "TM", "103000"), ("0008,0050", "SH", "A1"),
        ("0008,0060", "CS", "SR"), ("0008,0070", "LO", "Independent Writer Devices"),
        ("0008,0080", "LO", "Elsewhere Test Clinic"), ("0008,0090", "PN", ""),
        ("0008,1010", "SH", "ELSEWHERE1"), ("0008,1030", "LO", description),
        ("0008,1090", "LO", "Model X"), ("0010,0010", "PN", "Test^Independent"),
        ("0010,0020", "LO", "IND-0001"), ("0010,0030", "DA", "19600101"), ("0010,0040", "CS", "F"),
        ("0010,1030", "DS", "64"), ("0018,1000", "LO", "SN-42"), ("0018,1020", "LO", "1.0"),
        ("0020,000d", "UI", study_uid), ("0020,000e", "UI", study_uid + ".9"),
        ("0020,0010", "SH", "1"), ("0020,0011", "IS", "1"), ("0020,0013", "IS", "1"),
        ("0040,a491", "CS", "COMPLETE"), ("0040,a493", "CS", "UNVERIFIED"),
        ("0040,a040", "CS", "CONTAINER"), ("0040,a050", "CS", "SEPARATE"),
    ]:
        lines += _el(tag, vr, value)
    return lines + _name("113701", "DCM", "X-Ray Radiation Dose Report")


OBS = [
    code("HAS OBS CONTEXT", ("121005", "DCM", "Observer Type"), ("121007", "DCM", "Device")),
    uidref("HAS OBS CONTEXT", ("121012", "DCM", "Device Observer UID"), "1.2.3.4.5.6.7"),
]


def _write(tmp_path, lines, name):
    dump = tmp_path / f"{name}.txt"
    dump.write_text("\n".join(lines) + "\n", encoding="latin-1")
    out = tmp_path / f"{name}.dcm"
    run = subprocess.run([require_tool("dump2dcm"), "+ti", str(dump), str(out)],
                         capture_output=True, text=True)
    assert run.returncode == 0, run.stderr
    return out.read_bytes()


def test_ct_report_from_dump2dcm(tmp_path):
    def acquisition(uid, kind, ctdi, dlp, length):
        return container("CONTAINS", ("113819", "DCM", "CT Acquisition"), [
            text("CONTAINS", ("125203", "DCM", "Acquisition Protocol"), "Brain"),
            code("CONTAINS", ("123014", "DCM", "Target Region"), ("T-D1100", "SRT", "Head")),
            code("CONTAINS", ("113820", "DCM", "CT Acquisition Type"), kind),
            uidref("CONTAINS", ("113853", "DCM", "Irradiation Event UID"), uid),  # retired code
            container("CONTAINS", ("113822", "DCM", "CT Acquisition Parameters"), [
                num("CONTAINS", ("113824", "DCM", "Exposure Time"), "4.5", "s"),
                num("CONTAINS", ("113825", "DCM", "Scanning Length"), length, "mm"),
            ]),
            container("CONTAINS", ("113829", "DCM", "CT Dose"), [
                num("CONTAINS", ("113830", "DCM", "Mean CTDIvol"), ctdi, "mGy"),
                code("CONTAINS", ("113835", "DCM", "CTDIw Phantom Type"),
                     ("113690", "DCM", "IEC Head Dosimetry Phantom")),
                num("CONTAINS", ("113838", "DCM", "DLP"), dlp, "mGy.cm"),
            ]),
        ])
    lines = header("1.2.826.0.1.3680043.10.1.1", "1.2.826.0.1.3680043.10.1.2", "HEAD") + _seq("0040,a730", [
        code("HAS CONCEPT MOD", ("121058", "DCM", "Procedure reported"),
             ("P5-08000", "SRT", "Computed Tomography X-Ray")),
        *OBS,
        container("CONTAINS", ("113811", "DCM", "CT Accumulated Dose Data"), [
            num("CONTAINS", ("113812", "DCM", "Total Number of Irradiation Events"), "2", "{events}"),
            num("CONTAINS", ("113813", "DCM", "CT Dose Length Product Total"), "815.5", "mGy.cm"),
        ]),
        acquisition("1.2.826.0.1.3680043.10.1.3", ("113805", "DCM", "Constant Angle Acquisition"),
                    "0.2", "5.5", "275"),
        acquisition("1.2.826.0.1.3680043.10.1.4", ("P5-08001", "SRT", "Spiral Acquisition"),
                    "54", "810", "150"),
    ])
    o = process_file("ct.dcm", _write(tmp_path, lines, "ct"), pseudonymiser())
    assert (o.status, o.reason) == ("loaded", None), o.detail
    assert o.obj.modality == "CT"
    localizer, spiral = o.obj.ct_events
    assert (localizer.ct_acquisition_type, spiral.ct_acquisition_type) == ("constant_angle", "spiral")
    assert spiral.event_uid == "1.2.826.0.1.3680043.10.1.4"
    assert (spiral.ctdivol_mgy, spiral.dlp_mgy_cm, spiral.ctdi_phantom) == (54.0, 810.0, "head_16cm")
    assert spiral.target_region_code == "SCT:69536005"  # legacy T-D1100 Head, mapped
    assert o.obj.accumulated[0].dlp_total_mgy_cm == 815.5
    assert o.obj.study.patient_weight_kg == 64.0


def test_fluoroscopy_report_with_dap_in_dgy_cm2(tmp_path):
    def event(uid, kind, dap_dgy_cm2, rp_gy, duration):
        return container("CONTAINS", ("113706", "DCM", "Irradiation Event X-Ray Data"), [
            code("HAS CONCEPT MOD", ("113764", "DCM", "Acquisition Plane"), ("113622", "DCM", "Single Plane")),
            uidref("CONTAINS", ("113769", "DCM", "Irradiation Event UID"), uid),
            code("CONTAINS", ("113721", "DCM", "Irradiation Event Type"), kind),
            num("CONTAINS", ("122130", "DCM", "Dose Area Product"), dap_dgy_cm2, "dGy.cm2"),
            num("CONTAINS", ("113738", "DCM", "Dose (RP)"), rp_gy, "Gy"),
            num("CONTAINS", ("113742", "DCM", "Irradiation Duration"), duration, "s"),
        ])
    lines = header("1.2.826.0.1.3680043.10.2.1", "1.2.826.0.1.3680043.10.2.2", "SWALLOW") + _seq("0040,a730", [
        code("HAS CONCEPT MOD", ("121058", "DCM", "Procedure reported"), ("113704", "DCM", "Projection X-Ray")),
        *OBS,
        container("CONTAINS", ("113702", "DCM", "Accumulated X-Ray Dose Data"), [
            code("HAS CONCEPT MOD", ("113764", "DCM", "Acquisition Plane"), ("113622", "DCM", "Single Plane")),
            num("CONTAINS", ("113730", "DCM", "Total Fluoro Time"), "95", "s"),
            num("CONTAINS", ("113722", "DCM", "Dose Area Product Total"), "0.00042", "Gy.m2"),
        ]),
        event("1.2.826.0.1.3680043.10.2.3", ("P5-06000", "SRT", "Fluoroscopy"), "300", "0.021", "95"),
        event("1.2.826.0.1.3680043.10.2.4", ("113611", "DCM", "Stationary Acquisition"), "120", "0.009", "0.1"),
    ])
    o = process_file("rf.dcm", _write(tmp_path, lines, "rf"), pseudonymiser())
    assert (o.status, o.reason) == ("loaded", None), o.detail
    fluoro, spot = o.obj.projection_events
    assert fluoro.event_type == "fluoroscopy" and spot.event_type == "stationary"
    assert fluoro.dap_gy_cm2 == pytest.approx(30.0)      # 300 dGy.cm2 = 30 Gy.cm2
    assert fluoro.dose_rp_mgy == pytest.approx(21.0)     # 0.021 Gy = 21 mGy
    (acc,) = o.obj.accumulated
    assert acc.dap_total_gy_cm2 == pytest.approx(4.2)    # 0.00042 Gy.m2 = 4.2 Gy.cm2 ...
    # ... which disagrees with the events (42 Gy.cm2): the warehouse records a total_mismatch
    assert o.obj.modality == "RF"
