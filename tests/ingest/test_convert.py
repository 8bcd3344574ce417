"""Standard-state conversion of 1 atm sources to the database's 1 bar (inputs.md)."""
from __future__ import annotations

import json
import math

import numpy as np
import pandas as pd
import pytest
import scipy.constants as sc

from pipeline.ingest import base as ib
from pipeline.ingest.convert import formation_delta_n, standard_state
from pipeline.ingest.resolve import species_table
from pipeline.manifest import Database, Manifest, Source
from pipeline.stages import Run
from pipeline.thermo import COEF_COLUMNS, evaluate

R = sc.R                              # CODATA 2018, exact
LNR = math.log(1.01325)               # ln(p_source / p_db) for 1 atm → 1 bar
KCAL = 4184.0                          # thermochemical kilocalorie (NIST SP 811, 2008)


def _run(tmp_path, records, segments, table_points, reactions, p_src=1.01325):
    srcs = (Source(id="old", path="x", format="table-csv", reference_pressure_bar=p_src),
            Source(id="new", path="y", format="table-csv"))
    run = Run(raw=tmp_path, out=tmp_path / "out")
    run.manifest = Manifest(root=tmp_path, database=Database(), sources=srcs)
    keys = list(records["species"]) + [k for s in reactions["stoich_json"] for k in json.loads(s)]
    run.frames = {"records": records, "segments": segments, "table_points": table_points,
                  "reactions": reactions, "species": species_table(keys, ib.empty(ib.SPECIES_META_COLUMNS)),
                  "rejected": ib.empty(ib.REJECTED_COLUMNS)}
    standard_state(run)
    return run


def _records(rows):
    return pd.DataFrame([dict(record_id=f"{s}/{k}", species=k, source_id=s, kind=kind) for k, s, kind in rows])


def _seg(rid, coef):
    return dict(record_id=rid, segment=0, t_low_k=200.0, t_high_k=2000.0, **dict(zip(COEF_COLUMNS, coef)))


COEF = np.array([0.0, 0.0, 3.5, 1e-3, -2e-7, 0.0, 0.0, -1000.0, 4.0])


def _table(rid, src, t, **cols):
    df = pd.DataFrame({"record_id": rid, "source_id": src, "line": 1, "t_k": np.asarray(t, float)})
    for c in ib.TABLE_POINT_COLUMNS:
        if c not in df:
            df[c] = np.asarray(cols[c], float) if c in cols else np.nan
    return df


def _reactions(rows):
    return pd.DataFrame([dict(reaction_id=i, source_id=s, quantity=q, t_k=t, value=v,
                              stoich_json=json.dumps(st)) for i, s, q, t, v, st in rows],
                        columns=["reaction_id", "source_id", "quantity", "t_k", "value", "stoich_json"])


def test_polynomials(tmp_path):
    """Gas: S + R ln(p_s/p°), G − RT ln(p_s/p°), H and Cp unchanged; condensed: unchanged."""
    recs = _records([("O2(g)", "old", "polynomial"), ("H2O(l)", "old", "polynomial"), ("N2(g)", "new", "polynomial")])
    segs = pd.DataFrame([_seg(r, COEF) for r in recs["record_id"]])
    run = _run(tmp_path, recs, segs, ib.empty(ib.TABLE_POINT_COLUMNS), _reactions([]))
    t = np.array([300.0, 1000.0, 1900.0])
    before = evaluate(COEF, t)
    seg = run.frames["segments"].set_index("record_id")
    after_gas = evaluate(seg.loc["old/O2(g)", list(COEF_COLUMNS)].to_numpy(float), t)
    np.testing.assert_allclose(after_gas.s - before.s, R * LNR, rtol=1e-12)
    assert R * LNR == pytest.approx(0.1094, abs=5e-5)                 # inputs.md
    np.testing.assert_allclose(after_gas.g - before.g, -R * t * LNR, rtol=1e-9)
    np.testing.assert_array_equal(after_gas.h, before.h)
    np.testing.assert_array_equal(after_gas.cp, before.cp)
    for rid in ("old/H2O(l)", "new/N2(g)"):
        np.testing.assert_array_equal(seg.loc[rid, list(COEF_COLUMNS)].to_numpy(float), COEF)
    assert list(run.frames["records"]["source_pressure_bar"]) == [1.01325, 1.01325, 1.0]


def test_tabulated_formation_gibbs_energies_against_published_tables(tmp_path):
    """ΔfG°(298.15 K) at 1 atm (NBS Technical Note 270-3, Wagman et al., 1968) converted to
    1 bar reproduces the 1 bar values of the NBS tables (Wagman et al., J. Phys. Chem. Ref.
    Data 11, Suppl. 2, 1982), both from memory:
    H2O(l) −56.687 kcal/mol → −237.129 kJ/mol (Δn = −3/2);
    H2O(g) −54.634 kcal/mol → −228.572 kJ/mol (Δn = −1/2);
    CO2(g) −94.254 kcal/mol → −394.359 kJ/mol (Δn = 0).
    Tolerance 2.6 J/mol: the 1 atm values are rounded to 1 cal/mol (±2.1 J/mol), the 1 bar
    values to 1 J/mol (±0.5 J/mol)."""
    recs = _records([("H2O(l)", "old", "table"), ("H2O(g)", "old", "table"), ("CO2(g)", "old", "table")])
    t298 = [298.15]
    tp = pd.concat([_table("old/H2O(l)", "old", t298, dfg_j_mol=[-56.687 * KCAL], s_j_mol_k=[69.95]),
                    _table("old/H2O(g)", "old", t298, dfg_j_mol=[-54.634 * KCAL], s_j_mol_k=[188.72],
                           gef_j_mol_k=[188.72], log_kf=[54.634 * KCAL / (R * 298.15 * math.log(10))]),
                    _table("old/CO2(g)", "old", t298, dfg_j_mol=[-94.254 * KCAL])], ignore_index=True)
    run = _run(tmp_path, recs, ib.empty(ib.SEGMENT_COLUMNS), tp, _reactions([]))
    out = run.frames["table_points"].set_index("record_id")
    assert out.loc["old/H2O(l)", "dfg_j_mol"] == pytest.approx(-237129.0, abs=2.6)
    assert out.loc["old/H2O(g)", "dfg_j_mol"] == pytest.approx(-228572.0, abs=2.6)
    assert out.loc["old/CO2(g)", "dfg_j_mol"] == pytest.approx(-394359.0, abs=2.6)
    # gas S and gef gain R ln(1.01325); a liquid's S is unchanged
    assert out.loc["old/H2O(g)", "s_j_mol_k"] == pytest.approx(188.72 + R * LNR, abs=1e-12)
    assert out.loc["old/H2O(g)", "gef_j_mol_k"] == pytest.approx(188.72 + R * LNR, abs=1e-12)
    assert out.loc["old/H2O(l)", "s_j_mol_k"] == 69.95
    # log Kf follows ΔfG: log Kf = −ΔfG / (RT ln 10)
    assert out.loc["old/H2O(g)", "log_kf"] == pytest.approx(
        -out.loc["old/H2O(g)", "dfg_j_mol"] / (R * 298.15 * math.log(10)), rel=1e-12)


def test_delta_n_uses_declared_reference_states(tmp_path):
    sp = species_table(["Br2(l)", "HBr(g)", "O2(g)"], pd.DataFrame(
        {"species": ["Br2(l)"], "aliases": [""], "stated_molar_mass_g_mol": [np.nan],
         "reference_element": [True], "geometry": [None], "cas": [None], "source_id": ["s"],
         "file": ["f"], "line": [1]}))
    dn = formation_delta_n(sp)
    assert dn["HBr(g)"] == pytest.approx(1 - 0.5)    # 1/2 H2(g) + 1/2 Br2(l) = HBr(g)
    assert dn["O2(g)"] == pytest.approx(0.0)


def test_delta_n_of_some_species_keeps_the_reference_states_of_all(tmp_path):
    """``only`` picks the species computed; Br2(l), a declared reference species left out of
    ``only``, still decides that bromine's reference state is not a gas (exact: the same sums)."""
    sp = species_table(["Br2(l)", "HBr(g)", "O2(g)", "H2O(g)"], pd.DataFrame(
        {"species": ["Br2(l)"], "aliases": [""], "stated_molar_mass_g_mol": [np.nan],
         "reference_element": [True], "geometry": [None], "cas": [None], "source_id": ["s"],
         "file": ["f"], "line": [1]}))
    some = formation_delta_n(sp, only={"HBr(g)", "H2O(g)"})
    assert sorted(some.index) == ["H2O(g)", "HBr(g)"]
    assert some["HBr(g)"] == 1 - 0.5
    assert (some == formation_delta_n(sp)[some.index]).all()


def test_reactions(tmp_path):
    """ΔrG − Δn RT ln(p_s/p°), log K + Δn ln(p_s/p°)/ln 10 with Δn = Σν over gases; ΔrH unchanged."""
    st = {"N2(g)": -1.0, "N(g)": 2.0}
    rx = _reactions([("a", "old", "log_k", 3000.0, -10.5, st), ("b", "old", "drg", 3000.0, 5.0e5, st),
                     ("c", "old", "drh", 298.15, 9.45e5, st), ("d", "new", "log_k", 3000.0, -10.5, st),
                     ("e", "old", "drg", 273.15, 0.0, {"H2O(cr)": -1.0, "H2O(l)": 1.0})])
    run = _run(tmp_path, _records([]).reindex(columns=["record_id", "species", "source_id", "kind"]),
               ib.empty(ib.SEGMENT_COLUMNS), ib.empty(ib.TABLE_POINT_COLUMNS), rx)
    v = run.frames["reactions"].set_index("reaction_id")["value"]
    assert v["a"] == pytest.approx(-10.5 + LNR / math.log(10), abs=1e-12)
    assert LNR / math.log(10) == pytest.approx(0.005717, abs=1e-6)
    assert v["b"] == pytest.approx(5.0e5 - R * 3000.0 * LNR, abs=1e-9)
    assert v["c"] == 9.45e5 and v["d"] == -10.5 and v["e"] == 0.0


def test_one_info_finding_per_converted_source(tmp_path):
    run = _run(tmp_path, _records([]).reindex(columns=["record_id", "species", "source_id", "kind"]),
               ib.empty(ib.SEGMENT_COLUMNS), ib.empty(ib.TABLE_POINT_COLUMNS), _reactions([]))
    f = pd.concat(run.findings_parts)
    assert list(f["check_id"]) == ["schema.standard-state"] and list(f["subject"]) == ["old"]
    assert list(f["severity"]) == ["info"]
