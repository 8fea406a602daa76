"""The ``kerma`` command line: thin wrappers over plain functions."""

from __future__ import annotations

import time
from pathlib import Path

import typer
from rich.console import Console
from rich.table import Table

__all__ = ["app", "main"]

app = typer.Typer(
    name="kerma",
    help="Kerma Ledger: patient radiation dose audit from DICOM dose reports.",
    no_args_is_help=True,
    add_completion=False,
)
console = Console()

DEFAULT_DEMO_DIR = Path("kerma-demo")


def _corpus_table(summary) -> Table:
    table = Table(title=f"Synthetic corpus in {summary.out_dir}", show_header=True)
    table.add_column("Modality")
    table.add_column("Studies", justify="right")
    for modality, n in sorted(summary.by_modality.items()):
        table.add_row(modality, str(n))
    table.add_row("[bold]all[/bold]", f"[bold]{summary.n_studies}[/bold]")
    return table


@app.command()
def synth(
    out: Path = typer.Option(..., "--out", help="Folder to write the corpus and manifest into."),
    seed: int = typer.Option(7, help="Random seed; the same seed gives byte-identical files."),
    months: int = typer.Option(3, min=1, help="Number of calendar months the studies span."),
    studies: int = typer.Option(2000, min=1, help="Number of studies to generate."),
    scenario: Path | None = typer.Option(
        None, help="Scenario TOML file (default: the bundled demo network)."),
    workers: int | None = typer.Option(None, min=1, help="Worker processes (default: CPUs)."),
) -> None:
    """Write a synthetic corpus of DICOM dose objects for the invented demo network."""
    from synthetic_studies.write import write_corpus

    started = time.perf_counter()
    summary = write_corpus(out, seed=seed, months=months, n_studies=studies,
                           scenario_path=scenario, workers=workers)
    console.print(_corpus_table(summary))
    console.print(
        f"{summary.n_files} files ({summary.size_bytes / 1e6:.1f} MB), of which "
        f"{summary.n_defect_files} carry a deliberate defect; manifest: "
        f"{out / 'files.parquet'}, {out / 'studies.parquet'} "
        f"({time.perf_counter() - started:.1f} s)")


@app.command()
def demo(
    out: Path = typer.Option(DEFAULT_DEMO_DIR, "--out", help="Folder for everything the demo writes."),
    studies: int = typer.Option(2000, min=1, help="Number of studies in the demo corpus."),
    seed: int = typer.Option(7, help="Random seed of the demo corpus."),
    workers: int = typer.Option(2, min=1, help="Processes for generating and parsing."),
) -> None:
    """Run the main job on the embedded demo scenario: generate, then ingest."""
    import secrets

    from synthetic_studies.write import write_corpus

    corpus = out / "corpus"
    warehouse = out / "kerma.duckdb"
    key_file = out / "pseudonym.key"
    console.rule("Kerma Ledger demo")
    console.print("Step 1 of 2: generating the synthetic corpus of the invented "
                  "Tarnwick Regional Imaging Network (no real patients, sites or devices).")
    started = time.perf_counter()
    summary = write_corpus(corpus, seed=seed, months=3, n_studies=studies, workers=workers)
    console.print(_corpus_table(summary))
    console.print(
        f"Wrote {summary.n_files} DICOM files ({summary.n_defect_files} with deliberate "
        f"defects) and the ground-truth manifest to {corpus} in "
        f"{time.perf_counter() - started:.1f} s.")

    console.print(f"Step 2 of 2: ingesting {corpus} into the warehouse {warehouse}.")
    if not key_file.exists():
        key_file.write_text(secrets.token_hex(32) + "\n", encoding="ascii")
        key_file.chmod(0o600)
        console.print(f"Created a demo pseudonymisation key in {key_file} (kept outside the "
                      "warehouse; a real site keeps its key in its own secret store).")
    started = time.perf_counter()
    result = run_ingest([corpus], warehouse, key_file, workers, None)
    console.print(_ingest_table(result))
    console.print(f"Ingest finished in {time.perf_counter() - started:.1f} s.")
    console.print(
        "[yellow]Not yet done by this version:[/yellow] the reference-level audit and the "
        "dashboards. Query the warehouse meanwhile, e.g.\n"
        f"  .venv/bin/kerma sql --warehouse {warehouse} "
        "\"select modality, count(*) as studies, median(dap_total_gy_cm2) as median_dap_gy_cm2, "
        "median(dlp_total_mgy_cm) as median_dlp_mgy_cm from study_dose group by 1 order by 1\"")


def _fail(message: str) -> None:
    console.print(f"[red]error:[/red] {message}", soft_wrap=True)
    raise typer.Exit(code=2)


def _ingest_table(summary) -> Table:
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
               config: Path | None, show_progress: bool = True):
    """Shared by `kerma ingest` and `kerma demo`: load settings and key, then ingest."""
    from rich.progress import BarColumn, MofNCompleteColumn, Progress, TimeElapsedColumn

    from .config import load_settings
    from .errors import ConfigError, WarehouseError
    from .ingest import ingest
    from .pseudonym import load_key

    try:
        key = load_key(key_file)
        settings = load_settings(config)
    except ConfigError as exc:
        _fail(str(exc))
    try:
        if not show_progress:
            return ingest(paths, warehouse, key, workers=workers, sites=settings.sites)
        with Progress("[progress.description]{task.description}", BarColumn(),
                      MofNCompleteColumn(), TimeElapsedColumn(), console=console,
                      transient=True) as bar:
            task = bar.add_task("ingesting", total=None)
            return ingest(paths, warehouse, key, workers=workers, sites=settings.sites,
                          progress=lambda n: bar.advance(task, n))
    except WarehouseError as exc:
        _fail(str(exc))


@app.command("ingest")
def ingest_command(
    paths: list[Path] = typer.Argument(..., help="Files, folders (recursive) or .zip/.tar(.gz) archives."),
    warehouse: Path = typer.Option(..., "--warehouse", help="DuckDB warehouse file (created if missing)."),
    workers: int = typer.Option(1, "--workers", min=1, help="Parsing processes."),
    key_file: Path | None = typer.Option(
        None, "--key-file", help="File holding the pseudonymisation key (else $KERMA_PSEUDONYM_KEY)."),
    config: Path | None = typer.Option(None, "--config", help="Settings file (default ./kerma.toml)."),
) -> None:
    """Read DICOM dose reports and image headers into the warehouse; every file is accounted for."""
    started = time.perf_counter()
    summary = run_ingest(paths, warehouse, key_file, workers, config)
    console.print(_ingest_table(summary))
    console.print(f"run {summary.run_id} finished in {time.perf_counter() - started:.1f} s")


@app.command("sql")
def sql_command(
    query: str = typer.Argument(..., help="One SQL statement (read-only)."),
    warehouse: Path = typer.Option(..., "--warehouse", help="DuckDB warehouse file."),
    limit: int = typer.Option(50, help="Rows to print at most."),
) -> None:
    """Ask the warehouse an ad hoc question (read-only connection)."""
    import duckdb

    from .errors import WarehouseError
    from .warehouse.connection import connection

    try:
        with connection(warehouse, read_only=True) as con:
            try:
                cursor = con.execute(query)
            except duckdb.Error as exc:
                _fail(str(exc).splitlines()[0])
            columns = [d[0] for d in cursor.description or []]
            rows = cursor.fetchmany(limit + 1)
    except WarehouseError as exc:
        _fail(str(exc))
    table = Table(*columns)
    for row in rows[:limit]:
        table.add_row(*("" if v is None else f"{v:.6g}" if isinstance(v, float) else str(v) for v in row))
    console.print(table)
    if len(rows) > limit:
        console.print(f"(first {limit} rows shown)")


def main() -> None:  # pragma: no cover - console-script entry point
    app()
