"""The SELECTs that count the audit period's studies (overview, unmapped descriptions, weight
share, device studies) read the temporary tables of dash_period_studies.sql and
dash_period_unmapped.sql, not study_dose: checked against study_dose's definition (a row per
study x device, its site the device's, its exam type the study unit's match) written out in
Python, on studies of one row and of rows on several devices, mapped or not."""

from __future__ import annotations

import datetime as dt
from collections import defaultdict

import duckdb

from queries import sql

DATE_FROM, DATE_TO = dt.date(2026, 9, 1), dt.date(2026, 10, 1)   # September (end exclusive)
IN, OUT = dt.date(2026, 9, 15), dt.date(2026, 8, 15)

# (device_key, site, modality, station_name, manufacturer, model)
DEVICES = [
    ("dev-a", "North", "CT", "CT1", "M1", "X"),
    ("dev-b", "South", "CT", "CT2", "M1", "X"),
    ("dev-c", "  ", "DX", None, "M2", "Y"),        # no site: "(site not known)", site "  "
    ("dev-d", "North", "DX", "DR1", "M2", "Y"),
    ("dev-e", "North", "CT", "CT1", "M1", "Z"),      # a Station Name of two devices
]
# (study_key, device_key, modality, study_date, study_description, weight_kg, height_m, age)
STUDIES = [
    ("s1", "dev-a", "CT", IN, "HEAD", 70.0, None, 40.0),      # one row, mapped, weight
    ("s2", "dev-a", "CT", IN, "CHEST", None, 1.7, 50.0),      # two devices, two sites:
    ("s2", "dev-b", "CT", IN, "CHEST", 80.0, None, None),     # mapped on a, not on b
    ("s3", "dev-b", "CT", IN, "ODD", None, None, None),       # one row, no match
    ("s4", "dev-a", "CT", OUT, "ODD", 60.0, None, None),      # out of the period
    ("s5", "dev-x", "CT", IN, "ODD", 55.0, None, None),       # a device the view does not know
    ("s6", "dev-c", "DX", IN, None, None, None, 3.0),         # a match with no exam type
    ("s7", "dev-c", "DX", IN, "KNEE", 20.0, None, None),      # two devices, one a date out:
    ("s7", "dev-d", "DX", OUT, "KNEE", None, 1.2, None),      # counted on c only
    ("s8", "dev-a", "CT", IN, "HEAD", None, None, None),      # one row, mapped
    ("s9", "dev-c", "DX", IN, "HAND", None, None, None),      # two devices, both unmapped
    ("s9", "dev-d", "DX", IN, "HAND", 30.0, None, None),
    ("s10", "dev-a", "CT", IN, "HEAD", None, None, 60.0),    # two devices of one site
    ("s10", "dev-e", "CT", IN, "HEAD", None, None, None),
    (None, "dev-b", "CT", IN, "ODD", 90.0, None, None),       # no study key (none in practice):
    (None, "dev-a", "CT", IN, None, None, None, None),        # one study to a GROUP BY
]
# (study_key, device_key, exam_type): the study units' matches
MATCHES = [("s1", "dev-a", "ct_head"), ("s2", "dev-a", "ct_chest"), ("s4", "dev-a", "ct_head"),
           ("s5", "dev-x", "ct_head"), ("s6", "dev-c", None), ("s7", "dev-c", "dx_knee"),
           ("s7", "dev-d", "dx_knee"), ("s8", "dev-a", "ct_head"), ("s10", "dev-a", "ct_head"),
           ("s10", "dev-e", "ct_head")]
# (study_key, device_key, acquisition_protocol)
EVENTS = [("s3", "dev-b", "Odd protocol"), ("s3", "dev-b", "Another"), ("s9", "dev-c", "Hand AP"),
          ("s2", "dev-b", "Chest"), ("s6", "dev-c", None)]


def _warehouse() -> duckdb.DuckDBPyConnection:
    con = duckdb.connect()
    con.execute("create table device (device_key varchar, site varchar, modality varchar, "
                "station_name varchar, manufacturer varchar, model varchar)")
    con.execute("create table derived_study_total (study_key varchar, device_key varchar, "
                "modality varchar, study_date date, study_description varchar, "
                "patient_weight_kg double, patient_height_m double, patient_age_years double)")
    con.execute("create table stg_exam_match (unit_kind varchar, study_key varchar, "
                "device_key varchar, exam_type varchar)")
    con.execute("create table irradiation_event (study_key varchar, device_key varchar, "
                "acquisition_protocol varchar)")
    con.executemany("insert into device values (?, ?, ?, ?, ?, ?)", DEVICES)
    con.executemany("insert into derived_study_total values (?, ?, ?, ?, ?, ?, ?, ?)", STUDIES)
    con.executemany("insert into stg_exam_match values ('study', ?, ?, ?)", MATCHES)
    # an event unit's match of an unmapped study is not the study's
    con.execute("insert into stg_exam_match values ('event', 's3', 'dev-b', 'ct_head')")
    con.executemany("insert into irradiation_event values (?, ?, ?)", EVENTS)
    # the overview's other relations, empty
    con.execute("create table audit_medians (exam_type varchar, reference_value double, "
                "is_above_reference boolean, is_sample_adequate boolean)")
    con.execute("create table dose_alerts (study_key varchar)")
    con.execute("create table drift_flags (device_key varchar)")
    con.execute("create table dash_period_file (status varchar, n_files bigint)")
    con.execute("create table dash_device as " + sql("dash_devices"))
    params = {"date_from": DATE_FROM, "date_to": DATE_TO}
    for name in ("dash_period_studies", "dash_period_unmapped"):
        con.execute(sql(name), params)
    return con


def _period_rows() -> list[dict]:
    """study_dose's rows of the period as the view defines them."""
    sites = {d[0]: d[1] for d in DEVICES}
    exams = {(s, d): e for s, d, e in MATCHES}
    names = ("study_key", "device_key", "modality", "study_date", "study_description",
             "weight", "height", "age")
    rows = []
    for values in STUDIES:
        row = dict(zip(names, values, strict=True))
        if DATE_FROM <= row["study_date"] < DATE_TO:
            row["site"] = sites.get(row["device_key"])
            row["exam_type"] = exams.get((row["study_key"], row["device_key"]))
            rows.append(row)
    return rows


def _site_label(site: str | None) -> str:
    return site.strip() if site and site.strip() else "(site not known)"


def _select(con, name: str) -> list[tuple]:
    text = sql(name)
    params = {"date_from": DATE_FROM, "date_to": DATE_TO}
    return con.execute(text, {k: v for k, v in params.items() if f"${k}" in text}).fetchall()


def test_overview_counts_the_studies_of_the_period():
    rows = _period_rows()
    studies = defaultdict(list)
    for r in rows:
        studies[r["study_key"]].append(r)
    (got,) = _select(_warehouse(), "dash_overview")
    expected = (len(studies), len({r["device_key"] for r in rows}),
                len({r["site"] or "" for r in rows}),
                sum(any(r["exam_type"] is None for r in s) for s in studies.values()),
                sum(any(r["weight"] is not None for r in s) for s in studies.values()))
    assert got[:5] == expected
    # what the definition gives here: s1-s3, s5-s10 and the rows with no key; unmapped s2 (on
    # b), s3, s6, s9 and the rows with no key
    assert expected == (10, 6, 4, 5, 6)


def test_weight_share_counts_each_study_once_per_site_and_modality():
    groups = defaultdict(lambda: defaultdict(lambda: [False, False, False]))
    for r in _period_rows():
        flags = groups[(_site_label(r["site"]), r["modality"])][r["study_key"]]
        for i, key in enumerate(("weight", "height", "age")):
            flags[i] |= r[key] is not None
    expected = sorted(
        (site, modality, len(s), sum(f[0] for f in s.values()), sum(f[1] for f in s.values()),
         sum(f[2] for f in s.values()), 100.0 * sum(f[0] for f in s.values()) / len(s))
        for (site, modality), s in groups.items())
    assert _select(_warehouse(), "dash_weight_share") == expected
    # s9 has rows on c (no site) and d (North): counted under both; s7 under c only; s10 once
    assert ("North", "DX", 1, 1, 0, 0, 100.0) in expected
    assert ("North", "CT", 5, 1, 1, 3, 20.0) in expected   # s1 s2 s8 s10, no key


def test_device_studies_count_the_studies_of_each_known_device():
    labels = {d[0]: d for d in DEVICES}
    studies = defaultdict(set)
    for r in _period_rows():
        if r["device_key"] in labels and r["study_key"] is not None:   # a distinct count
            studies[r["device_key"]].add(r["study_key"])
    stations = [d[3] or d[0] for d in DEVICES]

    def room(device: str) -> str:   # the Station Name, made unique by the key's end
        station = labels[device][3] or device
        return station if stations.count(station) == 1 else f"{station} ~{device[-6:]}"

    got = {(g[1], g[5]) for g in _select(_warehouse(), "dash_device_studies")}
    expected = {(room(d), len(s)) for d, s in studies.items()}
    assert got == expected
    # a: s1 s2 s8 s10; c: s6 s7 s9; e: s10
    assert {("CT1 ~dev-a", 4), ("dev-c", 3), ("CT1 ~dev-e", 1)} <= expected


def test_unmapped_descriptions_are_the_period_rows_with_no_exam_type():
    protocols = defaultdict(set)
    for study, device, protocol in EVENTS:
        if protocol is not None:
            protocols[(study, device)].add(protocol)
    groups = defaultdict(lambda: [set(), set(), set()])
    for r in _period_rows():
        if r["exam_type"] is None:
            g = groups[(r["modality"], r["study_description"] or "(no study description)")]
            g[0] |= protocols[(r["study_key"], r["device_key"])]
            g[1].add(_site_label(r["site"]))
            if r["study_key"] is not None:   # a distinct count
                g[2].add(r["study_key"])
    got = {(m, d, p, s, n) for m, d, p, s, n in _select(_warehouse(), "dash_unmapped")}
    expected = {(m, d, "; ".join(sorted(p)) or None, "; ".join(sorted(s)), len(k))
                for (m, d), (p, s, k) in groups.items()}
    assert got == expected
    # s2 on b and s3 under CT; s9 on both devices once; s6 (a match with no exam type) too
    assert ("DX", "HAND", "Hand AP", "(site not known); North", 1) in expected
    assert ("DX", "(no study description)", None, "(site not known)", 1) in expected
