"""cp.gas-floor and cp.gas-ceiling: clean cases, defects, overrides, CoolProp references."""
from __future__ import annotations

import numpy as np
import pandas as pd
import pytest

from pipeline.checks.heat_capacity import cp_gas_ceiling, cp_gas_floor, gas_ceiling_r
from pipeline.constants import R
from pipeline.errors import ConfigError
from tests.builders import context, poly_record, table_record
from tests.checks.gas_reference import GASES, config_from, gas_context, gas_table, run_checks


def const_cp(cp_r: float) -> np.ndarray:
    """Canonical coefficients of a constant Cp = cp_r · R."""
    c = np.zeros(9)
    c[2] = cp_r
    return c


def gas(species, cp_r, lo=300.0, hi=3000.0, source="src"):
    return poly_record(species, source, [(lo, hi, const_cp(cp_r))])


def meta(**geometry):
    return pd.DataFrame({"species": list(geometry), "geometry": list(geometry.values()),
                         "reference_element": False, "stated_molar_mass_g_mol": np.nan})


# ------------------------------------------------------------------ harmonic limits

def test_harmonic_limits_follow_equipartition():
    # (3N − 3/2) R linear, (3N − 2) R nonlinear, 5/2 R atom (McQuarrie, Statistical
    # Mechanics, 2000): CO2 7.5 R, H2O 7 R, Ar 2.5 R; unknown triatomic → linear 7.5 R;
    # a diatomic is linear even if declared nonlinear; one atom is an atom whatever declared.
    lim, atom = gas_ceiling_r(np.array([3, 3, 1, 3, 2, 1, 0]),
                              ["linear", "nonlinear", "atom", None, "nonlinear", "linear", None])
    assert lim == pytest.approx([7.5, 7.0, 2.5, 7.5, 4.5, 2.5, 2.5])
    assert atom.tolist() == [False, False, True, False, False, True, True]


# ------------------------------------------------------------------ cp.gas-floor

def test_floor_clean_gas_passes():
    assert len(cp_gas_floor(context([gas("N2(g)", 3.5)]))) == 0


def test_floor_translation_exactly_passes():
    # a monatomic gas has Cp = 5/2 R exactly (kinetic theory): on the bound, not below it
    assert len(cp_gas_floor(context([gas("Ar(g)", 2.5)]))) == 0


def test_floor_below_translation_is_error():
    f = cp_gas_floor(context([gas("N2(g)", 2.0)]))
    assert f["check_id"].tolist() == ["cp.gas-floor"]
    assert f["severity"].tolist() == ["error"]
    assert f["subject"].iloc[0] == "N2(g)" and f["source_id"].iloc[0] == "src"
    assert f["observed"].iloc[0] == pytest.approx(2.0 * R)
    assert f["expected"].iloc[0] == pytest.approx(2.5 * R)
    assert f["unit"].iloc[0] == "J/(mol*K)" and f["message"].iloc[0] and f["hint"].iloc[0]


def test_floor_finds_exact_minimum_inside_a_segment():
    # Cp/R = 2.6 − 1e-6 (T − 1234.5)²: minimum at both ends here; a dip at 1234.5 K instead:
    c = np.zeros(9)
    t0 = 1234.5
    # Cp/R = 2.3 + 1e-6 (T − t0)² = 2.3 + 1e-6 t0² − 2e-6 t0 T + 1e-6 T²
    c[2], c[3], c[4] = 2.3 + 1e-6 * t0 ** 2, -2e-6 * t0, 1e-6
    f = cp_gas_floor(context([poly_record("N2(g)", "s", [(300.0, 3000.0, c)])]))
    assert f["t_k"].iloc[0] == pytest.approx(t0, abs=1e-3)
    assert f["observed"].iloc[0] == pytest.approx(2.3 * R, rel=1e-9)


def test_floor_margin_override_is_honoured(tmp_path):
    rec = gas("N2(g)", 2.45)                      # 0.05 R below 5/2 R
    assert len(cp_gas_floor(context([rec]))) == 1
    cfg = config_from(tmp_path, '[checks."cp.gas-floor"]\nmargin_r = 0.1\n')
    assert len(cp_gas_floor(context([rec], config=cfg))) == 0


def test_floor_ignores_condensed_phases_and_checks_tables():
    t = np.array([10.0, 100.0, 298.15])
    cr = table_record("H2O(cr)", "tab", t, cp_j_mol_k=[2.0, 15.0, 37.0])
    g = table_record("Ar(g)", "tab", t, cp_j_mol_k=[20.786, 20.786, 15.0])
    f = cp_gas_floor(context(tables=[cr, g]))
    assert f["subject"].tolist() == ["Ar(g)"]
    assert f["t_k"].iloc[0] == pytest.approx(298.15)


def test_bad_tolerance_name_or_value_is_refused(tmp_path):
    with pytest.raises(ConfigError, match="margin_r"):
        config_from(tmp_path, '[checks."cp.gas-floor"]\nmargin = 0.1\n')
    with pytest.raises(ConfigError, match="a number ≥ 0"):
        config_from(tmp_path, '[checks."cp.gas-ceiling"]\nmolecule_error_factor = -1\n')


# ------------------------------------------------------------------ cp.gas-ceiling

def test_ceiling_clean_molecule_passes():
    # N2: limit 4.5 R; 4.5 R itself (all modes classical) is physical
    assert len(cp_gas_ceiling(context([gas("N2(g)", 4.5)]))) == 0


@pytest.mark.parametrize("cp_r, severity", [(5.5, None), (6.0, "warning"), (9.5, "error")])
def test_ceiling_molecule_thresholds(cp_r, severity):
    # N2 limit 4.5 R: warning above 1.25 × = 5.625 R, error above 2 × = 9 R
    f = cp_gas_ceiling(context([gas("N2(g)", cp_r)]))
    assert f["severity"].tolist() == ([] if severity is None else [severity])


@pytest.mark.parametrize("cp_r, severity", [(4.9, None), (5.5, "warning"), (10.5, "error")])
def test_ceiling_atom_has_wider_allowance(cp_r, severity):
    # atoms: warning above 2 × 5/2 R = 5 R, error above 4 × = 10 R
    f = cp_gas_ceiling(context([gas("O(g)", cp_r)]))
    assert f["severity"].tolist() == ([] if severity is None else [severity])
    if severity:
        assert f["expected"].iloc[0] == pytest.approx(2.5 * R)


def test_ceiling_uses_geometry_and_linear_for_unknown():
    # H2O nonlinear: limit 7 R, warning above 8.75 R. Cp = 9.1 R (liquid water's Cp filed
    # as a gas, 75.3 J/(mol·K) ≈ 9.06 R, Wagner & Pruss 2002 — from memory).
    known = cp_gas_ceiling(context([gas("H2O(g)", 9.1)], species_meta=meta(**{"H2O(g)": "nonlinear"})))
    assert known["severity"].tolist() == ["warning"]
    assert known["expected"].iloc[0] == pytest.approx(7.0 * R)
    # unknown geometry: the linear 7.5 R limit, warning only above 9.375 R
    unknown = cp_gas_ceiling(context([gas("H2O(g)", 9.1)]))
    assert len(unknown) == 0


def test_ceiling_one_atom_species_is_an_atom_even_if_declared_otherwise():
    f = cp_gas_ceiling(context([gas("Ar(g)", 5.5)], species_meta=meta(**{"Ar(g)": "linear"})))
    assert f["severity"].tolist() == ["warning"]          # atom rule, 2 × 5/2 R = 5 R


def test_ceiling_finds_interior_maximum_of_a_segment():
    t0 = 1777.0
    c = np.zeros(9)       # Cp/R = 12 − 1e-6 (T − t0)², a hump between any grid points
    c[2], c[3], c[4] = 12 - 1e-6 * t0 ** 2, 2e-6 * t0, -1e-6
    f = cp_gas_ceiling(context([poly_record("N2(g)", "s", [(300.0, 3000.0, c)])]))
    assert f["severity"].tolist() == ["error"]
    assert f["t_k"].iloc[0] == pytest.approx(t0, abs=1e-3)


def test_ceiling_factor_overrides_are_honoured(tmp_path):
    rec = gas("N2(g)", 6.0)
    cfg = config_from(tmp_path, '[checks."cp.gas-ceiling"]\nmolecule_warning_factor = 1.5\n')
    assert len(cp_gas_ceiling(context([rec], config=cfg))) == 0
    cfg = config_from(tmp_path, '[checks."cp.gas-ceiling"]\nmolecule_error_factor = 1.3\n')
    assert cp_gas_ceiling(context([rec], config=cfg))["severity"].tolist() == ["error"]


# ------------------------------------------------------------------ CoolProp references

def test_coolprop_gases_pass_every_check_with_zero_errors():
    # Tables of ideal-gas Cp, H − H298 and S from CoolProp's reference equations of state
    # (Bell et al., Ind. Eng. Chem. Res. 53 (2014) 2498; S°298 and ΔfH°298 from `chemicals`,
    # NIST WebBook and ATcT data sets) and NASA-7 fits of them: real gases, no findings.
    f = run_checks(gas_context())
    assert (f["severity"] == "error").sum() == 0, f[["check_id", "subject", "message"]]
    assert len(f) == 0, f[["check_id", "subject", "message"]]


def test_coolprop_methane_in_calories_breaks_the_ceiling():
    # planted defect: CH4 Cp in cal/(mol·K) read as J (× 4.184) over its CoolProp range
    # (300–625 K): 52 J/(mol·K) at 625 K becomes 218, above 2 × the 13 R nonlinear limit.
    rec, pts = gas_table("CH4(g)")
    pts["cp_j_mol_k"] *= 4.184
    tables = [gas_table(s) for s in GASES if s != "CH4(g)"] + [(rec, pts)]
    f = run_checks(gas_context(tables=tables), ("cp.gas-ceiling", "cp.gas-floor"))
    assert f[["check_id", "severity", "subject", "source_id"]].values.tolist() == [
        ["cp.gas-ceiling", "error", "CH4(g)", "coolprop"]]
    assert f["t_k"].iloc[0] == pytest.approx(625.0)


def test_coolprop_argon_with_a_low_row_breaks_the_floor():
    # planted defect: argon's Cp (exactly 5/2 R in CoolProp's equation) lowered by 10 % at one row
    rec, pts = gas_table("Ar(g)")
    pts.loc[pts.index[5], "cp_j_mol_k"] *= 0.9
    tables = [gas_table(s) for s in GASES if s != "Ar(g)"] + [(rec, pts)]
    f = run_checks(gas_context(tables=tables), ("cp.gas-ceiling", "cp.gas-floor"))
    assert f[["check_id", "severity", "subject"]].values.tolist() == [["cp.gas-floor", "error", "Ar(g)"]]
    assert f["t_k"].iloc[0] == pytest.approx(pts["t_k"].iloc[5])
