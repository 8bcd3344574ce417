"""range.extrapolation: end segments extended below T_low and above T_high."""
from __future__ import annotations

import numpy as np
import pytest

from pipeline.checks.extrapolation import range_extrapolation
from pipeline.constants import R
from tests.builders import context, poly_record
from tests.checks.gas_reference import GASES, config_from, gas_context, gas_poly, run_checks


def coef(a1=0.0, a3=3.5, a7=0.0):
    c = np.zeros(9)
    c[0], c[2], c[6] = a1, a3, a7
    return c


def low_dip():
    # Cp/R = 3.5 − 85000/T²: 2.56 at 300 K (in range, above 5/2), −0.28 at 150 K
    return poly_record("N2(g)", "src", [(300.0, 1000.0, coef(a1=-85000.0))])


def high_rise():
    # Cp/R = 3.5 + 1.0 (T/1000)⁴: 4.5 at T_high = 1000 K (the 4.5 R limit), 8.56 at 1500 K
    return poly_record("N2(g)", "src", [(300.0, 1000.0, coef(a7=1.0e-12))])


def test_flat_cp_passes():
    assert len(range_extrapolation(context([poly_record("N2(g)", "s", [(300.0, 1000.0, coef())])]))) == 0


def test_negative_cp_below_range_is_a_warning():
    f = range_extrapolation(context([low_dip()]))
    assert f[["check_id", "severity", "subject", "source_id"]].values.tolist() == [
        ["range.extrapolation", "warning", "N2(g)", "src"]]
    assert f["t_k"].iloc[0] == pytest.approx(150.0)          # max(300/2, 50)
    assert f["observed"].iloc[0] == pytest.approx((3.5 - 85000 / 150 ** 2) * R)
    assert "below" in f["message"].iloc[0]


def test_leaving_the_gas_ceiling_above_range_is_info():
    f = range_extrapolation(context([high_rise()]))
    assert f["severity"].tolist() == ["info"]
    assert f["t_k"].iloc[0] == pytest.approx(1500.0)
    assert f["expected"].iloc[0] == pytest.approx(1.25 * 4.5 * R)   # cp.gas-ceiling's warning line


def test_condensed_phase_only_needs_positive_cp():
    rec = poly_record("Fe(cr)", "s", [(300.0, 1000.0, coef(a7=1.0e-12))])
    assert len(range_extrapolation(context([rec]))) == 0


def test_no_low_extension_below_50_k():
    # T_low = 40 K: max(20, 50) = 50 K is above T_low, so nothing is extrapolated below.
    # Cp/R = 3.5 − 4000/T²: 1.0 at 40 K, but negative below 33.8 K, where nobody looks.
    rec = poly_record("H2O(cr)", "s", [(40.0, 200.0, coef(a1=-4000.0))])
    assert len(range_extrapolation(context([rec]))) == 0
    # the same curve from 60 K is extended down to 50 K and still positive there ...
    rec = poly_record("H2O(cr)", "s", [(60.0, 200.0, coef(a1=-4000.0))])
    assert len(range_extrapolation(context([rec]))) == 0
    # ... while Cp/R = 3.5 − 12000/T² (1.6 at T_low = 80 K) is extended down to
    # max(40, 50) = 50 K, where it is −1.3: flagged
    rec = poly_record("H2O(cr)", "s", [(80.0, 200.0, coef(a1=-12000.0))])
    f = range_extrapolation(context([rec]))
    assert f["severity"].tolist() == ["warning"]
    assert f["t_k"].iloc[0] == pytest.approx(50.0)


def test_extension_overrides_are_honoured(tmp_path):
    cfg = config_from(tmp_path, '[checks."range.extrapolation"]\nhigh_factor = 1.1\n')
    assert len(range_extrapolation(context([high_rise()], config=cfg))) == 0
    # extension only down to 200 K: Cp/R(200) = 1.375 > 0 but below 5/2 → info, not warning
    cfg = config_from(tmp_path, '[checks."range.extrapolation"]\nlow_min_k = 200\n')
    f = range_extrapolation(context([low_dip()], config=cfg))
    assert f["severity"].tolist() == ["info"]
    assert f["t_k"].iloc[0] == pytest.approx(200.0)


def test_ceiling_setting_is_shared_with_cp_gas_ceiling(tmp_path):
    cfg = config_from(tmp_path, '[checks."cp.gas-ceiling"]\nmolecule_warning_factor = 2.0\n')
    assert len(range_extrapolation(context([high_rise()], config=cfg))) == 0


def test_coolprop_fits_extrapolate_cleanly():
    # NASA-7 fits of CoolProp ideal-gas Cp (Bell et al. 2014): smooth 4th-degree fits stay
    # physical from T_low/2 to 1.5 T_high
    assert len(run_checks(gas_context(tables=[]), ("range.extrapolation",))) == 0


def test_coolprop_fit_with_a_diverging_end_is_flagged():
    # planted defect: a −9R (T/3000)⁴ term in CO2's upper segment (300–2000 K fit): still
    # ≥ 5.5 R inside its range, negative by 3000 K = 1.5 × T_high
    rec, segs = gas_poly("CO2(g)")
    segs[1]["a7"] -= 9.0 / 3000.0 ** 4
    polys = [gas_poly(s) for s in GASES if s != "CO2(g)"] + [(rec, segs)]
    f = run_checks(gas_context(tables=[], polys=polys), ("range.extrapolation", "cp.gas-floor"))
    assert f[["check_id", "severity", "subject"]].values.tolist() == [
        ["range.extrapolation", "warning", "CO2(g)"]]
    assert 2000.0 < f["t_k"].iloc[0] <= 3000.0
