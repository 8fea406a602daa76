"""``kerma keys init`` and ``kerma reidentify``: the key holder's follow-up of a study."""

from __future__ import annotations

import getpass
from pathlib import Path

import typer

from .app import app, console, fail

__all__ = ["keys_app", "keys_init", "reidentify_command"]

keys_app = typer.Typer(help="Keys of the re-identification vault (for the key holder).",
                       no_args_is_help=True)
app.add_typer(keys_app, name="keys")


@keys_app.command("init")
def keys_init(out: Path = typer.Option(..., "--out", help="Folder for the two key files.")) -> None:
    """Create reidentify-private.key (key holder only) and reidentify-public.key (ingest)."""
    from ..errors import ConfigError
    from ..vault import init_keys, key_fingerprint, load_public_key

    try:
        private, public = init_keys(out)
    except ConfigError as exc:
        fail(str(exc))
    console.print(f"Private key: {private} (mode 0600; the key holder keeps it, never on an "
                  f"ingest machine)\nPublic key:  {public} (give it to ingest as --recipient)\n"
                  f"Fingerprint: {key_fingerprint(load_public_key(public))}")


@app.command("reidentify")
def reidentify_command(
    study: str | None = typer.Argument(None, help="The study pseudonym (study_key)."),
    study_key: str | None = typer.Option(None, "--study-key", help="The study pseudonym (instead of the argument)."),
    vault: Path = typer.Option(..., "--vault", help="The vault file written by `kerma ingest --vault`."),
    private_key: Path = typer.Option(..., "--private-key", help="reidentify-private.key."),
    reason: str = typer.Option("not given", "--reason", help="Why (e.g. skin follow-up after a high-dose procedure)."),
    by: str | None = typer.Option(None, "--by", help="Who asks (default: the login name)."),
) -> None:
    """Print a study's Patient ID, issuer, accession number and date; the access is logged."""
    from ..errors import ConfigError
    from ..vault import access_log_path, reidentify

    key = study or study_key
    if not key or (study and study_key and study != study_key):
        fail("give one study pseudonym: as the argument or as --study-key")
    try:
        found = reidentify(vault, private_key, key, reason=reason, by=by or getpass.getuser())
    except ConfigError as exc:
        fail(str(exc))
    for label, field in (("Patient ID", "patient_id"), ("Issuer of Patient ID", "issuer_of_patient_id"),
                         ("Accession number", "accession_number"), ("Study date", "study_date")):
        console.print(f"{label}: {found[field] or '(not recorded)'}")
    console.print(f"[dim]Access logged in {access_log_path(vault)}.[/dim]")
