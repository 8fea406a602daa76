"""Ingest speed against a floor measured in the same run (run on demand; never a test).

    .venv/bin/python bench/ingest.py --studies 2000
    .venv/bin/python bench/ingest.py --studies 1000 4000      # is memory flat in N?

For each N: generate (or reuse, keyed by N, seed and months) a synthetic corpus with
``synthetic_studies.write.write_corpus``, then time in separate child processes, so that each
phase's peak memory is its own:

(a) floor: ``pydicom.dcmread`` of every file plus a full decode of every element value,
    recursing into sequences, in one process (the least any pydicom-based reader can do);
(b) ``pipeline.ingest.ingest`` into a fresh warehouse, workers=1;
(c) the same with workers=2.

Prints files/s, the ratios b/a and c/a against the targets (b/a <= 1.0, c/a <= 0.6, issue 14) and peak
resident memory: of the phase's main process and of its largest worker process
(``getrusage`` RUSAGE_SELF / RUSAGE_CHILDREN, ru_maxrss). Ends with one line (issue 14), for the
largest N, whose peak RSS is the larger ingest phase's main process plus its workers (each
counted at the largest worker's peak):

    ingest 1 worker/floor X, 2 workers/floor Y, peak RSS Z MiB
"""

from __future__ import annotations

import argparse
import io
import json
import os
import resource
import shutil
import subprocess
import sys
import time
from pathlib import Path

ROOT = Path(__file__).resolve().parent.parent
CACHE = ROOT / "bench" / ".cache"
KEY = b"bench-key-0123456789abcdef"
TARGET_B, TARGET_C = 1.0, 0.6   # issue 14


def corpus_for(n: int, seed: int, months: int, workers: int) -> tuple[Path, float | None]:
    """The cached corpus for (n, seed, months); generated if missing. Returns (dir, studies/s)."""
    from synthetic_studies.write import write_corpus

    out = CACHE / f"corpus-n{n}-s{seed}-m{months}"
    stamp = out / ".complete"
    if stamp.exists():
        return out, None
    if out.exists():
        shutil.rmtree(out)
    started = time.perf_counter()
    write_corpus(out, seed=seed, months=months, n_studies=n, workers=workers)
    rate = n / (time.perf_counter() - started)
    stamp.write_text(json.dumps({"n": n, "seed": seed, "months": months}))
    return out, rate


def input_files(corpus: Path) -> list[Path]:
    return sorted(p for p in corpus.rglob("*") if p.is_file() and not p.name.startswith("."))


def _decode_all(ds) -> int:
    """Touch every element's value (pydicom converts raw bytes on access); recurse into SQ."""
    n = 0
    for elem in ds:  # iteration converts each RawDataElement to a DataElement
        value = elem.value
        n += 1
        if elem.VR == "SQ":
            for item in value:
                n += _decode_all(item)
    return n


def phase_floor(corpus: Path) -> dict:
    import pydicom

    n_files = n_elements = n_unreadable = 0
    started = time.perf_counter()
    for path in input_files(corpus):
        data = path.read_bytes()
        n_files += 1
        try:
            ds = pydicom.dcmread(io.BytesIO(data), stop_before_pixels=True)
            n_elements += _decode_all(ds)
        except Exception:  # noqa: BLE001 - the corpus holds deliberately broken files
            n_unreadable += 1
    return {"seconds": time.perf_counter() - started, "files": n_files,
            "elements": n_elements, "unreadable": n_unreadable}


def phase_ingest(corpus: Path, workers: int, scratch: Path) -> dict:
    from pipeline.ingest import ingest

    db = scratch / f"bench-w{workers}.duckdb"
    for p in (db, db.with_name(db.name + ".wal")):
        p.unlink(missing_ok=True)
    started = time.perf_counter()
    summary = ingest([corpus], db, KEY, workers=workers)
    seconds = time.perf_counter() - started
    db.unlink(missing_ok=True)
    return {"seconds": seconds, "files": summary.seen, "loaded": summary.loaded,
            "warehouse_bytes": None}


def _child(args) -> None:
    """Run one phase in this (child) process and print its result as JSON."""
    corpus = Path(args.corpus)
    if args.phase == "floor":
        result = phase_floor(corpus)
    else:
        result = phase_ingest(corpus, int(args.phase[-1]), Path(args.scratch))
    self_kib = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss
    child_kib = resource.getrusage(resource.RUSAGE_CHILDREN).ru_maxrss
    result.update(peak_rss_mib=self_kib / 1024, peak_worker_rss_mib=child_kib / 1024)
    print(json.dumps(result))


def run_phase(phase: str, corpus: Path, scratch: Path) -> dict:
    cmd = [sys.executable, __file__, "--phase", phase, "--corpus", str(corpus),
           "--scratch", str(scratch)]
    out = subprocess.run(cmd, check=True, capture_output=True, text=True, cwd=ROOT,
                         env={**os.environ, "PYTHONPATH": str(ROOT)}).stdout
    return json.loads(out.strip().splitlines()[-1])


def bench(n: int, seed: int, months: int, gen_workers: int, repeat: int) -> dict:
    corpus, gen_rate = corpus_for(n, seed, months, gen_workers)
    scratch = CACHE / "scratch"
    scratch.mkdir(parents=True, exist_ok=True)
    results = {}
    for phase in ("floor", "ingest1", "ingest2"):
        runs = [run_phase(phase, corpus, scratch) for _ in range(repeat)]
        best = min(runs, key=lambda r: r["seconds"])
        best["peak_rss_mib"] = max(r["peak_rss_mib"] for r in runs)
        best["peak_worker_rss_mib"] = max(r["peak_worker_rss_mib"] for r in runs)
        results[phase] = best
    a, b, c = (results[p]["seconds"] for p in ("floor", "ingest1", "ingest2"))
    files = results["floor"]["files"]
    print(f"\n== {n} studies, {files} files (seed {seed}, {months} months; corpus {corpus})")
    if gen_rate is not None:
        print(f"   corpus generated at {gen_rate:.1f} studies/s with {gen_workers} worker(s)")
    print(f"   {'phase':<28}{'s':>8}{'files/s':>10}{'peak RSS MiB':>14}{'worker MiB':>12}")
    names = {"floor": "(a) floor: dcmread + decode", "ingest1": "(b) ingest, 1 worker",
             "ingest2": "(c) ingest, 2 workers"}
    for phase, r in results.items():
        print(f"   {names[phase]:<28}{r['seconds']:>8.2f}{files / r['seconds']:>10.0f}"
              f"{r['peak_rss_mib']:>14.0f}{r['peak_worker_rss_mib']:>12.0f}")
    print(f"   b/a = {b / a:.2f} (target <= {TARGET_B})  {'ok' if b / a <= TARGET_B else 'MISSED'}")
    print(f"   c/a = {c / a:.2f} (target <= {TARGET_C})  {'ok' if c / a <= TARGET_C else 'MISSED'}")
    return {"n": n, "files": files, "gen_rate": gen_rate, **results,
            "b_over_a": b / a, "c_over_a": c / a}


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--studies", type=int, nargs="+", default=[2000])
    parser.add_argument("--seed", type=int, default=7)
    parser.add_argument("--months", type=int, default=3)
    parser.add_argument("--gen-workers", type=int, default=2)
    parser.add_argument("--repeat", type=int, default=1, help="runs per phase (best time kept)")
    parser.add_argument("--json", type=Path, help="also write the results here")
    parser.add_argument("--phase", help=argparse.SUPPRESS)
    parser.add_argument("--corpus", help=argparse.SUPPRESS)
    parser.add_argument("--scratch", help=argparse.SUPPRESS)
    args = parser.parse_args()
    if args.phase:
        _child(args)
        return
    out = [bench(n, args.seed, args.months, args.gen_workers, args.repeat) for n in args.studies]
    if len(out) > 1:
        lo, hi = out[0], out[-1]
        for phase in ("floor", "ingest1", "ingest2"):
            print(f"peak RSS {phase}: {lo[phase]['peak_rss_mib']:.0f} MiB at {lo['n']} studies -> "
                  f"{hi[phase]['peak_rss_mib']:.0f} MiB at {hi['n']} "
                  f"(x{hi[phase]['peak_rss_mib'] / lo[phase]['peak_rss_mib']:.2f} for "
                  f"x{hi['n'] / lo['n']:.0f} studies)")
    last = out[-1]
    peak = max(last["ingest1"]["peak_rss_mib"],
               last["ingest2"]["peak_rss_mib"] + 2 * last["ingest2"]["peak_worker_rss_mib"])
    print(f"ingest 1 worker/floor {last['b_over_a']:.2f}, 2 workers/floor {last['c_over_a']:.2f}, "
          f"peak RSS {peak:.0f} MiB")
    if args.json:
        args.json.write_text(json.dumps(out, indent=2, default=str))


if __name__ == "__main__":
    main()
