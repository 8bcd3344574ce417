"""segment.kink: clean joints, slope jumps, overrides, CoolProp fits."""
from __future__ import annotations

import numpy as np
import pytest

from pipeline.checks.segments import segment_kink
from pipeline.constants import R
from pipeline.thermo import evaluate
from tests.builders import context, poly_record
from tests.checks.gas_reference import GASES, config_from, gas_context, gas_poly, run_checks


def linear_cp(cp_at_joint_r: float, slope_r: float, t_joint: float = 1000.0) -> np.ndarray:
    """Canonical coefficients of Cp/R = cp_at_joint + slope (T − t_joint) [slope in 1/K]."""
    c = np.zeros(9)
    c[2] = cp_at_joint_r - slope_r * t_joint
    c[3] = slope_r
    return c


def two_segments(slope_lo_r, slope_hi_r):
    return poly_record("N2(g)", "src", [(300.0, 1000.0, linear_cp(4.0, slope_lo_r)),
                                        (1000.0, 3000.0, linear_cp(4.0, slope_hi_r))])


def test_same_slope_passes():
    assert len(segment_kink(context([two_segments(5e-4, 5e-4)]))) == 0


def test_slope_jump_is_a_warning_at_the_joint():
    # slopes 1e-3 R and 5e-4 R per K: jump 4.2e-3 J/(mol·K²) = 50 % of the larger slope
    f = segment_kink(context([two_segments(1e-3, 5e-4)]))
    assert f[["check_id", "severity", "subject", "source_id"]].values.tolist() == [
        ["segment.kink", "warning", "N2(g)", "src"]]
    assert f["t_k"].iloc[0] == pytest.approx(1000.0)
    assert f["observed"].iloc[0] == pytest.approx(5e-4 * R)
    # the tolerance is the larger of 10 % of the slope (8.3e-4) and the 1e-3 floor
    assert f["tolerance"].iloc[0] == pytest.approx(1e-3)
    assert f["unit"].iloc[0] == "J/(mol*K^2)"


def test_tiny_slopes_stay_under_the_absolute_floor():
    # both slopes ~1e-5 R/K: relative jump 50 % but only 4e-5 J/(mol·K²) < 1e-3
    assert len(segment_kink(context([two_segments(2e-5, 1e-5)]))) == 0


def test_sign_change_gets_its_hint():
    f = segment_kink(context([two_segments(5e-4, -5e-4)]))
    assert "sign" in f["hint"].iloc[0]


def test_overrides_are_honoured(tmp_path):
    rec = two_segments(1e-3, 5e-4)
    cfg = config_from(tmp_path, '[checks."segment.kink"]\nslope_rel = 0.6\n')
    assert len(segment_kink(context([rec], config=cfg))) == 0
    cfg = config_from(tmp_path, '[checks."segment.kink"]\nslope_abs_j_mol_k2 = 0.01\n')
    assert len(segment_kink(context([rec], config=cfg))) == 0


def test_coolprop_fits_have_no_kink():
    # NASA-7 fits of CoolProp ideal-gas Cp (Bell et al. 2014), constrained to share Cp and
    # dCp/dT at 1000 K, as a careful evaluator fits them
    f = run_checks(gas_context(tables=[]), ("segment.kink",))
    assert len(f) == 0


def test_coolprop_fit_with_a_planted_kink_is_flagged():
    # planted defect: tilt CO2's upper segment about the joint so Cp still meets at 1000 K
    # but the slope jumps by 30 % of its own value
    rec, segs = gas_poly("CO2(g)")
    up = segs[1]
    coef = np.array([up[k] for k in ("a1", "a2", "a3", "a4", "a5", "a6", "a7", "b1", "b2")])
    slope = evaluate(coef, 1000.0).dcp_dt / R
    up["a4"] += 0.3 * slope
    up["a3"] -= 0.3 * slope * 1000.0
    polys = [gas_poly(s) for s in GASES if s != "CO2(g)"] + [(rec, segs)]
    f = run_checks(gas_context(tables=[], polys=polys), ("segment.kink",))
    assert f[["severity", "subject", "t_k"]].values.tolist() == [["warning", "CO2(g)", 1000.0]]
