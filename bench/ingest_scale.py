"""Does ingest memory stay flat as the number of studies grows? (on demand; never a test)

    .venv/bin/python bench/ingest_scale.py --studies 100000

A real 1000-study synthetic corpus (bench/ingest.py's, seed 7) is replicated on disk to N
studies: copy k of each file has every DICOM UID (2.25 root) rewritten with the same length
(its first four digits shifted by k), so each copy is a new study with new reports, events and
devices, the files otherwise byte for byte the generator's (the pydicom decoding and parsing
work per file is the generator's too). That corpus is then ingested with 2 workers into a fresh
warehouse in a child process; the resident memory of that process and its workers (from /proc)
is sampled every 0.5 s (--sample-every) and printed as studies go in, so one run shows whether
memory grows with N. Ends with:

    ingest N studies: X files in T s (F files/s; CPU ingest C1 s, workers C2 s), peak RSS Z MiB,
    at 10 % R1 MiB, at 100 % R2 MiB

(the peak over the first 10 % of the run's time, and over all of it: flat memory means R1 close
to R2; issue 14's target is < 1 GiB at 100k studies)

With --duckdb-memory, each progress line is followed by what DuckDB itself holds in the ingest
process then (duckdb_memory() by tag, and pragma database_size) beside that process's own resident
memory, and each refresh of the derived tables by the ingest process's memory before, at its peak
during (VmHWM, reset before it) and after it, to tell what grows; with --statements too, each
statement the refresh runs by its CPU time and the process's resident memory at its peak during it
and after it (VmHWM reset before each). Each refresh and each checkpoint (block-cache release)
also shows the most DuckDB held during it, by tag (polled every 20 ms from a second cursor).
Before the summary, the warehouse file's size and its largest tables' rows and row groups.
"""

from __future__ import annotations

import argparse
import json
import os
import re
import shutil
import subprocess
import sys
import threading
import time
from pathlib import Path

ROOT = Path(__file__).resolve().parent.parent
sys.path.insert(0, str(ROOT))
CACHE = ROOT / "bench" / ".cache"
KEY = b"bench-key-0123456789abcdef"
BASE_STUDIES = 1000   # bench/audit.py's base corpus
_UID = re.compile(rb"2\.25\.(\d{4})(\d+)")


def shifted(data: bytes, k: int) -> bytes:
    """Every 2.25 UID with its first four digits shifted by k (mod 9000, kept in 1000-9999):
    the same length, a different UID for each k < 9000 (7919 is prime to 9000)."""
    if k == 0:
        return data
    return _UID.sub(lambda m: b"2.25." + str((int(m.group(1)) - 1000 + 7919 * k) % 9000 + 1000)
                    .encode() + m.group(2), data)


def replicated(n_studies: int) -> Path:
    copies = -(-n_studies // BASE_STUDIES)
    out = CACHE / f"corpus-scale-{copies}x1000"
    if (out / ".complete").exists():
        return out
    from audit import base_corpus   # bench/audit.py (this folder is first on sys.path)

    base = base_corpus()
    files = sorted(p for p in base.rglob("*") if p.is_file() and p.suffix != ".parquet"
                   and p.name != ".complete")
    shutil.rmtree(out, ignore_errors=True)
    started = time.perf_counter()
    for k in range(copies):
        for p in files:
            target = out / f"copy{k:03d}" / p.relative_to(base)
            target.parent.mkdir(parents=True, exist_ok=True)
            target.write_bytes(shifted(p.read_bytes(), k))
    (out / ".complete").write_text(json.dumps({"copies": copies}))
    print(f"   replicated {len(files)} files x {copies} in {time.perf_counter() - started:.0f} s",
          flush=True)
    return out


def _rss_mib(pid: int) -> tuple[float, float]:
    """Resident memory of `pid` and its descendants (MiB), and of `pid` alone, from /proc."""
    total, own, stack = 0, 0, [pid]
    while stack:
        p = stack.pop()
        try:
            with open(f"/proc/{p}/status") as f:
                kib = next(int(l.split()[1]) for l in f if l.startswith("VmRSS:"))
            total += kib
            own += kib if p == pid else 0
            with open(f"/proc/{p}/task/{p}/children") as f:
                stack += [int(c) for c in f.read().split()]
        except (OSError, StopIteration):
            continue
    return total / 1024, own / 1024


_DUCKDB_TAGS = ("BASE_TABLE", "ART_INDEX", "METADATA", "OVERFLOW_STRINGS", "HASH_TABLE",
                "COLUMN_DATA", "ORDER_BY", "IN_MEMORY_TABLE", "ALLOCATOR", "TRANSACTION")


def _own_mib(field: str = "VmRSS") -> float:
    """This process's resident memory (VmRSS) or its peak since the last reset (VmHWM), MiB."""
    with open("/proc/self/status") as f:
        return next(int(l.split()[1]) for l in f if l.startswith(field + ":")) / 1024


def _malloc_mib() -> str:
    """glibc malloc's bytes in use and free-but-kept (mallinfo2: DuckDB's own allocations outside
    its buffer manager, and Python's larger objects, live here), and pyarrow's pool, in MiB."""
    import ctypes

    import pyarrow as pa

    class MallInfo2(ctypes.Structure):
        _fields_ = [(name, ctypes.c_size_t) for name in (
            "arena", "ordblks", "smblks", "hblks", "hblkhd", "usmblks", "fsmblks", "uordblks",
            "fordblks", "keepcost")]

    try:
        mallinfo2 = ctypes.CDLL("libc.so.6").mallinfo2
    except (OSError, AttributeError):
        return "malloc n/a"
    mallinfo2.restype = MallInfo2
    m = mallinfo2()
    return (f"malloc in use {(m.uordblks + m.hblkhd) / 2**20:.0f} MiB, free kept "
            f"{m.fordblks / 2**20:.0f} MiB; pyarrow {pa.total_allocated_bytes() / 2**20:.0f} MiB")


def _mappings_mib() -> str:
    """This process's resident memory by kind of mapping (/proc/self/smaps): the C heap (brk),
    anonymous mappings (glibc's other arenas and large blocks, Python's object arenas, anything
    mmap-ed), and files (shared libraries, the database file if mapped)."""
    kinds = {"heap": 0, "anonymous": 0, "files": 0}
    kind = "anonymous"
    with open("/proc/self/smaps") as f:
        for line in f:
            first = line.split(maxsplit=6)
            if len(first) >= 5 and "-" in first[0] and ":" not in first[0]:   # a mapping's header
                name = first[5].strip() if len(first) > 5 else ""
                kind = "heap" if name == "[heap]" else "files" if name.startswith("/") \
                    else "anonymous"
            elif line.startswith("Rss:"):
                kinds[kind] += int(line.split()[1])
    return ", ".join(f"{k} {v / 1024:.0f}" for k, v in kinds.items()) + " MiB resident"


def _duckdb_memory(con) -> str:
    """One line: DuckDB's own memory by tag (MiB), its total, the database file's size, and the
    ingest process's resident memory."""
    tags = dict(con.execute("select tag, memory_usage_bytes from duckdb_memory()").fetchall())
    (size, used_blocks, block_size, wal), = con.execute(
        "select database_size, used_blocks, block_size, wal_size from pragma_database_size()"
    ).fetchall()
    parts = " ".join(f"{t.lower()} {tags.get(t, 0) / 2**20:.0f}" for t in _DUCKDB_TAGS)
    return (f"DUCKDB total {sum(tags.values()) / 2**20:.0f} MiB: {parts}; "
            f"file {used_blocks * block_size / 2**20:.0f} MiB used ({size}), wal {wal}; "
            f"ingest process RSS {_own_mib():.0f} MiB ({_mappings_mib()}); {_malloc_mib()}")


def _duckdb_total_mib(con) -> float:
    (total,), = con.execute("select sum(memory_usage_bytes) from duckdb_memory()").fetchall()
    return total / 2**20


class _Sampler:
    """DuckDB's memory by tag, polled every 20 ms from a second cursor of the ingest's connection
    while a step runs (a checkpoint, a refresh): the highest total seen and its tags, to tell the
    memory DuckDB accounts for from what it does not (its allocations outside the buffer
    manager, glibc's and jemalloc's kept pages)."""

    def __init__(self, con):
        self._cursor = con.cursor()
        self._stop = threading.Event()
        self._thread = None
        self.top: dict[str, float] = {}

    def __enter__(self):
        self._stop.clear()
        self.top = {}

        def poll():
            while not self._stop.wait(0.02):
                tags = {t: b / 2**20 for t, b in self._cursor.execute(
                    "select tag, memory_usage_bytes from duckdb_memory()").fetchall()}
                if sum(tags.values()) > sum(self.top.values()):
                    self.top = tags
        self._thread = threading.Thread(target=poll, daemon=True)
        self._thread.start()
        return self

    def __exit__(self, *exc):
        self._stop.set()
        self._thread.join()

    def __str__(self) -> str:
        parts = " ".join(f"{t.lower()} {v:.0f}" for t, v in sorted(self.top.items(),
                                                                  key=lambda kv: -kv[1]) if v >= 1)
        return f"DuckDB at most {sum(self.top.values()):.0f} MiB during it ({parts})"


class _Watched:
    """A connection whose `execute` prints each statement's CPU time and the process's resident
    memory at its peak during it and after it (the refresh's statements, one line each)."""

    def __init__(self, con, tag: str):
        self._con, self._tag = con, tag

    def __getattr__(self, name):
        return getattr(self._con, name)

    def execute(self, query, *args, **kwargs):
        with open("/proc/self/clear_refs", "w") as f:   # VmHWM := VmRSS (Linux)
            f.write("5")
        before, cpu = _own_mib(), time.process_time()
        result = self._con.execute(query, *args, **kwargs)
        first = next((l.strip() for l in str(query).splitlines()
                      if l.strip() and not l.lstrip().startswith("--")), "")
        print(f"DUCKDB   stmt {self._tag}: {time.process_time() - cpu:6.2f} s CPU, RSS "
              f"{before:.0f} -> peak {_own_mib('VmHWM'):.0f} -> {_own_mib():.0f} MiB: "
              f"{first[:90]}", flush=True)
        return result


def _storage(db: Path) -> str:
    """The warehouse file's size and the row groups of its largest tables (rows, row groups):
    how the ingest's checkpoints laid the tables out."""
    import duckdb

    with duckdb.connect(str(db), read_only=True) as con:
        (size,), = con.execute("select database_size from pragma_database_size()").fetchall()
        tables = [r[0] for r in con.execute(
            "select table_name from duckdb_tables() order by estimated_size desc limit 6").fetchall()]
        parts = []
        for table in tables:
            (rows, groups), = con.execute(
                f"select count(*), (select count(distinct row_group_id) "
                f"from pragma_storage_info('{table}')) from {table}").fetchall()
            parts.append(f"{table} {rows} rows in {groups} row groups")
    return f"warehouse file {size}; " + ", ".join(parts)


def child(corpus: Path, db: Path, duckdb_memory: bool = False, statements: bool = False,
          settings: list[str] = ()) -> None:
    import contextlib

    import pipeline.ingest as ingest_module
    from pipeline.ingest import ingest

    if settings:   # --duckdb-set: applied as the ingest opens its connection
        opened = ingest_module.connection

        @contextlib.contextmanager
        def connection(*args, **kwargs):
            with opened(*args, **kwargs) as con:
                for setting in settings:
                    name, value = setting.split("=", 1)
                    con.execute(f"set {name} = '{value}'")
                yield con

        ingest_module.connection = connection

    done = [0, 0]   # files so far, files at the last progress line
    if duckdb_memory:   # sampled in the ingest's own connection, right after a progress line
        load_chunk = ingest_module._load_chunk

        highest = {"_load_chunk": 0.0, "_dispatch_chunk": 0.0}

        def phase(name, step):
            """`step` with the process's peak memory during it: a line for each new highest."""
            def run(con, *args, **kwargs):
                with open("/proc/self/clear_refs", "w") as f:   # VmHWM := VmRSS (Linux)
                    f.write("5")
                before = _own_mib()
                result = step(con, *args, **kwargs)
                peak = _own_mib("VmHWM")
                if peak > highest[name]:
                    highest[name] = peak
                    print(f"DUCKDB   new highest in {name} at {done[0]} files: RSS {before:.0f} "
                          f"-> peak {peak:.0f} -> {_own_mib():.0f} MiB", flush=True)
                return result
            return run

        load_chunk = phase("_load_chunk", load_chunk)
        ingest_module._dispatch_chunk = phase("_dispatch_chunk", ingest_module._dispatch_chunk)

        def sampled(con, *args, **kwargs):
            before = done[1]
            load_chunk(con, *args, **kwargs)
            if done[1] != before:
                print(_duckdb_memory(con), flush=True)

        ingest_module._load_chunk = sampled
        refresh = ingest_module.refresh_derived

        sampler: list[_Sampler] = []   # made with the first refresh or release (its connection)

        def watched(con, *args, **kwargs):
            loading = _own_mib("VmHWM")   # the peak since the last refresh (or release)
            before, duckdb_before = _own_mib(), _duckdb_total_mib(con)
            with open("/proc/self/clear_refs", "w") as f:   # VmHWM := VmRSS (Linux)
                f.write("5")
            cpu = time.process_time()
            if not sampler:
                sampler.append(_Sampler(con))
            with sampler[0]:
                result = refresh(_Watched(con, str(done[0])) if statements else con, *args,
                                 **kwargs)
            print(f"DUCKDB refresh (CPU {time.process_time() - cpu:.1f} s) at {done[0]} files ({result!r}): ingest process RSS "
                  f"{before:.0f} MiB before, peak {_own_mib('VmHWM'):.0f} during, "
                  f"{_own_mib():.0f} after (peak while loading before it {loading:.0f}); "
                  f"DuckDB {duckdb_before:.0f} -> "
                  f"{_duckdb_total_mib(con):.0f} MiB ({sampler[0]}); {_malloc_mib()}; "
                  f"{_mappings_mib()}",
                  flush=True)
            return result

        ingest_module.refresh_derived = watched
        release = getattr(ingest_module, "_release_block_cache", None)

        def timed(con):
            started = time.perf_counter()
            with open("/proc/self/clear_refs", "w") as f:   # VmHWM := VmRSS (Linux)
                f.write("5")
            if not sampler:
                sampler.append(_Sampler(con))
            with sampler[0]:
                release(con)
            peak = _own_mib("VmHWM")
            with open("/proc/self/clear_refs", "w") as f:   # the loading that follows from here
                f.write("5")
            print(f"DUCKDB   block cache released in {time.perf_counter() - started:.2f} s "
                  f"(peak during it {peak:.0f} MiB; {sampler[0]}): "
                  f"{_duckdb_memory(con)[7:]}", flush=True)

        if release is not None:
            ingest_module._release_block_cache = timed

    def progress(n_files: int) -> None:
        done[0] += n_files
        if done[0] - done[1] >= 10_000:
            done[1] = done[0]
            print(f"FILES {done[0]}", flush=True)

    summary = ingest([corpus], db, KEY, workers=2, progress=progress)
    if duckdb_memory:
        print(f"DUCKDB peak since the last refresh began (it, the run's end, the connection's "
              f"close): {_own_mib('VmHWM'):.0f} MiB, now {_own_mib():.0f} MiB", flush=True)
    t = os.times()   # the workers have ended (the pool is shut down): their CPU is in children_*
    print("STORAGE " + _storage(db), flush=True)
    print("RESULT " + json.dumps({"seen": summary.seen, "loaded": summary.by_status["loaded"],
                                  "derived": repr(summary.derived),
                                  "cpu_s": {"ingest": round(t.user + t.system, 1),
                                            "workers": round(t.children_user + t.children_system,
                                                             1)}}), flush=True)


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--studies", type=int, default=100_000)
    parser.add_argument("--duckdb-memory", action="store_true",
                        help="print DuckDB's memory by tag and the file size at each progress line")
    parser.add_argument("--statements", action="store_true",
                        help="with --duckdb-memory: each statement of a refresh, its CPU time and "
                             "the process's memory during it")
    parser.add_argument("--sample-every", type=float, default=0.5, metavar="SECONDS",
                        help="how often resident memory is sampled (default 0.5 s; it was 2 s, which "
                             "missed some refreshes' peaks: a refresh takes 1-3 s)")
    parser.add_argument("--duckdb-set", action="append", default=[], metavar="NAME=VALUE",
                        help="a DuckDB setting for the ingest's connection, to try one (repeatable)")
    parser.add_argument("--child", nargs=2, help=argparse.SUPPRESS)
    args = parser.parse_args()
    if args.child:
        child(Path(args.child[0]), Path(args.child[1]), args.duckdb_memory, args.statements,
              args.duckdb_set)
        return
    CACHE.mkdir(parents=True, exist_ok=True)
    corpus = replicated(args.studies)
    n_files = sum(1 for p in corpus.rglob("*.dcm"))
    db = CACHE / f"ingest-scale-{os.getpid()}.duckdb"
    started = time.perf_counter()
    proc = subprocess.Popen([sys.executable, __file__, "--child", str(corpus), str(db),
                             *(["--duckdb-memory"] if args.duckdb_memory else []),
                             *(["--statements"] if args.statements else []),
                             *(f"--duckdb-set={s}" for s in args.duckdb_set)],
                            stdout=subprocess.PIPE, text=True, cwd=ROOT,
                            env={**os.environ, "PYTHONPATH": str(ROOT)})
    samples: list[tuple[float, float, float]] = []   # (seconds since start, MiB, ingest's MiB)
    stop = threading.Event()

    def sample() -> None:
        while not stop.wait(args.sample_every):
            samples.append((time.perf_counter() - started, *_rss_mib(proc.pid)))

    thread = threading.Thread(target=sample, daemon=True)
    thread.start()
    lines: list[str] = []
    for line in proc.stdout:   # a line every 10 000 files: memory so far, as studies go in
        lines.append(line)
        if line.startswith("FILES "):
            now = samples[-1][1] if samples else float("nan")
            peak_so_far = max((s[1] for s in samples), default=float("nan"))
            print(f"   {int(line.split()[1]):7d} files in {time.perf_counter() - started:5.0f} s: "
                  f"RSS {now:5.0f} MiB, peak so far {peak_so_far:5.0f} MiB", flush=True)
        elif line.startswith("STORAGE "):
            print(f"   {line[8:]}", end="", flush=True)
        elif line.startswith("DUCKDB "):
            print(f"     {line[7:]}", end="", flush=True)
    proc.wait()
    out = "".join(lines)
    stop.set()
    thread.join()
    seconds = time.perf_counter() - started
    if proc.returncode:
        sys.exit(f"ingest failed ({proc.returncode}):\n{out}")
    result = next(json.loads(l[7:]) for l in out.splitlines() if l.startswith("RESULT "))
    peak = max(s[1] for s in samples) if samples else float("nan")

    def at(fraction: float) -> float:
        window = [s[1] for s in samples if s[0] <= fraction * seconds]
        return max(window) if window else float("nan")

    for f in (0.1, 0.25, 0.5, 0.75, 1.0):
        print(f"   peak RSS up to {f:4.0%} of the run: {at(f):7.0f} MiB")
    print(f"   {result}")
    print(f"   peak RSS of the ingest process alone {max(s[2] for s in samples):.0f} MiB, of its "
          f"workers {max(s[1] - s[2] for s in samples):.0f} MiB")
    cpu = result.get("cpu_s", {})
    print(f"ingest {args.studies} studies: {n_files} files in {seconds:.0f} s "
          f"({n_files / seconds:.0f} files/s; CPU ingest {cpu.get('ingest')} s, workers "
          f"{cpu.get('workers')} s), peak RSS {peak:.0f} MiB, "
          f"at 10 % {at(0.1):.0f} MiB, at 100 % {at(1.0):.0f} MiB")
    for p in (db, db.with_name(db.name + ".wal")):
        p.unlink(missing_ok=True)


if __name__ == "__main__":
    main()
