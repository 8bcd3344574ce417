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


# ------------------------------------------------------------------ batch parsers
# parse_formulas / parse_keys must equal the one-at-a-time parsers exactly (same element
# counts, same floats of n_atoms and molar mass, same failures): the batch parsers feed the
# same curated columns.

from hypothesis import given, settings, strategies as st  # noqa: E402

from pipeline.formula import parse_formulas, parse_keys  # noqa: E402

_SYMBOLS = ["H", "He", "C", "N", "O", "Na", "Cl", "Co", "Fe", "S", "U", "Xx", "L", "e", "E"]
_piece = st.one_of(
    st.tuples(st.sampled_from(_SYMBOLS), st.sampled_from(["", "0", "1", "2", "12", "0.5", "1.25", "007"])
              ).map("".join),
    st.sampled_from(["(", ")", "(OH)2", "·5H2O", "*2", " ", "[", "]"]))
_charge = st.sampled_from(["", "+", "-", "++", "--", "+2", "-3", "+-", "++2", "+0", "-12"])
_formula_text = st.builds(lambda parts, z: "".join(parts) + z, st.lists(_piece, max_size=5), _charge)

_CASES = ["H2O", "CO", "Co", "CH3CH2OH", "SO4-2", "OH-", "Fe+++", "Na+", "e-", "Ca(OH)2", "C1.5H3",
          "CuSO4·5H2O", "Xx2", "C0", "C0H2", "CL2", " H2O", "Fe+3", "O3-", "C2-12", "H++2", "C0.1H2",
          "C31H50N2O", "HHe2H3", "", "+", "K4[Fe(CN)6]"]


def _one(text):
    try:
        f = parse_formula(text)
    except FormulaError:
        return None
    return f.charge, f.elements, f.n_atoms, f.molar_mass_g_mol


def _batch_rows(texts):
    b = parse_formulas(texts)
    n_atoms, mass = b.n_atoms(), b.molar_mass_g_mol()
    return [(int(b.charge[i]), b.elements(i), float(n_atoms[i]), float(mass[i])) if b.ok[i] else None
            for i in range(len(texts))]


def test_parse_formulas_equals_parse_formula_on_known_cases():
    assert _batch_rows(_CASES) == [_one(t) for t in _CASES]


def test_parse_formulas_reports_failures():
    b = parse_formulas(["H2O", "Xx2", None, "CL2"])
    assert b.ok.tolist() == [True, False, False, False]


@settings(max_examples=300, deadline=None)
@given(st.lists(_formula_text, min_size=1, max_size=12))
def test_parse_formulas_equals_parse_formula(texts):
    assert _batch_rows(texts) == [_one(t) for t in texts]


def _key_one(text):
    try:
        sk = parse_key(text)
    except FormulaError:
        return (False, None, None, None)
    return (True, sk.formula, sk.state, sk.label)


_key_text = st.builds(lambda pre, f, st_, lab, post: f"{pre}{f}({st_}{lab}){post}",
                      st.sampled_from(["", " ", "\u00a0"]), _formula_text,
                      st.sampled_from(["g", "l", "cr", "aq", "s", "G", ""]),
                      st.sampled_from(["", ",graphite", ", a ", ",", ",(x)", ",\u00a0b", ", "]),
                      st.sampled_from(["", " ", "x", "\t"]))


@settings(max_examples=300, deadline=None)
@given(st.lists(_key_text, min_size=1, max_size=12))
def test_parse_keys_equals_parse_key(texts):
    ok, formula, state, label = parse_keys(texts)
    assert [(bool(o), f, s, lb) for o, f, s, lb in zip(ok, formula, state, label)] == \
        [_key_one(t) for t in texts]


def test_parse_formulas_of_long_counts_and_arrow_input():
    """Counts of up to 15 digits are summed exactly from their digits; longer ones, and an
    Arrow array that is a slice of a larger one (offsets not starting at 0), give what
    parse_formula gives."""
    import pyarrow as pa

    texts = ["C123456789012345H2", "C1234567890123456", "H999999999999999O", "C2H6O-2", "Fe+12345",
             "HHe2H3", "OH-", "N2", "Xx", "C0"]
    assert _batch_rows(texts) == [_one(t) for t in texts]
    arr = pa.array(["junk", "ignored("] + texts + ["tail"]).slice(2, len(texts))
    b = parse_formulas(arr)
    n_atoms, mass = b.n_atoms(), b.molar_mass_g_mol()
    got = [(int(b.charge[i]), b.elements(i), float(n_atoms[i]), float(mass[i])) if b.ok[i] else None
           for i in range(len(texts))]
    assert got == [_one(t) for t in texts]


@settings(max_examples=200, deadline=None)
@given(st.lists(_key_text, min_size=1, max_size=12))
def test_parse_keys_of_arrow_strings_equals_parse_key(texts):
    import pyarrow as pa

    ok, formula, state, label = parse_keys(pa.array(texts, pa.large_string()))
    assert [(bool(o), f, s, lb) for o, f, s, lb in zip(ok, formula, state, label)] == \
        [_key_one(t) for t in texts]


def test_parse_keys_keeps_a_blank_label_as_parse_key_does():
    ok, formula, state, label = parse_keys(["X(g, )", "X(g,a)"])
    assert label == [parse_key("X(g, )").label, "a"] and ok.all()
