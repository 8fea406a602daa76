"""SQL of the warehouse, one relation per file (filled in by the ingest work)."""

__all__: list[str] = []
