"""``thermoledger sql``: query the curated database through a read-only connection."""
from __future__ import annotations

import json
import sys
from enum import Enum
from pathlib import Path

import typer


class Format(str, Enum):
    table = "table"
    csv = "csv"
    json = "json"


def open_read_only(db: Path):
    """A read-only DuckDB connection, or exit 2 with a message naming the fix."""
    import duckdb

    if not db.is_file():
        typer.echo(f"thermoledger: found no database at {db}, expected a curated thermo.duckdb — "
                   "fix: run `thermoledger run` first or pass --db", err=True)
        raise typer.Exit(2)
    try:
        return duckdb.connect(str(db), read_only=True)
    except duckdb.Error as exc:
        typer.echo(f"thermoledger: cannot open {db} read-only ({exc}) — fix: wait for the "
                   "process that holds it for writing, or pass another --db", err=True)
        raise typer.Exit(2)


def render(df, fmt: str) -> str:
    """The frame as an aligned text table, CSV or JSON (records)."""
    if fmt == "csv":
        return df.to_csv(index=False)
    if fmt == "json":
        return json.dumps(json.loads(df.to_json(orient="records", double_precision=15)),
                          indent=1, ensure_ascii=False) + "\n"
    if not len(df.columns):
        return "(no columns)\n"
    import pandas as pd

    with pd.option_context("display.max_rows", None, "display.max_columns", None, "display.width", 250,
                           "display.max_colwidth", 80, "display.float_format", "{:.10g}".format):
        return df.to_string(index=False) + f"\n({len(df)} row{'s' if len(df) != 1 else ''})\n"


def sql(
    query: str = typer.Argument(..., help="one SQL statement, e.g. \"SELECT g('H2O(g)', 1500)\""),
    db: Path = typer.Option(Path("curated/thermo.duckdb"), "--db", help="the curated database"),
    fmt: Format = typer.Option(Format.table, "--format", help="table | csv | json"),
) -> None:
    """Query the curated database, read-only (the macros cp, h, s, g and props are available)."""
    import duckdb

    con = open_read_only(db)
    try:
        try:
            df = con.execute(query).df()
        except duckdb.Error as exc:
            text = str(exc)
            if "read-only" in text.lower() or "read only" in text.lower():
                typer.echo(f"thermoledger: found a statement that writes ({text.splitlines()[0]}), expected a "
                           f"read-only query — fix: `sql` never changes {db}; to change data, change raw/ "
                           "and re-run `thermoledger run`", err=True)
            else:
                typer.echo(f"thermoledger: the query failed: {text} — fix: correct the SQL "
                           "(tables: SELECT table_name, comment FROM duckdb_tables())", err=True)
            raise typer.Exit(2)
    finally:
        con.close()
    sys.stdout.write(render(df, fmt.value))
