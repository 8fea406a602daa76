"""A real ingest process for the reliability tests: ``python -m tests.reliability.ingest_child``.

Like ``kerma ingest`` (same function, same exit code 2 and one-line message for a
WarehouseError) but with a small batch size, and it prints ``batch N`` after each committed
batch, so a test can SIGKILL it at a known point. With ``--hold FILE`` it waits after the
first batch (holding the warehouse open) until FILE exists.
"""

from __future__ import annotations

import argparse
import sys
import time
from pathlib import Path

from pipeline.errors import WarehouseError
from pipeline.ingest import ingest
from tests.helpers import KEY


def main() -> int:
    parser = argparse.ArgumentParser()
    parser.add_argument("inbox", type=Path)
    parser.add_argument("--warehouse", type=Path, required=True)
    parser.add_argument("--batch-size", type=int, default=8)
    parser.add_argument("--workers", type=int, default=2)
    parser.add_argument("--hold", type=Path)
    args = parser.parse_args()
    batches = 0

    def progress(n: int) -> None:
        nonlocal batches
        batches += 1
        print(f"batch {batches} {n}", flush=True)
        while args.hold is not None and batches == 1 and not args.hold.exists():
            time.sleep(0.05)

    try:
        summary = ingest([args.inbox], args.warehouse, KEY, workers=args.workers,
                         batch_size=args.batch_size, progress=progress)
    except WarehouseError as exc:
        print(f"error: {exc}", flush=True)
        return 2
    print(f"done {summary.seen} {summary.unchanged}", flush=True)
    return 0


if __name__ == "__main__":
    sys.exit(main())
