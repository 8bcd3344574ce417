"""Phase checks: reference forms, metastable forms, stated transitions."""
from __future__ import annotations

import json

import numpy as np
import pandas as pd
import pytest

from pipeline.checks import registry
from pipeline.constants import R, T_REF
from pipeline.ingest import base as ib
from tests.builders import context, poly_record

H2O_L_DFH = -285830.0   # ΔfH°(H2O, l, 298.15) [J/mol], CODATA Key Values (Cox et al. 1989), from memory
H2O_L_S = 69.95         # S°(H2O, l, 298.15) [J/(mol·K)], same source, from memory
T_FUS = 273.15          # melting point of ice at 1 atm [K], common knowledge
DH_FUS = 6010.0         # ΔfusH of ice at 273.15 K [J/mol], common knowledge (6.01 kJ/mol)


def _run(ctx, cid):
    return registry.spec_for(cid).func(ctx)


def segment(cp_abc, h298, s298):
    """Canonical segment with Cp = a + bT + cT² [J/(mol·K)] and the given H(298.15) [J/mol]
    and S(298.15) [J/(mol·K)]."""
    a, b, c = (x / R for x in cp_abc)
    t = T_REF
    b1 = h298 / R - (a * t + b * t ** 2 / 2 + c * t ** 3 / 3)
    b2 = s298 / R - (a * np.log(t) + b * t + c * t ** 2 / 2)
    return np.array([0.0, 0.0, a, b, c, 0.0, 0.0, b1, b2])


def cp_through(points):
    """Cp = a + bT + cT² through three (T, Cp) points."""
    t, cp = np.array(points, float).T
    c, b, a = np.polyfit(t, cp, 2)
    return a, b, c


def meta(*refs):
    return pd.DataFrame({"species": list(refs), "reference_element": True,
                         "stated_molar_mass_g_mol": np.nan, "aliases": ""})


# --- carbon: NIST-JANAF Thermochemical Tables, 4th ed. (Chase 1998), from memory ----------
# graphite: ΔfH = 0, S°(298.15) = 5.74 J/(mol·K); Cp 8.517 (298.15 K), 14.623 (500 K),
# 21.610 (1000 K). Diamond: ΔfH = 1.895 kJ/mol, S° = 2.38 J/(mol·K); Cp 6.115 (298.15 K),
# ≈ 11.8 (500 K), ≈ 19.9 (1000 K) (the higher two are approximate recollections).
GRAPHITE = segment(cp_through([(298.15, 8.517), (500.0, 14.623), (1000.0, 21.610)]), 0.0, 5.74)
DIAMOND = segment(cp_through([(298.15, 6.115), (500.0, 11.8), (1000.0, 19.9)]), 1895.0, 2.38)


def carbon(reference="C(cr,graphite)"):
    g = poly_record("C(cr,graphite)", "janaf", [(200.0, 1000.0, GRAPHITE)])
    d = poly_record("C(cr,diamond)", "janaf", [(T_REF, 1000.0, DIAMOND)])
    return context(poly=[g, d], species_meta=meta(reference))


def test_graphite_is_the_stable_reference_of_carbon():
    """Graphite is carbon's reference state at 298.15 K and 1 bar (Chase 1998)."""
    assert _run(carbon(), "phase.reference-not-stable").empty


def test_diamond_declared_reference_is_flagged():
    """Declaring diamond the reference: graphite is lower in G by ΔfG°(diamond) = 2.900
    kJ/mol (Chase 1998, from memory) = 1.895 + 298.15 × (5.74 − 2.38)/1000."""
    out = _run(carbon("C(cr,diamond)"), "phase.reference-not-stable")
    assert list(out["severity"]) == ["warning"] and list(out["subject"]) == ["C(cr,diamond)"]
    assert "C(cr,graphite)" in out["message"].iloc[0]
    assert out["observed"].iloc[0] - out["expected"].iloc[0] == pytest.approx(2900.0, abs=50.0)


def test_diamond_is_metastable_by_2_9_kj():
    """Diamond lies above graphite over its whole range; the smallest margin is at
    298.15 K, ≈ 2.9 kJ/mol (Chase 1998, from memory); graphite is not metastable."""
    out = _run(carbon(), "phase.metastable")
    assert list(out["subject"]) == ["C(cr,diamond)"] and list(out["severity"]) == ["info"]
    assert out["t_k"].iloc[0] == pytest.approx(T_REF)
    assert out["observed"].iloc[0] == pytest.approx(2900.0, abs=50.0)


def test_forms_crossing_inside_the_range_are_not_metastable():
    """Ice and water (overlapping ranges) cross at 273.15 K: neither is metastable everywhere."""
    assert _run(water(ice_range=(200.0, 300.0), liquid_range=(250.0, 373.15)), "phase.metastable").empty


# --- oxygen: O, O2, O3 at 298.15 K (CODATA 1989 / Chase 1998, from memory) ----------------
# O(g): ΔfH 249.18 kJ/mol, S 161.06; O2(g): 0, 205.15; O3(g): 142.67 kJ/mol, 238.93 J/(mol·K);
# Cp (298.15 K, from memory): O 21.91, O2 29.38, O3 39.24 J/(mol·K), held constant.
def oxygen(reference):
    recs = [poly_record("O(g)", "cd", [(200.0, 1000.0, segment((21.91, 0, 0), 249180.0, 161.06))]),
            poly_record("O2(g)", "cd", [(200.0, 1000.0, segment((29.38, 0, 0), 0.0, 205.15))]),
            poly_record("O3(g)", "cd", [(200.0, 1000.0, segment((39.24, 0, 0), 142670.0, 238.93))])]
    return context(poly=recs, species_meta=meta(reference))


def test_o2_is_the_stable_form_of_oxygen():
    """G per atom at 298.15 K: O2 −30.6 kJ, O3 +23.8 kJ, O +201 kJ: O2 is the reference."""
    assert _run(oxygen("O2(g)"), "phase.reference-not-stable").empty


def test_ozone_declared_reference_is_flagged_per_atom():
    out = _run(oxygen("O3(g)"), "phase.reference-not-stable")
    assert list(out["subject"]) == ["O3(g)"] and "O2(g)" in out["message"].iloc[0]
    # per atom: (142.67 − 298.15·238.93/1000)/3 − (0 − 298.15·205.15/1000)/2 = 54.37 kJ/mol
    assert out["observed"].iloc[0] - out["expected"].iloc[0] == pytest.approx(54370.0, abs=100.0)


# --- water: ice melts at 273.15 K with ΔfusH = 6.01 kJ/mol (common knowledge) --------------
# Cp of water 75.3 J/(mol·K), of ice 37.8 at 273 K falling to ≈ 28.4 at 200 K (from memory).
CP_LIQ = (75.3, 0.0, 0.0)
CP_ICE = (37.8 - 0.1285 * T_FUS, 0.1285, 0.0)


def _ice_segment():
    """Ice's segment fixed by the liquid at T_fus: H_cr = H_l − ΔfusH, S_cr = S_l − ΔfusH/T_fus."""
    from pipeline.thermo import evaluate

    liq = evaluate(segment(CP_LIQ, H2O_L_DFH, H2O_L_S), T_FUS)
    probe = segment(CP_ICE, 0.0, 0.0)
    at = evaluate(probe, T_FUS)
    probe[7] += (liq.h - DH_FUS - at.h) / R
    probe[8] += (liq.s - DH_FUS / T_FUS - at.s) / R
    return probe


def water(ice_range=(200.0, T_FUS), liquid_range=(T_FUS, 373.15), reactions=()):
    recs = [poly_record("H2O(cr)", "w", [(*ice_range, _ice_segment())]),
            poly_record("H2O(l)", "w", [(*liquid_range, segment(CP_LIQ, H2O_L_DFH, H2O_L_S))])]
    rows = [dict(reaction_id=rid, source_id="rx", file="rx.csv", line=i + 2, equation=eq,
                 stoich_json=json.dumps(st), quantity=q, t_k=t, value=v, uncertainty=u, unit="J/mol",
                 series=None, method="")
            for i, (rid, eq, st, q, t, v, u) in enumerate(reactions)]
    rx = ib.frame(rows, ib.REACTION_COLUMNS) if rows else None
    if rx is not None:
        rx = rx.astype({"t_k": float, "value": float, "uncertainty": float})
    return context(poly=recs, reactions=rx)


FUSION = {"H2O(cr)": -1, "H2O(l)": 1}


def _melting(t_stated, drh=None, u=20.0):
    rx = [("m1", "H2O(cr) = H2O(l)", FUSION, "drg", t_stated, 0.0, 1.0)]
    if drh is not None:
        rx.append(("m2", "H2O(cr) = H2O(l)", FUSION, "drh", t_stated, drh, u))
    return rx


@pytest.mark.parametrize("ranges", [{}, {"ice_range": (200.0, 300.0), "liquid_range": (250.0, 373.15)}],
                         ids=["touching", "overlapping"])
def test_melting_at_273_15_passes(ranges):
    """Stated 273.15 K with ΔfusH 6.01 kJ/mol ± 0.02: the G curves cross there and
    T ΔS = 6.01 kJ/mol (ΔfusS = 22.0 J/(mol·K)); no finding."""
    out = _run(water(reactions=_melting(T_FUS, DH_FUS), **ranges), "phase.transition-mismatch")
    assert out.empty, out["message"].tolist()


@pytest.mark.parametrize("ranges", [{}, {"ice_range": (200.0, 300.0), "liquid_range": (250.0, 373.15)}],
                         ids=["touching", "overlapping"])
def test_melting_stated_at_280_k_is_an_error(ranges):
    """Stated 280 K: 6.85 K from the crossing at 273.15 K (> 5 K) → error, crossing reported."""
    out = _run(water(reactions=_melting(280.0), **ranges), "phase.transition-mismatch")
    assert list(out["severity"]) == ["error"] and list(out["subject"]) == ["m1"]
    assert out["observed"].iloc[0] == pytest.approx(T_FUS, abs=0.01)
    assert out["expected"].iloc[0] == 280.0


def test_melting_off_by_1_35_k_is_a_warning():
    out = _run(water(ice_range=(200.0, 300.0), liquid_range=(250.0, 373.15), reactions=_melting(274.5)),
               "phase.transition-mismatch")
    assert list(out["severity"]) == ["warning"]
    assert "G curves cross" in out["message"].iloc[0]


@pytest.mark.parametrize("drh,u,severity", [(6500.0, 50.0, "error"), (6060.0, 20.0, "warning")])
def test_fusion_enthalpy_against_t_delta_s(drh, u, severity):
    """A ΔfusH at 273.15 K must equal T ΔS = 6.01 kJ/mol: 6.50 ± 0.05 (z ≈ 9.8) is an error,
    6.06 ± 0.02 (z = 2.5) a warning (z rule of reaction.residual)."""
    out = _run(water(reactions=_melting(T_FUS, drh, u)), "phase.transition-mismatch")
    assert list(out["subject"]) == ["m2"] and list(out["severity"]) == [severity]
    assert out["expected"].iloc[0] == pytest.approx(DH_FUS, abs=1.0)


def test_drh_without_a_stated_transition_is_left_to_reaction_checks():
    """A drh between two phases that is not at a stated transition (ΔvapH at 298.15 K) is
    not a transition: this check says nothing."""
    rx = [("v1", "H2O(cr) = H2O(l)", FUSION, "drh", 250.0, 5000.0, 10.0)]
    assert _run(water(ice_range=(200.0, 300.0), liquid_range=(250.0, 373.15), reactions=rx),
                "phase.transition-mismatch").empty


def test_reversed_equation_and_different_composition():
    """H2O(l) = H2O(cr) with drg = 0 is the same transition (crossing found); O3 = 1.5 O2 is
    not a transition (different composition)."""
    rx = [("f1", "H2O(l) = H2O(cr)", {"H2O(l)": -1, "H2O(cr)": 1}, "drg", 280.0, 0.0, 1.0)]
    out = _run(water(reactions=rx), "phase.transition-mismatch")
    assert list(out["severity"]) == ["error"]
    assert out["observed"].iloc[0] == pytest.approx(T_FUS, abs=0.01)


def test_metastable_in_blocks_and_against_the_lowest_form_per_temperature(monkeypatch):
    """With tiny blocks the result is unchanged; a form above one form in part of its range
    and above another elsewhere is still metastable (lowest-G form per temperature)."""
    from pipeline.checks import phases

    low = poly_record("C(cr,graphite)", "janaf", [(200.0, 600.0, GRAPHITE)])
    high = poly_record("C(cr,hexagonal)", "x", [(550.0, 1000.0, segment((14.0, 0.01, 0.0), -5000.0, 5.0))])
    dia = poly_record("C(cr,diamond)", "janaf", [(T_REF, 1000.0, DIAMOND)])
    ctx = context(poly=[low, high, dia], species_meta=meta("C(cr,graphite)"))
    whole = _run(ctx, "phase.metastable")
    monkeypatch.setattr(phases, "BLOCK_POINTS", 10)
    blocked = _run(ctx, "phase.metastable")
    assert "C(cr,diamond)" in list(whole["subject"])
    assert list(blocked["subject"]) == list(whole["subject"])
    assert blocked["observed"].to_numpy() == pytest.approx(whole["observed"].to_numpy())


def test_two_species_prefilter_never_drops_a_two_species_reaction():
    """The text prefilter of transition reactions may keep too many (they are parsed
    next) but must keep every stoichiometry with exactly two species, escaped keys too."""
    import json

    from pipeline.checks.phases import _maybe_two_species

    maps = [{"H2O(cr)": -1, "H2O(l)": 1}, {"A(g)": -1}, {"A(g)": -1, "B(g)": 1, "C(g)": 1},
            {'X"Y(g)': -1, "Z(g)": 1}, {"S(cr,a)": -0.5, "S(cr,b)": 0.5}]
    texts = [json.dumps(m) for m in maps] + [None]
    for s in (pd.Series(texts), pd.Series(texts, dtype=object)):
        keep = _maybe_two_species(s)
        truth = [isinstance(t, str) and len(json.loads(t)) == 2 for t in texts]
        assert all(k for k, t in zip(keep, truth) if t), (keep, truth)
        assert not keep[1] and not keep[2] and not keep[-1]
