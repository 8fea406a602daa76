"""``kerma survey``: per exam type, a CSV of what national patient-dose surveys ask per room.

One row per room x population; per reference quantity its n, median and mean (the unit in the
column name), with the median patient age, weight and tube voltage (kVp) and the reference set
the audit compared the room with. Pure reshaping in `survey_tables`; `write_survey` is the shell.
"""

from __future__ import annotations

import datetime as dt
import re
from pathlib import Path

import pandas as pd

from queries import sql

__all__ = ["survey_tables", "write_survey"]

_KEYS = ["site", "room", "device_key", "modality", "exam_type", "population"]


def _unit_suffix(unit: str) -> str:
    return re.sub(r"[^a-z0-9]+", "_", unit.lower()).strip("_")


def survey_tables(rows: pd.DataFrame) -> dict[str, pd.DataFrame]:
    """Rows of ``queries/report/survey_rooms.sql`` -> one wide table per exam type.

    Columns: site, room, device_key, modality, exam_type, population, n_studies,
    median_age_years, median_weight_kg, n_with_weight, median_kvp, then per quantity
    ``n_<q>``, ``median_<q>_<unit>``, ``mean_<q>_<unit>``, and reference_sets.
    """
    out: dict[str, pd.DataFrame] = {}
    for exam, group in rows.groupby("exam_type", sort=True):
        base = (group.groupby(_KEYS, dropna=False, sort=True)
                .agg(n_studies=("n_studies", "max"), median_age_years=("median_age_years", "first"),
                     median_weight_kg=("median_weight_kg", "first"),
                     n_with_weight=("n_with_weight", "max"), median_kvp=("median_kvp", "first"),
                     reference_sets=("reference_set",
                                     lambda s: "; ".join(sorted({v for v in s if isinstance(v, str)}))))
                .reset_index())
        for (quantity, unit), q in group.groupby(["quantity", "unit"], sort=True):
            suffix = f"{quantity}_{_unit_suffix(unit)}"
            wide = q[_KEYS + ["n", "median_value", "mean_value"]].rename(columns={
                "n": f"n_{quantity}", "median_value": f"median_{suffix}",
                "mean_value": f"mean_{suffix}"})
            base = base.merge(wide, on=_KEYS, how="left")
        columns = [c for c in base.columns if c != "reference_sets"] + ["reference_sets"]
        out[str(exam)] = base[columns]
    return out


def write_survey(warehouse: Path, out_dir: Path, *, first: dt.date, after: dt.date,
                 adult_min_age: float = 16.0) -> list[Path]:
    """Write ``<exam_type>.csv`` per exam type into `out_dir` from the audited `warehouse`.

    Parameters
    ----------
    warehouse : Path
        A warehouse audited for the period (``audit_medians`` names the reference sets).
    out_dir : Path
        Folder for the CSV files (created).
    first, after : date
        The period: first day and the day after the last.
    adult_min_age : float
        Age from which a patient counts as adult (the audit's setting).

    Returns
    -------
    list of Path
        The files written, one per exam type with observations.
    """
    from dashboards.site import _check_audited

    from .warehouse.connection import connection

    with connection(warehouse, read_only=True) as con:
        _check_audited(con, Path(warehouse))
        con.register("dash_device", con.execute(sql("dash_devices")).df())
        try:
            rows = con.execute(sql("survey_rooms"), {"date_from": first, "date_to": after,
                                                     "adult_min_age": adult_min_age}).df()
        finally:
            con.unregister("dash_device")
    out_dir = Path(out_dir)
    out_dir.mkdir(parents=True, exist_ok=True)
    written = []
    for exam, table in survey_tables(rows).items():
        path = out_dir / f"{exam}.csv"
        table.to_csv(path, index=False, float_format="%.6g", lineterminator="\n")
        written.append(path)
    return written
