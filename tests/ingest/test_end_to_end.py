"""End to end: a raw folder mixing all six formats, a calorie table and a 1 atm source,
through ``thermoledger run`` as a subprocess; the curated staging tables hold SI values
and every malformed record is in ``rejected`` with a readable reason."""
from __future__ import annotations

import math
import shutil
import subprocess
import sys
from pathlib import Path

import duckdb
import numpy as np
import pytest

from pipeline.thermo import COEF_COLUMNS, evaluate

from .conftest import DATA

R = 8.31446261815324          # CODATA 2018, exact (N_A k)
CAL = 4.184                   # thermochemical calorie (NIST SP 811, 2008)

MANIFEST = """[database]
name = "mixed formats"
reference_pressure_bar = 1.0

[[source]]
id = "legacy"
path = "legacy/mixed.nasa7"
format = "nasa7"
citation = "hand-written nasa7 file"

[[source]]
id = "glenn"
path = "glenn/small.nasa9"
format = "nasa9"
citation = "nine-term test file"
reference_pressure_bar = 1.01325

[[source]]
id = "webbook"
path = "webbook/shomate.csv"
format = "shomate-csv"
citation = "NIST WebBook Shomate parameters"

[[source]]
id = "old-tables"
path = "tables/table_cal.csv"
format = "table-csv"
energy_unit = "cal"
citation = "a calorie table"

[[source]]
id = "lit"
path = "reactions.csv"
format = "reactions-csv"
citation = "literature measurements"

[[source]]
id = "species"
path = "species.csv"
format = "species-csv"
"""

SPECIES = """species,aliases,molar_mass_g_mol,reference_element,geometry,cas
N2(g),,28.014,true,linear,7727-37-9
"C(cr,graphite)",,12.011,true,,7782-42-5
H2O(g),,18.015,false,nonlinear,7732-18-5
Qx(g),,1,false,,
"""


def thermoledger() -> list[str]:
    exe = Path(sys.executable).with_name("thermoledger")
    return [str(exe)] if exe.exists() else [sys.executable, "-m", "pipeline.cli.app"]


@pytest.fixture(scope="module")
def release(tmp_path_factory):
    tmp = tmp_path_factory.mktemp("e2e")
    raw = tmp / "raw"
    for sub, name in (("legacy", "mixed.nasa7"), ("glenn", "small.nasa9"), ("webbook", "shomate.csv"),
                      ("tables", "table_cal.csv"), (".", "reactions.csv")):
        (raw / sub).mkdir(parents=True, exist_ok=True)
        shutil.copy(DATA / name, raw / sub / name)
    (raw / "species.csv").write_text(SPECIES)
    (raw / "sources.toml").write_text(MANIFEST)
    (raw / "forgotten.csv").write_text("species,t,cp\n")
    out = tmp / "curated"
    proc = subprocess.run(thermoledger() + ["run", "--raw", str(raw), "--out", str(out)],
                          capture_output=True, text=True, timeout=600)
    assert proc.returncode in (0, 1), proc.stderr
    con = duckdb.connect(str(out / "thermo.duckdb"), read_only=True)
    tables = {t: con.execute(f'SELECT * FROM "{t}"').df()
              for t in ("sources", "records", "segments", "table_points", "reactions", "rejected",
                        "findings", "species")}
    con.close()
    return tables


def test_nothing_lost(release):
    s = release["sources"].set_index("source_id")
    assert (s["rows_read"] == s["rows_accepted"] + s["rows_rejected"]).all()
    assert s.loc["legacy", ["rows_read", "rows_accepted", "rows_rejected"]].tolist() == [4, 3, 1]
    assert s.loc["webbook", ["rows_read", "rows_accepted", "rows_rejected"]].tolist() == [4, 3, 1]
    assert s.loc["species", ["rows_read", "rows_accepted", "rows_rejected"]].tolist() == [4, 3, 1]
    rej = release["rejected"]
    assert len(rej) == int(s["rows_rejected"].sum())
    assert (rej["reason"].str.contains(" — fix: ")).all()
    assert rej["line"].notna().all() and rej["file"].notna().all()
    n = (release["findings"]["check_id"] == "schema.rejected").sum()
    assert n == len(rej)


def test_readable_reasons(release):
    rej = release["rejected"].set_index(["file", "line"])["reason"]
    assert "unparsable line 3 coefficient 2" in rej[("legacy/mixed.nasa7", 8)]
    assert "non-standard exponents" in rej[("glenn/small.nasa9", 27)]
    assert "column 'H' = 'abc'" in rej[("webbook/shomate.csv", 6)]
    assert "O: left 2, right 4" in rej[("reactions.csv", 7)]
    assert "no uncertainty" in rej[("reactions.csv", 9)]
    assert "unknown element symbol 'Qx'" in rej[("species.csv", 5)]


def test_calorie_table_in_si(release):
    tp = release["table_points"].set_index(["record_id", "t_k"])
    assert tp.loc[("old-tables/Na(cr)", 298.15), "cp_j_mol_k"] == pytest.approx(6.75 * CAL, rel=1e-12)
    assert tp.loc[("old-tables/Na(cr)", 298.15), "s_j_mol_k"] == pytest.approx(12.26 * CAL, rel=1e-12)
    assert tp.loc[("old-tables/Na(cr)", 298.15), "uncertainty_dfh_j_mol"] == pytest.approx(100.0)


def test_reactions_in_si(release):
    rx = release["reactions"].set_index("reaction_id")
    assert rx.loc["r2", "value"] == pytest.approx(-212.8 * 4184.0)
    assert rx.loc["r1", "uncertainty"] == pytest.approx(40.0)


def test_one_atm_source_converted(release):
    """The nasa9 source is at 1 atm: its gas H2O's S gains R ln(1.01325) = 0.1094 J/(mol*K)
    against the same functions read from the 1 bar Shomate source (inputs.md)."""
    seg = release["segments"]
    rec = release["records"].set_index("record_id")
    assert rec.loc["glenn/H2O", "source_pressure_bar"] == 1.01325
    assert rec.loc["glenn/H2O", "species"] == "H2O(g)"
    a = seg[seg["record_id"] == "glenn/H2O"].sort_values("t_low_k").iloc[0]
    b = seg[seg["record_id"] == "webbook/H2O(g)"].sort_values("t_low_k").iloc[0]
    t = np.array([600.0, 1000.0, 1600.0])
    pa, pb = evaluate(a[list(COEF_COLUMNS)].to_numpy(float), t), evaluate(b[list(COEF_COLUMNS)].to_numpy(float), t)
    np.testing.assert_allclose(pa.s - pb.s, R * math.log(1.01325), atol=1e-6)
    np.testing.assert_allclose(pa.cp, pb.cp, rtol=1e-8)
    assert (release["findings"]["check_id"] == "schema.standard-state").sum() == 1


def test_species_keys(release):
    keys = set(release["species"]["species"])
    assert {"N2(g)", "Ar(g)", "NaOH(l)", "H2O(g)", "Al2O3(cr,a)", "H2O(l)", "H3O+(g)", "Na(cr)",
            "C(cr,graphite)", "CO2(g)", "N(g)"} <= keys


def test_unlisted_file_warned(release):
    f = release["findings"]
    hit = f[(f["check_id"] == "schema.unlisted-file") & (f["subject"] == "forgotten.csv")]
    assert list(hit["severity"]) == ["warning"]


def test_energy_column_without_unit_exits_2(tmp_path):
    raw = tmp_path / "raw"
    raw.mkdir()
    (raw / "t.csv").write_text("species,t,cp,dfh\nHe(g),298.15,20.786,0\n")
    (raw / "sources.toml").write_text('[[source]]\nid = "tab"\npath = "t.csv"\nformat = "table-csv"\n')
    proc = subprocess.run(thermoledger() + ["run", "--raw", str(raw), "--out", str(tmp_path / "out")],
                          capture_output=True, text=True, timeout=300)
    assert proc.returncode == 2
    assert "found column 'cp' without a unit in t.csv:1" in proc.stderr
    assert "energy_unit = \"kJ\" to source 'tab'" in proc.stderr
