"""The standard grid and formation values (pipeline.properties)."""
from __future__ import annotations

import json

import numpy as np
import pandas as pd
import pytest

from pipeline.constants import LN10, R, T_REF
from pipeline.properties import element_references, formation, standard_grid


def test_standard_grid_rule():
    """298.15 K (when the range reaches it, 5 K allowance for records starting at 300 K),
    then every 100 K from max(100 K, lower bound rounded up) to the upper bound."""
    owner, t = standard_grid([200.0, 300.0, 50.0, 1000.0, 250.0], [1000.0, 650.0, 320.0, 6000.0, 298.0])
    by = {i: t[owner == i].tolist() for i in range(5)}
    assert by[0] == [200.0, T_REF, 300.0, 400.0, 500.0, 600.0, 700.0, 800.0, 900.0, 1000.0]
    assert by[1] == [T_REF, 300.0, 400.0, 500.0, 600.0]
    assert by[2] == [100.0, 200.0, T_REF, 300.0]
    assert by[3] == [float(x) for x in range(1000, 6001, 100)]
    assert by[4] == []  # 250–298 K holds no multiple of 100 K and does not reach 298.15 K


def _species(rows):
    return pd.DataFrame([dict(species=k, elements_json=json.dumps(e), charge=z, reference_element=ref)
                         for k, e, z, ref in rows])


def test_formation_uses_half_o2_per_o_and_the_stable_reference():
    """ΔfH = H − Σ ν_el H_ref (ν per atom of the reference formula: ½ O2 per O); with two
    declared references of one element (a solid and a liquid), the one with the lower G
    per atom at each T is used (JANAF convention, Chase 1998)."""
    sp = _species([("O2(g)", {"O": 2}, 0, True), ("Fe(cr)", {"Fe": 1}, 0, True), ("Fe(l)", {"Fe": 1}, 0, True),
                   ("FeO(cr)", {"Fe": 1, "O": 1}, 0, False)])
    refs = element_references(sp)
    assert set(zip(refs["element"], refs["species"], refs["atoms"])) == {
        ("O", "O2(g)", 2.0), ("Fe", "Fe(cr)", 1.0), ("Fe", "Fe(l)", 1.0)}
    # model reference functions: G(cr) < G(l) below 1800 K, above it the liquid is lower
    def ref_hg(keys, t):
        keys, t = np.asarray(keys), np.asarray(t, float)
        h = np.select([keys == "O2(g)", keys == "Fe(cr)", keys == "Fe(l)"], [100.0 * t, 10.0 * t, 10.0 * t + 14000.0])
        s = np.select([keys == "O2(g)", keys == "Fe(cr)", keys == "Fe(l)"], [200.0, 30.0, 30.0 + 14000.0 / 1800.0])
        return h, h - t * s
    rows = pd.DataFrame({"species": ["FeO(cr)", "FeO(cr)"], "t_k": [1000.0, 2000.0],
                         "h_j_mol": [-250000.0, -240000.0], "g_j_mol": [-300000.0, -350000.0]})
    f = formation(rows, sp, refs, ref_hg)
    h_fe = np.array([10.0 * 1000, 10.0 * 2000 + 14000.0])           # solid at 1000 K, liquid at 2000 K
    g_fe = np.array([10.0 * 1000 - 1000 * 30.0, 10.0 * 2000 + 14000.0 - 2000 * (30.0 + 14000 / 1800)])
    h_o = 0.5 * 100.0 * rows["t_k"].to_numpy()
    g_o = 0.5 * (100.0 - 200.0) * rows["t_k"].to_numpy()
    np.testing.assert_allclose(f["dfh_j_mol"], rows["h_j_mol"] - h_fe - h_o, rtol=1e-12)
    np.testing.assert_allclose(f["dfg_j_mol"], rows["g_j_mol"] - g_fe - g_o, rtol=1e-12)
    np.testing.assert_allclose(f["log_kf"], -f["dfg_j_mol"] / (R * rows["t_k"] * LN10), rtol=1e-12)


def test_formation_needs_every_element_and_the_electron_for_ions():
    sp = _species([("H2(g)", {"H": 2}, 0, True), ("OH-(g)", {"O": 1, "H": 1}, -1, False),
                   ("H+(g)", {"H": 1}, 1, False), ("e-(g)", {}, -1, False)])
    refs = element_references(sp)
    assert ("e", "e-(g)", 1.0) in set(zip(refs["element"], refs["species"], refs["atoms"]))
    ref_hg = lambda keys, t: (np.full(len(keys), 0.0), np.full(len(keys), -1000.0))
    rows = pd.DataFrame({"species": ["OH-(g)", "H+(g)"], "t_k": [T_REF, T_REF], "h_j_mol": [-140000.0, 1536000.0],
                         "g_j_mol": [-150000.0, 1500000.0]})
    f = formation(rows, sp, refs, ref_hg)
    assert np.isnan(f["dfh_j_mol"].iloc[0])                          # no reference for O
    # H+ : ½ H2 − e-  →  ΔfG = G − (½(−1000)·2/2 ... per atom: G_H2/2 = −500) + (−1000) for −1 electron
    assert f["dfg_j_mol"].iloc[1] == pytest.approx(1500000.0 - (-500.0) - (-1.0) * (-1000.0))


def test_standard_grid_equals_its_definition_on_many_ranges():
    """The grid built by position equals the definition written out range by range: the
    multiples of 100 K from max(100 K, lower bound rounded up) to the upper bound, plus
    298.15 K when the range reaches it (5 K allowance), in ascending order."""
    rng = np.random.default_rng(7)
    lo = np.concatenate([rng.choice([0.0, 50.0, 100.0, 200.0, 250.0, 293.15, 295.0, 298.15, 300.0, 303.15, 1000.0],
                                    400), rng.uniform(0.0, 2000.0, 400)])
    hi = lo + np.concatenate([rng.choice([0.0, 0.01, 5.0, 48.0, 100.0, 300.0, 5000.0], 400), rng.uniform(0, 3000, 400)])
    owner, t = standard_grid(lo, hi)
    for i in range(len(lo)):
        start = max(100.0, np.ceil(lo[i] / 100.0 - 1e-9) * 100.0)
        want = [x for x in np.arange(start, hi[i] + 1e-6, 100.0) if x <= hi[i] + 1e-9]
        if lo[i] - 5.0 - 1e-9 <= T_REF <= hi[i] + 1e-9:
            want.append(T_REF)
        assert t[owner == i].tolist() == sorted(want), (lo[i], hi[i])
    assert np.all(np.diff(owner) >= 0)


def _long_frame_sums(rows, sp, refs, per_atom):
    """Σ ν_el H_ref,el per row the direct way: a long (row × element) frame merged with the
    per-atom reference values and summed per row with pandas (NaN where a term is NaN)."""
    st = pd.DataFrame([(k, el, float(n)) for k, ej in zip(sp["species"], sp["elements_json"])
                       for el, n in json.loads(ej).items()], columns=["species", "element", "count"])
    r = rows[["species", "t_k"]].reset_index().merge(st, on="species")
    r = r.merge(per_atom, on=["element", "t_k"], how="left")
    r["nh"] = r["count"] * r["h_atom"]
    missing = r.groupby("index")["nh"].agg(lambda x: x.isna().any())
    return r.groupby("index")["nh"].sum().mask(missing).reindex(rows.index)


@pytest.mark.parametrize("gap", [False, True])
def test_formation_sums_like_the_long_frame(gap):
    """Σ_el ν_el H_ref,el of many species with 3–10 elements equals, bit for bit, the sum of
    the long (row × element) frame with pandas — the computation the properties table used
    before, so its contents do not change. pandas adds with numpy's pairwise
    ``add.reduceat`` when every term is a number and with a compensated sum when some are
    NaN (``gap``: one element has no reference at one temperature); the data make the two
    rules disagree somewhere, so the test tells them apart."""
    from pipeline.properties import _row_sums, _Stoichiometry

    rng = np.random.default_rng(11)
    els = ["C", "H", "N", "O", "S", "P", "F", "Cl", "Br", "I"]
    sp_rows = [(f"{el}(ref)", {el: 1}, 0, True) for el in els]
    for i in range(400):
        k = int(rng.integers(3, len(els) + 1))
        sp_rows.append((f"X{i}(g)", {el: int(rng.integers(1, 40)) for el in rng.permutation(els)[:k]}, 0, False))
    sp = _species(sp_rows)
    refs = element_references(sp)
    temps = np.array([T_REF, 500.0, 1000.0, 2000.0])
    h_atom = {el: rng.uniform(-3e5, 3e5, len(temps)) + rng.uniform(0, 1, len(temps)) / 3 for el in els}
    if gap:
        h_atom["S"][2] = np.nan

    def ref_hg(keys, t):
        h = np.array([h_atom[k.split("(")[0]][np.searchsorted(temps, x)] for k, x in zip(keys, np.asarray(t, float))])
        return h, h - 1000.0

    keys = [r[0] for r in sp_rows[len(els):]]
    rows = pd.DataFrame({"species": np.repeat(keys, len(temps)), "t_k": np.tile(temps, len(keys)),
                         "h_j_mol": 0.0, "g_j_mol": 0.0}, index=np.arange(len(keys) * len(temps)) * 3 + 1)
    f = formation(rows, sp, refs, ref_hg)
    per_atom = pd.DataFrame([(el, t, h_atom[el][j]) for el in els for j, t in enumerate(temps)
                             if np.isfinite(h_atom[el][j])], columns=["element", "t_k", "h_atom"])
    want = -_long_frame_sums(rows, sp, refs, per_atom).to_numpy()
    np.testing.assert_array_equal(f["dfh_j_mol"].to_numpy(), want)
    assert np.isnan(want).any() == gap
    # the other summation rule gives different values here
    st = _Stoichiometry.of(sp, np.array(keys, dtype=object), refs)
    table = np.array([h_atom[el] for el in st.elements])
    val, has = st.terms(np.repeat(np.arange(len(keys)), len(temps)), np.tile(np.arange(len(temps)), len(keys)), table)
    other, bad = _row_sums(val, has, plain=gap)
    assert (-other[~bad] != want[~bad]).any()


def test_properties_do_not_depend_on_the_evaluation_block_size(release, monkeypatch):
    """The grid is evaluated in blocks; blocks that split a species' grid give the same table."""
    import pipeline.properties as props
    from pipeline.functions import RecordFunctions

    run, _ = release
    f = run.frames
    whole = run.extra["derived"]["properties"]
    monkeypatch.setattr(props, "BLOCK_ROWS", 7)
    pref = run.extra["derived"]["preferred"]
    blocks = props.curated_properties(pref, f["records"], f["species"],
                                      RecordFunctions(f["records"], f["segments"], f["table_points"]), f["table_points"])
    assert len(whole) > 7 and whole["dfh_j_mol"].notna().any()
    pd.testing.assert_frame_equal(blocks, whole, check_exact=True)


def _entries_by_definition(species):
    """Per row: the symbols and counts of ``elements_json`` in its order with the zero
    counts left out, then the electron with −charge for an ion — written out row by row."""
    out = []
    for ej, z in zip(species["elements_json"], species["charge"].fillna(0)):
        els = json.loads(ej) if isinstance(ej, str) else {}
        names = [el for el, n in els.items() if n]
        counts = [float(n) for n in els.values() if n]
        if z:
            names.append("e")
            counts.append(-float(z))
        out.append((names, counts))
    return out


@pytest.mark.parametrize("case", ["plain", "odd"])
def test_element_entries_follow_their_definition(case):
    """The batch parse of ``elements_json`` gives each row's symbols and counts as the
    row-by-row definition does: zero counts left out, the electron last for ions, a count
    written as text or a missing ``elements_json`` handled alike."""
    from pipeline.properties import element_entries

    rng = np.random.default_rng(5)
    els = ["C", "H", "N", "O", "Cl", "Fe"]
    def counts(i):
        return {e: float(rng.integers(0, 5)) if i % 3 else int(rng.integers(0, 5))
                for e in rng.permutation(els)[:rng.integers(0, 5)]}

    rows = [dict(species=f"X{i}(g)", elements_json=json.dumps(counts(i)),
                 charge=int(rng.integers(-2, 3)) if i % 4 == 0 else 0) for i in range(300)]
    sp = pd.DataFrame(rows)
    if case == "odd":
        sp.loc[3, "elements_json"] = None
        sp.loc[7, "elements_json"] = '{"C": "2", "H": "0"}'
        sp.loc[8, "charge"] = np.nan
    lens, names, counts = element_entries(sp)
    bounds = np.concatenate([[0], np.cumsum(lens)])
    got = [(names[a:b].tolist(), counts[a:b].tolist()) for a, b in zip(bounds[:-1], bounds[1:])]
    assert got == _entries_by_definition(sp)
    assert any(n and n[-1] == "e" for n, _ in got) and any(not n for n, _ in got)


def test_nan_term_shortcut_equals_the_terms():
    """``any_nan_term`` (element and temperature bit sets) answers as the terms themselves:
    a species' row has a NaN term exactly where one of its elements has no reference value
    at that T — on random species, reference tables with and without gaps, unknown species."""
    from pipeline.properties import _Stoichiometry

    rng = np.random.default_rng(3)
    els = ["C", "H", "N", "O", "S"]
    mismatches = checked = 0
    for _ in range(200):
        sp = _species([(f"S{i}", {e: int(rng.integers(1, 4)) for e in rng.permutation(els)[:rng.integers(0, 5)]},
                        int(rng.integers(-1, 2)), False) for i in range(30)])
        refs = pd.DataFrame({"element": (els + ["e"])[:int(rng.integers(2, 7))], "species": "ref", "atoms": 1.0})
        st = _Stoichiometry.of(sp, sp["species"].to_numpy(object), refs)
        per_atom = rng.normal(size=(len(st.elements), 7))
        per_atom[rng.random(per_atom.shape) < rng.choice([0.0, 0.02, 0.2])] = np.nan
        code, tc = rng.integers(-1, 30, 50), rng.integers(0, 7, 50)
        val, has = st.terms(code, tc, per_atom)
        want = bool((has & np.isnan(val)).any())
        mismatches += want != st.any_nan_term(code, tc, per_atom)
        checked += want
    assert mismatches == 0 and 0 < checked < 200


@pytest.mark.parametrize("gap", [False, True])
def test_flat_sums_equal_the_row_sums(gap):
    """The sums formation uses (terms gathered flat and added with ``add.reduceat``; the
    compensated sum over rows ordered by their term count) equal :func:`_row_sums` of the
    padded terms bit for bit (the compensated one on the rows without a NaN term, which
    the caller sets to NaN), and flag the same rows."""
    from pipeline.properties import _row_sums, _Stoichiometry

    rng = np.random.default_rng(13)
    els = ["C", "H", "N", "O", "S", "P", "F", "Cl", "Br", "I"]
    sp = _species([(f"X{i}(g)", {el: int(rng.integers(1, 40)) for el in rng.permutation(els)[:rng.integers(1, 11)]},
                    int(rng.integers(-1, 2)), False) for i in range(300)])
    refs = pd.DataFrame({"element": els + ["e"], "species": "ref", "atoms": 1.0})
    st = _Stoichiometry.of(sp, sp["species"].to_numpy(object), refs)
    per_atom = rng.uniform(-3e5, 3e5, (len(st.elements), 6)) + rng.uniform(0, 1, (len(st.elements), 6)) / 3
    if gap:
        per_atom[3, 2] = np.nan
    code, tc = rng.integers(-1, 300, 5000), rng.integers(0, 6, 5000)
    val, has = st.terms(code, tc, per_atom)
    for plain in (True, False):
        want, want_bad = _row_sums(val, has, plain)
        (got,), (bad,) = (st.plain_sums if plain else st.compensated_sums)(code, tc, (per_atom,))
        np.testing.assert_array_equal(bad, want_bad)
        np.testing.assert_array_equal(got[~bad], want[~bad])
    assert want_bad.any() == gap
