"""Statistical-mechanics reference functions used by the physics checks.

Two closed models give lower bounds and low-temperature limits that any correct table or
fit must respect:

* the **Debye model** of a crystal (P. Debye, "Zur Theorie der spezifischen Wärmen",
  Ann. Phys. 344 (1912) 789), which gives Cv and S of 3n harmonic modes with a quadratic
  density of states cut off at the Debye temperature θ_D;
* the **Sackur–Tetrode** translational entropy of an ideal gas (O. Sackur, Ann. Phys. 341
  (1911) 958; H. Tetrode, Ann. Phys. 343 (1912) 434), the entropy of translation alone.

Both are textbook results; the forms below follow D. A. McQuarrie, *Statistical Mechanics*
(University Science Books, 2000), ch. 5 (monatomic ideal gas) and ch. 11 (crystals), and
L. D. Landau & E. M. Lifshitz, *Statistical Physics*, Part 1, 3rd ed. (1980), section
"Debye's interpolation formula".

Every function is vectorised (numpy broadcasting); units are in brackets.
"""
from __future__ import annotations

from functools import lru_cache

import numpy as np

from .constants import BAR_PA, H_PLANCK, K_B, N_A, R

# Gauss–Legendre nodes on [0, 1] for ∫0^x t³/(eᵗ − 1) dt. The integrand is analytic with its
# nearest poles at t = ±2πi, so 96 nodes over [0, 60] converge to ~1e-13 relative.
_GL_N = 96
_gl_x, _gl_w = np.polynomial.legendre.leggauss(_GL_N)
_GL_U = (_gl_x + 1.0) / 2.0
_GL_W = _gl_w / 2.0
#: Beyond this x = θ/T the Debye integral equals its limit π⁴/15 to better than 1e-20.
_X_SATURATE = 60.0
_PI4_15 = np.pi ** 4 / 15.0


def debye_integral3(x) -> np.ndarray:
    """The Debye integral I₃(x) = ∫₀ˣ t³/(eᵗ − 1) dt [dimensionless].

    Parameters
    ----------
    x : array
        Reduced inverse temperature θ_D/T ≥ 0 [dimensionless]; ``inf`` allowed (T = 0).

    Notes
    -----
    96-point Gauss–Legendre quadrature on [0, min(x, 60)]; above x = 60 the integral equals
    π⁴/15 (Riemann ζ: Γ(4)ζ(4) = π⁴/15) to better than 60³e⁻⁶⁰.
    """
    x = np.asarray(x, float)
    xs = np.minimum(x, _X_SATURATE)
    t = xs[..., None] * _GL_U
    with np.errstate(divide="ignore", invalid="ignore"):
        f = np.where(t > 0, t ** 3 / np.expm1(t), 0.0)
    val = xs * np.sum(_GL_W * f, axis=-1)
    return np.where(x >= _X_SATURATE, _PI4_15, val)


def debye_d3(x) -> np.ndarray:
    """Debye function D₃(x) = (3/x³) ∫₀ˣ t³/(eᵗ − 1) dt = U_vib/(3nRT) [dimensionless].

    D₃ → 1 − 3x/8 for x → 0 and π⁴/(5x³) for x → ∞ (McQuarrie 2000, ch. 11).
    """
    x = np.asarray(x, float)
    with np.errstate(divide="ignore", invalid="ignore"):
        d = 3.0 * debye_integral3(x) / x ** 3
        small = 1.0 - 3.0 * x / 8.0 + x * x / 20.0
    return np.where(x < 1e-4, small, d)


def _bose_term(x) -> np.ndarray:
    """x/(eˣ − 1), with its limits 1 at x = 0 and 0 at x = ∞."""
    x = np.asarray(x, float)
    with np.errstate(divide="ignore", invalid="ignore", over="ignore"):
        v = x / np.expm1(x)
    return np.where(x < 1e-8, 1.0 - x / 2.0, np.where(np.isinf(x), 0.0, v))


def debye_cv_fraction(x) -> np.ndarray:
    """Debye heat capacity per 3nR: Cv/(3nR) = 4 D₃(x) − 3x/(eˣ − 1), x = θ_D/T.

    Equivalent to (3/x³) ∫₀ˣ t⁴ eᵗ/(eᵗ − 1)² dt (integration by parts). Limits:
    1 (Dulong–Petit) as x → 0, (4π⁴/5)/x³ (Debye T³ law) as x → ∞.
    Reference: Debye (1912); McQuarrie, *Statistical Mechanics* (2000), ch. 11.
    """
    x = np.asarray(x, float)
    return 4.0 * debye_d3(x) - 3.0 * _bose_term(x)


def debye_entropy_fraction(x) -> np.ndarray:
    """Debye entropy per 3nR: S/(3nR) = (4/3) D₃(x) − ln(1 − e⁻ˣ), x = θ_D/T.

    From S = (U − A)/T with U/(3nRT) = D₃ and A/(3nRT) = ln(1 − e⁻ˣ) − D₃/3
    (Landau & Lifshitz, *Statistical Physics* Part 1, 1980, Debye's interpolation formula). At x → ∞ it tends to
    (4π⁴/15)/x³ = Cv/(3 · 3nR): the low-temperature entropy is one third of Cv.
    """
    x = np.asarray(x, float)
    with np.errstate(divide="ignore", invalid="ignore"):
        log_term = np.log(-np.expm1(-x))
    return (4.0 / 3.0) * debye_d3(x) - log_term


def debye_heat_capacity(t_k, theta_k, n_atoms) -> np.ndarray:
    """Debye heat capacity Cv [J/(mol*K)] of n atoms per formula unit.

    Parameters
    ----------
    t_k : temperature [K]; theta_k : Debye temperature [K]; n_atoms : atoms per formula unit.
    """
    t = np.asarray(t_k, float)
    with np.errstate(divide="ignore"):
        x = np.asarray(theta_k, float) / t
    return 3.0 * np.asarray(n_atoms, float) * R * debye_cv_fraction(x)


def debye_entropy(t_k, theta_k, n_atoms) -> np.ndarray:
    """Debye entropy S(T) − S(0) [J/(mol*K)] of n atoms per formula unit (see
    :func:`debye_entropy_fraction`)."""
    t = np.asarray(t_k, float)
    with np.errstate(divide="ignore"):
        x = np.asarray(theta_k, float) / t
    return 3.0 * np.asarray(n_atoms, float) * R * debye_entropy_fraction(x)


@lru_cache(maxsize=1)
def _cv_table():
    """ln x and ln(Cv/3nR) on a grid from x = 1e-3 to 60 (Cv/3nR falls monotonically)."""
    x = np.geomspace(1e-3, _X_SATURATE, 4001)
    return np.log(x), np.log(debye_cv_fraction(x))


def _dcv_dx(x: np.ndarray, c: np.ndarray) -> np.ndarray:
    """d(Cv/3nR)/dx = −3c/x + 3x eˣ/(eˣ − 1)² (from c = 3x⁻³ ∫₀ˣ t⁴eᵗ/(eᵗ−1)² dt)."""
    with np.errstate(over="ignore", invalid="ignore"):
        b = _bose_term(x)
        term = 3.0 * b * b * np.exp(x) / x
    term = np.where(np.isfinite(term), term, 0.0)
    return -3.0 * c / x + term


def debye_x_from_cv_fraction(c) -> np.ndarray:
    """Invert Cv/(3nR) = c for x = θ_D/T, vectorised; NaN for c ∉ (0, 1).

    Monotone interpolation of ln x against ln c on a 4001-point precomputed table, then two
    Newton steps on the exact function (converged to ~1e-12 relative). Outside the table
    the asymptotes are exact to that precision: x = (4π⁴/(5c))^(1/3) for c < Cv(60)/3nR
    (T³ law) and x = √(20 (1 − c)) for c > Cv(1e-3)/3nR (high-temperature expansion
    c = 1 − x²/20 + …).
    """
    c = np.asarray(c, float)
    lx, lc = _cv_table()
    ok = (c > 0) & (c < 1)
    cs = np.where(ok, c, 0.5)
    with np.errstate(divide="ignore", invalid="ignore"):
        lnc = np.log(cs)
        x = np.exp(np.interp(lnc, lc[::-1], lx[::-1]))
        x = np.where(lnc < lc[-1], (4 * np.pi ** 4 / (5 * cs)) ** (1 / 3), x)
        x = np.where(lnc > lc[0], np.sqrt(20 * (1 - cs)), x)
        for _ in range(2):
            f = debye_cv_fraction(x) - cs
            d = _dcv_dx(x, f + cs)
            step = np.where(d != 0, f / d, 0.0)
            x = np.clip(x - step, x / 2, x * 2)
    return np.where(ok, x, np.nan)


def debye_temperature(cp_j_mol_k, t_k, n_atoms) -> np.ndarray:
    """Debye temperature θ_D [K] whose heat capacity equals ``cp`` at ``t_k``.

    Solves 3nR · Cv/(3nR)(θ_D/T) = Cp for θ_D. No solution exists when Cp ≥ 3nR (above the
    Dulong–Petit limit) or Cp ≤ 0: NaN. At the low temperatures where it is used (≤ 30 K)
    Cp − Cv = T V α²/κ_T is negligible (it vanishes as T⁷ in the Debye regime).
    """
    n = np.asarray(n_atoms, float)
    with np.errstate(divide="ignore", invalid="ignore"):
        c = np.asarray(cp_j_mol_k, float) / (3.0 * n * R)
    return debye_x_from_cv_fraction(c) * np.asarray(t_k, float)


def sackur_tetrode_entropy(t_k, molar_mass_g_mol, p_bar=1.0) -> np.ndarray:
    """Translational entropy of an ideal gas [J/(mol*K)] (Sackur–Tetrode equation).

    S_tr = R [ ln( (2π m k_B T / h²)^{3/2} · k_B T / p ) + 5/2 ],  m = M / N_A.

    Parameters
    ----------
    t_k : temperature [K]; molar_mass_g_mol : molar mass [g/mol]; p_bar : pressure [bar].

    It is the whole entropy of a structureless particle with a non-degenerate ground state
    (argon: 154.8 J/(mol·K) at 298.15 K and 1 bar) and a strict lower bound for any
    molecule, whose rotations, vibrations and electronic levels only add entropy.
    References: Sackur (1911); Tetrode (1912); McQuarrie, *Statistical Mechanics* (2000),
    ch. 5. Constants: CODATA 2018 (exact SI values) via scipy.constants.
    """
    t = np.asarray(t_k, float)
    m = np.asarray(molar_mass_g_mol, float) * 1e-3 / N_A
    p = np.asarray(p_bar, float) * BAR_PA
    with np.errstate(divide="ignore", invalid="ignore"):
        lam = 1.5 * np.log(2.0 * np.pi * m * K_B * t / H_PLANCK ** 2)
        return R * (lam + np.log(K_B * t / p) + 2.5)
