"""Static offline dashboards built from warehouse marts (filled in by the dashboard work)."""

__all__: list[str] = []
