"""SHELL: write a de-identified site extract, merge extracts into a network warehouse, write
the Parquet lake. What an extract holds and the checks are pure, in ``pipeline.network``.

Design: the network warehouse has the same raw tables as a site warehouse, filled by
``kerma merge`` instead of ``kerma ingest``; each merged row carries its extract's id in
``run_id`` (``first_run_id`` for devices and studies) and ``network_extract`` records each
extract (site, period, key scope and fingerprint). Every view and the audit then run on it
unchanged. The device -> site assignment of each extract goes into ``raw_site_map``.
"""

from __future__ import annotations

import datetime as dt
import hashlib
import json
import shutil
from dataclasses import dataclass, field
from pathlib import Path

import duckdb
import pyarrow as pa
import pyarrow.compute as pc
import pyarrow.dataset as ds
import pyarrow.parquet as pq

from queries import sql

from . import __version__
from .errors import ExtractError
from .network import (EXTRACT_TABLES, LAKE_RELATIONS, MANIFEST_NAME, SCHEMA_VERSION, KeyScope,
                      LakeRelation, Manifest, build_manifest, expected_schema, file_name,
                      parse_manifest, pseudonymise_table, schema_problem)
from .pseudonym import key_fingerprint, make_pseudonymiser
from .warehouse.connection import connection
from .warehouse.key_epoch import current_key_epoch
from .warehouse.derived import refresh_derived
from .warehouse.load import ensure_schema

__all__ = ["ExportSummary", "LakeSummary", "MergeSummary", "export_lake", "export_site",
           "merge_extracts", "read_extract"]



@dataclass
class ExportSummary:
    """What ``export_site`` wrote."""

    out_dir: Path
    extract_id: str
    rows: dict[str, int]


def _sha256(path: Path) -> str:
    digest = hashlib.sha256()
    with path.open("rb") as handle:
        for block in iter(lambda: handle.read(1 << 20), b""):
            digest.update(block)
    return digest.hexdigest()


def export_site(warehouse: Path, out_dir: Path, *, site: str, date_from: dt.date,
                date_to: dt.date, key: bytes, key_scope: KeyScope,
                now: dt.datetime | None = None) -> ExportSummary:
    """Write the de-identified extract of `site` for studies dated `date_from`..`date_to`.

    Parameters
    ----------
    warehouse
        The site's warehouse (opened read-only).
    out_dir
        Folder for the Parquet files and manifest.json (created; must hold no other extract).
    site
        As ``device.site`` names it.
    date_from, date_to
        First and last study day.
    key
        The warehouse's pseudonymisation key: it pseudonymises the UIDs, and its fingerprint
        must be the warehouse's current key epoch's.
    key_scope
        Declared in the manifest: the key is the network's shared key or the site's own.

    Returns
    -------
    ExportSummary

    Raises
    ------
    ExtractError
        Unknown site, empty selection, a key other than the warehouse's, or an output folder
        that already holds files.
    WarehouseError
        The warehouse cannot be opened.
    """
    if date_to < date_from:
        raise ExtractError(f"--to {date_to} is before --from {date_from}")
    fingerprint = key_fingerprint(key)
    pseudonymise = make_pseudonymiser(key)
    params = {"site": site, "date_from": date_from, "date_after": date_to + dt.timedelta(days=1)}
    with connection(warehouse, read_only=True) as con:
        epoch = current_key_epoch(con)
        if epoch is None or epoch[1] != fingerprint:
            raise ExtractError(
                f"the key given is not warehouse {warehouse}'s pseudonymisation key (fingerprint "
                f"{fingerprint}, warehouse {epoch[1] if epoch else 'none recorded'}): the UIDs "
                "would be pseudonymised under another key; nothing was written")
        sites = [r[0] for r in con.execute(sql("select_sites")).fetchall()]
        if site not in sites:
            raise ExtractError(f"no device of site {site!r} in {warehouse}; its sites are: "
                               f"{', '.join(sites) or 'none'}")
        dose = con.sql(sql("extract_dose_object"), params=params).to_arrow_table()
        if dose.num_rows == 0:
            raise ExtractError(f"site {site!r} has no study dated {date_from} to {date_to} in "
                               f"{warehouse}; nothing was written")
        con.register("extract_dose_object", dose)
        try:
            tables = {t.name: dose if t.name == "dose_object"
                      else con.sql(sql(f"extract_{t.name}")).to_arrow_table()
                      for t in EXTRACT_TABLES}
        finally:
            con.unregister("extract_dose_object")
    out_dir = Path(out_dir)
    if out_dir.exists() and any(out_dir.iterdir()):
        raise ExtractError(f"{out_dir} is not empty: give a new folder for the extract")
    out_dir.mkdir(parents=True, exist_ok=True)
    files = []
    for spec in EXTRACT_TABLES:
        table = tables[spec.name].drop_columns(list(spec.omitted))
        table = pseudonymise_table(table, spec, pseudonymise).cast(expected_schema(spec))
        path = out_dir / file_name(spec.name)
        pq.write_table(table, path, compression="none")   # plain: reviewable, greppable
        files.append({"table": spec.name, "file": path.name, "rows": table.num_rows,
                      "sha256": _sha256(path)})
    manifest = build_manifest(
        site=site, date_from=date_from.isoformat(), date_to=date_to.isoformat(),
        key_scope=key_scope, key_fingerprint=fingerprint, files=files,
        created_at=(now or dt.datetime.now(dt.UTC)).strftime("%Y-%m-%dT%H:%M:%SZ"),
        kerma_version=__version__)
    (out_dir / MANIFEST_NAME).write_text(json.dumps(manifest, indent=2) + "\n", encoding="utf-8")
    return ExportSummary(out_dir, manifest["extract_id"], {f["table"]: f["rows"] for f in files})


def read_extract(folder: Path) -> tuple[Manifest, dict[str, pa.Table]]:
    """Validate an extract folder completely and read its tables (nothing is written).

    Raises ExtractError (one line naming the folder) for a missing or altered manifest, an
    unsupported schema version, a missing, changed or truncated file, a file whose
    columns or row count differ from the manifest's, or a table that repeats a value of its key.
    """
    folder = Path(folder)
    where = str(folder)
    manifest_path = folder / MANIFEST_NAME
    if not manifest_path.is_file():
        raise ExtractError(f"{where}: no {MANIFEST_NAME}; not a site extract folder")
    try:
        text = manifest_path.read_text(encoding="utf-8")
    except (OSError, UnicodeDecodeError) as exc:
        raise ExtractError(f"{where}: cannot read {MANIFEST_NAME} ({exc})") from exc
    manifest = parse_manifest(text, where)
    tables = {}
    for spec in EXTRACT_TABLES:
        entry = next(f for f in manifest.files if f["table"] == spec.name)
        path = folder / entry["file"]
        if not path.is_file():
            raise ExtractError(f"{where}: {entry['file']} is missing")
        if _sha256(path) != entry["sha256"]:
            raise ExtractError(f"{where}: {entry['file']} does not match its SHA-256 in the "
                               "manifest (changed or truncated in transit); ask the site to "
                               "send the extract again")
        try:
            table = pq.read_table(path)
        except (pa.ArrowException, OSError) as exc:
            raise ExtractError(f"{where}: {entry['file']} is not readable Parquet "
                               f"({str(exc).splitlines()[0]})") from exc
        problem = schema_problem(table.schema, expected_schema(spec))
        if problem:
            raise ExtractError(f"{where}: {entry['file']} does not have the columns of schema "
                               f"version {SCHEMA_VERSION}: {problem}")
        if table.num_rows != entry["rows"]:
            raise ExtractError(f"{where}: {entry['file']} holds {table.num_rows} rows, the "
                               f"manifest says {entry['rows']}")
        repeated = _repeated_keys(table, spec.key)
        if repeated:
            # kerma export writes one row per key; the per-report raw tables have no primary
            # key (queries/schema/raw_ct_event.sql), so a repeated row would be merged twice
            raise ExtractError(f"{where}: {entry['file']} repeats {repeated} value(s) of its key "
                               f"({', '.join(spec.key)}), which an extract holds once each; "
                               "ask the site to export again")
        tables[spec.name] = table
    return manifest, tables


def _repeated_keys(table: pa.Table, key: tuple[str, ...]) -> int:
    """How many values of `key` occur on more than one row of `table`."""
    if not key or table.num_rows < 2:
        return 0
    counts = table.select(list(key)).group_by(list(key), use_threads=False).aggregate([([], "count_all")])
    return pc.sum(pc.greater(counts["count_all"], 1).cast(pa.int64())).as_py() or 0


@dataclass
class MergeSummary:
    """What ``merge_extracts`` did with each extract."""

    merged: list[str] = field(default_factory=list)       # extract ids added
    unchanged: list[str] = field(default_factory=list)    # already merged: nothing changed
    replaced: list[str] = field(default_factory=list)     # earlier extracts of a site and period
    n_studies: int = 0                                    # studies in the warehouse afterwards


def _with_run(table: pa.Table, column: str, extract_id: str) -> pa.Table:
    return table.append_column(column, pa.array([extract_id] * table.num_rows, pa.string()))


def _check_keys(manifests: list[Manifest], existing: list[tuple]) -> None:
    """One shared network key: every extract declared 'network' has the same fingerprint."""
    declared = {(r[1], r[5]) for r in existing if r[4] == KeyScope.NETWORK.value}
    declared |= {(m.site, m.key_fingerprint) for m in manifests if m.key_scope is KeyScope.NETWORK}
    fingerprints = {f for _, f in declared}
    if len(fingerprints) > 1:
        raise ExtractError(
            "extracts declared as made with the shared network key have different key "
            f"fingerprints ({', '.join(sorted(f'{s}: {f}' for s, f in declared))}): patients "
            "would not link across sites; nothing was merged. Re-export with the network key, "
            "or declare --key-scope site")


def merge_extracts(folders: list[Path], warehouse: Path, *,
                   now: dt.datetime | None = None) -> MergeSummary:
    """Merge validated site extracts into the network warehouse, in one transaction.

    Every extract is validated completely before anything is written; one bad extract stops
    the whole merge with nothing changed. An extract already merged (same extract id)
    changes nothing; one of a site and period merged before replaces the earlier extract.

    Parameters
    ----------
    folders
        Extract folders (``kerma export --site``).
    warehouse
        The network warehouse (created if missing).

    Returns
    -------
    MergeSummary

    Raises
    ------
    ExtractError
        An extract is unusable, two extracts of one site and period were given, or the
        declared network key differs between extracts.
    """
    read = [read_extract(Path(f)) for f in folders]
    seen: dict[tuple, str] = {}
    unique = []
    for manifest, tables in read:
        slot = (manifest.site, manifest.date_from, manifest.date_to)
        if slot in seen and seen[slot] != manifest.extract_id:
            raise ExtractError(f"two different extracts of site {manifest.site!r} for "
                               f"{manifest.date_from} to {manifest.date_to} were given; merge "
                               "the one to keep")
        if slot not in seen:
            seen[slot] = manifest.extract_id
            unique.append((manifest, tables))
    summary = MergeSummary()
    merged_at = (now or dt.datetime.now(dt.UTC)).replace(tzinfo=None)
    with connection(warehouse, create=True) as con:
        ensure_schema(con)
        if con.execute(sql("count_key_epochs")).fetchall()[0][0]:
            raise ExtractError(f"{warehouse} is a site warehouse (loaded by kerma ingest); merge "
                               "extracts into a network warehouse of its own; nothing was merged")
        existing = con.execute(sql("select_network_extracts")).fetchall()
        _check_keys([m for m, _ in unique], existing)
        known = {r[0] for r in existing}
        con.execute("begin transaction")
        try:
            for manifest, tables in unique:
                if manifest.extract_id in known:
                    summary.unchanged.append(manifest.extract_id)
                    continue
                replaced = [r[0] for r in existing if (r[1], r[2].isoformat(), r[3].isoformat())
                            == (manifest.site, manifest.date_from, manifest.date_to)]
                _merge_one(con, manifest, tables, replaced, merged_at)
                summary.merged.append(manifest.extract_id)
                summary.replaced.extend(replaced)
            summary.n_studies = con.execute(sql("count_raw_studies")).fetchall()[0][0]
            con.execute("commit")
        except BaseException:
            con.execute("rollback")
            raise
        # the merged (and replaced) studies' derived rows: rebuilt whole, a merge being rare
        refresh_derived(con)
    return summary


def _merge_one(con: duckdb.DuckDBPyConnection, manifest: Manifest, tables: dict[str, pa.Table],
               replaced: list[str], merged_at: dt.datetime) -> None:
    incoming = {t.name: _with_run(tables[t.name], t.run_column, manifest.extract_id)
                for t in EXTRACT_TABLES}
    devices = incoming["device"].column("device_key").to_pylist()
    incoming["site_map"] = pa.table({"match_value": pa.array(devices, pa.string()),
                                     "site": pa.array([manifest.site] * len(devices), pa.string())})
    n_events = incoming["ct_event"].num_rows + incoming["projection_event"].num_rows
    incoming["network_extract"] = pa.Table.from_pylist([{
        "extract_id": manifest.extract_id, "site": manifest.site,
        "date_from": dt.date.fromisoformat(manifest.date_from),
        "date_to": dt.date.fromisoformat(manifest.date_to), "schema_version": SCHEMA_VERSION,
        "pseudonym_scheme": manifest.pseudonym_scheme, "key_scope": manifest.key_scope.value,
        "key_fingerprint": manifest.key_fingerprint, "n_studies": incoming["study"].num_rows,
        "n_dose_objects": incoming["dose_object"].num_rows, "n_events": n_events,
        "created_at": manifest.created_at, "kerma_version": manifest.kerma_version,
        "merged_at": merged_at}])
    incoming["replaced_extract"] = pa.table({"extract_id": pa.array(replaced, pa.string())})
    names = {name: ("replaced_extract" if name == "replaced_extract" else f"incoming_{name}")
             for name in incoming}
    for name, table in incoming.items():
        con.register(names[name], table)
    try:
        for statement in ([f"merge_{t.name}" for t in EXTRACT_TABLES]
                          + ["merge_site_map", "prune_orphans", "record_network_extract"]):
            con.execute(sql(statement))
    finally:
        for view in names.values():
            con.unregister(view)


@dataclass
class LakeSummary:
    """What ``export_lake`` wrote: rows per relation, and relations not in the warehouse."""

    out_dir: Path
    rows: dict[str, int] = field(default_factory=dict)
    absent: list[str] = field(default_factory=list)


def _lake_table(con: duckdb.DuckDBPyConnection, relation: LakeRelation) -> pa.Table:
    table = con.table(relation.name).to_arrow_table().drop_columns(list(relation.omitted))
    if relation.date_column:
        when = table.column(relation.date_column)
        table = table.append_column("year", pc.year(when).cast(pa.int32()))
        table = table.append_column("month", pc.month(when).cast(pa.int32()))
    return table


def export_lake(warehouse: Path, out_dir: Path) -> LakeSummary:
    """Write the warehouse's public relations as Hive-partitioned Parquet under `out_dir`.

    One folder per relation (``out_dir/<relation>/modality=CT/year=2026/month=9/...``);
    partitioned by modality, year and month of the study (events: of the event) where the
    relation has them; a NULL partition value is written as ``__HIVE_DEFAULT_PARTITION__``,
    which pyarrow, DuckDB, Spark and R arrow read back as NULL. Relations not yet in the
    warehouse (audit tables before the first audit) are listed in ``absent``. A folder of a
    relation left from an earlier lake is replaced.

    Returns
    -------
    LakeSummary
    """
    out_dir = Path(out_dir)
    summary = LakeSummary(out_dir)
    with connection(warehouse, read_only=True) as con:
        present = {r[0] for r in con.execute(sql("select_relations")).fetchall()}
        for relation in LAKE_RELATIONS:
            if relation.name not in present:
                summary.absent.append(relation.name)
                continue
            table = _lake_table(con, relation)
            target = out_dir / relation.name
            if target.exists():
                shutil.rmtree(target)
            target.mkdir(parents=True)
            if relation.partition_by:
                ds.write_dataset(table, target, format="parquet", partitioning=list(relation.partition_by),
                                 partitioning_flavor="hive", existing_data_behavior="overwrite_or_ignore",
                                 basename_template="part-{i}.parquet")
            else:
                pq.write_table(table, target / "part-0.parquet")
            summary.rows[relation.name] = table.num_rows
    (out_dir / "lake.json").write_text(json.dumps({
        "relations": {r.name: {"rows": summary.rows[r.name], "partition_by": list(r.partition_by)}
                      for r in LAKE_RELATIONS if r.name in summary.rows},
        "omitted_columns": {r.name: list(r.omitted) for r in LAKE_RELATIONS if r.omitted},
        "kerma_version": __version__}, indent=2) + "\n", encoding="utf-8")
    return summary
