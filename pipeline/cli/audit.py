"""``kerma audit`` and ``kerma dashboard``: the audit of a period and its static site."""

from __future__ import annotations

from pathlib import Path

import typer
from rich.table import Table

from .app import app, console, fail, parse_day

__all__ = ["CAUTION", "NO_DATA", "audit_command", "dashboard_command", "print_audit_summary",
           "print_data_checks"]

CAUTION = ("A reference level is an investigation level, not a dose limit. Flagged exams and "
           "units need review by a qualified medical physicist; local regulations prevail.")


NO_DATA = "no data for this period"


def print_data_checks(summary) -> None:
    """The data_check tier first: a feed that went quiet or thin, or a period without data."""
    if summary.has_no_data:
        console.print(f"[bold red]Finding: {NO_DATA}[/bold red] - the warehouse holds no study "
                      f"dated {summary.date_from} to {summary.date_to}. This is not a clean audit: "
                      "check that the dose reports of the period were ingested.", soft_wrap=True)
    rows = [r for r in summary.data_alerts if r["device_key"] is not None]
    if not rows:
        console.print("Data checks (feeds of dose reports): no device silent or below its usual volume.")
        return
    table = Table(title="Data checks: feeds of dose reports to review first (data_check)")
    for c in ("Site", "Device", "Kind", "Last study", "Expected / week", "Observed / week", "Detail"):
        table.add_column(c)
    for r in rows:
        table.add_row(str(r["site"] or ""), r["device_key"], r["kind"], str(r["last_study_date"] or ""),
                      "" if r["expected_per_week"] is None else f"{r['expected_per_week']:.1f}",
                      "" if r["observed_per_week"] is None else f"{r['observed_per_week']:.1f}",
                      r["detail"])
    console.print(table)


def print_audit_summary(summary) -> None:
    """Print an AuditSummary: data checks first, then exceedances, alerts, drift and the caution."""
    console.rule(f"Audit {summary.period} ({summary.date_from} to {summary.date_to})")
    print_data_checks(summary)
    if summary.has_no_data:
        console.print(f"Dose findings: none can be made ({NO_DATA}).")
        console.print(f"[dim]{CAUTION}[/dim]")
        return
    console.print(f"Reference sets (in order of precedence): {', '.join(summary.reference_sets) or 'none'}"
                  f" - issuing body: {summary.reference_body or 'none'} ({summary.reference_basis})")
    if summary.fallback_sets:
        console.print(f"Fallback sets (fill gaps only; each such row says so): {', '.join(summary.fallback_sets)}")
    console.print(f"Studies: {summary.n_studies}; not mapped to an exam type: {summary.n_unmapped} "
                  f"({100 * summary.unmapped_share:.1f} %); audit groups: {summary.n_groups}")
    console.print(f"Groups compared with a reference level: {summary.n_compared} of {summary.n_groups} "
                  f"(the others say why in audit_medians.reference_scope_note; compare them with the "
                  f"network typical value). Too few exams (n below min_sample: "
                  f"{', '.join(f'{m} {n}' for m, n in sorted(summary.min_sample.items()))}): "
                  f"{summary.n_too_few} groups.")
    table = Table(title="Room medians above their reference level")
    for c in ("Site", "Exam type", "Quantity", "n", "Median", "Reference", "Ratio",
              "Standard-size (50-90 kg) ratio", "Set", "Sample"):
        table.add_column(c)
    for r in summary.exceedances:
        # ICRP 135: the standard-size median is the one to compare where most exams have a weight
        std = (f"{r['ratio_standard_size_to_reference']:.2f} (n {r['n_standard_size']})"
               if r["n_with_weight"] > r["n"] / 2 and r["n_standard_size"] else "weights too sparse")
        table.add_row(str(r["site"]), r["exam_type"], f"{r['quantity']} ({r['unit']})", str(r["n"]),
                      f"{r['median']:.4g}", f"{r['reference_value']:.4g}",
                      f"{r['ratio_to_reference']:.2f}", std, r["reference_set"],
                      "adequate" if r["is_sample_adequate"]
                      else f"[yellow]too few (n < {r['min_sample']})[/yellow]")
    console.print(table if summary.exceedances else "No room median above its reference level.")
    alerts = ", ".join(f"{k}: {v}" for k, v in summary.alerts_by_rule.items()) or "none"
    console.print(f"Individual-exam alerts: {alerts}")
    if summary.drift:
        for d in summary.drift:
            console.print(f"Drift: {d['site']} {d['exam_type']} {d['quantity']}: median "
                          f"{d['median_before']:.4g} -> {d['median_after']:.4g} {d['unit']} from "
                          f"{d['change_month']} (z = {d['statistic_z']:.1f}, "
                          f"p = {d['p_value_bonferroni']:.1e})")
    else:
        console.print("Drift: none flagged.")
    console.print(f"[dim]{CAUTION}[/dim]")


@app.command("audit")
def audit_command(
    warehouse: Path = typer.Option(..., "--warehouse", help="DuckDB warehouse file."),
    period: str | None = typer.Option(None, "--period", help="Calendar month YYYY-MM."),
    date_from: str | None = typer.Option(None, "--from", help="First day YYYY-MM-DD."),
    date_to: str | None = typer.Option(None, "--to", help="Last day YYYY-MM-DD."),
    reference: list[str] = typer.Option([], "--reference", help="Reference set id; repeat to give several in order of precedence (default: [audit] in kerma.toml, else the newest verified sets of one issuing body)."),
    config: Path | None = typer.Option(None, "--config", help="Settings file (default ./kerma.toml)."),
) -> None:
    """Medians against reference levels (ICRP 135), network values, alerts and drift for a period."""
    from ..audit import run_audit
    from ..config import DEFAULT_CONFIG
    from ..errors import ConfigError, WarehouseError

    d_from, d_to = parse_day(date_from, "--from"), parse_day(date_to, "--to")
    try:
        summary = run_audit(warehouse, period=period, date_from=d_from, date_to=d_to,
                            reference_sets=reference or None, config=config or DEFAULT_CONFIG)
    except (ConfigError, WarehouseError) as exc:
        fail(str(exc))
    print_audit_summary(summary)


@app.command("dashboard")
def dashboard_command(
    warehouse: Path = typer.Option(..., "--warehouse", help="DuckDB warehouse file (audited)."),
    period: str | None = typer.Option(None, "--period", help="Calendar month YYYY-MM to report."),
    date_from: str | None = typer.Option(None, "--from", help="First day YYYY-MM-DD."),
    date_to: str | None = typer.Option(None, "--to", help="Last day YYYY-MM-DD."),
    out: Path = typer.Option(..., "--out", help="Folder for the static site."),
    reference: list[str] = typer.Option([], "--reference", help="Reference set id(s), as for `kerma audit`."),
    config: Path | None = typer.Option(None, "--config", help="Settings file (default ./kerma.toml)."),
) -> None:
    """Write the offline dashboards (one self-contained HTML page per area) for a period."""
    from dashboards.site import write_site

    from ..audit import audit_is_current, run_audit
    from ..config import DEFAULT_CONFIG
    from ..errors import ConfigError, WarehouseError

    try:
        d_from = parse_day(date_from, "--from")
        d_to = parse_day(date_to, "--to")
        arguments = {"period": period, "date_from": d_from, "date_to": d_to,
                     "reference_sets": reference or None, "config": config or DEFAULT_CONFIG}
        if Path(warehouse).exists() and audit_is_current(warehouse, **arguments):
            console.print("The audit of this period is current (no data or settings changed "
                          "since): not re-run.")
        else:
            run_audit(warehouse, **arguments)
        index = write_site(warehouse, out)
    except ValueError as exc:
        fail(str(exc))
    except (ConfigError, WarehouseError) as exc:
        fail(str(exc))
    console.print(f"Dashboards written: {index}")
