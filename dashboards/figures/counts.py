"""Counts (alerts, patient weight, input files) and the skin-dose map."""

from __future__ import annotations

import functools
from collections.abc import Mapping

import pandas as pd
import plotly.graph_objects as go

from ..theme import (
    NETWORK_COLOUR,
    PALETTE,
)
from .common import (
    _as_figure,
    _titled,
    _new_layout,
    _layout,
    _log_ticks,
    _num,
    _require,
    _site_colour,
    _wants_log,
)

__all__ = ["build_alert_counts", "build_file_status", "build_skin_dose_map", "build_weight_share"]


# --- alerts and data quality ------------------------------------------------------------------
def build_alert_counts(frame: pd.DataFrame, *, site_colours: Mapping[str, str], title: str) -> go.Figure:
    """Alerts per rule, stacked by site. Expects rows of ``dash_alert_counts.sql``
    (rule, site_label, n_alerts)."""
    _require(frame, ["rule", "site_label", "n_alerts"], "build_alert_counts")
    if "rule_text" in frame.columns:    # the rule in plain words (pipeline.report.words)
        frame = frame.assign(rule=frame["rule_text"])
    rules = sorted(frame["rule"].unique())
    fig = go.Figure()
    for site in sorted(frame["site_label"].unique()):
        part = frame[frame["site_label"] == site]
        count = {r: int(n) for r, n in zip(part["rule"], part["n_alerts"], strict=True)}
        fig.add_trace(go.Bar(name=site, orientation="h", y=rules, x=[count.get(r, 0) for r in rules],
                             marker={"color": _site_colour(site_colours, site)},
                             hovertemplate="%{y}: %{x} alerts<extra>" + site + "</extra>"))
    fig.update_layout(barmode="stack")
    fig.update_xaxes(title={"text": "Individual-exam alerts in the period (count)"}, type="linear")
    fig.update_yaxes(title={"text": "Alert rule"}, type="category", autorange="reversed")
    return _layout(fig, title, height=120 + 34 * len(rules))


def build_weight_share(frame: pd.DataFrame, *, title: str) -> go.Figure:
    """Share of studies with a patient weight, per site and modality. Expects rows of
    ``dash_weight_share.sql`` (site_label, modality, n_studies, n_with_weight, pct_with_weight)."""
    _require(frame, ["site_label", "modality", "n_studies", "n_with_weight", "pct_with_weight"],
             "build_weight_share")
    sites = sorted(frame["site_label"].unique())
    fig = go.Figure()
    for k, modality in enumerate(sorted(frame["modality"].dropna().unique())):
        part = frame[frame["modality"] == modality]
        fig.add_trace(go.Bar(
            name=str(modality), x=list(part["site_label"]), y=[_num(v) for v in part["pct_with_weight"]],
            marker={"color": PALETTE[k % len(PALETTE)]},
            customdata=[[int(a), int(b)] for a, b in zip(part["n_with_weight"], part["n_studies"], strict=True)],
            hovertemplate="%{x}, " + str(modality) + ": %{y:.0f} % (%{customdata[0]} of %{customdata[1]})<extra></extra>",
        ))
    fig.update_layout(barmode="group")
    fig.update_xaxes(title={"text": "Site"}, type="category", categoryorder="array", categoryarray=sites)
    fig.update_yaxes(title={"text": "Studies with patient weight recorded (%)"}, type="linear", range=[0, 100])
    return _layout(fig, title, height=340)


def build_file_status(frame: pd.DataFrame, *, title: str) -> go.Figure:
    """Input files by outcome and reason. Expects rows of ``dash_source_status.sql``
    (status, reason, n_files). Logarithmic when loaded files dwarf the rest."""
    _require(frame, ["status", "reason", "n_files"], "build_file_status")
    labels = [f"{s}: {r}" if r else str(s) for s, r in zip(frame["status"], frame["reason"], strict=True)]
    # the status is written on each bar's row; colour only separates unused files (grey) from
    # loaded ones (dark), so no site colour gets a second meaning on the page
    colours = {"loaded": "#444444"}
    fig = go.Figure(go.Bar(
        orientation="h", y=labels, x=[int(v) for v in frame["n_files"]], name="files",
        marker={"color": [colours.get(str(s), NETWORK_COLOUR) for s in frame["status"]]},
        text=[str(int(v)) for v in frame["n_files"]], textposition="outside",
        hovertemplate="%{y}: %{x} files<extra></extra>", showlegend=False,
    ))
    log = _wants_log(frame["n_files"])
    fig.update_xaxes(title={"text": "Input files (count" + (", log scale)" if log else ")")},
                     type="log" if log else "linear",
                     **(_log_ticks([1, *frame["n_files"]]) if log else {}))
    fig.update_yaxes(title={"text": "Outcome: reason"}, type="category", autorange="reversed")
    return _layout(fig, title, height=100 + 34 * len(labels))


# --- skin-dose map (peak skin dose follow-up) ---------------------------------------------
def build_skin_dose_map(frame: pd.DataFrame, *, title: str) -> go.Figure:
    """Skin dose of one study on the unrolled phantom surface, cells in Gy. Expects the rows of
    one study from ``dash_skin_dose_maps.sql`` (around_mm, along_mm, dose_gy, psd_gy); cells
    not in the rows received no dose."""
    _require(frame, ["around_mm", "along_mm", "dose_gy", "psd_gy"], "build_skin_dose_map")
    grid = frame.pivot_table(index="along_mm", columns="around_mm", values="dose_gy",
                             aggfunc="sum").fillna(0.0)
    # a plain trace and layout (one unvalidated go.Figure), as go.Heatmap, update_xaxes,
    # update_yaxes and _layout leave them: the colour scale by name becomes its colour stops
    trace = {"type": "heatmap", "colorbar": {"title": {"text": "Skin dose (Gy)"}},
             "colorscale": _colour_stops("Inferno"),
             "hovertemplate": "around %{x:.0f} cm, along %{y:.0f} cm: %{z:.2f} Gy<extra></extra>",
             "x": [float(c) / 10.0 for c in grid.columns], "y": [float(r) / 10.0 for r in grid.index],
             "z": grid.to_numpy(), "zmin": 0.0}
    layout, _ = _new_layout()
    layout["xaxis"] = {"title": {"text": "Around the trunk from the front midline via the patient's "
                                         "right; back at the centre (cm)"}, "type": "linear"}
    layout["yaxis"] = {"title": {"text": "Along the body, towards the head (cm)"}, "type": "linear",
                       "scaleanchor": "x", "scaleratio": 1.0}
    peak = float(frame["psd_gy"].iloc[0])
    _titled(layout, f"{title}: peak skin dose estimate {peak:.1f} Gy", height=420)
    return _as_figure([trace], layout)


@functools.cache
def _named_stops(name: str) -> tuple:
    return tuple(tuple(stop) for stop in go.Heatmap(colorscale=name).colorscale)


def _colour_stops(name: str) -> list[list]:
    """A named plotly colour scale as the [position, colour] stops its validator writes."""
    return [list(stop) for stop in _named_stops(name)]
