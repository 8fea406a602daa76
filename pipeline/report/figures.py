"""Figures of the committee report that a PDF can carry: inline SVG drawn from plain data. Pure.

A PDF needs a static image; plotly's static export needs an extra renderer, so the skin-dose
map is described here as shapes (cells, axes, a colour scale) and drawn by the template
``templates/figures/skin_map.html`` as inline SVG, which WeasyPrint lays out like any HTML.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

__all__ = ["SKIN_MAP_CAUTION", "SkinMapFigure", "skin_map_figure"]

SKIN_MAP_CAUTION = ("An estimate, typically within about ±40 % and depending on the phantom; "
                    "clinical follow-up by the responsible physician.")

# colour scale of the map, low to high dose (light to dark); chosen for this report
_STOPS = ((0.0, (255, 247, 214)), (0.35, (250, 186, 96)), (0.7, (214, 84, 48)),
          (1.0, (112, 20, 36)))
_PLOT = {"left": 62.0, "top": 14.0, "width": 420.0, "height": 250.0}
_LEGEND_X = 500.0


@dataclass(frozen=True)
class SkinMapFigure:
    """What the SVG template draws; coordinates in SVG user units (px)."""

    title: str
    caption: str
    width: float
    height: float
    plot: dict
    cells: list[dict]               # x, y, w, h, fill, label
    peak: dict                      # x, y, w, h of the peak cell
    x_ticks: list[dict]             # x, label
    y_ticks: list[dict]             # y, label
    legend: list[dict]              # y, h, fill (bands, top = high)
    legend_ticks: list[dict]        # y, label
    legend_x: float
    x_label: str
    y_label: str


def _colour(t: float) -> str:
    t = min(max(t, 0.0), 1.0)
    for (t0, c0), (t1, c1) in zip(_STOPS, _STOPS[1:]):
        if t <= t1:
            w = (t - t0) / (t1 - t0)
            return "#%02x%02x%02x" % tuple(round(a + w * (b - a)) for a, b in zip(c0, c1))
    return "#%02x%02x%02x" % _STOPS[-1][1]


def _ticks(lo: float, hi: float, n: int = 5) -> np.ndarray:
    """Round tick values covering [lo, hi] (about n of them)."""
    span = max(hi - lo, 1e-9)
    raw = span / n
    step = 10 ** np.floor(np.log10(raw))
    step *= next(m for m in (1, 2, 2.5, 5, 10) if step * m >= raw)
    return np.arange(np.ceil(lo / step) * step, hi + step * 1e-9, step)


def skin_map_figure(cells: list[dict], *, psd_mgy: float, study_label: str) -> SkinMapFigure:
    """The unrolled skin-dose map of one study as SVG shapes, cells in Gy.

    Parameters
    ----------
    cells : list of dict
        ``around_mm``, ``along_mm``, ``dose_mgy`` per cell with dose (skin_dose_map).
    psd_mgy : float
        The study's peak skin dose (skin_dose.psd_mgy).
    study_label : str
        Printed in the title.

    Returns
    -------
    SkinMapFigure
    """
    around = np.array([c["around_mm"] for c in cells], dtype=float)
    along = np.array([c["along_mm"] for c in cells], dtype=float)
    dose_gy = np.array([c["dose_mgy"] for c in cells], dtype=float) / 1000.0
    p = _PLOT
    columns = np.unique(around)
    steps = np.diff(columns)
    cell_w_mm = float(np.median(steps)) if steps.size else 10.0
    # cells around the ellipse are unevenly spaced: each column reaches halfway to its neighbours
    edges = np.concatenate([[columns[0] - cell_w_mm / 2], (columns[1:] + columns[:-1]) / 2,
                            [columns[-1] + cell_w_mm / 2]])
    gaps = np.diff(edges)
    column_w = {float(c): float(min(w, 2 * cell_w_mm)) for c, w in zip(columns, gaps)}
    steps = np.diff(np.unique(along))
    cell_h_mm = float(np.min(steps)) if steps.size else 10.0
    x0, x1 = around.min() - cell_w_mm, around.max() + cell_w_mm
    y0, y1 = along.min() - cell_h_mm, along.max() + cell_h_mm
    sx, sy = p["width"] / (x1 - x0), p["height"] / (y1 - y0)
    top = max(float(dose_gy.max()), psd_mgy / 1000.0)

    def box(a: float, b: float) -> dict:
        w, h = column_w.get(a, cell_w_mm) * sx, cell_h_mm * sy
        return {"x": round(p["left"] + (a - x0) * sx - w / 2, 2),
                "y": round(p["top"] + (y1 - b) * sy - h / 2, 2),      # head up
                "w": round(w, 2), "h": round(h, 2)}

    shapes = [{**box(a, b), "fill": _colour(d / top), "label": f"{d:.2f} Gy"}
              for a, b, d in zip(around, along, dose_gy)]
    i = int(np.argmax(dose_gy))
    x_ticks = [{"x": round(p["left"] + (v - x0) * sx, 2), "label": f"{v:.0f}"}
               for v in _ticks(x0, x1) if x0 <= v <= x1]
    y_ticks = [{"y": round(p["top"] + (y1 - v) * sy, 2), "label": f"{v:.0f}"}
               for v in _ticks(y0, y1) if y0 <= v <= y1]
    n_bands = 40
    band_h = p["height"] / n_bands
    legend = [{"y": round(p["top"] + k * band_h, 2), "h": round(band_h + 0.3, 2),
               "fill": _colour(1.0 - (k + 0.5) / n_bands)} for k in range(n_bands)]
    legend_ticks = [{"y": round(p["top"] + (1.0 - v / top) * p["height"], 2), "label": f"{v:g}"}
                    for v in _ticks(0.0, top, 4) if v <= top]
    psd_gy = psd_mgy / 1000.0
    return SkinMapFigure(
        title=f"Skin-dose map, study {study_label}: peak skin dose {psd_gy:.2f} Gy (estimate)",
        caption=(f"Estimated skin dose on the unrolled phantom surface, cells in Gy "
                 f"(peak {psd_gy:.2f} Gy, outlined). {SKIN_MAP_CAUTION}"),
        width=_LEGEND_X + 70.0, height=p["top"] + p["height"] + 46.0, plot=p, cells=shapes,
        peak=box(float(around[i]), float(along[i])), x_ticks=x_ticks, y_ticks=y_ticks,
        legend=legend, legend_ticks=legend_ticks, legend_x=_LEGEND_X,
        x_label="around the trunk from the front midline via the patient's right (mm)",
        y_label="along the body, head up (mm)")
