"""``kerma ingest``: files, folders and archives into the warehouse."""

from __future__ import annotations

import time
from pathlib import Path

import typer
from rich.table import Table

from .app import app, console, fail

__all__ = ["ingest_command", "ingest_table", "run_ingest"]


def ingest_table(summary) -> Table:
    """The outcome table an ingest prints (files by status and reason)."""
    table = Table(title=f"Ingest into {summary.warehouse}")
    table.add_column("Outcome")
    table.add_column("Files", justify="right")
    table.add_row("seen", str(summary.seen))
    table.add_row("already recorded (unchanged)", str(summary.unchanged))
    table.add_row("loaded", str(summary.by_status["loaded"]))
    table.add_row("duplicate", str(summary.by_status["duplicate"]))
    table.add_row("not a dose object", str(summary.by_status["not_dose"]))
    table.add_row("quarantined", str(summary.by_status["quarantined"]))
    for reason, n in sorted(summary.quarantine_reasons.items()):
        table.add_row(f"  quarantined: {reason}", str(n))
    for reason, n in sorted(summary.not_dose_reasons.items()):
        table.add_row(f"  not a dose object: {reason}", str(n))
    table.add_row("value-level issues recorded", str(summary.value_issues))
    return table


def run_ingest(paths: list[Path], warehouse: Path, key_file: Path | None, workers: int,
               config: Path | None, show_progress: bool = True, new_key_epoch: bool = False):
    """Shared by `kerma ingest` and `kerma listen`: load settings and key, then ingest."""
    from rich.progress import BarColumn, MofNCompleteColumn, Progress, TimeElapsedColumn

    from ..config import load_settings
    from ..errors import ConfigError, WarehouseError
    from ..exams import load_exam_rules, rule_rows
    from ..ingest import ingest
    from ..pseudonym import load_key

    try:
        key = load_key(key_file)
        settings = load_settings(config)
        # the exam rules the audit will use (kerma.toml's, then the defaults): the matches the
        # ingest keeps (derived_exam_match) are then the audit's, not recomputed by it
        rules = rule_rows(load_exam_rules(settings.source))
    except ConfigError as exc:
        fail(str(exc))
    try:
        if not show_progress:
            return ingest(paths, warehouse, key, workers=workers, sites=settings.sites,
                          new_key_epoch=new_key_epoch, exam_rules=rules)
        with Progress("[progress.description]{task.description}", BarColumn(),
                      MofNCompleteColumn(), TimeElapsedColumn(), console=console,
                      transient=True) as bar:
            task = bar.add_task("ingesting", total=None)
            return ingest(paths, warehouse, key, workers=workers, sites=settings.sites,
                          progress=lambda n: bar.advance(task, n), new_key_epoch=new_key_epoch,
                          exam_rules=rules)
    except (ConfigError, WarehouseError) as exc:   # KeyMismatchError is a ConfigError
        fail(str(exc))


@app.command("ingest")
def ingest_command(
    paths: list[Path] = typer.Argument(..., help="Files, folders (recursive) or .zip/.tar(.gz) archives."),
    warehouse: Path = typer.Option(..., "--warehouse", help="DuckDB warehouse file (created if missing)."),
    workers: int = typer.Option(1, "--workers", min=1, help="Parsing processes."),
    key_file: Path | None = typer.Option(
        None, "--key-file", help="File holding the pseudonymisation key (else $KERMA_PSEUDONYM_KEY)."),
    config: Path | None = typer.Option(None, "--config", help="Settings file (default ./kerma.toml)."),
    new_key_epoch: bool = typer.Option(False, "--new-key-epoch", help="Accept a key other than the warehouse's: start a new key epoch (patients are not linked across epochs)."),
    vault: Path | None = typer.Option(None, "--vault", help="Re-identification vault file to append sealed identifiers to (never the warehouse)."),
    recipient: Path | None = typer.Option(None, "--recipient", help="The key holder's reidentify-public.key (with --vault)."),
) -> None:
    """Read DICOM dose reports and image headers into the warehouse; every file is accounted for."""
    if (vault is None) != (recipient is None):
        fail("--vault and --recipient go together")
    if vault is not None:
        from ..errors import ConfigError
        from ..vault import load_public_key
        if vault.resolve() == warehouse.resolve():
            fail("--vault must be a file of its own, never the warehouse")
        try:
            load_public_key(recipient)
        except ConfigError as exc:
            fail(str(exc))
    started = time.perf_counter()
    summary = run_ingest(paths, warehouse, key_file, workers, config, new_key_epoch=new_key_epoch)
    console.print(ingest_table(summary))
    if new_key_epoch and summary.key_epoch and summary.key_epoch > 1:
        console.print(f"[yellow]Key epoch {summary.key_epoch}:[/yellow] patients of these files are "
                      "not linked with those loaded under earlier keys.")
    if vault is not None:
        from ..errors import ConfigError
        from ..pseudonym import load_key
        from ..vault import seal_studies
        try:
            n = seal_studies(paths, vault, recipient, load_key(key_file), warehouse=warehouse)
        except ConfigError as exc:
            fail(str(exc))
        console.print(f"Vault {vault}: {n} new studies sealed for the key holder")
    console.print(f"run {summary.run_id} finished in {time.perf_counter() - started:.1f} s")
