"""Skin-dose maps on the alerts page: one per study with a peak-skin-dose alert (NCRP Report
No. 168, 3 Gy, from memory), cells in Gy, with the cautions of an estimate."""

from __future__ import annotations

import json
import re

import duckdb
import numpy as np
import pandas as pd
import pytest

from dashboards.figures import build_skin_dose_map
from pipeline.skin_dose import SkinDoseEvent, compute_skin_dose


def test_the_map_shows_the_models_cells_in_gy():
    result = compute_skin_dose([SkinDoseEvent(
        dose_rp_mgy=4000.0, kvp=80.0, primary_angle_deg=0.0, secondary_angle_deg=0.0,
        source_to_isocenter_mm=750.0, source_to_detector_mm=1000.0, field_area_cm2=400.0,
        table_height_mm=-150.0)])
    i, j = result.dose_map_mgy.nonzero()
    rows = pd.DataFrame({"around_mm": result.around_mm[i], "along_mm": result.along_mm[j],
                         "dose_gy": result.dose_map_mgy[i, j] / 1000.0,
                         "psd_gy": result.psd_mgy / 1000.0})
    fig = build_skin_dose_map(rows, title="Study x")
    z = np.asarray(fig.data[0].z, dtype=float)
    assert z.max() == pytest.approx(result.psd_mgy / 1000.0, rel=1e-12)   # 4 x 1.354 x 1.06 x 0.75
    assert z.sum() == pytest.approx(result.dose_map_mgy.sum() / 1000.0, rel=1e-12)
    assert "Gy" in fig.data[0].colorbar.title.text
    assert f"{result.psd_mgy / 1000:.1f} Gy" in fig.layout.title.text


def test_build_skin_dose_map_refuses_empty_rows():
    with pytest.raises(ValueError, match="no rows"):
        build_skin_dose_map(pd.DataFrame(), title="x")


def test_alerts_page_has_one_map_per_peak_skin_dose_alert_and_the_cautions(site, audited):
    with duckdb.connect(str(audited), read_only=True) as con:
        alerted = con.execute("select count(*) from dose_alerts where family = 'peak_skin_dose'"
                              ).fetchone()[0]
    html = (site / "alerts.html").read_text(encoding="utf-8")
    ids = re.findall(r'id="(fig-skin-dose-[^"]+)"', html)
    assert alerted >= 1 and len(set(ids)) == alerted
    assert "&plusmn;40&nbsp;%" in html and "responsible physician" in html
    assert "qualified medical physicist" in html


def test_the_page_draws_the_highest_maps_only_and_says_how_many_more():
    # common practice, no source: a page holds a bounded number of maps; the data keeps all
    from dashboards.model import Note, Plot
    from dashboards.pages.alerts import MAX_SKIN_MAPS, _skin_dose_section

    n = MAX_SKIN_MAPS + 3
    maps = pd.DataFrame({
        "study_key": [f"s{i:03d}" for i in range(n) for _ in range(2)],
        "device_key": "d", "study_label": "x", "site_label": "Site",
        "psd_gy": [4.0 - 0.01 * i for i in range(n) for _ in range(2)],
        "around_mm": [0.0, 10.0] * n, "along_mm": 0.0, "dose_gy": 1.0})
    blocks = _skin_dose_section(maps).blocks
    plots = [b for b in blocks if isinstance(b, Plot)]
    assert plots[0].div_id == "fig-skin-dose-s000-d"   # rows arrive highest PSD first
    assert len(plots) == MAX_SKIN_MAPS
    assert not any(p.div_id.startswith(f"fig-skin-dose-s{n - 1:03d}") for p in plots)
    more = [b for b in blocks if isinstance(b, Note) and b.key == "skin-dose-more"]
    assert more and more[0].values == {"shown": MAX_SKIN_MAPS, "total": n}
