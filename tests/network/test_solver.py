"""The iterative path of the network fit against linear algebra done independently here.

Closed forms (Gauss–Markov; e.g. Narasimhan & Jordache, *Data Reconciliation and Gross
Error Detection*, 2000, ch. 3): x̂ = M⁺JᵀB with M = JᵀJ, h_k = j_k M⁺ j_kᵀ, and for a datum
k set aside, the prediction variance a_k Cov(x̂) a_kᵀ from the fit without it. Dense
references: numpy's pseudo-inverse and ``scipy.sparse.linalg.spsolve``.
"""
from __future__ import annotations

import importlib.util
from pathlib import Path

import numpy as np
import pytest
import scipy.sparse as sp
from scipy.sparse.linalg import spsolve

from pipeline import network as nw

_spec = importlib.util.spec_from_file_location(
    "network_scale", Path(__file__).resolve().parents[2] / "bench" / "network_scale.py")
bench = importlib.util.module_from_spec(_spec)
_spec.loader.exec_module(bench)


def _random_design(m=400, n=150, seed=3):
    """A whitened design J (rows of 2–3 species, weights spread over two decades, as in the
    benchmark network) and M = JᵀJ."""
    rng = np.random.default_rng(seed)
    rows = np.repeat(np.arange(m), 3)
    cols = rng.integers(0, n, 3 * m)
    vals = rng.choice([-2.0, -1.0, 1.0, 2.0], 3 * m) / np.repeat(rng.uniform(0.3, 3.0, m), 3)
    J = sp.csr_matrix((vals, (rows, cols)), shape=(m, n))
    J.sum_duplicates()
    return J, (J.T @ J).tocsr()


def test_block_preconditioner_is_spd_and_inverts_each_group():
    J, M = _random_design()
    P = nw.block_preconditioner(M, J).toarray()
    np.testing.assert_allclose(P, P.T, atol=1e-12 * np.abs(P).max())
    assert np.linalg.eigvalsh(P).min() > 0
    lab = nw._aggregates(M, J)
    assert np.bincount(lab).max() > 1                 # strongly coupled species were grouped
    Md = M.toarray()
    for g in np.unique(lab)[:40]:
        idx = np.flatnonzero(lab == g)
        np.testing.assert_allclose(P[np.ix_(idx, idx)] @ Md[np.ix_(idx, idx)], np.eye(len(idx)), atol=1e-8)
        others = np.setdiff1d(np.arange(M.shape[0]), idx)
        assert not P[np.ix_(idx, others)].any()      # block diagonal


@pytest.mark.parametrize("precond", ["jacobi", "block"])
def test_block_pcg_matches_a_direct_solve(precond):
    J, M = _random_design()
    M = (M + sp.identity(M.shape[0]) * 1e-3).tocsr()  # definite
    B = np.random.default_rng(1).standard_normal((M.shape[0], 5))
    pre = 1.0 / M.diagonal() if precond == "jacobi" else nw.block_preconditioner(M, J)
    X = nw.block_pcg(M, B, pre, rtol=1e-12)
    np.testing.assert_allclose(X, spsolve(M.tocsc(), B), rtol=1e-8, atol=1e-10)


def test_block_pcg_on_a_singular_system_fixes_the_determined_combinations():
    """The last two species only ever appear together (a copied column): M is singular,
    only their sum is determined; J·x (what the data see) is unique and equals J M⁺ b."""
    J, _ = _random_design(m=300, n=80)
    J = sp.hstack([J, J[:, [-1]]]).tocsr()
    M = (J.T @ J).tocsr()
    assert np.linalg.matrix_rank(M.toarray()) == M.shape[0] - 1
    b = J @ np.random.default_rng(2).standard_normal(J.shape[1])
    rhs = (J.T @ b)[:, None]
    x = nw.block_pcg(M, rhs, nw.block_preconditioner(M, J), rtol=1e-13)[:, 0]
    x_ref = np.linalg.pinv(M.toarray()) @ rhs[:, 0]
    np.testing.assert_allclose(J @ x, J @ x_ref, rtol=1e-8, atol=1e-9)
    np.testing.assert_allclose(x[:-2], x_ref[:-2], rtol=1e-7, atol=1e-8)      # the determined species


def test_block_pcg_takes_one_tolerance_per_column():
    J, M = _random_design()
    M = (M + sp.identity(M.shape[0]) * 1e-3).tocsr()
    B = np.random.default_rng(4).standard_normal((M.shape[0], 2))
    X = nw.block_pcg(M, B, nw.block_preconditioner(M, J), rtol=[1e-2, 1e-12])
    exact = spsolve(M.tocsc(), B)
    assert np.abs(X[:, 1] - exact[:, 1]).max() < 1e-8 * np.abs(exact[:, 1]).max()
    assert np.linalg.norm(M @ X[:, 0] - B[:, 0]) <= 1e-2 * np.linalg.norm(B[:, 0])


def test_dense_rank_is_the_inverse_of_unique():
    x = np.random.default_rng(5).integers(0, 50, 1000)
    np.testing.assert_array_equal(nw._dense_rank(x), np.unique(x, return_inverse=True)[1].ravel())


def test_term_components_match_row_components():
    rng = np.random.default_rng(6)
    rows = [list(rng.choice(40, rng.integers(1, 4), replace=False)) for _ in range(30)]
    r = np.repeat(np.arange(30), [len(s) for s in rows])
    k = np.concatenate(rows)
    np.testing.assert_array_equal(nw.term_components(r, k, 30), nw.row_components(rows, 30))


@pytest.fixture(scope="module")
def net_and_fits():
    net = bench.make_network(500, n_bad=4, seed=11)
    args = (net["A"], net["value_j_mol"], net["u_j_mol"], net["prior_j_mol"], net["prior_sd_j_mol"])
    return net, nw.reconcile(*args), nw.reconcile(*args, dense_max=0)


def test_prediction_variance_of_set_aside_data_is_exact(net_and_fits):
    """The "after" z of every datum set aside equals the dense (SVD) fit's: the iterative
    path keeps the exact solves through the Sherman–Morrison–Woodbury updates."""
    _, dense, it = net_and_fits
    assert it.method[max(it.method, key=lambda c: it.dof[c])] == "iterative"
    d = {(e.kind, e.index): e for e in dense.set_aside}
    i = {(e.kind, e.index): e for e in it.set_aside}
    assert d.keys() == i.keys() and len(d) >= 3
    for key, e in d.items():
        assert i[key].z_after == pytest.approx(e.z_after, rel=1e-6)
        assert i[key].r_after_j_mol == pytest.approx(e.r_after_j_mol, rel=1e-7, abs=1e-3)
        assert i[key].t_before == pytest.approx(e.t_before, rel=1e-6)


def test_the_downdated_fit_is_the_refit(net_and_fits):
    """Values after setting data aside (warm-started from the Woodbury update) equal the
    dense fit of the same data, and so do the untestable data (h = 1)."""
    _, dense, it = net_and_fits
    det = dense.determined
    np.testing.assert_array_equal(det, it.determined)
    np.testing.assert_allclose(it.x_j_mol[det], dense.x_j_mol[det], rtol=1e-8, atol=1e-3)
    np.testing.assert_array_equal(it.untestable, dense.untestable)
    assert {c: round(v, 6) for c, v in it.chi2.items()} == {c: round(v, 6) for c, v in dense.chi2.items()}


def test_a_species_in_one_datum_only_makes_it_untestable():
    """x3 appears only in the third datum: h = 1 exactly (its residual is zero whatever its
    value); the iterative path says so without relying on its solver tolerance."""
    A = np.array([[1.0, -1.0, 0.0], [1.0, 0.0, 0.0], [0.0, 1.0, 0.0], [0.0, 1.0, 1.0]])
    v = np.array([10.0, 30.0, 21.0, 50.0])
    u = np.array([1.0, 1.0, 1.0, 2.0])
    nan = np.full(3, np.nan)
    for dense_max in (400, 0):
        fit = nw.reconcile(A, v, u, nan, nan, dense_max=dense_max)
        assert fit.untestable.tolist() == [False, False, False, True]
        assert fit.leverage[3] == pytest.approx(1.0, abs=1e-12)
