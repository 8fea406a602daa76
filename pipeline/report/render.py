"""Render the committee report: Jinja2 templates (autoescaped) to HTML, WeasyPrint to PDF.

The PDF is laid out by WeasyPrint (CSS Paged Media: margin boxes carry the page numbers and a
running footer with the period, the reference sets and the generation time on every page);
no PDF is drawn by hand.
"""

from __future__ import annotations

from pathlib import Path

import jinja2

from .content import ReportContent

__all__ = ["render_html", "write_pdf"]


def _environment() -> jinja2.Environment:
    return jinja2.Environment(loader=jinja2.PackageLoader("pipeline.report", "templates"),
                              autoescape=jinja2.select_autoescape(("html", "css")),
                              undefined=jinja2.StrictUndefined, trim_blocks=True,
                              lstrip_blocks=True)


def render_html(content: ReportContent) -> str:
    """The report as one self-contained HTML document (pure: content in, text out)."""
    return _environment().get_template("report.html").render(content=content)


def write_pdf(html: str, out: Path) -> Path:
    """Lay out `html` with WeasyPrint and write the PDF to `out`; returns `out`."""
    import logging

    from weasyprint import HTML

    # WeasyPrint logs every CSS property it ignores at WARNING; the report's CSS is checked by
    # the tests instead (tables whole, footers present), so keep the console quiet.
    logging.getLogger("weasyprint").setLevel(logging.ERROR)
    logging.getLogger("fontTools").setLevel(logging.ERROR)
    out = Path(out)
    out.parent.mkdir(parents=True, exist_ok=True)
    HTML(string=html, base_url=str(out.parent)).write_pdf(out)
    return out
