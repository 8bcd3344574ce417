"""``thermoledger sql``: read-only queries, formats, refusal of writes."""
from __future__ import annotations

import hashlib
import json

import duckdb
import pytest

from pipeline.thermo import COEF_COLUMNS, evaluate
from tests.cli.run_cli import thermoledger


def test_query_with_macro_as_json(release):
    run, out = release
    r = thermoledger("sql", "SELECT g('H2O(g)', 1500) AS g, cp('H2O(g)', 1500) AS cp", "--db",
                     out / "thermo.duckdb", "--format", "json")
    assert r.returncode == 0, r.stderr
    row = json.loads(r.stdout)[0]
    seg = run.frames["segments"]
    coef = seg[(seg["record_id"] == "main/H2O") & (seg["segment"] == 1)][list(COEF_COLUMNS)].to_numpy(float)[0]
    p = evaluate(coef, 1500.0)
    assert row["g"] == pytest.approx(float(p.g), rel=1e-12)
    assert row["cp"] == pytest.approx(float(p.cp), rel=1e-12)


def test_csv_and_table_formats(release):
    _, out = release
    r = thermoledger("sql", "SELECT species FROM species ORDER BY 1", "--db", out / "thermo.duckdb", "--format", "csv")
    assert r.returncode == 0 and r.stdout.splitlines() == ["species", "H2(g)", "H2O(g)", "N2(g)", "O2(g)"]
    r = thermoledger("sql", "SELECT count(*) AS n FROM species", "--db", out / "thermo.duckdb")
    assert r.returncode == 0 and "4" in r.stdout and "(1 row)" in r.stdout


def test_write_statement_is_refused_and_the_file_untouched(release):
    _, out = release
    db = out / "thermo.duckdb"
    before = hashlib.sha256(db.read_bytes()).hexdigest()
    r = thermoledger("sql", "DROP TABLE species", "--db", db)
    assert r.returncode == 2
    assert "read-only" in r.stderr and "fix:" in r.stderr
    assert hashlib.sha256(db.read_bytes()).hexdigest() == before
    with duckdb.connect(str(db), read_only=True) as con:
        assert con.execute("SELECT count(*) FROM species").fetchall()[0][0] == 4


def test_bad_query_and_missing_database(tmp_path, release):
    _, out = release
    r = thermoledger("sql", "SELECT * FROM no_such_table", "--db", out / "thermo.duckdb")
    assert r.returncode == 2 and "the query failed" in r.stderr
    r = thermoledger("sql", "SELECT 1", "--db", tmp_path / "missing.duckdb")
    assert r.returncode == 2 and "thermoledger run" in r.stderr
