"""TLS for DICOM associations (PS3.15 Annex B, BCP 195 profile) with Python's ssl module."""

from __future__ import annotations

import ssl
from pathlib import Path

from ..errors import ConfigError

__all__ = ["client_context", "server_context"]


def server_context(cert: Path, key: Path, ca: Path | None = None) -> ssl.SSLContext:
    """TLS 1.2+ server context; with `ca`, peers must present a certificate it signed.

    Raises ConfigError naming the file when a certificate or key cannot be loaded.
    """
    context = ssl.create_default_context(ssl.Purpose.CLIENT_AUTH)
    context.minimum_version = ssl.TLSVersion.TLSv1_2
    _load(context, cert, key, ca)
    if ca is not None:
        context.verify_mode = ssl.CERT_REQUIRED
    return context


def client_context(ca: Path | None = None, cert: Path | None = None,
                   key: Path | None = None) -> ssl.SSLContext:
    """TLS 1.2+ client context that verifies the server against `ca` (else the system store)."""
    context = ssl.create_default_context(ssl.Purpose.SERVER_AUTH)
    context.minimum_version = ssl.TLSVersion.TLSv1_2
    try:
        if ca is not None:
            context.load_verify_locations(cafile=str(ca))
    except (OSError, ssl.SSLError) as exc:
        raise ConfigError(f"cannot load TLS CA certificate {ca}: {exc}") from exc
    if cert is not None:
        _load(context, cert, key, None)
    return context


def _load(context: ssl.SSLContext, cert: Path, key: Path | None, ca: Path | None) -> None:
    try:
        context.load_cert_chain(certfile=str(cert), keyfile=str(key) if key else None)
    except (OSError, ssl.SSLError) as exc:
        raise ConfigError(f"cannot load TLS certificate {cert} / key {key}: {exc}") from exc
    if ca is not None:
        try:
            context.load_verify_locations(cafile=str(ca))
        except (OSError, ssl.SSLError) as exc:
            raise ConfigError(f"cannot load TLS CA certificate {ca}: {exc}") from exc
