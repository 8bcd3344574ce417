"""table-csv reader: units from brackets or the manifest (never guessed), T = 0 rows, rejections."""
from __future__ import annotations

import numpy as np
import pytest

from pipeline.errors import InputError
from pipeline.ingest import table_csv

from .conftest import DATA, assert_accounted, source
from .writers import csv_text


@pytest.fixture(scope="module")
def cal():
    return table_csv.read(DATA / "table_cal.csv", source("table-csv", energy_unit="cal"), "old/table_cal.csv")


def test_calories_to_si(cal):
    """cal = 4.184 J (thermochemical, NIST SP 811, 2008); header brackets win over the manifest."""
    tp = cal.table_points.set_index(["record_id", "t_k"])
    row = tp.loc[("s/Na(cr)", 298.15)]
    assert row["cp_j_mol_k"] == pytest.approx(6.75 * 4.184, rel=1e-15)
    assert row["s_j_mol_k"] == pytest.approx(12.26 * 4.184, rel=1e-15)
    assert row["uncertainty_dfh_j_mol"] == pytest.approx(100.0)          # [kJ/mol] bracket
    assert tp.loc[("s/C(cr,graphite)", 500.0), "h_minus_href_j_mol"] == pytest.approx(0.5 * 4.184)
    assert np.isnan(tp.loc[("s/C(cr,graphite)", 500.0), "dfh_j_mol"])    # empty = not given


def test_zero_kelvin_row(cal):
    row = cal.table_points.set_index(["record_id", "t_k"]).loc[("s/Na(cr)", 0.0)]
    assert row["cp_j_mol_k"] == 0 and row["s_j_mol_k"] == 0
    assert np.isnan(row["gef_j_mol_k"]) and np.isnan(row["log_kf"])      # INFINITE at 0 K
    rec = cal.records.set_index("name").loc["Na(cr)"]
    assert (rec["t_low_k"], rec["t_high_k"], rec["line"]) == (0.0, 298.15, 2)


def test_rejections(cal):
    assert_accounted(cal, "table-csv")
    rej = cal.rejected.set_index("line")["reason"]
    assert rej[7] == "Na(cr) at T = 298.15 K again (first on line 4) — fix: keep one row per species and temperature"
    assert rej[8].startswith("species key found 'Xx': unknown element symbol 'Xx'")
    assert rej[9] == ("column 'cp' = 'seven': not a finite number (heat capacity) — fix: correct the cell, "
                      "or leave an optional cell empty for 'not given'")
    assert len(cal.records) == 2 and len(cal.table_points) == 5


def test_no_unit_anywhere_is_an_input_error(tmp_path):
    p = tmp_path / "t.csv"
    p.write_text(csv_text(["species", "t", "cp [J/(mol*K)]", "dfh"], [["He(g)", 298.15, 20.786, 0]]))
    with pytest.raises(InputError) as e:
        table_csv.read(p, source("table-csv", sid="janaf"), "janaf/t.csv")
    assert e.value.file == "janaf/t.csv" and e.value.line == 1
    assert "column 'dfh' without a unit" in str(e.value)
    assert "energy_unit = \"kJ\" to source 'janaf'" in str(e.value)


@pytest.mark.parametrize("header,needle", [
    ("t [degC]", "temperature column 't [degC]'"),
    ("log_kf [kJ/mol]", "dimensionless column"),
    ("cp [kJ/mol]", "unit 'kJ/mol' in column 'cp [kJ/mol]'"),
    ("cpp", "unknown column(s) ['cpp']"),
])
def test_header_errors(tmp_path, header, needle):
    cols = ["species", "t", "cp [J/(mol*K)]"]
    cols = [header if header.split(" ")[0] in ("t",) and c == "t" else c for c in cols]
    if header.split(" ")[0] not in ("t",):
        cols = [c for c in cols if not (header.startswith("cp ") and c.startswith("cp"))] + [header]
    p = tmp_path / "t.csv"
    p.write_text(csv_text(cols, [["He(g)", 298.15] + [1.0] * (len(cols) - 2)]))
    with pytest.raises(InputError) as e:
        table_csv.read(p, source("table-csv"), "t.csv")
    assert needle in str(e.value) and e.value.line == 1


def test_required_columns(tmp_path):
    p = tmp_path / "t.csv"
    p.write_text(csv_text(["species", "t", "s [J/(mol*K)]"], [["He(g)", 298.15, 126.15]]))
    with pytest.raises(InputError, match=r"header without column\(s\) \['cp'\]"):
        table_csv.read(p, source("table-csv"), "t.csv")


def test_uncertainty_columns_follow_the_manifest_unit(tmp_path):
    p = tmp_path / "t.csv"
    p.write_text(csv_text(["species", "t", "cp", "dfh", "uncertainty_dfh", "uncertainty_cp [J/(mol*K)]"],
                          [["He(g)", 298.15, 20.786, 0, 0.5, 0.01]]))
    r = table_csv.read(p, source("table-csv", energy_unit="kJ"), "t.csv")
    row = r.table_points.iloc[0]
    assert row["cp_j_mol_k"] == pytest.approx(20786.0)         # kJ/(mol*K) from the manifest
    assert row["uncertainty_dfh_j_mol"] == pytest.approx(500.0)
    assert row["uncertainty_cp_j_mol_k"] == pytest.approx(0.01)


def test_round_trip(tmp_path):
    rng = np.random.default_rng(5)
    t = np.array([100.0, 200.0, 298.15, 400.0, 1000.0])
    cols = {"cp": rng.uniform(10, 60, 5), "s": rng.uniform(10, 300, 5), "dfg": rng.uniform(-5e5, 5e5, 5)}
    p = tmp_path / "t.csv"
    p.write_text(csv_text(["species", "t [K]", "cp [J/(mol*K)]", "s [J/(mol*K)]", "dfg [J/mol]"],
                          [["CO2(g)", ti, *(float(cols[c][i]) for c in cols)] for i, ti in enumerate(t)]))
    r = table_csv.read(p, source("table-csv"), "t.csv")
    tp = r.table_points.sort_values("t_k")
    np.testing.assert_array_equal(tp["t_k"], t)
    np.testing.assert_array_equal(tp["cp_j_mol_k"], cols["cp"])
    np.testing.assert_array_equal(tp["s_j_mol_k"], cols["s"])
    np.testing.assert_array_equal(tp["dfg_j_mol"], cols["dfg"])


def test_keys_with_commas_must_be_quoted(tmp_path):
    p = tmp_path / "t.csv"
    p.write_text("species,t,cp [J/(mol*K)]\nC(cr,graphite),298.15,8.517\n\"C(cr,diamond)\",298.15,6.109\n")
    r = table_csv.read(p, source("table-csv"), "t.csv")
    assert list(r.records["name"]) == ["C(cr,diamond)"]
    assert "quote keys with commas" in r.rejected["reason"].iloc[0]
    assert_accounted(r, "table-csv")


def test_negative_temperature_rejected(tmp_path):
    p = tmp_path / "t.csv"
    p.write_text("species,t,cp [J/(mol*K)]\nHe(g),-5,20.786\nHe(g),300,20.786\n")
    r = table_csv.read(p, source("table-csv"), "t.csv")
    assert len(r.table_points) == 1
    assert "a negative absolute temperature" in r.rejected["reason"].iloc[0]
