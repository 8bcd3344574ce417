"""Species keys and formulas: IUPAC states, labels, ions, parentheses, adducts, molar mass."""
from __future__ import annotations

import pytest

from pipeline.formula import (FormulaError, composition_key, hill_formula, parse_formula,
                              parse_key, recase_name)


@pytest.mark.parametrize("key,formula,state,label", [
    ("C(cr,graphite)", "C", "cr", "graphite"),
    ("C(cr,diamond)", "C", "cr", "diamond"),
    ("C3H6(g,cyclopropane)", "C3H6", "g", "cyclopropane"),
    ("H2O(cr)", "H2O", "cr", None),
    ("H2O(l)", "H2O", "l", None),
    ("OH-(aq)", "OH-", "aq", None),
    ("Ca(OH)2(cr)", "Ca(OH)2", "cr", None),
    ("Ca(OH)+(aq)", "Ca(OH)+", "aq", None),
])
def test_parse_key(key, formula, state, label):
    sk = parse_key(key)
    assert (sk.formula, sk.state, sk.label) == (formula, state, label)
    assert sk.key == key


@pytest.mark.parametrize("formula,elements,charge", [
    ("H2O", {"H": 2, "O": 1}, 0),
    ("Ca(OH)2", {"Ca": 1, "O": 2, "H": 2}, 0),
    ("Fe2(SO4)3", {"Fe": 2, "S": 3, "O": 12}, 0),
    ("OH-", {"O": 1, "H": 1}, -1),
    ("Na+", {"Na": 1}, 1),
    ("SO4-2", {"S": 1, "O": 4}, -2),
    ("Fe+++", {"Fe": 1}, 3),
    ("Fe+3", {"Fe": 1}, 3),
    ("O3-", {"O": 3}, -1),                 # ozonide: the count belongs to O
    ("e-", {"e": 1}, -1),
    ("C1.5H3", {"C": 1.5, "H": 3}, 0),
    ("CuSO4·5H2O", {"Cu": 1, "S": 1, "O": 9, "H": 10}, 0),
    ("(CH3)2O", {"C": 2, "H": 6, "O": 1}, 0),
    ("K4[Fe(CN)6]", {"K": 4, "Fe": 1, "C": 6, "N": 6}, 0),
])
def test_parse_formula(formula, elements, charge):
    f = parse_formula(formula)
    assert f.elements == {k: float(v) for k, v in elements.items()}
    assert f.charge == charge


@pytest.mark.parametrize("bad,message", [
    ("H2O", "found 'H2O': no (state) suffix — fix: write the key as FORMULA(state), e.g. H2O(g), C(cr,graphite)"),
    ("H2O(s)", "found 'H2O(s)': state 's' is not one of g, l, cr, aq — fix: use IUPAC state notation: g, l, cr or aq"),
])
def test_bad_keys(bad, message):
    with pytest.raises(FormulaError) as e:
        parse_key(bad)
    assert str(e.value) == message


@pytest.mark.parametrize("bad,why", [
    ("Xx2", "unknown element symbol 'Xx'"),
    ("Ca(OH", "unbalanced parenthesis"),
    ("H2O)", "unbalanced parenthesis"),
    ("2H", "a count with nothing before it"),
    ("H+-", "mixed charge signs"),
    ("CuSO4·", "an empty part around '·'"),
])
def test_bad_formulas(bad, why):
    with pytest.raises(FormulaError) as e:
        parse_formula(bad)
    assert e.value.why == why


def test_unknown_element_is_an_error_not_a_guess():
    """Case matters: CO is carbon monoxide, Co cobalt; 'CL' is no element in a key."""
    assert parse_formula("CO").elements == {"C": 1.0, "O": 1.0}
    assert parse_formula("Co").elements == {"Co": 1.0}
    with pytest.raises(FormulaError):
        parse_formula("CL2")


@pytest.mark.parametrize("name,elements,charge,expected", [
    ("HE", {"He": 1}, 0, "He"),
    ("CL2", {"Cl": 2}, 0, "Cl2"),
    ("CO", {"C": 1, "O": 1}, 0, "CO"),
    ("CO", {"Co": 1}, 0, "Co"),
    ("NA+", {"Na": 1}, 1, "Na+"),
    ("ALCL3", {"Al": 1, "Cl": 3}, 0, "AlCl3"),
    ("AIR", {"N": 1.56, "O": 0.42}, 0, None),
])
def test_recase(name, elements, charge, expected):
    assert recase_name(name, elements, charge) == expected


def test_hill_and_composition():
    assert hill_formula({"O": 2, "C": 1}) == "CO2"
    assert hill_formula({"H": 2, "O": 1}) == "H2O"
    assert hill_formula({"O": 1, "H": 1}, -1) == "HO-"
    assert composition_key({"C": 1, "O": 2}) == composition_key({"O": 2, "C": 1})


# Molar masses against independent references. chemicals (Bell et al., "chemicals: Chemical
# properties in Python", 2016-2024) uses the IUPAC 2013 conventional weights (H 1.00794,
# C 12.0107); periodictable and thermoledger the abridged ones (H 1.008, C 12.011). The
# difference per atom is below 0.005 g/mol for the elements whose standard atomic weight is an
# interval, hence the tolerance of the composition.molar-mass check (checks.md): 0.01 g/mol +
# 0.01 g/mol per atom of such an element.
_INTERVAL = {"H", "Li", "B", "C", "N", "O", "Mg", "Si", "S", "Cl", "Ar", "Br", "Tl", "Pb"}


@pytest.mark.parametrize("formula", ["H2O", "CO2", "CH4", "Ca(OH)2", "C10H22", "Al2O3", "NaCl",
                                     "UF6", "Fe2(SO4)3", "CuSO4·5H2O"])
def test_molar_mass_against_chemicals(formula):
    from chemicals.elements import molecular_weight, nested_formula_parser

    f = parse_formula(formula)
    ref = molecular_weight(nested_formula_parser(formula.replace("·5H2O", "(H2O)5")))
    tol = 0.01 + 0.01 * sum(n for el, n in f.elements.items() if el in _INTERVAL)
    assert f.molar_mass_g_mol == pytest.approx(ref, abs=tol)


@pytest.mark.parametrize("formula,expected", [
    # IUPAC abridged standard atomic weights (CIAAW 2021): H 1.008, O 15.999, C 12.011,
    # Na 22.990, Cl 35.45 — the sums written out by hand.
    ("H2O", 2 * 1.008 + 15.999),
    ("CO2", 12.011 + 2 * 15.999),
    ("NaCl", 22.98976928 + 35.45),
])
def test_molar_mass_by_hand(formula, expected):
    assert parse_formula(formula).molar_mass_g_mol == pytest.approx(expected, abs=1e-3)


def test_ion_molar_mass_counts_electrons():
    """Electron molar mass 5.48579909e-4 g/mol (CODATA 2018)."""
    import scipy.constants as sc

    me = sc.m_e * sc.N_A * 1e3
    assert parse_formula("Na+").molar_mass_g_mol == pytest.approx(
        parse_formula("Na").molar_mass_g_mol - me, abs=1e-9)
    assert parse_formula("OH-").molar_mass_g_mol == pytest.approx(
        parse_formula("OH").molar_mass_g_mol + me, abs=1e-9)
