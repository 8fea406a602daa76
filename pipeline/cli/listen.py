"""``kerma listen``: the Storage SCP, optionally draining its inbox into the warehouse."""

from __future__ import annotations

import logging
import signal
import threading
from pathlib import Path

import typer

from .app import app, console, fail

__all__ = ["configure_logging", "listen"]


def configure_logging() -> None:
    """One line per event on stderr for Kerma Ledger's loggers; pynetdicom's own only on warnings."""
    handler = logging.StreamHandler()
    handler.setFormatter(logging.Formatter("%(asctime)s %(levelname)s %(name)s: %(message)s"))
    kerma = logging.getLogger("kerma")
    kerma.handlers[:] = [handler]
    kerma.setLevel(logging.INFO)
    kerma.propagate = False
    logging.getLogger("pynetdicom").setLevel(logging.WARNING)


@app.command("listen")
def listen(
    ae_title: str = typer.Option(..., "--ae-title", help="Our AE title (1-16 characters)."),
    port: int = typer.Option(11112, "--port", min=1, max=65535, help="TCP port to listen on."),
    inbox: Path = typer.Option(..., "--inbox", help="Folder the received objects are written to."),
    host: str = typer.Option("", "--host", help="Address to bind (default: all interfaces)."),
    allow: list[str] = typer.Option([], "--allow", help="Calling AE title allowed to send; repeat. Default: any."),
    tls_cert: Path | None = typer.Option(None, "--tls-cert", help="PEM certificate: serve TLS (PS3.15 B)."),
    tls_key: Path | None = typer.Option(None, "--tls-key", help="PEM private key of --tls-cert."),
    tls_ca: Path | None = typer.Option(None, "--tls-ca", help="PEM CA: require client certificates it signed."),
    ingest_every: float | None = typer.Option(None, "--ingest-every", min=1, help="Seconds between drains of the inbox into --warehouse."),
    warehouse: Path | None = typer.Option(None, "--warehouse", help="DuckDB warehouse (with --ingest-every)."),
    archive: Path | None = typer.Option(None, "--archive", help="Where drained files go, by day (default: INBOX/../archive)."),
    key_file: Path | None = typer.Option(None, "--key-file", help="Pseudonymisation key file (else $KERMA_PSEUDONYM_KEY)."),
    config: Path | None = typer.Option(None, "--config", help="Settings file (default ./kerma.toml)."),
) -> None:
    """Receive dose reports and images (C-STORE, C-ECHO) into --inbox until stopped (Ctrl-C, SIGTERM)."""
    from ..config import load_settings
    from ..errors import ConfigError, WarehouseError
    from ..exams import load_exam_rules, rule_rows
    from ..net.drain import drain_inbox
    from ..net.scp import make_storage_ae, start_storage_scp
    from ..net.tls import server_context
    from ..pseudonym import load_key

    if (tls_cert is None) != (tls_key is None):
        fail("give both --tls-cert and --tls-key, or neither")
    if tls_ca is not None and tls_cert is None:
        fail("--tls-ca needs --tls-cert and --tls-key")
    if (ingest_every is None) != (warehouse is None):
        fail("--ingest-every and --warehouse go together")
    try:
        ae = make_storage_ae(ae_title, allow=allow)
        context = server_context(tls_cert, tls_key, tls_ca) if tls_cert else None
        key = load_key(key_file) if warehouse is not None else None
        settings = load_settings(config) if warehouse is not None else None
        sites = settings.sites if settings else {}
        # the audit's exam rules (kerma.toml's, then the defaults) for the matches ingest keeps
        rules = rule_rows(load_exam_rules(settings.source)) if settings else None
        if warehouse is not None and warehouse.exists():
            _check_key(warehouse, key)   # refuse before accepting anything, not at the first drain
    except (ValueError, ConfigError, WarehouseError) as exc:
        fail(str(exc))
    configure_logging()
    log = logging.getLogger("kerma.listen")
    stop = threading.Event()
    for signum in (signal.SIGTERM, signal.SIGINT):
        signal.signal(signum, lambda *_: stop.set())
    try:
        server = start_storage_scp(ae, inbox, host=host, port=port, ssl_context=context)
    except OSError as exc:
        fail(f"cannot listen on port {port}: {exc.strerror or exc}")
    archive = archive or inbox.resolve().parent / "archive"
    log.info("listening as %s on %s:%d%s, inbox %s%s", ae_title, host or "*", port,
             " with TLS" if context else "", inbox,
             f", allowed calling AE titles: {', '.join(allow)}" if allow else "")
    refused = None
    try:
        while not stop.wait(ingest_every or 3600):
            if warehouse is None:
                continue
            try:
                drain_inbox(inbox, warehouse, archive, key, sites=sites, exam_rules=rules)
            except WarehouseError as exc:
                log.warning("drain skipped, tried again in %g s: %s", ingest_every, exc)
            except ConfigError as exc:   # e.g. the warehouse now holds another key's epoch
                log.error("drain refused, stopping: %s", exc)
                refused = exc
                break
    finally:
        server.shutdown()   # files not yet drained stay in the inbox for the next start
        log.info("stopped")
    if refused is not None:
        fail(str(refused))
    console.print("stopped")


def _check_key(warehouse: Path, key: bytes) -> None:
    """KeyMismatchError when `key` is not the key of the warehouse's current key epoch."""
    from ..errors import KeyMismatchError
    from ..pseudonym import key_fingerprint
    from ..warehouse.connection import connection
    from ..warehouse.key_epoch import current_key_epoch
    from ..warehouse.load import ensure_schema

    with connection(warehouse) as con:
        ensure_schema(con)
        current = current_key_epoch(con)
    if current is not None and current[1] != key_fingerprint(key):
        raise KeyMismatchError(
            f"the pseudonymisation key differs from the one warehouse {warehouse} was loaded with "
            f"(key epoch {current[0]}): patient linkage would break; start the listener with the "
            "warehouse's key, or run `kerma ingest --new-key-epoch` once to start a new key epoch")
