"""Physical models behind the demo database (``scripts/make_demo.py``).

The demo's numbers are not copied from any table: every species is a small physical model
whose parameters are invented but realistic, and every file in ``raw/`` is computed from
these models. The models are textbook statistical mechanics:

* **Ideal gases: rigid rotor – harmonic oscillator (RRHO)** with electronic levels.
  Translation (Sackur–Tetrode), classical rigid rotation (linear: σ, B; nonlinear: σ, A,
  B, C), one Einstein function per harmonic vibrational mode, and a sum over electronic
  levels. D. A. McQuarrie, *Statistical Mechanics* (Harper & Row, 1976), ch. 5 (monatomic
  gas), ch. 6 (diatomics), ch. 8 (polyatomics).
* **Crystals: Debye model** (P. Debye, Ann. Phys. 344 (1912) 789) for the lattice, optional
  Einstein modes (A. Einstein, Ann. Phys. 327 (1907) 180) for librations, an electronic
  term γT for metals, and the Nernst–Lindemann relation Cp − Cv = A Cp² T (W. Nernst &
  F. A. Lindemann, Z. Elektrochem. 17 (1911) 817), here with Cv² for Cp², for the dilation
  term. H and S come from ∫Cp dT and ∫Cp/T dT from 0 K (third-law consistent).
* **Liquid water**: an invented cubic Cp(T) about 308 K, joined to ice at the melting point
  by an enthalpy of fusion (G of both phases equal there by construction).

The standard formulas (McQuarrie 1976, eqs. 5-20, 6-31, 8-20)::

    S_trans = R [ln((2π m k T / h²)^{3/2} k T / p) + 5/2]            (Sackur–Tetrode)
    linear:    q_rot = T / (σ Θ_r),   S_rot = R (ln q_rot + 1),   H_rot = R T
    nonlinear: q_rot = (√π / σ) (T³ / (Θ_A Θ_B Θ_C))^{1/2},  S_rot = R (ln q_rot + 3/2),  H_rot = 3/2 R T
    vibration (x = Θ_v / T): Cv = R x² eˣ / (eˣ − 1)²,  H − H0 = R Θ_v / (eˣ − 1),
                             S = R [x / (eˣ − 1) − ln(1 − e⁻ˣ)]
    Debye (x_D = θ_D / T):  Cv = 9 n R (T/θ_D)³ ∫0^{x_D} x⁴ eˣ / (eˣ − 1)² dx

with Θ = (h c / k) ν̃ = c₂ ν̃ for a wavenumber ν̃ [cm⁻¹]. Absolute enthalpies follow the
usual convention H(298.15 K) = ΔfH°(298.15 K) (elements in their reference states: 0).

Units: T [K], p [bar], Cp and S [J/(mol*K)], H and G [J/mol]. Constants: CODATA 2018 via
``scipy.constants``. The models are independent of the ``pipeline`` package on purpose, so
the demo also tests the pipeline's readers, conversions and checks from the outside.
"""
from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np
from scipy import constants as sc

R = sc.R                                   # J/(mol*K), exact since 2019
T_REF = 298.15                             # K
P_STD_BAR = 1.0                            # bar
ATM_BAR = 1.01325                          # bar, 1 atm exactly
#: second radiation constant c₂ = h c / k [K*cm]: Θ = c₂ ν̃ with ν̃ in cm⁻¹
C2_CM_K = sc.h * sc.c / sc.k * 100.0

_GL_X, _GL_W = np.polynomial.legendre.leggauss(64)


def _gl_on(a, b, n_nodes=64):
    """Nodes (…, n) and weights (…, n) of Gauss–Legendre on [a, b] (broadcast)."""
    a = np.asarray(a, float)[..., None]
    b = np.asarray(b, float)[..., None]
    half = (b - a) / 2
    return a + half * (_GL_X + 1.0), half * _GL_W


def einstein_cv(theta_k, t_k):
    """Harmonic-oscillator heat capacity per mode, in units of R."""
    x = np.asarray(theta_k, float) / np.asarray(t_k, float)
    with np.errstate(over="ignore", invalid="ignore"):
        em = np.expm1(-x)          # e^{-x} − 1
        val = x * x * np.exp(-x) / (em * em)
    return np.where(x > 700, 0.0, val)


def einstein_u(theta_k, t_k):
    """(U − U0)/R per mode [K]: Θ / (eˣ − 1)."""
    x = np.asarray(theta_k, float) / np.asarray(t_k, float)
    with np.errstate(over="ignore"):
        return np.where(x > 700, 0.0, np.asarray(theta_k, float) / np.expm1(np.minimum(x, 700)))


def einstein_s(theta_k, t_k):
    """S/R per mode: x/(eˣ − 1) − ln(1 − e⁻ˣ)."""
    x = np.asarray(theta_k, float) / np.asarray(t_k, float)
    xs = np.minimum(x, 700)
    return np.where(x > 700, 0.0, xs / np.expm1(xs) - np.log(-np.expm1(-xs)))


def debye_cv(theta_k, t_k):
    """Debye heat capacity of one formula unit per atom, in units of 3R (0 … 1).

    Cv/(3R) = 3 (T/θ)³ ∫0^{θ/T} x⁴ eˣ/(eˣ − 1)² dx, by 64-point Gauss–Legendre on
    [0, min(θ/T, 60)] (the integrand beyond 60 is below 1e-19 of its peak).
    """
    t = np.asarray(t_k, float)
    x_d = np.asarray(theta_k, float) / np.where(t > 0, t, 1.0)
    xs = np.minimum(x_d, 60.0)
    nodes, w = _gl_on(0.0 * xs, xs)
    with np.errstate(over="ignore", invalid="ignore"):
        em = np.expm1(-nodes)
        f = np.where(nodes > 0, nodes ** 4 * np.exp(-nodes) / (em * em), 0.0)
    integral = np.sum(w * f, axis=-1)
    val = 3.0 * integral / xs ** 3
    # deep T³ region: the integral has saturated at 4π⁴/15
    val = np.where(x_d > 60.0, 3.0 * (4 * np.pi ** 4 / 15) / x_d ** 3, val)
    return np.where(t > 0, val, 0.0)


# ------------------------------------------------------------------------------ gases

@dataclass(frozen=True)
class Gas:
    """An ideal gas in the RRHO approximation with electronic levels.

    key : species key, e.g. ``CO2(g)``.
    molar_mass_g_mol : [g/mol] (IUPAC atomic weights).
    geometry : ``atom``, ``linear`` or ``nonlinear``.
    sigma : rotational symmetry number.
    rot_cm : rotational constants [cm⁻¹]: (B,) linear, (A, B, C) nonlinear, () atom.
    vib_cm : wavenumbers of the harmonic modes [cm⁻¹], degenerate modes repeated.
    elec : electronic levels as (degeneracy, energy [cm⁻¹]); ground level first.
    dfh298_j_mol : ΔfH°(298.15 K) [J/mol].
    """

    key: str
    molar_mass_g_mol: float
    geometry: str
    sigma: int = 1
    rot_cm: tuple = ()
    vib_cm: tuple = ()
    elec: tuple = ((1, 0.0),)
    dfh298_j_mol: float = 0.0

    def __post_init__(self):
        want = {"atom": 0, "linear": 1, "nonlinear": 3}[self.geometry]
        if len(self.rot_cm) != want:
            raise ValueError(f"{self.key}: {self.geometry} needs {want} rotational constants")

    # ---- parts, vectorised over T
    def _vib(self):
        return C2_CM_K * np.asarray(self.vib_cm, float)

    def _elec(self):
        g = np.asarray([e[0] for e in self.elec], float)
        th = C2_CM_K * np.asarray([e[1] for e in self.elec], float)
        return g, th

    def cp(self, t_k):
        """Cp [J/(mol*K)] = 5/2 R + Cp_rot + Σ Cv_vib + Cv_el."""
        t = np.asarray(t_k, float)
        rot = {"atom": 0.0, "linear": 1.0, "nonlinear": 1.5}[self.geometry]
        vib = sum((einstein_cv(th, t) for th in self._vib()), np.zeros_like(t))
        g, th = self._elec()
        w = g * np.exp(-th / t[..., None])
        q = w.sum(-1)
        m1 = (w * th).sum(-1) / q
        m2 = (w * th * th).sum(-1) / q
        el = (m2 - m1 * m1) / (t * t)
        return R * (2.5 + rot + vib + el)

    def h_minus_h0(self, t_k):
        """H(T) − H(0) [J/mol]."""
        t = np.asarray(t_k, float)
        rot = {"atom": 0.0, "linear": 1.0, "nonlinear": 1.5}[self.geometry]
        vib = sum((einstein_u(th, t) for th in self._vib()), np.zeros_like(t))
        g, th = self._elec()
        w = g * np.exp(-th / t[..., None])
        el = (w * th).sum(-1) / w.sum(-1)
        return R * ((2.5 + rot) * t + vib + el)

    def s(self, t_k, p_bar: float = P_STD_BAR):
        """S(T, p) [J/(mol*K)]: Sackur–Tetrode + rotation + vibration + electronic."""
        t = np.asarray(t_k, float)
        m = self.molar_mass_g_mol * 1e-3 / sc.N_A
        p = p_bar * 1e5
        lam = (2 * np.pi * m * sc.k * t / sc.h ** 2) ** 1.5
        s = np.log(lam * sc.k * t / p) + 2.5
        if self.geometry == "linear":
            theta = C2_CM_K * self.rot_cm[0]
            s = s + np.log(t / (self.sigma * theta)) + 1.0
        elif self.geometry == "nonlinear":
            ta, tb, tc = (C2_CM_K * x for x in self.rot_cm)
            s = s + np.log(np.sqrt(np.pi) / self.sigma * np.sqrt(t ** 3 / (ta * tb * tc))) + 1.5
        s = s + sum((einstein_s(th, t) for th in self._vib()), np.zeros_like(t))
        g, th = self._elec()
        w = g * np.exp(-th / t[..., None])
        q = w.sum(-1)
        s = s + np.log(q) + (w * th).sum(-1) / q / t
        return R * s

    def h(self, t_k):
        """Absolute H [J/mol] with H(298.15) = ΔfH°(298.15)."""
        return self.dfh298_j_mol + self.h_minus_h0(t_k) - self.h_minus_h0(T_REF)

    def g(self, t_k, p_bar: float = P_STD_BAR):
        t = np.asarray(t_k, float)
        return self.h(t) - t * self.s(t, p_bar)

    @property
    def is_gas(self) -> bool:
        return True


# --------------------------------------------------------------------- condensed phases

class _Integrated:
    """H − H(T0) and S − S(T0) of a Cp function by composite Gauss–Legendre quadrature:
    cumulative integrals at panel boundaries (panels of ``step`` K from ``t0``), plus one
    partial panel up to T. Accurate to ~1e-10 relative for the smooth Cp used here."""

    def __init__(self, cp, t0: float, t_max: float, step: float = 2.0):
        self.cp, self.t0, self.step = cp, t0, step
        edges = np.arange(t0, t_max + step, step)
        nodes, w = _gl_on(edges[:-1], edges[1:])
        c = cp(nodes)
        with np.errstate(divide="ignore", invalid="ignore"):
            c_over_t = np.where(nodes > 0, c / nodes, 0.0)
        self.edges = edges
        self.cum_h = np.concatenate([[0.0], np.cumsum((w * c).sum(-1))])
        self.cum_s = np.concatenate([[0.0], np.cumsum((w * c_over_t).sum(-1))])

    def __call__(self, t_k):
        t = np.asarray(t_k, float)
        if np.any(t > self.edges[-1]) or np.any(t < self.t0):
            raise ValueError(f"T outside the integrated span {self.t0}–{self.edges[-1]} K")
        i = np.clip(((t - self.t0) // self.step).astype(int), 0, len(self.edges) - 2)
        a = self.edges[i]
        nodes, w = _gl_on(a, t)
        c = self.cp(nodes)
        with np.errstate(divide="ignore", invalid="ignore"):
            c_over_t = np.where(nodes > 0, c / nodes, 0.0)
        return self.cum_h[i] + (w * c).sum(-1), self.cum_s[i] + (w * c_over_t).sum(-1)


@dataclass(frozen=True)
class Crystal:
    """A crystal: Debye lattice + Einstein modes + electronic γT + Nernst–Lindemann dilation.

    key : species key, e.g. ``MgO(cr)``.
    n_debye : atoms (or rigid units) per formula unit whose 3 lattice modes each are Debye-like.
    theta_debye_k : Debye temperature θ_D [K].
    einstein : (Θ_E [K], number of modes) pairs (e.g. librations of a molecular crystal).
    gamma_el : electronic Sommerfeld coefficient γ [J/(mol*K²)] (metals).
    a_nl : Nernst–Lindemann coefficient A [mol/J] in Cp − Cv = A Cv² T.
    dfh298_j_mol : ΔfH°(298.15 K) [J/mol].
    t_max_k : highest temperature the model is used at [K].
    """

    key: str
    n_debye: float
    theta_debye_k: float
    einstein: tuple = ()
    gamma_el: float = 0.0
    a_nl: float = 0.0
    dfh298_j_mol: float = 0.0
    t_max_k: float = 6000.0
    _int: _Integrated = field(init=False, repr=False, compare=False)

    def __post_init__(self):
        object.__setattr__(self, "_int", _Integrated(self.cp, 0.0, self.t_max_k * 1.6))

    def cv(self, t_k):
        t = np.asarray(t_k, float)
        cv = 3 * self.n_debye * R * debye_cv(self.theta_debye_k, t)
        for theta, n in self.einstein:
            cv = cv + n * R * np.where(t > 0, einstein_cv(theta, np.where(t > 0, t, 1.0)), 0.0)
        return cv + self.gamma_el * t

    def cp(self, t_k):
        t = np.asarray(t_k, float)
        cv = self.cv(t)
        return cv + self.a_nl * cv * cv * t

    def h_minus_h0(self, t_k):
        return self._int(t_k)[0]

    def s(self, t_k, p_bar: float = P_STD_BAR):
        """S [J/(mol*K)] = ∫0^T Cp/T dT (third law; a condensed phase's S does not depend on p
        to within 0.03 J/(mol*K) between 1 bar and 1 atm, so ``p_bar`` is ignored)."""
        return self._int(t_k)[1]

    def h(self, t_k):
        return self.dfh298_j_mol + self.h_minus_h0(t_k) - self.h_minus_h0(T_REF)

    def g(self, t_k, p_bar: float = P_STD_BAR):
        t = np.asarray(t_k, float)
        return self.h(t) - t * self.s(t)

    @property
    def is_gas(self) -> bool:
        return False


@dataclass(frozen=True)
class Liquid:
    """A liquid joined to its crystal at the melting point.

    Cp = Σ c_k (T − T_c)^k [J/(mol*K)]; at T_fus: H_l = H_cr + ΔfusH and S_l = S_cr + ΔfusH/T_fus,
    so G_l(T_fus) = G_cr(T_fus). The crystal's ΔfH°(298.15) must be chosen so that the liquid's
    H(298.15) equals ``dfh298_j_mol``; :func:`crystal_dfh_for_liquid` computes it.
    """

    key: str
    crystal: Crystal
    t_fus_k: float
    dh_fus_j_mol: float
    cp_coef: tuple            # c0, c1, c2, c3 about t_c_k
    t_c_k: float
    dfh298_j_mol: float = 0.0

    def cp(self, t_k):
        d = np.asarray(t_k, float) - self.t_c_k
        return sum(c * d ** k for k, c in enumerate(self.cp_coef))

    def _int_cp(self, a, b):
        """∫_a^b Cp dT and ∫_a^b Cp/T dT, exact (polynomial in T)."""
        p = np.polynomial.Polynomial(self.cp_coef)
        p_t = p(np.polynomial.Polynomial([-self.t_c_k, 1.0]))       # as a polynomial in T
        c = p_t.coef
        prim = p_t.integ()
        ih = prim(b) - prim(a)
        q = np.polynomial.Polynomial(c[1:]) if len(c) > 1 else np.polynomial.Polynomial([0.0])
        is_ = c[0] * (np.log(b) - np.log(a)) + (q.integ()(b) - q.integ()(a))
        return ih, is_

    def h(self, t_k):
        t = np.asarray(t_k, float)
        ih, _ = self._int_cp(T_REF, t)
        return self.dfh298_j_mol + ih

    def s(self, t_k, p_bar: float = P_STD_BAR):
        t = np.asarray(t_k, float)
        s_fus = self.crystal.s(self.t_fus_k) + self.dh_fus_j_mol / self.t_fus_k
        return s_fus + self._int_cp(self.t_fus_k, t)[1]

    def h_minus_h0(self, t_k):
        """H(T) − H_cr(0 K): the crystal's zero of enthalpy carried through fusion."""
        return self.h(t_k) - self.crystal.h(0.0)

    def g(self, t_k, p_bar: float = P_STD_BAR):
        t = np.asarray(t_k, float)
        return self.h(t) - t * self.s(t)

    @property
    def is_gas(self) -> bool:
        return False


def crystal_dfh_for_liquid(crystal: Crystal, t_fus_k: float, dh_fus_j_mol: float,
                           cp_coef, t_c_k: float, liquid_dfh298_j_mol: float) -> float:
    """ΔfH°(298.15) of the crystal that makes the liquid's H(298.15) = ``liquid_dfh298``:
    H_cr(T_fus) = H_l(298.15) − ∫_{T_fus}^{298.15} Cp_l dT − ΔfusH, then carried to 298.15
    along the crystal's own Cp."""
    probe = Liquid("probe", crystal, t_fus_k, dh_fus_j_mol, tuple(cp_coef), t_c_k, liquid_dfh298_j_mol)
    h_l_fus = float(probe.h(t_fus_k))
    h_cr_fus = h_l_fus - dh_fus_j_mol
    return h_cr_fus + float(crystal.h_minus_h0(T_REF) - crystal.h_minus_h0(t_fus_k))
