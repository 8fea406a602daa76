"""Pages: PURE assembly of mart rows and figures into page records, rendered by
``dashboards.render`` through the Jinja2 templates (one module per page or pair of pages).

``build_site(data, context)`` returns every page's HTML and every table's rows (written as
CSV beside the page by ``dashboards.site``).
"""

from __future__ import annotations

from collections.abc import Iterable, Sequence

import pandas as pd

from ..model import CAUTIONS, PAGES, Context, DataLink, Page, Site, SiteData, Table
from ..render import render_page
from ..theme import PALETTE, colour_map
from . import alerts, overview, quality, reference, trends
from .common import ALERT_COLUMNS, alert_rows, drift_table

__all__ = ["ALERT_COLUMNS", "CAUTIONS", "PAGES", "alert_rows", "build_pages", "build_site"]


def _collect_tables(pages: Iterable[Page]) -> dict[str, pd.DataFrame]:
    out: dict[str, pd.DataFrame] = {}
    for page in pages:
        for section in page.sections:
            for block in section.blocks:
                if isinstance(block, (Table, DataLink)):
                    previous = out.get(block.name)
                    if previous is not None and previous is not block.rows:
                        raise ValueError(f"two different tables are named {block.name!r}")
                    out[block.name] = block.rows
    return out


def _site_colours(devices: pd.DataFrame) -> dict[str, str]:
    names: Sequence[str] = sorted(devices["site_label"].dropna().unique()) if not devices.empty else []
    colours = colour_map(list(names))
    colours.setdefault("(site not known)", PALETTE[7])
    return colours


def build_pages(data: SiteData, ctx: Context) -> list[Page]:
    """Every page's record, in navigation order."""
    colours = _site_colours(data.devices)
    drift = drift_table(data.drift)
    # the alert list in reading order, worded once for the overview and the alerts page (at 10M
    # events 82k alerts: ~90 MiB more held while the pages were built, measured, no other source)
    listing = alert_rows(data.alerts)
    return [overview.overview(data, ctx, drift, listing), reference.reference_levels(data, colours),
            reference.distributions(data), trends.trends(data, colours, drift),
            trends.sites(data, colours), alerts.alerts(data, colours, listing), quality.data_quality(data)]


def build_site(data: SiteData, ctx: Context) -> Site:
    """Every page (file name -> HTML) and every table (CSV stem -> rows) of the site.

    Parameters
    ----------
    data
        The mart frames (``dashboards.site.read_site_data``).
    ctx
        Period, reference sets, generation time and version printed on every page.

    Returns
    -------
    Site
        ``pages`` (file name -> HTML) and ``tables`` (CSV stem -> rows).
    """
    pages = build_pages(data, ctx)
    return Site(pages={p.file: render_page(p, ctx) for p in pages}, tables=_collect_tables(pages))
