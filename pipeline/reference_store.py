"""Reference-level sets in the warehouse (the shell): shipped sets, imports, derived local DRLs.

The shipped sets are data files under ``queries/seeds/reference_levels`` (read by
``pipeline.reference``); they are re-installed on each audit so a corrected file takes effect.
Imported and derived sets stay until replaced. A set whose values are not all verified
against their published source is installed but not used unless asked for by name.
"""

from __future__ import annotations

import csv
import datetime as dt
from pathlib import Path

import duckdb
import pyarrow as pa

from queries import sql

from .errors import ConfigError
from .units import Quantity, UnitError, convert

__all__ = ["CANONICAL", "CSV_COLUMNS", "derive_local_set", "import_reference_csv",
           "install_reference_sets", "reference_rows"]

CSV_COLUMNS = ["set_id", "issuing_body", "country", "version", "effective_date", "valid_to",
               "superseded_by", "exam_type", "indication", "quantity", "value", "unit",
               "population", "age_min_years", "age_max_years", "weight_min_kg", "weight_max_kg",
               "phantom", "phantom_stated", "citation_title", "citation_year", "citation_table",
               "citation_url", "verified", "note"]

# quantity -> (unit conversion family, canonical unit used by the audit)
CANONICAL = {"dlp": (Quantity.DLP, "mGy.cm"), "ctdivol": (Quantity.AIR_KERMA, "mGy"),
             "dap": (Quantity.DAP, "Gy.cm2"), "dose_rp": (Quantity.AIR_KERMA, "mGy"),
             "fluoro_time": (Quantity.TIME, "s"), "agd": (Quantity.AIR_KERMA, "mGy"),
             "ka_e": (Quantity.AIR_KERMA, "mGy"),
             "entrance_dose": (Quantity.AIR_KERMA, "mGy")}
_UNIT_SPELLINGS = {"mgy cm": "mGy.cm", "mgy·cm": "mGy.cm", "mgycm": "mGy.cm", "gy cm2": "Gy.cm2",
                   "gy·cm²": "Gy.cm2", "gy cm²": "Gy.cm2", "gy.cm²": "Gy.cm2", "mgy cm2": "mGy.cm2",
                   "minutes": "min", "seconds": "s"}

_SCHEMA = pa.schema([
    ("set_id", pa.string()), ("origin", pa.string()), ("issuing_body", pa.string()),
    ("country", pa.string()), ("version", pa.string()), ("effective_date", pa.string()),
    ("valid_to", pa.string()), ("superseded_by", pa.string()), ("exam_type", pa.string()),
    ("indication", pa.string()), ("quantity", pa.string()), ("value", pa.float64()), ("unit", pa.string()),
    ("value_canonical", pa.float64()), ("unit_canonical", pa.string()),
    ("population", pa.string()), ("age_min_years", pa.float64()), ("age_max_years", pa.float64()),
    ("weight_min_kg", pa.float64()), ("weight_max_kg", pa.float64()), ("phantom", pa.string()),
    ("phantom_stated", pa.bool_()), ("citation_title", pa.string()), ("citation_year", pa.int64()),
    ("citation_table", pa.string()), ("citation_url", pa.string()), ("verified", pa.bool_()),
    ("note", pa.string())])


def _float(v) -> float | None:
    if v is None or (isinstance(v, str) and not v.strip()):
        return None
    return float(v)


def _bool(v) -> bool:
    return v if isinstance(v, bool) else str(v).strip().lower() in ("true", "yes", "1")


def _text(v) -> str | None:
    return str(v).strip() or None if v is not None else None


def reference_rows(raw_rows: list[dict], origin: str, where: str) -> list[dict]:
    """Validate rows of the reference CSV format and add canonical values.

    Raises ConfigError naming `where` and the row for an unknown exam type, quantity or unit.
    """
    from .exams import EXAM_TYPES

    out = []
    for n, r in enumerate(raw_rows, start=2):  # row 1 is the header
        missing = [c for c in ("set_id", "exam_type", "quantity", "value", "unit") if not str(r.get(c) or "").strip()]
        if missing:
            raise ConfigError(f"{where}, row {n}: missing {', '.join(missing)}")
        if r["exam_type"] not in EXAM_TYPES:
            raise ConfigError(f"{where}, row {n}: unknown exam type {r['exam_type']!r}")
        if r["quantity"] not in CANONICAL:
            raise ConfigError(f"{where}, row {n}: unknown quantity {r['quantity']!r} "
                              f"(one of {', '.join(CANONICAL)})")
        family, canonical = CANONICAL[r["quantity"]]
        unit = str(r["unit"]).strip()
        unit = _UNIT_SPELLINGS.get(unit.lower(), unit)
        try:
            value = float(r["value"])
            value_canonical = convert(value, unit, family)
        except (ValueError, UnitError) as exc:
            raise ConfigError(f"{where}, row {n}: {exc}") from None
        effective = str(r.get("effective_date") or "").strip() or None
        year = r.get("citation_year")
        phantom = _text(r.get("phantom"))
        stated = r.get("phantom_stated")
        out.append({
            "set_id": r["set_id"], "origin": origin, "issuing_body": r.get("issuing_body") or None,
            "country": _text(r.get("country")),
            "version": str(r.get("version") or "") or None, "effective_date": effective,
            "valid_to": _text(r.get("valid_to")), "superseded_by": _text(r.get("superseded_by")),
            "exam_type": r["exam_type"], "indication": _text(r.get("indication")),
            "quantity": r["quantity"], "value": value,
            "unit": r["unit"], "value_canonical": value_canonical, "unit_canonical": canonical,
            "population": (r.get("population") or "adult").strip() or "adult",
            "age_min_years": _float(r.get("age_min_years")), "age_max_years": _float(r.get("age_max_years")),
            "weight_min_kg": _float(r.get("weight_min_kg")), "weight_max_kg": _float(r.get("weight_max_kg")),
            "phantom": phantom,
            # a user's own set states its phantom unless it says otherwise
            "phantom_stated": None if phantom is None else (
                True if stated is None or str(stated).strip() == "" else _bool(stated)),
            "citation_title": r.get("citation_title") or None,
            "citation_year": int(float(year)) if str(year or "").strip() else None,
            "citation_table": r.get("citation_table") or None, "citation_url": r.get("citation_url") or None,
            "verified": _bool(r.get("verified", False)), "note": r.get("note") or None})
    return out


# columns added after the first release: a warehouse made before them gets them on first use
_ADDED_COLUMNS = {"country": "varchar", "valid_to": "varchar", "superseded_by": "varchar",
                  "indication": "varchar", "phantom_stated": "boolean"}


def _add_missing_columns(con: duckdb.DuckDBPyConnection) -> None:
    have = {r[0] for r in con.execute("describe reference_level").fetchall()}
    for name, kind in _ADDED_COLUMNS.items():
        if name not in have:
            con.execute(f"alter table reference_level add column {name} {kind}")


def _write_sets(con: duckdb.DuckDBPyConnection, rows: list[dict]) -> None:
    _add_missing_columns(con)
    con.execute("begin transaction")
    try:
        for set_id in sorted({r["set_id"] for r in rows}):
            con.execute(sql("delete_reference_set"), {"set_id": set_id})
        con.register("incoming_reference_level", pa.Table.from_pylist(rows, schema=_SCHEMA))
        try:
            con.execute(sql("insert_reference_level"))
        finally:
            con.unregister("incoming_reference_level")
        con.execute("commit")
    except BaseException:
        con.execute("rollback")
        raise


def install_reference_sets(con: duckdb.DuckDBPyConnection) -> dict[str, bool]:
    """(Re)install the shipped sets; returns every set in the warehouse -> current (all values
    verified, not superseded). Which sets an audit uses is decided by pipeline.jurisdiction."""
    from .reference import load_reference_sets

    shipped = reference_rows(load_reference_sets(include_unverified=True), "shipped",
                             "queries/seeds/reference_levels")
    if shipped:
        _write_sets(con, shipped)
    return {set_id: bool(ok) for set_id, ok in con.execute(sql("select_reference_sets")).fetchall()}


def import_reference_csv(con: duckdb.DuckDBPyConnection, path: Path) -> tuple[str, int]:
    """Import a user's national or local set from a CSV in the shipped format."""
    try:
        with open(path, newline="", encoding="utf-8-sig") as handle:
            reader = csv.DictReader(handle)
            missing = {"set_id", "exam_type", "quantity", "value", "unit"} - set(reader.fieldnames or [])
            if missing:
                raise ConfigError(f"{path}: missing column(s) {', '.join(sorted(missing))}; "
                                  f"expected {', '.join(CSV_COLUMNS)}")
            raw = list(reader)
    except OSError as exc:
        raise ConfigError(f"cannot read {path}: {exc.strerror}") from exc
    if not raw:
        raise ConfigError(f"{path}: no rows")
    for r in raw:
        r.setdefault("verified", "true")  # the user vouches for their own set
        if not str(r.get("verified") or "").strip():
            r["verified"] = "true"
    rows = reference_rows(raw, "imported", str(path))
    ids = {r["set_id"] for r in rows}
    if len(ids) != 1:
        raise ConfigError(f"{path}: one set per file, found {', '.join(sorted(ids))}")
    _write_sets(con, rows)
    return ids.pop(), len(rows)


def derive_local_set(con: duckdb.DuckDBPyConnection, set_id: str, title: str, *,
                     allow_few_rooms: bool = False) -> int:
    """Save the network's 75th percentile of room medians (ICRP 135) from network_reference
    (the latest audit) as a set of its own.

    ICRP Publication 135 sets a local DRL from a reasonable number of rooms (e.g. 10-20): a
    value from fewer rooms (``network_reference.is_local_drl`` false) is refused unless
    `allow_few_rooms`, and then its note says how few. Stratified (paediatric band,
    breast-thickness band) rows are not saved: the set format has no thickness band.

    Raises
    ------
    ConfigError
        No audited network values, or values from too few rooms without `allow_few_rooms`.
    """
    frame = con.execute(sql("select_network_for_local_set")).df()
    if frame.empty:
        raise ConfigError("no network values with adequate samples: run `kerma audit` first")
    frame = frame.astype(object).where(frame.notna(), None)
    few = frame[~frame["is_local_drl"].astype(bool)]
    if len(few) and not allow_few_rooms:
        worst = few.sort_values("n_rooms").iloc[0]
        raise ConfigError(
            f"{len(few)} of {len(frame)} network values come from fewer than "
            f"{int(worst.min_rooms_local_drl)} rooms (e.g. {worst.exam_type} {worst.quantity}: "
            f"{int(worst.n_rooms)} room(s)); ICRP 135 sets a local DRL from a reasonable number "
            f"of rooms (10-20). Use the typical values of network_reference as comparators, or "
            f"pass --allow-few-rooms to save them anyway, labelled")
    period = str(frame["period"].iloc[0])
    rows = [{"set_id": set_id, "issuing_body": "local (derived by Kerma Ledger)", "version": period,
             "effective_date": dt.date.today().isoformat(), "exam_type": r.exam_type,
             "quantity": r.quantity, "value": r.p75_of_room_medians, "unit": r.unit,
             "population": r.population, "phantom": r.phantom,
             "citation_title": title, "citation_year": dt.date.today().year,
             "citation_table": "network_reference, 75th percentile of room medians (ICRP 135)",
             "citation_url": None, "verified": True,
             "note": f"{r.n_rooms} rooms, {r.n_exams} exams, period {period}"
                     + ("" if r.is_local_drl else
                        f"; FEWER than {r.min_rooms_local_drl} rooms: not a local DRL in the "
                        f"sense of ICRP 135 (saved with --allow-few-rooms)")}
            for r in frame.itertuples()]
    _write_sets(con, reference_rows(rows, "derived", "derived local set"))
    return len(rows)
