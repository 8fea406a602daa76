"""PURE: parsed records -> Arrow tables, one per raw table; schemas declared once, here."""

from __future__ import annotations

import dataclasses
import datetime as dt
import typing

import pyarrow as pa

from ..models import Accumulated, CtEvent, DeviceInfo, ProjectionEvent, StudyInfo

__all__ = ["GRAIN", "SCHEMAS", "arrow_table", "schema_of"]

_ARROW = {str: pa.string(), float: pa.float64(), int: pa.int64(), bool: pa.bool_(),
          dt.datetime: pa.timestamp("us"), dt.date: pa.date32(), dt.time: pa.time64("us")}


def schema_of(cls, extra: tuple[tuple[str, pa.DataType], ...] = ()) -> pa.Schema:
    hints = typing.get_type_hints(cls)
    fields = []
    for f in dataclasses.fields(cls):
        args = [a for a in typing.get_args(hints[f.name]) if a is not type(None)] or [hints[f.name]]
        fields.append((f.name, _ARROW[args[0]]))
    return pa.schema(fields + list(extra))


_KEYS = (("study_key", pa.string()), ("device_key", pa.string()), ("run_id", pa.string()))

SCHEMAS: dict[str, pa.Schema] = {
    "ct_event": schema_of(CtEvent, _KEYS),
    "projection_event": schema_of(ProjectionEvent, _KEYS),
    "accumulated": schema_of(Accumulated, _KEYS),
    "device": schema_of(DeviceInfo, (("first_run_id", pa.string()),)),
    "study": schema_of(StudyInfo, (("first_run_id", pa.string()),)),
    "source_object": pa.schema([
        ("path", pa.string()), ("sha256", pa.string()), ("size_bytes", pa.int64()),
        ("sop_instance_uid", pa.string()), ("sop_class_uid", pa.string()),
        ("status", pa.string()), ("reason", pa.string()), ("detail", pa.string()),
        ("run_id", pa.string()), ("recorded_at", pa.timestamp("us"))]),
    "dose_object": pa.schema([
        ("sop_instance_uid", pa.string()), ("sha256", pa.string()), ("path", pa.string()),
        ("sop_class_uid", pa.string()), ("object_kind", pa.string()), ("modality", pa.string()),
        ("study_key", pa.string()), ("patient_key", pa.string()), ("device_key", pa.string()),
        ("content_datetime", pa.timestamp("us")), ("instance_number", pa.int64()),
        ("source_of_dose_information", pa.string()), ("series_description", pa.string()),
        ("protocol_name", pa.string()), ("body_part", pa.string()), ("study_date", pa.date32()),
        ("study_description", pa.string()), ("patient_age_years", pa.float64()),
        ("patient_sex", pa.string()), ("patient_weight_kg", pa.float64()),
        ("patient_height_m", pa.float64()), ("n_ct_events", pa.int64()),
        ("n_projection_events", pa.int64()), ("run_id", pa.string())]),
    "value_issue": pa.schema([
        ("issue_id", pa.string()), ("sop_instance_uid", pa.string()), ("event_uid", pa.string()),
        ("kind", pa.string()), ("concept_code", pa.string()), ("detail", pa.string()),
        ("raw_value", pa.string()), ("raw_unit", pa.string()), ("run_id", pa.string())]),
    "run": pa.schema([
        ("run_id", pa.string()), ("started_at", pa.timestamp("us")),
        ("finished_at", pa.timestamp("us")), ("kerma_version", pa.string()),
        ("inputs", pa.string()), ("workers", pa.int64()), ("n_seen", pa.int64()),
        ("n_loaded", pa.int64()), ("n_duplicate", pa.int64()), ("n_not_dose", pa.int64()),
        ("n_quarantined", pa.int64()), ("n_unchanged", pa.int64())]),
}

# The key of each raw table that has no primary key (queries/schema/raw_*.sql): the per-report
# tables, whose random UIDs made an index that every batch's insert read nearly whole, so it stayed
# in memory and grew with the warehouse. Their rows are new with their report (a SOP Instance UID
# already loaded is a duplicate, never loaded again), so a batch cut to the first row of each key
# keeps the grain. The other raw tables keep their primary key (insert or ignore).
# Read by the load (pipeline/warehouse/load.py) and by the network extracts' checks
# (pipeline/network.py).
GRAIN = {"ct_event": ("event_uid", "sop_instance_uid"),
         "projection_event": ("event_uid", "sop_instance_uid"),
         "accumulated": ("sop_instance_uid", "plane"),
         "value_issue": ("issue_id",)}


def arrow_table(name: str, rows: list[dict]) -> pa.Table:
    """Rows (dicts) as an Arrow table with the declared schema of raw table `name`."""
    schema = SCHEMAS[name]
    return pa.Table.from_pylist(rows, schema=schema)
