"""Figure builders: traces, axis titles with units, reference lines, insufficient samples marked."""

from __future__ import annotations

import pandas as pd
import plotly.graph_objects as go
import pytest

from dashboards import figures
from dashboards.theme import PALETTE, REFERENCE_COLOUR, axis_title, colour_map, unit_label

SITES = colour_map(["North Site", "South Site"])


def _axis_titles(fig: go.Figure) -> list[str]:
    layout = fig.to_plotly_json()["layout"]
    return [axis["title"]["text"] for key, axis in sorted(layout.items())
            if key.startswith(("xaxis", "yaxis")) and "title" in axis]


def _room_medians() -> pd.DataFrame:
    return pd.DataFrame({
        "exam_label": ["CT head", "CT head", "CT chest"],
        "phantom": [None, None, None],
        "site_label": ["North Site", "South Site", "North Site"],
        "room_label": ["CT-A", "CT-B", "CT-A"],
        "n": [40, 7, 25],
        "median": [1100.0, 800.0, 300.0],
        "median_ci_low": [1000.0, None, 260.0],
        "median_ci_high": [1200.0, None, 330.0],
        "unit": ["mGy.cm"] * 3,
        "quantity": ["dlp"] * 3,
        "reference_value": [970.0, 970.0, None],
        "reference_set": ["set_a", "set_a", None],
        "network_p75": [1050.0, 1050.0, 310.0],
        "is_sample_adequate": [True, False, True],
    })


def test_reference_comparison_draws_rooms_reference_and_network_values():
    fig = figures.build_reference_comparison(_room_medians(), site_colours=SITES, title="CT: DLP")
    by_name = {t.name: t for t in fig.data if t.name}
    assert set(by_name) == {"North Site", "South Site", "Reference level (set_a)",
                            "Network 75th percentile of room medians"}
    # The reference ticks sit at the reference values of the rows that have one (not CT chest).
    assert list(by_name["Reference level (set_a)"].x) == [970.0, 970.0]
    assert list(by_name["Network 75th percentile of room medians"].x) == [1050.0, 1050.0, 310.0]
    north = by_name["North Site"]
    assert list(north.x) == [1100.0, 300.0]
    assert list(north.error_x.array) == [100.0, 30.0] and list(north.error_x.arrayminus) == [100.0, 40.0]
    assert "DLP (mGy·cm)" in fig.layout.xaxis.title.text


def test_reference_comparison_marks_insufficient_samples_with_open_marker_and_label():
    fig = figures.build_reference_comparison(_room_medians(), site_colours=SITES, title="t")
    south = next(t for t in fig.data if t.name == "South Site")
    assert list(south.marker.symbol) == [figures.INSUFFICIENT_SYMBOL]
    north = next(t for t in fig.data if t.name == "North Site")
    assert list(north.marker.symbol) == ["circle", "circle"]
    # short row labels: room and n; the site is named only in the legend (issue 11 review)
    assert list(south.y[1]) == ["CT-B (n 7)"] and list(north.y[1]) == ["CT-A (n 40)", "CT-A (n 25)"]
    labels = [label for t in fig.data if t.y is not None for label in t.y[1]]
    assert labels and not any("Site" in label for label in labels)
    # the legend sits above the plot (horizontal), leaving the width to the data
    assert fig.layout.legend.orientation == "h" and fig.layout.legend.yanchor == "bottom"


def test_reference_comparison_band_in_label_and_single_exam_without_interval():
    rows = _room_medians().assign(stratum=["weight 15-<30 kg", None, None])
    rows.loc[1, "n"] = 1
    fig = figures.build_reference_comparison(rows, site_colours=SITES, title="t")
    north = next(t for t in fig.data if t.name == "North Site")
    south = next(t for t in fig.data if t.name == "South Site")
    assert north.y[1][0] == "CT-A · 15-<30 kg (n 40)" and list(south.y[1]) == ["CT-B (n 1)"]
    assert list(south.error_x.array) == [None] and list(south.error_x.arrayminus) == [None]


def test_thresholds_are_black_or_grey_never_a_site_colour():
    fig = figures.build_reference_comparison(_room_medians(), site_colours=SITES, title="t")
    marks = [t for t in fig.data if t.name and t.name.startswith(("Reference level", "Network"))]
    colours = {t.marker.line.color for t in marks}
    assert colours and colours <= {"#111111", "#7a7a7a"} and not colours & set(SITES.values())


def test_reference_comparison_uses_log_axis_only_for_wide_spans():
    narrow = figures.build_reference_comparison(_room_medians().iloc[:2], site_colours=SITES, title="t")
    assert narrow.layout.xaxis.type == "linear"
    wide = _room_medians()
    wide.loc[2, ["median", "median_ci_low", "median_ci_high", "network_p75"]] = [20.0, 15.0, 25.0, 22.0]
    fig = figures.build_reference_comparison(wide, site_colours=SITES, title="t")
    assert fig.layout.xaxis.type == "log" and fig.layout.xaxis.title.text.endswith("log scale")


def _distribution() -> pd.DataFrame:
    return pd.DataFrame({
        "quantity": ["ctdivol", "ctdivol", "dlp"], "unit": ["mGy", "mGy", "mGy.cm"],
        "phantom": ["head_16cm", "head_16cm", None], "population": ["adult", "paediatric", "adult"],
        "site_label": ["North Site"] * 3, "room_label": ["CT-A"] * 3, "n": [40, 3, 40],
        "p05": [30.0, 20.0, 700.0], "p25": [40.0, 25.0, 900.0], "median": [45.0, 28.0, 1000.0],
        "p75": [50.0, 31.0, 1100.0], "p95": [60.0, 35.0, 1300.0],
        "reference_value": [60.0, None, 970.0], "reference_set": ["set_a", None, "set_a"],
        "is_sample_adequate": [True, False, True],
    })


def test_distribution_boxes_carry_the_order_statistics_and_reference_lines():
    fig = figures.build_distribution(_distribution(), title="CT head")
    boxes = [t for t in fig.data if isinstance(t, go.Box)]
    assert [(b.name, list(b.q1), list(b.median), list(b.q3), list(b.lowerfence), list(b.upperfence))
            for b in boxes] == [
        ("adult", [40.0], [45.0], [50.0], [30.0], [60.0]),
        ("paediatric, sample below the audit minimum", [25.0], [28.0], [31.0], [20.0], [35.0]),
        ("adult", [900.0], [1000.0], [1100.0], [700.0], [1300.0]),
    ]
    # Insufficient sample: unfilled box, said in its legend name.
    assert boxes[1].fillcolor == "rgba(255,255,255,0)" and boxes[0].fillcolor != boxes[1].fillcolor
    lines = sorted((s.y0, s.yref) for s in fig.layout.shapes if s.type == "line")
    assert lines == [(60.0, "y"), (970.0, "y2")]
    texts = [a.text for a in fig.layout.annotations]
    assert "Reference level 970 mGy·cm (adult, set_a)" in texts
    titles = _axis_titles(fig)
    assert "CTDIvol, 16 cm head phantom (mGy)" in titles and "DLP (mGy·cm)" in titles
    assert titles.count("Room · site (n adult / paediatric exams)") == 2
    assert "n 40 / 3" in boxes[0].x[0]


def _monthly() -> pd.DataFrame:
    months = ["2026-09", "2026-10", "2026-11"]
    return pd.DataFrame({
        "quantity": ["dap"] * 3, "unit": ["Gy.cm2"] * 3, "phantom": [None] * 3, "month": months,
        "site_label": ["North Site"] * 3, "room_label": ["DR-1"] * 3, "n": [30, 31, 29],
        "median": [0.09, 0.05, 0.048], "p25": [0.07, 0.04, 0.04], "p75": [0.1, 0.06, 0.055],
        "reference_value": [0.1] * 3, "reference_set": ["set_b"] * 3,
    })


def test_trend_marks_drift_flag_at_its_month_and_draws_reference():
    drift = pd.DataFrame({"quantity": ["dap"], "room_label": ["DR-1"], "change_month": ["2026-10"],
                          "ratio_after_to_before": [0.53]})
    fig = figures.build_trend(_monthly(), drift, site_colours=SITES, title="Chest PA")
    (series,) = [t for t in fig.data if t.name == "DR-1 · North Site"]
    assert list(series.x) == ["2026-09-15", "2026-10-15", "2026-11-15"]
    assert list(series.y) == [0.09, 0.05, 0.048]
    drift_lines = [s for s in fig.layout.shapes if s.x0 == "2026-10-01"]
    # one meaning per colour: the drift flag is grey, not a site's colour
    assert len(drift_lines) == 1 and drift_lines[0].line.color == figures.DRIFT_COLOUR
    assert figures.DRIFT_COLOUR not in PALETTE
    assert any(a.text == "drift flag: DR-1 -47 % from Oct 2026" for a in fig.layout.annotations)
    assert [s.y0 for s in fig.layout.shapes if s.y0 == s.y1] == [0.1]
    assert _axis_titles(fig) == ["Month of study (calendar month)", "Median DAP (Gy·cm²)"]


def test_trend_bars_are_dodged_per_room_within_a_month():
    two = pd.concat([_monthly(), _monthly().assign(room_label="DR-2", site_label="South Site")])
    fig = figures.build_trend(two, pd.DataFrame(), site_colours=SITES, title="t")
    first, second = ([t for t in fig.data if t.name == name][0] for name in ("DR-1 · North Site",
                                                                             "DR-2 · South Site"))
    # 3 days apart, centred on mid-month (the month axis keeps its mid-month ticks)
    assert list(first.x) == ["2026-09-14T00:00", "2026-10-14T00:00", "2026-11-14T00:00"]
    assert list(second.x) == ["2026-09-17T00:00", "2026-10-17T00:00", "2026-11-17T00:00"]


def test_distribution_draws_a_single_exam_as_a_point():
    rows = _distribution()
    rows.loc[1, ["n", "p05", "p25", "median", "p75", "p95"]] = [1, 28.0, 28.0, 28.0, 28.0, 28.0]
    fig = figures.build_distribution(rows, title="t")
    points = [t for t in fig.data if isinstance(t, go.Scatter)]
    assert [(p.name, p.mode, list(p.y)) for p in points] == [("paediatric, a single exam", "markers", [28.0])]
    assert all("paediatric" not in b.name for b in fig.data if isinstance(b, go.Box))


def test_trend_without_drift_has_no_drift_marks():
    fig = figures.build_trend(_monthly(), pd.DataFrame(), site_colours=SITES, title="t")
    assert not [a for a in fig.layout.annotations if "drift" in a.text]


def _funnel():
    points = pd.DataFrame({
        "site_label": ["North Site", "South Site"], "room_label": ["CT-A", "CT-B"],
        "exam_label": ["CT head", "CT chest"], "population": ["adult", "adult"], "n": [60, 8],
        "ratio_to_typical": [1.45, 0.8], "reference_ratio_to_typical": [0.8, None],
        "is_sample_adequate": [True, False],
        "funnel_zone": ["above 99.8 % limit", "not above the limits"], "quantity": ["dlp", "dlp"],
        "unit": ["mGy.cm", "mGy.cm"], "median": [1400.0, 232.0], "typical_value": [965.5, 290.0],
        "reference_value": [790.0, None],
    })
    limits = pd.DataFrame({"n": [1, 10, 100], "upper_95": [2.0, 1.25, 1.07], "upper_998": [3.0, 1.4, 1.1]})
    return points, limits


def test_funnel_is_centred_on_the_network_typical_value_with_reference_marks_apart():
    # ICRP 135: the typical value (median of room medians) is the comparator of a room; the
    # reference level is a separate, higher-level investigation value, drawn as its own mark
    points, limits = _funnel()
    fig = figures.build_funnel(points, limits, site_colours=SITES, title="DLP")
    names = [t.name for t in fig.data]
    assert names.count("95 % upper control limit") == 1 and names.count("99.8 % upper control limit") == 1
    assert not any("lower" in n for n in names)          # only "above" is a finding
    (centre,) = [t for t in fig.data if t.name == "Network typical value (ratio 1)"]
    assert list(centre.y) == [1.0, 1.0]
    (refs,) = [t for t in fig.data if t.name == "Reference level of the group"]
    assert list(refs.x) == [60] and list(refs.y) == [0.8]   # the group without one has no mark
    north = next(t for t in fig.data if t.name == "North Site")
    assert list(north.text) == ["CT head · CT-A"] and list(north.y) == [1.45]
    south = next(t for t in fig.data if t.name == "South Site")
    assert list(south.text) == [""] and list(south.marker.symbol) == [figures.INSUFFICIENT_SYMBOL]
    assert fig.layout.xaxis.type == "log" and fig.layout.yaxis.type == "log"
    assert _axis_titles(fig) == ["Exams in the room's audit group (count, log scale)",
                                 "DLP: median ÷ network typical value (ratio, log scale)"]


def test_count_figures_title_their_axes_with_units():
    alerts = pd.DataFrame({"rule": ["r1", "r1", "r2"], "site_label": ["North Site", "South Site", "North Site"],
                           "n_alerts": [3, 1, 2]})
    fig = figures.build_alert_counts(alerts, site_colours=SITES, title="t")
    assert [list(t.x) for t in fig.data] == [[3, 2], [1, 0]]
    assert _axis_titles(fig) == ["Individual-exam alerts in the period (count)", "Alert rule"]
    weight = pd.DataFrame({"site_label": ["North Site"], "modality": ["CT"], "n_studies": [10],
                           "n_with_weight": [7], "pct_with_weight": [70.0]})
    fig = figures.build_weight_share(weight, title="t")
    assert list(fig.data[0].y) == [70.0] and tuple(fig.layout.yaxis.range) == (0, 100)
    assert _axis_titles(fig) == ["Site", "Studies with patient weight recorded (%)"]
    files = pd.DataFrame({"status": ["loaded", "quarantined"], "reason": ["", "truncated"], "n_files": [900, 2]})
    fig = figures.build_file_status(files, title="t")
    assert list(fig.data[0].y) == ["loaded", "quarantined: truncated"]
    assert fig.layout.xaxis.type == "log"
    assert _axis_titles(fig) == ["Input files (count, log scale)", "Outcome: reason"]


@pytest.mark.parametrize("builder, kwargs", [
    (figures.build_reference_comparison, {"site_colours": SITES, "title": "t"}),
    (figures.build_distribution, {"title": "t"}),
    (figures.build_weight_share, {"title": "t"}),
])
def test_builders_refuse_an_empty_frame(builder, kwargs):
    with pytest.raises(ValueError, match="no rows to draw"):
        builder(pd.DataFrame(), **kwargs)


def test_builders_name_a_missing_column():
    with pytest.raises(ValueError, match="missing column.*network_p75"):
        figures.build_reference_comparison(_room_medians().drop(columns="network_p75"),
                                           site_colours=SITES, title="t")


def test_units_and_axis_titles():
    assert unit_label("Gy.cm2") == "Gy·cm²" and unit_label("mGy.cm") == "mGy·cm"
    assert unit_label(None) == "unit not stated" and unit_label("kBq") == "kBq"
    assert axis_title("dose_rp", "mGy") == "Ka,r (mGy)"
    assert axis_title("new_quantity", "mGy") == "new_quantity (mGy)"


def test_figures_are_pure_same_input_same_json():
    a = figures.build_distribution(_distribution(), title="x").to_json()
    b = figures.build_distribution(_distribution(), title="x").to_json()
    assert a == b


def test_log_axes_label_ticks_with_full_values():
    points, limits = _funnel()
    fig = figures.build_funnel(points, limits, site_colours=SITES, title="DLP")
    y = fig.layout.yaxis
    assert "1" in y.ticktext and "0.5" in y.ticktext and "2" in y.ticktext
    assert all(float(t) == v for t, v in zip(y.ticktext, y.tickvals, strict=True))
    assert list(fig.layout.xaxis.tickvals[:4]) == [1.0, 2.0, 5.0, 10.0]
    wide = _room_medians()
    wide.loc[2, ["median", "median_ci_low", "median_ci_high", "network_p75"]] = [20.0, 15.0, 25.0, 22.0]
    x = figures.build_reference_comparison(wide, site_colours=SITES, title="t").layout.xaxis
    assert list(x.ticktext) == ["20", "50", "100", "200", "500", "1,000"]


def test_fluoroscopy_time_axes_read_min_s():
    rows = _room_medians().assign(quantity="fluoro_time", unit="s")
    rows[["median", "median_ci_low", "median_ci_high", "reference_value", "network_p75"]] = [
        [300.0, 240.0, 360.0, 600.0, 420.0], [700.0, None, None, 600.0, 420.0],
        [250.0, 200.0, 290.0, None, 260.0]]
    axis = figures.build_reference_comparison(rows, site_colours=SITES, title="t").layout.xaxis
    assert axis.title.text.endswith("Fluoroscopy time (min:s)")
    assert list(axis.ticktext[:4]) == ["0:00", "2:00", "4:00", "6:00"] and axis.tickvals[1] == 120.0


def test_funnel_draws_cells_of_groups_not_drawn_one_by_one_under_the_points():
    points, limits = _funnel()
    cells = pd.DataFrame({"quantity": ["dlp", "dlp"], "unit": ["mGy.cm", "mGy.cm"],
                          "n_groups": [40, 10], "n_insufficient": [3, 0], "n_min": [20, 50],
                          "n_max": [25, 60], "ratio_min": [0.3, 1.02], "ratio_max": [0.31, 1.04],
                          "n_mid": [22.4, 56.2], "ratio_mid": [0.305, 1.03]})
    fig = figures.build_funnel(points, limits, site_colours=SITES, title="DLP", cells=cells)
    names = [t.name for t in fig.data]
    (grey,) = [t for t in fig.data if t.name.startswith("Room groups not drawn one by one")]
    assert list(grey.x) == [22.4, 56.2] and list(grey.y) == [0.305, 1.03]
    assert grey.marker.size[0] > grey.marker.size[1]          # 40 groups: the larger square
    assert [c[0] for c in grey.customdata] == [40, 10]
    # drawn under the sites' points, and the ratio axis reaches the lowest cell (log10 0.3)
    assert names.index(grey.name) < names.index("North Site")
    assert fig.layout.yaxis.range[0] < -0.52
    # a quantity whose groups are all in cells still gets its plot
    alone = figures.build_funnel(points.head(0), limits, site_colours=SITES, title="DLP", cells=cells)
    assert [t.name for t in alone.data if t.name in SITES] == []
    assert "DLP" in alone.layout.yaxis.title.text


def test_reference_line_dicts_are_what_add_hline_adds():
    """The busy builders write add_hline's shape and annotation themselves (common._hline): the
    same properties in the same order as plotly's own call on the same grid cell."""
    import json

    from plotly.subplots import make_subplots

    from dashboards.figures.common import _hline

    fig = make_subplots(rows=1, cols=2)
    fig.add_trace(go.Scatter(x=[1], y=[1]), row=1, col=1)
    fig.add_trace(go.Scatter(x=[1], y=[2]), row=1, col=2)
    fig.add_hline(y=0.25, line={"color": REFERENCE_COLOUR, "dash": "dash", "width": 2},
                  annotation_text="Reference level 0.25 mGy (set_a)", annotation_position="top left",
                  annotation_font={"size": 10}, row=1, col=2)
    shape, note = _hline(0.25, "Reference level 0.25 mGy (set_a)", {"xaxis": "x2", "yaxis": "y2"})
    layout = fig.to_dict()["layout"]
    assert json.dumps(layout["shapes"]) == json.dumps([shape])
    assert json.dumps(layout["annotations"]) == json.dumps([note])


def test_figure_of_plain_dicts_keeps_the_layout_key_order():
    """common._as_figure makes one unvalidated figure of a layout dict with its keys in their
    order (plotly's own constructor sorts them; a numbered axis set on a layout is validated)."""
    import json

    from dashboards.figures.common import _as_figure, _new_layout

    layout, cells = _new_layout(2, 1, vertical_spacing=0.2)
    assert cells[1][0] == {"xaxis": "x2", "yaxis": "y2"}
    layout["xaxis2"].update(title={"text": "Month", "font": {"size": 3}}, type="date", range=[1, 2])
    layout["yaxis"].update(title={"text": "Median"}, type="log", tickvals=[1.0], ticktext=["1"])
    layout["shapes"] = [{"type": "line", "line": {"width": 2, "color": "#111111"}, "x0": 0}]
    layout.update(title={"text": "t"}, height=100)
    fig = _as_figure([{"type": "scatter", "x": [1], "y": [2], "marker": {"size": 3, "color": "#000"},
                       **cells[1][0]}], layout)
    assert json.dumps(fig.to_dict()["layout"]) == json.dumps(layout)
    assert fig.layout.xaxis2.title.text == "Month" and fig.layout.yaxis.type == "log"
    assert fig.data[0].yaxis == "y2" and fig.data[0].marker.size == 3


def _rooms(n_rooms: int) -> pd.DataFrame:
    """Two panels (CTDIvol, DLP) of `n_rooms` rooms, adults and children."""
    rows = []
    for quantity, unit in (("ctdivol", "mGy"), ("dlp", "mGy.cm")):
        for k in range(n_rooms):
            for population in ("adult", "paediatric"):
                rows.append({"quantity": quantity, "unit": unit, "phantom": None, "population": population,
                             "site_label": "North Site", "room_label": f"CT-{k:02d}", "n": 40,
                             "p05": 30.0, "p25": 40.0, "median": 45.0, "p75": 50.0, "p95": 60.0,
                             "reference_value": None, "reference_set": None, "is_sample_adequate": True})
    return pd.DataFrame(rows)


def test_distribution_room_labels_of_a_crowded_panel_are_one_line_each():
    few = figures.build_distribution(_rooms(3), title="t")
    crowded = figures.build_distribution(_rooms(24), title="t")
    # three rooms: room, site and counts on three lines, flat
    assert few.layout.xaxis.tickangle == 0
    assert [b.x[0] for b in few.data if isinstance(b, go.Box)][0] == "CT-00<br>North Site<br>n 40 / 40"
    # 24 rooms in one of two panels: three upright lines (45 px) would overlap the next room's
    # (~19 px apart): one line, and the figure grows by the longer labels
    labels = {x for b in crowded.data if isinstance(b, go.Box) for x in b.x}
    assert crowded.layout.xaxis.tickangle == 90 and crowded.layout.xaxis2.tickangle == 90
    assert "CT-00 · North Site · n 40 / 40" in labels and not any("<br>" in x for x in labels)
    assert len(labels) == 24
    longest = max(map(len, labels))
    assert crowded.layout.margin.b >= 7 * longest
    # the plot keeps the height it had under upright three-line labels (margin 36 px + the
    # widest line, "North Site")
    assert crowded.layout.height - crowded.layout.margin.b == 380 + 12 * 24 + 60 - 36 - 7 * len("North Site")
