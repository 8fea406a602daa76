"""Derived tables (pipeline/warehouse/derived.py): what an ingest run keeps for the studies it
touched must equal the whole computation (the calc_* views) and a warehouse loaded in one run;
a stale or unknown state is rebuilt whole; an audit with a peak-skin-dose threshold below the
kept maps' floor computes the missing maps.

Check values are the pipeline's own whole computation (no outside source: this is a
consistency check of the incremental bookkeeping, common practice, no source)."""

from __future__ import annotations

import datetime as dt
import hashlib
import shutil

import duckdb
import numpy as np
import pandas as pd
import pytest

from pipeline.ingest import ingest
from pipeline.warehouse.connection import connection
from pipeline.warehouse.derived import (_WRITE_ORDER, DERIVED_TABLES, MAP_FLOOR_MGY, MATCH_TABLES,
                                        OBJECT_TABLES, refresh_derived)
from tests.helpers import KEY

_ORDER = {"derived_irradiation_event": ["event_uid", "study_key", "device_key"],
          "derived_study_total": ["study_key", "device_key"],
          "derived_skin_dose": ["study_key", "device_key"],
          "derived_audit_observation": ["study_key", "device_key", "quantity", "event_uid"],
          "derived_object_study": ["sop_instance_uid", "study_key", "device_key"]}


def _frame(con, relation: str, order: list[str] | None) -> pd.DataFrame:
    df = con.execute(f"select * from {relation}").df()
    return df.sort_values(order or list(df.columns), na_position="first").reset_index(drop=True)


def _assert_same(a: pd.DataFrame, b: pd.DataFrame, what: str) -> None:
    """Same rows; floats to 1e-12 relative (a sum's order may move the last bit)."""
    assert list(a.columns) == list(b.columns), what
    assert len(a) == len(b), f"{what}: {len(a)} rows against {len(b)}"
    for c in a.columns:
        x, y = a[c], b[c]
        if pd.api.types.is_float_dtype(x):
            same = np.isclose(x, y, rtol=1e-12, atol=0, equal_nan=True)
        else:
            same = ((x.isna() & y.isna()) | (x.astype(str) == y.astype(str))).to_numpy()
        assert same.all(), f"{what}.{c}: {int((~same).sum())} rows differ"


@pytest.fixture(scope="module")
def three_runs(corpus, tmp_path_factory):
    """The session corpus ingested in three runs, its files dealt by a hash of their path within
    the corpus (the same split in every session), so
    that many studies get reports in more than one run (a cumulative report arriving later)."""
    files = sorted(p for p in corpus.rglob("*.dcm"))
    parts = [[f for f in files if int(hashlib.sha256(f.relative_to(corpus).as_posix().encode()).hexdigest(), 16) % 3 == k]
             for k in range(3)]
    db = tmp_path_factory.mktemp("three_runs") / "kerma.duckdb"
    results = [ingest(part, db, KEY, workers=1).derived for part in parts]
    return db, results


def test_each_run_refreshes_only_the_studies_it_touched(three_runs):
    """A fresh warehouse starts with empty derived tables at the empty state (the exam rules
    put in place before the first load), so even the first run is incremental."""
    db, results = three_runs
    assert [r.mode for r in results] == ["incremental"] * 3
    with duckdb.connect(str(db), read_only=True) as con:
        (n_studies,) = con.execute("select count(distinct study_key) from raw_dose_object").fetchone()
    assert all(0 < r.n_studies < n_studies for r in results)
    assert sum(r.n_studies for r in results) > n_studies   # studies spread over runs, redone


def test_tables_kept_run_by_run_equal_the_whole_computation(three_runs):
    db, _ = three_runs
    with duckdb.connect(str(db), read_only=True) as con:
        for table, calc in (*DERIVED_TABLES, *OBJECT_TABLES, *MATCH_TABLES):
            _assert_same(_frame(con, table, _ORDER.get(table)), _frame(con, calc, _ORDER.get(table)),
                         table)


def test_three_runs_give_the_warehouse_of_one_run(three_runs, warehouse):
    """study_dose, irradiation_event and the kept skin doses of the three-run warehouse equal
    those of the session warehouse, the same corpus loaded in one run (same key)."""
    db, _ = three_runs
    one, _ = warehouse
    with duckdb.connect(str(db), read_only=True) as a, duckdb.connect(str(one), read_only=True) as b:
        for relation, order in (("study_dose", ["study_key", "device_key"]),
                                ("irradiation_event", _ORDER["derived_irradiation_event"]),
                                ("audit_observation", _ORDER["derived_audit_observation"]),
                                ("derived_skin_dose", _ORDER["derived_skin_dose"]),
                                ("derived_skin_dose_map", None)):
            _assert_same(_frame(a, relation, order), _frame(b, relation, order), relation)
        (n_skin,) = a.execute("select count(*) from derived_skin_dose").fetchone()
    assert n_skin > 0


def test_a_long_run_refreshes_as_it_goes_and_equals_the_whole_computation(corpus, warehouse,
                                                                          tmp_path, monkeypatch):
    """A run that touches more than REFRESH_EVERY_STUDIES studies refreshes the derived tables
    whenever that many are touched (memory of a bulk load), not only at its end: the tables equal
    the whole computation and the one-refresh warehouse of the same corpus."""
    import pipeline.ingest as ingest_module

    monkeypatch.setattr(ingest_module, "REFRESH_EVERY_STUDIES", 40)
    calls = []

    def counted(con, studies=None, **kwargs):
        calls.append(len(studies or ()))
        return refresh_derived(con, studies, **kwargs)

    monkeypatch.setattr(ingest_module, "refresh_derived", counted)
    db = tmp_path / "kerma.duckdb"
    result = ingest([corpus], db, KEY, workers=1, batch_size=64).derived
    one, _ = warehouse
    with duckdb.connect(str(db), read_only=True) as con, \
            duckdb.connect(str(one), read_only=True) as b:
        (n_studies,) = con.execute("select count(distinct study_key) from raw_dose_object").fetchone()
        (n_refreshes,) = con.execute("select count(*) from derived_state").fetchone()
        for table, calc in (*DERIVED_TABLES, *OBJECT_TABLES, *MATCH_TABLES):
            _assert_same(_frame(con, table, _ORDER.get(table)), _frame(con, calc, _ORDER.get(table)),
                         table)
        for relation, order in (("study_dose", ["study_key", "device_key"]),
                                ("derived_skin_dose", _ORDER["derived_skin_dose"]),
                                ("derived_skin_dose_map", None)):
            _assert_same(_frame(con, relation, order), _frame(b, relation, order), relation)
    assert result.mode == "incremental" and n_refreshes == 1
    # several refreshes, each of at least 40 studies but the last: a study whose files fell in
    # two windows was recomputed in each
    assert len(calls) > n_studies // 64 and all(n >= 40 for n in calls[:-1])
    assert result.n_studies >= n_studies > 40


def test_every_refresh_of_a_run_starts_from_a_checkpoint(corpus, tmp_path, monkeypatch):
    """Before each refresh of a run the batches are checkpointed (the write-ahead log is empty):
    else the refresh's commit checkpointed them, reading the raw tables' primary-key indexes whole
    on top of the refresh's own memory (bench/ingest_scale.py: the refresh's peak grew from
    +70 MiB early to +150 MiB at 52k files of a 40k-study run). The run's last refresh, after
    the loop, too (it was not, and set the 100k-study run's peak at its end)."""
    import pipeline.ingest as ingest_module

    monkeypatch.setattr(ingest_module, "REFRESH_EVERY_STUDIES", 40)
    wal_sizes = []

    def watched(con, studies=None, **kwargs):
        (wal,), = con.execute("select wal_size from pragma_database_size()").fetchall()
        wal_sizes.append(wal)
        return refresh_derived(con, studies, **kwargs)

    monkeypatch.setattr(ingest_module, "refresh_derived", watched)
    ingest([corpus], tmp_path / "kerma.duckdb", KEY, workers=1, batch_size=64)
    assert len(wal_sizes) >= 3
    assert all(w == "0 bytes" for w in wal_sizes), wal_sizes


def test_a_current_refresh_does_nothing_and_a_stale_one_rebuilds_whole(warehouse, tmp_path):
    db = tmp_path / "copy.duckdb"
    shutil.copy(warehouse[0], db)
    with connection(db) as con:
        assert refresh_derived(con).mode == "none"
        before = _frame(con, "derived_study_total", _ORDER["derived_study_total"])
        # a writer that changed raw rows without saying which studies: one study's events go
        study = con.execute("select study_key from derived_study_total where modality = 'CT' "
                            "and event_count > 1 order by study_key limit 1").fetchall()[0][0]
        con.execute("delete from raw_ct_event where study_key = ?", [study])
        con.execute("delete from raw_accumulated where study_key = ?", [study])
        # an incremental refresh from a state the tables were not at is refused: rebuilt whole
        result = refresh_derived(con, [study], since="not the state the tables are at")
        assert result.mode == "full"
        after = _frame(con, "derived_study_total", _ORDER["derived_study_total"])
        gone = (before.study_key == study) & (before.modality == "CT")
        assert gone.sum() == 1
        assert not ((after.study_key == study) & (after.modality == "CT")).any()   # no events left
        assert len(after) == len(before) - 1
        _assert_same(after, _frame(con, "calc_study_total", _ORDER["derived_study_total"]), "rebuilt")
        # a lost state row (a warehouse of an earlier version) rebuilds whole too
        con.execute("delete from derived_state")
        assert refresh_derived(con).mode == "full"
        assert refresh_derived(con).mode == "none"


def _out_of_order(con, table: str, order: str) -> int:
    """Rows of `table` whose place in storage (rowid) differs from their place in `order`
    (ties kept in storage order)."""
    return con.execute(f"select count(*) from (select row_number() over (order by rowid) as a, "
                       f"row_number() over (order by {order}, rowid) as b "
                       f"from {table}) where a <> b").fetchall()[0][0]


def test_a_rebuild_writes_each_table_in_room_and_study_order(warehouse, tmp_path):
    """A whole rebuild writes the derived tables in their write order (month, room, study), so
    the audit's groupings by room and by study read neighbouring rows; before, a parallel join
    wrote them in no order."""
    db = tmp_path / "copy.duckdb"
    shutil.copy(warehouse[0], db)
    with connection(db) as con:
        con.execute("delete from derived_state")   # as a warehouse of an earlier version
        assert refresh_derived(con).mode == "full"
        for table in _WRITE_ORDER:
            (n,) = con.execute(f"select count(*) from {table}").fetchone()
            assert n > 100, table
            assert _out_of_order(con, table, _WRITE_ORDER[table]) == 0, table
        # the check can fail: rows written the other way round are out of order
        con.execute("create table reversed as select * from derived_audit_observation "
                    "order by period desc, device_key desc")
        assert _out_of_order(con, "reversed", _WRITE_ORDER["derived_audit_observation"]) > 0


def test_an_audit_below_the_kept_maps_floor_computes_the_missing_maps(warehouse, tmp_path):
    """With the peak-skin-dose alert at 300 mGy (a local choice), every RF/XA study at or above
    it gets a map whose largest cell plus the part without geometry is its PSD."""
    from pipeline.audit import run_audit

    threshold = 300.0
    assert threshold < MAP_FLOOR_MGY
    db = tmp_path / "copy.duckdb"
    shutil.copy(warehouse[0], db)
    config = tmp_path / "kerma.toml"
    config.write_text(f'[[alert_rule]]\nrule = "ncrp168_srdl_peak_skin_dose"\nthreshold = {threshold}\n',
                      encoding="utf-8")
    run_audit(db, date_from=dt.date(2026, 9, 1), date_to=dt.date(2026, 11, 30), config=config)
    with duckdb.connect(str(db), read_only=True) as con:
        rows = con.execute(
            "select k.study_key, k.psd_mgy, k.upper_bound_part_mgy, max(m.dose_mgy) "
            "from skin_dose as k left join skin_dose_map as m using (study_key, device_key) "
            "where k.psd_mgy >= ? group by all", [threshold]).fetchall()
        (below,) = con.execute("select count(*) from skin_dose where psd_mgy >= ? and psd_mgy < ?",
                               [threshold, MAP_FLOOR_MGY]).fetchone()
    assert below > 0, "the corpus should hold studies between the threshold and the floor"
    for study, psd, upper, peak in rows:
        assert peak is not None, f"study {study} at {psd:.0f} mGy has no map"
        assert peak + (upper or 0.0) == pytest.approx(psd, rel=1e-9)


def test_changed_exam_rules_recompute_the_matches_whole(warehouse, tmp_path):
    """Replacing the exam rules recomputes derived_exam_match and derived_audit_observation
    (mode 'rules'); study_dose and audit_observation then show the new rules' exam types, as the
    whole computation does."""
    from pipeline.exams import load_exam_rules, rule_rows
    from pipeline.warehouse.derived import exam_rules_state
    from pipeline.warehouse.load import replace_exam_rules

    db = tmp_path / "copy.duckdb"
    shutil.copy(warehouse[0], db)
    rules = rule_rows(load_exam_rules())
    with connection(db) as con:
        before = exam_rules_state(con)
        # drop every rule of one exam type: its studies become unmapped
        exam = con.execute("select exam_type from study_dose where exam_type is not null "
                           "group by 1 order by count(*) desc limit 1").fetchall()[0][0]
        ((had,),) = con.execute("select count(*) from audit_observation where exam_type = ?",
                                [exam]).fetchall()
        assert had > 0
        replace_exam_rules(con, [r for r in rules if r["exam_type"] != exam])
        assert exam_rules_state(con) != before
        state = con.execute("select mode from derived_state").fetchall()
        assert state == [("rules",)]
        (left,) = con.execute("select count(*) from study_dose where exam_type = ?", [exam]).fetchone()
        assert left == 0
        _assert_same(_frame(con, "derived_exam_match", None), _frame(con, "calc_exam_match", None),
                     "derived_exam_match")
        # the kept audited values follow the new rules too: none of that exam type is left
        ((kept,),) = con.execute("select count(*) from audit_observation where exam_type = ?",
                                 [exam]).fetchall()
        assert kept == 0
        order = _ORDER["derived_audit_observation"]
        _assert_same(_frame(con, "derived_audit_observation", order),
                     _frame(con, "calc_audit_observation", order), "derived_audit_observation")


def test_a_warehouse_of_an_earlier_version_is_filled_when_its_schema_is_brought_up(warehouse, tmp_path):
    """Without the derived tables (as before they existed), the first write connection's
    ensure_schema creates and fills them: study_dose is never seen empty."""
    from pipeline.warehouse.load import ensure_schema

    db = tmp_path / "copy.duckdb"
    shutil.copy(warehouse[0], db)
    with connection(db) as con:
        (n,) = con.execute("select count(*) from study_dose").fetchone()
        for table in ("derived_state", "derived_study_total", "derived_irradiation_event",
                      "derived_exam_text", "derived_exam_match", "derived_skin_dose",
                      "derived_audit_observation", "derived_object_study"):
            con.execute(f"drop table {table}")
    with connection(db) as con:
        ensure_schema(con)
        assert con.execute("select count(*) from study_dose").fetchone() == (n,)
        assert con.execute("select mode from derived_state").fetchall() == [("full",)]


def test_audited_values_follow_a_later_report_of_the_study_in_dcmtk_written_objects(tmp_path):
    """Projection dose reports encoded by DCMTK's dump2dcm (an independent writer), in two runs:
    run 1 brings study A (events e1, e2 of Dose (RP) 1 Gy each) and study B (one event, 0.5 Gy);
    run 2 brings a later report of study A repeating e1, e2 and adding e3 (1 Gy). The kept
    audited values (derived_audit_observation, refreshed per run for the studies it touched)
    give study A's Dose (RP) as the sum of its deduplicated events, 2000 then 3000 mGy (Gy to mGy:
    x 1000, UCUM), leave study B at 500 mGy, and equal the whole computation after each run."""
    from tests.helpers import projection_report_dump, write_with_dump2dcm

    event = dict(kvp=80, primary=0, secondary=0, sod_mm=750, sid_mm=1000, area_m2=0.04,
                 table_height_mm=-150)

    def report(folder, name: str, sop: str, study: str, doses: dict[str, float]):
        text = projection_report_dump(sop=sop, study=study, events=[
            {**event, "uid": uid, "dose_rp_gy": gy} for uid, gy in doses.items()])
        # a description the default exam rules map (an interventional coronary procedure)
        text = text.replace("(0008,1030) LO [INTERVENTION]", "(0008,1030) LO [Coronary angioplasty]")
        return write_with_dump2dcm(folder, name, text)

    first, second = tmp_path / "run1", tmp_path / "run2"
    first.mkdir()
    second.mkdir()
    report(first, "a1", "2.25.881001", "2.25.882001", {"2.25.883001": 1.0, "2.25.883002": 1.0})
    report(first, "b1", "2.25.881002", "2.25.882002", {"2.25.883003": 0.5})
    report(second, "a2", "2.25.881003", "2.25.882001",
           {"2.25.883001": 1.0, "2.25.883002": 1.0, "2.25.883004": 1.0})
    db = tmp_path / "kerma.duckdb"
    order = _ORDER["derived_audit_observation"]

    def dose_rp(con) -> list[tuple]:
        return con.execute("select s.event_count, o.value from audit_observation as o "
                           "join study_dose as s using (study_key, device_key) "
                           "where o.quantity = 'dose_rp' order by o.value").fetchall()

    results = []
    for folder in (first, second):
        results.append(ingest([folder], db, KEY, workers=1).derived)
        with duckdb.connect(str(db), read_only=True) as con:
            _assert_same(_frame(con, "derived_audit_observation", order),
                         _frame(con, "calc_audit_observation", order), f"after {folder.name}")
            results.append(dose_rp(con))
    assert [r.mode for r in results[::2]] == ["incremental", "incremental"]
    assert results[1] == [(1, pytest.approx(500.0)), (2, pytest.approx(2000.0))]
    assert results[3] == [(1, pytest.approx(500.0)), (3, pytest.approx(3000.0))]


def test_a_report_relabelled_to_another_study_moves_its_events_objects_and_dates(tmp_path):
    """Projection dose reports encoded by DCMTK's dump2dcm, in two runs: run 1 brings study A
    (report a1: events e1, e2; dated 2026-10-15) and study B (report b1: e3; 2026-10-20); run 2
    brings report a2 of another study C (dated 2026-12-01) repeating e1 and e2, as a report
    relabelled to a corrected study would. The deduplication keeps the later copy (a2's larger SOP
    Instance UID at equal content time), so after run 2 the kept objects' studies
    (derived_object_study, refreshed for the studies run 2 touched and those sharing an event with
    them) list a2 with C's date and b1, no longer a1, and equal the whole computation after each
    run. Check values follow from the objects written here (no outside source)."""
    from tests.helpers import projection_report_dump, write_with_dump2dcm

    event = dict(kvp=80, primary=0, secondary=0, sod_mm=750, sid_mm=1000, area_m2=0.04,
                 table_height_mm=-150)

    def report(folder, name: str, sop: str, study: str, date: str, uids: list[str]):
        text = projection_report_dump(sop=sop, study=study, study_date=date, events=[
            {**event, "uid": uid, "dose_rp_gy": 1.0} for uid in uids])
        return write_with_dump2dcm(folder, name, text)

    first, second = tmp_path / "run1", tmp_path / "run2"
    first.mkdir()
    second.mkdir()
    report(first, "a1", "2.25.884001", "2.25.885001", "20261015", ["2.25.886001", "2.25.886002"])
    report(first, "b1", "2.25.884002", "2.25.885002", "20261020", ["2.25.886003"])
    report(second, "a2", "2.25.884003", "2.25.885003", "20261201", ["2.25.886001", "2.25.886002"])
    db = tmp_path / "kerma.duckdb"
    order = _ORDER["derived_object_study"]
    kept, modes = [], []
    for folder in (first, second):
        modes.append(ingest([folder], db, KEY, workers=1).derived.mode)
        with duckdb.connect(str(db), read_only=True) as con:
            _assert_same(_frame(con, "derived_object_study", order),
                         _frame(con, "calc_object_study", order), f"after {folder.name}")
            kept.append(con.execute("select sop_instance_uid, study_date, count(*) "
                                    "from derived_object_study group by all order by 1").fetchall())
    assert modes == ["incremental", "incremental"]
    assert kept[0] == [("2.25.884001", dt.date(2026, 10, 15), 1),
                       ("2.25.884002", dt.date(2026, 10, 20), 1)]
    assert kept[1] == [("2.25.884002", dt.date(2026, 10, 20), 1),
                       ("2.25.884003", dt.date(2026, 12, 1), 1)]
