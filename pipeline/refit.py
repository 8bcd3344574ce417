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
(at T_lo when the range starts above 298.15 K).

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
NASA-7 form: max |ΔCp|/Cp 0.15 % → 0.11 %).

Numerics (the same least-squares problems, solved faster and at least as accurately):

* Each range is fitted in a basis of the form's functions adapted to an interval near it
  (:func:`_adapted_basis`: Cp/R = T_j(u) or (c/T)² T_j(u), T_j Chebyshev polynomials of the
  reduced temperature u ∈ [−1, 1]); the coefficients are transformed back to the canonical
  a1…b2 at the end. The canonical monomials T⁻²…T⁴ are nearly collinear on a short range
  (condition number ~10⁷ after column scaling on 1000–2000 K, ~10⁹ on 200–300 K); the
  adapted basis is well conditioned (~10–10³), which lets the joint scans use the normal
  equations: the Gram matrices of the rows below and above a candidate joint are sums over
  the samples, formed once per scan and added up per candidate (:class:`_Ranges`), and the
  constraints enter through their Schur complement (:class:`_Constrained`; batched Cholesky
  factorisations, :func:`_chol`). Unknowns are solved for as corrections to a reference fit,
  so the errors of the normal equations scale with its small residuals (a built-in step of
  iterative refinement; Björck, *Numerical Methods for Least Squares Problems*, SIAM, 1996,
  §2.9).
* Lawson's iterations use the null-space method (Golub & Van Loan, *Matrix Computations*,
  4th ed., 2013, §6.2: C = U Σ Vᵀ, x = x_p + N z) with the weighted normal equations for
  the change of z, plus one refinement step on the residuals computed from the rows.
* Records that share their fitted range (tables on a common grid; at least
  :data:`_SHARED_MIN` of them) share every matrix of these problems: per candidate joint the
  constrained least-squares solution is computed once as a linear operator of the values
  (null-space method with a Householder QR; :class:`_SharedRange`) and applied to all of them
  by matrix products, and Lawson's weighted Gram matrices of all of them are one product with
  the rows' outer products.

Everything is batched over species × joint candidates with numpy (blocks of species keep
memory bounded); there is no per-species Python loop. The residual statistics of the fits
agree with a 50-digit evaluation of the same algorithm to 10⁻⁶ relative or better
(``bench/refit_scale.py --reference``); results of records solved together and alone agree
to round-off.

Residuals are then measured against the source functions on a dense uniform grid
(:data:`N_CHECK` points): max |ΔCp|, max |ΔCp|/Cp, rms ΔCp, max |ΔH|, max |ΔS|.
:func:`quality_findings` turns a fit worse than the ``export.fit-quality`` tolerances into
a finding.
"""
from __future__ import annotations

import contextlib
import math
import os
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
#: Records per call of the source functions and per batch of Lawson's iterations; the joint
#: scans of records fitted one by one go in sub-blocks of _SCAN_BLOCK (memory ~ 10 MB).
_BLOCK = 512
_SCAN_BLOCK = 128
#: Records whose fitted range at least this many share are solved together (_SharedRange):
#: the operators of the 50–100 candidate joints a scan visits cost about as much as fitting
#: 30 records one by one.
_SHARED_MIN = 64
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


def _solve(G: np.ndarray, rhs: np.ndarray) -> np.ndarray:
    """``np.linalg.solve`` over a batch; an exactly singular matrix gives NaN for its own
    solution instead of failing the whole batch (a non-finite fit is a failed fit)."""
    try:
        return np.linalg.solve(G, rhs)
    except np.linalg.LinAlgError:
        out = np.full(np.broadcast_shapes(G.shape[:-2], rhs.shape[:-2]) + rhs.shape[-2:], np.nan)
        Gb, rb = np.broadcast_to(G, out.shape[:-2] + G.shape[-2:]), np.broadcast_to(rhs, out.shape)
        for i in np.ndindex(out.shape[:-2]):
            try:
                out[i] = np.linalg.solve(Gb[i], rb[i])
            except np.linalg.LinAlgError:
                pass
        return out


def _chol(A: np.ndarray) -> np.ndarray:
    """Cholesky factors of symmetric positive definite matrices, batch last.

    A (k, k, N) → lower-triangular L (k, k, N) with A = L Lᵀ (only the lower triangle of L
    is written); NaN for a matrix that is not numerically positive definite, never an
    exception. numpy's linalg gufuncs call LAPACK once per matrix, which at these sizes
    (k ≤ 13, many thousands of matrices) costs more than the arithmetic; here each step is
    one array operation over the whole batch.
    """
    k = A.shape[0]
    L = np.empty_like(A)
    with np.errstate(invalid="ignore", divide="ignore"):
        for j in range(k):
            Lj = L[j, :j]
            d = A[j, j] - np.einsum("kn,kn->n", Lj, Lj) if j else A[j, j]
            L[j, j] = np.sqrt(np.where(d > 0, d, np.nan))
            if j + 1 < k:
                s = A[j + 1:, j] - np.einsum("ikn,kn->in", L[j + 1:, :j], Lj) if j else A[j + 1:, j]
                L[j + 1:, j] = s / L[j, j]
    return L


def _forward(L: np.ndarray, X: np.ndarray) -> np.ndarray:
    """L⁻¹ X for L (k, k, N) from :func:`_chol`, X (k, p, N); X is overwritten."""
    for j in range(L.shape[0]):
        if j:
            X[j] -= np.einsum("kn,kcn->cn", L[j, :j], X[:j])
        X[j] /= L[j, j]
    return X


def _backward(L: np.ndarray, X: np.ndarray) -> np.ndarray:
    """L⁻ᵀ X for L (k, k, N) from :func:`_chol`, X (k, p, N); X is overwritten."""
    k = L.shape[0]
    for j in range(k - 1, -1, -1):
        if j + 1 < k:
            X[j] -= np.einsum("kn,kcn->cn", L[j + 1:, j], X[j + 1:])
        X[j] /= L[j, j]
    return X


def _batch_last(a: np.ndarray, k: int) -> np.ndarray:
    """(..., k, p) → (k, p, N), N the product of the leading axes (a copy)."""
    a = a.reshape(-1, k, a.shape[-1])
    return np.ascontiguousarray(np.moveaxis(a, 0, -1))


class _Constrained:
    """Equality-constrained least squares of two ranges from their normal equations.

    min ‖B₁y₁ − b₁‖² + ‖B₂y₂ − b₂‖² subject to C₁y₁ + C₂y₂ = d, given each range's Gram
    matrix G = BᵀB (SPD): with G = L Lᵀ and W = L⁻¹Cᵀ, the Schur complement of the
    constraints S = Σ WᵀW, and y = L⁻ᵀ(L⁻¹g − Wλ) where S λ = Σ Wᵀ L⁻¹ g − d
    (Golub & Van Loan, *Matrix Computations*, 4th ed., 2013, §6.2 and §4.2). Batch shape
    (...,): G (..., 2, q, q), C (..., 2, 5, q); the factorisations are batched (:func:`_chol`).
    """

    def __init__(self, G: np.ndarray, C: np.ndarray):
        self.shape, self.q = G.shape[:-3], G.shape[-1]
        q = self.q
        self.L = _chol(_batch_last(np.moveaxis(G, -3, 0), q))            # (q, q, 2N), ranges outermost
        W = _forward(self.L, _batch_last(np.moveaxis(np.swapaxes(C, -1, -2), -3, 0), q))  # (q, 5, 2N)
        self.W = W = np.ascontiguousarray(W.reshape(q, 5, 2, -1).transpose(1, 0, 2, 3)).reshape(5, 2 * q, -1)
        S = np.empty((5, 5, W.shape[-1]))                                   # Σ WᵀW over both ranges
        for a in range(5):
            S[a, a:] = np.sum(W[a] * W[a:], axis=1)
            S[a + 1:, a] = S[a, a + 1:]
        self.LS = _chol(S)                                                  # (5, 5, N)

    def solve(self, g: np.ndarray, d: np.ndarray) -> np.ndarray:
        """g (..., 2, q), d (..., 5) → y (..., 2, q)."""
        q = self.q
        u = _forward(self.L, _batch_last(np.moveaxis(g, -2, 0)[..., None], q)).reshape(2 * q, -1)  # (2q, N)
        e = np.sum(self.W * u, axis=1) - _batch_last(d[..., None], 5)[:, 0]      # (5, N)
        lam = _backward(self.LS, _forward(self.LS, e[:, None, :]))[:, 0]  # (5, N)
        r = u - np.sum(self.W * lam[:, None, :], axis=0)                  # (2q, N)
        y = _backward(self.L, r.reshape(q, 1, -1))[:, 0]                  # (q, 2N)
        return np.moveaxis(y.reshape(q, 2, -1), (0, 1), (-1, -2)).reshape(self.shape + (2, q))


def _chebyshev_powers(k: int) -> np.ndarray:
    """g (k, k): Chebyshev polynomial T_j(u) = Σ_l g[j, l] uˡ, j, l < k."""
    g = np.zeros((k, k))
    g[0, 0] = 1.0
    if k > 1:
        g[1, 1] = 1.0
    for j in range(2, k):
        g[j, 1:] = 2 * g[j - 1, :-1]
        g[j] -= g[j - 2]
    return g


_CHEB = {k: _chebyshev_powers(k) for k in (5, 7)}
_BINOM = {k: np.array([[math.comb(l, i) for i in range(k)] for l in range(k)], float) for k in (5, 7)}


def _adapted_basis(a: np.ndarray, b: np.ndarray, terms: np.ndarray) -> np.ndarray:
    """Basis of the form's functions adapted to [a, b], as canonical coefficients.

    Returns M (..., q, q) with canonical coefficients x = M y: column j < q − 2 is the
    function with Cp/R = T_j(u) (NASA-7) or (c/T)² T_j(u) (NASA-9), T_j the Chebyshev
    polynomial of u = (T − c)/w, c and w the centre and half-width of [a, b], and with H and
    S integrated from c (b1, b2 chosen so that H = S = 0 at c); the last two columns are b1 = c
    and b2 = 1. Least squares in this basis is well conditioned on any interval not much
    shorter than [a, b], so that it can be solved by its normal equations; the canonical
    monomials T⁻²…T⁴ are nearly collinear on a narrow range (condition numbers up to 10⁹ after
    column scaling, for 200–300 K), and their normal equations would be singular.
    """
    a, b = np.broadcast_arrays(np.asarray(a, float), np.asarray(b, float))
    q = len(terms)
    k = q - 2                                                              # polynomial terms
    c, w = (a + b) / 2, np.maximum((b - a) / 2, 1e-9 * np.abs(b))
    # P[..., l, i] = binom(l, i) (−c)^(l−i) / w^l, the coefficient of T^i in u^l
    e = np.arange(k)
    rc = (-c / w)[..., None] ** e                                         # (−c/w)^e
    wi = (1.0 / w)[..., None] ** e                                         # w^−i
    diff = np.maximum(e[:, None] - e[None, :], 0)
    P = np.where(e[:, None] >= e[None, :], _BINOM[k] * rc[..., diff] * wi[..., None, :], 0.0)
    beta = _CHEB[k] @ P                                                    # (..., j, i)
    if q == 9:
        beta = beta * (c * c)[..., None, None]                            # (c/T)² T_j(u)
    M = np.zeros(a.shape + (q, q))
    M[..., :k, :k] = np.swapaxes(beta, -1, -2)
    _, hc, sc = (x[..., terms[:k]] for x in _basis(c))
    M[..., k, :k] = -c[..., None] * (beta @ hc[..., :, None])[..., 0]
    M[..., k + 1, :k] = -(beta @ sc[..., :, None])[..., 0]
    M[..., k, k] = c
    M[..., k + 1, k + 1] = 1.0
    return M


def _constraints(joints, t_anchor, terms):
    """Constraint rows (canonical) of each range: joints (n, J), t_anchor (n,) →
    C (n, J, 2, 5, q): Cp/R, H/(RT), S/R continuous at the joint (rows 0–2), H/(RT) and S/R
    of the range holding the anchor exact there (rows 3–4; right-hand sides
    H(T_a)/(R T_a) and S(T_a)/R, the other rows' zero)."""
    n, J = joints.shape
    q = len(terms)
    jc, jh, js = (b[..., terms] for b in _basis(joints))                  # (n, J, q)
    _, ah, as_ = (b[..., terms] for b in _basis(t_anchor))                # (n, q)
    below = (t_anchor[:, None] <= joints)[..., None]                       # (n, J, 1)
    C = np.zeros((n, J, 2, 5, q))
    for i, row in enumerate((jc, jh, js)):
        C[:, :, 0, i], C[:, :, 1, i] = row, -row
    for i, row in ((3, ah), (4, as_)):
        C[:, :, 0, i] = np.where(below, row[:, None, :], 0.0)
        C[:, :, 1, i] = np.where(below, 0.0, row[:, None, :])
    return C


class _SPD:
    """Jacobi-scaled Cholesky factors of SPD matrices G (..., k, k) (:func:`_chol`), for
    solving G y = g with several right-hand sides in turn (:meth:`solve`)."""

    def __init__(self, G: np.ndarray):
        self.k = k = G.shape[-1]
        s = np.sqrt(np.einsum("...ii->...i", G))
        self.s = np.where(s > 0, s, 1.0)
        self.L = _chol(_batch_last(G / self.s[..., :, None] / self.s[..., None, :], k))

    def solve(self, g: np.ndarray) -> np.ndarray:
        """g (..., k) → y (..., k)."""
        y = _backward(self.L, _forward(self.L, _batch_last((g / self.s)[..., None], self.k)))[:, 0]
        return np.moveaxis(y, 0, -1).reshape(g.shape) / self.s


class _Ranges:
    """The least-squares rows of a block in the bases adapted to [lo, t_a] and [t_b, hi],
    prepared for the normal equations of candidate joints in [t_min, t_max].

    rows (n, 3m, q), rhs (n, 3m): the Cp/R, H/(RT), S/R rows at the m samples t (n, m),
    ascending, function by function. Each range's unknowns are written y = y_ref + δ, y_ref
    its unconstrained least-squares fit over [lo, t_a] (resp. [t_b, hi]) and r_ref = b − B y_ref
    its residuals at every sample; a candidate's residual sum of squares is then
    Σ r_ref² − 2 δᵀBᵀr_ref + δᵀGδ over each range's rows. Solving for the correction δ rather
    than y keeps the errors of the normal equations proportional to the small r_ref instead
    of b (as a step of iterative refinement would; Björck, *Numerical Methods for Least
    Squares Problems*, SIAM, 1996, §2.9), and the sum of squares needs no residual vector
    per candidate. G, Bᵀr_ref and Σ r_ref² are the blocks of the Gram matrix of [B, r_ref]:
    of the rows below t_min (above t_max) once, by a matrix product; of the samples in
    between, sample by sample, added up per candidate (:meth:`normal_equations`).
    """

    def __init__(self, rows, rhs, t, lo, hi, t_a, t_b, t_min, t_max, terms):
        n, m3, q = rows.shape
        m = m3 // 3
        self.m, self.q = m, q
        self.M = np.stack([_adapted_basis(lo, t_a, terms), _adapted_basis(t_b, hi, terms)], axis=1)  # (n, 2, q, q)
        Ba = np.empty((n, 2, m3, q + 1))                                   # [B, r_ref]
        np.matmul(rows[:, None], self.M, out=Ba[..., :q])
        B = Ba[..., :q]
        s3 = np.tile(np.arange(m), 3)                                      # sample of each row
        ka, kb = (np.sum(t <= x[:, None], axis=1) for x in (t_a, t_b))
        ref = np.stack([s3 < ka[:, None], s3 >= kb[:, None]], axis=1)     # (n, 2, 3m)
        Bmt = np.swapaxes(np.where(ref[..., None], B, 0.0), -1, -2)
        self.y_ref = _SPD(Bmt @ B).solve((Bmt @ rhs[:, None, :, None])[..., 0])
        Ba[..., q] = rhs[:, None, :] - (B @ self.y_ref[..., None])[..., 0]  # r_ref (n, 2, 3m)
        Bat = np.ascontiguousarray(np.swapaxes(Ba, -1, -2))               # (n, 2, q + 1, 3m)
        # the samples that candidates in [t_min, t_max] can move between ranges: [k0, k1)
        k0, k1 = (np.sum(t <= x[:, None], axis=1) for x in (t_min, t_max))
        self.k0, self.k1 = k0, k1
        outside = np.stack([s3 < k0[:, None], s3 >= k1[:, None]], axis=1)  # (n, 2, 3m)
        self.S = Bat @ np.where(outside[..., None], Ba, 0.0)               # (n, 2, q + 1, q + 1)
        self.W = W = max(int(np.max(k1 - k0)), 1)
        ws = k0[:, None] + np.arange(W)[None, :]                           # window samples (n, W)
        inside = ws < k1[:, None]
        idx = (np.arange(3) * m)[None, :, None] + np.minimum(ws, m - 1)[:, None, :]   # rows (n, 3, W)
        Bw = np.take_along_axis(Bat, idx.reshape(n, 1, 1, 3 * W), axis=-1).reshape(n, 2, q + 1, 3, W)
        Bw = np.moveaxis(Bw, -1, 2) * inside[:, None, :, None, None]      # (n, 2, W, q + 1, 3)
        self.Pw = (Bw @ np.swapaxes(Bw, -1, -2)).reshape(n, 2, W, -1)      # per sample (n, 2, W, (q + 1)²)

    def normal_equations(self, k):
        """k (n, J): samples below each joint → G (n, J, 2, q, q), Bᵀr_ref (n, J, 2, q) and
        Σ r_ref² (n, J, 2) of each range's rows."""
        n, J = k.shape
        q = self.q
        if np.any((k < self.k0[:, None]) | (k > self.k1[:, None])):  # a bug, never the data's fault
            raise AssertionError("refit: a candidate joint outside the sample window prepared for it")
        below = np.arange(self.W)[None, None, :] < (k - self.k0[:, None])[:, :, None]  # (n, J, W)
        mask = np.stack([below, ~below], axis=1).astype(float)            # (n, 2, J, W)
        S = self.S[:, :, None] + (mask @ self.Pw).reshape(n, 2, J, q + 1, q + 1)
        S = np.swapaxes(S, 1, 2)                                           # (n, J, 2, q + 1, q + 1)
        return S[..., :q, :q], S[..., :q, q], S[..., q, q]


def _scan(ranges: _Ranges, t, joints, C_can, d):
    """Constrained fits at candidate joints (n, J) in the bases of ``ranges``: residual sums
    of squares (n, J) (inf where a fit failed) and the coefficients y (n, J, 2, q) in those
    bases. Normal equations per candidate (:class:`_Constrained`, :class:`_Ranges`), columns
    and constraint rows scaled to unit size.
    """
    k = np.sum(t[:, None, :] <= joints[:, :, None], axis=-1)               # samples below (n, J)
    G, h, rho = ranges.normal_equations(k)
    C = C_can @ ranges.M[:, None]                                          # (n, J, 2, 5, q)
    d = d[:, None, :] - np.einsum("njzai,nzi->nja", C, ranges.y_ref)       # constraints on δ
    D = np.sqrt(np.einsum("...ii->...i", G))
    D = np.where(D > 0, D, 1.0)                                            # (n, J, 2, q)
    C = C / D[..., None, :]
    rn = np.sqrt(np.sum(C * C, axis=(2, 4)))
    rn = np.where(rn > 0, rn, 1.0)                                         # (n, J, 5)
    Gs = G / D[..., :, None] / D[..., None, :]
    hs = h / D
    delta = _Constrained(Gs, C / rn[:, :, None, :, None]).solve(hs, d / rn)  # scaled δ
    rss = np.sum(rho - 2 * np.sum(delta * hs, axis=-1) + np.einsum("...i,...ij,...j->...", delta, Gs, delta), axis=-1)
    rss = np.where(np.isfinite(rss), rss, np.inf)
    return rss, ranges.y_ref[:, None] + delta / D


def _split_scaled(Bs, below, C2):
    """Design and constraint matrices of a two-range fit, equilibrated.

    ``Bs`` (k, 2, 3m, q): the rows in each range's basis; ``below`` (k, 3m, 1): rows at or
    below the joint; ``C2`` (k, 2, 5, q): the constraints in each range's basis. Returns
    A (k, 3m, 2q) with each row in its own range's columns, A and C with unit column
    norms of A (D (k, 2q) the norms), C's rows then scaled to unit norm (rn (k, 5)):
    ``(A, A / D, C / D / rn, D, rn)``.
    """
    A = np.concatenate([np.where(below, Bs[:, 0], 0.0), np.where(below, 0.0, Bs[:, 1])], axis=-1)
    C = np.concatenate([C2[:, 0], C2[:, 1]], axis=-1)
    D = np.sqrt(np.sum(A * A, axis=1))
    D = np.where(D > 0, D, 1.0)
    As, Cs = A / D[:, None, :], C / D[:, None, :]
    rn = np.sqrt(np.sum(Cs * Cs, axis=-1))
    rn = np.where(rn > 0, rn, 1.0)
    return A, As, Cs / rn[..., None], D, rn


def _lawson(rows, rhs, t, lo, hi, tj, C_can, d, terms, iterations):
    """Lawson's reweighted fits at the joints tj (n,): the canonical coefficients (n, 2, q)
    of the last iteration whose fit came out finite (NaN where none did).

    Null-space method (Golub & Van Loan, 2013, §6.2) in the bases adapted to [lo, tj] and
    [tj, hi]: with C = U Σ Vᵀ, y = y_p + N z, y_p = V₁ Σ⁻¹ Uᵀ d, N = V₂, and z minimising the
    weighted ‖W^½ (B N z − (b − B y_p))‖. Each iteration solves the normal equations for the
    change of z from the previous iteration's, on the residuals computed from the rows, so
    that their errors scale with those small residuals, then once more on the new residuals
    (one step of iterative refinement; Björck, 1996, §2.9).
    """
    n, m3, q = rows.shape
    M = np.stack([_adapted_basis(lo, tj, terms), _adapted_basis(tj, hi, terms)], axis=1)   # (n, 2, q, q)
    Bs = rows[:, None] @ M                                                 # (n, 2, 3m, q)
    below = (np.concatenate([t, t, t], axis=1) <= tj[:, None])[..., None]  # (n, 3m, 1)
    _, B, C, D, rn = _split_scaled(Bs, below, C_can[:, 0] @ M)            # B (n, 3m, 2q), C (n, 5, 2q)
    d = d / rn
    U, sig, Vt = np.linalg.svd(C, full_matrices=True)                     # Vt (n, 2q, 2q)
    y_p = np.einsum("nki,nk->ni", Vt[:, :5, :], np.einsum("nlk,nl->nk", U, d) / sig)
    N = np.swapaxes(Vt[:, 5:, :], -1, -2)                                 # (n, 2q, 2q − 5)
    BN = B @ N                                                             # (n, 3m, 2q − 5)
    BNt = np.ascontiguousarray(np.swapaxes(BN, -1, -2))
    r0 = rhs - (B @ y_p[..., None])[..., 0]                                # (n, 3m)
    z, res = np.zeros((n, N.shape[-1])), r0
    w = np.ones_like(rhs)
    y = np.full((n, 2 * q), np.nan)
    for _ in range(iterations):
        H = _SPD((BNt * w[:, None, :]) @ BN)
        for _step in range(2):  # the step, then one refinement on its residuals
            z = z + H.solve((BNt @ (w * res)[..., None])[..., 0])
            res = r0 - (BN @ z[..., None])[..., 0]                         # b − B y: unweighted residuals
        yi = y_p + (N @ z[..., None])[..., 0]
        y = np.where(np.all(np.isfinite(yi), axis=1)[:, None], yi, y)
        w = w * np.abs(res)
        w = w / np.maximum(w.sum(axis=1, keepdims=True), 1e-300) * w.shape[1]
        w = np.maximum(w, 1e-12)
    return (M @ (y / D).reshape(n, 2, q, 1))[..., 0]


def _joint(rows, rhs, t, lo, hi, t_anchor, d, terms):
    """The joint of least residual sum of squares (three scans, see the module docstring)
    and the canonical coefficients (n, 2, 9) of the fit there."""
    n = len(lo)
    k = np.arange(n)
    joints = joint_candidates(lo, hi)
    step = (joints[:, -1] - joints[:, 0]) / (N_JOINTS - 1)
    best_rss = np.full(n, np.inf)
    c, tj = np.zeros((n, 2, 9)), joints[:, 0].copy()
    span = hi - lo
    for scan in range(3):  # coarse scan, then two finer scans around the best joint so far
        if scan == 0:  # candidates over 15–85 % of the range: bases of [lo, 30 %] and [70 %, hi]
            ranges = _Ranges(rows, rhs, t, lo, hi, lo + 0.3 * span, lo + 0.7 * span,
                             joints.min(axis=1), joints.max(axis=1), terms)
        elif scan == 1:  # the fine scans' joints stay within 1.25 coarse steps (+ rounding) of tj
            reach = 1.25 * 4 * step + 11.0
            ref = np.clip(tj, lo + 0.1 * span, hi - 0.1 * span)               # as the fine joints are
            ranges = _Ranges(rows, rhs, t, lo, hi, ref, ref, tj - reach, tj + reach, terms)
        C_can = _constraints(joints, t_anchor, terms)
        rss, y = _scan(ranges, t, joints, C_can, d)
        best = np.argmin(rss, axis=1)
        better = rss[k, best] < best_rss
        best_rss = np.where(better, rss[k, best], best_rss)
        coef = np.zeros((n, 2, 9))
        coef[..., terms] = (ranges.M @ y[k, best][..., None])[..., 0]
        c = np.where(better[:, None, None], coef, c)                       # (n, 2, 9)
        tj = np.where(better, joints[k, best], tj)
        joints = np.round((tj[:, None] + step[:, None] * np.linspace(-1, 1, N_JOINTS)[None, :]) / 10) * 10
        joints = np.clip(joints, lo[:, None] + 0.1 * span[:, None], hi[:, None] - 0.1 * span[:, None])
        step = step / ((N_JOINTS - 1) / 2)
    return c, tj


class _SharedRange:
    """Records that share their fitted range [lo, hi], hence their samples, least-squares
    rows, anchor and coarse candidate joints: the constrained least-squares problem of a
    joint is then the same matrix for all of them, so its solution and residual operators
    are computed once per joint and applied to every record's values by matrix products.

    Per joint T_j, in the bases adapted to [lo, T_j] and [T_j, hi] (:func:`_adapted_basis`),
    columns scaled to unit norm: C = U Σ Vᵀ, N = V₂ and A N = Q R (Householder QR), so that
    y = X b + Y d with X = N R⁻¹ Qᵀ and Y = (I − X A) V₁ Σ⁻¹ Uᵀ — the null-space method of
    Golub & Van Loan (2013, §6.2), as a linear map of the values b and the anchor values d.
    """

    def __init__(self, t, lo, hi, t_anchor, terms):
        self.lo, self.hi, self.t_anchor, self.terms = lo, hi, t_anchor, terms
        self.rows = np.concatenate([b[..., terms] for b in _basis(t)], axis=0)   # (3m, q)
        self.t3 = np.tile(t, 3)
        self.index: dict[float, int] = {}
        self.parts: list[dict] = []

    def operators(self, joints: np.ndarray) -> np.ndarray:
        """Indices of the operators of ``joints`` (computed for the joints not seen yet)."""
        new = [j for j in dict.fromkeys(np.asarray(joints, float).ravel().tolist()) if j not in self.index]
        if new:
            tj = np.array(new)
            k, q = len(tj), len(self.terms)
            M = np.stack([_adapted_basis(np.full(k, self.lo), tj, self.terms),
                          _adapted_basis(tj, np.full(k, self.hi), self.terms)], axis=1)  # (k, 2, q, q)
            Bs = self.rows[None, None] @ M                                 # (k, 2, 3m, q)
            below = (self.t3[None, :] <= tj[:, None])[..., None]
            A, As, Cs, D, rn = _split_scaled(
                Bs, below, _constraints(tj[None, :], np.array([self.t_anchor]), self.terms)[0] @ M)
            U, sig, Vt = np.linalg.svd(Cs, full_matrices=True)
            with np.errstate(divide="ignore", invalid="ignore"):
                P1 = np.swapaxes(Vt[:, :5, :], -1, -2) @ (np.swapaxes(U, -1, -2) / sig[..., None])  # y_p = P1 d
            N = np.swapaxes(Vt[:, 5:, :], -1, -2)                         # (k, 2q, nz)
            BN = As @ N                                                    # (k, 3m, nz)
            Q, Rr = np.linalg.qr(BN)
            X = N @ _solve(Rr, np.swapaxes(Q, -1, -2))                     # (k, 2q, 3m)
            Y = P1 - X @ (As @ P1)                                         # (k, 2q, 5)
            for i, j in enumerate(new):
                self.index[j] = len(self.parts)
                self.parts.append(dict(M=M[i], A=A[i], D=D[i], rn=rn[i], X=X[i] / D[i][:, None],
                                       Y=Y[i] / D[i][:, None] / rn[i][None, :], As=As[i], N=N[i], P1=P1[i], BN=BN[i]))
        return np.array([self.index[j] for j in np.asarray(joints, float).ravel().tolist()]).reshape(np.shape(joints))

    def fits(self, op: int, b: np.ndarray, d: np.ndarray):
        """Coefficients y (G, 2q) in the joint's bases and residual sums of squares (G,) of
        the records with values b (G, 3m) and anchor values d (G, 5), at operator ``op``."""
        p = self.parts[op]
        y = b @ p["X"].T + d @ p["Y"].T
        r = b - y @ p["A"].T
        rss = np.sum(r * r, axis=1)
        return y, np.where(np.isfinite(rss), rss, np.inf)

    def canonical(self, ops: np.ndarray, y: np.ndarray) -> np.ndarray:
        """Canonical coefficients (G, 2, 9) of coefficients y (G, 2q) at operators ``ops``."""
        q = len(self.terms)
        M = np.stack([self.parts[o]["M"] for o in ops]) if len(ops) else np.zeros((0, 2, q, q))
        out = np.zeros((len(ops), 2, 9))
        out[..., self.terms] = (M @ y.reshape(-1, 2, q, 1))[..., 0]
        return out


def _joint_shared(sr: _SharedRange, b, d, lo, hi):
    """:func:`_joint` for records sharing a range (b (G, 3m), d (G, 5))."""
    G = len(b)
    q = len(sr.terms)
    k = np.arange(G)
    joints = np.broadcast_to(joint_candidates(np.array([lo]), np.array([hi])), (G, N_JOINTS))
    step = np.full(G, (joints[0, -1] - joints[0, 0]) / (N_JOINTS - 1))
    best_rss = np.full(G, np.inf)
    c, tj = np.zeros((G, 2, 9)), joints[:, 0].copy()
    span = hi - lo
    for _ in range(3):
        ops = sr.operators(joints)                                         # (G, J)
        rss = np.full(joints.shape, np.inf)
        ys = np.zeros(joints.shape + (2 * q,))
        for op in np.unique(ops):
            r, s = np.nonzero(ops == op)
            ys[r, s], rss[r, s] = sr.fits(op, b[r], d[r])
        best = np.argmin(rss, axis=1)
        better = rss[k, best] < best_rss
        best_rss = np.where(better, rss[k, best], best_rss)
        c = np.where(better[:, None, None], sr.canonical(ops[k, best], ys[k, best]), c)
        tj = np.where(better, joints[k, best], tj)
        joints = np.round((tj[:, None] + step[:, None] * np.linspace(-1, 1, N_JOINTS)[None, :]) / 10) * 10
        joints = np.clip(joints, lo + 0.1 * span, hi - 0.1 * span)
        step = step / ((N_JOINTS - 1) / 2)
    return c, tj


def _lawson_shared(sr: _SharedRange, b, d, tj, iterations):
    """:func:`_lawson` for records sharing a range: the records at one joint share B N, so
    each iteration's weighted Gram matrices of all of them are one matrix product with the
    rows' outer products, and the solves run over the whole batch."""
    G = len(b)
    q = len(sr.terms)
    ops = sr.operators(tj)
    groups = [(sr.parts[op], np.flatnonzero(ops == op)) for op in np.unique(ops)]
    nz = 2 * q - 5
    iu, ju = np.triu_indices(nz)
    r0, z = np.empty_like(b), np.zeros((G, nz))
    outer = [p["BN"][:, iu] * p["BN"][:, ju] for p, _ in groups]          # (3m, nz(nz+1)/2) each
    for p, r in groups:
        r0[r] = b[r] - ((d[r] / p["rn"]) @ p["P1"].T) @ p["As"].T
    res, w = r0.copy(), np.ones_like(b)
    z_ok = np.full((G, nz), np.nan)
    H = np.empty((G, nz, nz))
    g = np.empty((G, nz))
    for _ in range(iterations):
        for (p, r), o in zip(groups, outer):
            Hp = w[r] @ o
            H[r[:, None], iu, ju] = Hp
            H[r[:, None], ju, iu] = Hp
            g[r] = (w[r] * res[r]) @ p["BN"]
        F = _SPD(H)
        for step in range(2):  # the step, then one refinement on its residuals
            if step:
                for p, r in groups:
                    g[r] = (w[r] * res[r]) @ p["BN"]
            z = z + F.solve(g)
            for p, r in groups:
                res[r] = r0[r] - z[r] @ p["BN"].T
        z_ok = np.where(np.all(np.isfinite(z), axis=1)[:, None], z, z_ok)
        w = w * np.abs(res)
        w = w / np.maximum(w.sum(axis=1, keepdims=True), 1e-300) * w.shape[1]
        w = np.maximum(w, 1e-12)
    y = np.empty((G, 2 * q))
    for p, r in groups:
        y[r] = (((d[r] / p["rn"]) @ p["P1"].T) + z_ok[r] @ p["N"].T) / p["D"]
    return sr.canonical(ops, y)


def _blas_thread_controls() -> list:
    """(set, get) functions of the thread count of each OpenBLAS library loaded in this
    process (numpy's and scipy's wheels each bring one), found through ``/proc/self/maps``
    and ``ctypes``; empty where that is not available (another OS or BLAS)."""
    import ctypes

    try:
        with open("/proc/self/maps") as fh:
            paths = sorted({line.split()[-1] for line in fh if "openblas" in line.lower() and "/" in line})
    except OSError:
        return []
    controls = []
    for path in paths:
        try:
            lib = ctypes.CDLL(path, mode=getattr(os, "RTLD_NOLOAD", 0) | ctypes.RTLD_LOCAL)
        except OSError:
            continue
        for prefix in ("scipy_openblas_", "openblas_"):
            for suffix in ("64_", ""):
                set_ = getattr(lib, f"{prefix}set_num_threads{suffix}", None)
                get_ = getattr(lib, f"{prefix}get_num_threads{suffix}", None)
                if set_ is not None and get_ is not None:
                    set_.argtypes, set_.restype, get_.restype = [ctypes.c_int], None, ctypes.c_int
                    controls.append((set_, get_))
                    break
            else:
                continue
            break
    return controls


@contextlib.contextmanager
def single_threaded_blas():
    """Run the enclosed code with OpenBLAS on one thread, then restore its thread counts.

    The refits multiply many small matrices (at most 512 × 192 by 192 × 91): OpenBLAS
    splits each product over its threads, which costs more than it saves at these sizes
    and, on a machine whose cores are busy, makes the threads wait for one another (the
    emit stage's refits took 6× longer on 2 busy cores). One thread also makes the fitted
    coefficients independent of the machine's core count (a threaded product may add its
    terms in another order, which changes the last bit).
    """
    controls = _blas_thread_controls()
    before = [get() for _, get in controls]
    for set_, _ in controls:
        set_(1)
    try:
        yield
    finally:
        for (set_, _), n in zip(controls, before):
            set_(n)


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

    BLAS runs on one thread meanwhile (:func:`single_threaded_blas`).
    """
    if form not in FORM_TERMS:
        raise ValueError(f"unknown form {form!r}; expected one of {sorted(FORM_TERMS)}")
    with single_threaded_blas():
        return _refit(items, values, form, n_samples, n_check, t_fit_min_k)


def _refit(items: pd.DataFrame, values: ValuesFn, form: str, n_samples: int, n_check: int,
           t_fit_min_k: float) -> Refit:
    """:func:`refit` (its arguments checked)."""
    terms = np.array(FORM_TERMS[form])
    rid = items["record_id"].to_numpy(dtype=object)
    hi = items["t_high_k"].to_numpy(float)
    lo = np.minimum(np.maximum(items["t_low_k"].to_numpy(float), t_fit_min_k), hi - 1.0)
    n = len(rid)
    if not n:
        return Refit(pd.DataFrame(columns=["record_id", "segment", "t_low_k", "t_high_k", *COEF_COLUMNS]),
                     pd.DataFrame(columns=list(FIT_COLUMNS)))
    c, tj = np.zeros((n, 2, 9)), np.zeros(n)
    t_anchor = np.where((lo <= T_REF) & (hi >= T_REF), T_REF, lo)
    stats = {col: np.zeros(n) for col in FIT_COLUMNS[6:]}

    def block(pos):
        """Values of the records at ``pos``: samples, anchors, dense grid (one call)."""
        lo_b, hi_b = lo[pos], hi[pos]
        t = _lobatto(lo_b, hi_b, n_samples)
        tc = lo_b[:, None] + (hi_b - lo_b)[:, None] * np.linspace(0, 1, n_check)[None, :]
        v = values(rid[pos], np.concatenate([t, t_anchor[pos, None], tc], axis=1))
        cp, h, s = (x[:, :n_samples] for x in v)
        d = np.zeros((len(pos), 5))                                        # anchor rows of the constraints
        d[:, 3] = v[1][:, n_samples] / (R * t_anchor[pos])
        d[:, 4] = v[2][:, n_samples] / R
        rhs = np.concatenate([cp / R, h / (R * t), s / R], axis=1)         # (n, 3m)
        return t, rhs, d, tc, [x[:, n_samples + 1:] for x in v]

    def finish(pos, c_b, tj_b, tc, dense):
        """Store the fits of the records at ``pos`` and their residuals on the dense grid."""
        c[pos], tj[pos] = c_b, tj_b
        k = np.arange(len(pos))
        p = evaluate(c_b[k[:, None], np.where(tc <= tj_b[:, None], 0, 1)], tc)
        dcp, dh, ds = p.cp - dense[0], p.h - dense[1], p.s - dense[2]
        rel = np.abs(dcp) / np.maximum(np.abs(dense[0]), 1e-12)
        for col, x in (("max_abs_dcp_j_mol_k", np.nanmax(np.abs(dcp), axis=1)), ("max_rel_dcp", np.nanmax(rel, axis=1)),
                       ("rms_dcp_j_mol_k", np.sqrt(np.nanmean(dcp ** 2, axis=1))),
                       ("max_abs_dh_j_mol", np.nanmax(np.abs(dh), axis=1)),
                       ("max_abs_ds_j_mol_k", np.nanmax(np.abs(ds), axis=1)),
                       ("t_worst_k", tc[k, np.nanargmax(rel, axis=1)])):
            stats[col][pos] = x

    # Records sharing their fitted range with many others (tables on a common grid) share
    # their least-squares matrices: solved together (_SharedRange); the rest record by record.
    key, inverse, counts = np.unique(np.stack([lo, hi], axis=1), axis=0, return_inverse=True, return_counts=True)
    inverse = inverse.ravel()
    for g in np.flatnonzero(counts >= _SHARED_MIN):
        members = np.flatnonzero(inverse == g)
        sr = _SharedRange(_lobatto(key[g, :1], key[g, 1:], n_samples)[0], key[g, 0], key[g, 1],
                          t_anchor[members[0]], terms)
        for start in range(0, len(members), _BLOCK):
            pos = members[start:start + _BLOCK]
            t, rhs, d, tc, dense = block(pos)
            c_b, tj_b = _joint_shared(sr, rhs, d, key[g, 0], key[g, 1])
            law = _lawson_shared(sr, rhs, d, tj_b, LAWSON_ITERATIONS)
            finish(pos, np.where(np.all(np.isfinite(law), axis=(1, 2))[:, None, None], law, c_b), tj_b, tc, dense)
    rest = np.flatnonzero(counts[inverse] < _SHARED_MIN)
    for start in range(0, len(rest), _BLOCK):
        pos = rest[start:start + _BLOCK]
        t, rhs, d, tc, dense = block(pos)
        lo_b, hi_b, ta_b = lo[pos], hi[pos], t_anchor[pos]
        rows = np.concatenate([b[..., terms] for b in _basis(t)], axis=1)  # (n, 3m, q)
        c_b, tj_b = np.zeros((len(pos), 2, 9)), np.zeros(len(pos))
        for i in range(0, len(pos), _SCAN_BLOCK):
            j = slice(i, i + _SCAN_BLOCK)
            c_b[j], tj_b[j] = _joint(rows[j], rhs[j], t[j], lo_b[j], hi_b[j], ta_b[j], d[j], terms)
        # Lawson's iteratively reweighted least squares at the chosen joint: drives the fit
        # from least squares towards the minimax (equal-ripple) fit, which lowers the
        # maximum error that the quality rule judges (Lawson, 1961; Rice & Usow, Math.
        # Comp. 22 (1968) 118).
        C_can = _constraints(tj_b[:, None], ta_b, terms)
        law = np.zeros((len(pos), 2, 9))
        law[..., terms] = _lawson(rows, rhs, t, lo_b, hi_b, tj_b, C_can, d, terms, LAWSON_ITERATIONS)
        finish(pos, np.where(np.all(np.isfinite(law), axis=(1, 2))[:, None, None], law, c_b), tj_b, tc, dense)
    fits = pd.DataFrame({"record_id": rid, "form": form, "t_low_k": lo, "t_high_k": hi, "t_joint_k": tj,
                         "t_anchor_k": t_anchor, **stats})
    segs = pd.concat([pd.DataFrame({"record_id": rid, "segment": i, "t_low_k": a, "t_high_k": b,
                                    **{col: c[:, i, j] for j, col in enumerate(COEF_COLUMNS)}})
                      for i, (a, b) in enumerate(((lo, tj), (tj, hi)))], ignore_index=True)
    segs = segs.sort_values(["record_id", "segment"], kind="stable").reset_index(drop=True)
    return Refit(segs, fits[list(FIT_COLUMNS)])


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
