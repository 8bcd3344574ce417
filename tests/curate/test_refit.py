"""Constrained least-squares refits to NASA-7 and NASA-9 polynomials."""
from __future__ import annotations

import numpy as np
import pandas as pd
import pytest

from pipeline.constants import R, T_REF
from pipeline.functions import RecordFunctions
from pipeline.refit import _SHARED_MIN, FIT_TOLERANCES, quality_findings, refit
from pipeline.thermo import COEF_COLUMNS, evaluate
from tests.builders import table_record
from tests.reference import coolprop_ideal_gas

#: Enough records on one range for refit to solve them together (its shared-range path).
SHARED = _SHARED_MIN + 6
#: S°(298.15 K, 1 bar) [J/(mol*K)], CODATA key values (Cox, Wagman & Medvedev 1989; from memory).
S298 = {"Nitrogen": 191.609, "CarbonDioxide": 213.785}


def _table_functions(species, t, cp, hmh, s, dfh298=0.0):
    rec, pts = table_record(species, "ref", t, cp_j_mol_k=cp, h_minus_href_j_mol=hmh, s_j_mol_k=s,
                            dfh_j_mol=np.where(np.isclose(t, T_REF), dfh298, np.nan))
    records = pd.DataFrame([rec])
    fn = RecordFunctions(records, pd.DataFrame(columns=["record_id", "segment", "t_low_k", "t_high_k", *COEF_COLUMNS]),
                         pts)

    def values(rids, tt):
        v = fn.evaluate(np.broadcast_to(np.asarray(rids, dtype=object)[:, None], np.shape(tt)), tt)
        return v.cp, v.h, v.s

    return rec, values


@pytest.mark.parametrize("fluid,species", [("Nitrogen", "N2(g)"), ("CarbonDioxide", "CO2(g)")])
@pytest.mark.parametrize("form", ["nasa7", "nasa9"])
def test_refit_of_coolprop_ideal_gas_tables(fluid, species, form):
    """A table of CoolProp's ideal-gas Cp, H − H298 and S (Bell, Wronski, Quoilin & Lemort,
    Ind. Eng. Chem. Res. 53 (2014) 2498; the N2 and CO2 reference equations of state) every
    50 K is refitted; the fit's Cp matches CoolProp within 0.5 % at every 10 K.

    Range: the equations of state for N2 and CO2 end at Tmax = 2000 K in CoolProp (it
    returns values beyond without error, which are extrapolations), so the table and the
    comparison cover 298.15–2000 K, what the EOS covers, not 3000 K.
    """
    t = np.concatenate([[T_REF], np.arange(300.0, 2000.1, 50.0)])
    cp, hmh, ds = coolprop_ideal_gas(fluid, t)
    rec, values = _table_functions(species, t, cp, hmh, S298[fluid] + ds)
    fit = refit(pd.DataFrame([rec]), values, form)
    assert len(fit.segments) == 2 and len(fit.fits) == 1
    coef = fit.segments[list(COEF_COLUMNS)].to_numpy(float)
    tj = fit.fits["t_joint_k"].iloc[0]
    tc = np.arange(300.0, 2000.1, 10.0)
    cp_ref, h_ref, s_ref = coolprop_ideal_gas(fluid, tc)
    p = evaluate(coef[np.where(tc <= tj, 0, 1)], tc)
    p298 = evaluate(coef[0], T_REF)
    np.testing.assert_allclose(p.cp, cp_ref, rtol=0.005)
    np.testing.assert_allclose(p.h - p298.h, h_ref, atol=50.0)             # J/mol
    np.testing.assert_allclose(p.s - p298.s, s_ref, atol=0.05)             # J/(mol·K)
    assert fit.fits["max_rel_dcp"].iloc[0] < 0.005


@pytest.mark.parametrize("copies", [1, SHARED])
def test_constraints_hold_exactly(copies):
    """Cp, H, S continuous at the joint; H and S at 298.15 K equal the source's — for a record
    fitted alone and for one of many sharing its range (solved together, see refit)."""
    t = np.concatenate([[T_REF], np.arange(300.0, 4000.1, 100.0)])
    x = 2000.0 / t
    cp = R * (3.5 + x ** 2 * np.exp(x) / np.expm1(x) ** 2) + 1e-4 * t  # a shape no quartic holds exactly
    from scipy.integrate import cumulative_trapezoid  # only to make a consistent toy table

    tt = np.linspace(T_REF, 4000.0, 20001)
    cpt = np.interp(tt, t, cp)
    hmh = np.interp(t, tt, cumulative_trapezoid(cpt, tt, initial=0.0))
    s = 200.0 + np.interp(t, tt, cumulative_trapezoid(cpt / tt, tt, initial=0.0))
    rec, values = _table_functions("F2(g)", t, cp, hmh, s, dfh298=-5000.0)
    items = pd.DataFrame([rec] * copies).assign(record_id=[f"r{i:02d}" for i in range(copies)])
    same = np.array([rec["record_id"]], dtype=object)

    def copied(rids, temps):                                               # every copy is the F2 table
        return values(np.repeat(same, len(rids)), temps)

    for form in ("nasa7", "nasa9"):
        fit = refit(items, copied, form)
        c = fit.segments[fit.segments["record_id"] == "r00"].sort_values("segment")[list(COEF_COLUMNS)].to_numpy(float)
        tj = fit.fits["t_joint_k"].iloc[0]
        lo, hi = evaluate(c[0], tj), evaluate(c[1], tj)
        assert hi.cp == pytest.approx(lo.cp, rel=1e-9)
        assert hi.h == pytest.approx(lo.h, rel=1e-9, abs=1e-6)
        assert hi.s == pytest.approx(lo.s, rel=1e-9)
        _, h0, s0 = values(np.array([rec["record_id"]], dtype=object), np.array([[T_REF]]))
        p = evaluate(c[0], T_REF)
        assert p.h == pytest.approx(h0[0, 0], abs=1e-6)
        assert p.s == pytest.approx(s0[0, 0], abs=1e-9)
        if form == "nasa7":
            assert np.all(c[:, :2] == 0)                                   # no T⁻², T⁻¹ terms


@pytest.mark.parametrize("copies", [1, SHARED])
@pytest.mark.parametrize("t_low,t_high", [(300.0, 5000.0), (200.0, 300.0), (500.0, 800.0)])
def test_functions_already_in_the_form_are_recovered(t_low, t_high, copies):
    """A single NASA-9 segment refitted to NASA-9 is reproduced (the fit is exact when the
    form holds the function): residuals at rounding level — also on narrow ranges, where the
    monomials T⁻²…T⁴ are nearly collinear (condition number ~10⁹ after column scaling on
    200–300 K), and for records fitted together with others on the same range."""
    coef = np.array([4.0e4, -6.0e2, 6.0, 2.0e-3, -1.0e-6, 3.0e-10, -2.0e-14, -4.0e4, 5.0])

    def values(rids, t):
        p = evaluate(coef, t)
        return p.cp, p.h, p.s

    items = pd.DataFrame({"record_id": [f"a{i}" for i in range(copies)], "t_low_k": t_low, "t_high_k": t_high})
    fit = refit(items, values, "nasa9")
    for f in fit.fits.iloc[[0, -1]].itertuples():
        assert f.max_abs_dcp_j_mol_k < 1e-6 and f.max_abs_dh_j_mol < 1e-4 and f.max_abs_ds_j_mol_k < 1e-7


def _einstein_gases(n, seed=5):
    """Closed-form ideal gases: Cp/R = 7/2 + Σ m E(Θ/T) with the Einstein function
    E(x) = x² eˣ/(eˣ − 1)², H and S integrated exactly (Einstein, Ann. Phys. 22 (1907) 180)."""
    rng = np.random.default_rng(seed)
    theta, modes = rng.uniform(300.0, 3000.0, (n, 3)), rng.uniform(0.5, 4.0, (n, 3))
    pos = {f"g{i}": i for i in range(n)}

    def values(rids, t):
        i = np.array([pos[r] for r in np.asarray(rids, dtype=object)])
        t = np.asarray(t, float)
        x, mo = theta[i][:, None, :] / t[..., None], modes[i][:, None, :]
        em1 = np.expm1(x)
        cp = 3.5 + np.sum(mo * x ** 2 * np.exp(x) / em1 ** 2, axis=-1)
        h = 3.5 * t + np.sum(mo * theta[i][:, None, :] / em1, axis=-1)
        s = 3.5 * np.log(t) + np.sum(mo * (x / em1 - np.log(-np.expm1(-x))), axis=-1)
        return R * cp, R * h - 1.0e5, R * s + 10.0

    return list(pos), values


@pytest.mark.parametrize("form", ["nasa7", "nasa9"])
@pytest.mark.parametrize("t_low,t_high", [(T_REF, 3000.0), (200.0, 6000.0), (300.0, 800.0)])
def test_records_sharing_a_range_are_fitted_as_alone(form, t_low, t_high):
    """Many records on one range are solved together (one least-squares operator per joint,
    applied to all); each must get the fit it gets alone: the same joint, and the same
    functions up to floating-point round-off. Tolerances: the two computations differ only in
    the order of operations; the canonical monomial form amplifies the rounding of the
    coefficients by its cancellation (terms up to ~10³ × Cp/R on these ranges), to ~10⁻¹² of
    Cp observed — the bounds are 1000 times that, and 10⁴ times below the fit residuals."""
    ids, values = _einstein_gases(SHARED + 10)
    items = pd.DataFrame({"record_id": ids, "t_low_k": t_low, "t_high_k": t_high})
    together = refit(items, values, form)
    tg = np.linspace(max(t_low, 200.0), t_high, 400)
    for i in (0, 37, len(ids) - 1):
        alone = refit(items.iloc[[i]], values, form)
        assert alone.fits["t_joint_k"].iloc[0] == together.fits["t_joint_k"].iloc[i]
        tj = alone.fits["t_joint_k"].iloc[0]
        a = alone.segments[list(COEF_COLUMNS)].to_numpy(float)
        b = together.segments[together.segments["record_id"] == ids[i]][list(COEF_COLUMNS)].to_numpy(float)
        pa, pb = (evaluate(c[np.where(tg <= tj, 0, 1)], tg) for c in (a, b))
        np.testing.assert_allclose(pa.cp, pb.cp, rtol=1e-9)
        np.testing.assert_allclose(pa.h, pb.h, rtol=0, atol=1e-5)                 # J/mol
        np.testing.assert_allclose(pa.s, pb.s, rtol=0, atol=1e-8)                 # J/(mol·K)
        for col in ("max_rel_dcp", "max_abs_dh_j_mol", "max_abs_ds_j_mol_k"):
            assert alone.fits[col].iloc[0] == pytest.approx(together.fits[col].iloc[i], rel=1e-6, abs=1e-9)


def test_joint_is_chosen_by_residual():
    """Two different NASA-7 polynomials that meet at 1400 K (continuous Cp, H, S): the
    NASA-7 refit must find a joint at 1400 K (a candidate) with near-zero residual."""
    lo = np.array([0, 0, 3.0, 1.0e-3, -2.0e-7, 0, 0, -1000.0, 4.0])
    t_j = 1400.0
    # upper: Cp/R = 3.0 + 1e-3 T − 2e-7 T² + k (T − t_j)²  (continuous value; slope jumps are allowed)
    k = 5.0e-7
    up = lo.copy()
    up[2] += k * t_j ** 2
    up[3] += -2 * k * t_j
    up[4] += k
    # b1, b2 from continuity of H and S at t_j
    plo = evaluate(lo, t_j)
    pup = evaluate(up, t_j)
    up[7] += (plo.h - pup.h) / R
    up[8] += (plo.s - pup.s) / R

    def values(rids, t):
        c = np.where((t <= t_j)[..., None], lo, up)
        p = evaluate(c, t)
        return p.cp, p.h, p.s

    fit = refit(pd.DataFrame({"record_id": ["a"], "t_low_k": [300.0], "t_high_k": [4000.0]}), values, "nasa7")
    f = fit.fits.iloc[0]
    assert f["t_joint_k"] == pytest.approx(1400.0, abs=1e-6)
    assert f["max_rel_dcp"] < 1e-6


def test_a_fit_that_misses_is_a_finding():
    """A Cp with a step (a λ-like transition, 20 % jump at 1500 K) cannot be held by two
    smooth ranges: export.fit-quality reports it; a clean fit gives no finding."""
    t = np.concatenate([[T_REF], np.arange(300.0, 3000.1, 25.0)])
    cp = np.where(t < 1500.0, 30.0, 36.0)
    hmh = np.where(t < 1500.0, 30.0 * (t - T_REF), 30.0 * (1500 - T_REF) + 36.0 * (t - 1500.0))
    s = 200.0 + np.where(t < 1500.0, 30.0 * np.log(t / T_REF), 30.0 * np.log(1500 / T_REF) + 36.0 * np.log(t / 1500))
    rec, values = _table_functions("Ar(g)", t, cp, hmh, s)
    fit = refit(pd.DataFrame([rec]), values, "nasa7")
    f = quality_findings(fit.fits, ["Ar(g)"], ["ref"])
    assert list(f["check_id"]) == ["export.fit-quality"]
    assert f["severity"].iloc[0] == "error"
    assert f["subject"].iloc[0] == "Ar(g)" and f["source_id"].iloc[0] == "ref"
    clean = fit.fits.assign(max_rel_dcp=0.1 * FIT_TOLERANCES["cp_rel"], max_abs_dh_j_mol=1.0, max_abs_ds_j_mol_k=0.001)
    assert quality_findings(clean, ["Ar(g)"], ["ref"]).empty


def test_unknown_form_is_refused():
    with pytest.raises(ValueError, match="unknown form"):
        refit(pd.DataFrame({"record_id": ["a"], "t_low_k": [300.0], "t_high_k": [1000.0]}),
              lambda r, t: (t, t, t), "shomate")


def test_refit_runs_blas_on_one_thread_and_restores_it():
    """Inside ``single_threaded_blas`` every OpenBLAS library of the process runs on one
    thread; afterwards (also after an exception) each has its thread count back."""
    from pipeline.refit import _blas_thread_controls, single_threaded_blas

    import numpy

    controls = _blas_thread_controls()
    blas = numpy.__config__.CONFIG["Build Dependencies"]["blas"]["name"]
    if "openblas" not in blas.lower():
        # another BLAS (MKL, Accelerate): single_threaded_blas leaves it alone by design;
        # the set/restore logic itself is tested with stand-in controls below
        pytest.skip(f"numpy is built with {blas}, not OpenBLAS")
    assert controls, "numpy uses OpenBLAS but no thread control was found"
    set_, get = controls[0]
    before = [g() for _, g in controls]
    set_(2)
    try:
        with single_threaded_blas():
            assert [g() for _, g in controls] == [1] * len(controls)
        assert get() == 2
        with pytest.raises(ValueError):
            with single_threaded_blas():
                raise ValueError("inside")
        assert get() == 2
    finally:
        set_(before[0])


def test_single_threaded_blas_restores_every_control(monkeypatch):
    """The set/restore logic on stand-in controls (any BLAS): one thread inside, each
    library's own count back afterwards, also after an exception."""
    import pipeline.refit as rf

    counts = [4, 3]
    controls = [(lambda n, i=i: counts.__setitem__(i, n), lambda i=i: counts[i]) for i in range(2)]
    monkeypatch.setattr(rf, "_blas_thread_controls", lambda: controls)
    with rf.single_threaded_blas():
        assert counts == [1, 1]
    assert counts == [4, 3]
    with pytest.raises(RuntimeError):
        with rf.single_threaded_blas():
            raise RuntimeError("inside")
    assert counts == [4, 3]
