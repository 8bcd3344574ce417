"""Hess's law on the textbook example: ΔfH°(CO) from the combustion enthalpies of graphite and CO.

Reference values (Atkins & de Paula, *Physical Chemistry*, data section, standard
enthalpies at 298.15 K; from memory): ΔcH°(C, graphite) = ΔfH°(CO2, g) = −393.5 kJ/mol,
ΔcH°(CO, g) = −283.0 kJ/mol, hence ΔfH°(CO, g) = −393.5 + 283.0 = −110.5 kJ/mol, the worked
example of Hess's law in that book. Standard entropies and heat capacities from the same
tables (from memory); they enter only the temperature-dependence tests, whose expected values
are written here in closed form (Kirchhoff's law, constant Cp).
"""
from __future__ import annotations

import math

import numpy as np
import pytest

from pipeline.checks.reactions import network_worst_offender, reaction_residual
from pipeline.constants import LN10, R, T_REF
from tests.builders import findings_of
from tests.network.helpers import const_cp, network_context, reactions

# key: (ΔfH° [J/mol], S° [J/(mol K)], Cp [J/(mol K)])  — Atkins data tables, from memory
ATKINS = {
    "C(cr,graphite)": (0.0, 5.740, 8.527),
    "O2(g)": (0.0, 205.138, 29.355),
    "CO(g)": (-110.53e3, 197.67, 29.14),
    "CO2(g)": (-393.51e3, 213.74, 37.11),
}
COMB_C = {"C(cr,graphite)": -1, "O2(g)": -1, "CO2(g)": 1}
COMB_CO = {"CO(g)": -1, "O2(g)": -0.5, "CO2(g)": 1}


def _species(**override):
    vals = dict(ATKINS, **override)
    return [const_cp(k, *v) for k, v in vals.items()]


def test_reconciled_co_from_two_combustion_enthalpies():
    """−393.5 and −283.0 kJ/mol give ΔfH°(CO) = −110.5 kJ/mol; u(CO) = √(u1² + u2²) (GUM)."""
    rx = reactions([("c1", COMB_C, "drh", T_REF, -393.5e3, 0.13e3),
                    ("c2", COMB_CO, "drh", T_REF, -283.0e3, 0.20e3)])
    ctx = network_context(rx=rx)          # no species records: the network alone
    f = network_worst_offender(ctx)
    rec = ctx.tables_out["reconciled"].set_index("species")
    assert rec.loc["CO(g)", "dfh_298_j_mol"] == pytest.approx(-110.5e3, abs=1.0)
    assert rec.loc["CO2(g)", "dfh_298_j_mol"] == pytest.approx(-393.5e3, abs=1.0)
    assert rec.loc["CO(g)", "uncertainty_dfh_298_j_mol"] == pytest.approx(math.hypot(0.13e3, 0.20e3), rel=1e-6)
    assert rec.loc["CO2(g)", "uncertainty_dfh_298_j_mol"] == pytest.approx(0.13e3, rel=1e-6)
    assert bool(rec.loc["CO(g)", "determined"]) and bool(rec.loc["CO2(g)", "determined"])
    assert rec.loc["O2(g)", "dfh_298_j_mol"] == 0.0          # reference element, fixed
    # each measurement alone fixes one species: untestable (h = 1), reported as info
    assert sorted(f["subject"]) == ["c1", "c2"]
    assert set(f["severity"]) == {"info"}


def test_reaction_residual_of_co_combustion():
    """Computed ΔcH°(CO) = ΔfH°(CO2) − ΔfH°(CO) = −283.0 kJ/mol matches the measurement;
    a value 10 kJ/mol off is an error."""
    rx = reactions([("ok", COMB_CO, "drh", T_REF, -283.0e3, 0.5e3),
                    ("bad", COMB_CO, "drh", T_REF, -293.0e3, 0.5e3)])
    ctx = network_context(poly=_species(), rx=rx)
    f = reaction_residual(ctx)
    res = ctx.tables_out["reaction_results"].set_index("reaction_id")
    assert res.loc["ok", "computed_value"] == pytest.approx(-393.51e3 + 110.53e3, abs=1.0)
    assert abs(res.loc["ok", "z"]) < 0.1
    assert list(f["subject"]) == ["bad"]
    assert f["severity"].iloc[0] == "error"
    assert res.loc["bad", "z"] == pytest.approx((-293.0e3 + 282.98e3) / 0.5e3, rel=1e-6)


def test_kirchhoff_temperature_dependence_of_reaction_enthalpy():
    """ΔrH°(1000 K) = ΔrH°(298.15) + ΔrCp (T − 298.15) for constant Cp (Kirchhoff's law)."""
    t = 1000.0
    d_cp = ATKINS["CO2(g)"][2] - ATKINS["CO(g)"][2] - 0.5 * ATKINS["O2(g)"][2]
    expected = (-393.51e3 + 110.53e3) + d_cp * (t - T_REF)
    rx = reactions([("hot", COMB_CO, "drh", t, expected, 0.5e3)])
    ctx = network_context(poly=_species(), rx=rx)
    assert reaction_residual(ctx).empty
    assert ctx.tables_out["reaction_results"]["computed_value"].iloc[0] == pytest.approx(expected, abs=0.01)


def test_log_k_of_dinitrogen_tetroxide_dissociation():
    """N2O4(g) = 2 NO2(g): log K(298.15) from the tables' ΔfG° (2·51.31 − 97.89 = 4.73 kJ/mol,
    Atkins data tables, from memory) against the value computed from ΔfH° and S°.

    Tolerance 0.02 in log K: the book's ΔfG° and ΔfH°/S° columns are each rounded
    (0.05 kJ/mol apart here, 0.009 in log K)."""
    species = [const_cp("NO2(g)", 33.18e3, 240.06, 37.20), const_cp("N2O4(g)", 9.16e3, 304.29, 77.28)]
    log_k = -4.73e3 / (R * T_REF * LN10)
    rx = reactions([("k298", {"N2O4(g)": -1, "NO2(g)": 2}, "log_k", T_REF, log_k, 0.005)])
    ctx = network_context(poly=species, rx=rx)
    reaction_residual(ctx)
    computed = ctx.tables_out["reaction_results"]["computed_value"].iloc[0]
    assert computed == pytest.approx(log_k, abs=0.02)
    assert computed == pytest.approx(-(57.20e3 - T_REF * 175.83) / (R * T_REF * LN10), abs=1e-3)


def test_species_without_data_is_info():
    rx = reactions([("r", {"CO(g)": -1, "O2(g)": -0.5, "CO2(g)": 1}, "drh", T_REF, -283.0e3, 0.5e3)])
    ctx = network_context(poly=[const_cp("CO2(g)", *ATKINS["CO2(g)"]), const_cp("O2(g)", *ATKINS["O2(g)"])],
                          rx=rx)
    f = findings_of(reaction_residual(ctx), "reaction.residual")
    assert list(f["severity"]) == ["info"]
    assert "CO(g) (no record)" in f["message"].iloc[0]
    assert np.isnan(ctx.tables_out["reaction_results"]["computed_value"].iloc[0])


def test_measurement_outside_a_record_range_is_not_extrapolated():
    rx = reactions([("r", COMB_CO, "drh", 5000.0, -283.0e3, 0.5e3)])
    ctx = network_context(poly=_species(), rx=rx)   # records end at 3000 K
    f = reaction_residual(ctx)
    assert list(f["severity"]) == ["info"] and "outside its range" in f["message"].iloc[0]


def test_computed_values_come_from_the_preferred_source():
    """Two sources for CO2: the manifest priority decides which one computes the reaction."""
    import pandas as pd

    rx = reactions([("r", COMB_CO, "drh", T_REF, -283.0e3, 0.5e3)])
    poly = _species() + [const_cp("CO2(g)", -390.0e3, 213.74, 37.11, source="other")]
    ctx = network_context(poly=poly, rx=rx)
    ctx.sources = pd.DataFrame({"source_id": ["poly", "other"], "priority": [10, 0],
                                "kind": ["evaluated", "evaluated"]})
    reaction_residual(ctx)
    assert ctx.tables_out["reaction_results"]["computed_value"].iloc[0] == pytest.approx(-282.98e3, abs=1.0)
    ctx.sources = pd.DataFrame({"source_id": ["poly", "other"], "priority": [0, 10],
                                "kind": ["evaluated", "evaluated"]})
    reaction_residual(ctx)
    assert ctx.tables_out["reaction_results"]["computed_value"].iloc[0] == pytest.approx(-279.47e3, abs=1.0)
