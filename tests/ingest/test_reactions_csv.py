"""reactions-csv reader: units per row / header / manifest, balance, uncertainty, series."""
from __future__ import annotations

import json

import pytest

from pipeline.errors import InputError
from pipeline.ingest import reactions_csv

from .conftest import DATA, assert_accounted, source
from .writers import csv_text

HEADER = ["id", "equation", "quantity", "t_k", "value", "unit", "uncertainty", "method"]


@pytest.fixture(scope="module")
def result():
    return reactions_csv.read(DATA / "reactions.csv", source("reactions-csv"), "lit/reactions.csv")


def test_values_in_si(result):
    """kcal = 4184 J (thermochemical calorie, NIST SP 811, 2008)."""
    rx = result.reactions.set_index("reaction_id")
    assert rx.loc["r1", ["value", "uncertainty", "unit"]].tolist() == [pytest.approx(-285830.0), pytest.approx(40.0), "J/mol"]
    assert rx.loc["r2", "value"] == pytest.approx(-212.8 * 4184.0)
    assert rx.loc["r2", "uncertainty"] == pytest.approx(0.07 * 4184.0)
    assert rx.loc["r3", "value"] == -393510.0
    assert rx.loc["r4", ["value", "uncertainty", "unit", "series"]].tolist() == [-10.5, 0.1, "1", "n2diss"]


def test_stoichiometry_products_positive(result):
    st = json.loads(result.reactions.set_index("reaction_id").loc["r2", "stoich_json"])
    assert st == {"CH4(g)": -1.0, "O2(g)": -2.0, "CO2(g)": 1.0, "H2O(l)": 2.0}


def test_rejections(result):
    assert_accounted(result, "reactions-csv")
    rej = result.rejected.set_index("line")["reason"]
    assert rej[7] == ("equation 'CH4(g) + O2(g) = CO2(g) + 2 H2O(l)': equation does not balance "
                      "(O: left 2, right 4) — fix: correct the coefficients or the formulas")
    assert rej[8] == ("equation 'Na(cr) = Na+(aq)': equation does not balance (charge: left 0, right +1)"
                      " — fix: correct the coefficients or the formulas")
    assert rej[9].startswith("no uncertainty: a measurement without a standard uncertainty cannot be weighed")
    assert rej[11].startswith("unit of value: found unit 'furlong'")
    assert list(result.reactions["reaction_id"]) == ["r1", "r2", "r3", "r4", "r5", "r9"]


def test_header_bracket_and_manifest(tmp_path):
    p = tmp_path / "r.csv"
    p.write_text(csv_text(["id", "equation", "quantity", "t_k", "value [kcal/mol]", "uncertainty"],
                          [["a", "H2(g) = 2 H(g)", "drh", 298.15, 104.2, 0.1],
                           ["b", "H2(g) = 2 H(g)", "log_k", 3000, -1.2, 0.05]]))
    r = reactions_csv.read(p, source("reactions-csv", energy_unit="kJ"), "r.csv")
    rx = r.reactions.set_index("reaction_id")
    assert rx.loc["a", "value"] == pytest.approx(104.2 * 4184) and rx.loc["a", "uncertainty"] == pytest.approx(418.4)
    assert rx.loc["b", "value"] == -1.2            # log_k ignores energy units
    p.write_text(csv_text(["id", "equation", "quantity", "t_k", "value", "uncertainty"],
                          [["a", "H2(g) = 2 H(g)", "drh", 298.15, 436.0, 0.1]]))
    r = reactions_csv.read(p, source("reactions-csv", energy_unit="kJ"), "r.csv")
    assert r.reactions["value"].iloc[0] == pytest.approx(436000.0)


def test_row_unit_wins(tmp_path):
    p = tmp_path / "r.csv"
    p.write_text(csv_text(["id", "equation", "quantity", "t_k", "value [kJ/mol]", "unit", "uncertainty"],
                          [["a", "H2(g) = 2 H(g)", "drh", 298.15, 104.2, "kcal/mol", 0.1],
                           ["b", "H2(g) = 2 H(g)", "drh", 298.15, 436.0, "", 0.1]]))
    r = reactions_csv.read(p, source("reactions-csv"), "r.csv")
    assert list(r.reactions["value"]) == [pytest.approx(104.2 * 4184), pytest.approx(436000.0)]


def test_energy_without_any_unit(tmp_path):
    p = tmp_path / "r.csv"
    p.write_text(csv_text(["id", "equation", "quantity", "t_k", "value", "uncertainty"],
                          [["b", "H2(g) = 2 H(g)", "log_k", 3000, -1.2, 0.05],
                           ["a", "H2(g) = 2 H(g)", "drh", 298.15, 436.0, 0.1]]))
    with pytest.raises(InputError) as e:
        reactions_csv.read(p, source("reactions-csv", sid="lit"), "r.csv")
    assert e.value.line == 3 and "energy_unit = \"kJ\" for source 'lit'" in str(e.value)
    # with a unit column, a row whose cell is empty is rejected alone
    p.write_text(csv_text(HEADER, [["a", "H2(g) = 2 H(g)", "drh", 298.15, 436.0, "", 0.1, ""],
                                   ["b", "H2(g) = 2 H(g)", "drh", 298.15, 436.0, "kJ/mol", 0.1, ""]]))
    r = reactions_csv.read(p, source("reactions-csv"), "r.csv")
    assert list(r.reactions["reaction_id"]) == ["b"]
    assert r.rejected["reason"].iloc[0].startswith("a value without a unit")


def test_log_k_with_a_unit_is_rejected(tmp_path):
    p = tmp_path / "r.csv"
    p.write_text(csv_text(HEADER, [["a", "H2(g) = 2 H(g)", "log_k", 3000, -1.2, "kJ/mol", 0.1, ""]]))
    r = reactions_csv.read(p, source("reactions-csv"), "r.csv")
    assert r.rejected["reason"].iloc[0] == ("unit 'kJ/mol' on a log_k row: log K is dimensionless — fix: "
                                            "leave the unit cell empty")


def test_duplicate_id_and_bad_quantity(tmp_path):
    p = tmp_path / "r.csv"
    p.write_text(csv_text(HEADER, [["a", "H2(g) = 2 H(g)", "drh", 298.15, 436, "kJ/mol", 0.1, ""],
                                   ["a", "H2(g) = 2 H(g)", "drh", 298.15, 436, "kJ/mol", 0.1, ""],
                                   ["c", "H2(g) = 2 H(g)", "dH", 298.15, 436, "kJ/mol", 0.1, ""]]))
    r = reactions_csv.read(p, source("reactions-csv"), "r.csv")
    assert list(r.reactions["reaction_id"]) == ["a"]
    reasons = list(r.rejected["reason"])
    assert reasons[0].startswith("id 'a' used again (first on line 2)")
    assert reasons[1].startswith("column 'quantity' = 'dH': expected drh, drg or log_k")
    assert_accounted(r, "reactions-csv")


def test_temperature_must_be_kelvin(tmp_path):
    p = tmp_path / "r.csv"
    p.write_text(csv_text(["id", "equation", "quantity", "t_k [degC]", "value", "uncertainty"],
                          [["a", "H2(g) = 2 H(g)", "log_k", 25, 1, 0.1]]))
    with pytest.raises(InputError, match="temperature column"):
        reactions_csv.read(p, source("reactions-csv"), "r.csv")


def test_round_trip(tmp_path):
    import numpy as np

    rng = np.random.default_rng(2)
    vals = rng.normal(0, 3e5, 6)
    unc = rng.uniform(1, 500, 6)
    rows = [[f"x{i}", "CH4(g) + 2 O2(g) = CO2(g) + 2 H2O(g)", "drh", 298.15, float(v), "J/mol", float(u), "s1", "m"]
            for i, (v, u) in enumerate(zip(vals, unc))]
    p = tmp_path / "r.csv"
    p.write_text(csv_text(HEADER + ["series"], [r[:6] + [r[6], r[8], r[7]] for r in rows]))
    r = reactions_csv.read(p, source("reactions-csv"), "r.csv")
    np.testing.assert_array_equal(r.reactions["value"].to_numpy(float), vals)
    np.testing.assert_array_equal(r.reactions["uncertainty"].to_numpy(float), unc)
    assert (r.reactions["series"] == "s1").all() and (r.reactions["method"] == "m").all()


# ------------------------------------------------------------------ the bulk equation parser
# parse_equations reads plain equations with Arrow kernels and numpy; every equation must
# come out exactly as pipeline.equation.parse_equation gives it (the same JSON text, the
# same reason), whichever path it took.

from hypothesis import given, settings, strategies as st  # noqa: E402

_KEYS = ["H2(g)", "O2(g)", "H2O(g)", "H2O(l)", "C(cr,graphite)", "CO2(g)", "CH4(g)", "N2(g)", "NH3(g)",
         "Na+(aq)", "Cl-(aq)", "NaCl(cr)", "e-(g)", "Fe(OH)2(cr)", "Xx(g)", "H2O(G)", "O(g,", "H2O", "2H(g)",
         ".H(g)", "H\"(g)", "H2O(aq,x y)", "C(cr,a)", "Cé(g)", "H2O\t(g)", "H(g)"]
_COEFS = ["", "", "2 ", "0.5 ", "1.5 ", "3 ", "1/2 ", "0 ", "2  ", "2.", "007 ", "1e2 ", ".5 ", "1.0 "]
_term = st.builds(lambda c, k: c + k, st.sampled_from(_COEFS), st.sampled_from(_KEYS))
_side = st.lists(_term, min_size=1, max_size=4).map(lambda ts: " + ".join(ts))
_sep = st.sampled_from([" = ", "=", " = ", " =  ", " == ", " + = "])
_equation = st.one_of(
    st.builds(lambda a, s, b: a + s + b, _side, _sep, _side),
    st.sampled_from(["H2(g) + 0.5 O2(g) = H2O(g)", "2 H2(g) + O2(g) = 2 H2O(g)", "C(cr,graphite) + O2(g) = CO2(g)",
                     "CH4(g) + 2 O2(g) = CO2(g) + 2 H2O(l)", "N2(g) + 3 H2(g) = 2 NH3(g)", "", "   ",
                     "H2(g) + H2(g) = H4(g)", "NaCl(cr) = Na+(aq) + Cl-(aq)", "H2O(l) = H2O(g)"]))


def _one_by_one(equations):
    return [reactions_csv._parse.__wrapped__(e) for e in equations]


@settings(max_examples=300, deadline=None)
@given(st.lists(_equation, min_size=1, max_size=20))
def test_parse_equations_equals_parse_equation(equations):
    assert reactions_csv.parse_equations(equations) == _one_by_one(equations)


def test_parse_equations_of_a_string_column_and_the_bulk_path_is_taken():
    """A pandas string column (how the reader passes it) gives the same; the plain balanced
    equations are read by the bulk path, the others one at a time."""
    import pandas as pd

    eqs = ["2 H2(g) + O2(g) = 2 H2O(g)", "C(cr,graphite) + O2(g) = CO2(g)", "1/2 O2(g) + H2(g) = H2O(g)",
           "H2(g) = H2O(g)", None, "Na+(aq) + Cl-(aq) = NaCl(cr)"]
    col = pd.Series(eqs, dtype="str")
    stoich, reason, bulk, _ = reactions_csv._equations(col)
    assert list(zip(stoich.tolist(), reason.tolist())) == _one_by_one(col.tolist())
    assert bulk.tolist() == [True, True, False, False, False, False]
    assert json.loads(stoich[0]) == {"H2(g)": -2.0, "O2(g)": -1.0, "H2O(g)": 2.0}


def test_formula_columns_cover_every_species_of_the_file(tmp_path):
    """The reader hands on, for every species of its accepted reactions (bulk path or not),
    exactly the columns pipeline.ingest.resolve._formula_columns gives."""
    from pipeline.formula import parse_key
    from pipeline.ingest.resolve import _formula_columns

    result = reactions_csv.read(DATA / "reactions.csv", source("reactions-csv"), "r.csv")
    species = {k for s in result.reactions["stoich_json"] for k in json.loads(s)}
    formulas = {parse_key(k).formula for k in species}
    assert formulas and formulas <= set(result.formula_columns)
    for f in formulas:
        assert result.formula_columns[f] == _formula_columns.__wrapped__(f)
