"""``kerma pull``: fetch the dose reports of a date range from an archive (DIMSE or DICOMweb)."""

from __future__ import annotations

from pathlib import Path

import typer

from .app import app, console, fail, parse_day

__all__ = ["pull"]


@app.command("pull")
def pull(
    date_from: str = typer.Option(..., "--from", help="First study date YYYY-MM-DD."),
    date_to: str = typer.Option(..., "--to", help="Last study date YYYY-MM-DD."),
    inbox: Path = typer.Option(..., "--inbox", help="Folder the fetched objects are written to."),
    archive: str | None = typer.Option(None, "--archive", help="HOST:PORT of the archive's Query/Retrieve SCP."),
    archive_ae: str | None = typer.Option(None, "--archive-ae", help="The archive's AE title."),
    ae_title: str | None = typer.Option(None, "--ae-title", help="Our AE title (the archive must know it)."),
    port: int = typer.Option(11113, "--port", min=1, max=65535, help="Port of our temporary Storage SCP (C-MOVE)."),
    method: str = typer.Option("move", "--method", help="move (C-MOVE to our SCP) or get (C-GET)."),
    modality: list[str] = typer.Option([], "--modality", help="Only studies with this modality (ModalitiesInStudy); repeat."),
    dicomweb: str | None = typer.Option(None, "--dicomweb", help="DICOMweb service root URL (QIDO-RS / WADO-RS) instead of DIMSE."),
    warehouse: Path | None = typer.Option(None, "--warehouse", help="Skip what this warehouse already recorded."),
    archive_folder: Path | None = typer.Option(None, "--archive-folder", help="Also skip what a drain moved here (default: INBOX/../archive)."),
    tls_ca: Path | None = typer.Option(None, "--tls-ca", help="DIMSE over TLS: CA that signed the archive's certificate."),
) -> None:
    """Find dose reports by study date and fetch those not already in the inbox or warehouse."""
    from ..errors import ArchiveError, ConfigError, WarehouseError
    from ..net.dicomweb import pull_dicomweb
    from ..net.dimse import pull_dimse
    from ..net.inbox import have_instances
    from ..net.tls import client_context
    from ..warehouse.connection import connection
    from ..warehouse.records import recorded_sop_instance_uids

    first, last = parse_day(date_from, "--from"), parse_day(date_to, "--to")
    if last < first:
        fail("--to is before --from")
    if dicomweb is None and not (archive and archive_ae and ae_title):
        fail("give --archive HOST:PORT, --archive-ae and --ae-title (DIMSE), or --dicomweb URL")
    if method not in ("move", "get"):
        fail(f"--method must be move or get, not {method!r}")
    archive_folder = archive_folder or inbox.resolve().parent / "archive"
    have = have_instances(inbox, archive_folder)
    try:
        if warehouse is not None:   # a missing file is refused, never taken as empty
            with connection(warehouse, read_only=True) as con:
                have |= recorded_sop_instance_uids(con)
        if dicomweb is not None:
            summary = pull_dicomweb(dicomweb, date_from=first, date_to=last, inbox=inbox,
                                    have=have, modalities=modality,
                                    verify=str(tls_ca) if tls_ca else True)
            source = dicomweb
        else:
            host, _, port_text = archive.rpartition(":")
            if not host or not port_text.isdigit():
                fail(f"--archive must be HOST:PORT, not {archive!r}")
            context = client_context(tls_ca) if tls_ca else None
            summary = pull_dimse(host=host, port=int(port_text), archive_ae=archive_ae,
                                 ae_title=ae_title, our_port=port, date_from=first, date_to=last,
                                 inbox=inbox, have=have, modalities=modality, method=method,
                                 ssl_context=context)
            source = f"{archive_ae}@{archive}"
    except (ArchiveError, ConfigError, WarehouseError) as exc:
        fail(str(exc))
    console.print(f"{source}: {summary.n_studies} studies from {first} to {last}, "
                  f"{summary.n_found} dose reports; {summary.n_already} already held, "
                  f"{summary.n_fetched} fetched into {inbox}, {summary.n_failed} failed")
    for failure in summary.failures:
        console.print(f"  [red]not fetched:[/red] {failure}")
    if summary.failures:
        raise typer.Exit(code=1)
