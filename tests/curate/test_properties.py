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
