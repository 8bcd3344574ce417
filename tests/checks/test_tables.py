"""Table checks: integrals, gef, log K and formation identities.

Clean tables are built from CoolProp's ideal-gas functions (Bell et al., Ind. Eng. Chem.
Res. 53 (2014) 2498) with absolute entropies from ``chemicals`` (see coolprop_tables.py);
defects are planted in them.
"""
from __future__ import annotations

from types import MappingProxyType

import numpy as np
import pandas as pd
import pytest

from pipeline.checks import registry
from pipeline.config import Config
from pipeline.constants import LN10, R, T_REF
from tests.builders import context, findings_of, table_record
from tests.checks import coolprop_tables as ct

TABLE_CHECKS = ("table.enthalpy-integral", "table.entropy-integral", "table.gibbs-identity",
                "table.logk-identity", "table.formation-identity")
ELEMENTS = ("N2(g)", "O2(g)", "H2(g)", "Ar(g)")

#: H2O(g), NIST-JANAF Thermochemical Tables, 4th ed. (Chase 1998), from memory:
#: T [K] → (ΔfH° [J/mol], ΔfG° [J/mol]).
JANAF_H2O = {298.15: (-241826.0, -228582.0), 500.0: (-243826.0, -219051.0), 1000.0: (-247857.0, -192590.0)}
H2O_T = np.array([T_REF, 300.0, 400.0, 500.0, 600.0, 700.0, 800.0, 900.0, 1000.0])


def _run(ctx, *ids):
    parts = [registry.spec_for(i).func(ctx) for i in ids]
    return pd.concat(parts, ignore_index=True)


def _h2o_with_formation(**override):
    """H2O(g) table with JANAF's ΔfH, ΔfG and log Kf = −ΔfG/(RT ln 10) at 298.15, 500 and
    1000 K, rounded to 0.001 as JANAF prints it."""
    dfh = np.array([JANAF_H2O.get(t, (np.nan, np.nan))[0] for t in H2O_T])
    dfg = np.array([JANAF_H2O.get(t, (np.nan, np.nan))[1] for t in H2O_T])
    cols = dict(dfh_j_mol=dfh, dfg_j_mol=dfg, log_kf=np.round(-dfg / (R * H2O_T * LN10), 3))
    cols.update(override)
    return ct.table("H2O(g)", t_k=H2O_T, **cols)


def _clean_tables():
    return [ct.table(s) for s in ("N2(g)", "O2(g)", "CO2(g)", "CH4(g)", "Ar(g)", "H2(g)")] + [_h2o_with_formation()]


def _ctx(tables, config=None):
    return context(tables=tables, species_meta=ct.element_meta(*ELEMENTS), config=config)


def test_coolprop_tables_pass_every_table_check():
    """Tables of N2, O2, CO2, H2O, CH4 (≤ 625 K), Ar and H2 from CoolProp, printed to JANAF
    precision on a 100 K grid, pass every table check: no finding at all. H2O(g) carries
    JANAF's ΔfH and ΔfG (Chase 1998, from memory), which the formation identity reproduces
    from CoolProp's entropies of H2O, H2 and O2 plus chemicals' S°(298.15)."""
    out = _run(_ctx(_clean_tables()), *TABLE_CHECKS)
    assert out.empty, out[["check_id", "subject", "message"]].to_string()


def _planted(species, column, t_k, delta, **kw):
    tabs = []
    for s in ("N2(g)", "O2(g)", "CO2(g)", "H2(g)"):
        rec, pts = ct.table(s)
        if s == species:
            pts.loc[np.isclose(pts["t_k"], t_k), column] += delta
        tabs.append((rec, pts))
    return _ctx(tabs, **kw)


@pytest.mark.parametrize("species,t_k", [("N2(g)", 500.0), ("CO2(g)", 400.0), ("O2(g)", 200.0)])
def test_enthalpy_off_by_50_j_is_an_error(species, t_k):
    """A genuine 50 J/mol inconsistency between H − H298 and ∫Cp at one row is an error
    (tolerance there: max(20, 0.1 % of H − H298) + integration error ≈ 20–25 J/mol)."""
    out = _run(_planted(species, "h_minus_href_j_mol", t_k, 50.0), *TABLE_CHECKS)
    f = findings_of(out, "table.enthalpy-integral")
    assert list(f["subject"]) == [species] and list(f["severity"]) == ["error"]
    assert f["t_k"].iloc[0] == t_k
    assert f["observed"].iloc[0] - f["expected"].iloc[0] == pytest.approx(50.0, abs=5.0)
    assert "298.15 K" in f["message"].iloc[0] and "one row" in f["hint"].iloc[0]
    assert set(out["check_id"]) == {"table.enthalpy-integral", "table.gibbs-identity"}  # gef used that H


def test_enthalpy_tolerance_is_configurable():
    """``[checks."table.enthalpy-integral"] h_j_mol = 100`` accepts the 50 J/mol defect."""
    cfg = Config(MappingProxyType({"table.enthalpy-integral": MappingProxyType({"h_j_mol": 100.0})}))
    out = _run(_planted("N2(g)", "h_minus_href_j_mol", 500.0, 50.0, config=cfg), "table.enthalpy-integral")
    assert out.empty


def test_entropy_off_by_0_3_is_an_error():
    """S off by 0.3 J/(mol·K) at one row breaks S(T) − S(298.15) = ∫Cp/T dT: error."""
    out = _run(_planted("O2(g)", "s_j_mol_k", 700.0, 0.3), "table.entropy-integral")
    assert list(out["subject"]) == ["O2(g)"] and list(out["severity"]) == ["error"]
    assert out["t_k"].iloc[0] == 700.0
    assert out["observed"].iloc[0] - out["expected"].iloc[0] == pytest.approx(0.3, abs=0.01)


def test_entropy_offset_at_the_reference_row_shows_in_every_row():
    """S(298.15) itself wrong: every other row disagrees and the hint says so."""
    out = _run(_planted("N2(g)", "s_j_mol_k", T_REF, 0.5), "table.entropy-integral")
    assert list(out["severity"]) == ["error"]
    assert "every row" in out["hint"].iloc[0]


def test_reference_row_is_the_first_row_without_298():
    """A table without a 298.15 K row integrates from its first row, and says so."""
    t = np.arange(300.0, 1501.0, 100.0)
    cols = ct.columns("N2(g)", t)
    cols["h_minus_href_j_mol"][5] += 60.0
    tab = table_record("N2(g)", "cp", t, **{k: v for k, v in cols.items() if k != "t_k"})
    assert _run(_ctx([ct.table("N2(g)", t_k=t)]), *TABLE_CHECKS).empty
    out = _run(_ctx([tab]), "table.enthalpy-integral")
    assert list(out["severity"]) == ["error"]
    assert "first row, 300 K" in out["message"].iloc[0]


def test_gef_inconsistent_is_an_error():
    """gef 0.05 J/(mol·K) off S − (H − H298)/T at one row (tolerance 0.02): error."""
    out = _run(_planted("CO2(g)", "gef_j_mol_k", 900.0, 0.05), *TABLE_CHECKS)
    assert list(out["check_id"]) == ["table.gibbs-identity"]
    assert out["severity"].iloc[0] == "error" and out["t_k"].iloc[0] == 900.0


def test_gef_of_the_wrong_sign_is_diagnosed():
    rec, pts = ct.table("N2(g)")
    pts["gef_j_mol_k"] = -pts["gef_j_mol_k"]
    out = _run(_ctx([(rec, pts)]), "table.gibbs-identity")
    assert "sign" in out["hint"].iloc[0]


def test_log_kf_inconsistent_is_an_error():
    """log Kf 0.01 off −ΔfG/(RT ln 10) (tolerance 0.002): error; JANAF's own rounding
    (0.001) passes (test_coolprop_tables_pass_every_table_check)."""
    rec, pts = _h2o_with_formation()
    pts.loc[np.isclose(pts["t_k"], 500.0), "log_kf"] += 0.01
    out = _run(_ctx([(rec, pts), ct.table("H2(g)"), ct.table("O2(g)")]), *TABLE_CHECKS)
    assert list(out["check_id"]) == ["table.logk-identity"]
    assert out["severity"].iloc[0] == "error" and out["t_k"].iloc[0] == 500.0


def test_natural_log_is_diagnosed():
    dfg = np.array([JANAF_H2O.get(t, (np.nan, np.nan))[1] for t in H2O_T])
    tab = _h2o_with_formation(log_kf=-dfg / (R * H2O_T))
    out = _run(_ctx([tab, ct.table("H2(g)"), ct.table("O2(g)")]), "table.logk-identity")
    assert "natural logarithm" in out["hint"].iloc[0]


def test_formation_identity_flags_dfg_off_by_half_a_kilojoule():
    """ΔfG 0.5 kJ/mol off at 1000 K (tolerance 0.1 kJ/mol × 1000/298.15 = 0.34 kJ/mol): error."""
    dfg = np.array([JANAF_H2O.get(t, (np.nan, np.nan))[1] for t in H2O_T])
    dfg[-1] += 500.0
    tab = _h2o_with_formation(dfg_j_mol=dfg, log_kf=np.round(-dfg / (R * H2O_T * LN10), 3))
    out = _run(_ctx([tab, ct.table("H2(g)"), ct.table("O2(g)")]), *TABLE_CHECKS)
    assert list(out["check_id"]) == ["table.formation-identity"]
    assert out["severity"].iloc[0] == "error" and out["t_k"].iloc[0] == 1000.0
    assert out["tolerance"].iloc[0] == pytest.approx(100.0 * 1000.0 / T_REF)


def test_formation_identity_reference_entropy_per_atom():
    """ΔfS of H2O(g) at 298.15 K is S(H2O) − S(H2) − ½ S(O2) = −44.42 J/(mol·K)
    (CODATA Key Values, Cox, Wagman & Medvedev 1989, from memory: 188.835 − 130.680 −
    205.152/2): a table that used S(O2) per molecule instead of per atom is flagged."""
    s = {"H2O": 188.835, "H2": 130.680, "O2": 205.152}
    dfs_right = s["H2O"] - s["H2"] - s["O2"] / 2
    assert dfs_right == pytest.approx(-44.42, abs=0.01)
    dfh = -241826.0
    wrong = dfh - T_REF * (s["H2O"] - s["H2"] - s["O2"])      # O2 counted once per O atom
    t = np.array([T_REF])
    tab = ct.table("H2O(g)", t_k=t, dfh_j_mol=[dfh], dfg_j_mol=[wrong])
    out = _run(_ctx([tab, ct.table("H2(g)"), ct.table("O2(g)")]), "table.formation-identity")
    assert list(out["severity"]) == ["error"]
    assert out["expected"].iloc[0] == pytest.approx(-228582.0, abs=300.0)  # JANAF ΔfG°(298.15)


def test_formation_without_reference_elements_is_reported_not_guessed():
    """CO2 needs carbon's reference form; without one the rows are not checked (info)."""
    t = np.array([T_REF, 500.0])
    tab = ct.table("CO2(g)", t_k=t, dfh_j_mol=[-393522.0, -393666.0], dfg_j_mol=[-394389.0, -394939.0])
    out = _run(_ctx([tab, ct.table("O2(g)")]), "table.formation-identity")
    assert list(out["severity"]) == ["info"] and "C" in out["message"].iloc[0]


def test_debye_crystal_from_zero_kelvin_passes():
    """A calorimetric table from 0 K: Debye crystal (Debye 1912), θ = 300 K, one atom;
    Cv(T) = 9R (T/θ)³ ∫0^{θ/T} x⁴eˣ/(eˣ − 1)² dx and S(T) = ∫0^T Cv/T dT by scipy quad on
    the exact function (not on the table). Rows as a low-temperature calorimetry table
    prints them (5–10 K apart below 50 K); the spline integral must match within the
    tolerance plus its own spline–PCHIP error estimate."""
    from scipy import integrate

    theta = 300.0

    def cv(T):
        if T == 0:
            return 0.0
        y = theta / T
        val, _ = integrate.quad(lambda x: x ** 4 * np.exp(-x) / np.expm1(-x) ** 2, 0, y, limit=200)
        return 9 * R * val / y ** 3

    t = np.array([0, 5, 10, 15, 20, 25, 30, 40, 50, 60, 70, 80, 90, 100, 120, 140, 160, 180, 200,
                  250, T_REF, 300.0])
    cp = np.array([cv(T) for T in t])
    s = np.array([integrate.quad(lambda u: cv(u) / u if u > 0 else 0.0, 0, T, limit=200)[0] for T in t])
    h = np.array([integrate.quad(cv, T_REF, T, limit=200)[0] for T in t])
    tab = table_record("Cu(cr)", "deb", t, cp_j_mol_k=cp, s_j_mol_k=s, h_minus_href_j_mol=h)
    out = _run(_ctx([tab]), "table.entropy-integral", "table.enthalpy-integral", "table.gibbs-identity")
    assert out.empty, out["message"].tolist()
    s_bad = s.copy()
    s_bad[t == 20] += 0.2
    out = _run(_ctx([table_record("Cu(cr)", "deb", t, cp_j_mol_k=cp, s_j_mol_k=s_bad)]), "table.entropy-integral")
    assert list(out["t_k"]) == [20.0]
