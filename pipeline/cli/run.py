"""``kerma run monthly`` (one run now) and ``kerma schedule monthly`` (Prefect serve on a cron)."""

from __future__ import annotations

from pathlib import Path

import typer

from .app import app, console, fail

__all__ = ["run_app", "run_monthly_command", "schedule_app", "schedule_monthly_command"]

run_app = typer.Typer(help="Run a flow once, now (Prefect local mode, or PREFECT_API_URL's server).",
                      no_args_is_help=True)
schedule_app = typer.Typer(help="Serve a flow on a schedule (Prefect serve).", no_args_is_help=True)
app.add_typer(run_app, name="run")
app.add_typer(schedule_app, name="schedule")


def _parameters(warehouse: Path, inbox: Path, out: Path, key_file: Path | None,
                config: Path | None, reference: list[str], workers: int,
                dask_workers: int | None, dask_address: str | None) -> dict:
    if dask_workers is not None and dask_address is not None:
        fail("give --dask-workers or --dask-address, not both")
    return {"warehouse": warehouse.resolve(), "inbox": inbox.resolve(), "out": out.resolve(),
            "key_file": key_file.resolve() if key_file else None,
            "config": config.resolve() if config else None,
            "reference_sets": reference or None, "workers": workers,
            "dask_workers": dask_workers, "dask_address": dask_address}


@run_app.command("monthly")
def run_monthly_command(
    period: str | None = typer.Option(None, "--period", help="Month YYYY-MM (default: the month before today)."),
    warehouse: Path = typer.Option(..., "--warehouse", help="DuckDB warehouse file."),
    inbox: Path = typer.Option(..., "--inbox", help="Folder (or files) to ingest first."),
    out: Path = typer.Option(..., "--out", help="Folder for the dashboards."),
    key_file: Path | None = typer.Option(None, "--key-file", help="Pseudonymisation key file (else $KERMA_PSEUDONYM_KEY)."),
    config: Path | None = typer.Option(None, "--config", help="Settings file (default ./kerma.toml)."),
    reference: list[str] = typer.Option([], "--reference", help="Reference set id(s), as for `kerma audit`."),
    workers: int = typer.Option(1, "--workers", min=1, help="Local parsing processes (without Dask)."),
    dask_workers: int | None = typer.Option(None, "--dask-workers", min=1, help="Parse on a new local Dask cluster of N workers."),
    dask_address: str | None = typer.Option(None, "--dask-address", help="Parse on the Dask cluster at tcp://HOST:PORT."),
    new_key_epoch: bool = typer.Option(False, "--new-key-epoch", help="Accept a key other than the warehouse's: start a new key epoch."),
) -> None:
    """Ingest the inbox, audit the month and write the dashboards, as one recorded Prefect flow run."""
    from ..errors import ConfigError, WarehouseError
    from ..flows import run_monthly
    from .audit import print_audit_summary
    from .ingest import ingest_table

    parameters = _parameters(warehouse, inbox, out, key_file, config, reference, workers,
                             dask_workers, dask_address)
    try:
        result = run_monthly(period=period, new_key_epoch=new_key_epoch, **parameters)
    except (ConfigError, WarehouseError) as exc:
        fail(str(exc))
    console.print(ingest_table(result.ingest))
    print_audit_summary(result.audit)
    console.print(f"Dashboards written: {result.site_index}")


@schedule_app.command("monthly")
def schedule_monthly_command(
    cron: str = typer.Option("0 6 1 * *", "--cron", help="Cron schedule (server time zone); default 06:00 on the 1st."),
    name: str = typer.Option("kerma-monthly", "--name", help="Deployment name."),
    warehouse: Path = typer.Option(..., "--warehouse", help="DuckDB warehouse file."),
    inbox: Path = typer.Option(..., "--inbox", help="Folder to ingest first."),
    out: Path = typer.Option(..., "--out", help="Folder for the dashboards."),
    key_file: Path | None = typer.Option(None, "--key-file", help="Pseudonymisation key file (else $KERMA_PSEUDONYM_KEY)."),
    config: Path | None = typer.Option(None, "--config", help="Settings file (default ./kerma.toml)."),
    reference: list[str] = typer.Option([], "--reference", help="Reference set id(s)."),
    workers: int = typer.Option(1, "--workers", min=1, help="Local parsing processes."),
    dask_workers: int | None = typer.Option(None, "--dask-workers", min=1, help="Parse on a new local Dask cluster of N workers."),
    dask_address: str | None = typer.Option(None, "--dask-address", help="Parse on the Dask cluster at tcp://HOST:PORT."),
) -> None:
    """Serve the monthly flow on --cron until stopped; each run audits the month before it."""
    from prefect import serve

    from ..flows import monthly_deployment

    parameters = _parameters(warehouse, inbox, out, key_file, config, reference, workers,
                             dask_workers, dask_address)
    try:
        deployment = monthly_deployment(name, cron, {k: str(v) if isinstance(v, Path) else v
                                                     for k, v in parameters.items()})
    except ValueError as exc:
        fail(str(exc))
    console.print(f"Serving flow 'monthly' as deployment {name!r} on cron {cron!r}; stop with Ctrl-C.")
    serve(deployment)
