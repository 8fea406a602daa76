"""Re-identification vault for follow-up by the key holder (the shell around PyNaCl).

Pseudonymisation in the warehouse stays one-way (HMAC, pipeline/pseudonym.py). For the rare
patient who needs follow-up, ingest can also append to a separate *vault* file, per study, the
study pseudonym and a sealed box (PyNaCl ``SealedBox``: X25519 + XSalsa20-Poly1305, libsodium)
holding the Patient ID, its issuer, the accession number and the study date. Ingest machines
hold only the public key and cannot open what they wrote; only the holder of the private key
can, with ``kerma reidentify``, and every opening is appended to the access log beside the vault.

Files (JSON Lines, append-only):

* vault: ``{"study_key", "recipient", "sealed", "written_at"}`` per study;
* ``<vault>.access.log``: ``{"at", "study_key", "key_fingerprint", "by", "reason"}`` per opening.

No cryptography is written here: sealing, opening and authentication are libsodium's.
"""

from __future__ import annotations

import base64
import datetime as dt
import hashlib
import json
import os
from collections.abc import Iterable
from pathlib import Path

from .errors import ConfigError

__all__ = ["PRIVATE_KEY_NAME", "PUBLIC_KEY_NAME", "access_log_path", "init_keys",
           "key_fingerprint", "load_private_key", "load_public_key", "read_identifiers",
           "reidentify", "seal_studies", "study_identifiers"]

PRIVATE_KEY_NAME = "reidentify-private.key"
PUBLIC_KEY_NAME = "reidentify-public.key"
_HEADERS = {"private": b"# kerma re-identification PRIVATE key (X25519, hex): key holder only",
            "public": b"# kerma re-identification public key (X25519, hex): for ingest --recipient"}
_FIELDS = ("patient_id", "issuer_of_patient_id", "accession_number", "study_date")


def access_log_path(vault: Path) -> Path:
    """The access log beside `vault` (``<vault>.access.log``)."""
    vault = Path(vault)
    return vault.with_name(vault.name + ".access.log")


def key_fingerprint(public_key) -> str:
    """First 16 hex characters of SHA-256 of the raw public key (names a key in logs)."""
    return hashlib.sha256(bytes(public_key)).hexdigest()[:16]


def init_keys(out_dir: Path) -> tuple[Path, Path]:
    """Create a new key pair in `out_dir`: (private key file, public key file).

    The private key file is written with mode 0600 and is for the key holder only.

    Raises
    ------
    ConfigError
        A key file already exists there (keys are never overwritten).
    """
    from nacl.encoding import HexEncoder
    from nacl.public import PrivateKey

    out_dir = Path(out_dir)
    private_path, public_path = out_dir / PRIVATE_KEY_NAME, out_dir / PUBLIC_KEY_NAME
    for path in (private_path, public_path):
        if path.exists():
            raise ConfigError(f"{path} already exists: keys are never overwritten (a lost key "
                              "cannot open what was sealed for it); choose another --out")
    out_dir.mkdir(parents=True, exist_ok=True)
    key = PrivateKey.generate()
    fd = os.open(private_path, os.O_WRONLY | os.O_CREAT | os.O_EXCL, 0o600)
    with os.fdopen(fd, "wb") as fh:
        fh.write(_HEADERS["private"] + b"\n" + key.encode(HexEncoder) + b"\n")
    public_path.write_bytes(_HEADERS["public"] + b"\n" + key.public_key.encode(HexEncoder) + b"\n")
    return private_path, public_path


def _load(path: Path, kind: str):
    from nacl.encoding import HexEncoder
    from nacl.exceptions import CryptoError, TypeError as NaclTypeError, ValueError as NaclValueError
    from nacl.public import PrivateKey, PublicKey

    path = Path(path)
    if not path.is_file():
        raise ConfigError(f"{kind} key file {path} does not exist")
    try:
        header, _, raw = path.read_bytes().strip().partition(b"\n")
        if header != _HEADERS[kind]:
            raise ValueError(header)
        return (PrivateKey if kind == "private" else PublicKey)(raw, encoder=HexEncoder)
    except (CryptoError, NaclTypeError, NaclValueError, ValueError) as exc:
        raise ConfigError(f"{path} is not a {kind} key written by `kerma keys init`") from exc


def load_public_key(path: Path):
    """The recipient's ``nacl.public.PublicKey`` from a file of `init_keys`; ConfigError if not."""
    return _load(path, "public")


def load_private_key(path: Path):
    """The key holder's ``nacl.public.PrivateKey`` from a file of `init_keys`; ConfigError if not."""
    return _load(path, "private")


def study_identifiers(data: bytes, path: str) -> tuple[str, dict] | None:
    """(Study Instance UID, identifiers) of one DICOM object; None when it cannot be read."""
    from .errors import InputError
    from .parsing.common import header_text
    from .sources.files import lenient_pydicom, read_object

    with lenient_pydicom():
        try:
            ds = read_object(data, path).dataset
        except InputError:
            return None
        uid = header_text(ds, "StudyInstanceUID")
        if uid is None:
            return None
        return uid, {"patient_id": header_text(ds, "PatientID"),
                     "issuer_of_patient_id": header_text(ds, "IssuerOfPatientID"),
                     "accession_number": header_text(ds, "AccessionNumber"),
                     "study_date": header_text(ds, "StudyDate")}


def _vault_entries(vault: Path) -> Iterable[tuple[int, dict | None]]:
    if not Path(vault).exists():
        return
    with open(vault, encoding="utf-8") as fh:
        for n, line in enumerate(fh, start=1):
            if line.strip():
                try:
                    yield n, json.loads(line)
                except json.JSONDecodeError:
                    yield n, None


def seal_studies(paths: list[Path], vault: Path, recipient: Path, key: bytes, *,
                 warehouse: Path | None = None) -> int:
    """Append a sealed entry per study found under `paths` that the vault lacks; returns how many.

    Parameters
    ----------
    paths
        The files, folders and archives given to ingest.
    vault
        The vault file (created if missing); never the warehouse.
    recipient
        The key holder's public key file (``reidentify-public.key``).
    key
        The pseudonymisation key of the warehouse (study pseudonyms must match it).
    warehouse
        Refused as a vault path.

    Raises
    ------
    ConfigError
        Bad recipient key, or the vault path is the warehouse.
    """
    from nacl.public import SealedBox

    from .errors import InputError
    from .pseudonym import make_pseudonymiser
    from .sources.files import iter_candidates

    vault = Path(vault)
    if warehouse is not None and vault.resolve() == Path(warehouse).resolve():
        raise ConfigError("--vault must be a file of its own, never the warehouse")
    public = load_public_key(recipient)
    box, fingerprint = SealedBox(public), key_fingerprint(public)
    pseudonymise = make_pseudonymiser(key)
    have = {e["study_key"] for _, e in _vault_entries(vault) if e}
    lines = []
    for candidate in iter_candidates([Path(p) for p in paths]):
        try:
            data = candidate.read()
        except (InputError, OSError):   # unreadable: ingest quarantines it; nothing to seal
            continue
        found = study_identifiers(data, candidate.path)
        if found is None:
            continue
        uid, identifiers = found
        study_key = pseudonymise("study", uid)
        if study_key in have:
            continue
        have.add(study_key)
        sealed = box.encrypt(json.dumps(identifiers, sort_keys=True).encode("utf-8"))
        lines.append(json.dumps({"study_key": study_key, "recipient": fingerprint,
                                 "sealed": base64.b64encode(sealed).decode("ascii"),
                                 "written_at": f"{dt.datetime.now(dt.UTC):%Y-%m-%dT%H:%M:%SZ}"}))
    if lines:
        vault.parent.mkdir(parents=True, exist_ok=True)
        with open(vault, "a", encoding="utf-8") as fh:
            fh.write("".join(line + "\n" for line in lines))
            fh.flush()
            os.fsync(fh.fileno())
    return len(lines)


def read_identifiers(vault: Path, private_key, study_key: str) -> dict:
    """Open the vault entry of `study_key` with `private_key` (no log; see `reidentify`).

    Raises
    ------
    ConfigError
        No vault, no entry for the study, a key that is not the entry's recipient, or an entry
        that does not open (altered).
    """
    from nacl.exceptions import CryptoError
    from nacl.public import SealedBox

    if not Path(vault).is_file():
        raise ConfigError(f"vault {vault} does not exist")
    entry = next((e for _, e in _vault_entries(vault) if e and e.get("study_key") == study_key), None)
    if entry is None:
        raise ConfigError(f"no vault entry for study {study_key} in {vault}")
    fingerprint = key_fingerprint(private_key.public_key)
    if entry.get("recipient") != fingerprint:
        raise ConfigError(f"this private key (fingerprint {fingerprint}) is not the one the entry "
                          f"of study {study_key} was sealed for ({entry.get('recipient')})")
    try:
        plain = SealedBox(private_key).decrypt(base64.b64decode(entry["sealed"], validate=True))
        identifiers = json.loads(plain)
    except (CryptoError, ValueError, KeyError, TypeError) as exc:
        raise ConfigError(f"the vault entry of study {study_key} does not open: it was altered "
                          "or damaged") from exc
    return {k: identifiers.get(k) for k in _FIELDS}


def reidentify(vault: Path, private_key_file: Path, study_key: str, *, reason: str, by: str,
               now: dt.datetime | None = None) -> dict:
    """The identifiers of one study, for follow-up by the key holder; the access is logged.

    Appends ``{"at", "study_key", "key_fingerprint", "by", "reason"}`` to the access log beside
    the vault (`access_log_path`) before returning; a failed opening is not logged as an access.

    Returns
    -------
    dict
        ``patient_id``, ``issuer_of_patient_id``, ``accession_number``, ``study_date``.

    Raises
    ------
    ConfigError
        See `read_identifiers` and `load_private_key`.
    """
    key = load_private_key(private_key_file)
    identifiers = read_identifiers(vault, key, study_key.strip())
    stamp = (now or dt.datetime.now(dt.UTC)).astimezone(dt.UTC)
    record = {"at": f"{stamp:%Y-%m-%dT%H:%M:%SZ}", "study_key": study_key.strip(),
              "key_fingerprint": key_fingerprint(key.public_key), "by": by, "reason": reason}
    with open(access_log_path(vault), "a", encoding="utf-8") as fh:
        fh.write(json.dumps(record) + "\n")
        fh.flush()
        os.fsync(fh.fileno())
    return identifiers
