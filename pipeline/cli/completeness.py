"""``kerma completeness``: the archive's studies of a period against the warehouse's dose objects."""

from __future__ import annotations

from pathlib import Path

import typer

from .app import app, console, fail, parse_day, rows_table

__all__ = ["completeness_command"]


def _archive_url(config: Path | None) -> str | None:
    """[archive] dicomweb of kerma.toml, if set."""
    import tomllib

    from ..config import DEFAULT_CONFIG

    path = config or DEFAULT_CONFIG
    if not path.exists():
        return None
    try:
        return tomllib.loads(path.read_text(encoding="utf-8")).get("archive", {}).get("dicomweb")
    except tomllib.TOMLDecodeError as exc:
        fail(f"settings file {path} is not valid TOML: {exc}")


@app.command("completeness")
def completeness_command(
    warehouse: Path = typer.Option(..., "--warehouse", help="DuckDB warehouse file."),
    period: str | None = typer.Option(None, "--period", help="Calendar month YYYY-MM."),
    date_from: str | None = typer.Option(None, "--from", help="First day YYYY-MM-DD."),
    date_to: str | None = typer.Option(None, "--to", help="Last day YYYY-MM-DD."),
    dicomweb: str | None = typer.Option(None, "--dicomweb", help="DICOMweb service root URL of the archive (default: [archive] dicomweb in kerma.toml)."),
    archive: str | None = typer.Option(None, "--archive", help="HOST:PORT of the archive's Query/Retrieve SCP (C-FIND instead of QIDO-RS)."),
    archive_ae: str | None = typer.Option(None, "--archive-ae", help="The archive's AE title (with --archive)."),
    ae_title: str | None = typer.Option(None, "--ae-title", help="Our AE title (with --archive)."),
    key_file: Path | None = typer.Option(None, "--key-file", help="Pseudonymisation key file (else $KERMA_PSEUDONYM_KEY)."),
    tls_ca: Path | None = typer.Option(None, "--tls-ca", help="CA that signed the archive's HTTPS certificate."),
    config: Path | None = typer.Option(None, "--config", help="Settings file (default ./kerma.toml)."),
) -> None:
    """Count the archive's studies per modality and station (QIDO-RS or C-FIND) and how many have a dose object."""
    import datetime as dt

    import httpx

    from ..audit import period_bounds
    from ..errors import ArchiveError, ConfigError, WarehouseError
    from ..net.completeness import (check_completeness, find_archive_studies_dimse,
                                    find_archive_studies_web)
    from ..net.tls import client_context
    from ..pseudonym import load_key

    url = None if archive else dicomweb or _archive_url(config)
    if url is None and not (archive and archive_ae and ae_title):
        fail("no archive: give --dicomweb URL (or [archive] dicomweb in kerma.toml), or "
             "--archive HOST:PORT with --archive-ae and --ae-title")
    try:
        first, after, label = period_bounds(period, parse_day(date_from, "--from"),
                                            parse_day(date_to, "--to"))
        last = after - dt.timedelta(days=1)
        key = load_key(key_file)
        if url is not None:
            def find():
                with httpx.Client(base_url=url.rstrip("/"), timeout=60,
                                  verify=str(tls_ca) if tls_ca else True) as client:
                    return find_archive_studies_web(client, first, last)
        else:
            host, _, port_text = archive.rpartition(":")
            if not host or not port_text.isdigit():
                fail(f"--archive must be HOST:PORT, not {archive!r}")

            def find():
                return find_archive_studies_dimse(
                    host=host, port=int(port_text), archive_ae=archive_ae, ae_title=ae_title,
                    date_from=first, date_to=last,
                    ssl_context=client_context(tls_ca) if tls_ca else None)
        summary = check_completeness(find, warehouse, key, period=label)
    except (ArchiveError, ConfigError, WarehouseError) as exc:
        fail(str(exc))
    import pandas as pd
    console.print(rows_table(f"Capture completeness {label} (studies in the archive with a dose object)",
                             pd.DataFrame(summary.devices)))
    console.print(f"{summary.n_with_dose_object} of {summary.n_archive_studies} archive studies have a dose "
                  f"object in the warehouse; {len(summary.missing)} without one are listed in "
                  "capture_missing_studies.")
