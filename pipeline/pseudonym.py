"""Keyed pseudonyms for patient and study identifiers (HMAC-SHA256, RFC 2104 / FIPS 198-1).

The key comes from the environment variable KERMA_PSEUDONYM_KEY or a key file; it is never
written to the warehouse. The same key gives the same pseudonyms across runs and sites, so
a network can join its sites' warehouses on patient_key without sharing identifiers.
"""

from __future__ import annotations

import hashlib
import hmac
import os
from collections.abc import Callable
from pathlib import Path

from .errors import ConfigError

__all__ = ["ENV_VAR", "FINGERPRINT_LABEL", "MIN_KEY_BYTES", "key_fingerprint", "load_key",
           "make_pseudonymiser"]

ENV_VAR = "KERMA_PSEUDONYM_KEY"
MIN_KEY_BYTES = 16
# A fixed message: its HMAC under the key identifies the key without revealing it (RFC 2104).
FINGERPRINT_LABEL = b"kerma-ledger pseudonymisation key fingerprint v1"


def load_key(key_file: Path | None = None, environ: dict[str, str] | None = None) -> bytes:
    """The pseudonymisation key from `key_file`, else from KERMA_PSEUDONYM_KEY.

    Raises ConfigError (the command stops) when there is no key or it is shorter than
    16 bytes.
    """
    environ = os.environ if environ is None else environ
    if key_file is not None:
        try:
            key = Path(key_file).read_bytes().strip()
        except OSError as exc:
            raise ConfigError(f"cannot read pseudonymisation key file {key_file}: {exc.strerror}") from exc
        source = f"key file {key_file}"
    elif environ.get(ENV_VAR):
        key = environ[ENV_VAR].encode("utf-8")
        source = ENV_VAR
    else:
        raise ConfigError(
            f"no pseudonymisation key: set {ENV_VAR} or pass --key-file FILE "
            f"(at least {MIN_KEY_BYTES} bytes; keep it outside the warehouse)")
    if len(key) < MIN_KEY_BYTES:
        raise ConfigError(f"pseudonymisation key from {source} is {len(key)} bytes; "
                          f"use at least {MIN_KEY_BYTES}")
    return key


def make_pseudonymiser(key: bytes) -> Callable[[str, str], str]:
    """(namespace, identifier) -> 32 hex characters of HMAC-SHA256(key, namespace|identifier)."""
    def pseudonymise(namespace: str, identifier: str) -> str:
        message = f"{namespace}\x1f{identifier}".encode("utf-8")
        return hmac.new(key, message, hashlib.sha256).hexdigest()[:32]
    return pseudonymise


def key_fingerprint(key: bytes) -> str:
    """16 hex characters of HMAC-SHA256(key, FINGERPRINT_LABEL): tells two keys apart.

    Stored in the warehouse (``key_epoch``) in place of the key, which never enters it; the
    fingerprint cannot be turned back into the key nor used to compute any pseudonym.
    """
    return hmac.new(key, FINGERPRINT_LABEL, hashlib.sha256).hexdigest()[:16]
