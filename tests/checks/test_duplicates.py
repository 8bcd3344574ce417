"""duplicate.disagreement: two sources of one species, tolerances and exact patterns.

The base table is N2 from CoolProp's ideal-gas functions (Bell et al., Ind. Eng. Chem.
Res. 53 (2014) 2498; coolprop_tables.py); the second source is that table with a known
mistake applied.
"""
from __future__ import annotations

import numpy as np
import pytest

from pipeline.checks import registry
from pipeline.constants import CAL_TH_J, R, R_LN_ATM, T_REF
from pipeline.thermo import from_nasa7
from tests.builders import context, poly_record, table_record
from tests.checks import coolprop_tables as ct

CID = "duplicate.disagreement"
ENERGY = ("cp_j_mol_k", "s_j_mol_k", "h_minus_href_j_mol", "gef_j_mol_k", "dfh_j_mol", "dfg_j_mol")


def _run(ctx):
    return registry.spec_for(CID).func(ctx)


def _pair(species="N2(g)", transform=lambda c: c, base=None):
    cols = ct.columns(species) if base is None else base
    other = transform({k: v.copy() for k, v in cols.items()})
    a = table_record(species, "alpha", cols["t_k"], **{k: v for k, v in cols.items() if k != "t_k"})
    b = table_record(species, "beta", other["t_k"], **{k: v for k, v in other.items() if k != "t_k"})
    return context(tables=[a, b])


def _scaled(factor):
    def f(c):
        for k in ENERGY:
            if k in c:
                c[k] = c[k] / factor
        return c
    return f


def test_identical_sources_agree():
    assert _run(_pair()).empty


def test_table_in_calories_is_an_error_with_its_hint():
    """All energies divided by 4.184 (thermochemical calorie, NBS 1956): ratio 4.184 in
    Cp, S and H − H298."""
    out = _run(_pair(transform=_scaled(CAL_TH_J)))
    assert list(out["severity"]) == ["error"] and list(out["subject"]) == ["N2(g)"]
    assert "calorie" in out["hint"].iloc[0]
    assert out["source_id"].iloc[0] == "alpha+beta"


def test_table_in_kilojoules_is_an_error_with_its_hint():
    out = _run(_pair(transform=_scaled(1000.0)))
    assert list(out["severity"]) == ["error"]
    assert "kilo" in out["hint"].iloc[0] and "calorie" not in out["hint"].iloc[0]


def test_entropy_at_one_atmosphere_is_an_error_below_tolerance():
    """S at 1 atm is lower than at 1 bar by R ln(1.01325) = 0.1094 J/(mol·K) (ideal gas,
    IUPAC 1982 standard pressure): below the 1 J/(mol·K) tolerance, yet an error."""
    def at_1_atm(c):
        c["s_j_mol_k"] = c["s_j_mol_k"] - R * np.log(1.01325)
        c["gef_j_mol_k"] = c["gef_j_mol_k"] - R * np.log(1.01325)
        return c

    out = _run(_pair(transform=at_1_atm))
    assert list(out["severity"]) == ["error"]
    assert "1 atm" in out["hint"].iloc[0] and "beta" in out["hint"].iloc[0]
    assert out["observed"].iloc[0] == pytest.approx(R_LN_ATM, abs=2e-3)
    assert out["expected"].iloc[0] == pytest.approx(0.1094, abs=1e-4)   # inputs.md value


def test_same_offset_on_a_condensed_phase_is_an_entropy_constant_warning():
    """The 1 atm pattern applies to gases only; on a crystal a constant 0.11 J/(mol·K) is
    an entropy-constant warning."""
    base = ct.columns("N2(g)")

    def shifted(c):
        c["s_j_mol_k"] = c["s_j_mol_k"] - R_LN_ATM
        return c

    cols = {k: v for k, v in base.items() if k in ("t_k", "cp_j_mol_k", "s_j_mol_k", "h_minus_href_j_mol")}
    a = table_record("Si(cr)", "alpha", cols["t_k"], **{k: v for k, v in cols.items() if k != "t_k"})
    other = shifted({k: v.copy() for k, v in cols.items()})
    b = table_record("Si(cr)", "beta", cols["t_k"], **{k: v for k, v in other.items() if k != "t_k"})
    out = _run(context(tables=[a, b]))
    assert list(out["severity"]) == ["warning"] and "entropy constant" in out["hint"].iloc[0]


def test_different_dfh_is_a_warning_below_tolerance():
    """Both tables give ΔfH at 298.15 K, 500 J/mol apart, with identical Cp: H and G differ
    by a constant 500 J/mol (< 1 kJ/mol tolerance) — a different ΔfH, reported as warning."""
    t = ct.columns("H2O(g)")["t_k"]
    dfh = np.where(np.isclose(t, T_REF), -241826.0, np.nan)

    def other(c):
        c["dfh_j_mol"] = c["dfh_j_mol"] + 500.0
        return c

    base = ct.columns("H2O(g)")
    base["dfh_j_mol"] = dfh
    out = _run(_pair("H2O(g)", other, base=base))
    assert list(out["severity"]) == ["warning"]
    assert "ΔfH" in out["hint"].iloc[0]
    assert out["observed"].iloc[0] == pytest.approx(500.0, abs=1.0)


def test_large_dfh_difference_is_an_error_and_keeps_the_hint():
    """5 kJ/mol apart: ΔG beyond 4 × 1 kJ/mol → error, still diagnosed as a ΔfH difference."""
    t = ct.columns("H2O(g)")["t_k"]
    base = ct.columns("H2O(g)")
    base["dfh_j_mol"] = np.where(np.isclose(t, T_REF), -241826.0, np.nan)
    out = _run(_pair("H2O(g)", lambda c: {**c, "dfh_j_mol": c["dfh_j_mol"] - 5000.0}, base=base))
    assert list(out["severity"]) == ["error"] and "ΔfH" in out["hint"].iloc[0]


def test_enthalpy_on_another_reference_temperature_is_a_warning():
    """H − H(0) tabulated as H − H(298.15): a constant offset (N2: H298 − H0 = 8.670 kJ/mol,
    Chase 1998, from memory) with equal Cp."""
    out = _run(_pair(transform=lambda c: {**c, "h_minus_href_j_mol": c["h_minus_href_j_mol"] + 8670.0}))
    assert "another reference temperature" in out["hint"].iloc[0]


def test_rigid_rotor_fit_disagrees_at_high_temperature():
    """A constant Cp = 7/2 R (rigid rotor, no vibration) against N2's real Cp: they agree
    at 300 K but differ by ~20 % at 2000 K, where N2's vibration is half excited
    (McQuarrie, Statistical Mechanics, 2000, ch. 6): error, no exact-pattern hint."""
    cols = ct.columns("N2(g)")
    i298 = int(np.flatnonzero(np.isclose(cols["t_k"], T_REF))[0])
    s298 = cols["s_j_mol_k"][i298]
    b2 = s298 / R - 3.5 * np.log(T_REF)
    coef = from_nasa7(np.array([3.5, 0, 0, 0, 0, -3.5 * T_REF, b2]))
    poly = poly_record("N2(g)", "rigid", [(200.0, 2000.0, coef)])
    tab = table_record("N2(g)", "cp", cols["t_k"], **{k: v for k, v in cols.items() if k != "t_k"})
    out = _run(context(poly=[poly], tables=[tab]))
    assert list(out["severity"]) == ["error"]
    assert out["t_k"].iloc[0] > 1500.0
    assert "independent data disagree" in out["hint"].iloc[0]


def test_species_differing_only_in_label_are_not_duplicates():
    """C(cr,graphite) and C(cr,diamond) are two species (inputs.md), never compared here."""
    t = np.array([300.0, 400.0, 500.0, 600.0])
    g = table_record("C(cr,graphite)", "alpha", t, cp_j_mol_k=[8.6, 11.9, 14.6, 16.8])
    d = table_record("C(cr,diamond)", "beta", t, cp_j_mol_k=[6.2, 10.2, 13.6, 16.0])
    assert _run(context(tables=[g, d])).empty


def test_many_pairs_are_attributed_correctly():
    """Several species at once: only the species with the planted calorie error is flagged."""
    recs = []
    for s in ("N2(g)", "O2(g)", "Ar(g)", "CO2(g)"):
        cols = ct.columns(s)
        recs.append(table_record(s, "alpha", cols["t_k"], **{k: v for k, v in cols.items() if k != "t_k"}))
        other = _scaled(CAL_TH_J)({k: v.copy() for k, v in cols.items()}) if s == "Ar(g)" else cols
        recs.append(table_record(s, "beta", cols["t_k"], **{k: v for k, v in other.items() if k != "t_k"}))
    out = _run(context(tables=recs))
    assert list(out["subject"]) == ["Ar(g)"]


def test_no_common_range_no_comparison():
    cols = ct.columns("N2(g)")
    lo = cols["t_k"] < 700
    a = table_record("N2(g)", "alpha", cols["t_k"][lo], cp_j_mol_k=cols["cp_j_mol_k"][lo])
    b = table_record("N2(g)", "beta", cols["t_k"][~lo], cp_j_mol_k=cols["cp_j_mol_k"][~lo] * 2)
    assert _run(context(tables=[a, b])).empty


def test_blocks_give_the_same_findings(monkeypatch):
    """Pairs are compared in blocks of grid points (bounded memory): tiny blocks, same result."""
    from pipeline.checks import duplicates

    recs = []
    for s in ("N2(g)", "O2(g)", "Ar(g)"):
        cols = ct.columns(s)
        recs.append(table_record(s, "alpha", cols["t_k"], **{k: v for k, v in cols.items() if k != "t_k"}))
        other = _scaled(1000.0)({k: v.copy() for k, v in cols.items()}) if s != "O2(g)" else cols
        recs.append(table_record(s, "beta", cols["t_k"], **{k: v for k, v in other.items() if k != "t_k"}))
    whole = _run(context(tables=recs))
    monkeypatch.setattr(duplicates, "BLOCK_POINTS", 50)
    blocked = _run(context(tables=recs))
    assert list(blocked["subject"]) == list(whole["subject"]) == ["N2(g)", "Ar(g)"]
    assert list(blocked["hint"]) == list(whole["hint"])
