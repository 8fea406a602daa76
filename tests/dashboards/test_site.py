"""The written site: pages, shared local plotly.js, CSV beside every table, determinism, privacy."""

from __future__ import annotations

import dataclasses
import datetime as dt
import json
from markupsafe import escape  # the escaping Jinja2 applies
import re
import shutil
from pathlib import Path

import pandas as pd
import pytest
from plotly.offline import get_plotlyjs

import dashboards
from dashboards import figures, model, pages, render, site as site_module, theme
from dashboards.pages import CAUTIONS, PAGES
from dashboards.site import write_site

from .conftest import GENERATED_AT

PAGE_FILES = [f for f, _, _ in PAGES]


def _html(site: Path, name: str) -> str:
    return (site / name).read_text(encoding="utf-8")


def test_every_page_and_one_local_plotly_copy(site):
    assert sorted(p.name for p in site.glob("*.html")) == sorted(PAGE_FILES)
    assert [p.name for p in site.glob("*.js")] == ["plotly.min.js"]
    assert (site / "plotly.min.js").read_text(encoding="utf-8") == get_plotlyjs()
    for name in PAGE_FILES:
        html = _html(site, name)
        scripts = re.findall(r'<script[^>]*\bsrc="([^"]+)"', html)
        assert scripts in ([], ["plotly.min.js"]), name
        if 'class="plotly-graph-div"' in html:
            assert scripts == ["plotly.min.js"], f"{name} draws plots but does not load plotly.min.js"


def test_pages_name_no_external_resource(site):
    for name in PAGE_FILES:
        html = _html(site, name)
        external = re.findall(r'<(?:script|link|img|iframe)\b[^>]*\b(?:src|href)="((?:https?:)?//[^"]*)"', html,
                              flags=re.IGNORECASE)
        assert external == [], f"{name} loads {external}"
        assert "@import" not in html and "url(http" not in html


def test_every_page_has_cautions_period_reference_sets_and_generation_time(site, marts):
    _, label, first, last, sets = marts
    assert label == "2026-09-01..2026-11-30" and (first, last) == (dt.date(2026, 9, 1), dt.date(2026, 11, 30))
    assert not sets.empty
    for name in PAGE_FILES:
        html = _html(site, name)
        for caution in CAUTIONS:
            assert html.count(escape(caution)) >= 2, f"{name} lacks the caution {caution[:40]!r}"
        footer = html[html.index("<footer"):]
        assert "01 Sep 2026 to 30 Nov 2026" in footer
        for set_id in sets["set_id"]:
            assert set_id in footer
        assert "2026-12-01 08:30 UTC" in footer
        # The generation time appears nowhere but the footer.
        assert html[:html.index("<footer")].count("2026-12-01 08:30") == 0


def test_navigation_links_every_page_and_marks_the_current_one(site):
    for name in PAGE_FILES:
        html = _html(site, name)
        nav = html[html.index('<nav class="wrap"'):html.index("</nav>")]
        assert re.findall(r'href="([^"]+)"', nav) == PAGE_FILES
        assert f'<a href="{name}" aria-current="page">' in nav


def test_every_table_has_its_csv_beside_it_with_the_same_rows(site):
    seen = 0
    for name in PAGE_FILES:
        html = _html(site, name)
        for table, n_rows in re.findall(r'<figure class="table" id="table-([a-z0-9-]+)">.*?CSV \((\d+) rows\)',
                                        html):
            path = site / f"{table}.csv"
            assert path.exists(), f"{name}: table {table} has no CSV"
            frame = pd.read_csv(path)
            assert len(frame) == int(n_rows), table
            seen += 1
    assert seen >= 15


def test_csv_values_match_the_marts(site, audited):
    import duckdb
    ranked = pd.read_csv(site / "reference-room-medians.csv")
    con = duckdb.connect(str(audited), read_only=True)
    try:
        n_groups, n_ref = con.execute(  # check SQL in a test (STYLE D)
            "select count(*), count(reference_value) from audit_medians").fetchone()
    finally:
        con.close()
    assert len(ranked) == n_groups and ranked["reference_value"].notna().sum() == n_ref


def test_story_head_ct_above_reference_is_flagged_everywhere(site):
    """tgh-ct1 runs its head protocol about 1.4x the UKHSA 2022 CT head DLP level (README stories)."""
    above = pd.read_csv(site / "overview-above-reference.csv")
    head = above[(above["room_label"] == "TGHCT1") & (above["exam_type"] == "ct_head") & (above["quantity"] == "dlp")]
    assert len(head) == 1
    assert head["reference_set"].iloc[0] == "ukhsa_adult_ct_2022"
    assert 1.2 < head["ratio_to_reference"].iloc[0] < 1.7
    # the funnel is centred on the network typical value (ICRP 135: median of the medians of
    # rooms with an adequate sample), so it ranks only groups whose network has one
    ranked = pd.read_csv(site / "sites-ranked.csv")
    assert len(ranked) > 0
    assert list(ranked["rank"]) == list(range(1, len(ranked) + 1))
    assert ranked["ratio_to_typical"].is_monotonic_decreasing
    assert (ranked["ratio_to_typical"] - ranked["median"] / ranked["typical_value"]).abs().max() < 1e-9
    index = _html(site, "index.html")
    assert "Exam types above their reference level" in index and ">above reference<" in index


def test_insufficient_samples_are_marked_on_the_pages(site):
    medians = pd.read_csv(site / "reference-room-medians.csv")
    n_small = int((~medians["is_sample_adequate"]).sum())
    assert n_small > 0     # the 320-study corpus has many small groups
    html = _html(site, "reference-levels.html")
    assert html.count(">too few<") == n_small          # the flag column of the table
    assert '"circle-open"' in html                      # open markers in the figures
    assert "sample below the audit minimum" in _html(site, "distributions.html")


def test_pseudonymous_keys_only(site, studies_manifest):
    texts = [p.read_text(encoding="utf-8") for p in site.iterdir() if p.suffix in (".html", ".csv")]
    blob = "\n".join(texts)
    patient_ids = set(studies_manifest["patient_id"].dropna().astype(str))
    assert len(patient_ids) > 100
    leaked = [pid for pid in patient_ids if pid in blob]
    assert leaked == []
    uids = set(studies_manifest["study_instance_uid"].astype(str))
    assert [u for u in uids if u in blob] == []
    alerts = pd.read_csv(site / "alerts.csv")
    assert len(alerts) > 0 and alerts["study_key"].str.fullmatch(r"[0-9a-f]{32}").all()
    assert "path" not in pd.read_csv(site / "dq-files-not-loaded.csv").columns


def test_two_writes_with_the_same_time_are_byte_identical(audited, site, tmp_path):
    again = write_site(audited, tmp_path / "again", generated_at=GENERATED_AT).parent
    first = {p.name: p.read_bytes() for p in site.iterdir()}
    second = {p.name: p.read_bytes() for p in again.iterdir()}
    assert sorted(first) == sorted(second)
    assert [n for n in first if first[n] != second[n]] == []


def test_a_later_generation_time_changes_only_the_footer(audited, site, tmp_path):
    later = write_site(audited, tmp_path / "later",
                       generated_at=dt.datetime(2027, 1, 2, 3, 4, tzinfo=dt.UTC)).parent
    for name in PAGE_FILES:
        a, b = _html(site, name), _html(later, name)
        assert a != b and "2027-01-02 03:04 UTC" in b
        assert a.replace("2026-12-01 08:30 UTC", "2027-01-02 03:04 UTC") == b


def test_plot_div_ids_are_fixed_and_unique(site):
    ids = []
    for name in PAGE_FILES:
        ids += re.findall(r'<div id="([^"]+)" class="plotly-graph-div"', _html(site, name))
    assert len(ids) == len(set(ids)) > 10
    assert all(re.fullmatch(r"fig-[a-z0-9-]+", i) for i in ids)


def _plot_layouts(html: str) -> list[tuple[str, dict]]:
    """(div id, layout) of every Plotly.newPlot call in a page."""
    decoder, out = json.JSONDecoder(), []
    for match in re.finditer(r'Plotly\.newPlot\(\s*"([^"]+)",\s*', html):
        data, end = decoder.raw_decode(html, match.end())
        rest = html[end:].lstrip().lstrip(",").lstrip()
        layout, _ = decoder.raw_decode(rest)
        out.append((match.group(1), layout))
    return out


def test_every_axis_of_every_plot_is_titled_with_a_unit(site):
    """Numeric axes name quantity and unit '(...)'; category axes name what the categories are."""
    n_numeric = n_category = 0
    for name in PAGE_FILES:
        for div_id, layout in _plot_layouts(_html(site, name)):
            axes = {k: v for k, v in layout.items() if re.fullmatch(r"[xy]axis\d*", k)}
            assert axes, div_id
            for key, axis in axes.items():
                title = axis.get("title", {}).get("text", "")
                if axis.get("type") in ("category", "multicategory"):
                    assert len(title) > 3, f"{div_id} {key} has no title"
                    n_category += 1
                else:
                    assert axis.get("type") in ("linear", "log", "date"), f"{div_id} {key}: type not set"
                    assert re.search(r"\(.+\)", title), f"{div_id} {key}: {title!r} states no unit"
                    n_numeric += 1
    assert n_numeric > 30 and n_category > 10


def test_reference_lines_are_drawn_where_a_reference_exists(site):
    layouts = dict(_plot_layouts(_html(site, "distributions.html")))
    head = layouts["fig-dist-ct-head"]
    refs = [a["text"] for a in head.get("annotations", []) if a.get("text", "").startswith("Reference level")]
    assert any("790 mGy·cm" in t and "ukhsa_adult_ct_2022" in t for t in refs)


def test_unaudited_warehouse_is_refused_with_a_clear_message(warehouse, tmp_path):
    from pipeline.errors import WarehouseError
    db, _ = warehouse
    copy = tmp_path / "raw.duckdb"
    shutil.copyfile(db, copy)
    with pytest.raises(WarehouseError, match="has not been audited .*audit_medians.*run `kerma audit`"):
        write_site(copy, tmp_path / "site")
    assert not (tmp_path / "site").exists()


def test_empty_audit_period_still_writes_every_page(audited, tmp_path):
    from pipeline.audit import run_audit
    copy = tmp_path / "empty.duckdb"
    shutil.copyfile(audited, copy)
    run_audit(copy, period="2031-01")        # no study in that month
    out = tmp_path / "site"
    write_site(copy, out, generated_at=GENERATED_AT)
    assert sorted(p.name for p in out.glob("*.html")) == sorted(PAGE_FILES)
    html = (out / "reference-levels.html").read_text(encoding="utf-8")
    assert "No exam in the period maps to a standard exam type" in html
    assert "No individual-exam alert fired in the period." in (out / "alerts.html").read_text(encoding="utf-8")
    # data-quality counts are for the period: no file of 2031 was received
    assert pd.read_csv(out / "dq-file-status.csv").empty
    index = (out / "index.html").read_text(encoding="utf-8")
    assert "of 0 files of the period" in index


def test_text_from_the_warehouse_is_escaped():
    frame = pd.DataFrame({"study_description": ["<script>alert(1)</script> & co"]})
    table = model.Table("t", "cap", frame, (model.Column("study_description", "Description"),))
    markup = render.render_table(table)
    assert "<script>" not in markup and "&lt;script&gt;alert(1)&lt;/script&gt; &amp; co" in markup


def test_a_description_with_a_script_tag_is_escaped_on_the_page(marts):
    """Jinja2 autoescaping: a study description and a room label from the warehouse never
    become markup on a rendered page."""
    import dataclasses

    data, label, first, last, sets = marts
    evil = "<script>alert('x')</script>"
    unmapped = data.unmapped.copy()
    assert len(unmapped) > 0
    unmapped.loc[unmapped.index[0], "study_description"] = evil
    rooms = data.device_studies.copy()
    rooms.loc[rooms.index[0], "room_label"] = evil
    ctx = model.Context(period=label, date_from=first, date_to=last, reference_sets=sets,
                        generated_at=GENERATED_AT)
    built = pages.build_site(dataclasses.replace(data, unmapped=unmapped, device_studies=rooms), ctx)
    html = built.pages["data-quality.html"]
    assert evil not in html and html.count("&lt;script&gt;alert(&#39;x&#39;)&lt;/script&gt;") == 2


def test_public_api():
    from dashboards.figures import common as figure_common, counts, levels, series
    from dashboards.pages import alerts, common, overview, quality, reference, trends

    assert dashboards.__all__ == ["write_site"]
    for module in (figures, model, pages, render, site_module, theme, alerts, common, overview,
                   quality, reference, trends, figure_common, counts, levels, series):
        assert sorted(module.__all__) == sorted(set(module.__all__))
        assert all(hasattr(module, name) for name in module.__all__)


def test_overview_leads_with_the_patient_to_follow_up(site):
    """The 6.2 Gy Ka,r case (NCRP 168 substantial radiation dose level 5 Gy, from memory) heads
    the overview's alerts, whatever the factor of a low outlier; rules read in plain words."""
    index = _html(site, "index.html")
    table = index[index.index('id="table-overview-top-alerts"'):]
    rows = table[table.index("<tbody>"):table.index("</tbody>")].split("</tr>")
    follow_up = [row for row in rows if "Patient follow-up" in row]
    # the same patient leads on Ka,r (5 Gy) and on its peak skin dose estimate (3 Gy)
    assert rows[0] in follow_up and len(follow_up) >= 2
    assert any("Substantial radiation dose level" in row for row in follow_up[:2])
    assert any("Peak skin dose estimate" in row for row in follow_up[:2])
    alerts = _html(site, "alerts.html")
    body = alerts[alerts.index('id="table-alerts"'):]
    assert "ncrp168_srdl" not in body and "aapm_ct_notification" not in body
    assert re.search(r"\d+:\d\d min:s", body)                      # fluoroscopy time in min:s
    assert '<td class="date">2026-' in body                         # dates never wrap (CSS nowrap)


def test_alerts_page_drills_down_to_the_study_events(site):
    alerts = pd.read_csv(site / "alerts.csv")
    events = pd.read_csv(site / "alert-events.csv")
    assert set(events["study_key"]) == set(alerts["study_key"])
    xa = events[events["dose_rp_mgy"].notna()]
    assert xa.groupby("study_key")["dose_rp_mgy"].sum().max() > 5000   # the 6.2 Gy PCI, per event
    html = _html(site, "alerts.html")
    assert "Study details: the events of each alerted study" in html
    # every study link of the alert list goes to that study's own details, with its events
    listing = html[html.index('id="table-alerts"'):html.index('id="events"')]
    links = set(re.findall(r'href="alerts\.html#(study-[0-9a-f]+)"', listing))
    from dashboards.pages.alerts import MAX_DETAIL_STUDIES, MAX_STUDY_EVENTS
    expected = list(dict.fromkeys(alerts["study_key"]))[:MAX_DETAIL_STUDIES]
    assert links == {f"study-{k}" for k in expected}
    for anchor in links:
        assert html.count(f'id="{anchor}"') == 1
    pci = alerts.loc[alerts["rule"].str.contains("ncrp168"), "study_key"].iloc[0]
    detail = html[html.index(f'id="study-{pci}"'):]
    detail = detail[:detail.index("</table>")]
    n_events = int((events["study_key"] == pci).sum())
    assert detail.count("<tr>") == 1 + min(n_events, MAX_STUDY_EVENTS)   # header + the events shown
    assert "Coronary" in detail or "fluoro" in detail.lower()
    # the overview's ten most urgent alerts link to the same details
    index = _html(site, "index.html")
    assert f'href="alerts.html#study-{pci}"' in index


def test_overview_tiles_link_to_their_own_detail_sections(site):
    index = _html(site, "index.html")
    glance = index[index.index('id="glance"'):index.index('id="findings"')]
    hrefs = re.findall(r'<a class="tile[^"]*" href="([^"]+)"', glance)
    assert len(hrefs) == 9 and len(set(hrefs)) == 9          # each tile its own detail
    for href in hrefs:
        page, _, anchor = href.partition("#")
        assert anchor, f"tile {href} links to a page, not to its detail section"
        assert f'id="{anchor}"' in _html(site, page), href


def test_reference_table_values_carry_units_and_fluoroscopy_time_in_min_s(site):
    html = _html(site, "reference-levels.html")
    table = html[html.index('id="table-reference-room-medians"'):]
    table = table[:table.index("</table>")]
    medians = pd.read_csv(site / "reference-room-medians.csv")
    assert (medians["quantity"] == "fluoro_time").any()
    assert re.search(r"\d+:\d\d min:s", table) and " mGy·cm<" in table
    assert "What the comparison means" not in table             # the CSV keeps that column
    assert "reference_scope_note" in medians.columns


def test_alert_counts_read_rules_in_plain_words(site):
    html = _html(site, "alerts.html")
    counts = pd.read_csv(site / "alerts-by-rule.csv")
    assert counts["rule"].str.startswith("aapm_ct_notification").any()
    main = html[:html.index("<footer")]
    assert "aapm_ct_notification" not in main and "ncrp168_" not in main
    # the words the committee report uses (pipeline.report.words, one shared mapping)
    assert "CT dose-check notification, adult head, 80 mGy" in main


def test_titles_follow_the_period(site):
    """The session site covers Sep-Nov 2026: not a calendar month, so never titled "Monthly"."""
    index = _html(site, "index.html")
    assert "<h1>Dose audit of the period: overview</h1>" in index and "Monthly dose audit" not in index


def _plot_data(html: str) -> list[tuple[str, list]]:
    """(div id, traces) of every Plotly.newPlot call in a page."""
    decoder, out = json.JSONDecoder(), []
    for match in re.finditer(r'Plotly\.newPlot\(\s*"([^"]+)",\s*', html):
        data, _ = decoder.raw_decode(html, match.end())
        out.append((match.group(1), data))
    return out


def test_reference_plots_row_labels_are_short_and_the_site_is_in_the_legend(site, marts):
    data = marts[0]
    sites = set(data.devices["site_label"])
    plots = _plot_data(_html(site, "reference-levels.html"))
    assert len(plots) > 5
    for div_id, traces in plots:
        rows = {label for t in traces if isinstance(t.get("y"), list) and len(t["y"]) == 2
                for label in t["y"][1]}
        assert rows and all(re.fullmatch(r"\S+( · [^()]+)? \(n \d+\)", r) for r in rows), (div_id, rows)
        assert not any(s in r for s in sites for r in rows), div_id
        names = {t.get("name") for t in traces}
        assert names & sites, div_id                       # the legend names the sites


def test_single_exam_groups_are_points_on_the_distribution_page(site):
    dist = pd.read_csv(site / "distributions.csv")
    assert (dist["n"] == 1).any()          # the 320-study corpus has single-exam paediatric groups
    traces = [t for _, ts in _plot_data(_html(site, "distributions.html")) for t in ts]
    points = [t for t in traces if t.get("type") == "scatter" and t.get("name", "").endswith("a single exam")]
    assert points and all(t["mode"] == "markers" for t in points)
    assert sum(len(t["y"]) for t in points) == int((dist["n"] == 1).sum())


def test_funnel_draws_the_groups_above_a_limit_and_counts_every_other_group_in_a_cell(marts):
    """dash_funnel_drawn.sql / dash_funnel_cells.sql with a cap below the corpus's group count:
    no group is lost (drawn + counted = all), the drawn ones are above a limit, highest z first."""
    import duckdb
    from queries import sql

    points = marts[0].funnel_points
    is_above = points["funnel_zone"].isin(["above 99.8 % limit", "above 95 % limit"])
    q = points[is_above]["quantity"].value_counts().index[0]   # most groups above a limit
    part = points[points["quantity"] == q]
    above = part[part["funnel_zone"].isin(["above 99.8 % limit", "above 95 % limit"])]
    cap = max(1, len(above) - 1)      # fewer than the groups above a limit, when there are two
    assert len(above) >= 1 and len(part) > cap
    con = duckdb.connect()
    try:
        con.register("funnel_point", points)
        drawn = con.execute(sql("dash_funnel_drawn"), {"max_points": cap}).df()
        con.register("funnel_drawn", drawn)
        cells = con.execute(sql("dash_funnel_cells")).df()
        everything = con.execute(sql("dash_funnel_drawn"), {"max_points": len(points)}).df()
    finally:
        con.close()
    mine = drawn[drawn["quantity"] == q]
    assert len(mine) == min(cap, len(above))
    assert set(mine["funnel_zone"]) <= {"above 99.8 % limit", "above 95 % limit"}
    assert mine["z"].min() >= above["z"].sort_values(ascending=False).iloc[len(mine) - 1]
    for quantity, group in points.groupby("quantity"):
        n_drawn = int((drawn["quantity"] == quantity).sum())
        n_cells = int(cells.loc[cells["quantity"] == quantity, "n_groups"].sum())
        assert n_drawn + n_cells == len(group), quantity
    assert (cells["n_min"] >= cells["n_mid"] / 10 ** 0.05 - 1e-9).all()       # inside the cell
    assert (cells["ratio_max"] <= cells["ratio_mid"] * 10 ** 0.01 + 1e-9).all()
    # with a cap above the count, every group is drawn in the order of the ranked table
    assert list(everything["ratio_to_typical"]) == list(points["ratio_to_typical"])


def test_sites_page_states_how_many_groups_each_funnel_draws(marts):
    import dataclasses

    data, label, first, last, sets = marts
    ctx = model.Context(period=label, date_from=first, date_to=last, reference_sets=sets,
                        generated_at=GENERATED_AT)
    q = data.funnel_points["quantity"].value_counts().index[0]
    part = data.funnel_points[data.funnel_points["quantity"] == q]
    drawn = data.funnel_points.drop(index=part.index[2:])     # q: two groups drawn, the rest in a cell
    cells = pd.DataFrame({"quantity": [q], "unit": [part["unit"].iloc[0]], "n_groups": [len(part) - 2],
                          "n_insufficient": [0], "n_min": [1], "n_max": [9], "ratio_min": [0.9],
                          "ratio_max": [1.1], "n_mid": [3.0], "ratio_mid": [1.0]})
    built = pages.build_site(dataclasses.replace(data, funnel_drawn=drawn, funnel_cells=cells), ctx)
    html = built.pages["sites.html"]
    assert f"Of {len(part)} room groups, the 2 above a limit with the highest z are drawn one by one; " \
           f"the other {len(part) - 2} are counted in grey squares" in html
    assert len(built.tables["sites-ranked"]) == len(data.funnel_points)     # the CSV keeps every group
    layouts = dict(_plot_data(html))
    grey = [t for t in layouts[f"fig-funnel-{model.slug(q)}"] if t.get("name", "").startswith("Room groups not drawn")]
    assert len(grey) == 1 and grey[0]["customdata"][0][0] == len(part) - 2
    none = pages.build_site(dataclasses.replace(
        data, funnel_drawn=data.funnel_points.drop(index=part.index),
        funnel_cells=cells.assign(n_groups=len(part))), ctx).pages["sites.html"]
    assert f"None of the {len(part)} room groups is above a limit; all {len(part)} are counted" in none


def test_every_figure_of_the_site_passes_plotly_validation(marts):
    """The figure builders skip plotly's per-property validation for speed
    (dashboards.figures.common.NO_CHECK); a validating go.Figure of every figure's dict must
    still accept it (plotly raises ValueError on an unknown property or an invalid value)."""
    import plotly.graph_objects as go

    data, label, first, last, sets = marts
    ctx = model.Context(period=label, date_from=first, date_to=last, reference_sets=sets,
                        generated_at=GENERATED_AT)
    plots = [b for p in pages.build_pages(data, ctx) for s in p.sections for b in s.blocks
             if isinstance(b, model.Plot)]
    assert len(plots) > 10
    for plot in plots:
        as_dict = plot.figure.to_dict()
        checked = go.Figure(as_dict)   # validates every trace and the layout
        assert checked.to_dict() == as_dict, plot.div_id


def test_alerts_page_lists_at_most_max_study_events_per_study(site):
    """The drill-down is capped per study (the page must not grow with the number of events);
    alert-events.csv keeps every event of every alerted study."""
    from dashboards.pages.alerts import MAX_STUDY_EVENTS

    html = (site / "alerts.html").read_text(encoding="utf-8")
    studies = [chunk.split("</table>", 1)[0] for chunk in html.split('<div class="study" id=')[1:]]
    assert studies
    for body in studies:
        assert 0 < body.count("<tr><td") <= MAX_STUDY_EVENTS
    events = pd.read_csv(site / "alert-events.csv")
    per_study = events.groupby("study_key").size()
    assert len(events) == per_study.sum() and per_study.max() > 0


def test_csv_text_writes_what_pandas_float_format_writes():
    """site.csv_text formats the float columns itself (speed); the characters must be those of
    pandas' own ``to_csv(float_format="%.12g")`` (the independent check), with SQL NULL empty."""
    import numpy as np

    rows = pd.DataFrame({
        "site_label": ["North, \"A\"", None, "South"],
        "n": [3, 1, 12],
        "median": [1234567.891234567, np.nan, 0.1 + 0.2],
        "ratio": [1e-7, -0.0, np.inf],
        "flag": [True, False, True],
        "study_date": pd.to_datetime(["2026-09-01 00:00:00", None, "2026-11-30 10:07:11"]),
        "nullable": pd.array([1.5, None, 2.25], dtype="Float64"),
    })
    expected = rows.to_csv(index=False, lineterminator="\n", float_format="%.12g")
    assert site_module.csv_text(rows) == expected
    # 12 significant figures: 1234567.89123, and 0.1 + 0.2 without its last-bit noise
    assert ",1234567.89123," in expected and ",0.3," in expected and "0.30000000000000004" not in expected
    assert rows["median"].dtype == np.float64                          # the caller's frame unchanged


def test_csv_text_joins_plain_tables_itself_as_pandas_writes_them():
    """Tables of text, integer, boolean and float64 columns (the site's, once timestamps are
    text) are written by site.csv_text without pandas; the characters must be pandas' own
    ``to_csv(float_format="%.12g")``: NULL empty, fields quoted as csv.writer quotes them (a
    comma, a quote, a line break), a lone empty field quoted; an object column holding
    numbers (written by csv.writer, repr() of a float) too."""
    import numpy as np

    rows = pd.DataFrame({
        "site_label": pd.array(['North, "A"', None, "South", "", "line\nbreak", "cr\rhere", " pad "],
                               dtype="str"),
        "n": np.array([3, 1, 12, 0, -5, 7, 2**40], dtype=np.int64),
        "family_order": np.array([1, 2, 3, 4, 5, 6, 7], dtype=np.int32),
        "median": [1234567.891234567, np.nan, 0.1 + 0.2, 1e-7, -0.0, np.inf, 2.0],
        "flag": [True, False, True, False, True, False, True],
        "note": ["a", None, 'q"uote', np.nan, "x,y", "", "ü"],
        "mixed": [1.5, None, "t", 2, np.float64(0.3), True, "z"],
    }).astype({"note": object, "mixed": object})
    assert rows["note"].dtype == object and rows["site_label"].dtype != object
    frames = (rows, rows.drop(columns="mixed"), rows[["site_label"]], rows[["note", "n"]],
              rows.iloc[:0], rows.drop(columns="mixed").iloc[:0], rows[["n", "flag"]])
    for frame in frames:
        expected = frame.to_csv(index=False, lineterminator="\n", float_format="%.12g")
        assert site_module.csv_text(frame) == expected
    assert '"North, ""A"""' in site_module.csv_text(rows) and ',1234567.89123,' in site_module.csv_text(rows)


def test_csv_written_in_pieces_is_the_csv_of_the_whole_table(tmp_path, monkeypatch):
    """Large tables are written to CSV piece by piece (memory); the file must be byte for byte
    csv_text of the whole table, also where one piece's timestamps are all at midnight (pandas
    would then write that piece as dates only) and with text that needs quoting."""
    import numpy as np

    rows = pd.DataFrame({
        "site_label": ["North, \"A\"", None, "South", "East", "West"],
        "median": [1234567.891234567, np.nan, 0.1 + 0.2, 2.0, -1.5],
        "flag": [True, False, True, None, False],
        "started_at": pd.to_datetime(["2026-09-01 00:00:00", "2026-09-02 00:00:00", None,
                                      "2026-11-30 10:07:11", "2026-11-30 00:00:00"]),
        "study_date": pd.to_datetime(["2026-09-01", "2026-09-02", None, "2026-11-30", "2026-11-30"]),
    })
    monkeypatch.setattr(site_module, "CSV_CHUNK_ROWS", 2)
    path = tmp_path / "t.csv"
    site_module._write_csv(path, rows)
    assert path.read_text(encoding="utf-8") == site_module.csv_text(rows)
    assert "2026-09-01 00:00:00" in path.read_text()     # the first piece alone would say 2026-09-01
    site_module._write_csv(path, rows.iloc[:0])
    assert path.read_text() == site_module.csv_text(rows.iloc[:0])


def test_timestamps_are_written_as_pandas_writes_them():
    """_stamp_texts writes a timestamp column (numpy for whole seconds, pandas otherwise) in
    the characters pandas' to_csv gives it: dates only when all are at midnight, a fraction of a
    second for every value once one has one, a time zone, NaT empty (None)."""
    import numpy as np

    def column(values, unit="us"):
        return pd.Series(np.array(values, dtype=f"datetime64[{unit}]"))

    columns = [
        column(["2026-09-01T10:11:12", "NaT", "2026-10-01T00:00:00"]),
        column(["2026-09-01", "NaT", "2026-10-01"]),
        column(["2026-09-01T10:11:12.5", "2026-10-01"]),
        column(["NaT", "NaT"]),
        column(["2026-09-01T10:11", "2026-10-01T01:00"], "ns"),
        column(["0999-01-01T10:00:00", "2026-01-01"], "s"),
        column([]),
        column(["2026-09-01T10:11:12", "2026-10-01T01:00"]).dt.tz_localize("UTC"),
    ]
    for values in columns:
        text = values.to_frame().to_csv(index=False, header=False, lineterminator="\n")
        expected = [None if v == '""' else v for v in text.split("\n")[:-1]]
        assert site_module._stamp_texts(values) == expected
    assert site_module._stamp_texts(columns[0]) == ["2026-09-01 10:11:12", None,
                                                   "2026-10-01 00:00:00"]
    assert site_module._stamp_texts(columns[1]) == ["2026-09-01", None, "2026-10-01"]


def test_csv_written_by_duckdb_is_csv_text(tmp_path):
    """The site's CSVs are written by DuckDB's COPY (speed) where it writes csv_text's characters
    (pandas' own, checked above; written piece by piece without a connection): floats to 12 significant figures (last-bit noise, 1e-7, -0,
    inf), NaN, None and empty text as empty fields, booleans as True/False, text quoted only for a
    comma, a quote or a line feed ('#' and spaces as they are), timestamps as pandas writes them.
    A text with a carriage return (DuckDB would quote it), a lone column and a nullable number
    column are left to csv_text; the files are the same either way."""
    import numpy as np

    rows = pd.DataFrame({
        "site_label": pd.array(['North, "A"', None, "South", "", "line\nbreak", "room # 2",
                                " pad "], dtype="str"),
        "n": np.array([3, 1, 12, 0, -5, 7, 2**40], dtype=np.int64),
        "family_order": np.array([1, 2, 3, 4, 5, 6, 7], dtype=np.int32),
        "median": [1234567.891234567, np.nan, 0.1 + 0.2, 1e-7, -0.0, np.inf, 2.0],
        "flag": [True, False, True, False, True, False, True],
        "note": ["a", None, 'q"uote', np.nan, "x,y", "", "ü"],
        "latest_note": [None] * 7,
        "started_at": pd.to_datetime(["2026-09-01 00:00:00", "2026-09-02 00:00:00", None,
                                      "2026-11-30 10:07:11", "2026-11-30 00:00:00", None, None]),
    }).astype({"note": object, "latest_note": object})
    carriage = rows.assign(note=rows["note"].replace("x,y", "x\ry"))
    nullable = rows.assign(n=pd.array([1, None, 3, 4, 5, 6, 7], dtype="Int64"))
    # labels held as a categorical (the long frames' repeated labels): written as their texts
    categorical = rows.assign(site_label=rows["site_label"].astype("category"))
    assert categorical["site_label"].cat.categories.dtype == "str"
    frames = {"plain": (rows, True), "empty": (rows.iloc[:0], True),
              "two": (rows[["n", "flag"]], True), "carriage": (carriage, False),
              "lone": (rows[["site_label"]], False), "nullable": (nullable, False),
              "categorical": (categorical, True)}
    with site_module._csv_connection() as con:
        for name, (frame, by_duckdb) in frames.items():
            path, pieces = tmp_path / f"{name}.csv", tmp_path / f"{name}.pieces.csv"
            site_module._write_csv(path, frame, con)
            site_module._write_csv(pieces, frame)   # no connection: csv_text piece by piece
            assert path.read_bytes() == pieces.read_bytes(), name
            stamps = frame.drop(columns=[c for c in frame if c == "started_at"])
            assert (site_module._csv_sql_columns(stamps) is not None) == by_duckdb, name
    assert (tmp_path / "categorical.csv").read_bytes() == (tmp_path / "plain.csv").read_bytes()
    text = (tmp_path / "plain.csv").read_text(encoding="utf-8")
    assert ",1234567.89123," in text and ",0.3," in text and ",1e-07," in text and ",-0," in text
    assert "\nroom # 2," in text and '\n"North, ""A""",' in text and ",2026-11-30 10:07:11\n" in text


def test_alert_counts_give_a_rule_a_quantity_only_when_it_checks_one(site):
    """alerts-by-rule.csv: a rule x site row whose alerts (alerts.csv, every alert) are of several
    quantities names none (it named whichever alert DuckDB met first, which changed with the
    table's row order); a row whose alerts share one quantity names it and its unit. The robust
    outliers fire on several quantities at some site of the corpus."""
    counts = pd.read_csv(site / "alerts-by-rule.csv", keep_default_na=False)
    alerts = pd.read_csv(site / "alerts.csv", keep_default_na=False)
    quantities = alerts.groupby(["rule", "site_label"])[["quantity", "unit"]].agg(set)
    several = 0
    for row in counts.itertuples():
        named = quantities.loc[(row.rule, row.site_label)]
        if len(named["quantity"]) > 1:
            several += 1
            assert row.quantity == "" and row.unit == "", row
        else:
            assert {row.quantity} == named["quantity"] and {row.unit} == named["unit"], row
    assert several > 0


def test_every_figure_is_handed_to_the_drawing_script_once(site):
    """A figure's newPlot call is wrapped in kermaPlot with the figure's own div id (never run
    while the page is parsed), and a page with figures carries templates/plots.html once, after
    plotly.min.js; a page without figures carries neither."""
    for name in PAGE_FILES:
        html = _html(site, name)
        divs = re.findall(r'<div id="([^"]+)" class="plotly-graph-div"', html)
        handed = re.findall(r'kermaPlot\("([^"]+)", function \(\) \{ return Plotly\.newPlot\("([^"]+)",', html)
        assert [a for a, _ in handed] == divs and all(a == b for a, b in handed), name
        assert html.count("Plotly.newPlot(") == len(divs), name
        assert html.count("window.kermaPlot = function") == (1 if divs else 0), name
        if divs:
            assert html.index('src="plotly.min.js"') < html.index("window.kermaPlot") < html.index(divs[0])
            assert "The figures are drawn after the page opens" in html, name


def _as_text(rows: pd.DataFrame) -> pd.DataFrame:
    """`rows` with every categorical column turned back into text (pandas' "str")."""
    out = rows.copy()
    for column, dtype in rows.dtypes.items():
        if isinstance(dtype, pd.CategoricalDtype):
            out[column] = rows[column].astype("str")
    return out


def test_site_from_categorical_frames_is_the_site_from_text_frames(marts):
    """The long frames hold their repeated labels as categoricals (memory at 10M events): every
    page and every CSV built from them must be character for character what the same frames as
    text give (groups of observed labels only, labels sorted as text, NULL as before)."""
    data, label, first, last, sets = marts
    ctx = model.Context(period=label, date_from=first, date_to=last, reference_sets=sets,
                        generated_at=GENERATED_AT)
    frames = {f.name: getattr(data, f.name) for f in dataclasses.fields(data)
              if isinstance(getattr(data, f.name), pd.DataFrame)}
    categorical = {name for name, rows in frames.items()
                   if any(isinstance(d, pd.CategoricalDtype) for d in rows.dtypes)}
    assert categorical == {"room_medians", "distribution", "monthly", "funnel_points", "alerts",
                           "alert_events"}
    text = dataclasses.replace(data, **{name: _as_text(frames[name]) for name in categorical})
    assert not any(isinstance(d, pd.CategoricalDtype) for d in text.room_medians.dtypes)
    got, want = pages.build_site(data, ctx), pages.build_site(text, ctx)
    assert got.pages.keys() == want.pages.keys()
    for name, html in want.pages.items():
        assert got.pages[name] == html, name
    assert got.tables.keys() == want.tables.keys()
    for name, rows in want.tables.items():
        assert site_module.csv_text(got.tables[name]) == site_module.csv_text(rows), name
