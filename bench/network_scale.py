"""Benchmark: reconcile a synthetic, physically consistent network of 1e5 species.

The network: species CₐHᵦO꜀N_d with random compositions and "true" ΔfH°(298.15); each
reaction links 2–3 random species, balanced in every element with the reference
elements C(cr,graphite), H2(g), O2(g), N2(g) (whose ΔfH° is 0), so random reactions
form very many cycles. Measured ΔrH° = Σ ν ΔfH°(true) + Gaussian noise of the stated
uncertainty; a fraction of species carry a stated ΔfH° (prior) with its uncertainty; a
few measurements get gross errors. Usage::

    python bench/network_scale.py --n 100000            # the core fit (pipeline.network)
    python bench/network_scale.py --n 100000 --check    # also the network.worst-offender check

Reports wall and CPU time, χ²/dof, the data set aside (and whether they are the planted gross
errors), and how often |x̂ − x_true| ≤ 2 u(x̂) (about 95 % if the uncertainties are right).
"""
from __future__ import annotations

import argparse
import json
import time

import numpy as np
import scipy.sparse as sp

ELEMENTS = ("C", "H", "O", "N")
#: reference species of each element and its atoms per formula unit
REFERENCES = {"C": ("C(cr,graphite)", 1), "H": ("H2(g)", 2), "O": ("O2(g)", 2), "N": ("N2(g)", 2)}


def make_network(n_species: int, *, reactions_per_species: float = 2.0, prior_fraction: float = 0.6,
                 n_bad: int = 0, seed: int = 0) -> dict:
    """A consistent random network (see the module docstring).

    Returns a dict: ``species`` (keys), ``A`` (m × n csr, unknown species only), ``value_j_mol``,
    ``u_j_mol``, ``prior_j_mol``/``prior_sd_j_mol`` (NaN = none), ``truth_j_mol``, ``bad`` (indices
    of the gross errors), ``stoich`` (list of {species: ν} including the reference elements).
    """
    rng = np.random.default_rng(seed)
    n = int(n_species)
    comp = np.column_stack([rng.integers(1, 13, n), rng.integers(0, 27, n), rng.integers(0, 7, n),
                            rng.integers(0, 5, n)])
    keys = [f"C{c}H{h}O{o}N{nn}(g,s{i})".replace("H0", "").replace("O0", "").replace("N0", "")
            for i, (c, h, o, nn) in enumerate(comp)]
    truth = rng.normal(-100e3, 150e3, n)
    m = int(reactions_per_species * n)
    k = rng.choice([2, 3], size=m, p=[0.6, 0.4])
    picks = rng.integers(0, n, size=(m, 3))
    nu = rng.choice([-2.0, -1.0, 1.0, 1.0, 2.0], size=(m, 3))
    nu[:, 0] = np.abs(nu[:, 0])          # at least one product …
    nu[:, 1] = -np.abs(nu[:, 1])         # … and one reactant
    nu[k == 2, 2] = 0.0
    same = (picks[:, 0] == picks[:, 1]) | ((k == 3) & ((picks[:, 2] == picks[:, 0]) | (picks[:, 2] == picks[:, 1])))
    picks[same] = (picks[same] + np.arange(1, 4)) % n        # distinct species in a reaction
    rows = np.repeat(np.arange(m), 3)
    cols = picks.ravel()
    vals = nu.ravel()
    keep = vals != 0
    A = sp.csr_matrix((vals[keep], (rows[keep], cols[keep])), shape=(m, n))
    A.sum_duplicates()
    u = rng.uniform(300.0, 3000.0, m)
    value = A @ truth + rng.normal(0.0, 1.0, m) * u
    bad = np.sort(rng.choice(m, size=n_bad, replace=False)) if n_bad else np.zeros(0, int)
    value[bad] += rng.choice([-1.0, 1.0], n_bad) * rng.uniform(15.0, 40.0, n_bad) * u[bad]
    has = rng.random(n) < prior_fraction
    psd = np.where(has, rng.uniform(2e3, 10e3, n), np.nan)
    prior = np.where(has, truth + rng.normal(0.0, 1.0, n) * np.nan_to_num(psd), np.nan)
    # element balance with the reference elements: Σ ν_j n_j,e + ν_ref,e · atoms_e = 0
    el = A @ comp.astype(float)                                     # (m, 4)
    atoms = np.array([REFERENCES[e][1] for e in ELEMENTS], float)
    nu_ref = -el / atoms
    stoich = None
    if n <= 20000:  # the dict form is only for frames in tests and small runs
        Acoo = A.tocoo()
        stoich = [dict() for _ in range(m)]
        for r, c, x in zip(Acoo.row, Acoo.col, Acoo.data):
            stoich[r][keys[c]] = float(x)
        for j, e in enumerate(ELEMENTS):
            for r in np.flatnonzero(nu_ref[:, j]):
                stoich[r][REFERENCES[e][0]] = float(nu_ref[r, j])
    return dict(species=keys, A=A, value_j_mol=value, u_j_mol=u, prior_j_mol=prior, prior_sd_j_mol=psd,
                truth_j_mol=truth, bad=bad, stoich=stoich, composition=comp)


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--n", type=int, default=100_000, help="number of species")
    ap.add_argument("--bad", type=int, default=10, help="planted gross errors")
    ap.add_argument("--seed", type=int, default=0)
    ap.add_argument("--check", action="store_true", help="also run the network.worst-offender check")
    args = ap.parse_args()

    from pipeline.network import reconcile

    t0 = time.perf_counter()
    net = make_network(args.n, n_bad=args.bad, seed=args.seed)
    t1, c1 = time.perf_counter(), time.process_time()
    fit = reconcile(net["A"], net["value_j_mol"], net["u_j_mol"], net["prior_j_mol"], net["prior_sd_j_mol"])
    t2, c2 = time.perf_counter(), time.process_time()
    m, n = net["A"].shape
    det = fit.determined
    zt = (fit.x_j_mol - net["truth_j_mol"])[det] / fit.sd_j_mol[det]
    removed = sorted(e.index for e in fit.set_aside if e.kind == "measurement")
    big = max(fit.chi2, key=lambda c: fit.dof[c])
    print(f"species {n}, measurements {m}, priors {int(np.isfinite(net['prior_j_mol']).sum())}, "
          f"components {len(fit.chi2)} (largest solved {fit.method[big]})")
    print(f"generate {t1 - t0:.1f} s; reconcile {t2 - t1:.1f} s (CPU {c2 - c1:.1f} s: compare CPU times on a "
          f"shared machine)")
    print(f"largest component: chi2 {fit.chi2[big]:.0f}, dof {fit.dof[big]}, reduced {fit.chi2[big] / fit.dof[big]:.3f}")
    print(f"determined {int(det.sum())}/{n}; |x - truth| <= 2u for {np.mean(np.abs(zt) <= 2):.3f} of them")
    print(f"set aside {len(removed)}: planted {sorted(net['bad'].tolist())} -> found "
          f"{len(set(removed) & set(net['bad'].tolist()))}, other {len(set(removed) - set(net['bad'].tolist()))}")
    if args.check:
        from pipeline.checks.context import CheckContext
        from pipeline.checks.reactions import network_worst_offender
        from pipeline.ingest import base as ib
        import pandas as pd

        if net["stoich"] is None:
            raise SystemExit("--check builds the reactions frame: use --n 20000 or fewer")
        rx = pd.DataFrame({"reaction_id": [f"r{i}" for i in range(m)], "source_id": "bench", "file": "bench.csv",
                           "line": np.arange(m) + 2, "equation": "", "stoich_json": [json.dumps(s) for s in net["stoich"]],
                           "quantity": "drh", "t_k": 298.15, "value": net["value_j_mol"],
                           "uncertainty": net["u_j_mol"], "unit": "J/mol", "series": None, "method": "synthetic"})
        species = pd.DataFrame({"species": net["species"] + [v[0] for v in REFERENCES.values()],
                                "reference_element": [False] * n + [True] * 4,
                                "charge": 0, "elements_json": [json.dumps(dict(zip(ELEMENTS, map(int, c))))
                                                               for c in net["composition"]]
                                + [json.dumps({e: v[1]}) for e, v in REFERENCES.items()]})
        ctx = CheckContext(species=species, records=ib.empty(ib.RECORD_COLUMNS + ("species",)),
                           segments=ib.empty(ib.SEGMENT_COLUMNS), table_points=ib.empty(ib.TABLE_POINT_COLUMNS),
                           reactions=rx[list(ib.REACTION_COLUMNS)])
        t3 = time.perf_counter()
        f = network_worst_offender(ctx)
        print(f"network.worst-offender check (no priors: no table records) {time.perf_counter() - t3:.1f} s, "
              f"{len(f)} findings")


if __name__ == "__main__":
    main()
