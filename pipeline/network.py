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

import json
import math
from dataclasses import dataclass, field
from fractions import Fraction
from typing import Mapping, Sequence

import numpy as np
import pandas as pd
import scipy.sparse as sp
from scipy.sparse.csgraph import connected_components
from scipy.stats import chi2 as _chi2

from .constants import LN10, R

# ------------------------------------------------------------------------ stoichiometry


def stoich_long(stoich_json: Sequence[str]) -> pd.DataFrame:
    """Explode ``stoich_json`` strings into long form: ``row, species, nu``.

    ``row`` is the position in ``stoich_json``; a null or empty entry contributes no rows.
    Coefficients of zero are dropped.
    """
    rows, species, nus = [], [], []
    for i, s in enumerate(stoich_json):
        if s is None or (isinstance(s, float) and math.isnan(s)):
            continue
        d = json.loads(s) if isinstance(s, str) else dict(s)
        for k, v in d.items():
            if float(v) != 0.0:
                rows.append(i)
                species.append(k)
                nus.append(float(v))
    return pd.DataFrame({"row": np.asarray(rows, dtype=np.int64), "species": pd.Series(species, dtype=object),
                         "nu": np.asarray(nus, dtype=float)})


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
              max_set_aside_fraction: float = 0.5, seed: int = 20040101) -> NetworkFit:
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
    (scales to 1e5 species): normal equations M = JᵀJ (sparse) solved by Jacobi-
    preconditioned conjugate gradients, many right-hand sides at once; undetermined
    species are the support of the null space of M, found by projecting random vectors
    onto it (exact with probability 1, to the solver tolerance); variances and 1 − h by
    the randomised estimator of refs. 3 with ``n_probes`` Gaussian probes G:
    Y = M⁺JᵀG gives var(x̂_i) ≈ mean_s Y_is² and 1 − h_k ≈ mean_s ((G − JY)_ks)², since
    Cov(Y) = M⁺ and G − JY = (I − H)G with I − H a projection (relative standard error
    √(2/s)); in each loop step the leverages of the ``N_CANDIDATES`` most suspicious data
    are computed exactly (one block solve), the others keep their estimates (about 9 %
    on t), and the data beyond ``z_max`` that have the largest |t| within two steps of
    the network are set aside together (gross errors far apart do not disturb each
    other's residuals; see ``_Component.worst``). The prediction variance of a set-aside
    datum (its "after" z) uses the same probes. Measured on 1e5 species: bench/network_scale.py.

    Parameters
    ----------
    A : (m, n) sparse or dense stoichiometric matrix of the unknown species.
    value_j_mol, u_j_mol : (m,) measured ΔrH°(298.15) and standard uncertainty [J/mol].
    prior_j_mol, prior_sd_j_mol : (n,) stated ΔfH°(298.15) and uncertainty [J/mol], NaN = none.
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
    order_m = np.argsort(meas_comp, kind="stable")
    order_n = np.argsort(sp_comp, kind="stable")
    comps = np.unique(lab)
    m_start = np.searchsorted(meas_comp[order_m], comps)
    m_end = np.searchsorted(meas_comp[order_m], comps, side="right")
    n_start = np.searchsorted(sp_comp[order_n], comps)
    n_end = np.searchsorted(sp_comp[order_n], comps, side="right")
    for c, a0, a1, b0, b1 in zip(comps, m_start, m_end, n_start, n_end):
        rows = order_m[a0:a1]
        cols = order_n[b0:b1]
        sub = _Component(A[rows][:, cols], v[rows], u[rows], p[cols], ps[cols], has_prior[cols],
                         dense=len(cols) <= dense_max, n_probes=n_probes, rng=rng)
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


def _worst_offender_loop(c: "_Component", z_max: float, alpha: float, max_frac: float) -> None:
    limit = max(1, int(max_frac * c.m)) if c.m else 0
    step = removed = 0
    while True:
        c.refit()
        if c.dof <= 0:
            return
        crit = float(_chi2.ppf(1.0 - alpha, c.dof))
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

    def __init__(self, A, v, u, p, ps, has_prior, *, dense: bool, n_probes: int, rng):
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
        self._probes = None      # iterative path: (var per species, _RowMap of 1 − h per datum, Y)
        self.x = np.zeros(self.n)

    def _system(self):
        """Whitened rows of the active data: measurements, then priors."""
        im = np.flatnonzero(self.active_m)
        ip = np.flatnonzero(self.active_p)
        Jm = sp.diags(1.0 / self.u[im]) @ self.A[im]
        Jp = sp.csr_matrix((1.0 / self.ps[ip], (np.arange(len(ip)), ip)), shape=(len(ip), self.n))
        J = sp.vstack([Jm, Jp], format="csr")
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
        self.M = (J.T @ J).tocsr()
        dg = self.M.diagonal()
        self.dinv = np.where(dg > 0, 1.0 / np.where(dg > 0, dg, 1.0), 0.0)
        if self._null_info is None:
            self._null_info = self._null_space()
        self.det, null_dim = self._null_info
        self.rank = self.n - null_dim
        x0 = self.x if np.any(self.x) else np.where(np.isfinite(self.p), self.p, 0.0)
        self.x = block_pcg(self.M, (J.T @ self.b)[:, None], self.dinv, x0=x0[:, None])[:, 0]
        if self._probes is None:
            self._probes = self._probe()
        self.var = self._probes[0]
        self.h = np.clip(1.0 - self._probes[1].at(self.im, self.ip), 0.0, 1.0)

    def _null_space(self):
        """Undetermined species (the support of null(M)) and dim null(M)."""
        Z = self.rng.standard_normal((self.n, 3))
        N = Z - block_pcg(self.M, self.M @ Z, self.dinv, rtol=1e-13)
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
        N = Z - block_pcg(self.M, self.M @ Z, self.dinv, rtol=1e-13)
        s = np.linalg.svd(N[idx], compute_uv=False)
        return ~undet, int((s > 1e-6 * s.max()).sum())

    def _probe(self):
        G = self.rng.standard_normal((self.J.shape[0], self.n_probes))
        Y = block_pcg(self.M, self.J.T @ G, self.dinv, rtol=1e-5)
        var = (Y ** 2).mean(axis=1)
        one_minus_h = ((G - self.J @ Y) ** 2).mean(axis=1)
        return var, _RowMap(self.m, self.n, self.im, self.ip, one_minus_h), Y

    def _exact_h(self, rows: np.ndarray) -> np.ndarray:
        B = self.J[rows].T.toarray()
        # 1e-6: h to ~1e-6, far inside what the |t| > 3 test can resolve
        Y = block_pcg(self.M, B, self.dinv, rtol=1e-6)
        return np.clip((B * Y).sum(axis=0), 0.0, 1.0)

    def _pred_vars(self, Ak) -> np.ndarray:
        """a·Cov(x̂)·a for each row a of sparse ``Ak`` (combinations the fit determines).

        Exact path: ‖(a∘d) V S⁻¹‖². Iterative path: the randomised estimate
        mean_s (a·Y_s)², since Cov(Y_s) = M⁺ for the probe solutions Y = M⁺JᵀG."""
        if not self.n:
            return np.zeros(Ak.shape[0])
        if self.dense:
            W = (Ak.toarray() * self._d) @ self._VrS
            return (W ** 2).sum(axis=1)
        return ((Ak @ self._probes[2]) ** 2).mean(axis=1)

    # ---- the loop's choice
    def worst(self, z_max: float) -> list:
        """Data to set aside next, largest |t| first: [(kind, index, t, residual [J/mol])].

        Exact path: the single datum with the largest |t|. Iterative path: t from the
        randomised leverages, exact for the ``N_CANDIDATES`` largest estimated |t| and
        largest |r/u|; of the data beyond z_max, every one that has the largest |t|
        within two steps of the network (data sharing a species with a datum that shares
        a species with it) — gross errors far apart do not affect each other's residuals,
        so they are set aside in one step, as serial elimination would, while neighbours
        of a removed datum are re-tested after the refit.
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
        if self.dense:
            chosen = np.array([int(np.argmax(at))])
        else:
            flagged = np.flatnonzero(at > z_max)
            chosen = np.array([int(np.argmax(at))]) if len(flagged) <= 1 else self._local_maxima(flagged, at)

        def who(k):
            return ("measurement", int(self.im[k])) if k < nm else ("prior", int(self.ip[k - nm]))

        out = []
        for k in chosen[np.argsort(-at[chosen], kind="stable")]:
            tied = np.flatnonzero(testable & (np.abs(at - at[k]) <= 1e-6 * at[k]))
            out.append((*who(k), float(t[k]), float(self.res_w[k] * self.sig[k]),
                        [who(j) for j in tied if j != k]))
        return out

    def _local_maxima(self, flagged: np.ndarray, at: np.ndarray) -> np.ndarray:
        """Flagged rows with the largest |t| among the flagged rows within two steps."""
        S = (self.J != 0).astype(float).tocsr()
        K = S[flagged] @ S.T                     # rows sharing a species with each flagged row
        N2 = (K @ K.T).tocoo()                   # flagged pairs within two steps
        i, j = N2.row, N2.col
        ti, tj = at[flagged[i]], at[flagged[j]]
        beaten = (i != j) & ((tj > ti) | ((tj == ti) & (j < i)))
        keep = np.ones(len(flagged), bool)
        keep[i[beaten]] = False
        return flagged[keep]

    def remove(self, kind: str, idx: int) -> None:
        (self.active_m if kind == "measurement" else self.active_p)[idx] = False

    # ---- final numbers
    def final(self) -> dict:
        """Outputs of the last fit (the loop ends on a refit of the final data set)."""
        if not self.dense and self.n and self.events:
            self._probes = self._probe()     # fresh estimates for the final data set
            self.var = self._probes[0]
            self.h = np.clip(1.0 - self._probes[1].at(self.im, self.ip), 0.0, 1.0)
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
            z = r / np.sqrt(self.u[k] ** 2 + self._pred_vars(Ak))
            residual[k], std[k] = r, z
            for e, ri, zi in zip(ev_m, r, z):
                e.r_after_j_mol, e.z_after = float(ri), float(zi)
        if ev_p:
            k = np.array([e.index for e in ev_p])
            Ak = sp.csr_matrix((np.ones(len(k)), (np.arange(len(k)), k)), shape=(len(k), self.n))
            r = self.p[k] - self.x[k]
            z = r / np.sqrt(self.ps[k] ** 2 + self._pred_vars(Ak))
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


def block_pcg(M, B: np.ndarray, dinv: np.ndarray, *, x0: np.ndarray | None = None, rtol: float = 1e-11,
              maxiter: int | None = None) -> np.ndarray:
    """Solve M X = B (M symmetric positive semi-definite, B in its range) for many columns.

    Jacobi-preconditioned conjugate gradients run on all columns at once (one sparse
    matrix × dense block product per iteration). Stops when every column's residual is
    below ``rtol`` × its right-hand side norm, or after ``maxiter`` (default 20 n + 100)
    iterations (capped at 20 000). On a singular consistent system the iterates stay in x0 + D·range(M),
    so components of the solution in determined directions are unique.
    """
    B = np.asarray(B, float)
    n, k = B.shape
    X = np.zeros((n, k)) if x0 is None else np.array(x0, float, copy=True)
    if n == 0 or k == 0:
        return X
    maxiter = maxiter or min(20 * n + 100, 20000)
    R = B - M @ X
    tol2 = (rtol * np.where((bn := np.linalg.norm(B, axis=0)) > 0, bn, 1.0)) ** 2
    d = dinv[:, None]
    Z = d * R
    P = Z.copy()
    rz = np.einsum("ij,ij->j", R, Z)
    for _ in range(maxiter):
        if np.all(np.einsum("ij,ij->j", R, R) <= tol2):
            break
        Q = M @ P
        pq = np.einsum("ij,ij->j", P, Q)
        alpha = np.divide(rz, pq, out=np.zeros(k), where=pq > 0)
        X += alpha * P
        Q *= alpha
        R -= Q
        np.multiply(d, R, out=Z)
        rz_new = np.einsum("ij,ij->j", R, Z)
        beta = np.divide(rz_new, rz, out=np.zeros(k), where=rz > 0)
        P *= beta
        P += Z
        rz = rz_new
    return X


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
