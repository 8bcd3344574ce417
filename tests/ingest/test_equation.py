"""Reaction equations: coefficients, keys with commas and charges, element and charge balance."""
from __future__ import annotations

import pytest

from pipeline.equation import EquationError, parse_equation


@pytest.mark.parametrize("text,stoich", [
    ("CH4(g) + 2 O2(g) = CO2(g) + 2 H2O(l)", {"CH4(g)": -1, "O2(g)": -2, "CO2(g)": 1, "H2O(l)": 2}),
    ("H2(g) + 1/2 O2(g) = H2O(l)", {"H2(g)": -1, "O2(g)": -0.5, "H2O(l)": 1}),
    ("0.5 N2(g) + 1.5 H2(g) = NH3(g)", {"N2(g)": -0.5, "H2(g)": -1.5, "NH3(g)": 1}),
    ("3/2 H2(g)+1/2 N2(g)=NH3(g)", {"H2(g)": -1.5, "N2(g)": -0.5, "NH3(g)": 1}),
    ("C(cr,graphite) + O2(g) = CO2(g)", {"C(cr,graphite)": -1, "O2(g)": -1, "CO2(g)": 1}),
    ("C(cr,graphite) = C(cr,diamond)", {"C(cr,graphite)": -1, "C(cr,diamond)": 1}),
    ("H2O(cr) = H2O(l)", {"H2O(cr)": -1, "H2O(l)": 1}),
    ("Na+(aq) + Cl-(aq) = NaCl(cr)", {"Na+(aq)": -1, "Cl-(aq)": -1, "NaCl(cr)": 1}),
    ("Fe+3(aq) + 3 OH-(aq) = Fe(OH)3(cr)", {"Fe+3(aq)": -1, "OH-(aq)": -3, "Fe(OH)3(cr)": 1}),
    ("Ca(OH)+(aq) + OH-(aq) = Ca(OH)2(cr)", {"Ca(OH)+(aq)": -1, "OH-(aq)": -1, "Ca(OH)2(cr)": 1}),
    ("Na(g) = Na+(g) + e-(g)", {"Na(g)": -1, "Na+(g)": 1, "e-(g)": 1}),
    ("2 H2O(g) = 2 H2(g) + O2(g)", {"H2O(g)": -2, "H2(g)": 2, "O2(g)": 1}),
    ("H2O(l) + H2O(g) = 2 H2O(g)", {"H2O(l)": -1, "H2O(g)": 1}),     # netted
    ("CuSO4·5H2O(cr) = CuSO4(cr) + 5 H2O(g)", {"CuSO4·5H2O(cr)": -1, "CuSO4(cr)": 1, "H2O(g)": 5}),
])
def test_parse(text, stoich):
    assert parse_equation(text).stoich == {k: float(v) for k, v in stoich.items()}


def test_fractions_balance_exactly():
    """1/3 is not a finite decimal: exact fractions keep the balance exact."""
    r = parse_equation("1/3 O3(g) = 1/2 O2(g)")
    assert r.stoich["O3(g)"] == pytest.approx(-1 / 3, abs=1e-15)


@pytest.mark.parametrize("text,message", [
    ("CH4(g) + O2(g) = CO2(g) + 2 H2O(l)",
     "equation does not balance (O: left 2, right 4) — fix: correct the coefficients or the formulas"),
    ("H2(g) + O2(g) = H2O(l)",
     "equation does not balance (O: left 2, right 1) — fix: correct the coefficients or the formulas"),
    ("Na(cr) = Na+(aq)",
     "equation does not balance (charge: left 0, right +1) — fix: correct the coefficients or the formulas"),
    ("N2(g) = N(g)",
     "equation does not balance (N: left 2, right 1) — fix: correct the coefficients or the formulas"),
    ("H2(g) = H2(g)", "every species cancels: the reaction is empty — fix: write a reaction that changes something"),
])
def test_imbalance_spelled_out(text, message):
    with pytest.raises(EquationError) as e:
        parse_equation(text)
    assert str(e.value) == message


@pytest.mark.parametrize("text,needle", [
    ("CH4(g) + 2 O2(g) -> CO2(g) + 2 H2O(l)", "0 '=' signs"),
    ("A = B = C", "2 '=' signs"),
    ("H2(g) + = H2(g)", "an empty term on the left side"),
    ("H2 = H2(g)", "species 'H2' on the left side: no (state) suffix"),
    ("Xy(g) = Xy(l)", "unknown element symbol 'Xy'"),
    ("1/0 H2(g) = H2(g)", "divides by zero"),
    ("0 H2(g) + H2(g) = H2(g)", "is not positive"),
    ("", "an empty equation"),
    ("Ca(OH(aq) = Ca(aq)", "unbalanced"),
])
def test_syntax_errors(text, needle):
    with pytest.raises(EquationError) as e:
        parse_equation(text)
    assert needle in str(e.value)
