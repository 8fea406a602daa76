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
console = Console(width=None if Console().is_terminal else 110)

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
    """Run the main job on the embedded demo scenario: generate, ingest, audit, dashboards."""
    import secrets

    from synthetic_studies.write import write_corpus

    corpus = out / "corpus"
    warehouse = out / "kerma.duckdb"
    key_file = out / "pseudonym.key"
    console.rule("Kerma Ledger demo")
    console.print("Step 1 of 3: generating the synthetic corpus of the invented "
                  "Tarnwick Regional Imaging Network (no real patients, sites or devices).")
    started = time.perf_counter()
    summary = write_corpus(corpus, seed=seed, months=3, n_studies=studies, workers=workers)
    console.print(_corpus_table(summary))
    console.print(
        f"Wrote {summary.n_files} DICOM files ({summary.n_defect_files} with deliberate "
        f"defects) and the ground-truth manifest to {corpus} in "
        f"{time.perf_counter() - started:.1f} s.")

    console.print(f"Step 2 of 3: ingesting {corpus} into the warehouse {warehouse}.")
    if not key_file.exists():
        key_file.write_text(secrets.token_hex(32) + "\n", encoding="ascii")
        key_file.chmod(0o600)
        console.print(f"Created a demo pseudonymisation key in {key_file} (kept outside the "
                      "warehouse; a real site keeps its key in its own secret store).")
    started = time.perf_counter()
    result = run_ingest([corpus], warehouse, key_file, workers, None)
    console.print(_ingest_table(result))
    console.print(f"Ingest finished in {time.perf_counter() - started:.1f} s.")

    import datetime as dt

    from synthetic_studies.sampling import month_starts
    from synthetic_studies.scenario import load_scenario

    from .audit import run_audit

    bounds = month_starts(load_scenario().start_date, 3)
    first, last = bounds[0], bounds[-1] - dt.timedelta(days=1)
    console.print(f"Step 3 of 3: auditing {first} to {last} against the verified published "
                  "reference levels.")
    print_audit_summary(run_audit(warehouse, date_from=first, date_to=last))
    from dashboards.site import write_site

    console.print(f"Dashboards written: {write_site(warehouse, out / 'site')}")
    console.print(
        "Ask your own questions, e.g.\n"
        f"  .venv/bin/kerma sql --warehouse {warehouse} "
        "\"select exam_type, quantity, site, n, median, reference_value, ratio_to_reference "
        "from audit_medians where is_above_reference\"")


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


exams_app = typer.Typer(help="Standard exam types and the rules that map descriptions onto them.",
                        no_args_is_help=True)
reference_app = typer.Typer(help="Reference-level sets (national, local, derived).", no_args_is_help=True)
app.add_typer(exams_app, name="exams")
app.add_typer(reference_app, name="reference")


def _open(warehouse: Path, read_only: bool = False):
    from .errors import WarehouseError
    from .warehouse.connection import connection
    try:
        return connection(warehouse, read_only=read_only)
    except WarehouseError as exc:  # pragma: no cover - raised on enter, below
        _fail(str(exc))


def _rows_table(title: str, frame, floats: str = "{:.4g}") -> Table:
    table = Table(title=title)
    for column in frame.columns:
        table.add_column(str(column))
    for row in frame.itertuples(index=False):
        table.add_row(*("" if v is None or v != v else floats.format(v) if isinstance(v, float)
                        else str(v) for v in row))
    return table


@exams_app.command("unmapped")
def exams_unmapped(
    warehouse: Path = typer.Option(..., "--warehouse", help="DuckDB warehouse file."),
    config: Path | None = typer.Option(None, "--config", help="Settings file with your [[exam_rule]]s."),
) -> None:
    """List study descriptions no exam rule maps, most frequent first, to extend the rules."""
    from queries import sql

    from .config import DEFAULT_CONFIG
    from .errors import WarehouseError
    from .exams import load_exam_rules, rule_rows
    from .warehouse.connection import connection
    from .warehouse.load import ensure_schema, replace_exam_rules

    try:
        with connection(warehouse) as con:
            ensure_schema(con)
            replace_exam_rules(con, rule_rows(load_exam_rules(config or DEFAULT_CONFIG)))
            frame = con.execute(sql("unmapped_descriptions")).df()
    except WarehouseError as exc:
        _fail(str(exc))
    if frame.empty:
        console.print("Every study maps to a standard exam type.")
        return
    console.print(_rows_table("Unmapped study descriptions", frame))
    console.print("Add [[exam_rule]] entries to kerma.toml (see pipeline/exam_rules.toml for the syntax).")


@reference_app.command("list")
def reference_list(warehouse: Path = typer.Option(..., "--warehouse", help="DuckDB warehouse file.")) -> None:
    """Show the reference-level sets in the warehouse: body, country, validity, verification."""
    from queries import sql

    from .errors import WarehouseError
    from .reference_store import install_reference_sets
    from .warehouse.connection import connection
    from .warehouse.load import ensure_schema

    try:
        with connection(warehouse) as con:
            ensure_schema(con)
            install_reference_sets(con)
            frame = con.execute(sql("describe_reference_sets")).df()
    except WarehouseError as exc:
        _fail(str(exc))
    console.print(_rows_table("Reference-level sets", frame))


@reference_app.command("import")
def reference_import(
    file: Path = typer.Argument(..., help="CSV in the shipped format (see queries/seeds/reference_levels)."),
    warehouse: Path = typer.Option(..., "--warehouse", help="DuckDB warehouse file."),
) -> None:
    """Add or replace a national or local reference-level set from a CSV file."""
    from .errors import ConfigError, WarehouseError
    from .reference_store import import_reference_csv
    from .warehouse.connection import connection
    from .warehouse.load import ensure_schema

    try:
        with connection(warehouse) as con:
            ensure_schema(con)
            set_id, n = import_reference_csv(con, file)
    except (ConfigError, WarehouseError) as exc:
        _fail(str(exc))
    console.print(f"Imported reference set {set_id!r}: {n} values. Use it with "
                  f"`kerma audit --reference {set_id}`.")


@reference_app.command("derive")
def reference_derive(
    set_id: str = typer.Argument(..., help="Name of the new local set, e.g. local_2026q4."),
    warehouse: Path = typer.Option(..., "--warehouse", help="DuckDB warehouse file."),
    allow_few_rooms: bool = typer.Option(False, "--allow-few-rooms", help="Save values from fewer than min_rooms_local_drl rooms (labelled; not a local DRL per ICRP 135)."),
) -> None:
    """Save the network's 75th percentile of room medians (ICRP 135) from the last audit as a set."""
    from .errors import ConfigError, WarehouseError
    from .reference_store import derive_local_set
    from .warehouse.connection import connection

    try:
        with connection(warehouse) as con:
            n = derive_local_set(con, set_id, f"Local reference levels derived from {warehouse.name}",
                                 allow_few_rooms=allow_few_rooms)
    except (ConfigError, WarehouseError) as exc:
        _fail(str(exc))
    console.print(f"Saved local set {set_id!r} with {n} values (75th percentile of room medians).")


CAUTION = ("A reference level is an investigation level, not a dose limit. Flagged exams and "
           "units need review by a qualified medical physicist; local regulations prevail.")


def print_audit_summary(summary) -> None:
    console.rule(f"Audit {summary.period} ({summary.date_from} to {summary.date_to})")
    console.print(f"Reference sets (in order of precedence): {', '.join(summary.reference_sets) or 'none'}"
                  f" - issuing body: {summary.reference_body or 'none'} ({summary.reference_basis})")
    if summary.fallback_sets:
        console.print(f"Fallback sets (fill gaps only; each such row says so): {', '.join(summary.fallback_sets)}")
    console.print(f"Studies: {summary.n_studies}; not mapped to an exam type: {summary.n_unmapped} "
                  f"({100 * summary.unmapped_share:.1f} %); audit groups: {summary.n_groups}")
    console.print(f"Groups compared with a reference level: {summary.n_compared} of {summary.n_groups} "
                  f"(the others say why in audit_medians.reference_scope_note; compare them with the "
                  f"network typical value). Too few exams (n below min_sample: "
                  f"{', '.join(f'{m} {n}' for m, n in sorted(summary.min_sample.items()))}): "
                  f"{summary.n_too_few} groups.")
    table = Table(title="Room medians above their reference level")
    for c in ("Site", "Exam type", "Quantity", "n", "Median", "Reference", "Ratio",
              "Standard-size (50-90 kg) ratio", "Set", "Sample"):
        table.add_column(c)
    for r in summary.exceedances:
        # ICRP 135: the standard-size median is the one to compare where most exams have a weight
        std = (f"{r['ratio_standard_size_to_reference']:.2f} (n {r['n_standard_size']})"
               if r["n_with_weight"] > r["n"] / 2 and r["n_standard_size"] else "weights too sparse")
        table.add_row(str(r["site"]), r["exam_type"], f"{r['quantity']} ({r['unit']})", str(r["n"]),
                      f"{r['median']:.4g}", f"{r['reference_value']:.4g}",
                      f"{r['ratio_to_reference']:.2f}", std, r["reference_set"],
                      "adequate" if r["is_sample_adequate"]
                      else f"[yellow]too few (n < {r['min_sample']})[/yellow]")
    console.print(table if summary.exceedances else "No room median above its reference level.")
    alerts = ", ".join(f"{k}: {v}" for k, v in summary.alerts_by_rule.items()) or "none"
    console.print(f"Individual-exam alerts: {alerts}")
    if summary.drift:
        for d in summary.drift:
            console.print(f"Drift: {d['site']} {d['exam_type']} {d['quantity']}: median "
                          f"{d['median_before']:.4g} -> {d['median_after']:.4g} {d['unit']} from "
                          f"{d['change_month']} (z = {d['statistic_z']:.1f}, "
                          f"p = {d['p_value_bonferroni']:.1e})")
    else:
        console.print("Drift: none flagged.")
    console.print(f"[dim]{CAUTION}[/dim]")


@app.command("audit")
def audit_command(
    warehouse: Path = typer.Option(..., "--warehouse", help="DuckDB warehouse file."),
    period: str | None = typer.Option(None, "--period", help="Calendar month YYYY-MM."),
    date_from: str | None = typer.Option(None, "--from", help="First day YYYY-MM-DD."),
    date_to: str | None = typer.Option(None, "--to", help="Last day YYYY-MM-DD."),
    reference: list[str] = typer.Option([], "--reference", help="Reference set id; repeat to give several in order of precedence (default: [audit] in kerma.toml, else the newest verified sets of one issuing body)."),
    config: Path | None = typer.Option(None, "--config", help="Settings file (default ./kerma.toml)."),
) -> None:
    """Medians against reference levels (ICRP 135), network values, alerts and drift for a period."""
    import datetime as dt

    from .audit import run_audit
    from .config import DEFAULT_CONFIG
    from .errors import ConfigError, WarehouseError

    try:
        d_from = dt.date.fromisoformat(date_from) if date_from else None
        d_to = dt.date.fromisoformat(date_to) if date_to else None
    except ValueError as exc:
        _fail(f"--from/--to must be YYYY-MM-DD ({exc})")
    try:
        summary = run_audit(warehouse, period=period, date_from=d_from, date_to=d_to,
                            reference_sets=reference or None, config=config or DEFAULT_CONFIG)
    except (ConfigError, WarehouseError) as exc:
        _fail(str(exc))
    print_audit_summary(summary)


@app.command("dashboard")
def dashboard_command(
    warehouse: Path = typer.Option(..., "--warehouse", help="DuckDB warehouse file (audited)."),
    period: str | None = typer.Option(None, "--period", help="Calendar month YYYY-MM to report."),
    date_from: str | None = typer.Option(None, "--from", help="First day YYYY-MM-DD."),
    date_to: str | None = typer.Option(None, "--to", help="Last day YYYY-MM-DD."),
    out: Path = typer.Option(..., "--out", help="Folder for the static site."),
    reference: list[str] = typer.Option([], "--reference", help="Reference set id(s), as for `kerma audit`."),
    config: Path | None = typer.Option(None, "--config", help="Settings file (default ./kerma.toml)."),
) -> None:
    """Write the offline dashboards (one self-contained HTML page per area) for a period."""
    import datetime as dt

    from dashboards.site import write_site

    from .audit import run_audit
    from .config import DEFAULT_CONFIG
    from .errors import ConfigError, WarehouseError

    try:
        d_from = dt.date.fromisoformat(date_from) if date_from else None
        d_to = dt.date.fromisoformat(date_to) if date_to else None
        run_audit(warehouse, period=period, date_from=d_from, date_to=d_to,
                  reference_sets=reference or None, config=config or DEFAULT_CONFIG)
        index = write_site(warehouse, out)
    except ValueError as exc:
        _fail(str(exc))
    except (ConfigError, WarehouseError) as exc:
        _fail(str(exc))
    console.print(f"Dashboards written: {index}")


def main() -> None:  # pragma: no cover - console-script entry point
    app()
