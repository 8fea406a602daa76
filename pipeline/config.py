"""User settings from ``kerma.toml`` (optional). Only what ingest needs so far: device -> site.

Example::

    [sites]
    # key: a Device Observer UID, a device key (dev-...) or a Station Name; value: the site
    "TGHCT1" = "Tarnwick General Hospital"
"""

from __future__ import annotations

import tomllib
from dataclasses import dataclass, field
from pathlib import Path

from .errors import ConfigError

__all__ = ["DEFAULT_CONFIG", "Settings", "load_settings"]

DEFAULT_CONFIG = Path("kerma.toml")


@dataclass(frozen=True)
class Settings:
    sites: dict[str, str] = field(default_factory=dict)
    source: Path | None = None


def load_settings(path: Path | None = None) -> Settings:
    """Settings from `path`, else ./kerma.toml if it exists, else defaults."""
    if path is None:
        if not DEFAULT_CONFIG.exists():
            return Settings()
        path = DEFAULT_CONFIG
    try:
        raw = tomllib.loads(Path(path).read_text(encoding="utf-8"))
    except OSError as exc:
        raise ConfigError(f"cannot read settings file {path}: {exc.strerror}") from exc
    except tomllib.TOMLDecodeError as exc:
        raise ConfigError(f"settings file {path} is not valid TOML: {exc}") from exc
    sites = raw.get("sites", {})
    if not isinstance(sites, dict) or not all(isinstance(v, str) for v in sites.values()):
        raise ConfigError(f"{path}: [sites] must map device identifiers to site names (strings)")
    return Settings(sites=dict(sites), source=Path(path))
