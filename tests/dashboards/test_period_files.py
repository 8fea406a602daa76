"""queries/dashboards/dash_period_files.sql (over the file groups of dash_period_file_groups.sql):
the files of the audit period, each file not loaded as a row, the loaded ones counted per reason;
checked against the definition written out in Python."""

from __future__ import annotations

import datetime as dt
from collections import defaultdict

import duckdb

from queries import sql

DATE_FROM, DATE_TO = dt.date(2026, 9, 1), dt.date(2026, 10, 1)   # September (end exclusive)
IN, OUT = dt.date(2026, 9, 15), dt.date(2026, 8, 15)

# (path, sha256, sop_instance_uid, status, reason, run_id, size_bytes)
FILES = [
    ("a1", "h1", "s1", "loaded", None, "r1", 100),        # its study in the period
    ("a2", "h2", "s2", "loaded", None, "r1", 200),        # a study in and one out: in
    ("a3", "h3", "s3", "loaded", None, "r1", None),       # in, no size
    ("a4", "h4", "s4", "loaded", None, "r2", 400),        # out of the period
    ("a5", "h5", "s5", "loaded", "late", "r1", 500),      # in, another reason
    ("a6", "h6", "s6", "loaded", None, "r1", 600),        # no event kept, run with the period: in
    ("a7", "h7", "s7", "loaded", None, "r2", 700),        # no event kept, run without: out
    ("q1", "h8", None, "quarantined", "truncated", "r1", 10),   # no study date, run with: in
    ("q2", "h9", None, "quarantined", "truncated", "r2", 11),   # run without: out
    ("d1", "h1", "s1", "duplicate", "same content", "r1", 100),  # a loaded file's content, twice
    ("d2", "h1", "s1", "duplicate", "same content", "r1", 100),
    ("n1", "h10", None, "not_dose", "image", None, 12),   # NULL run: the run with no id
    ("n2", "h11", "s9", "not_dose", "image", None, 13),   # its study in the period
    ("l1", "h12", "s10", "loaded", None, None, 14),       # no event kept, NULL run: in (n2)
]
STUDIES = [("s1", IN), ("s2", IN), ("s2", OUT), ("s3", IN), ("s4", OUT), ("s5", IN), ("s9", IN)]


def _expected() -> list[tuple]:
    dates = defaultdict(list)
    for sop, day in STUDIES:
        dates[sop].append(day)

    def in_period(sop):
        days = dates.get(sop)
        return None if days is None else any(DATE_FROM <= d < DATE_TO for d in days)

    runs = defaultdict(bool)
    for f in FILES:
        runs[f[5]] |= in_period(f[2]) is True
    rows, loaded = [], defaultdict(lambda: [0, None])
    for path, sha, sop, status, reason, run, size in FILES:
        flag = in_period(sop)
        if not (flag or (flag is None and runs[run])):
            continue
        if status != "loaded":
            rows.append((status, reason, sha, run, 1, size))
        else:
            count = loaded[(status, reason)]
            count[0] += 1
            count[1] = count[1] if size is None else (count[1] or 0) + size
    rows += [(s, r, None, None, n, size) for (s, r), (n, size) in loaded.items()]
    return sorted(rows, key=repr)


def test_period_files_are_the_files_of_the_period_counted_per_reason():
    con = duckdb.connect()
    con.execute("create table source_object (path varchar, sha256 varchar, sop_instance_uid varchar, "
                "status varchar, reason varchar, run_id varchar, size_bytes bigint)")
    con.execute("create table derived_object_study (sop_instance_uid varchar, study_date date)")
    con.executemany("insert into source_object values (?, ?, ?, ?, ?, ?, ?)", FILES)
    con.executemany("insert into derived_object_study values (?, ?)", STUDIES)
    con.execute(sql("dash_period_file_groups"), {"date_from": DATE_FROM, "date_to": DATE_TO})
    con.execute(sql("dash_period_files"))
    got = con.execute("select * from dash_period_file").fetchall()
    expected = _expected()
    assert sorted(got, key=repr) == expected
    # what the definition gives here: a1, a2, a3 (no size), a6 (its run r1) and l1 (the NULL
    # run, with n2) loaded without a reason; a4, a7 and q2 (run r2) out; both duplicates listed
    assert ("loaded", None, None, None, 5, 914) in expected and len(expected) == 7
    assert ("loaded", "late", None, None, 1, 500) in expected
    assert [r[0] for r in expected].count("duplicate") == 2
    assert not any(r[2] == "h9" for r in expected)
