"""The synthetic network generator of bench/network_scale.py at small N, and the two solvers
on it. (Speed is measured in bench/, never here.)

Statistical expectations (normal errors, correct uncertainties): about 95 % of reconciled
values lie within 2 standard uncertainties of the truth; the test asks for 90 % to stay
robust at N = 300 (binomial standard deviation 1.3 %).
"""
from __future__ import annotations

import numpy as np
import pytest

from pipeline import network as nw
from tests.network.helpers import network_bench

bench = network_bench()


@pytest.fixture(scope="module")
def net():
    return bench.make_network(300, n_bad=3, seed=7)


def test_generated_reactions_balance_every_element(net):
    from pipeline.formula import parse_formula, parse_key

    for st in net["stoich"][:200]:
        tot: dict = {}
        for key, nu in st.items():
            for el, n in parse_formula(parse_key(key).formula).elements.items():
                tot[el] = tot.get(el, 0.0) + nu * n
        assert all(abs(v) < 1e-9 for v in tot.values()), st


@pytest.fixture(scope="module")
def fits(net):
    args = (net["A"], net["value_j_mol"], net["u_j_mol"], net["prior_j_mol"], net["prior_sd_j_mol"])
    return nw.reconcile(*args), nw.reconcile(*args, dense_max=0, n_probes=1000)


def test_planted_gross_errors_are_set_aside(net, fits):
    for fit in fits:
        removed = {e.index for e in fit.set_aside if e.kind == "measurement"}
        testable = [b for b in net["bad"] if not fit.untestable[b]]
        assert testable, "the generator should plant testable errors at this size"
        assert set(testable) <= removed


def test_reconciled_values_cover_the_truth(net, fits):
    dense, _ = fits
    d = dense.determined
    z = (dense.x_j_mol[d] - net["truth_j_mol"][d]) / dense.sd_j_mol[d]
    assert np.mean(np.abs(z) <= 2) >= 0.90


def test_iterative_agrees_with_dense(fits):
    """Same data set aside → same values; standard uncertainties from 1000 probes (relative
    standard error 2.2 % on a variance, 1.1 % on u): tolerance 8 % on every species."""
    dense, it = fits
    assert {e.index for e in dense.set_aside} == {e.index for e in it.set_aside}
    assert (dense.determined == it.determined).all()
    d = dense.determined
    np.testing.assert_allclose(it.x_j_mol[d], dense.x_j_mol[d], rtol=1e-7, atol=1e-3)
    np.testing.assert_allclose(it.sd_j_mol[d], dense.sd_j_mol[d], rtol=0.08)
    np.testing.assert_array_equal(it.untestable, dense.untestable)
