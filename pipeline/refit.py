"""Refit species functions to NASA polynomials by constrained linear least squares.

Used for species whose curated record is a table (so that SQL macros and exports work
uniformly) and for records exported to a form their segments do not fit (a Shomate or a
NASA-9 segment with T⁻² or T⁻¹ terms written as NASA-7).

Method (linear least squares with linear equality constraints, Lawson & Hanson, *Solving
Least Squares Problems*, Prentice-Hall, 1974, ch. 20): two temperature ranges [T_lo, T_j]
and [T_j, T_hi], each a canonical segment (:mod:`pipeline.thermo`) restricted to the
form's terms

* ``nasa7``: a3…a7, b1, b2 (Cp/R a quartic in T; McBride, Gordon & Reno, NASA TM-4513, 1993);
* ``nasa9``: a1…a7, b1, b2 (McBride, Zehe & Gordon, NASA/TP-2002-211556, 2002).

Unknowns x = (segment below, segment above). Least squares on the dimensionless residuals
Cp/R, H/(RT) and S/R at Chebyshev–Lobatto sample points of [T_lo, T_hi], subject to five
equality constraints C x = d: Cp, H and S continuous at T_j, and H and S exact at 298.15 K
(at T_lo when the range starts above 298.15 K). The constrained problem is solved by the
null-space method (Golub & Van Loan, *Matrix Computations*, 4th ed., 2013, §6.2): with
C = U Σ Vᵀ, x = x_p + N z where x_p = V₁ Σ⁻¹ Uᵀ d and N = V₂ spans the null space of C; z
minimises ‖A N z − (b − A x_p)‖ (QR factorisation). Columns are scaled to unit norm first.

The joint T_j is the candidate with the smallest residual sum of squares: first among 9
candidates between 15 % and 85 % of the range (1000 K, the conventional NASA joint, is
always one when it lies in that window), then twice among 9 candidates within one step of
the best so far, each scan 4 times finer (rounded to 10 K; never closer than 10 % of the
range to its ends) — a raster of about 0.6 % of the range (35 K for 200–6000 K); the
residual varies slowly with T_j near its minimum, so a finer raster buys little (the
tests' CoolProp refits meet their 0.5 % Cp bound either way). At the
chosen joint, :data:`LAWSON_ITERATIONS` rounds of Lawson's reweighting (each row's weight
multiplied by its last absolute residual; C. L. Lawson, thesis, UCLA, 1961; Rice & Usow,
Math. Comp. 22 (1968) 118) move the fit from least squares towards the minimax fit,
lowering the maximum error that the quality rule judges (for CO2 over 298–6000 K in
NASA-7 form: max |ΔCp|/Cp 0.15 % → 0.11 %). Everything is batched over species × joint
candidates with numpy (blocks of species keep memory bounded); there is no per-species
Python loop.

Residuals are then measured against the source functions on a dense uniform grid
(:data:`N_CHECK` points): max |ΔCp|, max |ΔCp|/Cp, rms ΔCp, max |ΔH|, max |ΔS|.
:func:`quality_findings` turns a fit worse than the ``export.fit-quality`` tolerances into
a finding.
"""
from __future__ import annotations

from dataclasses import dataclass
from typing import Callable

import numpy as np
import pandas as pd

from .constants import R, T_REF
from .findings import empty_findings, make_findings
from .thermo import COEF_COLUMNS, evaluate

#: Terms of the canonical segment each form may use (indices into a1..a7, b1, b2).
FORM_TERMS: dict[str, tuple[int, ...]] = {
    "nasa7": (2, 3, 4, 5, 6, 7, 8),
    "nasa9": (0, 1, 2, 3, 4, 5, 6, 7, 8),
}
#: Lowest temperature a refit covers [K]. Polynomial fits of thermodynamic functions are
#: conventionally made from 200 K up (NASA/TP-2002-211556); below, Cp of a solid follows
#: the Debye T³ law, which no low-order polynomial in T reproduces. Tables that start
#: lower keep their cryogenic rows in ``table_points``/``properties``.
T_FIT_MIN_K = 200.0
N_SAMPLES = 64
N_CHECK = 241
N_JOINTS = 9
_BLOCK = 48
LAWSON_ITERATIONS = 10

#: Values of the functions being fitted: (record ids (n,), T (n, m)) → Cp, H, S (n, m) in
#: J/(mol*K), J/mol (absolute), J/(mol*K).
ValuesFn = Callable[[np.ndarray, np.ndarray], tuple[np.ndarray, np.ndarray, np.ndarray]]

FIT_COLUMNS = ("record_id", "form", "t_low_k", "t_high_k", "t_joint_k", "t_anchor_k",
               "max_abs_dcp_j_mol_k", "max_rel_dcp", "rms_dcp_j_mol_k", "max_abs_dh_j_mol",
               "max_abs_ds_j_mol_k", "t_worst_k")


@dataclass(frozen=True)
class Refit:
    """Result of :func:`refit`.

    segments : frame ``record_id, segment, t_low_k, t_high_k, a1..b2`` (two per record);
    fits : frame of :data:`FIT_COLUMNS`, one row per record (residuals in SI units).
    """

    segments: pd.DataFrame
    fits: pd.DataFrame


def _basis(t: np.ndarray):
    """Rows of Cp/R, H/(RT), S/R as linear functions of the 9 canonical coefficients.

    t : array (...) [K] → three arrays (..., 9) (NASA/TP-2002-211556, eqs. 2-4).
    """
    t = np.asarray(t, float)
    inv, lnt = 1.0 / t, np.log(t)
    one, zero = np.ones_like(t), np.zeros_like(t)
    cp = np.stack([inv ** 2, inv, one, t, t ** 2, t ** 3, t ** 4, zero, zero], axis=-1)
    h = np.stack([-inv ** 2, lnt * inv, one, t / 2, t ** 2 / 3, t ** 3 / 4, t ** 4 / 5, inv, zero], axis=-1)
    s = np.stack([-inv ** 2 / 2, -inv, lnt, t, t ** 2 / 2, t ** 3 / 3, t ** 4 / 4, zero, one], axis=-1)
    return cp, h, s


def _lobatto(lo: np.ndarray, hi: np.ndarray, m: int) -> np.ndarray:
    """Chebyshev–Gauss–Lobatto points of each [lo, hi] → (n, m), ascending."""
    x = -np.cos(np.pi * np.arange(m) / (m - 1))
    return lo[:, None] + (hi - lo)[:, None] * (x[None, :] + 1) / 2


def joint_candidates(lo: np.ndarray, hi: np.ndarray, k: int = N_JOINTS) -> np.ndarray:
    """Candidate joints (n, k) [K]: 15 %–85 % of each range, rounded to 10 K, with the
    candidate nearest 1000 K replaced by 1000 K when that lies in the window."""
    f = np.linspace(0.15, 0.85, k)
    c = np.round((lo[:, None] + (hi - lo)[:, None] * f[None, :]) / 10.0) * 10.0
    c = np.clip(c, lo[:, None] + 1e-6, hi[:, None] - 1e-6)
    inside = (1000.0 >= c[:, 0]) & (1000.0 <= c[:, -1])
    near = np.argmin(np.abs(c - 1000.0), axis=1)
    rows = np.flatnonzero(inside)
    c[rows, near[rows]] = 1000.0
    return c


def _solve_block(t, cp, h, s, joints, t_anchor, h_anchor, s_anchor, terms, row_w=None):
    """Constrained fits of one block. Shapes: t, cp, h, s (n, m); joints (n, J);
    anchors (n,). Returns coefficients (n, J, 2, 9) and residual sums of squares (n, J)."""
    n, m = t.shape
    J = joints.shape[1]
    q = len(terms)
    bcp, bh, bs = (b[..., terms] for b in _basis(t))                       # (n, m, q)
    rows = np.concatenate([bcp, bh, bs], axis=1)                            # (n, 3m, q)
    rhs = np.concatenate([cp / R, h / (R * t), s / R], axis=1)              # (n, 3m)
    sw = np.ones_like(rhs) if row_w is None else np.sqrt(row_w)            # weighted least squares
    rows, rhs = rows * sw[..., None], rhs * sw
    t3 = np.concatenate([t, t, t], axis=1)                                  # (n, 3m)
    below = t3[:, None, :] <= joints[:, :, None]                            # (n, J, 3m)
    A = np.zeros((n, J, 3 * m, 2 * q))
    A[..., :q] = np.where(below[..., None], rows[:, None], 0.0)
    A[..., q:] = np.where(below[..., None], 0.0, rows[:, None])
    # constraints: continuity of Cp, H, S at the joint; H and S exact at the anchor
    jc, jh, js = (b[..., terms] for b in _basis(joints))                   # (n, J, q)
    ac, ah, as_ = (b[..., terms] for b in _basis(t_anchor))                # (n, q)
    C = np.zeros((n, J, 5, 2 * q))
    for i, b in enumerate((jc, jh, js)):
        C[:, :, i, :q], C[:, :, i, q:] = b, -b
    anchor_below = (t_anchor[:, None] <= joints)[..., None]                # (n, J, 1)
    for i, b in ((3, ah), (4, as_)):
        C[:, :, i, :q] = np.where(anchor_below, b[:, None, :], 0.0)
        C[:, :, i, q:] = np.where(anchor_below, 0.0, b[:, None, :])
    d = np.zeros((n, J, 5))
    d[:, :, 3] = (h_anchor / (R * t_anchor))[:, None]
    d[:, :, 4] = (s_anchor / R)[:, None]
    # column scaling (x = y / D) for conditioning
    D = np.sqrt(np.sum(A * A, axis=2))                                      # (n, J, 2q)
    D = np.where(D > 0, D, 1.0)
    As, Cs = A / D[:, :, None, :], C / D[:, :, None, :]
    U, sig, Vt = np.linalg.svd(Cs, full_matrices=True)                     # Vt (n, J, 2q, 2q)
    y_p = np.einsum("njki,njk->nji", Vt[:, :, :5, :], np.einsum("njlk,njl->njk", U, d) / sig)
    N = np.swapaxes(Vt[:, :, 5:, :], -1, -2)                              # (n, J, 2q, 2q-5)
    r = rhs[:, None, :] - np.einsum("njrc,njc->njr", As, y_p)
    AN = As @ N                                                            # (n, J, 3m, 2q-5)
    Q, Rt = np.linalg.qr(AN)                                               # batched Householder QR
    z = np.linalg.solve(Rt, np.einsum("njrk,njr->njk", Q, r)[..., None])[..., 0]
    y = y_p + np.einsum("njck,njk->njc", N, z)
    res = r - np.einsum("njrk,njk->njr", AN, z)
    x = y / D
    coef = np.zeros((n, J, 2, 9))
    coef[:, :, 0, terms] = x[..., :q]
    coef[:, :, 1, terms] = x[..., q:]
    return coef, np.sum(res * res, axis=-1), res / sw[:, None, :]


def refit(items: pd.DataFrame, values: ValuesFn, form: str, *, n_samples: int = N_SAMPLES,
          n_check: int = N_CHECK, t_fit_min_k: float = T_FIT_MIN_K) -> Refit:
    """Fit two-range ``form`` polynomials to the functions of each item.

    Parameters
    ----------
    items : frame with ``record_id, t_low_k, t_high_k`` (the range of the functions [K]).
    values : :data:`ValuesFn` giving Cp [J/(mol*K)], absolute H [J/mol], S [J/(mol*K)].
    form : ``nasa7`` or ``nasa9``.
    t_fit_min_k : the fit covers max(t_low_k, t_fit_min_k) … t_high_k [K].

    Returns
    -------
    Refit
        Segments (record id as given) and the residuals of the chosen fit.
    """
    if form not in FORM_TERMS:
        raise ValueError(f"unknown form {form!r}; expected one of {sorted(FORM_TERMS)}")
    terms = np.array(FORM_TERMS[form])
    rid = items["record_id"].to_numpy(dtype=object)
    hi = items["t_high_k"].to_numpy(float)
    lo = np.minimum(np.maximum(items["t_low_k"].to_numpy(float), t_fit_min_k), hi - 1.0)
    seg_rows, fit_rows = [], []
    for start in range(0, len(rid), _BLOCK):
        sl = slice(start, start + _BLOCK)
        r_b, lo_b, hi_b = rid[sl], lo[sl], hi[sl]
        t = _lobatto(lo_b, hi_b, n_samples)
        cp, h, s = values(r_b, t)
        t_anchor = np.where((lo_b <= T_REF) & (hi_b >= T_REF), T_REF, lo_b)
        ca, ha, sa = values(r_b, t_anchor[:, None])
        k = np.arange(len(r_b))
        joints = joint_candidates(lo_b, hi_b)
        step = (joints[:, -1] - joints[:, 0]) / (N_JOINTS - 1)
        best_rss = np.full(len(r_b), np.inf)
        c, tj = np.zeros((len(r_b), 2, 9)), joints[:, 0].copy()
        for _ in range(3):  # coarse scan, then two finer scans around the best joint so far
            coef, rss, _ = _solve_block(t, cp, h, s, joints, t_anchor, ha[:, 0], sa[:, 0], terms)
            rss = np.where(np.isfinite(rss), rss, np.inf)
            best = np.argmin(rss, axis=1)
            better = rss[k, best] < best_rss
            best_rss = np.where(better, rss[k, best], best_rss)
            c = np.where(better[:, None, None], coef[k, best], c)          # (n, 2, 9)
            tj = np.where(better, joints[k, best], tj)
            joints = np.round((tj[:, None] + step[:, None] * np.linspace(-1, 1, N_JOINTS)[None, :]) / 10) * 10
            joints = np.clip(joints, lo_b[:, None] + 0.1 * (hi_b - lo_b)[:, None],
                             hi_b[:, None] - 0.1 * (hi_b - lo_b)[:, None])
            step = step / ((N_JOINTS - 1) / 2)
        # Lawson's iteratively reweighted least squares at the chosen joint: drives the fit
        # from least squares towards the minimax (equal-ripple) fit, which lowers the
        # maximum error that the quality rule judges (Lawson, 1961; Rice & Usow, Math.
        # Comp. 22 (1968) 118).
        w = np.ones((len(r_b), 3 * n_samples))
        for _ in range(LAWSON_ITERATIONS):
            coef, _, res = _solve_block(t, cp, h, s, tj[:, None], t_anchor, ha[:, 0], sa[:, 0], terms, w)
            ok = np.all(np.isfinite(coef), axis=(1, 2, 3))
            c = np.where(ok[:, None, None], coef[:, 0], c)
            w = w * np.abs(res[:, 0, :])
            w = w / np.maximum(w.sum(axis=1, keepdims=True), 1e-300) * w.shape[1]
            w = np.maximum(w, 1e-12)
        # residuals on a dense uniform grid
        tc = lo_b[:, None] + (hi_b - lo_b)[:, None] * np.linspace(0, 1, n_check)[None, :]
        cp_d, h_d, s_d = values(r_b, tc)
        seg = np.where(tc <= tj[:, None], 0, 1)
        p = evaluate(c[k[:, None], seg], tc)
        dcp, dh, ds = p.cp - cp_d, p.h - h_d, p.s - s_d
        rel = np.abs(dcp) / np.maximum(np.abs(cp_d), 1e-12)
        fit_rows.append(pd.DataFrame({
            "record_id": r_b, "form": form, "t_low_k": lo_b, "t_high_k": hi_b, "t_joint_k": tj,
            "t_anchor_k": t_anchor,
            "max_abs_dcp_j_mol_k": np.nanmax(np.abs(dcp), axis=1), "max_rel_dcp": np.nanmax(rel, axis=1),
            "rms_dcp_j_mol_k": np.sqrt(np.nanmean(dcp ** 2, axis=1)),
            "max_abs_dh_j_mol": np.nanmax(np.abs(dh), axis=1), "max_abs_ds_j_mol_k": np.nanmax(np.abs(ds), axis=1),
            "t_worst_k": tc[k, np.nanargmax(rel, axis=1)]}))
        for i, (a, b) in enumerate(((lo_b, tj), (tj, hi_b))):
            seg_rows.append(pd.DataFrame({"record_id": r_b, "segment": i, "t_low_k": a, "t_high_k": b,
                                          **{col: c[:, i, j] for j, col in enumerate(COEF_COLUMNS)}}))
    if not fit_rows:
        return Refit(pd.DataFrame(columns=["record_id", "segment", "t_low_k", "t_high_k", *COEF_COLUMNS]),
                     pd.DataFrame(columns=list(FIT_COLUMNS)))
    segs = pd.concat(seg_rows, ignore_index=True).sort_values(["record_id", "segment"], kind="stable")
    return Refit(segs.reset_index(drop=True), pd.concat(fit_rows, ignore_index=True)[list(FIT_COLUMNS)])


#: Default tolerances of ``export.fit-quality`` (see its declaration in checks/declared.py).
FIT_TOLERANCES = {"cp_rel": 0.005, "h_j_mol": 100.0, "s_j_mol_k": 0.1, "error_factor": 4.0}


def quality_findings(fits: pd.DataFrame, species: pd.Series | np.ndarray, source_id, tol=None) -> pd.DataFrame:
    """``export.fit-quality`` findings for fits whose residuals exceed the tolerances.

    fits : rows of :data:`FIT_COLUMNS`; species, source_id : aligned with ``fits``;
    tol : mapping of the four tolerance names (defaults :data:`FIT_TOLERANCES`).
    Warning beyond a tolerance, error beyond ``error_factor`` × it; the quantity furthest
    beyond its tolerance is named.
    """
    tol = dict(FIT_TOLERANCES, **(tol or {}))
    if not len(fits):
        return empty_findings()
    obs = {"cp": fits["max_rel_dcp"].to_numpy(float), "h": fits["max_abs_dh_j_mol"].to_numpy(float),
           "s": fits["max_abs_ds_j_mol_k"].to_numpy(float)}
    lim = {"cp": tol["cp_rel"], "h": tol["h_j_mol"], "s": tol["s_j_mol_k"]}
    names = list(obs)
    ratio = np.stack([np.nan_to_num(obs[k], nan=np.inf) / lim[k] for k in names], axis=1)
    worst = np.argmax(ratio, axis=1)
    wr = ratio[np.arange(len(fits)), worst]
    sev = np.where(wr > tol["error_factor"], "error", np.where(wr > 1, "warning", None))
    keep = sev != None  # noqa: E711  (object array)
    if not keep.any():
        return empty_findings()
    rows = np.flatnonzero(keep)
    unit = {"cp": "1", "h": "J/mol", "s": "J/(mol*K)"}
    label = {"cp": "Cp (relative)", "h": "H", "s": "S"}
    f = fits.iloc[rows]
    q = [names[worst[r]] for r in rows]
    msg = [f"{r.form} refit of {r.record_id} over {r.t_low_k:g}–{r.t_high_k:g} K (joint {r.t_joint_k:g} K) "
           f"misses the source by max ΔCp {100 * r.max_rel_dcp:.3g} %, ΔH {r.max_abs_dh_j_mol:.3g} J/mol, "
           f"ΔS {r.max_abs_ds_j_mol_k:.3g} J/(mol·K)" for r in f.itertuples(index=False)]
    return make_findings(
        check_id="export.fit-quality", severity=sev[rows], subject=np.asarray(species, dtype=object)[rows],
        subject_kind="species", source_id=np.broadcast_to(np.asarray(source_id, dtype=object), len(fits))[rows],
        t_k=f["t_worst_k"].to_numpy(float), observed=[obs[k][r] for k, r in zip(q, rows)], expected=0.0,
        tolerance=[lim[k] for k in q], unit=[unit[k] for k in q], message=msg,
        hint=[f"{label[k]} is worst; the functions have more structure than two {f.iloc[0].form} ranges "
              "hold (a phase change, a λ-transition or tabulation noise): export the table itself, "
              "or split the species" for k in q])
