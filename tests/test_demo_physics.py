"""The demo generator's physical models against references outside the project.

``scripts/demo_physics.py`` computes every number of the shipped demo database. Its ideal
gases (rigid rotor – harmonic oscillator) are compared with CoolProp's ideal-gas functions
and with NIST-JANAF values; its Debye crystal with the Debye function's published value
and limits. The shipped NASA-7 file is compared with the models it was fitted to.
"""
from __future__ import annotations

import math
import sys
from pathlib import Path

import numpy as np
import pytest
from scipy import integrate

ROOT = Path(__file__).resolve().parents[1]
sys.path.insert(0, str(ROOT / "scripts"))

import demo_physics as dp  # noqa: E402
import make_demo as md  # noqa: E402

from tests.reference import coolprop_ideal_gas  # noqa: E402

R = dp.R


def test_sackur_tetrode_argon():
    """Argon is translation only (one electronic level): S°(298.15 K, 1 bar) = 154.85
    J/(mol·K) (NIST-JANAF Thermochemical Tables, 4th ed., Chase 1998 — from memory).
    Tolerance 0.01 J/(mol·K): the quoted value's rounding (±0.005) plus the atomic weight
    (39.948 g/mol; a 0.002 g/mol change moves S by 1e-4 J/(mol·K))."""
    assert md.GASES["Ar(g)"].s(298.15) == pytest.approx(154.85, abs=0.01)
    # and the pressure dependence of an ideal gas: S(1 atm) = S(1 bar) − R ln 1.01325
    assert md.GASES["Ar(g)"].s(298.15, 1.01325) == pytest.approx(154.85 - R * math.log(1.01325), abs=0.01)


@pytest.mark.parametrize("fluid,key", [("Nitrogen", "N2(g)"), ("CarbonDioxide", "CO2(g)"), ("Water", "H2O(g)")])
def test_rrho_against_coolprop_ideal_gas(fluid, key):
    """Cp, H − H298 and S − S298 of the RRHO model against CoolProp's ideal-gas part
    (Bell et al., Ind. Eng. Chem. Res. 53 (2014) 2498), 298.15–2000 K.

    Tolerances: the model is harmonic and rigid; anharmonicity, vibration–rotation
    coupling and centrifugal stretching (McQuarrie, Statistical Mechanics, 1976, ch. 6)
    add to Cp a correction that grows roughly in proportion to T and is a few tenths of a
    percent at 1000 K for these molecules: Cp within 0.5 % to 1000 K and 1.5 % to 2000 K
    (water: 1 % and 2.5 %; its classical rotor and low bend add to the error). H − H298 and
    S − S298 are integrals of Cp from 298.15 K, so a relative Cp error bounded by ε bounds
    their relative errors by ε too: the same relative tolerances apply to them.
    """
    t = np.array([298.15, 400.0, 500.0, 600.0, 800.0, 1000.0, 1500.0, 2000.0])
    cp_ref, dh_ref, ds_ref = coolprop_ideal_gas(fluid, t)
    g = md.GASES[key]
    got = {"cp": g.cp(t), "dh": g.h(t) - g.h(298.15), "ds": g.s(t) - g.s(298.15)}
    ref = {"cp": cp_ref, "dh": dh_ref, "ds": ds_ref}
    low = t <= 1000.0
    eps_low, eps_high = (0.010, 0.025) if key == "H2O(g)" else (0.005, 0.015)
    for q in got:
        np.testing.assert_allclose(got[q][low], ref[q][low], rtol=eps_low, atol=1e-6, err_msg=q)
        np.testing.assert_allclose(got[q], ref[q], rtol=eps_high, atol=1e-6, err_msg=q)


@pytest.mark.parametrize("key,s298,h298_h0", [
    ("N2(g)", 191.61, 8670.0),    # NIST-JANAF, Chase 1998 — from memory
    ("O2(g)", 205.15, 8683.0),    # NIST-JANAF, Chase 1998 — from memory
    ("CO2(g)", 213.79, 9364.0),   # NIST-JANAF, Chase 1998 — from memory
    ("H2O(g)", 188.83, 9904.0),   # NIST-JANAF, Chase 1998 — from memory
])
def test_rrho_absolute_entropy_and_enthalpy(key, s298, h298_h0):
    """Third-law S°(298.15 K, 1 bar) and H(298.15) − H(0) against NIST-JANAF.

    Tolerance 0.2 J/(mol·K) for S: at 298 K vibrations are barely excited, so the error is
    the classical-rotor one, of order R Θ_rot/(12 T) — 0.1 J/(mol·K) for water's largest
    rotational temperature (40 K), < 0.01 for N2, O2, CO2. H − H0 within 40 J/mol: the
    classical rotor overstates H0-relative rotational energy by about R Θ_rot/3 (≈ 20
    J/mol for water; JANAF's own rounding is a few J/mol)."""
    g = md.GASES[key]
    assert g.s(298.15) == pytest.approx(s298, abs=0.2)
    assert g.h_minus_h0(298.15) == pytest.approx(h298_h0, abs=40.0)


def test_debye_function_reference_values():
    """Debye heat capacity: Cv/(3nR) = 0.952 at T = θ_D (tabulated Debye function, e.g.
    Kittel, Introduction to Solid State Physics, 8th ed., 2005 — from memory; tolerance
    0.001 = the rounding of the quoted value), the T³ law Cv = (12π⁴/5) n R (T/θ_D)³ far below
    θ_D (Debye 1912; relative 1e-9 at T = θ_D/100, where the law is exact to far better), and
    the Dulong–Petit limit 3nR at T ≫ θ_D (deviation θ²/(20T²) = 5e-6 at T = 100 θ_D)."""
    assert dp.debye_cv(300.0, 300.0) == pytest.approx(0.952, abs=0.001)
    theta = 400.0
    t = theta / 100
    assert 3 * dp.debye_cv(theta, t) == pytest.approx(12 * np.pi ** 4 / 5 * (t / theta) ** 3, rel=1e-9)
    assert dp.debye_cv(theta, 100 * theta) == pytest.approx(1.0, abs=1e-5)


def test_crystal_entropy_is_the_third_law_integral():
    """S(T) = ∫0^T Cp/T dT and H(T) − H(0) = ∫0^T Cp dT for the demo's MgO model, against
    SciPy's adaptive quadrature (QUADPACK, Piessens et al. 1983) of the same Cp; and the
    closed-form Debye entropy S = 3nR [4/3 D(x) − ln(1 − e⁻ˣ)] (x = θ/T, D the Debye
    function; Debye 1912) for a pure Debye crystal. Tolerance 1e-6 J/(mol·K) (quadrature)."""
    mgo = md.MGO
    for t in (15.0, 120.0, 298.15, 1500.0):
        s_ref, _ = integrate.quad(lambda x: float(mgo.cp(x)) / x, 1e-9, t, limit=400, epsabs=1e-10)
        h_ref, _ = integrate.quad(lambda x: float(mgo.cp(x)), 0.0, t, limit=400, epsabs=1e-9)
        assert float(mgo.s(t)) == pytest.approx(s_ref, abs=1e-6)
        assert float(mgo.h_minus_h0(t)) == pytest.approx(h_ref, abs=1e-5 * max(1.0, h_ref))
    pure = dp.Crystal("X(cr)", 1, 300.0, t_max_k=1000.0)
    for t in (30.0, 300.0, 900.0):
        x = 300.0 / t
        d3 = 3 / x ** 3 * integrate.quad(lambda u: u ** 3 / math.expm1(u), 0, x)[0]
        s_closed = 3 * R * (4 / 3 * d3 - math.log(-math.expm1(-x)))
        assert float(pure.s(t)) == pytest.approx(s_closed, abs=1e-6)


def test_ice_and_water_coexist_at_the_melting_point():
    """The liquid is joined to ice so that G(ice) = G(liquid) at 273.15 K and
    ΔfusH = 6.010 kJ/mol there (the demo's invented fusion data; 6.01 kJ/mol is the
    textbook value, from memory); then ΔfusS = ΔfusH/Tfus (Clausius: ΔG = 0 at equilibrium)."""
    t = 273.15
    assert float(md.WATER.g(t) - md.ICE.g(t)) == pytest.approx(0.0, abs=1e-6)
    assert float(md.WATER.h(t) - md.ICE.h(t)) == pytest.approx(6010.0, abs=1e-6)
    assert float(md.WATER.s(t) - md.ICE.s(t)) == pytest.approx(6010.0 / t, abs=1e-9)
    assert float(md.WATER.h(298.15)) == pytest.approx(-285830.0, abs=1e-6)


def test_shipped_nasa7_reproduces_the_models():
    """The shipped NASA-7 file, read by the pipeline's reader and evaluated by its evaluator,
    reproduces the models it was fitted to: Cp within 1 % over the stated range and H(298.15)
    = ΔfH° within 1 J/mol (common practice for published NASA fits, which reproduce their
    source tables to a few tenths of a percent; the fit constrains H at 298.15 K exactly)."""
    from pipeline.ingest.nasa7 import read
    from pipeline.manifest import Source
    from pipeline.thermo import SegmentIndex

    src = Source(id="tcl-gases-2024", path="tollbridge/tcl24_gases.nasa7", format="nasa7")
    res = read(ROOT / "raw" / src.path, src, src.path)
    idx = SegmentIndex.from_frame(res.segments)
    names = {md.NASA7_NAMES.get(k, md.formula_of(k)): k for k in md.NASA7_SET}
    checked = 0
    for rid, name in zip(res.records["record_id"], res.records["name"]):
        if name not in names:
            continue                     # the planted records (N2O, HO2) are wrong on purpose
        gas = md.GASES[names[name]]
        t = np.linspace(200.0, 3500.0, 200)
        p = idx.evaluate_records(np.full(t.shape, rid), t)
        np.testing.assert_allclose(p.cp, gas.cp(t), rtol=0.01, err_msg=name)
        p298 = idx.evaluate_records(np.array([rid]), np.array([298.15]))
        assert p298.h[0] == pytest.approx(gas.dfh298_j_mol, abs=1.0), name
        checked += 1
    assert checked == len(md.NASA7_SET)
