"""Corpus generation speed, and a digest to prove the output did not change (on demand).

    .venv/bin/python bench/generate.py --studies 300 --workers 1 --digest

Prints studies/s and files/s, and the CPU seconds this process and its worker processes
used (on a machine shared with other jobs the wall time varies, the CPU time much less);
with --repeat N, N runs and the best; with --digest, one SHA-256 over every file's relative
path and SHA-256 (manifests included), to compare byte for byte across versions of the
generator. --workers is the most processes used, this one included: write_corpus starts a
helper only when the studies left outweigh its start (see synthetic_studies.write._run_jobs),
so a few hundred studies are written by this process alone.
"""

from __future__ import annotations

import argparse
import hashlib
import resource
import shutil
import tempfile
import time
from pathlib import Path


def corpus_digest(root: Path) -> str:
    h = hashlib.sha256()
    for p in sorted(root.rglob("*")):
        if p.is_file():
            h.update(str(p.relative_to(root)).encode() + b"\0")
            h.update(hashlib.sha256(p.read_bytes()).digest())
    return h.hexdigest()


def main() -> None:
    from synthetic_studies.write import write_corpus

    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--studies", type=int, default=1000)
    parser.add_argument("--seed", type=int, default=7)
    parser.add_argument("--months", type=int, default=3)
    parser.add_argument("--workers", type=int, default=2)
    parser.add_argument("--digest", action="store_true")
    parser.add_argument("--keep", type=Path, help="write here instead of a temporary folder")
    parser.add_argument("--repeat", type=int, default=1, help="runs (the best is reported)")
    args = parser.parse_args()
    best = 0.0
    for _ in range(args.repeat):
        out = args.keep or Path(tempfile.mkdtemp(prefix="kerma-gen-"))
        try:
            cpu_before = _cpu_seconds()
            started = time.perf_counter()
            summary = write_corpus(out, seed=args.seed, months=args.months,
                                   n_studies=args.studies, workers=args.workers)
            seconds = time.perf_counter() - started
            cpu = _cpu_seconds() - cpu_before
            best = max(best, args.studies / seconds)
            print(f"{args.studies} studies, {summary.n_files} files, "
                  f"{summary.size_bytes / 1e6:.1f} MB in {seconds:.1f} s with {args.workers} "
                  f"worker(s): {args.studies / seconds:.1f} studies/s, "
                  f"{summary.n_files / seconds:.0f} files/s; CPU {cpu:.2f} s "
                  f"({args.studies / cpu:.0f} studies per CPU second)")
            if args.digest:
                print(f"digest {corpus_digest(out)}")
        finally:
            if args.keep is None:
                shutil.rmtree(out)
    if args.repeat > 1:
        print(f"best of {args.repeat}: {best:.1f} studies/s with {args.workers} worker(s)")


def _cpu_seconds() -> float:
    """User + system CPU seconds of this process and of its finished child processes."""
    own, children = (resource.getrusage(who) for who in (resource.RUSAGE_SELF,
                                                          resource.RUSAGE_CHILDREN))
    return own.ru_utime + own.ru_stime + children.ru_utime + children.ru_stime


if __name__ == "__main__":
    main()
