"""One bad measurement in a redundant combustion network: named by the worst-offender loop,
and seen in at least one failing Hess cycle.

Data: combustion enthalpies at 298.15 K — graphite and hydrogen from Cox, Wagman &
Medvedev, *CODATA Key Values for Thermodynamics* (1989): ΔfH°(CO2, g) = −393.51 ± 0.13,
ΔfH°(H2O, l) = −285.830 ± 0.040 kJ/mol; methane −890.7 ± 0.4, ethane −1560.7 ± 0.3,
propane −2219.2 ± 0.5 kJ/mol (Pittam & Pilcher, J. Chem. Soc. Faraday Trans. 1 68 (1972)
2224, as listed in the NIST Chemistry WebBook) — all from memory. The gas-phase reactions
between the alkanes are derived from those values (so the network is consistent), and one
of them is then made wrong by 8 kJ/mol (16 of its standard uncertainties).
"""
from __future__ import annotations

import numpy as np
import pytest

from pipeline import network as nw
from pipeline.checks.reactions import cycle_closure, network_worst_offender
from pipeline.constants import T_REF
from tests.network.helpers import network_context, reactions

C, H2, O2, CO2, H2O = "C(cr,graphite)", "H2(g)", "O2(g)", "CO2(g)", "H2O(l)"
CH4, C2H6, C3H8 = "CH4(g)", "C2H6(g)", "C3H8(g)"
# ΔfH° implied by the combustion data [kJ/mol]
X = {CO2: -393.51, H2O: -285.83}
X[CH4] = X[CO2] + 2 * X[H2O] + 890.7
X[C2H6] = 2 * X[CO2] + 3 * X[H2O] + 1560.7
X[C3H8] = 3 * X[CO2] + 4 * X[H2O] + 2219.2


def _rows(bad_shift_kj: float = 0.0):
    def dh(st):
        return 1e3 * sum(n * X.get(k, 0.0) for k, n in st.items())

    derived = [
        ("g1", {C2H6: -1, H2: -1, CH4: 2}, 0.5),
        ("g2", {C3H8: -1, H2: -1, C2H6: 1, CH4: 1}, 0.5),
        ("g3", {C2H6: -2, C3H8: 1, CH4: 1}, 0.5),
        ("g4", {C: -1, H2: -2, CH4: 1}, 0.5),
    ]
    rows = [("c1", {C: -1, O2: -1, CO2: 1}, "drh", T_REF, -393.51e3, 0.13e3),
            ("c2", {H2: -1, O2: -0.5, H2O: 1}, "drh", T_REF, -285.83e3, 0.04e3),
            ("c3", {CH4: -1, O2: -2, CO2: 1, H2O: 2}, "drh", T_REF, -890.7e3, 0.4e3),
            ("c4", {C2H6: -1, O2: -3.5, CO2: 2, H2O: 3}, "drh", T_REF, -1560.7e3, 0.3e3),
            ("c5", {C3H8: -1, O2: -5, CO2: 3, H2O: 4}, "drh", T_REF, -2219.2e3, 0.5e3)]
    for rid, st, u in derived:
        rows.append((rid, st, "drh", T_REF, dh(st) + (bad_shift_kj * 1e3 if rid == "g2" else 0.0), u * 1e3))
    return rows


def test_worst_offender_names_exactly_the_bad_measurement():
    ctx = network_context(rx=reactions(_rows(bad_shift_kj=8.0)))
    f = network_worst_offender(ctx)
    warn = f[f["severity"] == "warning"]
    assert list(warn["subject"]) == ["g2"]
    assert warn["observed"].iloc[0] - warn["expected"].iloc[0] == pytest.approx(8.0e3, abs=0.3e3)
    assert "standardised residual" in warn["message"].iloc[0]
    rec = ctx.tables_out["reconciled"].set_index("species")
    # after setting g2 aside the reconciled values are the consistent ones
    for k in (CH4, C2H6, C3H8, CO2, H2O):
        assert rec.loc[k, "dfh_298_j_mol"] == pytest.approx(X[k] * 1e3, abs=1.0)


def test_clean_network_sets_nothing_aside():
    ctx = network_context(rx=reactions(_rows()))
    f = network_worst_offender(ctx)
    assert not (f["severity"] == "warning").any()
    assert cycle_closure(ctx).empty


def test_a_failing_cycle_contains_the_bad_measurement():
    ctx = network_context(rx=reactions(_rows(bad_shift_kj=8.0)))
    f = cycle_closure(ctx)
    assert len(f) >= 1
    assert set(f["severity"]) == {"error"}
    for subject in f["subject"]:
        assert subject.startswith("cycle:")
        assert "g2" in subject[len("cycle:"):].split("+")       # every failing cycle holds g2
    ids = subject[len("cycle:"):].split("+")
    assert ids == sorted(ids)
    assert all(abs(o) > t for o, t in zip(f["observed"], f["tolerance"]))


def test_iterative_path_names_the_same_measurement():
    """The large-network solver (forced) sets aside the same single measurement."""
    rows = _rows(bad_shift_kj=8.0)
    refs = {C, H2, O2}
    unknown = sorted({k for r in rows for k in r[1]} - refs)
    A = np.array([[r[1].get(k, 0.0) for k in unknown] for r in rows])
    v = np.array([r[4] for r in rows])
    u = np.array([r[5] for r in rows])
    none = np.full(len(unknown), np.nan)
    for dense_max in (400, 0):
        fit = nw.reconcile(A, v, u, none, none, dense_max=dense_max)
        assert [(e.kind, rows[e.index][0]) for e in fit.set_aside] == [("measurement", "g2")]
        e = fit.set_aside[0]
        assert abs(e.t_before) > 3 and abs(e.z_after) > 10


def test_single_cycle_names_the_members_it_cannot_separate():
    """Three measurements closing one cycle have equal standardised residuals: the one set
    aside says which others are equally suspect."""
    rows = [("a", {C: -1, O2: -1, CO2: 1}, "drh", T_REF, -393.51e3, 0.13e3),
            ("b", {"CO(g)": -1, O2: -0.5, CO2: 1}, "drh", T_REF, -283.0e3, 0.2e3),
            ("c", {C: -1, O2: -0.5, "CO(g)": 1}, "drh", T_REF, -100.0e3, 0.2e3)]   # 10.5 kJ/mol off
    ctx = network_context(rx=reactions(rows))
    f = network_worst_offender(ctx)
    warn = f[f["severity"] == "warning"]
    assert len(warn) == 1
    others = {"a", "b", "c"} - {warn["subject"].iloc[0]}
    assert "equally suspect" in warn["message"].iloc[0]
    assert all(o in warn["message"].iloc[0].split("apart): ")[1] for o in others)


_CYCLE = [("a", {C: -1, O2: -1, CO2: 1}, "drh", T_REF, -393.51e3, 0.13e3),
          ("b", {"CO(g)": -1, O2: -0.5, CO2: 1}, "drh", T_REF, -283.0e3, 0.2e3),
          ("c", {C: -1, O2: -0.5, "CO(g)": 1}, "drh", T_REF, -100.0e3, 0.2e3)]   # 10.5 kJ/mol off


@pytest.mark.parametrize("order", [(0, 1, 2), (2, 1, 0), (1, 2, 0), (2, 0, 1)])
def test_tied_data_are_set_aside_in_reaction_id_order(order):
    """The three members of one cycle have the same |t| (up to round-off): whatever the row
    order, the lowest reaction id is set aside and the other two are named."""
    rows = [_CYCLE[i] for i in order]
    f = network_worst_offender(network_context(rx=reactions(rows)))
    warn = f[f["severity"] == "warning"]
    assert list(warn["subject"]) == ["a"]
    assert warn["message"].iloc[0].endswith("apart): b, c")


@pytest.mark.parametrize("dense_max", [400, 0])
def test_tie_rank_decides_between_tied_measurements(dense_max):
    """Core fit (exact and iterative paths): of tied data, the lowest tie_rank goes first, and
    the others are listed as tied with it."""
    refs = {C, O2}
    unknown = sorted({k for r in _CYCLE for k in r[1]} - refs)
    A = np.array([[r[1].get(k, 0.0) for k in unknown] for r in _CYCLE])
    v = np.array([r[4] for r in _CYCLE])
    u = np.array([r[5] for r in _CYCLE])
    none = np.full(len(unknown), np.nan)
    for rank, first in (([0, 1, 2], 0), ([2, 0, 1], 1), ([1, 2, 0], 2)):
        fit = nw.reconcile(A, v, u, none, none, dense_max=dense_max, tie_rank=np.array(rank))
        assert [(e.kind, e.index) for e in fit.set_aside] == [("measurement", first)]
        assert [i for _, i in fit.set_aside[0].tied] == sorted({0, 1, 2} - {first}, key=rank.__getitem__)
