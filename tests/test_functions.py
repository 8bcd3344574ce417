"""Record functions: table interpolation through a Cp spline, against scipy and CoolProp."""
from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
from scipy import integrate
from scipy.interpolate import CubicSpline, PchipInterpolator

from pipeline.constants import R, T_REF
from pipeline.functions import RecordFunctions, TableCurves, Values, preferred_record_ids
from pipeline.thermo import evaluate, from_nasa7
from tests.builders import context, poly_record, table_record

SIZES = (1, 2, 3, 4, 5, 9, 40)


def _random_tables(seed=7):
    """Irregularly spaced Cp tables of 1…40 rows (smooth trend + noise, so that the
    interpolants differ visibly between rows)."""
    rng = np.random.default_rng(seed)
    parts = []
    for k, n in enumerate(SIZES):
        t = np.sort(rng.uniform(150.0, 3000.0, n)) if n > 1 else np.array([500.0])
        cp = 30.0 + 8.0 * np.tanh(t / 700.0) + rng.normal(0.0, 0.8, n)
        parts.append(pd.DataFrame({"record_id": f"src/X{k}(g)", "t_k": t, "cp_j_mol_k": cp}))
    return pd.concat(parts, ignore_index=True)


@pytest.mark.parametrize("method,reference", [
    ("spline", lambda x, y: CubicSpline(x, y, bc_type="not-a-knot")),
    ("pchip", PchipInterpolator)])
def test_batched_curves_equal_scipy_interpolants(method, reference):
    """One banded solve for every table gives scipy's not-a-knot spline and PCHIP
    (Fritsch & Butland 1984) curve by curve, including 2- and 3-point tables."""
    pts = _random_tables()
    curves = TableCurves.from_points(pts, method)
    for rid, g in pts.groupby("record_id"):
        x, y = g["t_k"].to_numpy(), g["cp_j_mol_k"].to_numpy()
        rank = np.full(101, curves.rank_of([rid])[0])
        tt = np.linspace(x[0], x[-1], 101)
        got = curves.cp_at(rank, tt)
        if len(x) == 1:
            assert got == pytest.approx(np.full(101, y[0]))
            continue
        assert got == pytest.approx(reference(x, y)(tt), rel=1e-12, abs=1e-10)


@pytest.mark.parametrize("method,reference", [
    ("spline", lambda x, y: CubicSpline(x, y, bc_type="not-a-knot")),
    ("pchip", PchipInterpolator)])
def test_integrals_equal_quadrature_of_the_same_interpolant(method, reference):
    """∫Cp dT and ∫Cp/T dT from the first row equal scipy.integrate.quad of the same
    scipy interpolant (breakpoints given to quad), to quadrature precision."""
    pts = _random_tables(seed=11)
    curves = TableCurves.from_points(pts, method)
    for rid, g in pts.groupby("record_id"):
        x, y = g["t_k"].to_numpy(), g["cp_j_mol_k"].to_numpy()
        if len(x) < 2:
            continue
        f = reference(x, y)
        tt = np.linspace(x[0], x[-1], 23)
        i_cp, i_cp_t, _ = curves.integrals_at(np.full(23, curves.rank_of([rid])[0]), tt)
        for T, a, b in zip(tt, i_cp, i_cp_t):
            inner = x[(x > x[0]) & (x < T)]
            qa, _ = integrate.quad(f, x[0], T, points=inner if len(inner) else None, limit=500,
                                   epsabs=1e-11, epsrel=1e-13)
            qb, _ = integrate.quad(lambda u: f(u) / u, x[0], T, points=inner if len(inner) else None,
                                   limit=500, epsabs=1e-13, epsrel=1e-13)
            assert a == pytest.approx(qa, rel=1e-11, abs=1e-8)
            assert b == pytest.approx(qb, rel=1e-11, abs=1e-10)


def test_entropy_integral_from_zero_kelvin():
    """A calorimetric table starting at T = 0 with Cp(0) = 0 (third law) integrates Cp/T
    from 0 exactly: Debye T³ law, Cp = 1944 n (T/θ)³ J/(mol·K) below θ/50 (Debye 1912;
    1944 = 12π⁴R/5), gives S(T) = Cp(T)/3 — compared here against quad of the same spline."""
    theta = 400.0
    t = np.array([0.0, 1.0, 2.0, 3.0, 4.0, 5.0, 6.0, 8.0])
    cp = 12 * np.pi ** 4 * R / 5 * (t / theta) ** 3
    pts = pd.DataFrame({"record_id": "a/X(cr)", "t_k": t, "cp_j_mol_k": cp})
    curves = TableCurves.from_points(pts)
    _, s, _ = curves.integrals_at(np.zeros(1, int), np.array([8.0]))
    f = CubicSpline(t, cp)
    q, _ = integrate.quad(lambda u: f(u) / u if u > 0 else 0.0, 0.0, 8.0, points=t[1:-1], epsabs=1e-15)
    assert s[0] == pytest.approx(q, rel=1e-10)
    assert s[0] == pytest.approx(cp[-1] / 3, rel=1e-9)   # a cubic through T³ data is T³ itself
    # Cp(0) ≠ 0 makes ∫Cp/T diverge: NaN, never a finite wrong number
    bad = TableCurves.from_points(pts.assign(cp_j_mol_k=cp + 1.0))
    assert np.isnan(bad.integrals_at(np.zeros(1, int), np.array([8.0]))[1][0])


def _n2_table(columns=("cp", "s", "hmh"), t=None):
    from tests.checks import coolprop_tables as ct

    cols = ct.columns("N2(g)", t, rounded=False)
    kw = {"cp_j_mol_k": cols["cp_j_mol_k"]}
    if "s" in columns:
        kw["s_j_mol_k"] = cols["s_j_mol_k"]
    if "hmh" in columns:
        kw["h_minus_href_j_mol"] = cols["h_minus_href_j_mol"]
    if "s298" in columns:
        kw["s_j_mol_k"] = np.where(np.isclose(cols["t_k"], T_REF), cols["s_j_mol_k"], np.nan)
    return table_record("N2(g)", "cp", cols["t_k"], **kw)


def test_between_rows_against_coolprop():
    """A 100 K table of N2 interpolated between its rows reproduces CoolProp's ideal-gas
    functions (Bell et al. 2014). Tolerance: the cubic-spline interpolation error is at most
    (5/384) h⁴ max|Cp''''| (Hall & Meyer, J. Approx. Theory 16 (1976) 105); N2's Cp rises
    by ~4 J/(mol·K) over ~1000 K on a curvature scale of a few hundred kelvin, which gives
    ~1e-3 J/(mol·K) at h = 100 K: Cp within 1e-4 relative, and after integrating over at
    most 100 K from the nearest row, H − H298 within 0.5 J/mol and S within 1e-3 J/(mol·K)."""
    from tests.reference import coolprop_ideal_gas

    ctx = context(tables=[_n2_table()])
    t = np.array([250.0, 350.0, 455.5, 777.7, 1234.5, 1650.0, 1999.0])
    v = ctx.functions.evaluate("cp/N2(g)", t)
    cp, dh, ds = coolprop_ideal_gas("Nitrogen", t)
    s298 = ctx.functions.evaluate("cp/N2(g)", T_REF).s
    assert v.cp == pytest.approx(cp, rel=1e-4)
    assert np.max(np.abs(v.h_minus_h298 - dh)) < 0.5
    assert np.max(np.abs(v.s - s298 - ds)) < 1e-3


def test_spline_beats_trapezoids_on_a_100_k_grid():
    """Why checks.md forbids trapezoids: on a 100 K grid the trapezoid error of ∫Cp/T dT
    from 300 to 1000 K for N2 exceeds the 0.05 J/(mol·K) entropy tolerance, the spline's
    does not (reference: CoolProp, Bell et al. 2014)."""
    from tests.reference import coolprop_ideal_gas

    t = np.arange(300.0, 1001.0, 100.0)
    cp, _, ds = coolprop_ideal_gas("Nitrogen", t)
    curves = TableCurves.from_points(pd.DataFrame({"record_id": "x", "t_k": t, "cp_j_mol_k": cp}))
    _, spline, _ = curves.integrals_at(np.zeros(1, int), np.array([1000.0]))
    exact = ds[-1] - ds[0]          # S(1000) − S(300)
    trapezoid = np.trapezoid(cp / t, t)
    assert abs(trapezoid - exact) > 0.05
    assert abs(spline[0] - exact) < 0.005


def test_rows_are_reproduced_exactly_and_missing_columns_integrated():
    """Tabulated H − H298 and S come back unchanged at their rows; with only Cp and
    S(298.15) given, S elsewhere and H − H298 follow from the spline integrals (CoolProp
    values within the interpolation tolerance of the previous test)."""
    from tests.reference import coolprop_ideal_gas

    rec, pts = _n2_table()
    ctx = context(tables=[(rec, pts)])
    v = ctx.functions.evaluate("cp/N2(g)", pts["t_k"].to_numpy())
    assert v.h_minus_h298 == pytest.approx(pts["h_minus_href_j_mol"].to_numpy(), abs=1e-9)
    assert v.s == pytest.approx(pts["s_j_mol_k"].to_numpy(), abs=1e-12)

    ctx2 = context(tables=[_n2_table(columns=("cp", "s298"))])
    t = np.array([200.0, 650.0, 1500.0])
    v2 = ctx2.functions.evaluate("cp/N2(g)", t)
    _, dh, ds = coolprop_ideal_gas("Nitrogen", t)
    assert np.max(np.abs(v2.h_minus_h298 - dh)) < 0.5
    assert np.max(np.abs(v2.s - ctx2.functions.evaluate("cp/N2(g)", T_REF).s - ds)) < 1e-3
    assert ctx2.functions.evaluate("cp/N2(g)", T_REF).h_minus_h298 == 0.0


def test_out_of_range_unknown_and_unanchored_are_nan():
    """Tables are never extrapolated; H − H298 of a table that starts above 298.15 K
    without an H column is undefined; H and G need ΔfH at 298.15 K."""
    ctx = context(tables=[_n2_table()])
    v = ctx.functions.evaluate(["cp/N2(g)", "cp/N2(g)", "nope/X(g)"], [100.0, 2100.0, 500.0])
    assert np.isnan(v.cp).all() and np.isnan(v.s).all()
    assert np.isnan(ctx.functions.evaluate("cp/N2(g)", 500.0).h)   # no dfh at 298.15
    late = context(tables=[_n2_table(columns=("cp", "s"), t=np.arange(400.0, 1001.0, 100.0))])
    w = late.functions.evaluate("cp/N2(g)", 600.0)
    assert np.isfinite(w.s) and np.isnan(w.h_minus_h298)


def test_absolute_enthalpy_from_dfh_at_298_and_gibbs():
    """With dfh at 298.15 K, H(298.15) = ΔfH° (the polynomial convention) and G = H − TS."""
    rec, pts = _n2_table()
    pts.loc[np.isclose(pts["t_k"], T_REF), "dfh_j_mol"] = -1234.0
    ctx = context(tables=[(rec, pts)])
    v = ctx.functions.evaluate("cp/N2(g)", np.array([T_REF, 800.0]))
    assert v.h[0] == pytest.approx(-1234.0)
    assert v.h[1] == pytest.approx(-1234.0 + v.h_minus_h298[1])
    assert v.g == pytest.approx(v.h - np.array([T_REF, 800.0]) * v.s)


def test_polynomials_use_the_canonical_evaluator():
    """Polynomial records: the same numbers as thermo.evaluate; H − H298 = H(T) − H(298.15)."""
    coef = from_nasa7(np.array([3.5, 1e-4, 0.0, 0.0, 0.0, -1000.0, 4.0]))
    ctx = context(poly=[poly_record("Kr(g)", "a", [(200.0, 3000.0, coef)])])
    t = np.array([300.0, 1500.0])
    v = ctx.functions.evaluate(["a/Kr(g)", "a/Kr(g)"], t)
    ref = evaluate(coef, t)
    assert isinstance(v, Values)
    assert v.cp == pytest.approx(ref.cp) and v.s == pytest.approx(ref.s) and v.g == pytest.approx(ref.g)
    assert v.h_minus_h298 == pytest.approx(ref.h - evaluate(coef, T_REF).h)
    # broadcasting: one record, a 2-D grid
    assert ctx.functions.evaluate("a/Kr(g)", np.ones((2, 3)) * 500.0).cp.shape == (2, 3)


def test_preferred_defaults_to_polynomial_then_wider_range():
    """Without source priorities the preferred rule picks the polynomial, then the wider range."""
    coef = from_nasa7(np.array([3.5, 0, 0, 0, 0, 0, 0]))
    ctx = context(poly=[poly_record("Kr(g)", "b", [(300.0, 1000.0, coef)])],
                  tables=[table_record("Kr(g)", "a", [300.0, 2000.0], cp_j_mol_k=[29.0, 29.0])])
    assert preferred_record_ids(ctx.records)["Kr(g)"] == "b/Kr(g)"
    assert isinstance(RecordFunctions(ctx.records, ctx.segments, ctx.table_points), RecordFunctions)


def test_table_without_any_cp_is_nan_not_a_crash():
    """A table record whose rows carry no Cp has no curve: every value is NaN."""
    ctx = context(tables=[table_record("N2(g)", "a", [300.0, 400.0], cp_j_mol_k=[np.nan, np.nan])])
    v = ctx.functions.evaluate("a/N2(g)", 350.0)
    assert all(np.isnan(x) for x in (v.cp, v.h, v.s, v.g, v.h_minus_h298))


def test_evaluate_codes_equals_evaluate_bit_for_bit():
    """``evaluate_codes(ids, codes, T)`` is ``evaluate(ids[codes], T)`` exactly (the same
    arithmetic on the same pairs, so no tolerance): polynomial and table records, a
    repeated id, an unknown id, ids left unused by the codes, a 2-D grid."""
    coef = from_nasa7(np.array([3.5, 1e-4, 0.0, 0.0, 0.0, -1000.0, 4.0]))
    rec, pts = _n2_table()
    pts.loc[np.isclose(pts["t_k"], T_REF), "dfh_j_mol"] = -1234.0
    ctx = context(poly=[poly_record("Kr(g)", "a", [(200.0, 3000.0, coef)])], tables=[(rec, pts)])
    ids = np.array(["cp/N2(g)", "a/Kr(g)", "nope/X(g)", "a/Kr(g)", "unused/Y(g)"], dtype=object)
    codes = np.array([[0, 1, 2, 3], [3, 1, 0, 0]])
    t = np.array([[T_REF, 500.0, 700.0, 2500.0], [300.0, 1500.0, 5000.0, 350.0]])
    got = ctx.functions.evaluate_codes(ids, codes, t)
    want = ctx.functions.evaluate(ids[codes], t)
    for name in ("cp", "h", "s", "g", "h_minus_h298"):
        a, b = getattr(got, name), getattr(want, name)
        assert a.shape == b.shape == (2, 4)
        np.testing.assert_array_equal(a, b)  # NaN where both are NaN, else the same bits
    assert np.isfinite(got.cp[0, 1]) and np.isnan(got.cp[0, 2]) and np.isnan(got.cp[1, 2])
    # a grid of polynomials only (no masks inside) and an empty request
    only = ctx.functions.evaluate_codes(ids, np.array([1, 3, 1]), np.array([300.0, 900.0, 2900.0]))
    np.testing.assert_array_equal(only.h, ctx.functions.evaluate(ids[[1, 3, 1]], [300.0, 900.0, 2900.0]).h)
    assert ctx.functions.evaluate_codes(ids, np.array([], dtype=int), np.array([])).cp.shape == (0,)


@pytest.mark.parametrize("pool_kind", ["array", "set", "series", "empty", "numbers"])
def test_member_is_pandas_isin(pool_kind):
    """``member`` (Arrow's hash kernel, on Arrow-backed text without converting it) gives
    exactly pandas' ``isin``: nulls are members of nothing, any pool type is accepted."""
    from pipeline.functions import member

    values = pd.Series(["a/X", "b/X", None, "c/Y", "a/X", "", "d/Z"])
    assert isinstance(values.dtype, pd.StringDtype) and values.dtype.storage == "pyarrow"
    base = ["a/X", "", "q/Q"]
    pool = {"array": np.array(base, dtype=object), "set": set(base), "series": pd.Series(base),
            "empty": np.array([], dtype=object), "numbers": [1, 2]}[pool_kind]
    expected = pd.Series(values.to_numpy(object), dtype=object).isin(list(pool)).to_numpy(bool)
    for v in (values, pd.Index(values), values.to_numpy(object)):
        got = member(v, pool)
        assert got.dtype == bool and got.tolist() == expected.tolist()


def test_map_keys_is_series_map():
    """``map_keys`` (each distinct key looked up once) gives ``Series.map``'s values, with
    NaN or None where the key is missing, for Arrow-backed and object keys."""
    from pipeline.functions import map_keys

    keys = pd.Series(["b", "a", None, "zz", "a", "b"])
    for mapping in (pd.Series([1.5, 2.5], index=["a", "b"]),
                    pd.Series(np.array(["A(g)", "B(g)"], dtype=object), index=["a", "b"])):
        for k in (keys, keys.astype(object), keys.to_numpy(object)):
            got = map_keys(k, mapping)
            want = pd.Series(np.asarray(k, dtype=object)).map(mapping).to_numpy()
            assert len(got) == len(want)
            for g, w in zip(got, want):
                assert (pd.isna(g) and pd.isna(w)) or g == w
