"""The committee report: what needs action first, changes since the previous period, cautions.

``content`` (pure) turns mart rows into sections; ``render`` fills the Jinja2 templates and
lays out the PDF with WeasyPrint; ``read`` is the shell that reads the audited warehouse.
"""

from .content import CAUTIONS, ReportContent, ReportInput, ReportSection, report_content
from .read import read_report_input, write_report
from .render import render_html, write_pdf
from .words import format_value, rule_words

__all__ = ["CAUTIONS", "ReportContent", "ReportInput", "ReportSection", "format_value",
           "read_report_input", "render_html", "report_content", "rule_words", "write_pdf",
           "write_report"]
