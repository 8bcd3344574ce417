"""thirdlaw.zero-point, thirdlaw.calorimetric-entropy, thirdlaw.gas-entropy-floor."""
from __future__ import annotations

import math

import numpy as np
import pytest
from scipy.integrate import quad
from scipy.interpolate import CubicSpline, PchipInterpolator

from pipeline.checks.third_law import (cumulative_integral_over_t, pchip_slopes, spline_slopes,
                                       thirdlaw_calorimetric_entropy, thirdlaw_gas_entropy_floor,
                                       thirdlaw_zero_point)
from pipeline.constants import R
from tests.builders import context, poly_record, table_record
from tests.checks.gas_reference import GASES, config_from, gas_context, gas_poly, gas_table, run_checks

R_LN_3_2 = R * math.log(1.5)   # Pauling's residual entropy of ice, J. Am. Chem. Soc. 57 (1935) 2680


# ------------------------------------------------------------ a Debye solid, by quadrature

def debye_solid(theta: float, n: int, t):
    """Cp and S of a Debye solid by scipy quadrature of the textbook definitions (Debye,
    Ann. Phys. 39 (1912) 789): Cv = 9nR (T/θ)³ ∫₀^{θ/T} x⁴eˣ/(eˣ−1)² dx, S = ∫₀ᵀ Cv/T dT.
    Independent of pipeline.physics."""
    def cv(T):
        if T <= 0:
            return 0.0
        xd = theta / T
        f = lambda x: x ** 4 * math.exp(-x) / (-math.expm1(-x)) ** 2 if x > 0 else 0.0  # noqa: E731
        return 9 * n * R * quad(f, 0, xd, limit=200, epsabs=1e-13)[0] / xd ** 3
    cp = np.array([cv(T) for T in t])
    s = np.array([quad(lambda T: cv(T) / T, 1e-9, T, limit=200, epsabs=1e-12)[0] for T in t])
    return cp, s


T_GRID = np.r_[10.0, 15.0, 20.0, 25.0, 30.0, np.arange(40.0, 301.0, 20.0)]


@pytest.fixture(scope="module")
def solid():
    return debye_solid(250.0, 2, T_GRID)


def solid_table(cp, s, species="MgO(cr)", t=T_GRID):
    return table_record(species, "cal", t, cp_j_mol_k=cp, s_j_mol_k=s)


# ------------------------------------------------------------ grouped interpolation

def test_grouped_spline_and_pchip_match_scipy():
    # reference: scipy.interpolate.CubicSpline (not-a-knot) and PchipInterpolator, one
    # table at a time; ours does every table in one solve
    rng = np.random.default_rng(7)
    sizes = [2, 3, 4, 7, 12]
    gid = np.repeat(np.arange(len(sizes)), sizes)
    x = np.concatenate([np.sort(rng.uniform(5, 800, n)) for n in sizes])
    y = rng.uniform(1, 60, len(x))
    ks, kp = spline_slopes(gid, x, y), pchip_slopes(gid, x, y)
    ci = cumulative_integral_over_t(gid, x, y, ks)
    for g in range(len(sizes)):
        m = gid == g
        cs, pc = CubicSpline(x[m], y[m]), PchipInterpolator(x[m], y[m])
        assert ks[m] == pytest.approx(cs(x[m], 1), rel=1e-9, abs=1e-12)
        assert kp[m] == pytest.approx(pc(x[m], 1), rel=1e-9, abs=1e-12)
        ref = [quad(lambda T: cs(T) / T, x[m][0], xe, points=x[m], limit=400)[0] for xe in x[m]]
        assert ci[m] == pytest.approx(ref, rel=1e-8, abs=1e-8)


# ------------------------------------------------------------ thirdlaw.zero-point

def zero_row_table(s0=0.0, cp0=0.0):
    t = np.array([0.0, 10.0, 20.0])
    return table_record("H2O(cr)", "tab", t, cp_j_mol_k=[cp0, 0.1, 0.8], s_j_mol_k=[s0, 0.03, 0.3])


def test_zero_point_clean_passes():
    assert len(thirdlaw_zero_point(context(tables=[zero_row_table()]))) == 0


def test_residual_entropy_at_zero_is_an_error_with_paulings_hint():
    f = thirdlaw_zero_point(context(tables=[zero_row_table(s0=R_LN_3_2)]))
    assert f[["check_id", "severity", "subject", "source_id", "t_k"]].values.tolist() == [
        ["thirdlaw.zero-point", "error", "H2O(cr)", "tab", 0.0]]
    assert f["observed"].iloc[0] == pytest.approx(3.371, abs=1e-3)
    assert "Pauling" in f["hint"].iloc[0]


def test_heat_capacity_at_zero_is_checked():
    f = thirdlaw_zero_point(context(tables=[zero_row_table(cp0=0.2)]))
    assert f["severity"].tolist() == ["error"] and "Cp(0)" in f["message"].iloc[0]


def test_zero_point_override_is_honoured(tmp_path):
    cfg = config_from(tmp_path, '[checks."thirdlaw.zero-point"]\nj_mol_k = 4\n')
    assert len(thirdlaw_zero_point(context(tables=[zero_row_table(s0=R_LN_3_2)], config=cfg))) == 0


# ------------------------------------------------------------ thirdlaw.calorimetric-entropy

def test_debye_solid_is_consistent(solid):
    cp, s = solid
    assert len(thirdlaw_calorimetric_entropy(context(tables=[solid_table(cp, s)]))) == 0


def test_entropy_from_t0_uses_the_debye_function_not_only_cp_over_3():
    # a soft solid (θ = 150 K) tabulated from T0 = 30 K (T0/θ = 0.2): the T³ shortcut
    # S(T0) = Cp(T0)/3 is 2 J/(mol·K) short there, the Debye inversion is exact
    t = T_GRID[T_GRID >= 30.0]
    cp, s = debye_solid(150.0, 2, t)
    assert s[0] - cp[0] / 3 > 1.5
    assert len(thirdlaw_calorimetric_entropy(context(tables=[solid_table(cp, s, t=t)]))) == 0


def test_ice_like_residual_entropy_is_a_warning(solid):
    # Pauling (1935): ice keeps R ln(3/2) = 3.37 J/(mol·K) of proton disorder at 0 K, so its
    # third-law S exceeds the calorimetric entropy by that much (Giauque & Stout 1936)
    cp, s = solid
    f = thirdlaw_calorimetric_entropy(context(tables=[solid_table(cp, s + R_LN_3_2, "H2O(cr)")]))
    assert f[["check_id", "severity", "subject", "source_id"]].values.tolist() == [
        ["thirdlaw.calorimetric-entropy", "warning", "H2O(cr)", "cal"]]
    assert f["observed"].iloc[0] - f["expected"].iloc[0] == pytest.approx(R_LN_3_2, abs=0.02)
    assert "Pauling" in f["hint"].iloc[0]


def test_entropy_below_calorimetry_is_an_error(solid):
    cp, s = solid
    f = thirdlaw_calorimetric_entropy(context(tables=[solid_table(cp, s - 1.0)]))
    assert f["severity"].tolist() == ["error"]
    assert f["observed"].iloc[0] - f["expected"].iloc[0] == pytest.approx(-1.0, abs=0.02)


def test_cp_above_dulong_petit_at_t0_is_info():
    t = np.array([20.0, 50.0, 100.0])
    tab = table_record("Fe(cr)", "tab", t, cp_j_mol_k=[3.2 * R, 3.3 * R, 3.3 * R], s_j_mol_k=[10.0, 40.0, 60.0])
    f = thirdlaw_calorimetric_entropy(context(tables=[tab]))
    assert f["severity"].tolist() == ["info"]
    assert f["expected"].iloc[0] == pytest.approx(3 * R)


def test_gases_and_high_starting_tables_are_not_checked(solid):
    cp, s = solid
    assert len(thirdlaw_calorimetric_entropy(context(tables=[solid_table(cp, s - 5, "Ar(g)")]))) == 0
    sel = T_GRID >= 40.0
    tab = solid_table(cp[sel], s[sel] - 5, t=T_GRID[sel])
    assert len(thirdlaw_calorimetric_entropy(context(tables=[tab]))) == 0


def test_calorimetric_overrides_are_honoured(tmp_path, solid):
    cp, s = solid
    sel = T_GRID >= 40.0
    tab = solid_table(cp[sel], s[sel] - 5, t=T_GRID[sel])
    cfg = config_from(tmp_path, '[checks."thirdlaw.calorimetric-entropy"]\nt0_max_k = 45\n')
    assert thirdlaw_calorimetric_entropy(context(tables=[tab], config=cfg))["severity"].tolist() == ["error"]
    ice = solid_table(cp, s + R_LN_3_2, "H2O(cr)")
    cfg = config_from(tmp_path, '[checks."thirdlaw.calorimetric-entropy"]\nj_mol_k = 4\n')
    assert len(thirdlaw_calorimetric_entropy(context(tables=[ice], config=cfg))) == 0


# ------------------------------------------------------------ thirdlaw.gas-entropy-floor

def test_coolprop_gases_respect_the_translational_floor():
    # CoolProp ideal-gas S differences + chemicals' WebBook S°298 (tables and fits): clean
    assert len(run_checks(gas_context(), ("thirdlaw.gas-entropy-floor",))) == 0


def test_argon_at_1_atm_not_converted_is_flagged():
    # argon's S is exactly translational (Sackur–Tetrode, JANAF 154.8 J/(mol·K) at 1 bar);
    # left at 1 atm it is R ln 1.01325 = 0.109 J/(mol·K) lower — below the 1 bar floor
    rec, pts = gas_table("Ar(g)")
    pts["s_j_mol_k"] -= R * math.log(1.01325)
    tables = [gas_table(s) for s in GASES if s != "Ar(g)"] + [(rec, pts)]
    f = run_checks(gas_context(tables=tables), ("thirdlaw.gas-entropy-floor",))
    assert f[["check_id", "severity", "subject", "source_id"]].values.tolist() == [
        ["thirdlaw.gas-entropy-floor", "error", "Ar(g)", "coolprop"]]
    assert "1 atm" in f["hint"].iloc[0]


def test_database_standard_pressure_is_used():
    # at p° = 0.9 bar the floor rises by R ln(1/0.9) = 0.88 J/(mol·K): argon tabulated at 1 bar
    # now sits below it; at 1.01325 bar it clears it easily
    tables = [gas_table("Ar(g)")]
    assert len(run_checks(gas_context(tables=tables, polys=[], p_db_bar=0.9),
                          ("thirdlaw.gas-entropy-floor",))) == 1
    assert len(run_checks(gas_context(tables=tables, polys=[], p_db_bar=1.01325),
                          ("thirdlaw.gas-entropy-floor",))) == 0


def test_polynomial_entropy_constant_too_low_is_flagged_at_the_lower_end():
    # planted defect: N2's fit with b2 lowered by 60 J/(mol·K)/R: S(300 K) ≈ 131.6 < S_tr ≈ 135.2
    rec, segs = gas_poly("N2(g)")
    for s in segs:
        s["b2"] -= 60.0 / R
    f = run_checks(gas_context(tables=[], polys=[(rec, segs)]), ("thirdlaw.gas-entropy-floor",))
    assert f["severity"].tolist() == ["error"]
    assert f["t_k"].iloc[0] == pytest.approx(300.0)          # S − S_tr rises with T when Cp ≥ 5/2 R


def test_interior_minimum_is_found_where_cp_dips_below_translation():
    # Cp/R = 2.5 + 2e-6 (T − 300)(T − 900) dips below 5/2 on 300–900 K, so S − S_tr falls
    # all the way to 900 K; with b2 set so S = S_tr + 0.02 at 300 K the minimum (at 900 K)
    # lies below the floor although both segment ends' Cp are exactly 5/2 R
    c = np.zeros(9)
    c[2], c[3], c[4] = 2.5 + 2e-6 * 300 * 900, -2e-6 * 1200, 2e-6
    from pipeline.physics import sackur_tetrode_entropy
    from pipeline.thermo import evaluate
    c[8] = (sackur_tetrode_entropy(300.0, 39.948, 1.0) + 0.02 - evaluate(c, 300.0).s) / R
    rec = poly_record("Ar(g)", "s", [(300.0, 900.0, c)])
    f = thirdlaw_gas_entropy_floor(context([rec]))
    assert f["severity"].tolist() == ["error"]
    assert f["t_k"].iloc[0] == pytest.approx(900.0)


def test_gas_floor_override_is_honoured(tmp_path):
    rec, pts = gas_table("Ar(g)")
    pts["s_j_mol_k"] -= 0.2
    cfg = config_from(tmp_path, '[checks."thirdlaw.gas-entropy-floor"]\nj_mol_k = 0.3\n')
    assert len(run_checks(gas_context(tables=[(rec, pts)], polys=[]), ("thirdlaw.gas-entropy-floor",))) == 1
    assert len(run_checks(gas_context(tables=[(rec, pts)], polys=[], config=cfg),
                          ("thirdlaw.gas-entropy-floor",))) == 0
