"""``kerma synth`` and ``kerma demo``: the synthetic corpus, and the whole job run on it."""

from __future__ import annotations

import time
from pathlib import Path

import typer
from rich.table import Table

from .app import app, console

__all__ = ["DEFAULT_DEMO_DIR", "corpus_table", "demo", "synth"]

DEFAULT_DEMO_DIR = Path("kerma-demo")


def corpus_table(summary) -> Table:
    """Studies per modality of a written corpus."""
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
    console.print(corpus_table(summary))
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
    """Run the main job on the embedded demo network: generate, then the monthly flow.

    The monthly flow (Prefect) ingests the corpus, audits its three months and writes the
    dashboards and the committee report beside them; each flow run is recorded in the view
    ``pipeline_run``. Then each site ingests its folder of the corpus into a warehouse of its
    own, exports its extract, and the extracts are merged into ``network/network.duckdb``,
    which is audited.
    """
    import datetime as dt
    import secrets

    from synthetic_studies.sampling import month_starts
    from synthetic_studies.scenario import load_scenario
    from synthetic_studies.write import write_corpus

    from ..flows import run_monthly
    from .audit import print_audit_summary
    from .ingest import ingest_table

    corpus = out / "corpus"
    warehouse = out / "kerma.duckdb"
    key_file = out / "pseudonym.key"
    console.rule("Kerma Ledger demo")
    console.print("Step 1 of 3: generating the synthetic corpus of the invented "
                  "Tarnwick Regional Imaging Network (no real patients, sites or devices).")
    started = time.perf_counter()
    summary = write_corpus(corpus, seed=seed, months=3, n_studies=studies, workers=workers)
    console.print(corpus_table(summary))
    console.print(
        f"Wrote {summary.n_files} DICOM files ({summary.n_defect_files} with deliberate "
        f"defects) and the ground-truth manifest to {corpus} in "
        f"{time.perf_counter() - started:.1f} s.")
    if not key_file.exists():
        key_file.write_text(secrets.token_hex(32) + "\n", encoding="ascii")
        key_file.chmod(0o600)
        console.print(f"Created a demo pseudonymisation key in {key_file} (kept outside the "
                      "warehouse; a real site keeps its key in its own secret store).")
    bounds = month_starts(load_scenario().start_date, 3)
    first, last = bounds[0], bounds[-1] - dt.timedelta(days=1)
    console.print(f"Step 2 of 3: the monthly flow (Prefect) over {first} to {last}: ingest "
                  f"{corpus} into {warehouse}, audit against the verified published reference "
                  f"levels, write the dashboards.")
    started = time.perf_counter()
    result = run_monthly(warehouse=warehouse, inbox=corpus, out=out / "site", date_from=first,
                         date_to=last, key_file=key_file, workers=workers)
    console.print(ingest_table(result.ingest))
    print_audit_summary(result.audit)
    console.print(f"Dashboards written: {result.site_index}")
    console.print(f"Committee report written: {result.site_index.parent / 'report.pdf'}")
    console.print(f"Monthly flow finished in {time.perf_counter() - started:.1f} s; its runs are "
                  f"in the view pipeline_run.")
    _demo_vault(out, corpus, warehouse, key_file)
    console.print("Step 3 of 3: the regional network: each site ingests into its own warehouse "
                  "(kerma ingest), exports a de-identified extract (kerma export), the network "
                  "merges them (kerma merge) and audits the network warehouse (kerma audit).")
    from .network import demo_network
    demo_network(corpus, out / "network", key_file, first, last, workers=workers)
    console.print(
        "Ask your own questions, e.g.\n"
        f"  .venv/bin/kerma sql --warehouse {warehouse} "
        "\"select exam_type, quantity, site, n, median, reference_value, ratio_to_reference "
        "from audit_medians where is_above_reference\"")


def _demo_vault(out: Path, corpus: Path, warehouse: Path, key_file: Path) -> None:
    """The demo's re-identification vault: a key pair, the sealed identifiers, the command.

    In the demo both key files sit in ``keyholder/`` beside the outputs; at a real site the
    private key stays with the key holder and only the public key reaches the ingest machine.
    """
    from queries import sql

    from ..pseudonym import load_key
    from ..vault import PUBLIC_KEY_NAME, init_keys, seal_studies
    from ..warehouse.connection import connection

    keyholder = out / "keyholder"
    if not (keyholder / PUBLIC_KEY_NAME).exists():
        init_keys(keyholder)
    vault = out / "vault.jsonl"
    n = seal_studies([corpus], vault, keyholder / PUBLIC_KEY_NAME, load_key(key_file),
                     warehouse=warehouse)
    with connection(warehouse, read_only=True) as con:
        row = con.execute(sql("select_first_follow_up_study")).fetchone()
    console.print(f"Re-identification vault {vault}: {n} new studies sealed for the key holder "
                  f"(demo keys in {keyholder}; at a site the private key never leaves its holder).")
    if row:
        console.print("The key holder names the patient needing follow-up (the access is "
                      f"logged in {vault}.access.log):\n  .venv/bin/kerma reidentify {row[0]} "
                      f"--vault {vault} --private-key {keyholder / 'reidentify-private.key'} "
                      "--reason \"skin follow-up after a high-dose procedure\" --by \"demo MPE\"")
