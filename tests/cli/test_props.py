"""``thermoledger props``: one species on a temperature grid."""
from __future__ import annotations

import io

import numpy as np
import pandas as pd
import pytest
from typer.testing import CliRunner

from pipeline.cli.app import app
from pipeline.constants import T_REF
from tests.curate.rawdata import CODATA

runner = CliRunner()


def test_props_grid_and_formation(release):
    _, out = release
    r = runner.invoke(app, ["props", "H2O(g)", "--t", "298.15:1298.15:100", "--db", str(out / "thermo.duckdb"),
                            "--format", "csv"])
    assert r.exit_code == 0, r.output
    df = pd.read_csv(io.StringIO(r.stdout))
    np.testing.assert_allclose(df["t_k"], np.arange(298.15, 1298.16, 100.0))
    first = df.iloc[0]
    assert first["h_minus_h298_j_mol"] == pytest.approx(0.0, abs=1e-6)
    assert first["s_j_mol_k"] == pytest.approx(CODATA["H2O(g)"][1], abs=1e-6)
    assert first["dfh_j_mol"] == pytest.approx(CODATA["H2O(g)"][0], abs=0.01)
    with __import__("duckdb").connect(str(out / "thermo.duckdb"), read_only=True) as con:
        p = con.execute("SELECT dfg_j_mol FROM properties WHERE species = 'H2O(g)' AND t_k = 298.15").fetchall()[0][0]
    assert first["dfg_j_mol"] == pytest.approx(p, abs=1e-6)   # CLI (segments) = release (records)
    assert T_REF == first["t_k"]


def test_unknown_species_and_bad_grid(release):
    _, out = release
    r = runner.invoke(app, ["props", "H2O(l)", "--db", str(out / "thermo.duckdb")])
    assert r.exit_code == 2 and "did you mean" in r.output
    r = runner.invoke(app, ["props", "H2O(g)", "--t", "3000:300:100", "--db", str(out / "thermo.duckdb")])
    assert r.exit_code == 2 and "FROM:TO:STEP" in r.output
