"""An audit of a warehouse holding studies no exam rule maps, of every modality.

Regression: the study-estimate step used to stop with ``ArrowTypeError: Expected bytes, got a
'float' object`` as soon as one CT study mapped to no exam type (pandas turned the NULL exam
type into NaN). Real departments always have unmapped descriptions (brain perfusion, trauma
protocols, a knee radiograph); the audit must count them and carry on.
"""

import datetime as dt

import duckdb
import pytest

from pipeline.audit import run_audit
from pipeline.ingest import ingest
from tests.helpers import KEY, demo_dataset, encode

# unit -> (its modality, an unmapped description: none of pipeline/exam_rules.toml matches it)
UNMAPPED = {
    "tgh-ct1": ("CT", "CT Brain Perfusion 4D"),
    "mph-ct1": ("CT", "Polytrauma whole body"),
    "ovh-dx1": ("DX", "XR Knee AP and lateral"),
    "mph-cr1": ("CR", "XR Shoulder"),
    "tgh-rf1": ("RF", "Defecating proctogram"),
    "tgh-xa1": ("XA", "Peripheral runoff angiogram"),
    "cic-mg1": ("MG", "Stereotactic breast biopsy"),
}


def _describe(ds, text: str) -> None:
    """Put `text` everywhere a rule looks: study description, protocol items (DCM 125203) and,
    for image headers, Protocol Name, Series Description and Body Part Examined."""
    ds.StudyDescription = text
    for keyword in ("ProtocolName", "SeriesDescription", "BodyPartExamined"):
        if keyword in ds:
            setattr(ds, keyword, "".join(c for c in text.upper() if c.isalnum() or c == " ")[:16]
                    if keyword == "BodyPartExamined" else text)  # CS: upper case, 16 chars

    def walk(items):
        for item in items:
            if item.ValueType == "TEXT" and item.ConceptNameCodeSequence[0].CodeValue == "125203":
                item.TextValue = text
            walk(item.get("ContentSequence", []))

    walk(ds.get("ContentSequence", []))


@pytest.fixture(scope="module")
def audited_with_unmapped(tmp_path_factory):
    root = tmp_path_factory.mktemp("unmapped")
    inbox = root / "in"
    inbox.mkdir()
    for device, (_, text) in UNMAPPED.items():
        _, ds = demo_dataset(device)
        _describe(ds, text)
        (inbox / f"{device}-unmapped.dcm").write_bytes(encode(ds))
    for device in ("ovh-ct1", "cic-dx1"):  # and two that map, so the groups are not all empty
        _, ds = demo_dataset(device)
        (inbox / f"{device}-mapped.dcm").write_bytes(encode(ds))
    db = root / "w.duckdb"
    ingest([inbox], db, KEY)
    summary = run_audit(db, date_from=dt.date(2026, 9, 1), date_to=dt.date(2026, 11, 30))
    return db, summary


def test_every_modality_has_an_unmapped_study(audited_with_unmapped):
    db, _ = audited_with_unmapped
    with duckdb.connect(str(db), read_only=True) as con:
        rows = dict(con.execute("select modality, count(*) from study_dose where exam_type is null "
                                "group by modality").fetchall())
    assert rows == {"CT": 2, "DX": 1, "CR": 1, "RF": 1, "XA": 1, "MG": 1}


def test_the_audit_counts_them_and_completes(audited_with_unmapped):
    db, summary = audited_with_unmapped
    assert (summary.n_studies, summary.n_unmapped) == (9, 7)
    with duckdb.connect(str(db), read_only=True) as con:
        assert con.execute("select count(*) from audit_medians where exam_type is null").fetchone()[0] == 0
        listed = {r[0] for r in con.execute("select study_description from "
                                            "(select * from study_dose where exam_type is null)").fetchall()}
    assert listed == {text for _, text in UNMAPPED.values()}


def test_unmapped_ct_gets_ssde_but_no_effective_dose(audited_with_unmapped):
    # E = k x DLP needs the body region, which only the exam type gives: no region, no E
    db, _ = audited_with_unmapped
    with duckdb.connect(str(db), read_only=True) as con:
        rows = con.execute("select exam_type, effective_dose_msv, effective_dose_basis, "
                           "dlp_total_mgy_cm from study_estimate order by exam_type nulls first").fetchall()
    unmapped = [r for r in rows if r[0] is None]
    assert len(unmapped) == 2 and all(r[1] is None and r[2] is None and r[3] > 0 for r in unmapped)
    mapped = [r for r in rows if r[0] is not None]
    assert len(mapped) == 1 and mapped[0][1] > 0
