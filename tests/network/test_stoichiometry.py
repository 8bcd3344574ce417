"""The reactions' stoichiometry parsed once per context, against ``json.loads`` of each text.

Reference: the JSON grammar of RFC 8259 as implemented by Python's ``json`` module (the
parser every earlier version of the checks used, text by text).
"""
from __future__ import annotations

import json

import numpy as np
import pandas as pd
import pytest

from pipeline.checks import reactions as R
from pipeline.constants import T_REF
from pipeline.properties import element_references
from tests.network.helpers import const_cp, network_context, reactions


def _by_json(texts):
    """(row, species, ν) of every term, zeros included, in text order."""
    return [(i, k, float(v)) for i, t in enumerate(texts) if isinstance(t, str) for k, v in json.loads(t).items()]


def _parsed(texts):
    st = R._parse_stoichiometry(np.asarray(texts, dtype=object))
    return [(int(r), st.species[c], float(v)) for r, c, v in zip(st.row, st.code, st.nu)]


FLAT = ['{"C(cr,graphite)": 9.0, "C2H6(g)": 1.0, "H2(g)": -3}', None, "{}", '{"O2(g)": -0.5, "é(l)": 1e-3}',
        '{"X, the first (cr)": 2, "Y": 0}']
OTHER = [['{"a":1,"b":2}'], ['{"a": 1,"b": 2}'], ['{"a": 1, "a": 2}'], ['{"\\u00e9": 1}'], ['{"a": true}'],
         ['{ "a": 1 }'], ['{"a": 1, "b": "2"}'], ['{"a\\"b": 1}']]


def test_the_flat_form_takes_the_fast_path_and_agrees_with_json():
    assert R._parse_flat_json(np.asarray(FLAT, dtype=object)) is not None
    assert _parsed(FLAT) == _by_json(FLAT)


@pytest.mark.parametrize("texts", OTHER)
def test_any_other_json_agrees_with_json(texts):
    """Other spacing, repeated keys (the last value wins), escapes, booleans, numbers as
    strings: not the flat form, parsed by ``json`` with the same result as before."""
    assert R._parse_flat_json(np.asarray(texts, dtype=object)) is None
    assert _parsed(texts) == _by_json(texts)


def test_invalid_json_raises_as_json_does():
    with pytest.raises(json.JSONDecodeError):
        R._parse_stoichiometry(np.asarray(['{"a": 1}', '{"a": 1'], dtype=object))


def test_select_drops_zeros_and_keeps_the_order():
    st = R._parse_stoichiometry(np.asarray(FLAT, dtype=object))
    pos, code, nu = st.select(np.array([0, 3, 4]))
    got = [(int(p), st.species[c], float(v)) for p, c, v in zip(pos, code, nu)]
    assert got == [(0, "C(cr,graphite)", 9.0), (0, "C2H6(g)", 1.0), (0, "H2(g)", -3.0),
                   (1, "O2(g)", -0.5), (1, "é(l)", 1e-3), (2, "X, the first (cr)", 2.0)]
    pos, code, nu = st.select(np.array([4]), drop_zero=False)
    assert [st.species[c] for c in code] == ["X, the first (cr)", "Y"]
    assert st.as_dict(4) == {"X, the first (cr)": 2.0, "Y": 0.0}


def test_parsed_once_per_context_and_again_for_new_reactions():
    rows = [("a", {"CH4(g)": 1, "C(cr,graphite)": -1, "H2(g)": -2}, "drh", T_REF, -74.6e3, 0.4e3)]
    ctx = network_context(rx=reactions(rows))
    first = R.stoichiometry(ctx)
    assert R.stoichiometry(ctx) is first
    ctx.reactions = reactions(rows + [("b", {"C2H6(g)": 1, "C(cr,graphite)": -2, "H2(g)": -3}, "drh", T_REF,
                                       -84.0e3, 0.5e3)])
    again = R.stoichiometry(ctx)
    assert again is not first and again.indptr.tolist() == [0, 3, 6]


def test_reference_species_equal_element_references_on_every_species():
    """The subset given to element_references (at most one element) gives its full answer:
    reference elements declared or by the gaseous-molecule rule, not ions or compounds."""
    rows = [("a", {"CH4(g)": 1, "C(cr,graphite)": -1, "H2(g)": -2}, "drh", T_REF, -74.6e3, 0.4e3),
            ("b", {"Cl-(aq)": 1, "Cl2(g)": -0.5, "e-(g)": -1}, "drh", T_REF, -167.2e3, 0.4e3),
            ("c", {"O3(g)": 1, "O2(g)": -1.5}, "drh", T_REF, 142.7e3, 1.0e3)]
    ctx = network_context(poly=[const_cp("N2(g)", 0.0, 191.6, 29.1)], rx=reactions(rows))
    expected = set(element_references(ctx.species)["species"])
    assert {"C(cr,graphite)", "H2(g)", "O2(g)"} <= expected and "O3(g)" not in expected
    assert R.reference_species(ctx) == expected


def test_each_distinct_record_and_temperature_is_evaluated_once():
    """_evaluate on repeated pairs gives what evaluating every pair gives."""
    ctx = network_context(poly=[const_cp("CH4(g)", -74.6e3, 186.3, 35.7), const_cp("O2(g)", 0.0, 205.1, 29.4)])
    rid = np.array(["poly/CH4(g)", None, "poly/O2(g)", "poly/CH4(g)", "nope", "poly/CH4(g)"], dtype=object)
    t = np.array([T_REF, T_REF, 500.0, 500.0, 400.0, T_REF])
    h, g, s, hmh = R._evaluate(ctx, rid, t)
    ok = np.array([True, False, True, True, False, True])
    v = ctx.functions.evaluate(rid[ok].astype(str), t[ok])
    for got, want in ((h, v.h), (g, v.g), (s, v.s), (hmh, v.h_minus_h298)):
        np.testing.assert_array_equal(got[ok], want)
        assert np.isnan(got[~ok]).all()
    assert h[0] == pytest.approx(-74.6e3) and h[3] == pytest.approx(-74.6e3 + 35.7 * (500.0 - T_REF))
    assert pd.isna(R._evaluate(ctx, rid, t, which=1)[1])
