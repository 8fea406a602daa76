"""Figure builders: PURE functions from mart rows (a pandas DataFrame) to a plotly Figure.

Each builder documents the columns it expects (the SELECT in ``queries/dashboards/`` that
produces them is named) and draws only what those rows say: no statistics are computed
here, so a figure can never disagree with the SQL (distributions and trends plot quantile
summaries, never one point per exam). Builders raise ``ValueError`` for an empty frame; the
page decides what to show instead. One meaning per colour: a site's colour marks only that
site; reference levels, thresholds and drift flags are black or grey.
"""

from .common import DRIFT_COLOUR, INSUFFICIENT_SYMBOL, LOG_SPAN
from .counts import build_alert_counts, build_file_status, build_skin_dose_map, build_weight_share
from .levels import build_distribution, build_reference_comparison
from .series import build_funnel, build_trend

__all__ = [
    "DRIFT_COLOUR",
    "INSUFFICIENT_SYMBOL",
    "LOG_SPAN",
    "build_alert_counts",
    "build_distribution",
    "build_file_status",
    "build_funnel",
    "build_reference_comparison",
    "build_skin_dose_map",
    "build_trend",
    "build_weight_share",
]
