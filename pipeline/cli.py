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
) -> None:
    """Run the main job on the embedded demo scenario."""
    from synthetic_studies.write import write_corpus

    corpus = out / "corpus"
    console.rule("Kerma Ledger demo")
    console.print("Step 1 of 1: generating the synthetic corpus of the invented "
                  "Tarnwick Regional Imaging Network (no real patients, sites or devices).")
    started = time.perf_counter()
    summary = write_corpus(corpus, seed=seed, months=3, n_studies=studies)
    console.print(_corpus_table(summary))
    console.print(
        f"Wrote {summary.n_files} DICOM files ({summary.n_defect_files} with deliberate "
        f"defects) and the ground-truth manifest to {corpus} in "
        f"{time.perf_counter() - started:.1f} s.")
    console.print(
        "[yellow]Not yet done by this version:[/yellow] ingest into a DuckDB warehouse, the "
        "reference-level audit and the dashboards. Those steps are still to be built; this "
        "demo stops after generating the corpus.")


def main() -> None:  # pragma: no cover - console-script entry point
    app()
