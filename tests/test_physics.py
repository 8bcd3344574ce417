"""Debye and Sackur–Tetrode functions against their limits, quadrature and published values."""
from __future__ import annotations

import math

import numpy as np
import pytest
from scipy import constants as sc
from scipy.integrate import quad

from pipeline import physics
from pipeline.constants import R


def _cv_quad(x: float) -> float:
    """Cv/3nR = (3/x³) ∫₀ˣ t⁴eᵗ/(eᵗ−1)² dt by adaptive quadrature (scipy.integrate.quad),
    the textbook definition (Debye 1912), independent of the module's formula."""
    f = lambda t: t ** 4 * math.exp(-t) / (-math.expm1(-t)) ** 2 if t > 0 else 0.0  # noqa: E731
    val, _ = quad(f, 0.0, x, limit=200, epsabs=1e-14, epsrel=1e-12)
    return 3.0 * val / x ** 3


def test_debye_heat_capacity_at_theta_equals_tabulated_value():
    # Cv/3nR = 0.952 at T = θ_D (standard tables of the Debye heat-capacity function;
    # value from memory, checked here against an independent scipy quadrature too).
    assert physics.debye_cv_fraction(1.0) == pytest.approx(0.952, abs=5e-4)
    assert _cv_quad(1.0) == pytest.approx(0.952, abs=5e-4)


@pytest.mark.parametrize("x", [1e-3, 0.1, 0.5, 1.0, 2.0, 5.0, 10.0, 20.0, 50.0])
def test_debye_heat_capacity_matches_quadrature(x):
    assert physics.debye_cv_fraction(x) == pytest.approx(_cv_quad(x), rel=1e-9)


@pytest.mark.parametrize("x", [0.2, 1.0, 3.0, 10.0, 40.0])
def test_debye_entropy_is_integral_of_cv_over_t(x):
    # S(T) = ∫₀ᵀ Cv/T' dT' (third law, S(0) = 0); with x' = θ/T': S/3nR = ∫_x^∞ c(x')/x' dx'.
    val, _ = quad(lambda u: _cv_quad(u) / u, x, 200.0, limit=200, epsrel=1e-10)
    tail = (4 * math.pi ** 4 / 5) / (3 * 200.0 ** 3)  # T³ law beyond x = 200: ∫ c/x = c/3
    assert physics.debye_entropy_fraction(x) == pytest.approx(val + tail, rel=1e-7)


def test_debye_low_temperature_limit_t_cubed_law():
    # Debye T³ law: Cv = (12π⁴/5) nR (T/θ)³ and S = Cv/3 for T ≪ θ (Debye 1912).
    t, theta, n = 2.0, 400.0, 1
    cv = physics.debye_heat_capacity(t, theta, n)
    assert cv == pytest.approx(12 * math.pi ** 4 / 5 * n * R * (t / theta) ** 3, rel=1e-9)
    assert physics.debye_entropy(t, theta, n) == pytest.approx(cv / 3, rel=1e-9)


def test_debye_high_temperature_limit_dulong_petit():
    # Dulong–Petit: Cv → 3nR for T ≫ θ (Dulong & Petit 1819); the first correction is
    # −x²/20 (expansion of the Debye function).
    n = 2
    for t in (1e4, 1e5):
        x = 100.0 / t
        assert physics.debye_heat_capacity(t, 100.0, n) == pytest.approx(3 * n * R * (1 - x * x / 20), rel=1e-9)


def test_debye_temperature_inverts_heat_capacity():
    theta = np.array([50.0, 150.0, 300.0, 1000.0, 3000.0])
    t = np.array([10.0, 20.0, 5.0, 30.0, 300.0])
    n = np.array([1, 2, 3, 1, 5])
    cp = physics.debye_heat_capacity(t, theta, n)
    assert physics.debye_temperature(cp, t, n) == pytest.approx(theta, rel=1e-9)


def test_debye_temperature_undefined_at_or_above_dulong_petit():
    out = physics.debye_temperature(np.array([3 * R, 3.1 * R, 0.0, -1.0]), 10.0, 1)
    assert np.isnan(out).all()


def test_sackur_tetrode_argon_against_janaf():
    # Argon, 298.15 K, 1 bar: S° = 154.8 J/(mol·K), entirely translational (NIST-JANAF
    # Thermochemical Tables, 4th ed., Chase 1998; value from memory).
    s = physics.sackur_tetrode_entropy(298.15, 39.948, 1.0)
    assert s == pytest.approx(154.8, abs=0.06)


def test_sackur_tetrode_argon_against_chemicals():
    # chemicals 1.x, S0g(CAS 7440-37-1, method="WEBBOOK"): the NIST Chemistry WebBook
    # standard entropy of argon gas, 154.842 J/(mol·K) at 298.15 K, 1 bar.
    import chemicals  # a test dependency: a missing one must fail, not skip
    ref = chemicals.S0g("7440-37-1", method="WEBBOOK")
    assert physics.sackur_tetrode_entropy(298.15, 39.948, 1.0) == pytest.approx(ref, abs=0.01)


def test_sackur_tetrode_pressure_and_temperature_dependence():
    # Ideal gas: ∂S/∂ln p = −R and, at constant p, S_tr rises by (5/2) R ln(T2/T1).
    s1 = physics.sackur_tetrode_entropy(500.0, 28.0, 1.0)
    assert physics.sackur_tetrode_entropy(500.0, 28.0, sc.atm / 1e5) == pytest.approx(s1 - R * math.log(1.01325), abs=1e-10)
    assert physics.sackur_tetrode_entropy(1000.0, 28.0, 1.0) - s1 == pytest.approx(2.5 * R * math.log(2), abs=1e-10)
