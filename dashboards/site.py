"""The dashboard shell: read the audited warehouse, build the pages, write the static site.

``write_site`` is the only function here that touches disks, DuckDB or the clock. It reads
the public views and the audit tables through the SELECTs in ``queries/dashboards/`` on a
read-only connection, hands the frames to ``dashboards.pages.build_site`` and writes:

* ``index.html`` and one self-contained page per area (no network needed to open them);
* every table on a page as ``<name>.csv`` beside it;
* one shared ``plotly.min.js``, the copy shipped inside the installed plotly package (never
  a CDN).
"""

from __future__ import annotations

import contextlib
import datetime as dt
import re
from collections.abc import Iterator
from pathlib import Path

import duckdb
import numpy as np
import pandas as pd
import plotly
from plotly.offline import get_plotlyjs

from queries import sql

from .model import PLOTLY_JS, Context, SiteData
from .pages import build_site
from .pages.alerts import MAX_SKIN_MAPS
from .pages.trends import MAX_FUNNEL_POINTS

__all__ = ["AUDIT_TABLES", "csv_text", "read_site_data", "write_site"]

# Relations the audit (pipeline.audit.run_audit) writes, and the views the site also reads.
AUDIT_TABLES = ("audit_medians", "network_reference", "dose_alerts", "drift_flags",
                "monthly_medians", "audit_distribution", "study_estimate", "data_alerts",
                "skin_dose", "skin_dose_map")
_VIEWS = ("study_dose", "device", "irradiation_event", "source_object", "value_issue",
          "audit_observation", "reference_level", "key_epoch")
# The SELECTs that count the period's studies (overview, unmapped descriptions, weight share,
# device studies) read two small temporary tables (queries/dashboards/dash_period_studies.sql,
# dash_period_unmapped.sql) made from the kept totals (derived_study_total) and exam matches: the
# studies of one row counted per device, modality and patient values recorded, the others and
# the rows with no exam type listed. They replaced a temporary copy of study_dose that each
# SELECT grouped by study again (10M events: 3.7 CPU-s for the copy and 6.1 in those SELECTs,
# against 0.5 + 1.3-1.9 and 0.5; measured, no other source).
_PERIOD_STUDIES = ("dash_period_studies", "dash_period_unmapped")
# The period's files (queries/dashboards/dash_period_files.sql), from their groups made first by
# dash_period_file_groups.sql: as one statement DuckDB spilled the join of every file to its
# studies (10M events, FILES_MEMORY_LIMIT: 3.2 -> 1.6 CPU-s; measured, no other source).
_PERIOD_FILES = ("dash_period_file_groups", "dash_period_files")
# Kept tables the site reads directly: each file's studies and dates (dash_period_file_groups.sql),
# the study totals and exam matches behind study_dose (dash_period_studies.sql). An audit brings
# them up (it runs ensure_schema), so a warehouse without them has not been audited by this
# version.
_KEPT = ("derived_object_study", "derived_study_total", "stg_exam_match")


def _exam_types() -> pd.DataFrame:
    from pipeline.exams import EXAM_TYPES
    return pd.DataFrame([{"exam_type": t.id, "label": t.label, "per": t.per}
                         for t in EXAM_TYPES.values()], columns=["exam_type", "label", "per"])


def _concepts() -> pd.DataFrame:
    from pydicom.sr.coding import Code

    from pipeline import concepts
    rows = {f"{c.scheme_designator}:{c.value}": c.meaning
            for name in sorted(dir(concepts)) if isinstance(c := getattr(concepts, name), Code)}
    return pd.DataFrame(sorted(rows.items()), columns=["concept_code", "meaning"])


def _period_dates(label: str) -> tuple[dt.date, dt.date]:
    """(first day, last day) of an audit period label: 'YYYY-MM' or 'YYYY-MM-DD..YYYY-MM-DD'."""
    from pipeline.audit import period_bounds

    if ".." in label:
        first, last = label.split("..", 1)
        return dt.date.fromisoformat(first), dt.date.fromisoformat(last)
    first, after, _ = period_bounds(period=label)
    return first, after - dt.timedelta(days=1)


def _check_audited(con: duckdb.DuckDBPyConnection, warehouse: Path) -> None:
    from pipeline.errors import WarehouseError

    names = {r[0] for r in con.execute(sql("dash_relations")).fetchall()}
    missing = [t for t in (*AUDIT_TABLES, *_VIEWS, *_KEPT) if t not in names]
    if missing:
        raise WarehouseError(f"warehouse {warehouse} has not been audited (missing "
                             f"{', '.join(missing)}): run `kerma audit` or `kerma dashboard` first")


def _capture_frames(con: duckdb.DuckDBPyConnection, q) -> dict[str, pd.DataFrame]:
    """The last `kerma completeness` check, when one has run (its tables are optional)."""
    names = {r[0] for r in con.execute(sql("dash_relations")).fetchall()}
    if not {"capture_completeness", "capture_missing_studies"} <= names:
        return {}
    return {"capture": q("dash_capture_completeness"), "capture_missing": q("dash_capture_missing")}


def frame(con: duckdb.DuckDBPyConnection, text: str, params: dict[str, object] | None = None,
          *, categorical: bool = False) -> pd.DataFrame:
    """The rows of the SELECT `text` as DuckDB's ``.df()`` gives them (the same dtypes and
    values), built from its Arrow result where every column is of a kind converted here.

    ``.df()`` makes a Python object of every text value before pandas packs it into Arrow
    again: at 10M events the room medians (225k rows, 113 MiB) passed through a transient of
    ~540 MiB and left ~350 MiB in the process; through Arrow ~310 and ~180, in half the CPU
    time (measured, no other source). Integers and booleans with a NULL become pandas' nullable
    kinds, a text column of NULLs only an object column of None, dates datetime64[us], as
    ``.df()`` does; any other kind (decimals, intervals, lists, ...) is read by ``.df()``.

    With `categorical`, a text column with at most one distinct value per two rows is held as a
    pandas categorical instead (categories sorted as the texts sort, NULL as a missing value):
    the long frames' labels (site, exam type, quantity, unit, scope note, ...) repeat on every
    row, most of their memory at 10M events (see ``_categorical``).

    The result is fetched in batches, DuckDB's allocator flushed after each (``_release``,
    through a cursor: the connection's own statement would end the fetch): the memory of the
    sorted rows it has handed over goes back to the system before the next batch comes (10M
    events, the room medians: ~50 MiB less at the read's peak; measured, no other source).
    """
    import pyarrow as pa

    reader = con.sql(text, params=params or None).to_arrow_reader(_FETCH_ROWS)
    with con.cursor() as flush:
        (limit,), = flush.execute("select current_setting('memory_limit')").fetchall()
        batches = []
        for batch in reader:
            batches.append(batch)
            _release(flush, limit)
    table = pa.Table.from_batches(batches, schema=reader.schema)
    del batches, reader
    columns = {}
    for name, column in zip(table.column_names, table.columns, strict=True):
        series = _arrow_series(column, pa, categorical)
        if series is None or name in columns:
            return con.execute(text, params or None).df()
        columns[name] = series
    del table
    return pd.DataFrame(columns) if columns else con.execute(text, params or None).df()


# rows per Arrow batch of a frame's read (DuckDB's default for a whole Arrow table)
_FETCH_ROWS = 131_072


def _arrow_series(column, pa, categorical: bool = False) -> pd.Series | None:
    """One Arrow column as ``.df()`` would give it (a text column of few distinct values as a
    categorical with `categorical`); None for a kind left to ``.df()``."""
    kind = column.type
    nulls = column.null_count
    if pa.types.is_integer(kind):
        if not nulls:
            return column.to_pandas()
        values = column.fill_null(0).to_numpy()
        mask = column.is_null().to_numpy(zero_copy_only=False)
        return pd.Series(pd.arrays.IntegerArray(values, mask))
    if pa.types.is_boolean(kind):
        values = column.fill_null(False).to_numpy(zero_copy_only=False)
        if not nulls:
            return pd.Series(values)
        return pd.Series(pd.arrays.BooleanArray(values, column.is_null().to_numpy(zero_copy_only=False)))
    if pa.types.is_floating(kind):
        return column.to_pandas()
    if pa.types.is_string(kind):
        if nulls == len(column):
            return pd.Series([None] * len(column), dtype=object)
        if categorical and (series := _categorical(column, pa)) is not None:
            return series
        # copied into buffers of their own size: DuckDB's Arrow buffers are larger than their
        # rows (10M events: the frames held ~35 % more than .df()'s, measured, no other source)
        compact = pa.chunked_array([pa.concat_arrays([*column.chunks, pa.array([], kind)])], kind)
        series = compact.to_pandas()
        return series if isinstance(series.dtype, pd.StringDtype) else None
    if pa.types.is_date32(kind):
        return column.cast(pa.timestamp("us")).to_pandas()
    if pa.types.is_timestamp(kind) and kind.unit == "us" and kind.tz is None:
        return column.to_pandas()
    return None


def _categorical(column, pa) -> pd.Series | None:
    """A text column (Arrow) as a pandas categorical whose categories are its distinct texts in
    the order pandas sorts them (Python's order of strings: by code point, as Arrow sorts UTF-8
    bytes), NULL as a missing value; None when it has more than one distinct text per two rows.

    Sorting, grouping, comparing and the values read out (``tolist``, ``to_dict``, iteration:
    Python strings, NaN for NULL) are those of the text column; the consumers (pages, figures,
    CSV writers) count observed categories only (``value_counts`` counts every category). At
    10M events the six long frames took ~430 MiB as text columns (measured, no other source).
    """
    import pyarrow.compute as pc

    encoded = column.dictionary_encode().unify_dictionaries().combine_chunks()
    texts = encoded.dictionary
    if 2 * len(texts) > len(column):
        return None
    order = pc.sort_indices(texts).to_numpy()
    rank = np.empty(len(order), dtype=np.int32)
    rank[order] = np.arange(len(order), dtype=np.int32)
    codes = rank[encoded.indices.fill_null(0).to_numpy(zero_copy_only=False)]
    if column.null_count:
        codes[encoded.indices.is_null().to_numpy(zero_copy_only=False)] = -1
    categories = pd.Index(texts.take(pa.array(order)).to_pylist(), dtype="str")
    return pd.Series(pd.Categorical.from_codes(codes, dtype=pd.CategoricalDtype(categories)))


def _categorical_frame(rows: pd.DataFrame) -> pd.DataFrame:
    """`rows` with each text column that ``frame(categorical=True)`` would hold as a categorical
    turned into one (the same categories and codes)."""
    import pyarrow as pa

    out = rows.copy(deep=False)
    for column, dtype in rows.dtypes.items():
        if isinstance(dtype, pd.StringDtype) and rows[column].notna().any():
            series = _categorical(pa.chunked_array([pa.array(rows[column])]), pa)
            if series is not None:
                out[column] = series.set_axis(rows.index)
    return out


def _release(con: duckdb.DuckDBPyConnection, memory_limit: str) -> None:
    """Hand the memory DuckDB's allocator keeps after a statement back to the system: setting
    the memory bound (to the same value) flushes it. At 10M events the room medians' read left
    ~120 MiB more in the process without it (measured, no other source)."""
    con.execute(f"set memory_limit = '{memory_limit}'")


def read_site_data(con: duckdb.DuckDBPyConnection, *, memory_limit: str | None = None
                   ) -> tuple[SiteData, str, dt.date | None, dt.date | None, pd.DataFrame]:
    """Run every ``queries/dashboards`` SELECT; (frames, period label, first day, last day, sets).

    With `memory_limit`, DuckDB's memory bound of the SELECTs, set here: the period's files, read
    first while no frame and no temporary table is held, run with FILES_MEMORY_LIMIT instead.
    """
    from pipeline.warehouse.connection import evict_cached_blocks

    def q(name: str, *, categorical: bool = False, evict: bool = False, limit: str | None = None,
          **params: object) -> pd.DataFrame:
        """The frame of SELECT `name`; `categorical`: see ``frame``; with `evict`, the table
        blocks DuckDB keeps cached after it are dropped (only once no temporary table is held:
        those would be spilled); `limit`: DuckDB's bound of this SELECT instead of the build's."""
        text = sql(name)
        if memory_limit and limit:
            con.execute(f"set memory_limit = '{limit}'")
        rows = frame(con, text, {k: v for k, v in params.items() if f"${k}" in text},
                     categorical=categorical)
        if memory_limit:
            _release(con, memory_limit)
            if evict:
                evict_cached_blocks(con)
        return rows

    if memory_limit:
        con.execute(f"set memory_limit = '{memory_limit}'")
    periods = q("dash_period")
    if periods.empty:
        label, first, last = "no audited observations", None, None
        params = {"date_from": dt.date(1, 1, 1), "date_to": dt.date(9999, 12, 31)}
    else:
        label = str(periods.sort_values(["n_rows", "period"], ascending=[False, True])["period"].iloc[0])
        first, last = _period_dates(label)
        params = {"date_from": first, "date_to": last + dt.timedelta(days=1)}
    try:
        # the period's files first, while no temporary table holds DuckDB's memory bound (it
        # groups every file's studies and joins every file; after a copy of study_dose it
        # spilled), then the period's studies (small temporary tables) with the build's bound:
        # finding the unmapped ones joins every study to the exam matches (10M events, with
        # FILES_MEMORY_LIMIT: 1.1 CPU-s against 1.3 and the build's peak RSS ~650 MiB against
        # ~636, at the period's files; measured, no other source)
        for name in (*_PERIOD_FILES, *_PERIOD_STUDIES):
            text = sql(name)
            if memory_limit:
                limit = FILES_MEMORY_LIMIT if name in _PERIOD_FILES else memory_limit
                con.execute(f"set memory_limit = '{limit}'")
            con.execute(text, {k: v for k, v in params.items() if f"${k}" in text})
        if memory_limit:
            con.execute(f"set memory_limit = '{memory_limit}'")
        return _read_site_data(con, q, label, first, last, params)
    finally:
        con.execute(sql("dash_drop_materialised"))


def _read_site_data(con: duckdb.DuckDBPyConnection, q, label: str, first: dt.date | None,
                    last: dt.date | None, params: dict[str, dt.date]
                    ) -> tuple[SiteData, str, dt.date | None, dt.date | None, pd.DataFrame]:
    # populations (adult age) are the audit's own: read from its tables, never set here
    con.register("dash_exam_type", _exam_types())
    con.register("dash_concept", _concepts())
    devices = q("dash_devices")
    con.register("dash_device", devices)
    # the SELECTs over the temporary tables of the period's studies and files first, while few
    # frames are held, then the temporary tables go; the long frames last (10M events: the
    # build's peak RSS was the study_dose SELECTs over ~1000 MiB of frames, when they grouped
    # every study of the period)
    small = {"overview": q("dash_overview", **params), "unmapped": q("dash_unmapped", **params),
             "source_status": q("dash_source_status"), "files_not_loaded": q("dash_quarantined_files"),
             "weight_share": q("dash_weight_share", **params),
             "value_issues": q("dash_value_issues", **params),
             "value_issue_rows": q("dash_value_issue_rows", **params),
             "device_studies": q("dash_device_studies", **params)}
    con.execute(sql("dash_drop_materialised"))
    small.update(estimates=q("dash_estimates", **params), data_alerts=q("dash_data_alerts"),
                 key_epochs=q("dash_key_epochs"), **_capture_frames(con, q),
                 skin_dose_maps=q("dash_skin_dose_maps", max_maps=MAX_SKIN_MAPS, evict=True))
    # The long frames hold their repeated labels as categoricals (frame(categorical=True)), and
    # DuckDB's cached blocks go after each. The largest transients first, before the others are
    # held (10M events, above the read's start: the room medians ~300 MiB, the monthly medians
    # ~250, the alerted studies' events ~250 with SCAN_MEMORY_LIMIT; the write_site peak moved
    # from the monthly medians, read late, to the period's files: 634-712 -> 621-642 MiB in
    # three runs each; measured, no other source)
    room_medians = q("dash_room_medians", categorical=True, evict=True)
    monthly = q("dash_monthly", categorical=True, evict=True)
    alert_events = q("dash_alert_events", categorical=True, evict=True, limit=SCAN_MEMORY_LIMIT)
    sigma = q("dash_funnel_sigma")
    con.register("funnel_sigma", sigma)
    # the funnel's groups as text while the SELECTs below read them (registered: a categorical
    # would reach DuckDB as an ENUM), then as categoricals like the other long frames
    points = q("dash_funnel_points")
    con.register("funnel_point", points)
    drawn = q("dash_funnel_drawn", max_points=MAX_FUNNEL_POINTS)
    con.register("funnel_drawn", drawn)
    funnel = {"funnel_limits": q("dash_funnel_limits"), "funnel_cells": q("dash_funnel_cells"),
              "site_summary": q("dash_site_summary")}
    for name in ("funnel_sigma", "funnel_point", "funnel_drawn"):
        con.unregister(name)
    points = _categorical_frame(points)
    data = SiteData(
        devices=devices,
        room_medians=room_medians, network=q("dash_network"),
        distribution=q("dash_distribution", categorical=True, evict=True,
                       limit=SCAN_MEMORY_LIMIT, **params),
        monthly=monthly, drift=q("dash_drift"),
        funnel_sigma=sigma, funnel_points=points, funnel_drawn=drawn, **funnel,
        alerts=q("dash_alerts", categorical=True, evict=True), alert_counts=q("dash_alert_counts"),
        alert_events=alert_events, **small,
    )
    for name in ("dash_exam_type", "dash_concept", "dash_device"):
        con.unregister(name)
    return data, label, first, last, q("dash_reference_sets")


def csv_text(rows: pd.DataFrame) -> str:
    """A table as CSV text: floats to 12 significant figures (exact for the data, blind to
    last-bit noise of float sums), SQL NULL as an empty field.

    The characters are those pandas writes with ``to_csv(index=False, lineterminator="\\n",
    float_format="%.12g")``. Tables of text, integer, boolean and float64 columns (every table
    of the site, once ``_write_csv`` has turned timestamps into text) are written here from one
    list of texts per column, the rows joined with commas and a field quoted only where
    ``csv.writer`` (the writer pandas uses, same dialect) quotes it, by that writer: pandas
    converts and tests every value for NA one by one, and the writer checks every character,
    most of the time of writing the CSVs at a million events (0.88 -> 0.55 CPU-s, measured).
    A column of other objects goes through ``csv.writer``; other kinds of column (timestamps,
    nullable numbers, ...) through pandas, the float64 columns formatted first.
    """
    columns = _csv_columns(rows)
    if columns is None:
        return _pandas_csv_text(rows)
    header = list(rows.columns)
    if len(columns) > 1 and all(text or all(type(v) is str for v in c) for c, text in columns):
        # plain text fields: rows joined here, a field quoted only when csv.writer would
        lines = map(",".join, zip(*(_csv_fields(c) for c, _ in columns), strict=True))
        return "".join(f"{line}\n" for line in [",".join(_csv_fields(header)), *lines])
    import csv
    import io

    out = io.StringIO()
    writer = csv.writer(out, lineterminator="\n")
    writer.writerow(header)
    writer.writerows(zip(*(c for c, _ in columns), strict=True))
    return out.getvalue()


def _csv_columns(rows: pd.DataFrame) -> list[tuple[list, bool]] | None:
    """Each column as the values pandas hands to csv.writer (float64 as "%.12g" text, NULL as
    an empty string, integers and booleans as text, other values as they are: the writer writes
    str() or repr() of them), and whether they are all text; None when a column is of a kind
    left to pandas (timestamps, nullable numbers, categories, ...)."""
    if rows.columns.empty or not all(isinstance(c, str) for c in rows.columns):
        return None
    columns = []
    for column, dtype in rows.dtypes.items():
        values = rows[column]
        if dtype == np.float64:
            columns.append((["" if v != v else "%.12g" % v for v in values.tolist()], True))
        elif isinstance(dtype, np.dtype) and dtype.kind in "iub":   # never NULL; str() as the writer
            columns.append((list(map(str, values.tolist())), True))
        elif isinstance(dtype, pd.StringDtype) or dtype == object or _text_categories(dtype):
            cells = values.astype(object).tolist()
            missing = values.isna().to_numpy()
            if missing.any():
                cells = ["" if m else v for v, m in zip(cells, missing.tolist(), strict=True)]
            columns.append((cells, dtype != object))
        else:
            return None
    return columns


def _text_categories(dtype) -> bool:
    """A categorical of texts (``frame(categorical=True)``): written as its texts."""
    return isinstance(dtype, pd.CategoricalDtype) and isinstance(dtype.categories.dtype,
                                                                   pd.StringDtype)


# characters that make csv.writer (excel dialect, lineterminator "\n") quote a field
_CSV_SPECIAL = re.compile(r'[,"\r\n]')


def _csv_quoted(value: str) -> str:
    """`value` as csv.writer writes it as one field of several (it decides the quoting)."""
    import csv
    import io

    out = io.StringIO()
    csv.writer(out, lineterminator="\n").writerow([value, "x"])
    return out.getvalue()[:-3]   # less ",x\n"


def _csv_fields(values: list[str]) -> list[str]:
    """A column's text fields as csv.writer writes them in a row of several fields."""
    if not _CSV_SPECIAL.search("".join(values)):
        return values
    quoted = {v: _csv_quoted(v) for v in set(values) if _CSV_SPECIAL.search(v)}
    return [quoted.get(v, v) for v in values]


def _pandas_csv_text(rows: pd.DataFrame) -> str:
    """csv_text through pandas' to_csv, the float64 columns formatted first (pandas tests each
    value of a float_format column for NA one by one)."""
    texts = {}
    for column, dtype in rows.dtypes.items():
        if dtype == np.float64:
            texts[column] = ["" if v != v else "%.12g" % v for v in rows[column].tolist()]
    if texts:
        rows = rows.copy(deep=False)   # the caller's frame keeps its floats
        for column, values in texts.items():
            rows[column] = pd.Series(values, index=rows.index, dtype=object)
    return rows.to_csv(index=False, lineterminator="\n", float_format="%.12g")


# Rows per piece when a table is written to CSV: the text of a piece, not of the whole table, is in
# memory at once (a network's year: tables of millions of rows). Pieces are cut at row boundaries,
# so the file is the same as one csv_text of the whole table (header once).
CSV_CHUNK_ROWS = 50_000
# DuckDB working memory of the site build's read connection (measured, no other source). A quarter
# of the audit's bound: the site's SELECTs sort no observation (the audit wrote their order
# statistics: audit_distribution) and its tables are held in pandas beside it. 10M events: peak
# RSS 1592 MiB with 512 MB, 1276 MiB with 256 MB; dash_distribution over the observations ran out
# of 256 MB before the audit wrote them.
DASHBOARD_MEMORY_LIMIT = "256MB"
# DuckDB working memory of the period's files (dash_period_file_groups.sql, dash_period_files.sql),
# the first statements of a site build: they group every dose object's studies and join every
# input file, and nothing else is held yet. 10M events, the file groups in a process of their own
# (peak RSS ~83 MiB before): 1.6 CPU-s and a peak RSS of 465 MiB with 384 MB, 3.0-3.4 and 405
# with 320 MB, 3.9-4.4 and 345 with 256 MB, where it spills (as one statement with the files of
# the period: 3.1 CPU-s with 384 MB, 1.8 and a write_site peak of 752 MiB with 512 MB; measured,
# no other source).
FILES_MEMORY_LIMIT = "384MB"


# DuckDB working memory of the long SELECTs that need less than DASHBOARD_MEMORY_LIMIT: the
# alerted studies' events (dash_alert_events.sql scans every event for them, and the table blocks
# it reads stay cached up to the bound) and the distributions. 10M events: the events' read ~400
# MiB above its start at its peak with 256 MB, ~250 with 128 MB; the distributions' ~200 and
# ~160; the same CPU time (measured, no other source). The room medians run out of 128 MB.
SCAN_MEMORY_LIMIT = "128MB"


# DuckDB working memory of the connection that writes the CSVs (it streams the rows of a frame)
CSV_MEMORY_LIMIT = "256MB"


def _csv_sql_columns(rows: pd.DataFrame) -> list[str] | None:
    """The select list that writes `rows` (timestamps already text) as csv_text does, through the
    macros of queries/dashboards/dash_csv_macros.sql; None when DuckDB would write other
    characters: one column (csv.writer quotes a lone empty field), a header or column kind it
    does not cover, or a text with a carriage return (DuckDB quotes it, csv.writer does not)."""
    names = list(rows.columns)
    if len(names) < 2 or len(set(names)) != len(names) \
            or not all(isinstance(c, str) and c and not _CSV_SPECIAL.search(c) for c in names):
        return None
    columns = []
    for column, dtype in rows.dtypes.items():
        name = '"' + column.replace('"', '""') + '"'
        if dtype == np.float64:
            columns.append(f"dash_csv_float({name}) as {name}")
        elif isinstance(dtype, np.dtype) and dtype.kind == "b":
            columns.append(f"dash_csv_bool({name}) as {name}")
        elif isinstance(dtype, np.dtype) and dtype.kind in "iu":
            columns.append(name)
        elif isinstance(dtype, pd.StringDtype) or dtype == object or _text_categories(dtype):
            kind = "string" if dtype != object else pd.api.types.infer_dtype(rows[column],
                                                                             skipna=True)
            if kind == "empty":   # every value NULL (None or NaN): empty fields
                columns.append(f"null::varchar as {name}")
                continue
            texts = rows[column] if dtype != "category" else dtype.categories.to_series()
            if kind != "string" or texts.str.contains("\r", regex=False, na=False).any():
                return None
            # a categorical reaches DuckDB as Arrow's dictionary of texts: read as its texts
            columns.append(f"dash_csv_text({name}) as {name}")
        else:   # nullable numbers, categories of other values, ...: csv_text
            return None
    return columns


def _copy_csv(con: duckdb.DuckDBPyConnection, path: Path, rows: pd.DataFrame) -> bool:
    """Write `rows` (timestamps already text) to `path` with DuckDB's COPY, in the characters of
    csv_text (tests/dashboards/test_site.py compares them); False, writing nothing, when
    `_csv_sql_columns` leaves the table to csv_text. At 10M events the site's CSVs took 6.4
    CPU-s through Python's formatting (measured, no other source)."""
    columns = _csv_sql_columns(rows)
    if columns is None:
        return False
    text = sql("dash_copy_csv").format(columns=", ".join(columns),
                                       path=str(path).replace("'", "''"))
    import pyarrow as pa

    # as Arrow: DuckDB's scan of a frame's text columns held ~180 MiB more for the room
    # medians at 10M events (measured, no other source)
    con.register("csv_rows", pa.Table.from_pandas(rows, preserve_index=False))
    try:
        con.execute(text)
    finally:
        con.unregister("csv_rows")
        _release(con, CSV_MEMORY_LIMIT)
    return True


def _csv_connection() -> duckdb.DuckDBPyConnection:
    """An in-memory DuckDB connection with the CSV cell macros (dash_csv_macros.sql)."""
    con = duckdb.connect()
    con.execute("set threads to 1")
    con.execute(f"set memory_limit = '{CSV_MEMORY_LIMIT}'")
    con.execute("set allocator_background_threads = true")
    con.execute(sql("dash_csv_macros"))
    return con


def _write_csv(path: Path, rows: pd.DataFrame, con: duckdb.DuckDBPyConnection | None = None
               ) -> None:
    """`csv_text(rows)` written by DuckDB's COPY through `con` (a `_csv_connection`) where it
    writes the same characters, else piece by piece; an unchanged file is left untouched."""
    import filecmp
    import os

    # pandas writes a timestamp column as dates only when every value of what it writes is at
    # midnight: such columns are turned into pandas' text once, over the whole column, so that a
    # piece of all-midnight values is written as the whole table would be
    stamps = [c for c, dtype in rows.dtypes.items() if pd.api.types.is_datetime64_any_dtype(dtype)]
    if stamps:
        rows = rows.copy(deep=False)
        for column in stamps:
            rows[column] = pd.Series(_stamp_texts(rows[column]), index=rows.index, dtype=object)
    tmp = path.with_name(path.name + ".tmp")
    if con is None or not _copy_csv(con, tmp, rows):
        with open(tmp, "w", encoding="utf-8", newline="") as f:
            for start in range(0, max(len(rows), 1), CSV_CHUNK_ROWS):
                text = csv_text(rows.iloc[start:start + CSV_CHUNK_ROWS])
                f.write(text if start == 0 else text.split("\n", 1)[1])
    if path.exists() and filecmp.cmp(tmp, path, shallow=False):
        tmp.unlink()
    else:
        os.replace(tmp, path)


def _stamp_texts(values: pd.Series) -> list[str | None]:
    """A timestamp column as pandas' ``to_csv`` writes it, NaT as None: dates only
    (YYYY-MM-DD) when every value is at midnight, else to the second when none has a fraction of
    a second, written here by numpy (years 1000-9999); any other column by pandas. At 10M
    events the alerted studies' event times (360k) took 0.3 CPU-s through pandas, 0.14 here
    (measured, no other source)."""
    array = values.to_numpy()
    if array.dtype.kind == "M":
        valid = array[~np.isnat(array)]
        seconds = valid.astype("datetime64[s]")
        days = valid.astype("datetime64[D]")
        if len(valid) and (seconds == valid).all() \
                and days.min() >= np.datetime64("1000-01-01") \
                and days.max() <= np.datetime64("9999-12-31"):
            unit = "D" if (days == valid).all() else "s"
            texts = np.datetime_as_string(array.astype(f"datetime64[{unit}]"), unit=unit)
            return [None if v == "NaT" else v.replace("T", " ") for v in texts.tolist()]
    text = values.to_frame().to_csv(index=False, header=False, lineterminator="\n")
    # a lone empty field (NaT) comes back quoted: it is NULL, written empty
    return [None if v == '""' else v for v in text.split("\n")[:-1]]


def _write_text(path: Path, text: str) -> None:
    data = text.encode("utf-8")
    if not path.exists() or path.read_bytes() != data:   # leave unchanged files untouched
        path.write_bytes(data)


def write_site(warehouse: Path, out: Path, *, generated_at: dt.datetime | None = None) -> Path:
    """Write the static dashboards of the last audit in `warehouse` into `out`; returns index.html.

    Parameters
    ----------
    warehouse
        An audited DuckDB warehouse (``pipeline.audit.run_audit`` has written its tables).
    out
        Folder for the site; created if missing. Existing files of the same names are replaced.
    generated_at
        Time printed in every footer; default now (UTC). Pass a fixed value for byte-identical
        output.

    Returns
    -------
    Path
        ``out / "index.html"``.

    Raises
    ------
    pipeline.errors.WarehouseError
        The warehouse cannot be opened, or it has not been audited.
    """
    warehouse, out = Path(warehouse), Path(out)
    stamp = generated_at or dt.datetime.now(dt.UTC).replace(microsecond=0)
    with _system_arrow_pool():
        _write_site(warehouse, out, stamp)
    return out / "index.html"


@contextlib.contextmanager
def _system_arrow_pool() -> Iterator[None]:
    """Arrow's buffers (the frames' text columns, their splits per page) from the C library's
    allocator for the build, which hands freed blocks back to the system; pyarrow's default pool
    kept them: at 10M events the pages' build left ~70 MiB more (measured, no other source).
    The previous default pool is set back afterwards."""
    import pyarrow as pa

    previous = pa.default_memory_pool()
    pa.set_memory_pool(pa.system_memory_pool())
    try:
        yield
    finally:
        pa.set_memory_pool(previous)


def _write_site(warehouse: Path, out: Path, stamp: dt.datetime) -> None:
    from pipeline import __version__
    from pipeline.warehouse.connection import connection

    with connection(warehouse, read_only=True) as con:
        # DuckDB spills instead of growing with the warehouse (10M events: peak RSS 1949 MiB with
        # 1 GB, 1591 MiB with 512 MB, 1276 MiB with 256 MB; 1M events: 6.1 GiB with no bound)
        _check_audited(con, warehouse)
        # the allocator hands freed memory back in the background, while the frames are read
        con.execute("set allocator_background_threads = true")
        data, label, first, last, sets = read_site_data(con, memory_limit=DASHBOARD_MEMORY_LIMIT)
    context = Context(period=label, date_from=first, date_to=last, reference_sets=sets,
                      generated_at=stamp, version=f"{__version__} (plotly {plotly.__version__})")
    site = build_site(data, context)
    del data   # the tables still hold the frames they write; each goes once written
    out.mkdir(parents=True, exist_ok=True)
    _write_text(out / PLOTLY_JS, get_plotlyjs())
    for name, html in site.pages.items():
        _write_text(out / name, html)
    with _csv_connection() as con:
        for name in list(site.tables):
            _write_csv(out / f"{name}.csv", site.tables.pop(name), con)
