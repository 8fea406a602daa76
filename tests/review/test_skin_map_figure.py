"""The committee report's skin-dose map: pure shapes (pipeline/report/figures.py) drawn as inline
SVG by the Jinja2 template; read back with the standard library's XML parser."""

import xml.etree.ElementTree as ET

import pytest

from pipeline.report.figures import SKIN_MAP_CAUTION, skin_map_figure
from pipeline.report.render import _environment
from pipeline.skin_dose import SkinDoseEvent, compute_skin_dose

SVG = "{http://www.w3.org/2000/svg}"


@pytest.fixture(scope="module")
def cells():
    """A PA field and a lateral field of the model (pipeline/skin_dose.py)."""
    pa = dict(dose_rp_mgy=3000.0, kvp=80.0, added_cu_mm=0.1, primary_angle_deg=0.0,
              secondary_angle_deg=0.0, source_to_isocenter_mm=750.0, source_to_detector_mm=1000.0,
              field_area_cm2=400.0, table_height_mm=-150.0)
    result = compute_skin_dose([SkinDoseEvent(**pa),
                                SkinDoseEvent(**{**pa, "primary_angle_deg": 90.0, "dose_rp_mgy": 800.0})])
    i, j = result.dose_map_mgy.nonzero()
    return result.psd_mgy, [{"around_mm": float(result.around_mm[a]), "along_mm": float(result.along_mm[b]),
                             "dose_mgy": float(result.dose_map_mgy[a, b])} for a, b in zip(i, j)]


def test_every_cell_is_drawn_in_gy_with_the_peak_outlined(cells):
    psd, rows = cells
    figure = skin_map_figure(rows, psd_mgy=psd, study_label="abc123")
    assert len(figure.cells) == len(rows)
    peak = max(rows, key=lambda r: r["dose_mgy"])
    assert f"{peak['dose_mgy'] / 1000:.2f} Gy" in {c["label"] for c in figure.cells}
    assert f"peak skin dose {psd / 1000:.2f} Gy" in figure.title
    assert SKIN_MAP_CAUTION in figure.caption and "±40 %" in figure.caption
    assert "responsible physician" in figure.caption
    # cells stay inside the plot; the legend runs from 0 Gy up to the peak
    p = figure.plot
    for c in figure.cells:
        assert p["left"] <= c["x"] and c["x"] + c["w"] <= p["left"] + p["width"] + 1e-6
        assert p["top"] <= c["y"] and c["y"] + c["h"] <= p["top"] + p["height"] + 1e-6
    labels = [float(t["label"]) for t in figure.legend_ticks]
    assert labels[0] == 0.0 and labels[-1] <= psd / 1000
    # darker is higher: the peak cell's colour is the darkest drawn
    def lum(hex_colour):
        r, g, b = (int(hex_colour[k:k + 2], 16) for k in (1, 3, 5))
        return 0.299 * r + 0.587 * g + 0.114 * b
    darkest = min(figure.cells, key=lambda c: lum(c["fill"]))
    assert darkest["label"] == f"{peak['dose_mgy'] / 1000:.2f} Gy"


def test_the_template_writes_valid_svg_with_axis_labels(cells):
    psd, rows = cells
    figure = skin_map_figure(rows, psd_mgy=psd, study_label="<b>&")
    markup = _environment().get_template("figures/skin_map.html").render(figure=figure)
    root = ET.fromstring(markup.strip())                             # parses: well-formed XML
    assert root.tag == f"{SVG}svg"
    texts = [t.text for t in root.iter(f"{SVG}text")]
    assert "along the body, head up (mm)" in texts and "Gy" in texts
    assert any("front midline" in (t or "") for t in texts)
    assert root.find(f"{SVG}title").text == figure.title            # escaped, then read back
    assert len(root.findall(f"{SVG}rect")) >= len(rows) + 40
