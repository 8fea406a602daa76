"""Flow ``ingest``: the inbox into the warehouse; parsing optionally on a Dask cluster.

With a Dask task runner (prefect-dask), each batch the ingest reads is split into chunks parsed
by ``parse_files`` tasks on the cluster's workers, while this process stays the one DuckDB
writer: it collects the parsed objects, builds the batch's Arrow tables and loads them.
"""

from __future__ import annotations

from collections.abc import Iterable, Iterator
from pathlib import Path

from prefect import flow, task
from prefect.cache_policies import NO_CACHE

from ..config import load_settings
from ..exams import load_exam_rules, rule_rows
from ..ingest import FileOutcome, IngestSummary, ingest, process_file
from ..pseudonym import load_key, make_pseudonymiser
from .record import recorded_run
from .retry import is_transient

__all__ = ["PARSE_CHUNK", "check_inputs", "ingest_flow", "load_inputs", "parse_files"]

PARSE_CHUNK = 64   # files per Dask task: 4 tasks per ingest batch of 256


@task(retries=2, retry_delay_seconds=[5, 30], retry_condition_fn=is_transient)
def check_inputs(paths: list[Path]) -> list[Path]:
    """Fail (and retry: a network share may blink) when an input folder cannot be listed."""
    for path in paths:
        if Path(path).is_dir():
            next(iter(Path(path).iterdir()), None)   # OSError if the share is unreachable
    return list(paths)


@task(cache_policy=NO_CACHE)   # deterministic: no retries; the key is not hashed into a cache key
def parse_files(items: list[tuple[str, bytes, str]], key: bytes) -> list[FileOutcome]:
    """Parse one chunk of (path, bytes, SHA-256) on whichever worker runs the task."""
    pseudonymise = make_pseudonymiser(key)
    return [process_file(path, data, pseudonymise, digest) for path, data, digest in items]


class _Submitted:
    """The outcomes of chunks submitted to the task runner, in order, waited for when iterated."""

    def __init__(self, futures: list) -> None:
        self._futures = futures

    def __iter__(self) -> Iterator[FileOutcome]:
        for future in self._futures:
            yield from future.result()


def _submit_parser(key: bytes):
    def parse(items: list[tuple[str, bytes, str]]) -> Iterable[FileOutcome]:
        chunks = [items[i:i + PARSE_CHUNK] for i in range(0, len(items), PARSE_CHUNK)]
        return _Submitted([parse_files.submit(chunk, key) for chunk in chunks])
    return parse


@task(cache_policy=NO_CACHE)
def load_inputs(paths: list[Path], warehouse: Path, key: bytes, workers: int,
                sites: dict[str, str], on_task_runner: bool,
                new_key_epoch: bool = False, exam_rules: list[dict] | None = None) -> IngestSummary:
    """Run the ingest (the one warehouse writer); parsing in local processes or on the runner."""
    parse = _submit_parser(key) if on_task_runner else None
    return ingest(paths, warehouse, key, workers=workers, sites=sites, parse=parse,
                  new_key_epoch=new_key_epoch, exam_rules=exam_rules)


@flow(name="ingest")
def ingest_flow(inputs: list[Path], warehouse: Path, key_file: Path | None = None,
                config: Path | None = None, workers: int = 1,
                parse_on_task_runner: bool = False, new_key_epoch: bool = False) -> IngestSummary:
    """Ingest every file under `inputs` into `warehouse`; recorded in ``pipeline_run``.

    Parameters
    ----------
    inputs
        Files, folders or archives (as for ``kerma ingest``).
    warehouse
        The DuckDB file.
    key_file
        Pseudonymisation key file; else ``KERMA_PSEUDONYM_KEY``. The key is read here and never
        becomes a flow parameter, so it is not stored with the flow run.
    workers
        Local parsing processes (ignored when parsing on the task runner).
    parse_on_task_runner
        Parse in ``parse_files`` tasks on this flow's task runner (a Dask cluster).
    new_key_epoch
        Accept a key other than the warehouse's by starting a new key epoch; without it such a
        key stops the flow (KeyMismatchError) before anything is loaded.
    """
    key = load_key(key_file)
    settings = load_settings(config)
    with recorded_run(warehouse, "ingest", None, create=True) as end:
        paths = check_inputs(inputs)
        # the exam rules the audit will use (kerma.toml's, then the defaults), so the matches the
        # ingest keeps (derived_exam_match) are the audit's and it need not recompute them
        summary = load_inputs(paths, warehouse, key, workers, settings.sites, parse_on_task_runner,
                              new_key_epoch, rule_rows(load_exam_rules(settings.source)))
        end.ingest_run_ids = [summary.run_id]
        end.n_files_loaded = summary.by_status["loaded"]
        end.n_files_quarantined = summary.by_status["quarantined"]
    return summary
