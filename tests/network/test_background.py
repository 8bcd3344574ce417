"""The network fit started early in a worker process (``network.BackgroundFit``) gives the
fit a fit in this process gives, and is used only for exactly the inputs it was started
with. (Whether it saves time is measured in bench/, never here.)

The network is the synthetic one of bench/network_scale.py (physically balanced
reactions, planted gross errors); the combustion network is that of test_offender.py
(CODATA key values, from memory, see there).
"""
from __future__ import annotations

from dataclasses import fields

import numpy as np
import pandas as pd
import pytest

from pipeline import network as nw
from pipeline.checks import reactions as rc
from pipeline.constants import T_REF
from tests.network.helpers import const_cp, const_cp_table, network_bench, network_context, reactions
from tests.network.test_offender import C2H6, CH4, X, _rows

bench = network_bench()


@pytest.fixture(scope="module")
def net():
    return bench.make_network(300, n_bad=3, seed=11)


def _args(net, **change):
    a = dict(A=net["A"], v=net["value_j_mol"], u=net["u_j_mol"], p=net["prior_j_mol"], ps=net["prior_sd_j_mol"])
    a.update(change)
    return (a["A"], a["v"], a["u"], a["p"], a["ps"]), dict(dense_max=0, n_probes=64)


def _assert_same_fit(a: nw.NetworkFit, b: nw.NetworkFit) -> None:
    for f in fields(nw.NetworkFit):
        x, y = getattr(a, f.name), getattr(b, f.name)
        if isinstance(x, np.ndarray):
            np.testing.assert_array_equal(x, y, err_msg=f.name)
        elif f.name == "set_aside":
            assert [vars(e) for e in x] == [vars(e) for e in y]
        else:
            assert x == y, f.name


def test_worker_fit_is_the_fit_of_this_process(net):
    """Same function, inputs and seed in a spawned process: bit-identical results
    (iterative path, random probes and set-aside data included)."""
    args, kw = _args(net)
    bg = nw.BackgroundFit(args, kw)
    got = bg.result_for(args, kw)
    assert got is not None
    _assert_same_fit(got, nw.reconcile(*args, **kw))
    assert any(e.kind == "measurement" for e in got.set_aside)   # the planted errors were worked on


def test_other_inputs_get_no_result(net):
    """One changed prior (or option) is another fit: the worker's result is refused."""
    args, kw = _args(net)
    bg = nw.BackgroundFit(args, kw)
    p = net["prior_j_mol"].copy()
    i = int(np.flatnonzero(np.isfinite(p))[0])
    p[i] += 1.0
    other, _ = _args(net, p=p)
    assert bg.result_for(other, kw) is None
    bg = nw.BackgroundFit(args, kw)
    assert bg.result_for(args, dict(kw, n_probes=65)) is None


def test_fit_key_sees_every_input(net):
    args, kw = _args(net)
    base = nw._fit_key(args, kw)
    assert nw._fit_key(args, dict(kw)) == base
    A2 = net["A"].copy()
    A2.data[0] *= 2
    for changed in (_args(net, A=A2)[0], _args(net, u=net["u_j_mol"] * 1.001)[0]):
        assert nw._fit_key(changed, kw) != base
    assert nw._fit_key(args, dict(kw, z_max=3.5)) != base


def _combustion_context():
    """The combustion network with a bad g2, plus a stated ΔfH° of ethane in two sources
    (the priority source's slightly off), so that the prior depends on the preferred record."""
    tables = [const_cp_table(C2H6, X[C2H6] * 1e3 + 300.0, 400.0, 229.1, 52.5, source="tab-a"),
              const_cp_table(C2H6, X[C2H6] * 1e3, 300.0, 229.1, 52.5, source="tab-b")]
    ctx = network_context(poly=[const_cp(CH4, X[CH4] * 1e3, 186.3, 35.7)], tables=tables,
                          rx=reactions(_rows(bad_shift_kj=8.0)))
    ctx.sources = pd.DataFrame({"source_id": ["tab-a", "tab-b", "poly"], "priority": [10, 0, 0],
                                "kind": "evaluated"})
    return ctx


def _demoting(ctx, source: str) -> pd.DataFrame:
    """An unwaived error on ``source``'s ethane record (the preferred-record rule demotes it)."""
    rid = ctx.records.loc[ctx.records["source_id"].eq(source), "record_id"].iloc[0]
    return pd.DataFrame({"check_id": ["table.enthalpy-integral"], "severity": ["error"], "subject": [C2H6],
                         "subject_kind": ["species"], "source_id": [source], "record_id": [rid],
                         "waived": [False]})


@pytest.mark.parametrize("early_findings", ["same", "different"])
def test_check_findings_do_not_depend_on_the_early_start(early_findings, monkeypatch):
    """The network check gives the same findings and ``reconciled`` table with the fit
    started early (with the findings known then) as without; when the later findings
    change the preferred record, and so a prior, the early fit is not used."""
    final = _demoting(_combustion_context(), "tab-a")
    fitted_here = []

    def counted(*a, **k):
        fitted_here.append(1)
        return reconcile(*a, **k)

    reconcile = nw.reconcile

    def findings_and_table(start: bool):
        ctx = _combustion_context()
        if start:
            early = final if early_findings == "same" else None
            assert rc.start_network_fit(ctx, early, min_measurements=0)
        ctx.prior_findings = final
        fitted_here.clear()
        with monkeypatch.context() as m:
            m.setattr(nw, "reconcile", counted)     # this process only (the worker has its own)
            f = rc.network_worst_offender(ctx)
        assert len(fitted_here) == (0 if start and early_findings == "same" else 1)
        assert "fit" not in ctx.cached("reactions.network_background", dict)   # used or stopped
        return f, ctx.tables_out["reconciled"]

    f0, t0 = findings_and_table(False)
    f1, t1 = findings_and_table(True)
    pd.testing.assert_frame_equal(f0, f1)
    pd.testing.assert_frame_equal(t0, t1)
    assert list(f0.loc[f0["severity"] == "warning", "subject"]) == ["g2"]
    prior = t0.set_index("species").loc[C2H6, "prior_dfh_298_j_mol"]
    assert prior == pytest.approx(X[C2H6] * 1e3)      # tab-a demoted: tab-b's stated value


def test_small_networks_are_fitted_in_process():
    ctx = _combustion_context()
    assert not rc.start_network_fit(ctx, None)          # far below BACKGROUND_MIN_MEASUREMENTS
    assert "fit" not in ctx.cached("reactions.network_background", dict)


def test_measurement_rows_are_those_at_298_k():
    ctx = _combustion_context()
    rows = _rows() + [("hot", {CH4: -1, C2H6: 0.5}, "drh", 500.0, 1.0, 1.0)]
    ctx.reactions = reactions(rows)
    net = rc._network(ctx)
    assert "hot" not in set(net.meas["reaction_id"]) and len(net.meas) == len(rows) - 1
    assert net.A.shape == (len(rows) - 1, len(net.unknown))
    assert all(abs(t - T_REF) < 0.5 for t in net.meas["t_k"])
