"""The thermochemical network: reaction sums, Hess cycles, least-squares reconciliation,
and second-/third-law analysis of equilibrium-constant series.

Pure numerics over arrays and sparse matrices (no DuckDB, no check context); the checks
in :mod:`pipeline.checks.reactions` turn the results into findings and tables.

Units: energies in J/mol, entropies in J/(mol*K), temperatures in K; a stoichiometric
coefficient ν is positive for products.

References
----------
1. Ruscic, Pinzon, Morton, von Laszewski, Bittner, Nijsure, Amin, Minkoff & Wagner,
   "Introduction to Active Thermochemical Tables: several 'key' enthalpies of formation
   revisited", J. Phys. Chem. A 108 (2004) 9979 — the thermochemical network solved by
   weighted least squares, with the worst-offender analysis.
2. Narasimhan & Jordache, *Data Reconciliation and Gross Error Detection*, Gulf (2000) —
   standardised (leverage-corrected) residuals, the global χ² test, serial elimination.
3. Hutchinson, "A stochastic estimator of the trace of the influence matrix", Commun.
   Stat. Simul. Comput. 18 (1989) 1059, and Bekas, Kokiopoulou & Saad, "An estimator for
   the diagonal of a matrix", Appl. Numer. Math. 57 (2007) 1214 — randomised diagonals.
4. Chase, *NIST-JANAF Thermochemical Tables*, 4th ed., J. Phys. Chem. Ref. Data Monograph 9
   (1998), introduction — second- and third-law treatment of equilibrium data.
"""
from __future__ import annotations

import math
from dataclasses import dataclass, field
from fractions import Fraction
from typing import Mapping, Sequence

import numpy as np
import pandas as pd
import scipy.sparse as sp
from scipy.sparse.csgraph import connected_components

try:    # scipy's compiled sparse kernels (private module; block_pcg falls back to ``@`` without it)
    from scipy.sparse import _sparsetools
except ImportError:  # pragma: no cover
    _sparsetools = None
from scipy.special import chdtri as _chi2_upper_quantile   # scipy.stats would cost every command ~0.4 s to import

from .constants import LN10, R

# ------------------------------------------------------------------------ stoichiometry


def reaction_sum(row: np.ndarray, terms: np.ndarray, n_rows: int) -> np.ndarray:
    """Σ over each reaction's species of ``terms`` (already multiplied by ν); NaN if any term is NaN.

    Parameters
    ----------
    row : (k,) reaction index of each term; terms : (k,) ν·X of each term; n_rows : reactions.
    """
    row = np.asarray(row, dtype=np.int64)
    terms = np.asarray(terms, float)
    bad = np.bincount(row, weights=~np.isfinite(terms), minlength=n_rows) > 0
    out = np.bincount(row, weights=np.where(np.isfinite(terms), terms, 0.0), minlength=n_rows)
    out[bad] = np.nan
    return out


def combined_uncertainty(u_meas: np.ndarray, row: np.ndarray, nu_u: np.ndarray, n_rows: int) -> np.ndarray:
    """u = √(u_meas² + Σ (ν_i u_i)²), summing only the species that state an uncertainty.

    ``nu_u`` holds ν_i·u_i per term, NaN where species i states none (it then adds nothing).
    """
    nu_u = np.asarray(nu_u, float)
    s = np.bincount(np.asarray(row, dtype=np.int64), weights=np.where(np.isfinite(nu_u), nu_u ** 2, 0.0),
                    minlength=n_rows)
    return np.sqrt(np.asarray(u_meas, float) ** 2 + s)


def minus_r_ln_k(quantity: np.ndarray, value: np.ndarray, t_k: np.ndarray):
    """−R ln K [J/(mol*K)] and the factor d(−R ln K)/d(value) for ``log_k`` or ``drg`` rows.

    log K: −R ln K = −R ln10 · log K; ΔrG: −R ln K = ΔrG / T. Other quantities give NaN.
    """
    q = np.asarray(quantity, dtype=object)
    v = np.asarray(value, float)
    t = np.asarray(t_k, float)
    factor = np.where(q == "log_k", -R * LN10, np.where(q == "drg", 1.0 / t, np.nan))
    return factor * v, np.abs(factor)


# ------------------------------------------------------------------------------- cycles


def _as_fraction(x) -> Fraction:
    """A stoichiometric coefficient as a small fraction (1/3 written as 0.3333333333 → 1/3)."""
    return Fraction(x).limit_denominator(1000) if not isinstance(x, Fraction) else x


def _int_row(row: Mapping) -> tuple[dict, int]:
    """(integer row, the factor it was multiplied by): the row times its denominators' LCM."""
    fr = {k: _as_fraction(v) for k, v in row.items() if v != 0}
    den = 1
    for f in fr.values():
        den = den * f.denominator // math.gcd(den, f.denominator)
    return {k: int(f * den) for k, f in fr.items()}, den


def _axpy(a: int, x: dict, b: int, y: dict) -> dict:
    """a·x + b·y for integer sparse vectors (dicts), dropping zeros."""
    out = {k: a * v for k, v in x.items()}
    for k, v in y.items():
        w = out.get(k, 0) + b * v
        if w:
            out[k] = w
        else:
            out.pop(k, None)
    return out


def _content(*vecs: dict) -> int:
    g = 0
    for vec in vecs:
        for v in vec.values():
            g = math.gcd(g, v)
            if g == 1:
                return 1
    return g or 1


def _scaled(vec: dict, g: int) -> dict:
    return vec if g == 1 else {k: v // g for k, v in vec.items()}


def cycle_basis(rows: Sequence[Mapping], *, shorten: bool = True) -> list[dict[int, int]]:
    """A basis of the left null space of a stoichiometric matrix, in small integers.

    Each returned cycle maps row indices to integer coefficients c_k with Σ c_k ν_k,i = 0
    for every species i (every species cancels): a thermochemical cycle (Hess's law says
    its measured values sum to zero). The coefficients of each cycle are coprime.

    Method: fraction-free Gaussian elimination over the integers (rows scaled to integers,
    each update divided by the content), adding reactions one at a time — simplest first —
    to an echelon basis of the row space; a reaction that reduces to zero gives one cycle
    (itself and the independent reactions it is a combination of). Then cycles are
    shortened: C_i ← C_j[t]·C_i − C_i[t]·C_j replaces C_i whenever it has fewer reactions
    (a basis stays a basis, since the coefficient of C_i is non-zero). Every reaction
    that lies in any cycle appears in at least one basis cycle (otherwise no combination
    of the basis could contain it).

    Parameters
    ----------
    rows : sequence of {species: ν} (ν as float or Fraction; species any hashable).
    shorten : run the shortening pass.
    """
    cols: dict = {}
    int_rows, factor = [], []
    for r in rows:
        ir, den = _int_row(r)
        int_rows.append({cols.setdefault(k, len(cols)): v for k, v in ir.items()})
        factor.append(den)
    order = sorted(range(len(int_rows)), key=lambda i: (len(int_rows[i]), i))
    pivots: dict[int, tuple[dict, dict]] = {}
    cycles: list[dict[int, int]] = []
    for i in order:
        vec, comb = dict(int_rows[i]), {i: 1}
        while vec:
            c = min(vec)
            if c not in pivots:
                pivots[c] = (vec, comb)
                break
            pv, pc = pivots[c]
            a, b = vec[c], pv[c]
            g = math.gcd(a, b)
            fa, fb = b // g, -(a // g)
            vec = _axpy(fa, vec, fb, pv)
            comb = _axpy(fa, comb, fb, pc)
            g = _content(vec, comb)
            vec, comb = _scaled(vec, g), _scaled(comb, g)
        else:
            comb = {k: c * factor[k] for k, c in comb.items()}   # back to the rows as given
            cycles.append(_scaled(comb, _content(comb)))
    if shorten:
        cycles = _shorten(cycles)
    return [_oriented(c) for c in cycles]


def _oriented(c: dict) -> dict:
    first = min(c)
    return {k: (v if c[first] > 0 else -v) for k, v in sorted(c.items())}


def _shorten(cycles: list[dict], max_passes: int = 20) -> list[dict]:
    cycles = [dict(c) for c in cycles]
    for _ in range(max_passes):
        improved = False
        member: dict[int, set] = {}
        for ci, c in enumerate(cycles):
            for k in c:
                member.setdefault(k, set()).add(ci)
        for i in range(len(cycles)):
            done = False
            while not done:
                done = True
                ci = cycles[i]
                partners = sorted({j for k in ci for j in member[k] if j != i})
                best = None
                for j in partners:
                    cj = cycles[j]
                    for t in ci.keys() & cj.keys():
                        new = _axpy(cj[t], ci, -ci[t], cj)
                        if new and len(new) < len(ci) and (best is None or len(new) < len(best)):
                            best = new
                if best is not None:
                    best = _scaled(best, _content(best))
                    for k in ci:
                        member[k].discard(i)
                    for k in best:
                        member.setdefault(k, set()).add(i)
                    cycles[i] = best
                    improved = True
                    done = False
        if not improved:
            break
    return cycles


def cycle_closure(cycles: Sequence[Mapping[int, int]], value: np.ndarray, u: np.ndarray):
    """Sum, its standard uncertainty and z of each cycle.

    Relation: s = Σ c_k v_k (zero by Hess's law), u_s = √Σ (c_k u_k)², z = s / u_s.
    Returns three arrays of length ``len(cycles)``.
    """
    v = np.asarray(value, float)
    u = np.asarray(u, float)
    s = np.array([sum(c * v[k] for k, c in cyc.items()) for cyc in cycles], float)
    us = np.array([math.sqrt(sum((c * u[k]) ** 2 for k, c in cyc.items())) for cyc in cycles], float)
    with np.errstate(divide="ignore", invalid="ignore"):
        z = np.where(us > 0, s / us, np.where(s == 0, 0.0, np.inf))
    return s, us, z


def cluster_temperatures(t_k: np.ndarray, window_k: float) -> np.ndarray:
    """Integer cluster label per temperature: sorted values closer than ``window_k`` chain together."""
    t = np.asarray(t_k, float)
    if not len(t):
        return np.zeros(0, dtype=np.int64)
    order = np.argsort(t, kind="stable")
    ts = t[order]
    labels_sorted = np.concatenate([[0], np.cumsum(np.diff(ts) > window_k)])
    out = np.empty(len(t), dtype=np.int64)
    out[order] = labels_sorted
    return out


def row_components(row_species: Sequence[Sequence], n_rows: int) -> np.ndarray:
    """Connected components of reactions linked by shared species (label per row)."""
    keys: dict = {}
    r_idx, c_idx = [], []
    for i, sps in enumerate(row_species):
        for s in sps:
            r_idx.append(i)
            c_idx.append(keys.setdefault(s, len(keys)))
    n = n_rows + len(keys)
    a = sp.coo_matrix((np.ones(len(r_idx)), (np.asarray(r_idx, dtype=np.int64),
                                              n_rows + np.asarray(c_idx, dtype=np.int64))), shape=(n, n))
    _, lab = connected_components(a, directed=False)
    return lab[:n_rows]


def _dense_rank(x: np.ndarray) -> np.ndarray:
    """Rank of each value of ``x`` (non-negative integers) among its distinct values: the
    inverse of ``np.unique(x, return_inverse=True)``, by counting (numpy's unique hashes or
    sorts, many times slower on long arrays)."""
    x = np.asarray(x, dtype=np.int64)
    if not len(x):
        return x
    present = np.bincount(x) > 0
    return (np.cumsum(present) - 1)[x]


def term_components(row: np.ndarray, key: np.ndarray, n_rows: int) -> np.ndarray:
    """Connected components of reactions linked by shared species, from long arrays: term k
    of reaction ``row[k]`` names species code ``key[k]`` (integers). Same labels as
    :func:`row_components` (a component's label is its rank by its first reaction)."""
    row = np.asarray(row, dtype=np.int64)
    kc = _dense_rank(np.asarray(key, dtype=np.int64))
    n = n_rows + (int(kc.max()) + 1 if len(kc) else 0)
    a = sp.coo_matrix((np.ones(len(row)), (row, n_rows + kc)), shape=(n, n))
    _, lab = connected_components(a, directed=False)
    return lab[:n_rows]


# ------------------------------------------------------------------------ reconciliation

#: Components with at most this many unknown species are solved exactly (dense SVD);
#: larger ones iteratively (preconditioned conjugate gradients) with randomised
#: estimates of variances and leverages (see :func:`reconcile`).
DENSE_MAX_SPECIES = 400

#: Random probe vectors for the variance/leverage estimates of large components: the
#: relative standard error of an estimated variance is √(2/s) (18 % for s = 64, i.e.
#: about 9 % on a standard uncertainty).
N_PROBES = 64

#: Candidates whose leverage is computed exactly in each worst-offender step (large components).
N_CANDIDATES = 12

#: A leverage within this of 1 counts as h = 1 (the datum alone fixes a combination).
H_ONE = 1e-8

#: Iterative path: residual tolerance of the exact solves M⁺j_k (leverages, prediction
#: variances). h = j·M⁺j converges as the square of the error in M-norm: 1e-5 gives h to
#: about 1e-11 on the 1e5-species network (1e-4: 1e-9), so t = r/√(1 − h) of data that the
#: network cannot tell apart agree far inside the 1e-6 within which they are reported
#: together (for 1 − h > 1e-4), and h = 1 is told from h < 1 − ``H_ONE``.
_EXACT_RTOL = 1e-5

#: Iterative path: an estimated 1 − h between ``H_ONE`` and this is checked by an exact solve.
_H_GRAY = 1e-5

#: Relative difference of |t| within which data count as tied in the worst-offender loop
#: (the loop breaks the tie by a fixed order, and the finding lists the others).
TIE_RTOL = 1e-6

#: Iterative path: data set aside in one step that may need a solve of their own for the
#: Woodbury update (``_Component._downdate``); beyond, the final estimates use fresh probes.
_DOWNDATE_SOLVES = 8

#: Iterative path: up to this many data set aside, their prediction variances ("after" z)
#: are exact (one solve each, most of them kept from the loop); beyond, the probes' estimate.
_EXACT_PRED_MAX = 64


@dataclass
class SetAside:
    """One datum removed by the worst-offender loop."""

    kind: str            # "measurement" or "prior"
    index: int           # measurement row, or species column for a prior
    step: int            # loop step (1 = first); far-apart data of a large component may share one
    t_before: float      # standardised residual r/(u√(1−h)) in the fit that still held it
    r_before_j_mol: float
    r_after_j_mol: float = np.nan   # v − a·x̂ against the final fit without it
    z_after: float = np.nan         # that residual over √(u² + a Cov a)
    #: data with the same |t| when it was chosen — (kind, index): the data cannot tell them apart
    tied: list = field(default_factory=list)


@dataclass
class NetworkFit:
    """Result of :func:`reconcile` (n species, m measurements).

    ``x_j_mol``/``sd_j_mol``: reconciled ΔfH°(298.15) and its standard uncertainty (NaN
    where not determined); ``determined``; ``component`` of each species and of each
    measurement; per-component ``chi2``/``dof``/``method``; per-measurement final
    residual (v − a·x̂), standardised residual, leverage, ``active`` (not set aside) and
    ``untestable`` (h = 1); ``set_aside`` in removal order.
    """

    x_j_mol: np.ndarray
    sd_j_mol: np.ndarray
    determined: np.ndarray
    species_component: np.ndarray
    meas_component: np.ndarray
    chi2: dict = field(default_factory=dict)
    dof: dict = field(default_factory=dict)
    method: dict = field(default_factory=dict)
    residual_j_mol: np.ndarray | None = None
    std_residual: np.ndarray | None = None
    leverage: np.ndarray | None = None
    active: np.ndarray | None = None
    untestable: np.ndarray | None = None
    set_aside: list = field(default_factory=list)
    stopped_early: dict = field(default_factory=dict)


def reconcile(A, value_j_mol, u_j_mol, prior_j_mol, prior_sd_j_mol, *, z_max: float = 3.0,
              alpha: float = 0.01, dense_max: int = DENSE_MAX_SPECIES, n_probes: int = N_PROBES,
              max_set_aside_fraction: float = 0.5, seed: int = 20040101,
              tie_rank: np.ndarray | None = None) -> NetworkFit:
    """Weighted least squares for ΔfH°(298.15) of a reaction network, with the worst-offender loop.

    Model: for each measurement k, Σ_i ν_ki x_i = v_k ± u_k (elements in their reference
    state are not unknowns: x = 0); for each species with a prior, x_i = p_i ± σ_i.
    Minimise χ² = Σ_k ((v_k − a_k·x)/u_k)² + Σ_i ((p_i − x_i)/σ_i)² (ref. 1, 2).

    Each connected component of the network (species linked by measurements) is an
    independent fit with its own χ² and dof = (data) − rank. Worst-offender loop per
    component (ref. 1, 2): the standardised residual of datum k is
    t_k = r_k / (u_k √(1 − h_k)), h_k its leverage (diagonal of the hat matrix); while
    max |t| > ``z_max`` or χ² > χ²_{1−alpha}(dof), the datum with the largest |t| is set
    aside (measurements, and also species priors: a wrong stated value is a gross error
    of the same kind) and the component refitted. Data with h = 1 cannot be tested (their
    residual is zero whatever their value) and are never set aside. The loop stops after
    setting aside ``max_set_aside_fraction`` of the component's measurements (then the
    stated uncertainties, not single data, are the problem; recorded in ``stopped_early``).

    Numerics. Components of at most ``dense_max`` species: exact, from the SVD of the
    column-scaled whitened design matrix (rank with the LAPACK/numpy tolerance; variances
    from the pseudo-inverse; leverages from the left singular vectors; a species is
    undetermined when its unit vector is not in the row space). Larger components
    (scales to 1e5 species): normal equations M = JᵀJ (sparse) solved by conjugate
    gradients, many right-hand sides at once, preconditioned by the exact inverse of M on
    small groups of strongly coupled species (:func:`block_preconditioner`; a sparse
    direct factorisation fills in far too much on a random-like network); undetermined
    species are the support of the null space of M, found by projecting random vectors
    onto it (exact with probability 1, to the solver tolerance); variances and 1 − h by
    the randomised estimator of refs. 3 with ``n_probes`` Gaussian probes G:
    Y = M⁺JᵀG gives var(x̂_i) ≈ mean_s Y_is² and 1 − h_k ≈ mean_s ((G − JY)_ks)², since
    Cov(Y) = M⁺ and G − JY = (I − H)G with I − H a projection (relative standard error
    √(2/s)); a datum holding a species no other datum holds has h = 1 exactly, and an
    estimate within ``_H_GRAY`` of 1 is checked by an exact solve. In each loop step the
    leverages of the ``N_CANDIDATES`` most suspicious data are computed exactly (one block
    solve), the others keep their first estimates (about 9 % on t), and the data beyond
    ``z_max`` that have the largest |t| within two steps of the network are set aside
    together (gross errors far apart do not disturb each other's residuals; see
    ``_Component.worst``). Setting data aside updates the probe solutions, the exact
    solves and the fit by the Sherman–Morrison–Woodbury identity (``_Component._downdate``)
    instead of solving again: the final variances and leverages are the same probes'
    estimate for the data kept (fresh probes when a step sets many data aside at once),
    and the prediction variance of a set-aside datum (its "after" z) is exact (up to
    ``_EXACT_PRED_MAX`` of them; beyond, the probes' estimate). Measured on 1e5 species:
    bench/network_scale.py.

    Parameters
    ----------
    A : (m, n) sparse or dense stoichiometric matrix of the unknown species.
    value_j_mol, u_j_mol : (m,) measured ΔrH°(298.15) and standard uncertainty [J/mol].
    prior_j_mol, prior_sd_j_mol : (n,) stated ΔfH°(298.15) and uncertainty [J/mol], NaN = none.
    tie_rank : (m,) order in which data that the network cannot tell apart are set aside
        (lowest first; default: row order). Data whose |t| agree within ``TIE_RTOL`` are
        tied (e.g. the members of a single cycle, whose |t| are equal but for round-off):
        of those, a measurement goes before a prior, then the lowest ``tie_rank`` (priors:
        the lowest column of A), so the choice does not depend on round-off.
    """
    A = sp.csr_matrix(A, dtype=float)
    m, n = A.shape
    v = np.asarray(value_j_mol, float)
    u = np.asarray(u_j_mol, float)
    p = np.asarray(prior_j_mol, float)
    ps = np.asarray(prior_sd_j_mol, float)
    if (len(v), len(u), len(p), len(ps)) != (m, m, n, n):
        raise ValueError("reconcile: shapes of A, values, uncertainties and priors disagree")
    if np.any(~np.isfinite(u)) or np.any(u <= 0):
        raise ValueError("reconcile: every measurement needs a finite standard uncertainty > 0")
    has_prior = np.isfinite(p) & np.isfinite(ps) & (ps > 0)

    # components on the bipartite graph measurements—species
    big = sp.bmat([[None, (A != 0).astype(float)], [(A != 0).T.astype(float), None]], format="csr") \
        if m and n else sp.csr_matrix((m + n, m + n))
    _, lab = connected_components(big, directed=False)
    meas_comp, sp_comp = lab[:m], lab[m:]

    fit = NetworkFit(x_j_mol=np.full(n, np.nan), sd_j_mol=np.full(n, np.nan),
                     determined=np.zeros(n, bool), species_component=sp_comp, meas_component=meas_comp,
                     residual_j_mol=np.full(m, np.nan), std_residual=np.full(m, np.nan),
                     leverage=np.full(m, np.nan), active=np.ones(m, bool), untestable=np.zeros(m, bool))
    rng = np.random.default_rng(seed)
    rank_m = np.arange(m) if tie_rank is None else np.asarray(tie_rank)
    if len(rank_m) != m:
        raise ValueError("reconcile: tie_rank needs one rank per measurement")
    order_m = np.argsort(meas_comp, kind="stable")
    order_n = np.argsort(sp_comp, kind="stable")
    comps = np.flatnonzero(np.bincount(lab)) if len(lab) else np.zeros(0, dtype=np.int64)
    m_start = np.searchsorted(meas_comp[order_m], comps)
    m_end = np.searchsorted(meas_comp[order_m], comps, side="right")
    n_start = np.searchsorted(sp_comp[order_n], comps)
    n_end = np.searchsorted(sp_comp[order_n], comps, side="right")
    for c, a0, a1, b0, b1 in zip(comps, m_start, m_end, n_start, n_end):
        rows = order_m[a0:a1]
        cols = order_n[b0:b1]
        dense = len(cols) <= dense_max
        groups = order = None
        if not dense and len(cols) > 1:
            # iterative: the species of each preconditioner group next to each other (the sparse
            # products read memory far more locally; the results do not depend on the order)
            Asub = A[rows][:, cols]
            groups = _aggregates(*_normal_matrix(Asub, u[rows], ps[cols], has_prior[cols]))
            order = np.argsort(groups, kind="stable")
            cols, groups = cols[order], groups[order]
        sub = _Component(A[rows][:, cols], v[rows], u[rows], p[cols], ps[cols], has_prior[cols],
                         dense=dense, n_probes=n_probes, rng=rng, groups=groups, given_order=order,
                         rank_m=rank_m[rows], rank_p=cols)
        _worst_offender_loop(sub, z_max, alpha, max_set_aside_fraction)
        res = sub.final()
        fit.x_j_mol[cols] = np.where(res["determined"], res["x"], np.nan)
        fit.sd_j_mol[cols] = np.where(res["determined"], res["sd"], np.nan)
        fit.determined[cols] = res["determined"]
        fit.residual_j_mol[rows] = res["residual"]
        fit.std_residual[rows] = res["std_residual"]
        fit.leverage[rows] = res["leverage"]
        fit.active[rows] = sub.active_m
        fit.untestable[rows] = res["untestable"]
        fit.chi2[int(c)] = res["chi2"]
        fit.dof[int(c)] = res["dof"]
        fit.method[int(c)] = "dense" if sub.dense else "iterative"
        if sub.stopped_early:
            fit.stopped_early[int(c)] = sub.stopped_early
        for e in sub.events:
            e.index = int(rows[e.index]) if e.kind == "measurement" else int(cols[e.index])
            e.tied = [(k, int(rows[i]) if k == "measurement" else int(cols[i])) for k, i in e.tied]
            fit.set_aside.append(e)
    return fit


def _fit_in_worker(args: tuple, kwargs: dict) -> NetworkFit:
    """:func:`reconcile` in the worker of :class:`BackgroundFit`, looked up there by name
    (the task is pickled on a pool thread, after the caller may have rebound names)."""
    return reconcile(*args, **kwargs)


def _fit_key(args: tuple, kwargs: dict) -> bytes:
    """A digest of every input of :func:`reconcile` (matrix structure and values, data,
    priors, options): equal digests mean the same fit."""
    import hashlib

    h = hashlib.blake2b(digest_size=32)

    def put(x) -> None:
        if sp.issparse(x):
            x = x.tocsr()
            h.update(repr(("csr", x.shape)).encode())
            for part in (x.indptr, x.indices, x.data):
                put(part)
        elif isinstance(x, np.ndarray):
            a = np.ascontiguousarray(x)
            h.update(repr(("nd", a.dtype.str, a.shape)).encode())
            h.update(a.tobytes())
        else:
            h.update(repr(("py", x)).encode())

    for a in args:
        put(a)
    for k in sorted(kwargs):
        h.update(k.encode())
        put(kwargs[k])
    return h.digest()


class BackgroundFit:
    """:func:`reconcile` started early in one spawned worker process.

    The check stage starts the network fit with the inputs it can already build, so that
    the fit runs on the second CPU while the other checks run here; the network check
    later asks for the fit of its actual inputs (:meth:`result_for`) and gets the worker's
    result only when every input is identical (:func:`_fit_key`), else ``None`` (the
    caller then fits in its own process). The worker runs the same function on the same
    inputs with the same seed, so the result is the one a fit here would give. Any
    failure of the worker (no process could be started, an exception in the fit) also
    gives ``None``: the caller's own fit then raises its own error, if any.
    """

    def __init__(self, args: tuple, kwargs: dict):
        import multiprocessing as mp

        self.key = _fit_key(args, kwargs)
        self._pool = None
        self._job = None
        try:
            self._pool = mp.get_context("spawn").Pool(1)
            self._job = self._pool.apply_async(_fit_in_worker, (args, kwargs))
        except (OSError, RuntimeError, ValueError):
            self.close()

    def result_for(self, args: tuple, kwargs: dict) -> NetworkFit | None:
        """The worker's fit if ``args``/``kwargs`` equal the started ones, else None."""
        try:
            if self._job is None or _fit_key(args, kwargs) != self.key:
                return None
            return self._job.get()
        except Exception:                       # noqa: BLE001 - the caller fits itself
            return None
        finally:
            self.close()

    def close(self) -> None:
        """Stop the worker (also while it is still fitting) and release it."""
        pool, self._pool, self._job = self._pool, None, None
        if pool is not None:
            pool.terminate()
            pool.join()


def _design(A, u, ps, im, ip) -> sp.csr_matrix:
    """Whitened design rows: measurements ``im`` (a/u), then priors of species ``ip`` (e_i/σ)."""
    Jm = sp.diags(1.0 / u[im]) @ A[im]
    Jp = sp.csr_matrix((1.0 / ps[ip], (np.arange(len(ip)), ip)), shape=(len(ip), A.shape[1]))
    return sp.vstack([Jm, Jp], format="csr")


def _normal_matrix(A, u, ps, has_prior):
    """(M = JᵀJ, J) of every datum of a component."""
    J = _design(sp.csr_matrix(A), u, ps, np.arange(A.shape[0]), np.flatnonzero(has_prior))
    return (J.T @ J).tocsr(), J


def _worst_offender_loop(c: "_Component", z_max: float, alpha: float, max_frac: float) -> None:
    limit = max(1, int(max_frac * c.m)) if c.m else 0
    step = removed = 0
    while True:
        c.refit()
        if c.dof <= 0:
            return
        crit = float(_chi2_upper_quantile(c.dof, alpha))      # = chi2.ppf(1 - alpha, dof)
        picks = c.worst(z_max)
        if not picks:
            return
        t_top = abs(picks[0][2])
        if not (t_top > z_max or c.chi2 > crit):
            return
        # χ² alone (no datum beyond z_max): one at a time; otherwise the batch beyond z_max
        picks = [q for q in picks if abs(q[2]) > z_max] if t_top > z_max else picks[:1]
        if removed + len(picks) > limit:
            c.stopped_early = (f"stopped after setting aside {removed} data: χ² = {c.chi2:.4g} still exceeds "
                               f"{crit:.4g} (dof {c.dof}) or |t| = {t_top:.2f} > {z_max:g}")
            return
        step += 1
        for kind, idx, t, r, tied in picks:
            c.events.append(SetAside(kind, idx, step, t, r, tied=tied))
            c.remove(kind, idx)
        removed += len(picks)


class _Component:
    """One connected component of the network: data, current fit, removals."""

    def __init__(self, A, v, u, p, ps, has_prior, *, dense: bool, n_probes: int, rng, groups=None,
                 given_order=None, rank_m=None, rank_p=None):
        self.A = sp.csr_matrix(A)
        self.v, self.u, self.p, self.ps = v, u, p, ps
        self.m, self.n = self.A.shape
        self.active_m = np.ones(self.m, bool)
        self.active_p = has_prior.copy()
        self.dense = dense
        self.n_probes = n_probes
        self.rng = rng
        self.events: list[SetAside] = []
        self.stopped_early = ""
        self._null_info = None   # (determined, null_dim): invariant under removals with h < 1
        self._prec = None        # iterative path: block preconditioner (block_preconditioner) …
        self._groups = groups    # … and its groups of species
        # the species' positions as the caller first listed them (None: as they are): prior
        # rows keep that order, so the probes' random numbers meet the same data
        self._given_order = given_order
        # tie-break ranks (lower first) of the measurements and of the species' priors
        self._rank_m = np.arange(self.m) if rank_m is None else np.asarray(rank_m)
        self._rank_p = np.arange(self.n) if rank_p is None else np.asarray(rank_p)
        self._probes = None      # iterative path: (var per species, _RowMap of 1 − h per datum, Y)
        # iterative path, kept up to date through removals (see _downdate): the probe vectors
        # G (rows: the data in _gkeys) and their solutions Y = M⁺JᵀG, and exact solutions
        # M⁺j_k of single data rows (key: measurement k, or m + i for the prior of species i)
        self._G = self._Y = self._gkeys = None
        self._solved: dict[int, np.ndarray] = {}
        self._pending: list[int] = []
        self._aside: list[int] = []          # keys of the data set aside so far
        self._recent: set[int] = set()       # keys whose exact leverage this step needed
        self._aside_exact = True             # their exact prediction variances are affordable
        self.x = np.zeros(self.n)

    def _system(self):
        """Whitened rows of the active data: measurements, then priors."""
        im = np.flatnonzero(self.active_m)
        ip = np.flatnonzero(self.active_p)
        if self._given_order is not None:
            ip = ip[np.argsort(self._given_order[ip], kind="stable")]
        J = _design(self.A, self.u, self.ps, im, ip)
        b = np.concatenate([self.v[im] / self.u[im], self.p[ip] / self.ps[ip]])
        sig = np.concatenate([self.u[im], self.ps[ip]])
        return J, b, sig, im, ip

    def refit(self) -> None:
        self.J, self.b, self.sig, self.im, self.ip = self._system()
        if self.n == 0:       # measurements among reference elements only: prediction 0
            self.rank, self.x, self.var, self.det = 0, np.zeros(0), np.zeros(0), np.zeros(0, bool)
            self.h = np.zeros(len(self.b))
        elif self.dense:
            self._fit_dense()
        else:
            self._fit_iterative()
        self.res_w = self.b - (self.J @ self.x if self.n else 0.0)
        self.chi2 = float(self.res_w @ self.res_w)
        self.dof = len(self.b) - self.rank

    # ---- exact path
    def _fit_dense(self) -> None:
        J = self.J.toarray()
        d = _colscale(J)
        U, S, Vt = np.linalg.svd(J * d, full_matrices=False)
        tol = (S.max() if len(S) else 0.0) * max(J.shape) * np.finfo(float).eps
        r = int((S > tol).sum())
        Ur, Sr, Vr = U[:, :r], S[:r], Vt[:r].T
        self.rank = r
        self.x = d * (Vr @ ((Ur.T @ self.b) / Sr))
        self._VrS, self._d = Vr / Sr, d
        self.var = d ** 2 * (self._VrS ** 2).sum(axis=1)
        self.h = (Ur ** 2).sum(axis=1)
        self.det = (1.0 - (Vr ** 2).sum(axis=1)) < 1e-8

    # ---- iterative path
    def _fit_iterative(self) -> None:
        J = self.J
        removed = bool(self._pending) or self._prec is None
        if self._pending:
            self._downdate()     # while self.M is still the matrix that held the removed data
        self.M = (J.T @ J).tocsr()
        if self._groups is None:
            self._groups = _aggregates(self.M, J)
        if removed:              # the groups stay; their blocks follow the data kept
            self._prec = _block_inverse(self.M, self._groups)
        x0 = self.x if np.any(self.x) else np.where(np.isfinite(self.p), self.p, 0.0)
        rhs = (J.T @ self.b)[:, None]
        if self._null_info is None:
            # first fit: x and the three null-space projections of _null_space in one block solve
            Z = self.rng.standard_normal((self.n, 3))
            X = block_pcg(self.M, np.hstack([rhs, spmm(self.M, Z)]), self._prec,
                          x0=np.hstack([x0[:, None], np.zeros((self.n, 3))]), rtol=[1e-11, 1e-13, 1e-13, 1e-13])
            self.x = X[:, 0]
            self._null_info = self._null_space(Z, X[:, 1:])
        else:
            self.x = block_pcg(self.M, rhs, self._prec, x0=x0[:, None])[:, 0]
        self.det, null_dim = self._null_info
        self.rank = self.n - null_dim
        if self._probes is None:
            self._probes = self._probe()
        self.var = self._probes[0]
        self.h = self._leverage_estimates()

    def _leverage_estimates(self) -> np.ndarray:
        """h of the active data from the probes' 1 − h; exactly 1 for a datum holding a
        species that no other active datum holds (it alone fixes that species: its residual
        is zero whatever its value); exact (one solve) where the estimated 1 − h is within
        ``_H_GRAY`` of ``H_ONE`` — h = 1 gives 1 − h = 0 up to the solver's tolerance, h < 1
        gives 1 − h far above it — so that "untestable" does not depend on solver noise."""
        om = self._probes[1].at(self.im, self.ip)
        h = np.clip(1.0 - om, 0.0, 1.0)
        J = self.J
        nz = J.data != 0
        cnt = np.bincount(J.indices[nz], minlength=self.n)
        rows = np.repeat(np.arange(J.shape[0]), np.diff(J.indptr))[nz]
        alone = np.bincount(rows, weights=(cnt[J.indices[nz]] == 1), minlength=J.shape[0]) > 0
        h = np.where(alone, 1.0, h)
        gray = np.flatnonzero(~alone & (om > H_ONE) & (om < _H_GRAY))
        if len(gray):
            h[gray] = self._exact_h(gray)
        return h

    def _keys(self, rows: np.ndarray) -> np.ndarray:
        """Data keys of rows of the current J: measurement k → k, prior of species i → m + i."""
        rows = np.asarray(rows, dtype=np.int64)
        nm = len(self.im)
        keys = np.empty(len(rows), dtype=np.int64)
        mm = rows < nm
        keys[mm] = self.im[rows[mm]]
        keys[~mm] = self.m + self.ip[rows[~mm] - nm]
        return keys

    def _rows_of(self, keys) -> sp.csr_matrix:
        """Whitened design rows of data ``keys`` (active or not), one sparse row each."""
        out = []
        for k in keys:
            if k < self.m:
                out.append(self.A[k] / self.u[k])
            else:
                i = k - self.m
                out.append(sp.csr_matrix(([1.0 / self.ps[i]], ([0], [i])), shape=(1, self.n)))
        return sp.vstack(out, format="csr") if out else sp.csr_matrix((0, self.n))

    def _solve_rows(self, keys) -> np.ndarray:
        """M⁺j_k for data ``keys`` (n × len(keys)) with the current M: cached, else solved."""
        need = [k for k in dict.fromkeys(int(k) for k in keys) if k not in self._solved]
        if need:
            Bn = self._rows_of(need).T.toarray()
            Yn = block_pcg(self.M, Bn, self._prec, rtol=_EXACT_RTOL)
            for j, k in enumerate(need):
                self._solved[k] = Yn[:, j]
        return np.column_stack([self._solved[int(k)] for k in keys]) if len(keys) else np.zeros((self.n, 0))

    def _downdate(self) -> None:
        """Remove the pending data from the probe solutions, the kept solves and x.

        With M' = M − J_Rᵀ J_R (the rows R set aside), Z = M⁺J_Rᵀ and S = I − J_R Z (the
        identity minus the hat matrix on R, definite when every datum of R has h < 1, so
        the rank is unchanged), the Sherman–Morrison–Woodbury identity gives
        M'⁺ = M⁺ + Z S⁻¹ Zᵀ on the row space, hence for the probes (the same vectors G
        without their rows of R) Y' = M'⁺(JᵀG − J_RᵀG_R) = Y + Z S⁻¹ (J_R Y − G_R), for a
        kept solve y' = y + Z S⁻¹ J_R y (for the data of R themselves this is Z S⁻¹, kept
        for their prediction variances in :meth:`final`), and for the fit
        x' = x + Z S⁻¹ (J_R x − b_R) (the warm start of the refit). Z comes from the exact
        leverages of the step that chose R. When more than ``_DOWNDATE_SOLVES`` rows of R
        were not solved there, or S is nearly singular, nothing is updated: the final
        estimates then use fresh probes, and x its previous value as warm start.
        """
        R = list(dict.fromkeys(self._pending))
        self._pending = []
        self._aside.extend(R)
        if len(self._aside) > _EXACT_PRED_MAX:   # too many for exact prediction variances
            self._aside_exact = False
        uncached = [k for k in R if k not in self._solved]
        S = None
        if len(uncached) <= _DOWNDATE_SOLVES:
            JR = self._rows_of(R)
            Z = self._solve_rows(R)
            S = np.eye(len(R)) - JR @ Z
        if S is None or np.linalg.eigvalsh(0.5 * (S + S.T)).min() < 1e-6:
            self._solved = {}
            self._G = self._Y = self._gkeys = None
            return
        Sinv = np.linalg.inv(S)
        # keep the solves of this step's candidates (often candidates again) and, while their
        # number is small, of the data set aside (prediction variances); older ones are dropped
        aside = set(self._aside) if self._aside_exact else set()
        keys = [k for k in self._solved if k in self._recent or k in aside]
        self._recent = set()
        if keys:
            C = np.column_stack([self._solved[k] for k in keys])
            C += Z @ (Sinv @ (JR @ C))
            self._solved = {k: C[:, j] for j, k in enumerate(keys)}
        else:
            self._solved = {}
        if self._Y is not None:
            pos = pd.Index(self._gkeys).get_indexer(R)
            self._Y += Z @ (Sinv @ (JR @ self._Y - self._G[pos]))
            keep = np.ones(len(self._gkeys), bool)
            keep[pos] = False
            self._G, self._gkeys = self._G[keep], self._gkeys[keep]
        bR = np.array([self.v[k] / self.u[k] if k < self.m else self.p[k - self.m] / self.ps[k - self.m]
                       for k in R])
        self.x = self.x + Z @ (Sinv @ (JR @ self.x - bR))

    def _null_space(self, Z: np.ndarray, MpMZ: np.ndarray):
        """Undetermined species (the support of null(M)) and dim null(M), from random Z and
        the solutions of M X = M Z (Z − X lies in null(M))."""
        N = Z - MpMZ
        undet = np.abs(N).max(axis=1) > 1e-4 * np.abs(Z).max()
        nu = int(undet.sum())
        if nu == 0:
            return ~undet, 0
        idx = np.flatnonzero(undet)
        if nu <= 2000:
            # null(M) lives on the undetermined species: dim = |U| − rank(J[:, U])
            JU = self.J[:, idx].toarray()
            s = np.linalg.svd(JU * _colscale(JU), compute_uv=False)
            rank = int((s > s.max() * max(JU.shape) * np.finfo(float).eps).sum()) if len(s) else 0
            return ~undet, nu - rank
        # very large undetermined sets: the dimension seen by 200 random projections (a lower bound)
        Z = self.rng.standard_normal((self.n, 200))
        N = Z - block_pcg(self.M, spmm(self.M, Z), self._prec, rtol=1e-13)
        s = np.linalg.svd(N[idx], compute_uv=False)
        return ~undet, int((s > 1e-6 * s.max()).sum())

    def _probe(self, fresh: bool = True):
        """Randomised variances and 1 − h (see :func:`reconcile`): new probe vectors G and
        Y = M⁺JᵀG, or (``fresh=False``) the current G and Y kept up to date by _downdate."""
        if fresh or self._Y is None or not np.array_equal(self._gkeys, self._keys(np.arange(self.J.shape[0]))):
            # column-major: each probe's vector is contiguous for the column-wise products below
            self._G = np.asfortranarray(self.rng.standard_normal((self.J.shape[0], self.n_probes)))
            self._Y = block_pcg(self.M, spmm(self.J.T, self._G), self._prec, rtol=1e-5)
            self._gkeys = self._keys(np.arange(self.J.shape[0]))
        G, Y = self._G, self._Y
        # var = mean_s Y_s² and 1 − h = mean_s (G_s − J Y_s)², summed probe by probe
        s = Y.shape[1]
        var = np.zeros(self.n)
        sq = np.zeros(G.shape[0])
        mul = _matvec_into(self.J)
        w = np.empty(G.shape[0])
        for j in range(s):
            y = np.ascontiguousarray(Y[:, j])
            var += y * y
            np.subtract(G[:, j], mul(y, w), out=w)
            sq += np.multiply(w, w, out=w)
        var /= s
        sq /= s
        return var, _RowMap(self.m, self.n, self.im, self.ip, sq), Y

    def _exact_h(self, rows: np.ndarray) -> np.ndarray:
        B = self.J[rows]
        keys = self._keys(rows)
        self._recent.update(int(k) for k in keys)
        Y = self._solve_rows(keys)
        return np.clip(np.asarray((B.multiply(Y.T)).sum(axis=1)).ravel(), 0.0, 1.0)

    def _pred_vars(self, Ak, keys: np.ndarray) -> np.ndarray:
        """a·Cov(x̂)·a for each row a of sparse ``Ak`` (data ``keys``; combinations the fit determines).

        Exact path: ‖(a∘d) V S⁻¹‖². Iterative path: a·M⁺a = σ² j·(M⁺j) with the
        whitened row j = a/σ, from the solves kept through the loop (:meth:`_downdate`)
        or one block solve; when more than ``_EXACT_PRED_MAX`` data were set aside, the randomised
        estimate mean_s (a·Y_s)² from the probe solutions Y = M⁺JᵀG (Cov(Y_s) = M⁺)."""
        if not self.n:
            return np.zeros(Ak.shape[0])
        if self.dense:
            W = (Ak.toarray() * self._d) @ self._VrS
            return (W ** 2).sum(axis=1)
        if not self._aside_exact:     # many data set aside: the probes' estimate mean_s (a·Y_s)²
            return ((Ak @ self._probes[2]) ** 2).mean(axis=1)
        Y = self._solve_rows(keys)
        sig2 = np.array([self.u[k] ** 2 if k < self.m else self.ps[k - self.m] ** 2 for k in keys])
        return sig2 * np.asarray(self._rows_of(keys).multiply(Y.T).sum(axis=1)).ravel()

    # ---- the loop's choice
    def worst(self, z_max: float) -> list:
        """Data to set aside next, largest |t| first: [(kind, index, t, residual [J/mol])].

        Exact path: the single datum with the largest |t|. Iterative path: t from the
        randomised leverages, exact for the ``N_CANDIDATES`` largest estimated |t| and
        largest |r/u|; of the data beyond z_max, every one that has the largest |t|
        within two steps of the network (data sharing a species with a datum that shares
        a species with it) — gross errors far apart do not affect each other's residuals,
        so they are set aside in one step, as serial elimination would, while neighbours
        of a removed datum are re-tested after the refit. Data whose |t| agree within
        ``TIE_RTOL`` are tied: the first of them in the tie-break order (measurements by
        ``tie_rank`` of :func:`reconcile`, then priors) is chosen, the others are listed.
        """
        one_minus = 1.0 - self.h
        testable = one_minus > H_ONE
        t = np.where(testable, self.res_w / np.sqrt(np.where(testable, one_minus, 1.0)), 0.0)
        if not self.dense and self.n and len(t):
            cand = np.unique(np.concatenate([
                np.argsort(-np.abs(t), kind="stable")[:N_CANDIDATES],
                np.argsort(-np.abs(self.res_w), kind="stable")[:N_CANDIDATES]]))
            om = 1.0 - self._exact_h(cand)
            ok = om > H_ONE
            t[cand] = np.where(ok, self.res_w[cand] / np.sqrt(np.where(ok, om, 1.0)), 0.0)
            testable[cand] = ok
        if not testable.any():
            return []
        nm = len(self.im)
        # ties (the members of a single cycle have equal |t|): a measurement goes before a prior
        at = np.where(testable, np.abs(t), -1.0) * np.where(np.arange(len(t)) < nm, 1.0, 1.0 - 1e-9)
        key = self._tie_key()
        if self.dense:
            chosen = np.array([self._top(at, key, testable)])
        else:
            flagged = np.flatnonzero(at > z_max)
            chosen = (np.array([self._top(at, key, testable)]) if len(flagged) <= 1
                      else self._local_maxima(flagged, at, key))

        def who(k):
            return ("measurement", int(self.im[k])) if k < nm else ("prior", int(self.ip[k - nm]))

        out = []
        for k in chosen[np.lexsort((key[chosen], -at[chosen]))]:
            tied = np.flatnonzero(testable & (np.abs(at - at[k]) <= TIE_RTOL * at[k]))
            tied = tied[np.argsort(key[tied], kind="stable")]      # listed in the tie-break order
            out.append((*who(k), float(t[k]), float(self.res_w[k] * self.sig[k]),
                        [who(j) for j in tied if j != k]))
        return out

    def _tie_key(self) -> np.ndarray:
        """Rank of each active datum in the tie-break order: measurements (by ``rank_m``),
        then priors (by ``rank_p``)."""
        nm = len(self.im)
        kind = np.concatenate([np.zeros(nm), np.ones(len(self.ip))])
        rank = np.concatenate([self._rank_m[self.im], self._rank_p[self.ip]])
        key = np.empty(len(kind), dtype=np.int64)
        key[np.lexsort((rank, kind))] = np.arange(len(kind))
        return key

    @staticmethod
    def _top(at: np.ndarray, key: np.ndarray, testable: np.ndarray) -> int:
        """The datum with the largest |t|; among those tied with it (``TIE_RTOL``), the first by ``key``."""
        top = at.max()
        tied = np.flatnonzero(testable & (at >= top - TIE_RTOL * top))
        return int(tied[np.argmin(key[tied])])

    def _local_maxima(self, flagged: np.ndarray, at: np.ndarray, key: np.ndarray) -> np.ndarray:
        """Flagged rows with the largest |t| among the flagged rows within two steps (ties:
        the first by ``key``)."""
        S = (self.J != 0).astype(float).tocsr()
        K = S[flagged] @ S.T                     # rows sharing a species with each flagged row
        N2 = (K @ K.T).tocoo()                   # flagged pairs within two steps
        i, j = N2.row, N2.col
        ti, tj = at[flagged[i]], at[flagged[j]]
        tie = np.abs(tj - ti) <= TIE_RTOL * ti
        beaten = (i != j) & (((tj > ti) & ~tie) | (tie & (key[flagged[j]] < key[flagged[i]])))
        keep = np.ones(len(flagged), bool)
        keep[i[beaten]] = False
        return flagged[keep]

    def remove(self, kind: str, idx: int) -> None:
        (self.active_m if kind == "measurement" else self.active_p)[idx] = False
        if not self.dense and self.n:
            self._pending.append(int(idx) if kind == "measurement" else self.m + int(idx))

    # ---- final numbers
    def final(self) -> dict:
        """Outputs of the last fit (the loop ends on a refit of the final data set)."""
        if not self.dense and self.n and self.events:
            # estimates for the final data set: the first probes with the data set aside
            # removed (_downdate), or fresh ones when that update was not possible
            self._probes = self._probe(fresh=False)
            self.var = self._probes[0]
            self.h = self._leverage_estimates()
        nm = len(self.im)
        residual, std, lev = (np.full(self.m, np.nan) for _ in range(3))
        untestable = np.zeros(self.m, bool)
        hm = self.h[:nm]
        om = 1.0 - hm
        # iterative: 1 − h is a mean of squares of (I − H)G, which vanishes identically when h = 1
        untestable[self.im] = om <= H_ONE
        residual[self.im] = self.res_w[:nm] * self.u[self.im]
        std[self.im] = np.where(untestable[self.im], np.nan,
                                self.res_w[:nm] / np.sqrt(np.maximum(om, 1e-300)))
        lev[self.im] = hm
        # set-aside data against the final fit: residual and z = r / √(u² + a·Cov·a)
        ev_m = [e for e in self.events if e.kind == "measurement"]
        ev_p = [e for e in self.events if e.kind == "prior"]
        if ev_m:
            k = np.array([e.index for e in ev_m])
            Ak = self.A[k]
            r = self.v[k] - (Ak @ self.x if self.n else 0.0)
            z = r / np.sqrt(self.u[k] ** 2 + self._pred_vars(Ak, k))
            residual[k], std[k] = r, z
            for e, ri, zi in zip(ev_m, r, z):
                e.r_after_j_mol, e.z_after = float(ri), float(zi)
        if ev_p:
            k = np.array([e.index for e in ev_p])
            Ak = sp.csr_matrix((np.ones(len(k)), (np.arange(len(k)), k)), shape=(len(k), self.n))
            r = self.p[k] - self.x[k]
            z = r / np.sqrt(self.ps[k] ** 2 + self._pred_vars(Ak, self.m + k))
            for e, ri, zi in zip(ev_p, r, z):
                e.r_after_j_mol, e.z_after = float(ri), float(zi)
        sd = np.sqrt(np.maximum(self.var, 0.0))
        return dict(x=self.x, sd=sd, determined=self.det, residual=residual, std_residual=std,
                    leverage=lev, untestable=untestable, chi2=self.chi2, dof=self.dof)


class _RowMap:
    """Per-datum values estimated for one set of active data, looked up for another."""

    def __init__(self, m: int, n: int, im, ip, values):
        self.meas = np.ones(m)
        self.prior = np.ones(n)
        self.meas[im] = values[:len(im)]
        self.prior[ip] = values[len(im):]

    def at(self, im, ip) -> np.ndarray:
        return np.concatenate([self.meas[im], self.prior[ip]])


def _colscale(J: np.ndarray) -> np.ndarray:
    d = np.sqrt((J ** 2).sum(axis=0))
    return np.where(d > 0, 1.0 / np.where(d > 0, d, 1.0), 1.0)


def spmm(A, X: np.ndarray) -> np.ndarray:
    """A @ X for a sparse A and a dense block X (n × k), one column at a time.

    Same numbers as ``A @ X`` (each entry is the same sum in the same order). scipy's
    many-vector kernel is up to twice as slow per column as its single-vector one for a
    few columns (about even at 64), and needs a C-ordered copy of a Fortran-ordered X.
    Returns a Fortran-ordered (n × k) block.
    """
    X = np.asarray(X)
    if not sp.issparse(A) or X.ndim != 2:
        return A @ X
    out = np.empty((A.shape[0], X.shape[1]), order="F")
    for j in range(X.shape[1]):
        out[:, j] = A @ X[:, j]
    return out


def _matvec_into(A):
    """``f(x, out)``: out = A @ x into a preallocated vector (the solver's inner product
    with the matrix, called thousands of times: without scipy's per-call checks and a new
    output array each time). A scipy CSR matrix goes straight to its compiled kernel;
    anything else through ``@``."""
    kernel = getattr(_sparsetools, "csr_matvec", None) if _sparsetools is not None else None
    if (kernel is not None and sp.issparse(A) and A.format == "csr" and A.dtype == np.float64
            and A.indices.dtype == A.indptr.dtype):
        n_row, n_col = A.shape
        ip, ix, data = A.indptr, A.indices, A.data

        def f(x, out):
            out.fill(0.0)                 # the kernel adds A @ x to out
            kernel(n_row, n_col, ip, ix, data, x, out)
            return out
        return f

    def g(x, out):
        out[...] = A @ x
        return out
    return g


def block_pcg(M, B: np.ndarray, precond, *, x0: np.ndarray | None = None, rtol=1e-11,
              maxiter: int | None = None) -> np.ndarray:
    """Solve M X = B (M symmetric positive semi-definite, B in its range) for many columns.

    Preconditioned conjugate gradients on each column, all columns taking the same number
    of iterations: the first count at which every column's residual is below ``rtol``
    (one number, or one per column) × its right-hand side norm, or ``maxiter`` (default
    20 n + 100, capped at 20 000). ``precond`` is the inverse diagonal (Jacobi, an (n,)
    array) or a symmetric positive definite sparse matrix applied as z = P r (the
    block-diagonal inverse of :func:`block_preconditioner`). On a singular consistent
    system the iterates stay in x0 + P·range(M), so components of the solution in
    determined directions are unique.

    The columns are independent recurrences, run one after the other: each column's
    vectors (n doubles) stay in the processor's cache through its iterations, and the
    products use scipy's single-vector kernel (:func:`_matvec_into`). On the 1e5-species
    network that is 1.3–1.7 times faster than iterating on the n × k block, with the same
    numbers up to the order of summation in the inner products (bench/network_scale.py).
    Returns a Fortran-ordered n × k array.
    """
    B = np.asarray(B, float)
    n, k = B.shape
    X = np.zeros((n, k), order="F") if x0 is None else np.array(x0, float, order="F", copy=True)
    if n == 0 or k == 0:
        return X
    maxiter = maxiter or min(20 * n + 100, 20000)
    mul = _matvec_into(M)
    if isinstance(precond, np.ndarray):
        def apply(r, out):
            return np.multiply(precond, r, out=out)
    else:
        apply = _matvec_into(precond)
    bn = np.linalg.norm(B, axis=0)
    tol2 = (np.broadcast_to(np.asarray(rtol, float), (k,)) * np.where(bn > 0, bn, 1.0)) ** 2

    def dot(a, b) -> float:
        return float(np.einsum("i,i->", a, b))     # not BLAS: no threads spinning on a busy machine

    q, z, t = np.empty(n), np.empty(n), np.empty(n)   # work vectors, reused by every column
    cols = []                                      # per column: [x, r, p, r·z, iterations]
    for j in range(k):
        x = X[:, j]                                # a view: updated in place
        r = B[:, j] - mul(x, q) if x0 is not None else B[:, j].copy()
        p = apply(r, np.empty(n))
        cols.append([x, r, p, dot(r, p), 0])

    def advance(c, limit: int, tol2_j: float | None) -> None:
        """Iterate column ``c`` up to ``limit`` iterations (stopping early at ``tol2_j``)."""
        x, r, p, rz, it = c
        while it < limit and (tol2_j is None or dot(r, r) > tol2_j):
            mul(p, q)
            pq = dot(p, q)
            alpha = rz / pq if pq > 0 else 0.0
            x += np.multiply(p, alpha, out=t)
            r -= np.multiply(q, alpha, out=q)
            apply(r, z)
            rz_new = dot(r, z)
            beta = rz_new / rz if rz > 0 else 0.0
            p *= beta
            p += z
            rz = rz_new
            it += 1
        c[3:] = [rz, it]

    for j, c in enumerate(cols):                   # each column to its own convergence …
        advance(c, maxiter, tol2[j])
    target = max(c[4] for c in cols)
    while True:                                    # … then all to the first common count
        for c in cols:
            advance(c, target, None)
        if target >= maxiter or all(dot(c[1], c[1]) <= tol2[j] for j, c in enumerate(cols)):
            return X
        target += 1


#: Block preconditioner: a species joins the block of the datum that carries at least this
#: share of its weight (diagonal of M); blocks then merge with their strongest neighbour
#: while (Σ|M_ab|)²/(D_a D_b) ≥ ``_BLOCK_STRENGTH``, up to ``_BLOCK_MAX`` species.
_BLOCK_SHARE = 0.3
_BLOCK_STRENGTH = 0.05
_BLOCK_MAX = 16
_BLOCK_ROUNDS = 2


def block_preconditioner(M, J) -> sp.csr_matrix:
    """Block-diagonal inverse of M = JᵀJ over groups of strongly coupled species (SPD).

    Why: a datum much more precise than the others around it fixes a combination of its
    species (x_i − x_j, say) tightly and leaves the orthogonal one loosely determined; the
    small eigenvalues of D⁻¹M (D = diag M, Jacobi) then sit on such pairs and triples, and
    conjugate gradients need many iterations. Inverting M exactly on those groups removes
    them (on the 1e5-species benchmark network the condition number of the preconditioned
    matrix falls from about 180 with Jacobi to about 18, and CG needs about 2.7 times fewer
    iterations). Groups: each species joins the group of the row of J that carries the
    largest share ≥ ``_BLOCK_SHARE`` of its diagonal; then neighbouring groups pair up
    (mutual strongest |M| coupling, ``_BLOCK_ROUNDS`` rounds, at most ``_BLOCK_MAX``
    species). Each block is inverted through its eigen-decomposition with eigenvalues
    clipped below 1e-10 of the block's largest (a block direction with eigenvalue 0 is a
    null vector of M itself, since M = JᵀJ; the clip keeps the preconditioner definite).
    Any SPD preconditioner leaves the solution unchanged; only the iteration count depends
    on it.
    """
    lab = _aggregates(M, J)
    return _block_inverse(M, lab)


def _positions(lab: np.ndarray):
    """(order, start, pos, sizes): members sorted by group, each group's first position in
    that order, each member's rank within its group, the group sizes."""
    order = np.argsort(lab, kind="stable")
    sizes = np.bincount(lab)
    start = np.concatenate([[0], np.cumsum(sizes)[:-1]])
    pos = np.empty(len(lab), dtype=np.int64)
    pos[order] = np.arange(len(lab)) - start[lab[order]]
    return order, start, pos, sizes


def _aggregates(M, J) -> np.ndarray:
    """Group label per species for :func:`block_preconditioner` (labels 0 … g − 1)."""
    n = M.shape[0]
    d = M.diagonal()
    Jc = sp.coo_matrix(J)
    keep = Jc.data != 0
    r, c, v = Jc.row[keep], Jc.col[keep], Jc.data[keep]
    share = v * v / np.where(d[c] > 0, d[c], 1.0)
    o = np.lexsort((r, -share, c))                  # per species: the largest share first
    first = np.ones(len(o), bool)
    first[1:] = c[o][1:] != c[o][:-1]
    b = o[first]
    key = np.arange(n, dtype=np.int64) + J.shape[0]  # singletons: keys beyond every row
    strong = share[b] >= _BLOCK_SHARE
    key[c[b][strong]] = r[b][strong]
    lab = _dense_rank(key)
    _, _, pos, sizes = _positions(lab)
    if len(sizes) and sizes.max() > _BLOCK_MAX:      # a datum with many species: split its group
        lab = np.unique(lab * (n + 1) + pos // _BLOCK_MAX, return_inverse=True)[1].ravel()
    Ma = sp.csr_matrix(M).tocoo()
    Ma.data = np.abs(Ma.data)
    for _ in range(_BLOCK_ROUNDS):
        na = int(lab.max()) + 1 if n else 0
        C = sp.coo_matrix((Ma.data, (lab[Ma.row], lab[Ma.col])), shape=(na, na)).tocsr().tocoo()
        D = np.bincount(lab, weights=d, minlength=na)
        size = np.bincount(lab, minlength=na)
        i, j, w = C.row, C.col, C.data
        ok = (i != j) & (size[i] + size[j] <= _BLOCK_MAX)
        i, j, w = i[ok], j[ok], w[ok]
        s = w * w / (D[i] * D[j])
        ok = s >= _BLOCK_STRENGTH
        i, j, s = i[ok], j[ok], s[ok]
        if not len(i):
            break
        o = np.lexsort((j, -s, i))                  # per group: its strongest neighbour first
        f = np.ones(len(o), bool)
        f[1:] = i[o][1:] != i[o][:-1]
        pick = np.full(na, -1)
        pick[i[o][f]] = j[o][f]
        a = np.flatnonzero(pick >= 0)
        mutual = a[(pick[pick[a]] == a) & (a < pick[a])]
        if not len(mutual):
            break
        new = np.arange(na)
        new[pick[mutual]] = mutual
        lab = _dense_rank(new[lab])
    return lab


def _block_inverse(M, lab: np.ndarray, clip: float = 1e-10) -> sp.csr_matrix:
    """The inverse of each diagonal block M[g, g] of the groups ``lab`` (see
    :func:`block_preconditioner`), as one sparse block-diagonal matrix; a species without
    data (a zero block) gets 0, as in Jacobi."""
    n = M.shape[0]
    order, start, pos, sizes = _positions(lab)
    C = sp.coo_matrix(M)
    same = lab[C.row] == lab[C.col]
    r, c, v = C.row[same], C.col[same], C.data[same]
    rows, cols, vals = [], [], []
    for s in np.unique(sizes):
        groups = np.flatnonzero(sizes == s)
        loc = np.full(len(sizes), -1)
        loc[groups] = np.arange(len(groups))
        e = loc[lab[r]] >= 0
        Bk = np.zeros((len(groups), s, s))
        Bk[loc[lab[r[e]]], pos[r[e]], pos[c[e]]] = v[e]
        w, V = np.linalg.eigh(Bk)
        wmax = np.maximum(w[:, -1:], 0.0)
        winv = np.where(wmax > 0, 1.0 / np.maximum(w, np.where(wmax > 0, clip * wmax, 1.0)), 0.0)
        inv = (V * winv[:, None, :]) @ V.transpose(0, 2, 1)
        members = order[start[groups][:, None] + np.arange(s)]
        rows.append(np.repeat(members, s, axis=1).ravel())
        cols.append(np.tile(members, (1, s)).ravel())
        vals.append(inv.ravel())
    if not rows:
        return sp.csr_matrix((n, n))
    return sp.csr_matrix((np.concatenate(vals), (np.concatenate(rows), np.concatenate(cols))), shape=(n, n))


# ------------------------------------------------------------ second and third law


@dataclass(frozen=True)
class LawResult:
    """Per-series second- and third-law results (arrays over series)."""

    n_points: np.ndarray
    t_min_k: np.ndarray
    t_max_k: np.ndarray
    dh_second_j_mol: np.ndarray
    se_second_j_mol: np.ndarray
    ds_second_j_mol_k: np.ndarray
    dh_third_j_mol: np.ndarray
    se_third_j_mol: np.ndarray
    drift_j_mol_k: np.ndarray
    se_drift_j_mol_k: np.ndarray


def _wls_line(g, x, y, w, n_groups):
    """Weighted straight line y = a + b x per group; standard errors scaled by max(1, √χ²_ν)."""
    def s(a):
        return np.bincount(g, weights=a, minlength=n_groups)

    sw, sx, sy, sxx, sxy = s(w), s(w * x), s(w * y), s(w * x * x), s(w * x * y)
    cnt = np.bincount(g, minlength=n_groups)
    with np.errstate(divide="ignore", invalid="ignore"):
        det = sw * sxx - sx ** 2
        b = (sw * sxy - sx * sy) / det
        a = (sy - b * sx) / sw
        chi = s(w * (y - a[g] - b[g] * x) ** 2)
        scale = np.where(cnt > 2, np.sqrt(np.maximum(1.0, chi / np.maximum(cnt - 2, 1))), 1.0)
        se_b = np.sqrt(sw / det) * scale
        se_a = np.sqrt(sxx / det) * scale
    return a, b, se_a, se_b, cnt


def law_analysis(group: np.ndarray, t_k: np.ndarray, mrlnk: np.ndarray, u_mrlnk: np.ndarray,
                 d_h_minus_h298_j_mol: np.ndarray, d_s_minus_s298_j_mol_k: np.ndarray,
                 d_s298_j_mol_k: np.ndarray) -> LawResult:
    """Second- and third-law ΔrH°(298.15) of equilibrium series, vectorised over series.

    Derivation. With ΔrG°(T) = −RT ln K and G = H(298.15) + [G(T) − H(298.15)] for each
    species, ΔrH°(298.15) = −RT ln K − T Δ[(G − H298)/T]                         (third law)
    uses the species' absolute entropies through (G − H298)/T = (H − H298)/T − S.
    Writing S(T) = S(298.15) + [S(T) − S(298.15)] and moving the heat-capacity terms to
    the left gives the sigma function
        Σ(T) ≡ −R ln K − Δ(H − H298)/T + Δ(S − S298) = ΔrH°(298.15)·(1/T) − ΔrS°(298.15),
    a straight line in 1/T whose slope is the second-law ΔrH°(298.15) and whose
    intercept is −ΔrS°(298.15); the ΔCp correction (the two Δ terms) needs only heat-
    capacity integrals of the species, not their entropies (ref. 4).

    Uncertainties. Weights 1/u² from the stated uncertainties; a fit's standard errors are
    those of the weighted fit, multiplied by √(χ²/ν) when the scatter exceeds what the
    stated uncertainties imply, never made smaller (Birge ratio). Third law: weighted
    mean of the per-point values (u_i = T_i u(−R ln K_i)), and a weighted straight line of
    those values against T, whose slope (the drift) equals ΔrS°(tables) − ΔrS°(data).

    Parameters
    ----------
    group : (k,) series index 0..g−1 per point; t_k : (k,) [K];
    mrlnk, u_mrlnk : −R ln K and its standard uncertainty [J/(mol*K)];
    d_h_minus_h298_j_mol : Σν [H(T) − H(298.15)] [J/mol];
    d_s_minus_s298_j_mol_k : Σν [S(T) − S(298.15)] [J/(mol*K)];
    d_s298_j_mol_k : Σν S(298.15) [J/(mol*K)].
    """
    g = np.asarray(group, dtype=np.int64)
    ng = int(g.max()) + 1 if len(g) else 0
    t = np.asarray(t_k, float)
    y_sigma = np.asarray(mrlnk, float) - np.asarray(d_h_minus_h298_j_mol, float) / t \
        + np.asarray(d_s_minus_s298_j_mol_k, float)
    w = 1.0 / np.asarray(u_mrlnk, float) ** 2
    a, b, se_a, se_b, cnt = _wls_line(g, 1.0 / t, y_sigma, w, ng)
    # third law: ΔrH(298.15)_i = −RT ln K − T Δ[(G − H298)/T] = T (Σ_i + ΔrS°(298.15))
    h3 = t * (y_sigma + np.asarray(d_s298_j_mol_k, float))
    w3 = w / t ** 2
    sw = np.bincount(g, weights=w3, minlength=ng)
    mean3 = np.bincount(g, weights=w3 * h3, minlength=ng) / sw
    chi3 = np.bincount(g, weights=w3 * (h3 - mean3[g]) ** 2, minlength=ng)
    with np.errstate(divide="ignore", invalid="ignore"):
        se3 = np.sqrt(1.0 / sw) * np.where(cnt > 1, np.sqrt(np.maximum(1.0, chi3 / np.maximum(cnt - 1, 1))), 1.0)
    _, drift, _, se_drift, _ = _wls_line(g, t, h3, w3, ng)
    tmin = np.full(ng, np.inf)
    tmax = np.full(ng, -np.inf)
    np.minimum.at(tmin, g, t)
    np.maximum.at(tmax, g, t)
    return LawResult(n_points=cnt, t_min_k=tmin, t_max_k=tmax, dh_second_j_mol=b, se_second_j_mol=se_b,
                     ds_second_j_mol_k=-a, dh_third_j_mol=mean3, se_third_j_mol=se3,
                     drift_j_mol_k=drift, se_drift_j_mol_k=se_drift)
