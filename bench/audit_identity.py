"""Do the audit's outputs stay the same across a change of its implementation? (on demand)

    .venv/bin/python bench/audit_identity.py --warehouse W --snapshot DIR          # before
    .venv/bin/python bench/audit_identity.py --warehouse W --snapshot DIR --compare  # after

On a copy of the warehouse W, runs ``pipeline.audit.run_audit`` for a fixed sequence of periods
(each month of the corpus, then the whole span, then the first month again, so audit_finding
holds several periods and a re-run) and, after each run, saves every table the audit writes
(rows sorted, run timestamps dropped) as Parquet under DIR/<step>/. With --compare, the same
sequence runs again and each table must equal the saved one: same columns and types, same rows;
floats equal to 1e-12 relative (a changed summation order may move the last bit). Prints one
line per table and exits 1 on any difference.
"""

from __future__ import annotations

import argparse
import datetime as dt
import math
import shutil
import sys
import tempfile
from pathlib import Path

ROOT = Path(__file__).resolve().parent.parent
sys.path.insert(0, str(ROOT))

TABLES = ("audit_medians", "network_reference", "dose_alerts", "drift_flags", "data_alerts",
          "skin_dose", "skin_dose_map", "monthly_medians", "audit_distribution", "study_estimate", "audit_finding",
          "audit_period")
VOLATILE = {"recorded_at", "audited_at",   # wall-clock time of the run
            "inputs_fingerprint"}         # added by issue 14 (no value to compare before it)


def steps(con) -> list[tuple[str, dt.date, dt.date]]:
    """(name, first day, last day): each calendar month with data, the whole span, month 1 again."""
    lo, hi = con.execute("select min(study_date), max(study_date) from raw_dose_object").fetchone()
    months = []
    day = dt.date(lo.year, lo.month, 1)
    while day <= hi:
        nxt = dt.date(day.year + (day.month == 12), day.month % 12 + 1, 1)
        months.append((f"m{day:%Y-%m}", day, nxt - dt.timedelta(days=1)))
        day = nxt
    return [*months, ("span", months[0][1], months[-1][2]), ("again", months[0][1], months[0][2])]


def table_frame(con, name: str):
    df = con.execute(f"select * from {name}").df()
    df = df.drop(columns=[c for c in df.columns if c in VOLATILE])
    return df.sort_values(list(df.columns), na_position="first", kind="stable",
                          key=lambda s: s.astype(str)).reset_index(drop=True)


def same(a, b) -> str | None:
    """None when equal, else what differs."""
    if list(a.columns) != list(b.columns):
        return f"columns {list(a.columns)} != {list(b.columns)}"
    if len(a) != len(b):
        return f"{len(a)} rows != {len(b)} rows"
    for col in a.columns:
        x, y = a[col].tolist(), b[col].tolist()
        for i, (u, v) in enumerate(zip(x, y)):
            if isinstance(u, float) and isinstance(v, float):
                if math.isnan(u) and math.isnan(v):
                    continue
                if u == v or math.isclose(u, v, rel_tol=1e-12, abs_tol=1e-300):
                    continue
            elif u is v or u == v or (str(u) == str(v) and str(u) in ("NaT", "nan", "None")):
                continue
            return f"column {col} row {i}: {u!r} != {v!r}"
    return None


def main() -> int:
    import duckdb
    import pandas as pd

    from pipeline.audit import run_audit

    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--warehouse", type=Path, required=True)
    parser.add_argument("--snapshot", type=Path, required=True)
    parser.add_argument("--compare", action="store_true")
    args = parser.parse_args()
    work = Path(tempfile.mkdtemp(prefix="kerma-identity-")) / "w.duckdb"
    shutil.copy(args.warehouse, work)
    failures = 0
    try:
        con = duckdb.connect(str(work), read_only=True)
        plan = steps(con)
        con.close()
        for name, first, last in plan:
            run_audit(work, date_from=first, date_to=last)
            con = duckdb.connect(str(work), read_only=True)
            folder = args.snapshot / name
            folder.mkdir(parents=True, exist_ok=True)
            for table in TABLES:
                df = table_frame(con, table)
                path = folder / f"{table}.parquet"
                if not args.compare:
                    df.to_parquet(path)
                    print(f"{name:<10} {table:<20} {len(df):>7} rows saved")
                    continue
                diff = same(pd.read_parquet(path), df)
                failures += diff is not None
                print(f"{name:<10} {table:<20} {len(df):>7} rows "
                      f"{'identical' if diff is None else 'DIFFERENT: ' + diff}")
            con.close()
    finally:
        shutil.rmtree(work.parent, ignore_errors=True)
    if args.compare:
        print("all identical" if not failures else f"{failures} table(s) differ")
    return 1 if failures else 0


if __name__ == "__main__":
    sys.exit(main())
