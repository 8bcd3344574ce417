"""formation.reference-element and formation.stated-vs-polynomial."""
from __future__ import annotations

import numpy as np
import pandas as pd
import pytest

from pipeline.checks.formation import formation_reference_element, formation_stated_vs_polynomial
from pipeline.constants import R
from pipeline.thermo import evaluate, from_shomate
from tests.builders import context, poly_record, table_record
from tests.checks.gas_reference import GASES, config_from, gas_context, gas_poly, run_checks


def ref_meta(*species):
    return pd.DataFrame({"species": list(species), "reference_element": True,
                         "stated_molar_mass_g_mol": np.nan, "geometry": None})


def const(cp_r=3.5, b1=0.0, b2=0.0):
    c = np.zeros(9)
    c[2], c[7], c[8] = cp_r, b1, b2
    return c


def element_poly(h298_j_mol: float):
    """O2 with constant Cp and H(298.15) = h298 (b1 chosen for it)."""
    b1 = h298_j_mol / R - 3.5 * 298.15
    return poly_record("O2(g)", "src", [(200.0, 1000.0, const(b1=b1))])


# ------------------------------------------------------------ formation.reference-element

def test_reference_element_at_zero_passes():
    assert len(formation_reference_element(context([element_poly(0.3)], species_meta=ref_meta("O2(g)")))) == 0


@pytest.mark.parametrize("h, severity", [(5.0, "warning"), (-50.0, "error")])
def test_reference_element_enthalpy_offsets(h, severity):
    f = formation_reference_element(context([element_poly(h)], species_meta=ref_meta("O2(g)")))
    assert f[["check_id", "severity", "subject", "source_id"]].values.tolist() == [
        ["formation.reference-element", severity, "O2(g)", "src"]]
    assert f["observed"].iloc[0] == pytest.approx(h, abs=1e-6)
    assert f["t_k"].iloc[0] == pytest.approx(298.15)


def test_not_a_reference_element_is_not_checked():
    assert len(formation_reference_element(context([element_poly(-50.0)]))) == 0


def test_table_nonzero_above_a_transition_gets_the_transition_hint():
    t = np.array([298.15, 500.0, 1000.0])
    tab = table_record("Na(cr)", "tab", t, cp_j_mol_k=[28.2, 30.0, 31.0],
                       dfh_j_mol=[0.0, 0.0, -2600.0], dfg_j_mol=[0.0, 0.0, 0.0])
    f = formation_reference_element(context(tables=[tab], species_meta=ref_meta("Na(cr)")))
    assert f["severity"].tolist() == ["error"]
    assert f["t_k"].iloc[0] == pytest.approx(1000.0)
    assert "transition" in f["hint"].iloc[0]


def test_table_dfg_is_checked_too():
    t = np.array([298.15, 500.0])
    tab = table_record("O2(g)", "tab", t, cp_j_mol_k=[29.4, 31.1], dfg_j_mol=[3.0, 0.0])
    f = formation_reference_element(context(tables=[tab], species_meta=ref_meta("O2(g)")))
    assert f["severity"].tolist() == ["warning"]
    assert "ΔfG" in f["message"].iloc[0]


def test_reference_element_overrides_are_honoured(tmp_path):
    cfg = config_from(tmp_path, '[checks."formation.reference-element"]\nwarning_j_mol = 10\n')
    assert len(formation_reference_element(context([element_poly(5.0)], species_meta=ref_meta("O2(g)"),
                                                   config=cfg))) == 0


def test_coolprop_reference_elements_pass_and_planted_offset_is_flagged():
    # N2, O2, Ar (CoolProp tables with ΔfH = ΔfG = 0 rows; fits anchored on chemicals' ATcT
    # ΔfH°298 = 0 for the elements): clean. Planted: O2's fit shifted by 40 J/mol.
    assert len(run_checks(gas_context(), ("formation.reference-element",))) == 0
    rec, segs = gas_poly("O2(g)")
    for s in segs:
        s["b1"] += 40.0 / R
    polys = [gas_poly(s) for s in GASES if s != "O2(g)"] + [(rec, segs)]
    f = run_checks(gas_context(polys=polys), ("formation.reference-element",))
    assert f[["severity", "subject", "source_id"]].values.tolist() == [["error", "O2(g)", "fit"]]
    assert f["observed"].iloc[0] == pytest.approx(40.0, abs=1e-6)


# ------------------------------------------------------------ formation.stated-vs-polynomial

def test_co2_shomate_parameters_agree_with_their_stated_enthalpy():
    # NIST Chemistry WebBook, CO2 gas, Shomate parameters for 298–1200 K (from the
    # NIST-JANAF tables, Chase 1998; values from memory): A 24.99735, B 55.18696,
    # C −33.69137, D 7.948387, E −0.136638, F −403.6075, G 228.2431, H −393.5224 kJ/mol.
    p = np.array([24.99735, 55.18696, -33.69137, 7.948387, -0.136638, -403.6075, 228.2431, -393.5224])
    coef = from_shomate(p)
    # cross-check the recalled parameters against S°(298.15) = 213.79 J/(mol·K)
    # (NIST-JANAF 4th ed., Chase 1998 — from memory)
    assert evaluate(coef, 298.15).s == pytest.approx(213.79, abs=0.02)
    rec = poly_record("CO2(g)", "nist", [(298.0, 1200.0, coef)], form="shomate",
                      stated_dfh_j_mol=p[7] * 1000)
    assert len(formation_stated_vs_polynomial(context([rec]))) == 0
    # the same parameters with H mistyped by 0.1 kJ/mol are flagged
    rec = poly_record("CO2(g)", "nist", [(298.0, 1200.0, coef)], form="shomate",
                      stated_dfh_j_mol=(p[7] - 0.1) * 1000)
    f = formation_stated_vs_polynomial(context([rec]))
    assert f[["check_id", "severity", "subject", "source_id"]].values.tolist() == [
        ["formation.stated-vs-polynomial", "error", "CO2(g)", "nist"]]
    assert f["observed"].iloc[0] - f["expected"].iloc[0] == pytest.approx(100.0, abs=5.0)


def test_coolprop_fits_state_their_own_enthalpy():
    # fits anchored on chemicals' Hfg(method="ATCT_G") and stating the same value: clean
    assert len(run_checks(gas_context(tables=[]), ("formation.stated-vs-polynomial",))) == 0


@pytest.mark.parametrize("stated_factor, hint_word", [(1e-3, "1000"), (1 / 4.184, "4.184"),
                                                      (1 / R, "factor of R"), (-1.0, "sign")])
def test_recognisable_slips_get_their_hints(stated_factor, hint_word):
    # planted defect on the CoolProp-based CH4 fit: ΔfH° stated in kJ, in kcal, divided by R,
    # with the wrong sign
    rec, segs = gas_poly("CH4(g)")
    rec["stated_dfh_j_mol"] *= stated_factor
    f = formation_stated_vs_polynomial(context([(rec, segs)]))
    assert f["severity"].tolist() == ["error"]
    assert hint_word in f["hint"].iloc[0]


def test_sensible_enthalpy_polynomial_is_recognised():
    rec = poly_record("CO2(g)", "s", [(300.0, 1000.0, const(cp_r=4.5, b1=-4.5 * 298.15))],
                      stated_dfh_j_mol=-393510.0)
    f = formation_stated_vs_polynomial(context([rec]))
    assert "H(298.15 K) = 0" in f["hint"].iloc[0]


def test_records_without_a_stated_value_are_skipped():
    rec = poly_record("CO2(g)", "s", [(300.0, 1000.0, const(b1=1e5))])
    assert len(formation_stated_vs_polynomial(context([rec]))) == 0


def test_stated_tolerance_override_is_honoured(tmp_path):
    rec = poly_record("CO2(g)", "s", [(300.0, 1000.0, const(cp_r=4.5, b1=-4.5 * 298.15 + 30 / R))],
                      stated_dfh_j_mol=0.0)
    assert len(formation_stated_vs_polynomial(context([rec]))) == 1
    cfg = config_from(tmp_path, '[checks."formation.stated-vs-polynomial"]\nerror_j_mol = 50\n')
    assert len(formation_stated_vs_polynomial(context([rec], config=cfg))) == 0
