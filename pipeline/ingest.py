"""Ingest: input files -> parsed dose objects -> warehouse, in batches (the shell loop).

Every input file ends in ``source_object`` with a status: ``loaded``, ``duplicate`` (its SOP
Instance UID is already loaded), ``not_dose`` (valid DICOM without dose information we count)
or ``quarantined`` (with the reason). One bad file never stops a batch: only ``InputError``
is caught per file; anything else is a bug and stops the run loudly. Each batch is loaded in
one transaction, so a crash loses at most the batch in flight, which a rerun redoes.
"""

from __future__ import annotations

import datetime as dt
import hashlib
import multiprocessing
import uuid
from collections import Counter
from collections.abc import Callable, Iterable
from concurrent.futures import ProcessPoolExecutor
from dataclasses import dataclass, field
from pathlib import Path

import duckdb

from . import __version__
from .errors import InputError, WarehouseError
from .ingest_worker import FileOutcome, _init_worker, _ready, _work, process_file
from .models import as_row
from .pseudonym import key_fingerprint, make_pseudonymiser
from .sources.files import Candidate, iter_candidates
from .warehouse.connection import connection, evict_cached_blocks
from .warehouse.key_epoch import check_key_epoch
from .warehouse.derived import RefreshResult, raw_state, refresh_derived
from .warehouse.load import append_batch, ensure_schema, replace_exam_rules, replace_site_map
from .warehouse.tables import arrow_table

__all__ = ["FileOutcome", "IngestSummary", "ingest", "process_file"]

BATCH_SIZE = 256
# A run's derived tables are refreshed whenever this many studies have been touched, not only at
# its end: a refresh's transaction holds the new rows of its studies in memory until it commits,
# so a bulk load of 100k studies refreshed once grew the run's peak memory at the end (574 MiB at
# 10 % of the run, 1110 MiB at its end; bench/ingest_scale.py). Common practice, no source.
# 10 000 studies per refresh still lifted the run's memory by ~125 MiB while its transaction was
# open (406 -> 529 MiB in the ingest process at 10 000 studies of bench/ingest_scale.py, measured
# per statement): 2 500 studies hold a quarter of that. Measured, no other source.
REFRESH_EVERY_STUDIES = 2_500


@dataclass
class IngestSummary:
    run_id: str
    warehouse: Path
    seen: int = 0
    unchanged: int = 0
    by_status: Counter = field(default_factory=Counter)
    quarantine_reasons: Counter = field(default_factory=Counter)
    not_dose_reasons: Counter = field(default_factory=Counter)
    value_issues: int = 0
    key_epoch: int | None = None   # the pseudonymisation-key epoch the files were loaded in
    derived: object = None         # what the refresh of the derived tables did (RefreshResult)

    @property
    def loaded(self) -> int:
        return self.by_status["loaded"]


# --- rows for the warehouse ----------------------------------------------------------------------

def _issue_id(sop: str, n: int, issue) -> str:
    text = f"{sop}\x1f{n}\x1f{issue.kind.value}\x1f{issue.concept_code}\x1f{issue.event_uid}\x1f{issue.detail}"
    return hashlib.sha256(text.encode()).hexdigest()[:32]


def _batch_tables(outcomes: list[FileOutcome], run_id: str, now: dt.datetime):
    rows: dict[str, list[dict]] = {k: [] for k in (
        "source_object", "dose_object", "device", "study", "ct_event", "projection_event",
        "accumulated", "value_issue")}
    for o in outcomes:
        rows["source_object"].append({
            "path": o.path, "sha256": o.sha256, "size_bytes": o.size_bytes,
            "sop_instance_uid": o.sop_instance_uid, "sop_class_uid": o.sop_class_uid,
            "status": o.status, "reason": o.reason, "detail": o.detail,
            "run_id": run_id, "recorded_at": now})
        obj = o.obj
        if o.status != "loaded" or obj is None:
            continue
        s, d = obj.study, obj.device
        keys = {"study_key": s.study_key, "device_key": d.device_key, "run_id": run_id}
        rows["dose_object"].append({
            "sop_instance_uid": obj.sop_instance_uid, "sha256": o.sha256, "path": o.path,
            "sop_class_uid": obj.sop_class_uid, "object_kind": obj.kind.value,
            "modality": obj.modality, "study_key": s.study_key, "patient_key": s.patient_key,
            "device_key": d.device_key, "content_datetime": obj.content_datetime,
            "instance_number": obj.instance_number,
            "source_of_dose_information": obj.source_of_dose_information,
            "series_description": obj.series_description, "protocol_name": obj.protocol_name,
            "body_part": obj.body_part, "study_date": s.study_date,
            "study_description": s.study_description, "patient_age_years": s.patient_age_years,
            "patient_sex": s.patient_sex, "patient_weight_kg": s.patient_weight_kg,
            "patient_height_m": s.patient_height_m, "n_ct_events": len(obj.ct_events),
            "n_projection_events": len(obj.projection_events), "run_id": run_id})
        rows["device"].append({**as_row(d), "first_run_id": run_id})
        rows["study"].append({**as_row(s), "first_run_id": run_id})
        rows["ct_event"] += [{**as_row(e), **keys} for e in obj.ct_events]
        rows["projection_event"] += [{**as_row(e), **keys} for e in obj.projection_events]
        rows["accumulated"] += [{**as_row(a), **keys} for a in obj.accumulated]
        rows["value_issue"] += [{
            "issue_id": _issue_id(obj.sop_instance_uid, n, i), "sop_instance_uid": obj.sop_instance_uid,
            "event_uid": i.event_uid, "kind": i.kind.value, "concept_code": i.concept_code,
            "detail": i.detail, "raw_value": i.raw_value, "raw_unit": i.raw_unit, "run_id": run_id}
            for n, i in enumerate(obj.issues)]
    return {name: arrow_table(name, r) for name, r in rows.items()}


# --- the run --------------------------------------------------------------------------------------

def _chunks(items: Iterable[Candidate], size: int):
    chunk: list[Candidate] = []
    for item in items:
        chunk.append(item)
        if len(chunk) == size:
            yield chunk
            chunk = []
    if chunk:
        yield chunk


def _read(c: Candidate) -> tuple[bytes | None, InputError | None]:
    """The file's bytes, or the InputError that quarantines it (an OSError becomes one)."""
    try:
        return c.read(), None
    except InputError as exc:
        return None, exc
    except OSError as exc:
        return None, InputError(f"{c.path}: cannot be read: {exc.strerror or exc}",
                                reason="unreadable_file")


def ingest(paths: list[Path], warehouse: Path, key: bytes, *, workers: int = 1,
           sites: dict[str, str] | None = None, exam_rules: list[dict] | None = None,
           batch_size: int = BATCH_SIZE,
           progress: Callable[[int], None] | None = None,
           parse: Callable[[list[tuple[str, bytes, str]]], Iterable[FileOutcome]] | None = None,
           new_key_epoch: bool = False,
           ) -> IngestSummary:
    """Ingest every file under `paths` into the warehouse at `warehouse`.

    Idempotent: a file already recorded with the same path and content is skipped, and a SOP
    Instance UID already loaded is a duplicate, so rerunning over the same inputs changes
    nothing. Raises WarehouseError (cannot open / busy) before reading any input, and
    WarehouseError (cannot write) when a batch cannot be committed, e.g. on a full disk:
    the batches committed before it stay, and a rerun carries on from there.

    `parse`, when given, parses a list of (path, bytes, SHA-256) elsewhere (e.g. tasks on a
    Dask cluster) and returns an iterable of outcomes in the same order, consumed only when
    the batch is loaded; `workers` is then ignored. This process stays the only writer.

    One key per warehouse: the first ingest records the key's fingerprint as key epoch 1; an
    ingest with another key raises KeyMismatchError before loading anything, unless
    `new_key_epoch` is true, which records a new epoch (pipeline/warehouse/key_epoch.py).
    """
    run_id = f"run-{dt.datetime.now(dt.UTC):%Y%m%dT%H%M%S}-{uuid.uuid4().hex[:8]}"
    summary = IngestSummary(run_id=run_id, warehouse=Path(warehouse))
    pseudonymise = make_pseudonymiser(key)
    # "spawn", not the Linux default "fork": the workers start after the warehouse is open, and a
    # forked child inherits DuckDB's threads and state mid-flight (seen to segfault in a worker).
    pool = ProcessPoolExecutor(max_workers=workers, initializer=_init_worker, initargs=(key,),
                               mp_context=multiprocessing.get_context("spawn")) \
        if workers > 1 and parse is None else None
    started = dt.datetime.now()
    try:
        _run(paths, warehouse, key, workers, sites, exam_rules, batch_size, progress, pool,
             pseudonymise, run_id, started, summary, parse, new_key_epoch)
    except _WRITE_FAILURES as exc:
        raise WarehouseError(
            f"cannot write to warehouse {warehouse}: {_first_cause(exc)}; the batch in flight "
            "was not recorded (batches before it are kept); free space or fix the folder, "
            "then rerun: files already recorded are skipped") from exc
    finally:
        if pool is not None:   # idempotent; also when the run stopped before its loop
            pool.shutdown(cancel_futures=True)
    return summary


# A commit that cannot be written (disk full, I/O error, read-only file) fails as one of
# these; the rollback that follows may fail too and hide the first error (see _first_cause).
_WRITE_FAILURES = (duckdb.IOException, duckdb.TransactionException)


def _first_cause(exc: BaseException) -> str:
    """The first line of the earliest error in the chain (the commit's, not the rollback's)."""
    while exc.__context__ is not None and isinstance(exc.__context__, duckdb.Error):
        exc = exc.__context__
    return str(exc).splitlines()[0] if str(exc) else type(exc).__name__


def _run(paths, warehouse, key, workers, sites, exam_rules, batch_size, progress, pool,
         pseudonymise, run_id, started, summary, parse=None, new_key_epoch=False) -> None:
    with connection(warehouse, create=True) as con:
        ensure_schema(con)
        if pool is not None:  # start the workers now: their imports overlap the set-up below
            for _ in range(workers):
                pool.submit(_ready)
        # before anything is loaded: a different key would split every patient in two
        summary.key_epoch = check_key_epoch(con, key_fingerprint(key), new_epoch=new_key_epoch,
                                            run_id=run_id, now=started)
        replace_site_map(con, sites or {})
        if exam_rules is None:
            from .exams import load_exam_rules, rule_rows
            exam_rules = rule_rows(load_exam_rules())
        replace_exam_rules(con, exam_rules)
        con.register("incoming_run", arrow_table("run", [{
            "run_id": run_id, "started_at": started, "kerma_version": __version__,
            "inputs": "; ".join(str(p) for p in paths), "workers": workers}]))
        con.execute(_sql("insert_run"))
        con.unregister("incoming_run")
        since = raw_state(con)   # the derived tables are refreshed from here for what is loaded
        touched: set[str] = set()
        refreshes: list[RefreshResult] = []
        try:
            # With worker processes the next batch is parsed while this one is loaded: at most
            # two batches are in flight, so memory stays flat however many files there are.
            in_flight = None
            for chunk in _chunks(iter_candidates(list(paths)), batch_size):
                dispatched = _dispatch_chunk(con, chunk, pool, pseudonymise, summary, parse)
                if in_flight is not None:
                    _load_chunk(con, in_flight, run_id, summary, progress, touched)
                    if len(touched) >= REFRESH_EVERY_STUDIES:
                        refreshes.append(_released_refresh(con, touched, since))
                        # the state the refresh read (it writes only the derived tables): not
                        # read again, a whole scan of the raw tables' keys
                        since, touched = refreshes[-1].raw_state, set()
                        _release_free_memory()
                in_flight = dispatched
            if in_flight is not None:
                _load_chunk(con, in_flight, run_id, summary, progress, touched)
        finally:
            if pool is not None:
                pool.shutdown(cancel_futures=True)
        con.execute(_RUN_UPDATE, {
            "finished_at": dt.datetime.now(), "n_seen": summary.seen,
            "n_loaded": summary.by_status["loaded"], "n_duplicate": summary.by_status["duplicate"],
            "n_not_dose": summary.by_status["not_dose"],
            "n_quarantined": summary.by_status["quarantined"], "n_unchanged": summary.unchanged,
            "run_id": run_id})
        # deduplicated events, study totals, exam texts and skin dose of the studies this run
        # touched (pipeline/warehouse/derived.py): computed once here, never by each audit;
        # released before and after like the refreshes within the run, so that neither this
        # refresh nor the checkpoint as the connection closes holds the batches' blocks and
        # indexes on top of its own memory (at 100k studies the run's end peaked at 591 MiB
        # in the ingest process without them: bench/ingest_scale.py, measured, no other source)
        refreshes.append(_released_refresh(con, touched, since))
        summary.derived = _combined(refreshes)


def _released_refresh(con, touched: set[str], since: str) -> RefreshResult:
    """refresh_derived of the studies `touched` since the raw state `since`, with a checkpoint
    (and the blocks let go) before it and after it: else the refresh's commit checkpoints the
    batches' rows, reading the primary keys' indexes whole on top of the refresh's memory, and
    the blocks it read stay for the next batches (_release_block_cache)."""
    _release_block_cache(con)
    result = refresh_derived(con, touched, since=since)
    _release_block_cache(con)
    return result


def _combined(refreshes: list[RefreshResult]) -> RefreshResult:
    """One result for a run's refreshes: the widest mode, the studies and seconds summed."""
    order = ("none", "rules", "incremental", "full")
    mode = max((r.mode for r in refreshes), key=order.index)
    return RefreshResult(mode, sum(r.n_studies for r in refreshes), sum(r.seconds for r in refreshes))


def _load_chunk(con, dispatched, run_id: str, summary: IngestSummary,
                progress: Callable[[int], None] | None, touched: set | None = None) -> None:
    """Collect one dispatched batch, mark duplicates and load it in one transaction."""
    n_files, outcomes, results = dispatched
    outcomes = _collect(outcomes, results)
    # SOP Instances already in the warehouse, this run's earlier batches included (each batch is
    # committed before the next is marked): asked of the warehouse per batch, not kept in a set
    # of every loaded SOP Instance UID, which grew with the run (~150 bytes per file)
    loaded_sops = _loaded_sops(con, [o.sop_instance_uid for o in outcomes if o.status == "loaded"])
    for o in outcomes:
        if o.status == "loaded" and o.sop_instance_uid in loaded_sops:
            o.status, o.reason = "duplicate", "sop_instance_already_loaded"
            o.detail = f"SOP Instance UID {o.sop_instance_uid} is already loaded"
            o.obj = None
    if outcomes:
        tables = _batch_tables(outcomes, run_id, dt.datetime.now())
        append_batch(con, tables)
        if touched is not None:
            for name in ("dose_object", "study", "ct_event", "projection_event", "accumulated"):
                touched.update(tables[name].column("study_key").to_pylist())
    for o in outcomes:
        summary.by_status[o.status] += 1
        if o.status == "quarantined":
            summary.quarantine_reasons[o.reason] += 1
        elif o.status == "not_dose":
            summary.not_dose_reasons[o.reason] += 1
        if o.obj is not None:
            summary.value_issues += len(o.obj.issues)
    if progress:
        progress(n_files)


def _dispatch_chunk(con, chunk: list[Candidate], pool, pseudonymise, summary, parse=None):
    """Read one batch and start parsing it (in the pool, if any); returns what _collect needs."""
    summary.seen += len(chunk)
    known = _known(con, [c.path for c in chunk])
    todo: list[tuple[str, bytes, str]] = []
    outcomes: list[FileOutcome] = []
    for c in chunk:
        data, error = _read(c)
        # a file that could not be read has no content: key it on its name
        digest = hashlib.sha256(c.path.encode() if data is None else data).hexdigest()
        if (c.path, digest) in known:
            summary.unchanged += 1
            continue
        if error is not None:
            outcomes.append(FileOutcome(c.path, digest, 0, error.status, error.reason, str(error)))
            continue
        todo.append((c.path, data, digest))
    if parse is not None:
        results = parse(todo)  # submitted now, collected by _collect
    elif pool is not None:
        results = pool.map(_work, todo, chunksize=8)  # submitted now, collected by _collect
    else:
        results = [process_file(p, d, pseudonymise, h) for p, d, h in todo]
    return len(chunk), outcomes, results


def _collect(outcomes: list[FileOutcome], results) -> list[FileOutcome]:
    outcomes += list(results)
    # the same SOP Instance twice within one batch: the first file wins
    seen: set[str] = set()
    for o in outcomes:
        if o.status == "loaded":
            if o.sop_instance_uid in seen:
                o.status, o.reason = "duplicate", "sop_instance_already_loaded"
                o.detail = f"SOP Instance UID {o.sop_instance_uid} appears twice in the input"
                o.obj = None
            else:
                seen.add(o.sop_instance_uid)
    return outcomes


def _loaded_sops(con, sops: list[str]) -> set[str]:
    """Those of `sops` that raw_dose_object holds."""
    if not sops:
        return set()
    # a list parameter, not a registered relation: DuckDB then looks the UIDs up in the primary
    # key's index (an index scan of the batch's rows) instead of scanning raw_dose_object whole
    return {r[0] for r in con.execute(_LOADED_SOPS, {"sops": sops}).fetchall()}


def _rows_of_batch(con, query: str, name: str, column: str, values: list[str]) -> list[tuple]:
    """Rows of `query`, which reads the batch's `values` as the one-column relation `name`."""
    import pyarrow as pa
    con.register(name, pa.table({column: pa.array(values, pa.string())}))
    try:
        return con.execute(query).fetchall()
    finally:
        con.unregister(name)


def _release_block_cache(con) -> None:
    """Let DuckDB drop the table and index blocks it keeps in memory. It keeps every block it has
    written or read until its memory limit (80 % of RAM by default) is reached, so they grew with
    the warehouse (1.8 MiB per 1000 files from 20k to 51k files, measured with
    bench/ingest_scale.py --studies 40000 --duckdb-memory), though the ingest reads back only
    a few. A checkpoint writes what is held in memory (appended rows, the primary keys' index
    changes) to the file, so that all of it can be evicted; a tiny memory limit then evicts every
    unpinned block, and the limit is put back (evict_cached_blocks: 0.02-0.04 s after a refresh at
    20k studies; 0.1-1.8 s before one at 40k, where the checkpoint writes the batches loaded since
    the last). The primary keys' indexes come back whole with the next batch's inserts
    (measured, same size)."""
    con.execute("checkpoint")
    evict_cached_blocks(con)


def _release_free_memory() -> None:
    """Give the C heap's free pages back to the system (glibc malloc_trim; elsewhere a no-op):
    a refresh's transaction leaves them behind when it commits."""
    try:
        import ctypes
        ctypes.CDLL("libc.so.6").malloc_trim(0)
    except (OSError, AttributeError):
        pass


def _known(con, paths: list[str]) -> set[tuple[str, str]]:
    return {(p, s) for p, s in _rows_of_batch(con, _KNOWN, "incoming_paths", "path", paths)}


from queries import sql as _sql  # noqa: E402  (SQL lives in queries/)

_RUN_UPDATE = _sql("update_run_counts")
_KNOWN = _sql("select_known_files")
_LOADED_SOPS = _sql("select_loaded_sops_of_batch")
