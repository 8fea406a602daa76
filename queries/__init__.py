"""SQL of the warehouse: one relation (or one load statement) per file; a tiny loader.

Layers run schema -> staging -> derived (tables kept from staging views) -> marts; a view may
read only from earlier layers. Statements
in ``load/`` are run by the ingest for each batch.
"""

from __future__ import annotations

from functools import cache
from pathlib import Path

__all__ = ["LAYERS", "ROOT", "apply_all", "sql"]

ROOT = Path(__file__).parent
LAYERS = ("schema", "staging", "derived", "marts")


@cache
def sql(name: str) -> str:
    """Text of the one file ``queries/*/<name>.sql``; KeyError naming `name` if 0 or >1 match."""
    matches = sorted(ROOT.glob(f"*/{name}.sql"))
    if len(matches) != 1:
        raise KeyError(f"expected one SQL file named {name}.sql under {ROOT}, found {len(matches)}")
    return matches[0].read_text(encoding="utf-8")


def apply_all(con) -> list[str]:
    """Create every table and view, layer by layer; returns relation names in creation order.

    Within a layer, a view that reads another view of the same layer is created after it:
    files are retried until every one succeeds (or no progress is possible, which re-raises).
    """
    import duckdb

    names = []
    for layer in LAYERS:
        pending = sorted((ROOT / layer).glob("*.sql"))
        while pending:
            failed, error = [], None
            for path in pending:
                try:
                    con.execute(path.read_text(encoding="utf-8"))
                    names.append(path.stem)
                except (duckdb.CatalogException, duckdb.BinderException) as exc:
                    failed.append(path)
                    error = exc
            if len(failed) == len(pending):
                raise error
            pending = failed
    return names
