"""Read the committee report's rows from an audited warehouse, and write the report (the shell)."""

from __future__ import annotations

import datetime as dt
from pathlib import Path

import duckdb

from queries import sql

from .content import ReportInput, report_content
from .render import render_html, write_pdf

__all__ = ["read_report_input", "write_report"]


def _rows(con, name: str, **params) -> list[dict]:
    text = sql(name)
    cursor = con.execute(text, {k: v for k, v in params.items() if f"${k}" in text})
    columns = [d[0] for d in cursor.description]
    return [dict(zip(columns, row)) for row in cursor.fetchall()]


def _data_checks(con) -> list[dict]:
    """The data_check tier of the last audit; none when the warehouse predates data_alerts."""
    exists = con.execute("select count(*) from information_schema.tables "
                         "where table_name = 'data_alerts'").fetchone()[0]
    return _rows(con, "report_data_alerts") if exists else []


def _skin_maps(con) -> list[dict]:
    """Skin-dose map cells of the studies at a peak-skin-dose alert; none when the warehouse
    predates skin_dose_map."""
    exists = con.execute("select count(*) from information_schema.tables "
                         "where table_name = 'skin_dose_map'").fetchone()[0]
    return _rows(con, "report_skin_dose_maps") if exists else []


def read_report_input(con, *, generated_at: dt.datetime, version: str = "") -> ReportInput:
    """Rows of the last audit in the warehouse (`con`, read-only) and its previous period.

    Raises
    ------
    pipeline.errors.WarehouseError
        The warehouse has not been audited.
    """
    import dataclasses

    import pyarrow as pa

    from dashboards.site import _exam_types
    from pipeline.audit import previous_period

    from ..errors import WarehouseError
    from .content import detailed_follow_up

    last_audit = _rows(con, "report_last_audit")
    if not last_audit:
        raise WarehouseError("the warehouse has no audit of a period: run `kerma audit` first")
    label, first, last = (last_audit[0][k] for k in ("period", "date_from", "date_to"))
    con.register("dash_exam_type", _exam_types())
    devices = con.execute(sql("dash_devices")).df()
    con.register("dash_device", devices)
    try:
        prev_first, prev_after = previous_period(first, last + dt.timedelta(days=1))
        prev_last = prev_after - dt.timedelta(days=1)
        findings = _rows(con, "report_findings", date_from=first, date_to=last)
        previous = _rows(con, "report_findings", date_from=prev_first, date_to=prev_last)
        audited = _rows(con, "report_period_audited", date_from=prev_first, date_to=prev_last)
        inp = ReportInput(
            period=label, date_from=first, date_to=last, previous_from=prev_first,
            previous_to=prev_last, previous_audited=bool(audited),
            reference_sets=_rows(con, "dash_reference_sets"), findings=findings,
            previous_findings=previous,
            notes={n["item_id"]: n for n in _rows(con, "report_latest_notes")},
            alerts=_rows(con, "report_alerts"), medians=_rows(con, "report_flagged_medians"),
            drift=_rows(con, "report_drift"), coverage=_rows(con, "report_coverage"),
            rooms={r.device_key: (r.site_label, r.room_label) for r in devices.itertuples()},
            generated_at=generated_at, version=version, data_checks=_data_checks(con))
        # events and skin-dose map cells only of the studies shown in detail (a network's year
        # may hold hundreds of follow-up studies with thousands of events and cells each)
        con.register("report_detail_study",
                     pa.table({"study_key": pa.array(detailed_follow_up(inp), pa.string())}))
        try:
            inp = dataclasses.replace(inp, events=_rows(con, "report_follow_up_events"),
                                      skin_maps=_skin_maps(con))
        finally:
            con.unregister("report_detail_study")
    finally:
        con.unregister("dash_exam_type")
        con.unregister("dash_device")
    return inp


def write_report(warehouse: Path, out: Path, *, fmt: str = "pdf",
                 generated_at: dt.datetime | None = None) -> Path:
    """Write the committee report of the last audit in `warehouse` to `out` (PDF or HTML).

    Parameters
    ----------
    warehouse : Path
        An audited DuckDB warehouse (the previous period of the same length is compared when
        it was audited too; ``kerma report`` audits both).
    out : Path
        The file to write.
    fmt : {"pdf", "html"}
    generated_at : datetime, optional
        Printed in every footer; now (UTC) by default.

    Returns
    -------
    Path
        `out`.

    Raises
    ------
    pipeline.errors.WarehouseError
        No warehouse, or not audited.
    ValueError
        Unknown `fmt`.
    """
    from dashboards.site import _check_audited
    from pipeline import __version__

    from ..errors import WarehouseError
    from ..warehouse.connection import connection

    if fmt not in ("pdf", "html"):
        raise ValueError(f"--format must be pdf or html, not {fmt!r}")
    if not Path(warehouse).exists():
        raise WarehouseError(f"no warehouse at {warehouse}")
    stamp = generated_at or dt.datetime.now(dt.UTC).replace(microsecond=0)
    with connection(warehouse, read_only=True) as con:
        _check_audited(con, Path(warehouse))
        try:
            con.execute("select 1 from audit_finding limit 0")
        except duckdb.CatalogException as exc:   # audited by a version without audit_finding
            raise WarehouseError(f"warehouse {warehouse} was audited by an older version: run "
                                 "`kerma audit` again") from exc
        inp = read_report_input(con, generated_at=stamp, version=__version__)
    html = render_html(report_content(inp))
    out = Path(out)
    if fmt == "html":
        out.parent.mkdir(parents=True, exist_ok=True)
        out.write_text(html, encoding="utf-8")
        return out
    return write_pdf(html, out)
