"""Right number, wrong comparison is still wrong: populations, strata, quantities and phantoms.

Sources of the rules checked here:
- EC Radiation Protection No. 185 (2018), European guidelines on DRLs for paediatric imaging,
  and ICRP Publication 135 (2017): paediatric head examinations by age band (0-<3 months,
  3 months-<1 year, 1-<6 years, >=6 years), body examinations by weight band (<5, 5-<15,
  15-<30, 30-<50, 50-<80 kg). Band edges from memory (reports not retrieved).
- ICRP 135: a DRL quantity is compared with the same quantity; CTDIvol depends on the
  reference phantom (16 cm head / 32 cm body PMMA, IEC 60601-2-44), so a CTDIvol level is
  compared only when its source states the phantom. ARPANSA, "Australian national diagnostic
  reference levels for MDCT - ADULT" (2012), Table 1, states: head CTDIvol on the 16 cm
  phantom, 60 mGy; chest on the 32 cm phantom, 15 mGy.
- Entrance surface dose (UK radiography NDRLs quote ESD with backscatter) is a different
  quantity from the reference air kerma Ka,r at the patient entrance reference point
  (IEC 60601-2-43; PS3.16 TID 10003 Dose (RP)): an ESD level is never compared with Ka,r.
"""

import datetime as dt

import duckdb
import pytest

from pipeline.audit import AuditSettings, run_audit
from pipeline.ingest import ingest
from queries import sql
from tests.helpers import KEY, demo_dataset, encode

PERIOD = dict(date_from=dt.date(2026, 9, 1), date_to=dt.date(2026, 11, 30))


def _set_age(ds, years: float | None, weight_kg: float | None = None) -> None:
    study = dt.date(int(ds.StudyDate[:4]), int(ds.StudyDate[4:6]), int(ds.StudyDate[6:]))
    if years is None:
        for keyword in ("PatientBirthDate", "PatientAge"):
            if keyword in ds:
                setattr(ds, keyword, None)
    else:
        ds.PatientBirthDate = (study - dt.timedelta(days=round(years * 365.25))).strftime("%Y%m%d")
        ds.PatientAge = f"{int(years):03d}Y"
    if weight_kg is not None:
        ds.PatientWeight = str(weight_kg)


@pytest.fixture(scope="module")
def children(tmp_path_factory):
    """A 4-year-old's head CT, a 9-year-old's 20 kg chest CT, an adult head CT and a head CT
    of unknown age, audited against UKHSA 2022 and ARPANSA 2012 (named explicitly)."""
    root = tmp_path_factory.mktemp("children")
    inbox = root / "in"
    inbox.mkdir()
    cases = {"child_head": ("ovh-ct1", "ct_head", 4.0, None),
             "child_chest": ("ovh-ct1", "ct_chest", 9.0, 20.0),
             "adult_head": ("mph-ct1", "ct_head", 45.0, None),
             "unknown_head": ("tgh-ct1", "ct_head", None, None)}
    for name, (device, exam, age, weight) in cases.items():
        _, ds = demo_dataset(device, exam=exam)
        _set_age(ds, age, weight)
        (inbox / f"{name}.dcm").write_bytes(encode(ds))
    db = root / "w.duckdb"
    ingest([inbox], db, KEY)
    summary = run_audit(db, **PERIOD, reference_sets=["ukhsa_adult_ct_2022", "arpansa_adult_ct_2012"])
    con = duckdb.connect(str(db), read_only=True)
    yield con, summary
    con.close()


def _rows(con, exam, quantity):
    return con.execute(
        "select population, stratum, phantom, reference_set, reference_value, reference_scope_note "
        "from audit_medians where exam_type = ? and quantity = ? order by population",
        [exam, quantity]).fetchall()


def test_a_childs_head_ct_falls_in_its_age_band(children):
    # EC RP 185 / ICRP 135: paediatric head CT by age band; a 4-year-old is in 1-<6 years
    con, _ = children
    rows = {r[0]: r for r in _rows(con, "ct_head", "dlp")}
    assert rows["paediatric"][1] == "age 1-<6 years"
    assert rows["paediatric"][3] is None            # no paediatric level shipped: not compared
    assert "no paediatric reference" in rows["paediatric"][5]
    assert rows["adult"][1] is None and rows["adult"][4] == 790.0   # UKHSA 2022 head DLP


def test_a_childs_body_ct_falls_in_its_weight_band(children):
    con, _ = children
    (row,) = [r for r in _rows(con, "ct_chest", "dlp") if r[0] == "paediatric"]
    assert row[1] == "weight 15-<30 kg"             # EC RP 185 / ICRP 135 weight bands


def test_unknown_age_is_its_own_group_never_adult(children):
    con, _ = children
    rows = {r[0]: r for r in _rows(con, "ct_head", "dlp")}
    assert set(rows) == {"adult", "paediatric", "unknown_age"}
    assert rows["unknown_age"][3] is None and "patient age unknown" in rows["unknown_age"][5]


def test_ctdivol_is_compared_only_with_a_stated_equal_phantom(children):
    con, _ = children
    rows = {r[0]: r for r in _rows(con, "ct_head", "ctdivol")}
    adult = rows["adult"]
    assert adult[2] == "head_16cm"
    # UKHSA's head row comes first but its phantom is not in the retrieved source; ARPANSA 2012
    # states the 16 cm phantom for head CTDIvol (Table 1): that one is compared
    assert adult[3:5] == ("arpansa_adult_ct_2012", 60.0)


def test_a_phantom_not_stated_in_the_source_is_not_compared_and_says_why(tmp_path):
    inbox = tmp_path / "in"
    inbox.mkdir()
    _, ds = demo_dataset("mph-ct1", exam="ct_head")
    (inbox / "head.dcm").write_bytes(encode(ds))
    db = tmp_path / "w.duckdb"
    ingest([inbox], db, KEY)
    run_audit(db, **PERIOD, reference_sets=["ukhsa_adult_ct_2022"])
    with duckdb.connect(str(db), read_only=True) as con:
        (row,) = _rows(con, "ct_head", "ctdivol")
    assert row[3] is None and row[4] is None
    assert row[5] == ("CTDIvol not compared: the reference phantom (head_16cm) is not stated "
                      "in the retrieved source")


def test_the_indication_of_the_reference_is_stated(children):
    # UKHSA's CT head NDRL is for acute stroke; our group is every head CT
    con, _ = children
    row = con.execute("select reference_indication, reference_body, reference_country, "
                      "reference_population, reference_scope_note from audit_medians "
                      "where exam_type = 'ct_head' and quantity = 'dlp' and population = 'adult'"
                      ).fetchone()
    assert row[:4] == ("acute stroke", "UK Health Security Agency (UKHSA)", "GB", "adult")
    assert 'clinical indication "acute stroke"' in row[4] and "every study" in row[4]


def test_min_sample_is_stored_with_each_group(children):
    con, summary = children
    assert summary.min_sample["CT"] == 20
    rows = con.execute("select distinct min_sample, is_sample_adequate from audit_medians").fetchall()
    assert rows == [(20, False)]


@pytest.fixture(scope="module")
def radiographs(tmp_path_factory):
    root = tmp_path_factory.mktemp("radiographs")
    inbox = root / "in"
    inbox.mkdir()
    _, ds = demo_dataset("ovh-dx1", exam="dx_chest_pa")
    _set_age(ds, 50.0)
    (inbox / "chest.dcm").write_bytes(encode(ds))
    db = root / "w.duckdb"
    ingest([inbox], db, KEY)
    # the UK 2016 radiography set (from memory, unverified) has DAP and ESD rows for chest PA
    run_audit(db, **PERIOD, reference_sets=["uk_adult_radiography_2016"])
    return db


def test_entrance_dose_reference_is_never_compared_with_ka_r(radiographs):
    with duckdb.connect(str(radiographs), read_only=True) as con:
        rows = {r[0]: r[1:] for r in con.execute(
            "select quantity, reference_set, reference_value from audit_medians "
            "where exam_type = 'dx_chest_pa'").fetchall()}
    assert rows["dose_rp"] == (None, None)                       # Ka,r: no ESD level used
    assert rows["dap"] == ("uk_adult_radiography_2016", 0.1)     # same quantity: compared
    assert "ka_e" not in rows   # no entrance-dose column in this warehouse: nothing to compare


@pytest.mark.parametrize("derivation, quantity, compared", [
    ("ESAK", "ka_e", True),            # entrance surface air kerma: the quantity of the ESD level
    ("IAK", "entrance_dose", False),   # incident air kerma (no backscatter): not Ka,e
    (None, "entrance_dose", False),    # derivation not stated: not assumed to be Ka,e
])
def test_only_an_esak_entrance_dose_meets_an_entrance_surface_reference(derivation, quantity,
                                                                        compared, tmp_path):
    """A radiograph's image-header Entrance Dose (PS3.3 C.8.7.8) meets the UK chest PA entrance
    surface dose level (with backscatter) only when its Entrance Dose Derivation (0040,8303) is
    ESAK; it is never audited as Ka,r (dose_rp), and never compared as DAP."""
    from tests.pipeline.test_real_world_ingest import dx_image, part10
    ds = dx_image(EntranceDoseInmGy="0.21", ImageAndFluoroscopyAreaDoseProduct="1.0")
    ds.StudyDescription, ds.ViewPosition = "XR CHEST PA", "PA"
    ds.PatientAge = "050Y"
    if derivation:
        ds.EntranceDoseDerivation = derivation
    inbox = tmp_path / "in"
    inbox.mkdir()
    (inbox / "chest.dcm").write_bytes(part10(ds))
    db = tmp_path / "w.duckdb"
    ingest([inbox], db, KEY)
    run_audit(db, date_from=dt.date(2026, 11, 1), date_to=dt.date(2026, 11, 30),
              reference_sets=["uk_adult_radiography_2016"])
    with duckdb.connect(str(db), read_only=True) as con:
        rows = {r[0]: r[1:] for r in con.execute(
            "select quantity, median, reference_set, reference_value from audit_medians "
            "where exam_type = 'dx_chest_pa'").fetchall()}
    assert "dose_rp" not in rows                       # no Ka,r from an image header
    assert rows[quantity][0] == pytest.approx(0.21)
    if compared:
        assert rows["ka_e"][1:] == ("uk_adult_radiography_2016", 0.15)  # same quantity
    else:
        assert rows[quantity][1:] == (None, None) and "ka_e" not in rows


def test_min_sample_can_be_configured_per_modality(radiographs, tmp_path):
    import shutil
    db = tmp_path / "copy.duckdb"
    shutil.copy(radiographs, db)
    settings = AuditSettings(min_sample={"DX": 1, "CT": 20})
    run_audit(db, **PERIOD, settings=settings)
    with duckdb.connect(str(db), read_only=True) as con:
        assert con.execute("select bool_and(is_sample_adequate), max(min_sample) from audit_medians"
                           ).fetchone() == (True, 1)


def test_a_fallback_set_fills_a_gap_and_every_such_row_says_so(tmp_path):
    # [audit] jurisdiction = "GB", fallback = ["arpansa_adult_ct_2012"]: UKHSA's head CTDIvol
    # cannot be compared (phantom not stated), ARPANSA 2012 states the 16 cm phantom (60 mGy)
    inbox = tmp_path / "in"
    inbox.mkdir()
    _, ds = demo_dataset("mph-ct1", exam="ct_head")
    _set_age(ds, 45.0)
    (inbox / "head.dcm").write_bytes(encode(ds))
    db = tmp_path / "w.duckdb"
    ingest([inbox], db, KEY)
    config = tmp_path / "kerma.toml"
    config.write_text('[audit]\njurisdiction = "GB"\nfallback = ["arpansa_adult_ct_2012"]\n')
    summary = run_audit(db, **PERIOD, config=config)
    assert summary.reference_sets == ["ukhsa_adult_ct_2022", "arpansa_adult_ct_2012"]
    assert summary.fallback_sets == ["arpansa_adult_ct_2012"]
    with duckdb.connect(str(db), read_only=True) as con:
        rows = {r[0]: r[1:] for r in con.execute(
            "select quantity, reference_set, reference_value, reference_country, "
            "reference_scope_note from audit_medians where exam_type = 'ct_head'").fetchall()}
    assert rows["dlp"][:3] == ("ukhsa_adult_ct_2022", 790.0, "GB") and "fallback" not in rows["dlp"][3]
    assert rows["ctdivol"][:3] == ("arpansa_adult_ct_2012", 60.0, "AU")
    assert "fallback: a set of Australian Radiation Protection" in rows["ctdivol"][3]
    assert "superseded: the set was in force until 2018" in rows["ctdivol"][3]


def test_unknown_audit_setting_is_refused(tmp_path):
    from pipeline.audit import load_audit_settings
    from pipeline.errors import ConfigError
    config = tmp_path / "kerma.toml"
    config.write_text('[audit]\njurisdicton = "GB"\n')
    with pytest.raises(ConfigError, match="unknown \\[audit\\] key\\(s\\) jurisdicton"):
        load_audit_settings(config)


def _studies(device: str, exam: str, n: int):
    from synthetic_studies.generator import make_dataset
    from synthetic_studies.sampling import make_study
    from synthetic_studies.scenario import load_scenario

    scenario, found = load_scenario(), []
    for index in range(5000):
        spec = make_study(scenario, 7, index, 5000, 3)
        if spec.device == device and spec.exam == exam and spec.age_years >= 18:
            found.append(make_dataset(scenario, spec, spec.reports[0]))
            if len(found) == n:
                return found
    raise LookupError(device)


def test_an_indication_rule_counts_the_studies_that_match_the_references_indication(tmp_path):
    # UKHSA's adult CT head NDRL is defined for acute stroke (Table 1, "Clinical Indication");
    # the shipped indication rule marks head CTs whose texts say "stroke"; a user rule adds more
    inbox = tmp_path / "in"
    inbox.mkdir()
    studies = _studies("mph-ct1", "ct_head", 3)
    studies[0].StudyDescription = "CT HEAD CODE STROKE"
    studies[1].StudyDescription = "CT HEAD ?SAH"
    for n, ds in enumerate(studies):
        (inbox / f"head{n}.dcm").write_bytes(encode(ds))
    db = tmp_path / "w.duckdb"
    ingest([inbox], db, KEY)
    run_audit(db, **PERIOD)
    query = ("select n, reference_indication, n_indication_matched, reference_scope_note "
             "from audit_medians where exam_type = 'ct_head' and quantity = 'dlp'")
    with duckdb.connect(str(db), read_only=True) as con:
        n, indication, matched, note = con.execute(query).fetchone()
    assert (n, indication, matched) == (3, "acute stroke", 1)
    assert "(1 of 3 marked with that indication by the indication rules)" in note
    config = tmp_path / "kerma.toml"
    config.write_text('[[indication_rule]]\nexam = "ct_head"\nindication = "acute stroke"\n'
                      'any = ["sah"]\n')
    run_audit(db, **PERIOD, config=config)
    with duckdb.connect(str(db), read_only=True) as con:
        assert con.execute(query).fetchone()[2] == 2


