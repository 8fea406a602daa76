"""`kerma export --lake`: the public relations as Hive-partitioned Parquet, read back by two
independent readers (DuckDB's read_parquet and pyarrow.dataset) and checked against the
warehouse: row counts and sums."""

from __future__ import annotations

import json

import duckdb
import pyarrow.compute as pc
import pyarrow.dataset as ds
import pytest
from typer.testing import CliRunner

from pipeline.cli import app
from pipeline.network import LAKE_RELATIONS

CHECKS = {   # relation -> numeric columns whose sums must survive the trip
    "study_dose": ["dlp_total_mgy_cm", "dap_total_gy_cm2", "agd_total_mgy", "event_count"],
    "irradiation_event": ["ctdivol_mgy", "dap_gy_cm2", "kvp"],
    "audit_observation": ["value"],
    "audit_medians": ["median", "n"],
    "dose_alerts": ["value"],
}


@pytest.fixture(scope="module")
def lake(network, tmp_path_factory):
    out = tmp_path_factory.mktemp("lake") / "lake"
    result = CliRunner().invoke(app, ["export", "--lake", str(out), "--warehouse", str(network)])
    assert result.exit_code == 0, result.output
    return out


def _warehouse(network, relation: str, column: str) -> tuple[int, float | None]:
    with duckdb.connect(str(network), read_only=True) as con:
        return con.execute(f"select count(*), sum({column}) from {relation}").fetchone()


@pytest.mark.parametrize("relation, column", [(r, c) for r, cs in CHECKS.items() for c in cs])
def test_duckdb_reads_the_same_counts_and_sums(lake, network, relation, column):
    expected = _warehouse(network, relation, column)
    assert expected[0] > 0
    with duckdb.connect() as con:
        got = con.execute(f"select count(*), sum({column}) from read_parquet(?, hive_partitioning = true)",
                          [str(lake / relation / "**" / "*.parquet")]).fetchone()
    assert got[0] == expected[0]
    assert got[1] == pytest.approx(expected[1], rel=1e-12)


@pytest.mark.parametrize("relation, column", [(r, c) for r, cs in CHECKS.items() for c in cs])
def test_pyarrow_reads_the_same_counts_and_sums(lake, network, relation, column):
    expected = _warehouse(network, relation, column)
    table = ds.dataset(lake / relation, format="parquet", partitioning="hive").to_table()
    assert table.num_rows == expected[0]
    assert pc.sum(table.column(column)).as_py() == pytest.approx(expected[1], rel=1e-12)


def test_partitions_are_modality_year_month_and_come_back_as_columns(lake, network):
    assert (lake / "study_dose" / "modality=CT" / "year=2026" / "month=9").is_dir()
    table = ds.dataset(lake / "study_dose", format="parquet", partitioning="hive").to_table()
    with duckdb.connect(str(network), read_only=True) as con:
        expected = con.execute("select modality, year(study_date), month(study_date), count(*) "
                               "from study_dose group by all order by all").fetchall()
    with duckdb.connect() as con:
        con.register("lake_study_dose", table)
        got = con.execute("select modality, year, month, count(*) from lake_study_dose "
                          "group by all order by all").fetchall()
    assert got == expected and len(got) >= 12   # six modalities x three months


def test_the_lake_lists_its_relations_and_leaves_out_paths(lake, network):
    index = json.loads((lake / "lake.json").read_text())
    assert set(index["relations"]) == {r.name for r in LAKE_RELATIONS}   # audited: all present
    assert index["omitted_columns"]["source_object"] == ["path", "detail"]
    columns = ds.dataset(lake / "source_object", format="parquet").schema.names
    assert "path" not in columns and "detail" not in columns
