"""``kerma export`` and ``kerma merge``: de-identified site extracts, the network warehouse,
and the Parquet lake for researchers."""

from __future__ import annotations

from pathlib import Path

import typer
from rich.table import Table

from .app import app, console, fail, parse_day

__all__ = ["demo_network", "export_command", "merge_command"]


@app.command("export")
def export_command(
    warehouse: Path = typer.Option(..., "--warehouse", help="DuckDB warehouse file (read only)."),
    site: str | None = typer.Option(None, "--site", help="Site to extract, as device.site names it."),
    date_from: str | None = typer.Option(None, "--from", help="First study day YYYY-MM-DD."),
    date_to: str | None = typer.Option(None, "--to", help="Last study day YYYY-MM-DD."),
    out: Path | None = typer.Option(None, "--out", help="New folder for the site extract."),
    key_scope: str | None = typer.Option(
        None, "--key-scope", help="network: the pseudonymisation key is the network's shared key "
        "(patients link across sites); site (default): the site's own key (they do not)."),
    key_file: Path | None = typer.Option(
        None, "--key-file", help="The warehouse's pseudonymisation key (else $KERMA_PSEUDONYM_KEY)."),
    lake: Path | None = typer.Option(
        None, "--lake", help="Instead of a site extract: write every public relation as "
        "Hive-partitioned Parquet (modality/year/month) under this folder."),
) -> None:
    """A de-identified site extract for the network (--site), or the Parquet lake (--lake)."""
    from ..errors import ConfigError, ExtractError, WarehouseError
    from ..network import KeyScope
    from ..network_store import export_lake, export_site
    from ..pseudonym import load_key

    if lake is not None:
        if any(v is not None for v in (site, date_from, date_to, out, key_scope)):
            fail("--lake writes the whole warehouse: give it without --site, --from, --to, "
                 "--out and --key-scope")
        try:
            summary = export_lake(warehouse, lake)
        except WarehouseError as exc:
            fail(str(exc))
        total = sum(summary.rows.values())
        console.print(f"Lake written to {lake}: {len(summary.rows)} relations, {total} rows "
                      f"(Hive-partitioned Parquet; index in {lake / 'lake.json'})")
        if summary.absent:
            console.print(f"Not in this warehouse yet (run `kerma audit` first): "
                          f"{', '.join(summary.absent)}")
        return
    missing = [o for o, v in (("--site", site), ("--from", date_from), ("--to", date_to),
                              ("--out", out)) if v is None]
    if missing:
        fail(f"a site extract needs {', '.join(missing)} (or give --lake DIR for the lake)")
    try:
        scope = KeyScope(key_scope or KeyScope.SITE.value)   # claim no cross-site linkage unless told
    except ValueError:
        fail(f"--key-scope must be 'network' or 'site', not {key_scope!r}")
    d_from, d_to = parse_day(date_from, "--from"), parse_day(date_to, "--to")
    try:
        key = load_key(key_file)
        summary = export_site(warehouse, out, site=site, date_from=d_from, date_to=d_to,
                              key=key, key_scope=scope)
    except (ConfigError, ExtractError, WarehouseError) as exc:
        fail(str(exc))
    table = Table(title=f"Site extract {summary.extract_id}: {site}, {d_from} to {d_to}")
    table.add_column("Table")
    table.add_column("Rows", justify="right")
    for name, n in summary.rows.items():
        table.add_row(name, str(n))
    console.print(table)
    console.print(f"Written to {out} with manifest.json (key scope: {scope.value}). It holds "
                  "pseudonyms and ages only: no names, patient IDs, accession numbers, dates of "
                  "birth, file paths or original UIDs.")


@app.command("merge")
def merge_command(
    folders: list[Path] = typer.Argument(..., help="Site extract folders (kerma export --site)."),
    warehouse: Path = typer.Option(..., "--warehouse", help="The network warehouse (created if missing)."),
) -> None:
    """Validate site extracts and merge them into the network warehouse (all or nothing)."""
    from ..errors import ExtractError, WarehouseError
    from ..network_store import merge_extracts

    try:
        summary = merge_extracts(folders, warehouse)
    except (ExtractError, WarehouseError) as exc:
        fail(str(exc))
    console.print(f"Merged {len(summary.merged)} extract(s) into {warehouse}; already there "
                  f"(nothing changed): {len(summary.unchanged)}; earlier extracts replaced: "
                  f"{len(summary.replaced)}. Studies in the network warehouse: {summary.n_studies}.")


def demo_network(corpus: Path, out: Path, key_file: Path, date_from, date_to,
                 workers: int = 1) -> Path:
    """The demo's network step: one warehouse per site, its extract, the merge, the network audit.

    Each folder of the demo corpus holds one invented site's files (``corpus/TGH`` ...); each
    is ingested into a warehouse of its own (``out/sites/<folder>.duckdb``) with the demo's key,
    which stands for a shared network key (so patients link across sites). Every site in a
    site warehouse is exported (``kerma export --key-scope network``), the extracts are merged
    into ``out/network.duckdb`` (``kerma merge``) and the network is audited (``kerma audit``).
    """
    import re
    import shutil
    import time

    from queries import sql

    from ..audit import run_audit
    from ..ingest import ingest
    from ..network import KeyScope
    from ..network_store import export_site, merge_extracts
    from ..pseudonym import load_key
    from ..warehouse.connection import connection

    started = time.perf_counter()
    key = load_key(key_file)
    site_dirs = sorted(p for p in corpus.iterdir() if p.is_dir())
    folders, loaded = [], 0
    for site_dir in site_dirs:
        site_warehouse = out / "sites" / f"{site_dir.name.lower()}.duckdb"
        site_warehouse.parent.mkdir(parents=True, exist_ok=True)
        loaded += ingest([site_dir], site_warehouse, key, workers=workers).loaded
        with connection(site_warehouse, read_only=True) as con:
            sites = [r[0] for r in con.execute(sql("select_sites")).fetchall()]
        for site in sites:
            folder = out / "extracts" / re.sub(r"[^a-z0-9]+", "-", site.lower()).strip("-")
            if folder.exists():
                shutil.rmtree(folder)    # the demo's own output of an earlier run
            folders.append(export_site(site_warehouse, folder, site=site, date_from=date_from,
                                       date_to=date_to, key=key,
                                       key_scope=KeyScope.NETWORK).out_dir)
    network = out / "network.duckdb"
    merged = merge_extracts(folders, network)
    summary = run_audit(network, date_from=date_from, date_to=date_to)
    console.print(f"{len(site_dirs)} site warehouses in {out / 'sites'} ({loaded} dose objects "
                  f"loaded, one shared network key); {len(folders)} site extracts in "
                  f"{out / 'extracts'}; merged into {network}: {len(merged.merged)} new, "
                  f"{len(merged.unchanged)} already there, {merged.n_studies} studies. Network "
                  f"audit: {summary.n_groups} room groups, {len(summary.exceedances)} room "
                  f"median{'' if len(summary.exceedances) == 1 else 's'} above a reference "
                  f"level, individual-exam alerts "
                  f"{sum(summary.alerts_by_rule.values())} "
                  f"({time.perf_counter() - started:.1f} s).")
    return network
