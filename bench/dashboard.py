"""Benchmark of the static dashboards: page weight and load time (run on demand, never in tests).

    .venv/bin/python bench/dashboard.py --warehouse kerma-demo/kerma.duckdb
    .venv/bin/python bench/dashboard.py --corpus-studies 300000 --work /tmp/kerma-bench   # ~1M events
    .venv/bin/python bench/dashboard.py --warehouse bench/.cache/audit-1000000.duckdb --no-browser

With --warehouse, an audited warehouse is used as it is (a copy is audited first when it has
no audit tables, or with --audit FROM TO). With --corpus-studies N, a synthetic corpus of N
studies is generated, ingested and audited first (the real pipeline; slow for large N; about
3 irradiation events per study in the demo scenario). The site is written, then every page is
opened in headless Chromium with the network off; the report gives, per page, the HTML weight,
the weight with the shared plotly.min.js, the number of plots, the time to the load event and
the time until every plot has drawn. The floor of issue 14 (queries/bench/bench_bare_median.sql,
a bare GROUP BY device median() over the raw events, best of 3) is timed on the same warehouse
just before write_site, and the process's peak resident memory is printed after it; with
--no-browser the pages are not opened (only their sizes are printed).
"""

from __future__ import annotations

import argparse
import datetime as dt
import resource
import shutil
import sys
import tempfile
import time
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]
sys.path.insert(0, str(ROOT))

from dashboards.pages import PAGES  # noqa: E402
from dashboards.site import write_site  # noqa: E402
from tests.dashboards.browser import Chromium  # noqa: E402

DEMO_FROM, DEMO_TO = dt.date(2026, 9, 1), dt.date(2026, 11, 30)


def _count_events(warehouse: Path) -> int:
    from queries import sql
    from pipeline.warehouse.connection import connection

    with connection(warehouse, read_only=True) as con:
        return int(con.execute(sql("bench_count_events")).fetchone()[0])


def _floor_s(warehouse: Path) -> float:
    """Seconds of the bare GROUP BY device median() over the raw events (best of 3)."""
    import duckdb

    from queries import sql

    con = duckdb.connect(str(warehouse), read_only=True)
    try:
        con.execute("set threads to 2")  # as the warehouse connection does
        times = []
        for _ in range(3):
            started = time.perf_counter()
            con.execute(sql("bench_bare_median")).fetchall()
            times.append(time.perf_counter() - started)
    finally:
        con.close()
    return min(times)


def _is_audited(warehouse: Path) -> bool:
    from queries import sql
    from pipeline.warehouse.connection import connection

    with connection(warehouse, read_only=True) as con:
        names = {r[0] for r in con.execute(sql("dash_relations")).fetchall()}
    return "audit_medians" in names


def _make_warehouse(studies: int, work: Path, workers: int) -> Path:
    from pipeline.ingest import ingest
    from synthetic_studies.write import write_corpus

    corpus, db = work / "corpus", work / "kerma.duckdb"
    started = time.perf_counter()
    write_corpus(corpus, seed=7, months=3, n_studies=studies, workers=workers)
    print(f"corpus of {studies} studies written in {time.perf_counter() - started:.0f} s")
    started = time.perf_counter()
    ingest([corpus], db, b"bench-key-0123456789abcdef", workers=workers)
    print(f"ingested in {time.perf_counter() - started:.0f} s")
    return db


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    source = parser.add_mutually_exclusive_group(required=True)
    source.add_argument("--warehouse", type=Path, help="an (audited) DuckDB warehouse")
    source.add_argument("--corpus-studies", type=int, help="generate, ingest and audit N studies first")
    parser.add_argument("--audit", nargs=2, metavar=("FROM", "TO"),
                        help="audit a copy for these days first (default: the demo's three months "
                             "when the warehouse has no audit yet)")
    parser.add_argument("--work", type=Path, help="working folder (default: a temporary one)")
    parser.add_argument("--workers", type=int, default=2)
    parser.add_argument("--no-browser", action="store_true", help="only write the site and print sizes")
    args = parser.parse_args(argv)

    from pipeline.audit import run_audit

    work = args.work or Path(tempfile.mkdtemp(prefix="kerma-bench-"))
    work.mkdir(parents=True, exist_ok=True)
    if args.corpus_studies:
        warehouse = _make_warehouse(args.corpus_studies, work, args.workers)
        audit = (DEMO_FROM, DEMO_TO)
    else:
        warehouse = work / "kerma.duckdb"
        shutil.copyfile(args.warehouse, warehouse)
        audit = ((dt.date.fromisoformat(args.audit[0]), dt.date.fromisoformat(args.audit[1]))
                 if args.audit else None if _is_audited(warehouse) else (DEMO_FROM, DEMO_TO))
    if audit:
        started = time.perf_counter()
        run_audit(warehouse, date_from=audit[0], date_to=audit[1])
        print(f"audit {audit[0]}..{audit[1]} in {time.perf_counter() - started:.1f} s")

    n_events = _count_events(warehouse)
    floor_s = _floor_s(warehouse)
    out = work / "site"
    started = time.perf_counter()
    write_site(warehouse, out, generated_at=dt.datetime(2000, 1, 1, tzinfo=dt.UTC))
    write_s = time.perf_counter() - started
    peak_mib = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024
    js = (out / "plotly.min.js").stat().st_size
    csv = sum(p.stat().st_size for p in out.glob("*.csv"))
    print(f"\nwarehouse {args.warehouse or warehouse}: {n_events:,} irradiation events")
    print(f"floor (bare GROUP BY median): {floor_s:.3f} s; write_site: {write_s:.1f} s "
          f"= {write_s / floor_s:.0f} x the floor (target <= 20); peak RSS {peak_mib:.0f} MiB")
    print(f"plotly.min.js {js / 1e6:.2f} MB (shared, loaded once per page); CSV files {csv / 1e3:.0f} kB")
    if args.no_browser:
        for name, _, _ in PAGES:
            print(f"{name:<24}{(out / name).stat().st_size / 2**20:>8.3f} MiB")
        print(f"\nsite in {out}")
        return 0
    print(f"\n{'page':<24}{'HTML kB':>9}{'+ JS MB':>9}{'plots':>7}{'load ms':>9}{'drawn ms':>10}  issues")
    with Chromium() as browser:
        for name, _, _ in PAGES:
            report = browser.open(out / name)
            html = (out / name).stat().st_size
            total = html + (js if report.plots else 0)
            problems = len(report.console_errors) + len(report.exceptions) + len(report.external_requests)
            undrawn = sum(1 for p in report.plots if not p["traces"])
            print(f"{name:<24}{html / 1e3:>9.0f}{total / 1e6:>9.2f}{len(report.plots):>7}"
                  f"{report.load_ms:>9.0f}{report.render_ms:>10.0f}  "
                  f"{problems} errors, {undrawn} undrawn plots")
    print(f"\nsite in {out}")
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
