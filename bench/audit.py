"""Audit (and dashboard) speed against a bare DuckDB median in the same run (on demand).

    .venv/bin/python bench/audit.py --events 1000000
    .venv/bin/python bench/audit.py --events 1000000 10000000

A small real warehouse is made once (a 1000-study synthetic corpus through ``kerma ingest``),
then scaled up inside DuckDB to N irradiation events: every study, report, event and stated
total is copied with keys made unique per copy and doses jittered by a per-copy factor
(queries/bench/bench_replicate_*.sql), so the rows keep the demo network's mix of exams,
devices and defects. The copies are spread over copies of each room (at most 2 copies of a
room's studies per room copy), a network of many rooms: per-room groups keep the size of the
demo's (a few hundred studies). Then, on that warehouse:

The derived tables an ingest run keeps for the studies it touched (pipeline/warehouse/derived.py)
are then refreshed once, whole, and timed apart: the ingests of those rows would have done it.

(a) floor: ``queries/bench/bench_bare_median.sql``, a bare GROUP BY device median() over the
    raw event rows;
(b) ``pipeline.audit.run_audit`` over the whole period;
(c) ``dashboards.site.write_site``, if the dashboards exist in this checkout (else a note).

Each N runs in its own child process, so its peak resident memory (ru_maxrss) is its own.
Prints seconds, the ratios b/a and c/a (target <= 20, issue 14) and the page sizes, and ends
with one line per N:

    events N: audit/floor X, dashboards/floor Y, peak RSS Z MiB, largest page P KiB
"""

from __future__ import annotations

import argparse
import datetime as dt
import json
import math
import os
import resource
import shutil
import subprocess
import sys
import time
from pathlib import Path

ROOT = Path(__file__).resolve().parent.parent
sys.path.insert(0, str(ROOT))
CACHE = ROOT / "bench" / ".cache"
KEY = b"bench-key-0123456789abcdef"
TARGET = 20.0   # issue 14: run_audit and write_site <= 20x the bare median
TABLES = ("device", "study", "dose_object", "source_object", "ct_event", "projection_event",
          "accumulated")
COPIES_PER_ROOM = 2  # each room copy gets at most this many copies of its studies


def base_corpus() -> Path:
    """A real 1000-study synthetic corpus, seed 7, 3 months (cached; bench/ingest_scale.py too)."""
    from synthetic_studies.write import write_corpus

    corpus = CACHE / "corpus-n1000-s7-m3"
    if not (corpus / ".complete").exists():
        shutil.rmtree(corpus, ignore_errors=True)
        write_corpus(corpus, seed=7, months=3, n_studies=1000, workers=2)
        (corpus / ".complete").write_text("{}")
    return corpus


def base_warehouse() -> Path:
    """A warehouse of the 1000-study corpus (cached)."""
    from pipeline.ingest import ingest

    db = CACHE / "audit-base.duckdb"
    if db.exists():
        return db
    corpus = base_corpus()
    ingest([corpus], CACHE / "audit-base.tmp.duckdb", KEY, workers=2)
    (CACHE / "audit-base.tmp.duckdb").rename(db)
    return db


def scaled_warehouse(n_events: int) -> tuple[Path, int]:
    import duckdb

    from queries import sql

    db = CACHE / f"audit-{n_events}.duckdb"
    if not db.exists():
        base = base_warehouse()
        con = duckdb.connect(str(base), read_only=True)
        (n_base,) = con.execute(sql("bench_count_raw_events")).fetchone()
        con.close()
        copies = max(1, math.ceil(n_events / n_base))
        rooms = max(1, math.ceil(copies / COPIES_PER_ROOM))
        tmp = db.with_suffix(".tmp")
        shutil.copy(base, tmp)
        con = duckdb.connect(str(tmp))
        started = time.perf_counter()
        for table in TABLES:
            text = sql(f"bench_replicate_{table}")
            params = {k: v for k, v in (("copies", copies), ("rooms", rooms)) if f"${k}" in text}
            con.execute(text, params)
        con.execute("checkpoint")
        con.close()
        tmp.rename(db)
        print(f"   built {db.name}: {copies} copies of {n_base} events over {rooms} copies of "
              f"each room in "
              f"{time.perf_counter() - started:.1f} s")
    con = duckdb.connect(str(db), read_only=True)
    (n,) = con.execute(sql("bench_count_raw_events")).fetchone()
    con.close()
    return db, n


def refresh(db: Path) -> float:
    """Bring the derived tables of a scaled warehouse up to date, as the ingest runs that loaded
    its rows would have (pipeline/warehouse/derived.py: here whole, the rows having been copied
    in SQL); seconds, 0 when they already were."""
    from pipeline.warehouse.connection import connection
    from pipeline.warehouse.derived import refresh_derived
    from pipeline.warehouse.load import ensure_schema

    with connection(db) as con:
        ensure_schema(con)
        result = refresh_derived(con)
    return result.seconds if result.mode != "none" else 0.0


def floor(db: Path) -> float:
    import duckdb

    from queries import sql

    con = duckdb.connect(str(db), read_only=True)
    con.execute("set threads to 2")  # as the warehouse connection does
    started = time.perf_counter()
    rows = con.execute(sql("bench_bare_median")).fetchall()
    seconds = time.perf_counter() - started
    con.close()
    assert rows
    return seconds


def audit(db: Path) -> float:
    from pipeline.audit import run_audit

    started = time.perf_counter()
    run_audit(db, date_from=dt.date(2026, 9, 1), date_to=dt.date(2026, 11, 30))
    return time.perf_counter() - started


def site(db: Path, out: Path) -> tuple[float, dict[str, int]] | None:
    try:
        from dashboards.site import write_site
    except ImportError as exc:
        print(f"   (dashboards not timed: dashboards.site.write_site is not available: {exc})")
        return None
    shutil.rmtree(out, ignore_errors=True)
    started = time.perf_counter()
    write_site(db, out)
    seconds = time.perf_counter() - started
    sizes = {str(p.relative_to(out)): p.stat().st_size for p in sorted(out.rglob("*"))
             if p.is_file()}
    return seconds, sizes


def one(n: int, dashboards: bool) -> dict:
    """Build (or reuse) the warehouse of about `n` events, time the floor, the audit and the site."""
    db, n_rows = scaled_warehouse(n)
    kept = refresh(db)
    if kept:
        print(f"   derived tables (deduplicated events, study totals, exam texts, skin dose) "
              f"refreshed whole in {kept:.1f} s: what the ingest runs of these rows do, once")
    work = CACHE / f"audit-{n}-run-{os.getpid()}.duckdb"
    shutil.copy(db, work)  # the audit writes its tables; keep the scaled warehouse clean
    a = min(floor(work) for _ in range(3))
    b = audit(work)
    print(f"\n== {n_rows:,} raw events ({db.name}, {db.stat().st_size / 2**20:.0f} MiB)")
    print(f"   (a) bare GROUP BY median()   {a:8.2f} s")
    print(f"   (b) run_audit, whole period  {b:8.2f} s   b/a = {b / a:.1f} "
          f"(target <= {TARGET:g})  {'ok' if b / a <= TARGET else 'MISSED'}")
    out = {"n": n, "rows": n_rows, "floor_s": a, "audit_s": b, "site_s": None, "largest_kib": None}
    if dashboards:
        result = site(work, CACHE / f"site-{n}-{os.getpid()}")
        if result is not None:
            seconds, sizes = result
            print(f"   (c) write_site               {seconds:8.2f} s   c/a = {seconds / a:.1f} "
                  f"(target <= {TARGET:g})  {'ok' if seconds / a <= TARGET else 'MISSED'}")
            for name, size in sizes.items():
                print(f"       {name:<40}{size / 1024:10.0f} KiB")
            pages = {k: v for k, v in sizes.items() if k.endswith(".html")}
            out.update(site_s=seconds, largest_kib=max(pages.values()) / 1024 if pages else None)
            shutil.rmtree(CACHE / f"site-{n}-{os.getpid()}", ignore_errors=True)
    for p in (work, work.with_name(work.name + ".wal")):
        p.unlink(missing_ok=True)
    shutil.rmtree(work.with_name(work.name + ".tmp"), ignore_errors=True)  # DuckDB spill folder
    out["peak_rss_mib"] = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024
    return out


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--events", type=int, nargs="+", default=[1_000_000])
    parser.add_argument("--no-dashboards", action="store_true")
    parser.add_argument("--one", type=int, help=argparse.SUPPRESS)
    parser.add_argument("--prepare", type=int, help=argparse.SUPPRESS)
    args = parser.parse_args()
    CACHE.mkdir(parents=True, exist_ok=True)
    if args.prepare:
        # building the rows and refreshing the derived tables is ingest work: its own process, so
        # the peak RSS reported below is the audit's and the dashboards'
        db, _ = scaled_warehouse(args.prepare)
        kept = refresh(db)
        if kept:
            print(f"   derived tables (deduplicated events, study totals, exam texts, skin dose) "
                  f"refreshed whole in {kept:.1f} s: what the ingest runs of these rows do, once")
        return
    if args.one:
        print("RESULT " + json.dumps(one(args.one, not args.no_dashboards)))
        return
    results = []
    for n in args.events:
        prep = subprocess.run([sys.executable, __file__, "--prepare", str(n)], capture_output=True,
                              text=True, cwd=ROOT, env={**os.environ, "PYTHONPATH": str(ROOT)})
        print(prep.stdout, end="", flush=True)
        if prep.returncode:
            sys.exit(f"events {n}: building the warehouse failed:\n{prep.stderr}")
        cmd = [sys.executable, __file__, "--one", str(n)] + (["--no-dashboards"] if args.no_dashboards else [])
        proc = subprocess.run(cmd, capture_output=True, text=True, cwd=ROOT,
                              env={**os.environ, "PYTHONPATH": str(ROOT)})
        if proc.returncode:
            sys.exit(f"events {n}: the run failed:\n{proc.stdout}\n{proc.stderr}")
        lines = proc.stdout.splitlines()
        print("\n".join(l for l in lines if not l.startswith("RESULT ")), flush=True)
        results += [json.loads(l[len("RESULT "):]) for l in lines if l.startswith("RESULT ")]
    print()
    for r in results:
        dash = f"{r['site_s'] / r['floor_s']:.1f}" if r["site_s"] is not None else "n/a"
        page = f"{r['largest_kib']:.0f}" if r["largest_kib"] is not None else "n/a"
        print(f"events {r['n']}: audit/floor {r['audit_s'] / r['floor_s']:.1f}, dashboards/floor "
              f"{dash}, peak RSS {r['peak_rss_mib']:.0f} MiB, largest page {page} KiB")


if __name__ == "__main__":
    main()
