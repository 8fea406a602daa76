"""The ``kerma`` command line: one small module per command group, thin wrappers over plain
functions (the application layer; nothing in the core imports it)."""

from __future__ import annotations

from .app import app

# Importing a module registers its commands; this order is the order of `kerma --help`.
from . import corpus, ingest, query, exams, reference, audit  # noqa: E402,F401,I001
from . import listen, pull, run, completeness  # noqa: E402,F401,I001
from . import note, report, keys, survey  # noqa: E402,F401,I001
from . import schema  # noqa: E402,F401,I001
from . import network  # noqa: E402,F401,I001

__all__ = ["app", "main"]


def main() -> None:  # pragma: no cover - console-script entry point
    app()
