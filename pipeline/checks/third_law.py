"""Third-law checks: S(0) = 0, calorimetric entropy from Debye + ∫Cp/T, the gas entropy floor."""
from __future__ import annotations

import numpy as np
import pandas as pd
from scipy.linalg import solve_banded

from ..constants import R, R_LN_ATM
from ..findings import empty_findings, make_findings
from ..functions import map_keys, member
from ..physics import debye_entropy, debye_temperature, sackur_tetrode_entropy
from ..thermo import COEF_COLUMNS, evaluate
from .context import CheckContext
from .heat_capacity import CP_TRANSLATION_R, segment_cp_extrema
from .registry import check

CONDENSED = ("cr", "l")

# ---------------------------------------------------------------------------------------
# Grouped interpolation: many tables at once, one solve
# ---------------------------------------------------------------------------------------


def _starts(gid: np.ndarray) -> np.ndarray:
    """Boolean mask of the first row of each group (rows sorted by group)."""
    first = np.ones(len(gid), bool)
    first[1:] = gid[1:] != gid[:-1]
    return first


def spline_slopes(gid: np.ndarray, x: np.ndarray, y: np.ndarray) -> np.ndarray:
    """First derivatives at the knots of a not-a-knot cubic spline through every group.

    Rows are sorted by group ``gid`` then ``x`` (strictly increasing within a group). The
    tridiagonal systems of all groups form one block-diagonal banded system, solved once
    (same equations as ``scipy.interpolate.CubicSpline(bc_type="not-a-knot")``, de Boor,
    *A Practical Guide to Splines*, 1978, ch. IV; two points: the line; three: the parabola).
    """
    n = len(x)
    if n == 0:
        return np.zeros(0)
    first = _starts(gid)
    last = np.r_[first[1:], True]
    start_idx = np.flatnonzero(first)
    size = np.diff(np.r_[start_idx, n])
    m = np.repeat(size, size)                              # group size of each row
    h = np.where(last, np.nan, np.r_[np.diff(x), np.nan])  # h_i = x_{i+1} − x_i (same group)
    with np.errstate(invalid="ignore", divide="ignore"):
        delta = np.where(last, np.nan, np.r_[np.diff(y), np.nan] / h)
    h_prev = np.r_[np.nan, h[:-1]]
    d_prev = np.r_[np.nan, delta[:-1]]
    h_next = np.r_[h[1:], np.nan]
    d_next = np.r_[delta[1:], np.nan]
    h_prev2 = np.r_[np.nan, np.nan, h[:-2]]
    d_prev2 = np.r_[np.nan, np.nan, delta[:-2]]

    ab = np.zeros((3, n))           # ab[0, j] = A[j-1, j]; ab[1, j] = A[j, j]; ab[2, j] = A[j+1, j]
    rhs = np.zeros(n)
    diag, upper_of_row, lower_of_row = np.ones(n), np.zeros(n), np.zeros(n)
    # rows of a group's own system only: first/last rows never reach a neighbouring group

    # groups of one point: k = 0; two: the line; three: the parabola (explicit values)
    explicit = m <= 3
    line = m == 2
    rhs = np.where(line, np.where(first, delta, d_prev), rhs)
    par = m == 3
    if par.any():
        i0 = np.flatnonzero(par & first)
        h0, h1, s0, s1 = h[i0], h[i0 + 1], delta[i0], delta[i0 + 1]
        q = (s1 - s0) / (h0 + h1)
        rhs[i0] = s0 - q * h0
        rhs[i0 + 1] = s0 + q * h0
        rhs[i0 + 2] = s0 + q * (h0 + 2 * h1)

    big = ~explicit
    inner = big & ~first & ~last
    diag = np.where(inner, 2 * (h_prev + h), diag)
    lower_of_row = np.where(inner, h, lower_of_row)       # coefficient of k_{i-1}
    upper_of_row = np.where(inner, h_prev, upper_of_row)  # coefficient of k_{i+1}
    rhs = np.where(inner, 3 * (h * d_prev + h_prev * delta), rhs)
    s = big & first                                       # not-a-knot at the start
    d0 = h + h_next
    diag = np.where(s, h_next, diag)
    upper_of_row = np.where(s, d0, upper_of_row)
    rhs = np.where(s, ((h + 2 * d0) * h_next * delta + h * h * d_next) / d0, rhs)
    e = big & last                                        # not-a-knot at the end
    d1 = h_prev + h_prev2
    diag = np.where(e, h_prev2, diag)
    lower_of_row = np.where(e, d1, lower_of_row)
    rhs = np.where(e, (h_prev * h_prev * d_prev2 + (2 * d1 + h_prev) * h_prev2 * d_prev) / d1, rhs)

    ab[1] = diag
    ab[0, 1:] = upper_of_row[:-1]
    ab[2, :-1] = lower_of_row[1:]
    return solve_banded((1, 1), ab, rhs, check_finite=False)


def pchip_slopes(gid: np.ndarray, x: np.ndarray, y: np.ndarray) -> np.ndarray:
    """First derivatives of the monotone cubic (PCHIP) interpolant of every group at once.

    Fritsch & Carlson, SIAM J. Numer. Anal. 17 (1980) 238, with the weighted harmonic mean
    of Fritsch & Butland (1984) inside and the shape-preserving three-point formula at the
    ends — the same rules as ``scipy.interpolate.PchipInterpolator``.
    """
    n = len(x)
    if n == 0:
        return np.zeros(0)
    first = _starts(gid)
    last = np.r_[first[1:], True]
    with np.errstate(invalid="ignore", divide="ignore"):
        h = np.where(last, np.nan, np.r_[np.diff(x), np.nan])
        mk = np.where(last, np.nan, np.r_[np.diff(y), np.nan] / h)
        hp, mp = np.r_[np.nan, h[:-1]], np.r_[np.nan, mk[:-1]]
        w1, w2 = 2 * h + hp, h + 2 * hp
        whmean = (w1 / mp + w2 / mk) / (w1 + w2)
        inner = 1.0 / whmean
    flat = (np.sign(mk) != np.sign(mp)) | (mk == 0) | (mp == 0)
    d = np.where(flat, 0.0, inner)
    # ends: one-sided three-point estimate, limited to preserve shape
    hn, mn = np.r_[h[1:], np.nan], np.r_[mk[1:], np.nan]
    hpp, mpp = np.r_[np.nan, np.nan, h[:-2]], np.r_[np.nan, np.nan, mk[:-2]]

    def edge(h0, h1, m0, m1):
        with np.errstate(invalid="ignore"):
            dd = ((2 * h0 + h1) * m0 - h0 * m1) / (h0 + h1)
        dd = np.where(np.sign(dd) != np.sign(m0), 0.0, dd)
        return np.where((np.sign(m0) != np.sign(m1)) & (np.abs(dd) > 3 * np.abs(m0)), 3 * m0, dd)

    two_first = first & last[np.minimum(np.arange(n) + 1, n - 1)]      # group of two: the line
    two_last = last & np.r_[False, first[:-1]]
    d = np.where(first, np.where(two_first, mk, edge(h, hn, mk, mn)), d)
    d = np.where(last, np.where(two_last, mp, edge(hp, hpp, mp, mpp)), d)
    return np.where(first & last, 0.0, d)


_GL_X, _GL_W = np.polynomial.legendre.leggauss(16)


def cumulative_integral_over_t(gid, x, y, slopes) -> np.ndarray:
    """∫ from each group's first knot to every knot of p(T)/T dT, p the Hermite cubic with
    the given slopes. Integrated in v = ln T (∫ p/T dT = ∫ p(eᵛ) dv, an entire function) by
    16-point Gauss–Legendre per interval: converged to ~1e-8 even for one interval spanning
    a factor of 300 in T."""
    n = len(x)
    out = np.zeros(n)
    if n < 2:
        return out
    same = gid[1:] == gid[:-1]
    x0, x1, y0, y1 = x[:-1], x[1:], y[:-1], y[1:]
    k0, k1 = slopes[:-1], slopes[1:]
    h = x1 - x0
    with np.errstate(divide="ignore", invalid="ignore"):
        v0, v1 = np.log(x0), np.log(x1)
        vm, vh = (v0 + v1) / 2, (v1 - v0) / 2
        t = np.exp(vm[:, None] + vh[:, None] * _GL_X[None, :])
        s = (t - x0[:, None]) / h[:, None]
        h00, h10 = 2 * s ** 3 - 3 * s ** 2 + 1, s ** 3 - 2 * s ** 2 + s
        h01, h11 = -2 * s ** 3 + 3 * s ** 2, s ** 3 - s ** 2
        p = (h00 * y0[:, None] + h10 * (h * k0)[:, None] + h01 * y1[:, None] + h11 * (h * k1)[:, None])
        piece = vh * np.sum(_GL_W * p, axis=1)
    piece = np.where(same, piece, 0.0)
    csum = np.r_[0.0, np.cumsum(piece)]
    first = _starts(gid)
    base = csum[np.flatnonzero(first)]
    start_idx = np.flatnonzero(first)
    size = np.diff(np.r_[start_idx, n])
    return csum - np.repeat(base, size)


# ---------------------------------------------------------------------------------------
# Checks
# ---------------------------------------------------------------------------------------

@check("thirdlaw.zero-point", tolerances={"j_mol_k": 0.05})
def thirdlaw_zero_point(ctx: CheckContext) -> pd.DataFrame:
    """A table row at T = 0 must have S(0) = 0 and Cp(0) = 0.

    Relation: third law (Nernst–Planck): the entropy of a perfect crystal vanishes at 0 K,
    and Cp → 0 as T → 0 (Debye T³ law) (Lewis & Randall, *Thermodynamics*, 2nd ed. rev.
    Pitzer & Brewer, 1961, ch. 11). A real residual entropy of a disordered crystal is
    accepted by waiving the finding with its reason, never by hiding it.
    Tolerance: error when |S(0)| or |Cp(0)| exceeds 0.05 J/(mol·K) (table rounding;
    common practice).
    """
    cid = "thirdlaw.zero-point"
    tp = ctx.table_points
    if len(tp) == 0:
        return empty_findings()
    z = tp[np.isclose(tp["t_k"].to_numpy(float), 0.0, atol=1e-9)]
    if len(z) == 0:
        return empty_findings()
    z = z.merge(ctx.records[["record_id", "species"]], on="record_id", how="left")
    s0 = z["s_j_mol_k"].to_numpy(float)
    c0 = z["cp_j_mol_k"].to_numpy(float)
    tol = ctx.tol(cid, "j_mol_k")
    s_bad = np.abs(np.nan_to_num(s0)) > tol
    c_bad = np.abs(np.nan_to_num(c0)) > tol
    keep = np.flatnonzero(s_bad | c_bad)
    if len(keep) == 0:
        return empty_findings()
    sel = z.iloc[keep]
    use_s = np.abs(np.nan_to_num(s0[keep])) >= np.abs(np.nan_to_num(c0[keep]))
    obs = np.where(use_s, s0[keep], c0[keep])
    quantity = np.where(use_s, "S(0)", "Cp(0)")
    r_ln = {"R ln(3/2) (Pauling's ice)": R * np.log(1.5), "R ln 2 (two orientations)": R * np.log(2)}
    hint = np.full(len(keep), "a third-law table starts from S(0) = Cp(0) = 0: an entropy constant "
                              "or a Cp value at 0 K is wrong", dtype=object)
    for name, val in r_ln.items():
        hint = np.where(use_s & (np.abs(obs - val) < 0.3),
                        f"S(0) ≈ {name} = {val:.2f} J/(mol·K): a residual entropy of a disordered "
                        "crystal; if real, waive this finding with that reason", hint)
    msgs = [f"the T = 0 row gives {q} = {o:.4g} J/(mol·K); the third law requires 0"
            for q, o in zip(quantity, obs)]
    return make_findings(check_id=cid, severity="error", subject=sel["species"],
                         subject_kind="species", source_id=sel["source_id"], t_k=0.0,
                         observed=obs, expected=0.0, tolerance=tol, unit="J/(mol*K)",
                         message=msgs, hint=hint)


@check("thirdlaw.calorimetric-entropy", tolerances={"j_mol_k": 0.5, "t0_max_k": 30.0})
def thirdlaw_calorimetric_entropy(ctx: CheckContext) -> pd.DataFrame:
    """A condensed-phase table from low T has the entropy its own Cp implies.

    Relation: S(T) = S_Debye(T0) + ∫_{T0}^{T} Cp/T dT, where T0 ≤ 30 K is the lowest
    tabulated T > 0 and S_Debye(T0) the entropy of the Debye solid (n = atoms per formula
    unit) whose Debye temperature reproduces Cp(T0) (Debye, Ann. Phys. 39 (1912) 789;
    ``physics.debye_temperature``); it reduces to Cp(T0)/3 when T0 ≪ θ_D. The integral
    uses a cubic spline of Cp (not-a-knot) and its error estimate is the difference from
    the monotone-cubic (PCHIP) integral over the same points. If Cp(T0) ≥ 3nR no Debye
    temperature exists: info. Tolerance: residual r = S − calorimetric; error when
    r < −(0.5 J/(mol·K) + estimate) (a negative residual entropy is impossible); warning
    when r > 0.5 J/(mol·K) + estimate (a residual entropy: real for disordered crystals,
    e.g. ice, R ln 3/2 = 3.37 J/(mol·K), Pauling, J. Am. Chem. Soc. 57 (1935) 2680).
    0.5 J/(mol·K) covers the Debye model's error below T0 (common practice).
    """
    cid = "thirdlaw.calorimetric-entropy"
    tp = ctx.table_points
    if len(tp) == 0:
        return empty_findings()
    rs = ctx.record_species
    cond = rs[rs["state"].isin(CONDENSED) & (rs["kind"] == "table")]
    pts = tp[member(tp["record_id"], cond["record_id"]) & (tp["t_k"] > 0) & tp["cp_j_mol_k"].notna()]
    if len(pts) == 0:
        return empty_findings()
    pts = pts.sort_values(["record_id", "t_k"], kind="stable").drop_duplicates(["record_id", "t_k"])
    t0 = pts.groupby("record_id")["t_k"].transform("min")
    pts = pts[t0 <= ctx.tol(cid, "t0_max_k")]
    if len(pts) == 0:
        return empty_findings()
    pts = pts.merge(cond[["record_id", "species", "n_atoms"]], on="record_id", how="left")
    gid = pd.factorize(pts["record_id"])[0]
    x = pts["t_k"].to_numpy(float)
    y = pts["cp_j_mol_k"].to_numpy(float)
    first = _starts(gid)
    start_idx = np.flatnonzero(first)
    size = np.diff(np.r_[start_idx, len(x)])
    int_spline = cumulative_integral_over_t(gid, x, y, spline_slopes(gid, x, y))
    int_pchip = cumulative_integral_over_t(gid, x, y, pchip_slopes(gid, x, y))
    # Debye start, per record
    head = pts.iloc[start_idx]
    n_at = head["n_atoms"].to_numpy(float)
    cp0 = head["cp_j_mol_k"].to_numpy(float)
    t_0 = head["t_k"].to_numpy(float)
    theta = debye_temperature(cp0, t_0, n_at)
    s_debye = np.where(cp0 > 0, debye_entropy(t_0, theta, n_at), 0.0)
    no_theta = (cp0 >= 3 * n_at * R)
    tol = ctx.tol(cid, "j_mol_k")
    parts = []
    if no_theta.any():
        h = head[no_theta]
        parts.append(make_findings(
            check_id=cid, severity="info", subject=h["species"], subject_kind="species",
            source_id=h["source_id"], t_k=h["t_k"], observed=h["cp_j_mol_k"],
            expected=3 * n_at[no_theta] * R, tolerance=0.0, unit="J/(mol*K)",
            message=[f"Cp({t:g} K) = {c:.4g} J/(mol·K) is at or above the Dulong–Petit limit "
                     f"3nR = {3 * n * R:.4g}: no Debye temperature reproduces it, the "
                     "calorimetric entropy was not checked"
                     for t, c, n in zip(h["t_k"], h["cp_j_mol_k"], n_at[no_theta])],
            hint="Cp that high at so low a temperature suggests a unit slip or a wrong atom "
                 "count; otherwise the solid is far from Debye-like (magnetic or Schottky terms)"))
    s_cal = np.repeat(s_debye, size) + int_spline
    est = np.abs(int_spline - int_pchip)
    s_tab = pts["s_j_mol_k"].to_numpy(float)
    resid = s_tab - s_cal
    limit = tol + est
    valid = np.isfinite(resid) & ~np.repeat(no_theta | ~np.isfinite(s_debye), size)
    excess = np.where(valid, np.abs(resid) - limit, -np.inf)
    frame = pts[["record_id", "species", "source_id", "t_k"]].assign(
        resid=resid, limit=limit, excess=excess, s_cal=s_cal, s_tab=s_tab)
    frame = frame[frame["excess"] > 0]
    if len(frame):
        worst = frame.loc[frame.groupby("record_id")["excess"].idxmax()]
        r = worst["resid"].to_numpy(float)
        sev = np.where(r < 0, "error", "warning")
        near = lambda v: np.abs(r - v) < 0.3  # noqa: E731
        hint = np.select(
            [r < 0, near(R * np.log(1.5)), near(R * np.log(2.0))],
            ["S below what calorimetry allows: the entropy constant is too low, or Cp is too "
             "high (units?) — a negative residual entropy is impossible",
             "≈ R ln(3/2) = 3.37 J/(mol·K), Pauling's residual entropy of ice (proton "
             "disorder): real for such crystals — waive with that reason",
             "≈ R ln 2 = 5.76 J/(mol·K): two-fold orientational disorder frozen in "
             "(as in CO or N2O crystals) — if real, waive with that reason"],
            default="a residual entropy (frozen-in disorder), or S was anchored to a "
                    "different value than its own Cp implies")
        msgs = [f"tabulated S = {st:.4g} J/(mol·K) at {t:g} K; Debye below T0 plus ∫Cp/T dT "
                f"gives {sc:.4g} (residual {rr:+.3g})"
                for st, t, sc, rr in zip(worst["s_tab"], worst["t_k"], worst["s_cal"], r)]
        parts.append(make_findings(
            check_id=cid, severity=sev, subject=worst["species"], subject_kind="species",
            source_id=worst["source_id"], t_k=worst["t_k"], observed=worst["s_tab"],
            expected=worst["s_cal"], tolerance=worst["limit"], unit="J/(mol*K)",
            message=msgs, hint=hint))
    return pd.concat(parts, ignore_index=True) if parts else empty_findings()


@check("thirdlaw.gas-entropy-floor", tolerances={"j_mol_k": 0.05})
def thirdlaw_gas_entropy_floor(ctx: CheckContext) -> pd.DataFrame:
    """An ideal gas's entropy is at least its translational (Sackur–Tetrode) entropy.

    Relation: S(T, p°) ≥ S_tr(T, p°) = R[ln((2πmkT/h²)^{3/2} kT/p°) + 5/2] with m the
    molecular mass and p° the database's standard pressure; internal motions only add
    entropy (Sackur 1911, Tetrode 1912; ``physics.sackur_tetrode_entropy``).
    Polynomials are checked exactly enough without a grid: f(T) = S − S_tr has
    df/dT = (Cp − 5/2 R)/T, so f rises wherever Cp ≥ 5/2 R and its minimum on such a
    segment is at the segment's lower end; only segments whose exact Cp minimum
    (``cp_extrema``) dips below 5/2 R are sampled on a 257-point grid (df/dT = 0 at an
    interior minimum, so the grid misses it only to second order in the spacing; such a
    record already fails ``cp.gas-floor``). Tables: every row
    with T > 0. Tolerance: error when S < S_tr − 0.05 J/(mol·K) (table rounding; common
    practice).
    """
    cid = "thirdlaw.gas-entropy-floor"
    tol = ctx.tol(cid, "j_mol_k")
    mm = ctx.species.set_index("species")["molar_mass_g_mol"]
    cands = []      # the failing points only: (S − S_tr) < −tol
    seg = ctx.segment_species
    is_gas = (seg["state"] == "g").to_numpy(bool)
    if is_gas.any():
        coef = seg[list(COEF_COLUMNS)].to_numpy(float)[is_gas]
        lo, hi = seg["t_low_k"].to_numpy(float)[is_gas], seg["t_high_k"].to_numpy(float)[is_gas]
        cp_min = segment_cp_extrema(ctx)["cp_min"].to_numpy(float)[is_gas]
        dense = np.flatnonzero(cp_min < CP_TRANSLATION_R * R)
        m = map_keys(seg["species"], mm).astype(float)[is_gas]
        # ends of every segment; a 257-point grid only where Cp dips below 5/2 R
        t = np.stack([lo, hi], axis=1)
        s = evaluate(coef[:, None, :], t).s
        f = s - sackur_tetrode_entropy(t, m[:, None], ctx.p_db_bar)
        i = np.argmin(np.where(np.isfinite(f), f, np.inf), axis=1)
        rows = np.arange(len(coef))
        t_w, s_w, f_w = t[rows, i], s[rows, i], f[rows, i]
        if len(dense):
            grid = np.linspace(0.0, 1.0, 257)
            td = lo[dense, None] + (hi - lo)[dense, None] * grid[None, :]
            sd = evaluate(coef[dense, None, :], td).s
            fd = sd - sackur_tetrode_entropy(td, m[dense, None], ctx.p_db_bar)
            j = np.argmin(np.where(np.isfinite(fd), fd, np.inf), axis=1)
            r = np.arange(len(dense))
            better = fd[r, j] < f_w[dense]
            t_w[dense] = np.where(better, td[r, j], t_w[dense])
            s_w[dense] = np.where(better, sd[r, j], s_w[dense])
            f_w[dense] = np.where(better, fd[r, j], f_w[dense])
        fail = f_w < -tol
        if fail.any():
            ids = seg[["record_id", "species", "source_id"]].iloc[np.flatnonzero(is_gas)[fail]]
            cands.append(pd.DataFrame({c: ids[c].to_numpy(object) for c in ids.columns}
                                      | {"t_k": t_w[fail], "s": s_w[fail], "f": f_w[fail]}))
    tp = ctx.table_points
    if len(tp):
        rs = ctx.record_species
        gas_tab = rs[(rs["state"] == "g") & (rs["kind"] == "table")]
        pts = tp[member(tp["record_id"], gas_tab["record_id"]) & (tp["t_k"] > 0) & tp["s_j_mol_k"].notna()]
        if len(pts):
            species = map_keys(pts["record_id"], gas_tab.drop_duplicates("record_id").set_index("record_id")["species"])
            t_p, s_p = pts["t_k"].to_numpy(float), pts["s_j_mol_k"].to_numpy(float)
            f_p = s_p - sackur_tetrode_entropy(t_p, map_keys(species, mm).astype(float), ctx.p_db_bar)
            fail = f_p < -tol
            if fail.any():
                ids = pts[["record_id", "source_id"]][fail]
                cands.append(pd.DataFrame({
                    "record_id": ids["record_id"].to_numpy(object), "species": species[fail],
                    "source_id": ids["source_id"].to_numpy(object), "t_k": t_p[fail], "s": s_p[fail],
                    "f": f_p[fail]}))
    if not cands:
        return empty_findings()
    c = pd.concat(cands, ignore_index=True)
    bad = c.loc[c.groupby("record_id")["f"].idxmin()]
    f = bad["f"].to_numpy(float)
    s = bad["s"].to_numpy(float)
    s_tr = s - f
    with np.errstate(divide="ignore", invalid="ignore"):
        q = s_tr / s
    hint = np.select(
        [np.abs(f + R_LN_ATM) < 0.02,
         np.abs(q / 4.184 - 1) < 0.02],
        [f"short by R ln 1.01325 = {R_LN_ATM:.4f} J/(mol·K): a 1 atm standard state not "
         "converted to the database's 1 bar",
         "a factor of 4.184: S in cal/(mol·K) read as J/(mol·K)"],
        default="the entropy constant (b2 or the S column) is too low, or the species or its "
                "formula (molar mass) is wrong")
    msgs = [f"S = {a:.5g} J/(mol·K) at {t:g} K is below the translational entropy "
            f"{b:.5g} J/(mol·K) (Sackur–Tetrode at {ctx.p_db_bar:g} bar)"
            for a, t, b in zip(s, bad["t_k"], s_tr)]
    return make_findings(check_id=cid, severity="error", subject=bad["species"],
                         subject_kind="species", source_id=bad["source_id"], t_k=bad["t_k"],
                         observed=s, expected=s_tr, tolerance=tol, unit="J/(mol*K)",
                         message=msgs, hint=hint)
