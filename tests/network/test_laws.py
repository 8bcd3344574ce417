"""Second- and third-law analysis of a log K(T) series.

Reaction N2O4(g) = 2 NO2(g) with ΔfH°, S° and Cp at 298.15 K from the Atkins & de Paula
*Physical Chemistry* data tables (from memory): NO2 33.18 kJ/mol, 240.06 J/(mol K),
37.20 J/(mol K); N2O4 9.16 kJ/mol, 304.29 J/(mol K), 77.28 J/(mol K). The series is
generated in closed form with constant heat capacities (Kirchhoff's law, written here,
not with the pipeline's evaluator):
    ΔrG°(T) = ΔrH° + ΔrCp (T − T°) − T [ΔrS° + ΔrCp ln(T/T°)],  log K = −ΔrG°/(RT ln 10),
plus a fixed pseudo-random scatter well inside the stated uncertainty.
"""
from __future__ import annotations

import numpy as np
import pytest

from pipeline.checks.reactions import law_disagreement, law_series, third_law_drift
from pipeline.constants import LN10, R, T_REF
from tests.network.helpers import const_cp, network_context, reactions

NO2 = (33.18e3, 240.06, 37.20)
N2O4 = (9.16e3, 304.29, 77.28)
ST = {"N2O4(g)": -1, "NO2(g)": 2}
D_H = 2 * NO2[0] - N2O4[0]
D_S = 2 * NO2[1] - N2O4[1]
D_CP = 2 * NO2[2] - N2O4[2]
T = np.arange(300.0, 701.0, 50.0)
U_LOGK = 0.005


def _log_k(t):
    dg = D_H + D_CP * (t - T_REF) - t * (D_S + D_CP * np.log(t / T_REF))
    return -dg / (R * t * LN10)


def _series(series_id="s1"):
    noise = 0.5 * U_LOGK * np.sin(np.arange(len(T)) * 2.3)      # fixed scatter, |noise| ≤ u/2
    return reactions([(f"k{i}", ST, "log_k", t, lk, U_LOGK, series_id)
                      for i, (t, lk) in enumerate(zip(T, _log_k(T) + noise))])


def _ctx(rx, n2o4_entropy_shift=0.0):
    species = [const_cp("NO2(g)", *NO2),
               const_cp("N2O4(g)", N2O4[0], N2O4[1] + n2o4_entropy_shift, N2O4[2])]
    return network_context(poly=species, rx=rx)


def test_consistent_series_second_and_third_law_agree():
    ctx = _ctx(_series())
    assert law_disagreement(ctx).empty
    assert third_law_drift(ctx).empty
    info, res = law_series(ctx)
    assert list(info["series_id"]) == ["s1"]
    # both laws recover the tables' ΔrH°(298.15) = 57.20 kJ/mol within their standard errors
    assert abs(res.dh_second_j_mol[0] - D_H) < 3 * res.se_second_j_mol[0]
    assert abs(res.dh_third_j_mol[0] - D_H) < 3 * res.se_third_j_mol[0]
    assert res.ds_second_j_mol_k[0] == pytest.approx(D_S, abs=1.0)
    assert abs(res.drift_j_mol_k[0]) < 3 * res.se_drift_j_mol_k[0]


def test_entropy_shifted_by_5_is_detected():
    """S(N2O4) + 5 J/(mol K) in the tables: ΔrS°(tables) − ΔrS°(data) = −5 J/(mol K), so the
    third-law values drift by −5 J/(mol K) and their mean falls by about 5 × T̄."""
    ctx = _ctx(_series(), n2o4_entropy_shift=5.0)
    drift = third_law_drift(ctx)
    assert list(drift["subject"]) == ["series:s1"]
    assert drift["severity"].iloc[0] == "warning"
    assert drift["observed"].iloc[0] == pytest.approx(-5.0, abs=0.3)
    dis = law_disagreement(ctx)
    assert list(dis["subject"]) == ["series:s1"]
    _, res = law_series(ctx)
    # second law does not use the absolute entropy: still 57.20 kJ/mol
    assert dis["observed"].iloc[0] == pytest.approx(D_H, abs=3 * res.se_second_j_mol[0])
    t_mean = np.average(T, weights=1 / T ** 2)      # the third-law weights are 1/(T u)²
    assert dis["expected"].iloc[0] == pytest.approx(D_H - 5.0 * t_mean, abs=100.0)


def test_series_without_a_series_column_groups_by_equation():
    rx = _series(series_id=None)
    ctx = _ctx(rx, n2o4_entropy_shift=5.0)
    f = third_law_drift(ctx)
    assert list(f["subject"]) == ["series:k0"]        # the id of the series' first row


def test_gibbs_energy_series_is_analysed_like_log_k():
    """ΔrG° rows are −R ln K = ΔrG°/T."""
    dg = -_log_k(T) * R * T * LN10
    rx = reactions([(f"g{i}", ST, "drg", t, v, U_LOGK * R * t * LN10, "gs") for i, (t, v) in enumerate(zip(T, dg))])
    assert third_law_drift(_ctx(rx)).empty
    f = third_law_drift(_ctx(rx, n2o4_entropy_shift=5.0))
    assert list(f["subject"]) == ["series:gs"]


def test_scatter_inflates_the_standard_errors():
    """Scatter 10× the stated uncertainty: the standard error grows with it (Birge ratio),
    so a real but small disagreement is not over-claimed; never smaller than stated."""
    noise = 10 * U_LOGK * np.sin(np.arange(len(T)) * 2.3)
    rx = reactions([(f"k{i}", ST, "log_k", t, lk, U_LOGK, "s") for i, (t, lk) in enumerate(zip(T, _log_k(T) + noise))])
    _, noisy = law_series(_ctx(rx))
    _, clean = law_series(_ctx(_series()))
    assert noisy.se_third_j_mol[0] > 3 * clean.se_third_j_mol[0]
    assert clean.se_third_j_mol[0] >= 1 / np.sqrt(np.sum(1 / (T * R * LN10 * U_LOGK) ** 2)) * (1 - 1e-12)
