"""Hess cycles: the cycle basis is the left null space of the stoichiometric matrix.

Checked against linear algebra done independently here: every cycle cancels every species
exactly (rational arithmetic), the number of independent cycles is m − rank(N) (numpy's
SVD rank), every reaction in the support of the null space (scipy.linalg.null_space)
lies in some basis cycle, and short cycles (duplicates, triangles) are found as such.
"""
from __future__ import annotations

from fractions import Fraction

import numpy as np
import pytest
from scipy.linalg import null_space

from pipeline import network as nw


def _cancels(rows, cycle) -> bool:
    tot: dict = {}
    for k, c in cycle.items():
        for s, v in rows[k].items():
            tot[s] = tot.get(s, 0) + c * Fraction(v).limit_denominator(1000)
    return all(v == 0 for v in tot.values())


def test_duplicate_and_triangle_are_the_short_cycles():
    rows = [{"A": -1, "B": 1}, {"B": -1, "C": 1}, {"A": -1, "C": 1}, {"A": -2, "B": 2}]
    cycles = nw.cycle_basis(rows)
    assert sorted(len(c) for c in cycles) == [2, 3]
    assert all(_cancels(rows, c) for c in cycles)
    pair = next(c for c in cycles if len(c) == 2)
    assert pair in ({0: 2, 3: -1}, {0: -2, 3: 1})


def test_fractional_coefficients_are_exact():
    """½ O2 and ⅓ coefficients: integer, coprime cycle coefficients."""
    rows = [{"CO": -1, "O2": -0.5, "CO2": 1}, {"C": -1, "O2": -1, "CO2": 1}, {"C": -1, "O2": -0.5, "CO": 1},
            {"X3": -1 / 3, "X": 1}, {"X3": -1, "X": 3}]
    cycles = nw.cycle_basis(rows)
    assert len(cycles) == 2
    assert all(_cancels(rows, c) for c in cycles)
    assert {0: 1, 1: -1, 2: 1} in cycles          # Hess: ΔcH(CO) − ΔcH(C) + ΔfH(CO) = 0
    assert {3: 3, 4: -1} in cycles
    for c in cycles:
        assert np.gcd.reduce(np.abs(list(c.values()))) == 1


@pytest.mark.parametrize("seed", [0, 1, 2])
def test_random_network_basis_is_a_null_space_basis(seed):
    rng = np.random.default_rng(seed)
    n_species, m = 12, 30
    rows = []
    for _ in range(m):
        k = rng.integers(2, 4)
        sp = rng.choice(n_species, size=k, replace=False)
        rows.append({f"S{s}": float(rng.choice([-2, -1, -0.5, 1, 2])) for s in sp})
    N = np.array([[r.get(f"S{j}", 0.0) for j in range(n_species)] for r in rows])
    cycles = nw.cycle_basis(rows)
    assert len(cycles) == m - np.linalg.matrix_rank(N)
    assert all(_cancels(rows, c) for c in cycles)
    C = np.zeros((len(cycles), m))
    for i, c in enumerate(cycles):
        for k, v in c.items():
            C[i, k] = v
    assert np.linalg.matrix_rank(C) == len(cycles)           # independent
    support = np.abs(null_space(N.T)).max(axis=1) > 1e-9     # reactions that lie in any cycle
    assert set(np.flatnonzero(support)) == set(np.flatnonzero(np.abs(C).sum(axis=0) > 0))


def test_closure_statistic():
    """z = Σ c v / √Σ (c u)²."""
    s, us, z = nw.cycle_closure([{0: 1, 1: -2}], np.array([10.0, 4.0]), np.array([3.0, 2.0]))
    assert s[0] == pytest.approx(2.0)
    assert us[0] == pytest.approx(5.0)
    assert z[0] == pytest.approx(0.4)


def test_log_k_and_gibbs_energy_at_one_temperature_close_a_cycle():
    """log K and ΔrG of one reaction at one T are the same quantity: ΔrG = −RT ln 10 log K."""
    from pipeline.checks.reactions import cycle_closure
    from pipeline.constants import LN10, R
    from tests.network.helpers import network_context, reactions

    st = {"N2O4(g)": -1, "NO2(g)": 2}
    t = 400.0
    dg = -10.0e3
    lk = -dg / (R * t * LN10)
    ok = reactions([("a", st, "drg", t, dg, 0.2e3), ("b", st, "log_k", t + 0.3, lk, 0.01)])
    assert cycle_closure(network_context(rx=ok)).empty
    bad = reactions([("a", st, "drg", t, dg, 0.2e3), ("b", st, "log_k", t + 0.3, lk + 0.5, 0.01)])
    f = cycle_closure(network_context(rx=bad))
    assert list(f["subject"]) == ["cycle:a+b"]
    # a − b = ΔrG(a) + RT' ln 10 (log K + 0.5); the 0.3 K apart adds 0.2 % (within same_t_k)
    assert f["observed"].iloc[0] == pytest.approx(0.5 * R * (t + 0.3) * LN10, rel=3e-3)
