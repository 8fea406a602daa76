"""The audit's computations in their barest form, against the floor (on demand).

    .venv/bin/python bench/audit_bare.py --events 1000000 10000000

Issue 14 asks for ``run_audit`` within 20x the floor: a bare ``GROUP BY device median()`` over
the raw events (queries/bench/bench_bare_median.sql, as bench/audit.py times it). This bench asks
what the audit would cost if each of its tables were computed by nothing but the aggregate its
output needs: queries/bench/bench_bare_audit.sql holds one such statement per part (room
quartiles, the sorted values of the median's confidence interval, the standard-size median, the
distinct patients, the distribution's order statistics, the monthly medians, the outlier rule's
median and MAD, the drift test's ranks), over the period's audited values, with no join, no
reference level, no label. Each is run three times (the fastest kept), in the same process and
on the same warehouse as the floor (bench/audit.py's scaled warehouses, built there).

Prints one line per part (seconds, CPU seconds, x floor) and ends with one line per N:
``events N: bare parts/floor X (sum of the parts' best times), floor F s``.
A sum above 20 means no implementation of these outputs in DuckDB on this machine meets the
target, whatever the rest of the audit costs. It also times ``run_audit`` on the 1000-study base
warehouse (about 4 000 events), then ``write_site``: their cost with almost no data, set against
each floor.
"""

from __future__ import annotations

import argparse
import datetime as dt
import os
import re
import sys
import time
from pathlib import Path

ROOT = Path(__file__).resolve().parent.parent
sys.path.insert(0, str(ROOT))

DATE_FROM, DATE_TO = dt.date(2026, 9, 1), dt.date(2026, 11, 30)   # as bench/audit.py audits


def parts(text: str) -> list[tuple[str, str]]:
    """(name, statement) per ``-- part: <name>`` of bench_bare_audit.sql."""
    pieces = re.split(r"^-- part: (\w+)\n", text, flags=re.M)
    return [(name, body.strip().rstrip(";")) for name, body in zip(pieces[1::2], pieces[2::2])]


def best(con, statement: str, params: dict, runs: int = 3) -> tuple[float, float]:
    """Fastest wall time of `runs` runs, and the CPU time of that run."""
    out = (float("inf"), 0.0)
    for _ in range(runs):
        c0, w0 = os.times(), time.perf_counter()
        con.execute(statement, {k: v for k, v in params.items() if f"${k}" in statement})
        c1, wall = os.times(), time.perf_counter() - w0
        if wall < out[0]:
            out = (wall, c1.user + c1.system - c0.user - c0.system)
    return out


def one(n: int) -> dict:
    import duckdb

    sys.path.insert(0, str(ROOT / "bench"))
    from audit import floor as audit_floor, scaled_warehouse   # bench/audit.py's, built there
    from queries import sql

    db, n_rows = scaled_warehouse(n)
    cold = min(audit_floor(db) for _ in range(3))   # as bench/audit.py: a new connection each
    con = duckdb.connect(str(db), read_only=True)
    con.execute("set threads to 2")   # as the warehouse connection does
    floor, floor_cpu = best(con, sql("bench_bare_median"), {})   # warm, like the parts
    params = {"date_from": DATE_FROM, "date_to": DATE_TO}
    (n_obs,) = con.execute("select count(*) from derived_audit_observation "
                           "where study_date >= $date_from and study_date < $date_to",
                           params).fetchone()
    print(f"\n== {n_rows:,} raw events, {n_obs:,} audited values in the period ({db.name})")
    print(f"   floor (bare GROUP BY device median())   {floor:7.3f} s  {floor_cpu:7.2f} CPU-s  "
          f"(warm; {cold:.3f} s with a new connection each run, as bench/audit.py times it)")
    total = 0.0
    (_, setup), *timed = parts(sql("bench_bare_audit"))
    con.execute(setup, {k: v for k, v in params.items() if f"${k}" in setup})
    for name, statement in timed:
        wall, cpu = best(con, statement, params)
        total += wall
        print(f"   {name:<38}{wall:7.3f} s  {cpu:7.2f} CPU-s  {wall / floor:6.1f}x floor")
    con.close()
    return {"n": n, "floor_s": floor, "cold_s": cold, "parts_s": total}


def fixed_cost(runs: int = 3) -> tuple[float, float]:
    """Fastest of `runs` whole ``run_audit`` runs, then of `runs` ``write_site`` runs, on a copy
    of bench/audit.py's base warehouse (the 1000-study corpus, about 4 000 events): what the
    audit and the dashboards cost with almost no data."""
    import shutil
    import tempfile

    sys.path.insert(0, str(ROOT / "bench"))
    from audit import audit, base_warehouse, site

    with tempfile.TemporaryDirectory() as tmp:
        work = Path(tmp) / "base.duckdb"
        shutil.copy(base_warehouse(), work)
        audit_s = min(audit(work) for _ in range(runs))
        site_s = min(site(work, Path(tmp) / "site")[0] for _ in range(runs))
    return audit_s, site_s


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--events", type=int, nargs="+", default=[1_000_000])
    args = parser.parse_args()
    import pandas, plotly, pyarrow  # noqa: F401,E401  (as in bench/audit.py's process)

    results = [one(n) for n in args.events]
    fixed, fixed_site = fixed_cost()
    print(f"\n   the 1000-study base warehouse (fastest of 3): run_audit {fixed:.2f} s, "
          f"write_site {fixed_site:.2f} s")
    print()
    for r in results:
        print(f"events {r['n']}: bare parts/floor {r['parts_s'] / r['floor_s']:.1f} "
              f"(warm floor {r['floor_s']:.3f} s), {r['parts_s'] / r['cold_s']:.1f} "
              f"(bench/audit.py's floor {r['cold_s']:.3f} s); sum of the parts' best times "
              f"{r['parts_s']:.2f} s; with almost no data, the audit {fixed / r['cold_s']:.1f}x "
              f"and the site {fixed_site / r['cold_s']:.1f}x the floor")


if __name__ == "__main__":
    main()
