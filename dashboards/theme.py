"""One visual language for every dashboard figure: palette, plotly template, labels with units.

The palette is the eight-colour set of Okabe & Ito (2008, "Color Universal Design"), chosen
because it stays distinguishable under the common colour-vision deficiencies. Colour never
carries meaning alone: sample adequacy is also a marker shape (filled / open), reference
lines also differ by dash, and every flag in a table is a word.
"""

from __future__ import annotations

import plotly.graph_objects as go

__all__ = [
    "FONT_FAMILY",
    "INK",
    "MUTED",
    "PALETTE",
    "POPULATION_COLOURS",
    "QUANTITY_LONG",
    "QUANTITY_NAMES",
    "REFERENCE_COLOUR",
    "NETWORK_COLOUR",
    "TEMPLATE",
    "axis_title",
    "colour_map",
    "quantity_name",
    "unit_label",
]

# Okabe-Ito, reordered so the first colours are the most separable on white paper.
PALETTE: tuple[str, ...] = (
    "#0072B2",  # blue
    "#E69F00",  # orange
    "#009E73",  # bluish green
    "#D55E00",  # vermillion
    "#CC79A7",  # reddish purple
    "#56B4E9",  # sky blue
    "#8C6D1F",  # dark ochre (Okabe-Ito yellow darkened: plain yellow is unreadable on white)
    "#444444",  # near-black
)
INK = "#1d2530"
MUTED = "#6b7280"
REFERENCE_COLOUR = "#111111"
NETWORK_COLOUR = "#7a7a7a"
POPULATION_COLOURS = {"adult": PALETTE[0], "paediatric": PALETTE[1]}
FONT_FAMILY = "'Segoe UI', 'DejaVu Sans', 'Liberation Sans', Arial, sans-serif"

# Audit quantity -> short name (axes, tables) and long name (titles); the unit comes from the
# data (see unit_label).
QUANTITY_NAMES: dict[str, str] = {
    "dlp": "DLP",
    "ctdivol": "CTDIvol",
    "dap": "DAP",
    "dose_rp": "Ka,r",
    "fluoro_time": "Fluoroscopy time",
    "agd": "AGD",
    "ka_e": "Ka,e",
    "entrance_dose": "Entrance dose",
    "effective_dose": "Effective dose (estimate)",
    "ssde": "SSDE",
    "peak_skin_dose": "Peak skin dose (estimate)",
}
QUANTITY_LONG: dict[str, str] = {
    "dlp": "Dose-length product (DLP)",
    "ctdivol": "Volume CT dose index (CTDIvol)",
    "dap": "Kerma-area product (DAP)",
    "dose_rp": "Air kerma at the reference point (Ka,r)",
    "fluoro_time": "Fluoroscopy time",
    "agd": "Average glandular dose (AGD)",
    "ka_e": "Entrance surface air kerma (Ka,e)",
    "entrance_dose": "Entrance dose from image headers (not Ka,e unless derived as ESAK)",
    "effective_dose": "Effective dose (population-average estimate)",
    "ssde": "Size-specific dose estimate (SSDE)",
    "peak_skin_dose": "Peak skin dose (estimate, NCRP 168)",
}

_UNITS: dict[str, str] = {
    "mGy.cm": "mGy·cm",
    "mGy.cm2": "mGy·cm²",
    "Gy.cm2": "Gy·cm²",
    "Gy.m2": "Gy·m²",
    "dGy.cm2": "dGy·cm²",
    "uGy.m2": "µGy·m²",
    "mGy": "mGy",
    "Gy": "Gy",
    "s": "s",
    "min": "min",
    "mSv": "mSv",
}


def unit_label(unit: str | None) -> str:
    """Display form of a warehouse unit ('Gy.cm2' -> 'Gy·cm²'); unknown units pass through."""
    if unit is None or unit != unit or unit == "":
        return "unit not stated"
    return _UNITS.get(unit, unit)


def quantity_name(quantity: str, *, long: bool = False) -> str:
    """Display name of an audit quantity; an unknown quantity shows its own name."""
    return (QUANTITY_LONG if long else QUANTITY_NAMES).get(quantity, quantity)


def axis_title(quantity: str, unit: str | None) -> str:
    """'DLP (mGy·cm)': every value axis carries its quantity and unit."""
    return f"{quantity_name(quantity)} ({unit_label(unit)})"


def colour_map(keys: list[str]) -> dict[str, str]:
    """Stable colour per key in the order given (cycles after eight keys)."""
    return {key: PALETTE[i % len(PALETTE)] for i, key in enumerate(keys)}


TEMPLATE = go.layout.Template(
    layout=go.Layout(
        font={"family": FONT_FAMILY, "size": 12, "color": INK},
        paper_bgcolor="#ffffff",
        plot_bgcolor="#ffffff",
        colorway=list(PALETTE),
        margin={"l": 70, "r": 24, "t": 56, "b": 60},
        title={"font": {"size": 14, "color": INK}, "x": 0.0, "xanchor": "left", "y": 0.995,
               "yanchor": "top", "yref": "container"},
        legend={"orientation": "v", "yanchor": "top", "y": 1.0, "x": 1.02, "xanchor": "left",
                "font": {"size": 11}, "bgcolor": "rgba(255,255,255,0)"},
        hoverlabel={"font": {"family": FONT_FAMILY, "size": 12}},
        xaxis={"showline": True, "linecolor": "#9aa3ad", "ticks": "outside",
               "tickcolor": "#9aa3ad", "gridcolor": "#eceff2", "zeroline": False,
               "title": {"font": {"size": 12}}, "automargin": True},
        yaxis={"showline": True, "linecolor": "#9aa3ad", "ticks": "outside",
               "tickcolor": "#9aa3ad", "gridcolor": "#eceff2", "zeroline": False,
               "title": {"font": {"size": 12}}, "automargin": True},
    )
)
