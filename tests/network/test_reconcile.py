"""The network fit against weighted least squares written out independently with numpy.

Closed form (Gauss–Markov; e.g. Narasimhan & Jordache, *Data Reconciliation and Gross
Error Detection*, 2000, ch. 3): with measurements A x = v (weights W = diag(1/u²)) and
priors x_p = p (weights P = diag(1/σ²)),
    x̂ = (AᵀWA + P)⁻¹ (AᵀWv + P p),   Cov(x̂) = (AᵀWA + P)⁻¹,
    χ² = Σ w (v − A x̂)² + Σ P (p − x̂)²,   dof = rows − unknowns.
"""
from __future__ import annotations

import numpy as np
import pytest

from pipeline import network as nw
from pipeline.checks.reactions import network_worst_offender
from pipeline.constants import T_REF
from tests.network.helpers import const_cp, const_cp_table, network_context, reactions

C, H2 = "C(cr,graphite)", "H2(g)"
SPECIES = ["C2H4(g)", "C2H6(g)", "CH4(g)"]          # sorted, as in the reconciled table
# hypothetical but self-consistent measurements at 298.15 K (values in J/mol)
ROWS = [
    ("f1", {C: -1, H2: -2, "CH4(g)": 1}, -74.6e3, 0.4e3),
    ("f2", {C: -2, H2: -3, "C2H6(g)": 1}, -84.0e3, 0.5e3),
    ("h3", {"C2H4(g)": -1, H2: -1, "C2H6(g)": 1}, -136.9e3, 0.6e3),
    ("g4", {"C2H6(g)": -1, H2: -1, "CH4(g)": 2}, -65.0e3, 0.8e3),
    ("f5", {C: -2, H2: -2, "C2H4(g)": 1}, 52.5e3, 0.7e3),
]
PRIOR = ("C2H4(g)", 52.4e3, 1.0e3)


def _matrix():
    A = np.array([[r[1].get(s, 0.0) for s in SPECIES] for r in ROWS])
    v = np.array([r[2] for r in ROWS])
    u = np.array([r[3] for r in ROWS])
    return A, v, u


def _closed_form():
    A, v, u = _matrix()
    W = np.diag(1 / u ** 2)
    P = np.zeros((3, 3))
    p = np.zeros(3)
    i = SPECIES.index(PRIOR[0])
    P[i, i] = 1 / PRIOR[2] ** 2
    p[i] = PRIOR[1]
    N = A.T @ W @ A + P
    x = np.linalg.solve(N, A.T @ W @ v + P @ p)
    cov = np.linalg.inv(N)
    chi2 = float(((v - A @ x) ** 2 / u ** 2).sum() + P[i, i] * (p[i] - x[i]) ** 2)
    return x, np.sqrt(np.diag(cov)), chi2


def _ctx():
    rx = reactions([(rid, st, "drh", T_REF, v, u) for rid, st, v, u in ROWS])
    tables = [const_cp_table(PRIOR[0], PRIOR[1], PRIOR[2], 219.3, 43.6)]
    poly = [const_cp(C, 0.0, 5.74, 8.53), const_cp(H2, 0.0, 130.68, 28.82)]
    return network_context(poly=poly, tables=tables, rx=rx)


def test_check_matches_closed_form_wls():
    x, sd, chi2 = _closed_form()
    ctx = _ctx()
    f = network_worst_offender(ctx)
    assert f.empty                      # consistent data: nothing set aside, nothing untestable
    rec = ctx.tables_out["reconciled"].set_index("species")
    got = rec.loc[SPECIES]
    np.testing.assert_allclose(got["dfh_298_j_mol"], x, rtol=1e-9, atol=1e-6)
    np.testing.assert_allclose(got["uncertainty_dfh_298_j_mol"], sd, rtol=1e-8)
    assert got["determined"].all()
    assert got["chi2"].iloc[0] == pytest.approx(chi2, rel=1e-8)
    assert got["dof"].iloc[0] == 5 + 1 - 3
    assert got["reduced_chi2"].iloc[0] == pytest.approx(chi2 / 3, rel=1e-8)
    assert rec.loc["C2H4(g)", "prior_dfh_298_j_mol"] == PRIOR[1]
    assert rec.loc[C, "dfh_298_j_mol"] == 0.0 and rec.loc[H2, "dfh_298_j_mol"] == 0.0


def test_iterative_solver_matches_closed_form():
    """The large-network path (conjugate gradients, randomised variances) on the same data.

    Values: exact to solver precision. Standard uncertainties: randomised estimate with
    s = 20000 probes, relative standard error of a variance √(2/s) = 1 %, of a standard
    uncertainty 0.5 %: tolerance 3 %."""
    x, sd, chi2 = _closed_form()
    A, v, u = _matrix()
    prior = np.full(3, np.nan)
    psd = np.full(3, np.nan)
    i = SPECIES.index(PRIOR[0])
    prior[i], psd[i] = PRIOR[1], PRIOR[2]
    fit = nw.reconcile(A, v, u, prior, psd, dense_max=0, n_probes=20000)
    assert fit.method == {0: "iterative"}
    np.testing.assert_allclose(fit.x_j_mol, x, rtol=1e-8)
    np.testing.assert_allclose(fit.sd_j_mol, sd, rtol=0.03)
    assert fit.chi2[0] == pytest.approx(chi2, rel=1e-6)
    assert fit.dof[0] == 3


def test_leverage_matches_hat_matrix():
    """h = diag(J (JᵀJ)⁻¹ Jᵀ) of the whitened design (measurements, then the prior row)."""
    A, v, u = _matrix()
    prior = np.full(3, np.nan)
    psd = np.full(3, np.nan)
    i = SPECIES.index(PRIOR[0])
    prior[i], psd[i] = PRIOR[1], PRIOR[2]
    J = np.vstack([A / u[:, None], np.eye(3)[i] / PRIOR[2]])
    H = J @ np.linalg.inv(J.T @ J) @ J.T
    fit = nw.reconcile(A, v, u, prior, psd)
    np.testing.assert_allclose(fit.leverage, np.diag(H)[:5], rtol=1e-9)
    r = (v - A @ fit.x_j_mol) / u
    np.testing.assert_allclose(fit.std_residual, r / np.sqrt(1 - np.diag(H)[:5]), rtol=1e-8)


@pytest.mark.parametrize("dense_max", [400, 0])
def test_undetermined_species_keep_their_record_value(dense_max):
    """CH4 + C2H4 = C3H8 with only C3H8 stated: the network fixes the sum CH4 + C2H4, not
    each; they keep their record values and are marked undetermined; the lone measurement
    is untestable (h = 1)."""
    rx = reactions([("a", {"CH4(g)": -1, "C2H4(g)": -1, "C3H8(g)": 1}, "drh", T_REF, -157.0e3, 1.0e3)])
    poly = [const_cp("CH4(g)", -74.6e3, 186.3, 35.7), const_cp("C2H4(g)", 52.4e3, 219.3, 43.6)]
    tables = [const_cp_table("C3H8(g)", -104.7e3, 0.5e3, 270.3, 73.6)]
    ctx = network_context(poly=poly, tables=tables, rx=rx)
    f = network_worst_offender(ctx)
    rec = ctx.tables_out["reconciled"].set_index("species")
    assert not rec.loc["CH4(g)", "determined"] and not rec.loc["C2H4(g)", "determined"]
    assert rec.loc["CH4(g)", "dfh_298_j_mol"] == pytest.approx(-74.6e3, abs=1e-6)
    assert rec.loc["C2H4(g)", "dfh_298_j_mol"] == pytest.approx(52.4e3, abs=1e-6)
    assert rec.loc["C3H8(g)", "determined"]
    assert rec.loc["C3H8(g)", "dfh_298_j_mol"] == pytest.approx(-104.7e3, abs=1e-6)
    assert list(f["severity"]) == ["info"] and list(f["subject"]) == ["a"]
    # the same through the numerical core, both solvers
    fit = nw.reconcile(np.array([[-1.0, -1.0, 1.0]]), [-157.0e3], [1.0e3], [np.nan, np.nan, -104.7e3],
                       [np.nan, np.nan, 0.5e3], dense_max=dense_max)
    assert fit.determined.tolist() == [False, False, True]
    assert fit.untestable.tolist() == [True]
    assert fit.dof[0] == 0


def test_bad_arguments_raise():
    with pytest.raises(ValueError, match="standard uncertainty"):
        nw.reconcile(np.eye(2), [1.0, 2.0], [1.0, 0.0], [np.nan] * 2, [np.nan] * 2)
    with pytest.raises(ValueError, match="shapes"):
        nw.reconcile(np.eye(2), [1.0], [1.0], [np.nan] * 2, [np.nan] * 2)
