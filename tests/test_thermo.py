"""The canonical evaluator against independent numerical integration and CODATA R."""
from __future__ import annotations

import math

import numpy as np
import pandas as pd
import pytest
from scipy import constants, integrate

from pipeline import constants as C
from pipeline.thermo import COEF_COLUMNS, SegmentIndex, evaluate, from_nasa7, from_shomate, on_grid, to_nasa7

# A realistic NASA-9 style segment with every term active (invented coefficients of the
# magnitude of a triatomic gas; only self-consistency is tested here).
COEF = np.array([4.0e4, -6.0e2, 6.0, 2.0e-3, -1.0e-6, 3.0e-10, -4.0e-14, -4.0e4, 5.0])


def test_r_is_codata_2018():
    """R = N_A k_B exactly since the 2019 SI (CODATA 2018): 8.314462618… J/(mol·K)."""
    assert C.R == constants.R
    assert C.R == pytest.approx(constants.N_A * constants.k, rel=1e-15)
    assert C.R == pytest.approx(8.314462618, abs=1e-9)


def test_atm_and_calorie_definitions():
    """1 atm = 101325 Pa (CGPM 1954); thermochemical calorie = 4.184 J (NBS 1956)."""
    assert C.ATM_BAR * C.BAR_PA == constants.atm
    assert C.CAL_TH_J == constants.calorie
    assert C.R_LN_ATM == pytest.approx(0.10940, abs=5e-5)  # R ln 1.01325 (inputs.md)


@pytest.mark.parametrize("t1,t2", [(300.0, 1000.0), (1000.0, 3500.0), (200.0, 6000.0)])
def test_enthalpy_and_entropy_follow_from_cp(t1, t2):
    """H(T2) − H(T1) = ∫Cp dT and S(T2) − S(T1) = ∫Cp/T dT (scipy.integrate.quad)."""
    cp = lambda t: evaluate(COEF, t).cp
    dh, _ = integrate.quad(cp, t1, t2, epsabs=1e-10, epsrel=1e-12, limit=200)
    ds, _ = integrate.quad(lambda t: cp(t) / t, t1, t2, epsabs=1e-12, epsrel=1e-12, limit=200)
    p1, p2 = evaluate(COEF, t1), evaluate(COEF, t2)
    assert p2.h - p1.h == pytest.approx(dh, rel=1e-10, abs=1e-7)
    assert p2.s - p1.s == pytest.approx(ds, rel=1e-10, abs=1e-10)


def test_gibbs_and_derivative():
    """G = H − TS, and dCp/dT equals a central difference of Cp."""
    t = np.linspace(250, 5000, 40)
    p = evaluate(COEF, t)
    np.testing.assert_allclose(p.g, p.h - t * p.s, rtol=1e-14)
    eps = 1e-3
    fd = (evaluate(COEF, t + eps).cp - evaluate(COEF, t - eps).cp) / (2 * eps)
    np.testing.assert_allclose(p.dcp_dt, fd, rtol=1e-6, atol=1e-9)


def test_on_grid_broadcasts():
    coefs = np.stack([COEF, COEF * 1.01])
    t = np.array([300.0, 600.0, 900.0])
    grid = on_grid(coefs, t)
    assert grid.cp.shape == (2, 3)
    np.testing.assert_allclose(grid.cp[1], evaluate(coefs[1], t).cp)


def test_nasa7_published_equations():
    """NASA 7-term equations as published (McBride, Gordon & Reno, NASA TM-4513, 1993)."""
    c = np.array([3.5, 1e-3, -2e-7, 3e-11, -1e-15, -1000.0, 4.0])
    t = np.array([300.0, 1500.0, 4000.0])
    cp_r = c[0] + c[1] * t + c[2] * t**2 + c[3] * t**3 + c[4] * t**4
    h_rt = c[0] + c[1] * t / 2 + c[2] * t**2 / 3 + c[3] * t**3 / 4 + c[4] * t**4 / 5 + c[5] / t
    s_r = c[0] * np.log(t) + c[1] * t + c[2] * t**2 / 2 + c[3] * t**3 / 3 + c[4] * t**4 / 4 + c[6]
    p = evaluate(from_nasa7(c), t)
    np.testing.assert_allclose(p.cp, cp_r * C.R, rtol=1e-13)
    np.testing.assert_allclose(p.h, h_rt * C.R * t, rtol=1e-13)
    np.testing.assert_allclose(p.s, s_r * C.R, rtol=1e-13)
    np.testing.assert_allclose(to_nasa7(from_nasa7(c)), c)


def test_shomate_published_equations():
    """Shomate form as in the NIST Chemistry WebBook (Shomate 1954): t = T/1000."""
    A, B, Cc, D, E, F, G, H = 30.0, 6.8, -1.2, 0.1, 0.08, -11.0, 230.0, 0.0
    t = np.array([300.0, 800.0, 1200.0]) / 1000
    cp = A + B * t + Cc * t**2 + D * t**3 + E / t**2
    h_minus = A * t + B * t**2 / 2 + Cc * t**3 / 3 + D * t**4 / 4 - E / t + F - H  # kJ/mol
    s = A * np.log(t) + B * t + Cc * t**2 / 2 + D * t**3 / 3 - E / (2 * t**2) + G
    p = evaluate(from_shomate(np.array([A, B, Cc, D, E, F, G, H])), t * 1000)
    np.testing.assert_allclose(p.cp, cp, rtol=1e-12)
    np.testing.assert_allclose(p.h, (h_minus + H) * 1000, rtol=1e-12)
    np.testing.assert_allclose(p.s, s, rtol=1e-12)


def test_segment_index_picks_the_right_segment():
    lo = from_nasa7(np.array([3.0, 0, 0, 0, 0, 0, 0]))
    hi = from_nasa7(np.array([4.0, 0, 0, 0, 0, 0, 0]))
    other = from_nasa7(np.array([2.5, 0, 0, 0, 0, 0, 0]))
    rows = [("a", 300, 1000, lo), ("a", 1000, 5000, hi), ("b", 200, 6000, other)]
    seg = pd.DataFrame([dict(record_id=r, t_low_k=l, t_high_k=h, **dict(zip(COEF_COLUMNS, c))) for r, l, h, c in rows])
    idx = SegmentIndex.from_frame(seg.sample(frac=1, random_state=1))
    p = idx.evaluate_records(np.array(["a", "a", "a", "b", "a"]), np.array([500, 1000, 2000, 2000, 9000.0]))
    np.testing.assert_allclose(p.cp / C.R, [3.0, 3.0, 4.0, 2.5, 4.0])
    with pytest.raises(KeyError):
        idx.evaluate_records(np.array(["zz"]), np.array([300.0]))
