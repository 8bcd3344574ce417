"""A synthetic, physically consistent thermochemical database of N species, for benchmarks.

    python bench/generate.py --n 10000 --out /tmp/bench10k      # writes /tmp/bench10k/raw, waivers.toml

What it writes (inputs.md formats, through the project's own writers: ``export.nasa7_text``,
``export.nasa9_text``; CSV through pandas):

* ``raw/sources.toml`` and about a dozen sources: NASA-7 files (45 % of the species), NASA-9
  files (40 %, one of them at 1 atm so the standard-state conversion runs), ``table-csv``
  files (15 %, gases on a 298.15–2000 K grid with Cp, S, H − H298, gef, ΔfH, ΔfG, log Kf),
  a ``species-csv`` register of the reference elements, and ``reactions-csv`` files with
  3 N reaction enthalpies at 298.15 K (random sparse combinations of 2–3 species closed
  with the reference elements, so they form very many Hess cycles) plus log K series.
* ``waivers.toml`` beside ``raw/`` (one valid, one expired, one stale waiver).
* ``planted.json``: every planted defect with the check id and subject it must raise.

The physics of the clean species (the "truth" every file is written from):

* Gases: Cp/R = c0 + m·g(T), with c0 = 5/2 (atoms), 7/2 (diatomics) or 4 (polyatomics,
  translation + rotation), m = 3n − 5 or 3n − 6 vibrational modes, and g a mixture of
  Einstein functions x² eˣ/(eˣ − 1)², x = Θ/T (Einstein, Ann. Phys. 22 (1907) 180),
  represented by two quartics in T (100–1000 K, 1000–9000 K) fitted once per Einstein
  temperature with value, slope and curvature continuous at 1000 K. Species are linear
  combinations of these templates, so every record is exactly C² at its joint; H and S are continuous
  (b1, b2 chosen at the joint), H(298.15) = ΔfH° and S(298.15) is at least the
  Sackur–Tetrode translational entropy plus an internal part that keeps S above it down to
  200 K. Stated ranges are 200–1000–6000 K; the fitted range 100–9000 K covers the
  extrapolation check's window.
* Reference elements C(cr,graphite) (an Einstein solid), H2, O2, N2, F2, Cl2 (diatomics),
  ΔfH° = 0; tables' formation values are H − Σ ν H_ref and S − Σ ν S_ref of these.
* Reactions: ΔrH°(298.15) = Σ ν ΔfH° + noise N(0, u/3) clipped to ±u, u = 0.5–4 kJ/mol.
* Low-temperature crystal tables (from 0 K or 10 K) from the Debye model of
  ``scripts/demo_physics.Crystal``.

Compositions CcHhNnOo(Cl|F)x are distinct, with h ≤ 2c + n + 2 − x (valence saturation), so
every species key is its formula plus the state: no accidental isomers.
"""
from __future__ import annotations

import argparse
import json
import math
import shutil
import sys
from dataclasses import dataclass
from pathlib import Path

import numpy as np
import pandas as pd
import periodictable

ROOT = Path(__file__).resolve().parents[1]
if str(ROOT) not in sys.path:
    sys.path.insert(0, str(ROOT))

from pipeline.constants import LN10, R, T_REF  # noqa: E402
from pipeline.export import nasa7_text, nasa9_text  # noqa: E402
from pipeline.physics import sackur_tetrode_entropy  # noqa: E402
from pipeline.thermo import COEF_COLUMNS, evaluate  # noqa: E402

ELEMENTS = ("C", "H", "N", "O", "Cl", "F")
MASS = np.array([periodictable.elements.symbol(e).mass for e in ELEMENTS])
#: reference species of each element: (key, nasa7 name, atoms per formula unit)
REFS = {"C": ("C(cr,graphite)", "C(graphite)", 1), "H": ("H2(g)", "H2", 2), "N": ("N2(g)", "N2", 2),
        "O": ("O2(g)", "O2", 2), "Cl": ("Cl2(g)", "Cl2", 2), "F": ("F2(g)", "F2", 2)}
T_LOW, T_MID, T_HIGH = 200.0, 1000.0, 6000.0
#: table grid [K]: 298.15 K, then every 100 K from 300 K to 2000 K
TABLE_GRID = np.concatenate([[T_REF], np.arange(300.0, 2001.0, 100.0)])
THETAS_LOW = (300.0, 500.0, 800.0)
THETAS_HIGH = (1400.0, 1600.0, 1800.0)
SHARES = {"nasa7": 0.45, "nasa9": 0.40, "table": 0.15}
DUPLICATE_SHARE = 0.03          # NASA-7 species also given as a table by another source


# ----------------------------------------------------------------------------- templates

def einstein_cv_r(theta_k: float, t_k: np.ndarray) -> np.ndarray:
    """Einstein heat capacity of one mode, Cv/R = x² eˣ/(eˣ − 1)², x = Θ/T [1]."""
    x = theta_k / np.asarray(t_k, float)
    with np.errstate(over="ignore"):
        ex = np.exp(-x)
        return x * x * ex / (1.0 - ex) ** 2


def fit_template(theta_k: float) -> np.ndarray:
    """Two quartics (100–1000 K, 1000–9000 K) of the Einstein function, value, slope and
    curvature continuous at 1000 K (equality-constrained least squares, relative weights).
    Continuous curvature matters for the tables written from these polynomials: a cubic
    spline through a 100 K grid integrates a C² function to well within the table checks'
    tolerances, a function with a curvature jump at the joint not always.

    Returns (2, 5): coefficients of T⁰…T⁴ of the lower and upper quartic."""
    tl, th = np.geomspace(100.0, T_MID, 200), np.geomspace(T_MID, 9000.0, 200)
    gl, gh = einstein_cv_r(theta_k, tl), einstein_cv_r(theta_k, th)

    def basis(t):
        return np.stack([(t / 1000.0) ** k for k in range(5)], -1)

    wl, wh = 1 / np.maximum(gl, 0.03), 1 / np.maximum(gh, 0.03)
    a = np.zeros((400, 10))
    a[:200, :5] = basis(tl) * wl[:, None]
    a[200:, 5:] = basis(th) * wh[:, None]
    b = np.r_[gl * wl, gh * wh]
    c = np.zeros((3, 10))                       # value, slope, curvature equal at τ = 1
    c[0, :5], c[0, 5:] = 1.0, -1.0
    c[1, :5], c[1, 5:] = np.arange(5), -np.arange(5)
    d2 = np.array([0.0, 0.0, 2.0, 6.0, 12.0])
    c[2, :5], c[2, 5:] = d2, -d2
    k = np.block([[a.T @ a, c.T], [c, np.zeros((3, 3))]])
    sol = np.linalg.solve(k, np.r_[a.T @ b, 0.0, 0.0, 0.0])[:10]
    scale = 1000.0 ** -np.arange(5)
    return np.stack([sol[:5] * scale, sol[5:] * scale])


_TEMPLATES: dict[float, np.ndarray] = {}


def template(theta_k: float) -> np.ndarray:
    if theta_k not in _TEMPLATES:
        _TEMPLATES[theta_k] = fit_template(theta_k)
    return _TEMPLATES[theta_k]


# -------------------------------------------------------------------------- compositions

def composition_pool(need: int, rng: np.random.Generator) -> np.ndarray:
    """``need`` distinct compositions (counts of ``ELEMENTS``), random, at least 2 atoms."""
    rows = []
    c_max = 8
    while True:
        c = np.arange(1, c_max + 1)
        n = np.arange(0, 5)
        o = np.arange(0, 7)
        x = np.arange(0, 4)
        cc, nn, oo, xx = (a.ravel() for a in np.meshgrid(c, n, o, x, indexing="ij"))
        hmax = 2 * cc + nn + 2 - xx
        reps = np.maximum(hmax + 1, 0)
        base = np.repeat(np.stack([cc, nn, oo, xx], 1), reps, axis=0)
        h = np.concatenate([np.arange(r) for r in reps])
        # each (c, h, n, o, x) once with Cl and once with F when x > 0
        comp = np.zeros((len(h), 6), int)
        comp[:, 0], comp[:, 1], comp[:, 2], comp[:, 3] = base[:, 0], h, base[:, 1], base[:, 2]
        comp_f = comp.copy()
        comp[:, 4] = base[:, 3]
        comp_f[:, 5] = base[:, 3]
        pool = np.concatenate([comp, comp_f[base[:, 3] > 0]])
        pool = pool[pool.sum(1) >= 2]
        if len(pool) >= need or c_max >= 200:
            break
        c_max *= 2
    idx = rng.choice(len(pool), size=need, replace=False)
    rows = pool[idx]
    return rows


def formula_text(counts: np.ndarray) -> list[str]:
    """Hill-order formula (C, H, then alphabetical: Cl, F, N, O) of each composition row."""
    order = [0, 1, 4, 5, 2, 3]
    out = []
    for row in counts.tolist():
        s = []
        for j in order:
            k = row[j]
            if k:
                s.append(ELEMENTS[j] + (str(k) if k != 1 else ""))
        out.append("".join(s))
    return out


def element_list(row) -> list[tuple[str, float]]:
    return [(ELEMENTS[j], float(k)) for j, k in enumerate(row) if k]


# ------------------------------------------------------------------------------ species

@dataclass
class Species:
    """Arrays describing many species (one row each)."""

    key: list
    name: list
    counts: np.ndarray       # (n, 6)
    state: np.ndarray        # 'g' | 'cr' | 'l'
    lower: np.ndarray        # (n, 9) canonical coefficients, 200–1000 K
    upper: np.ndarray        # (n, 9) 1000–6000 K
    t_high: np.ndarray       # (n,) stated upper bound [K]

    @property
    def molar_mass(self) -> np.ndarray:
        return self.counts @ MASS

    @property
    def h298(self) -> np.ndarray:
        return evaluate(self.lower, T_REF).h


def cp_coefficients(c0: np.ndarray, m: np.ndarray, rng: np.random.Generator) -> tuple[np.ndarray, np.ndarray]:
    """Canonical a3…a7 of the two ranges for Cp/R = c0 + m·g, g a random template mixture."""
    n = len(c0)
    lo_t = rng.integers(0, len(THETAS_LOW), n)
    hi_t = rng.integers(0, len(THETAS_HIGH), n)
    w = rng.uniform(0.35, 0.8, n)
    tl = np.stack([template(t) for t in THETAS_LOW])      # (3, 2, 5)
    th = np.stack([template(t) for t in THETAS_HIGH])
    g = w[:, None, None] * tl[lo_t] + (1 - w)[:, None, None] * th[hi_t]   # (n, 2, 5)
    coef = m[:, None, None] * g
    coef[:, :, 0] += c0[:, None]
    lower, upper = np.zeros((n, 9)), np.zeros((n, 9))
    lower[:, 2:7], upper[:, 2:7] = coef[:, 0], coef[:, 1]
    return lower, upper


def set_constants(lower: np.ndarray, upper: np.ndarray, h298: np.ndarray, s298: np.ndarray,
                  t_joint: float = T_MID) -> None:
    """b1, b2 so that H(298.15) = h298, S(298.15) = s298, and H, S continuous at the joint (in place)."""
    lower[:, 7:9] = 0.0
    p = evaluate(lower, T_REF)
    lower[:, 7] = (h298 - p.h) / R
    lower[:, 8] = (s298 - p.s) / R
    upper[:, 7:9] = 0.0
    a, b = evaluate(lower, t_joint), evaluate(upper, t_joint)
    upper[:, 7] = (a.h - b.h) / R
    upper[:, 8] = (a.s - b.s) / R


def entropy_298(lower: np.ndarray, molar_mass: np.ndarray, n_atoms: np.ndarray,
                rng: np.random.Generator) -> np.ndarray:
    """S(298.15) [J/(mol*K)]: Sackur–Tetrode + an internal part that keeps S above the
    translational entropy from 200 K up (S − S_tr rises wherever Cp ≥ 5/2 R)."""
    st298 = sackur_tetrode_entropy(T_REF, molar_mass)
    st200 = sackur_tetrode_entropy(T_LOW, molar_mass)
    drop = evaluate(lower, T_REF).s - evaluate(lower, T_LOW).s      # S(298) − S(200), b2 = 0 cancels
    need = np.maximum(0.0, drop - (st298 - st200))
    internal = np.where(n_atoms <= 1, R * np.log(rng.integers(1, 6, len(n_atoms))),
                        rng.uniform(10.0, 25.0, len(n_atoms)) + 3.0 * n_atoms)
    return st298 + need + internal + np.where(n_atoms <= 1, 0.0, 1.0)


def gases(counts: np.ndarray, rng: np.random.Generator, dfh: np.ndarray | None = None) -> Species:
    """Clean gas species of the given compositions (see module doc)."""
    n_at = counts.sum(1).astype(float)
    c0 = np.where(n_at <= 1, 2.5, np.where(n_at == 2, 3.5, 4.0))
    m = np.where(n_at <= 1, 0.0, np.where(n_at == 2, 1.0, 3 * n_at - 6))
    lower, upper = cp_coefficients(c0, m, rng)
    mm = counts @ MASS
    if dfh is None:
        dfh = np.round(rng.normal(-80e3, 150e3, len(counts)), 1)
    s298 = entropy_298(lower, mm, n_at, rng)
    set_constants(lower, upper, dfh, s298)
    names = formula_text(counts)
    return Species(key=[f"{f}(g)" for f in names], name=names, counts=counts, state=np.full(len(counts), "g"),
                   lower=lower, upper=upper, t_high=np.full(len(counts), T_HIGH))


def einstein_solid(counts: np.ndarray, names: list[str], keys: list[str], dfh: np.ndarray, s298: np.ndarray,
                   rng: np.random.Generator, state: str = "cr", extra_cp_r: float = 0.0) -> Species:
    """Condensed species: Cp/R = 3n·g(T) (+ a constant for a liquid), H298 and S298 given."""
    n_at = counts.sum(1).astype(float)
    lower, upper = cp_coefficients(np.full(len(counts), extra_cp_r), 3 * n_at, rng)
    set_constants(lower, upper, dfh, s298)
    return Species(key=list(keys), name=list(names), counts=counts, state=np.full(len(counts), state),
                   lower=lower, upper=upper, t_high=np.full(len(counts), T_HIGH))


def references(rng: np.random.Generator) -> Species:
    """Reference elements: graphite (Einstein solid) and the diatomic gases, ΔfH° = 0."""
    els = ["H", "N", "O", "Cl", "F"]
    counts = np.zeros((len(els), 6), int)
    for i, el in enumerate(els):
        counts[i, ELEMENTS.index(el)] = 2
    g = gases(counts, rng, dfh=np.zeros(len(els)))
    g.key = [REFS[e][0] for e in els]
    g.name = [REFS[e][1] for e in els]
    gr_counts = np.zeros((1, 6), int)
    gr_counts[0, 0] = 1
    gr = einstein_solid(gr_counts, ["C(graphite)"], ["C(cr,graphite)"], np.zeros(1), np.array([5.74]), rng)
    gr.t_high[:] = 5000.0
    return concat([gr, g])


def concat(parts: list[Species]) -> Species:
    return Species(key=sum((p.key for p in parts), []), name=sum((p.name for p in parts), []),
                   counts=np.concatenate([p.counts for p in parts]),
                   state=np.concatenate([p.state for p in parts]),
                   lower=np.concatenate([p.lower for p in parts]), upper=np.concatenate([p.upper for p in parts]),
                   t_high=np.concatenate([p.t_high for p in parts]))


def take(sp: Species, idx) -> Species:
    idx = np.asarray(idx, int)
    return Species(key=[sp.key[i] for i in idx], name=[sp.name[i] for i in idx], counts=sp.counts[idx],
                   state=sp.state[idx], lower=sp.lower[idx].copy(), upper=sp.upper[idx].copy(),
                   t_high=sp.t_high[idx].copy())


# ------------------------------------------------------------------------------ writers

def _nasa7_coef(c: np.ndarray) -> np.ndarray:
    return np.r_[c[2:7], c[7:9]]


def nasa7_file(sp: Species, date: str = "BENCH") -> str:
    phase = {"g": "G", "cr": "S", "l": "L"}
    out = ["THERMO", f"{T_LOW:10.3f}{T_MID:10.3f}{T_HIGH:10.3f}"]
    for i in range(len(sp.key)):
        out.append(nasa7_text(sp.name[i], date, element_list(sp.counts[i]), phase[sp.state[i]],
                              T_LOW, T_MID, float(sp.t_high[i]), _nasa7_coef(sp.lower[i]),
                              _nasa7_coef(sp.upper[i])))
    out.append("END")
    return "\n".join(out) + "\n"


def nasa9_file(sp: Species, *, stated_dfh: np.ndarray | None = None, b2_shift: float = 0.0,
               molar_mass: np.ndarray | None = None) -> str:
    """NASA-9 records; ``b2_shift`` (ln of a pressure ratio) is subtracted from the gases' b2
    for a source whose standard state is not the database's (the reader's conversion adds it back)."""
    h298 = sp.h298 if stated_dfh is None else stated_dfh
    mm = sp.molar_mass if molar_mass is None else molar_mass
    out = ["thermo", f"{T_LOW:10.3f}{T_MID:10.3f}{T_HIGH:10.3f}{20000.0:10.3f}   1/01/26"]
    for i in range(len(sp.key)):
        segs = np.stack([sp.lower[i], sp.upper[i]])
        if sp.state[i] == "g":
            segs[:, 8] -= b2_shift
        flag = 0 if sp.state[i] == "g" else 1
        out.append(nasa9_text(sp.name[i], "synthetic benchmark record", "BENCH", element_list(sp.counts[i]),
                              flag, float(mm[i]), float(h298[i]), segs,
                              np.array([T_LOW, T_MID]), np.array([T_MID, float(sp.t_high[i])])))
    out.append("END PRODUCTS")
    return "\n".join(out) + "\n"


TABLE_COLUMNS = ["species", "t [K]", "cp [J/(mol*K)]", "s [J/(mol*K)]", "h_minus_href [J/mol]",
                 "gef [J/(mol*K)]", "dfh [J/mol]", "dfg [J/mol]", "log_kf"]


def table_frame(sp: Species, refs: Species, grid: np.ndarray = TABLE_GRID) -> pd.DataFrame:
    """Tabulated functions of ``sp`` (gases) on ``grid``, formation values from ``refs``."""
    n, m = len(sp.key), len(grid)
    t = np.broadcast_to(grid, (n, m))
    coef = np.where((t <= T_MID)[..., None], sp.lower[:, None, :], sp.upper[:, None, :])
    p = evaluate(coef, t)
    h298 = sp.h298[:, None]
    hmh = p.h - h298
    gef = p.s - hmh / t
    # formation from the reference elements: Σ ν_el H_ref,el(T), Σ ν_el S_ref,el(T)
    ref_index = {k: i for i, k in enumerate(refs.key)}
    nu = np.zeros((n, len(refs.key)))
    for j, el in enumerate(ELEMENTS):
        key, _, atoms = REFS[el]
        nu[:, ref_index[key]] = sp.counts[:, j] / atoms
    rc = np.where((grid <= T_MID)[None, :, None], refs.lower[:, None, :], refs.upper[:, None, :])
    rp = evaluate(rc, np.broadcast_to(grid, (len(refs.key), m)))
    dfh = p.h - nu @ rp.h
    dfs = p.s - nu @ rp.s
    dfg = dfh - t * dfs
    log_kf = -dfg / (R * t * LN10)
    return pd.DataFrame({
        "species": np.repeat(np.asarray(sp.key, object), m), "t [K]": t.ravel(),
        "cp [J/(mol*K)]": p.cp.ravel(), "s [J/(mol*K)]": p.s.ravel(),
        "h_minus_href [J/mol]": hmh.ravel(), "gef [J/(mol*K)]": gef.ravel(), "dfh [J/mol]": dfh.ravel(),
        "dfg [J/mol]": dfg.ravel(), "log_kf": log_kf.ravel()})


def write_csv(df: pd.DataFrame, path: Path) -> None:
    df.to_csv(path, index=False, float_format="%.10g", lineterminator="\n")


def crystal_table(key: str, n_debye: float, theta: float, t_grid: np.ndarray, s_offset: float = 0.0) -> pd.DataFrame:
    """A low-temperature calorimetric table from the Debye model of ``scripts/demo_physics``."""
    sys.path.insert(0, str(ROOT / "scripts"))
    from demo_physics import Crystal

    cr = Crystal(key=key, n_debye=n_debye, theta_debye_k=theta, t_max_k=1000.0)
    t = np.asarray(t_grid, float)
    cp = cr.cp(t)
    s = cr.s(t) + s_offset
    h0 = cr.h_minus_h0(t)
    h298 = float(cr.h_minus_h0(T_REF))
    return pd.DataFrame({"species": key, "t [K]": t, "cp [J/(mol*K)]": cp, "s [J/(mol*K)]": s,
                         "h_minus_href [J/mol]": h0 - h298})


# ------------------------------------------------------------------------------ reactions

def random_reactions(sp: Species, refs: Species, n_rx: int, rng: np.random.Generator,
                     start: int = 0) -> pd.DataFrame:
    """``n_rx`` ΔrH°(298.15) measurements: 2–3 random species, closed with reference elements."""
    n = len(sp.key)
    k = rng.choice([2, 3], size=n_rx, p=[0.7, 0.3])
    picks = rng.integers(0, n, size=(n_rx, 3))
    for _ in range(10):   # distinct species in a reaction
        same = (picks[:, 1] == picks[:, 0]) | ((k == 3) & ((picks[:, 2] == picks[:, 0]) | (picks[:, 2] == picks[:, 1])))
        if not same.any():
            break
        picks[same] = rng.integers(0, n, size=(int(same.sum()), 3))
    nu = rng.choice([1.0, 1.0, 1.0, 2.0], size=(n_rx, 3))
    nu[:, 1] *= -1
    nu[:, 2] *= rng.choice([-1.0, 1.0], size=n_rx)
    nu[k == 2, 2] = 0.0
    net = sum(nu[:, j, None] * sp.counts[picks[:, j]] for j in range(3))    # products − reactants
    atoms = np.array([REFS[e][2] for e in ELEMENTS], float)
    nu_ref = -net / atoms                                                     # (n_rx, 6)
    h = sp.h298
    value = (nu * h[picks]).sum(1)
    u = np.round(rng.uniform(0.5, 4.0, n_rx), 3) * 1e3
    noise = np.clip(rng.normal(0.0, u / 3), -u, u)
    keys = np.asarray(sp.key, object)
    ref_keys = [REFS[e][0] for e in ELEMENTS]
    eqs = []
    for r in range(n_rx):
        lhs, rhs = [], []
        for j in range(k[r]):
            v = nu[r, j]
            (rhs if v > 0 else lhs).append(_term(abs(v), keys[picks[r, j]]))
        for j in range(6):
            v = nu_ref[r, j]
            if v:
                (rhs if v > 0 else lhs).append(_term(abs(v), ref_keys[j]))
        eqs.append(" + ".join(lhs) + " = " + " + ".join(rhs))
    return pd.DataFrame({"id": [f"r{start + i}" for i in range(n_rx)], "equation": eqs, "quantity": "drh",
                         "t_k": T_REF, "value": np.round((value + noise) / 1e3, 4), "unit": "kJ/mol",
                         "series": "", "uncertainty": u / 1e3, "method": "synthetic calorimetry"})


def _term(v: float, key: str) -> str:
    c = f"{v:g}"
    return key if c == "1" else f"{c} {key}"


def species_g(sp: Species, t: np.ndarray) -> np.ndarray:
    """G [J/mol] of every species at temperatures ``t`` (n, m)."""
    coef = np.where((t <= T_MID)[..., None], sp.lower[:, None, :], sp.upper[:, None, :])
    return evaluate(coef, t).g


# ------------------------------------------------------------------------------ generate

def perturb(sp: Species, i: int, *, lower_quartic: float = 0.0, upper_quartic: float = 0.0,
            upper_linear: float = 0.0, upper_b1: float = 0.0, keep: bool = True) -> None:
    """Change record ``i``: Cp/R += lower_quartic (1000 − T)⁴ below the joint, += upper_quartic
    (T − 1000)⁴ and upper_linear (T − 1000) above it (all vanish at 1000 K, so Cp stays
    continuous); then H and S are re-joined (``keep``); finally b1 of the upper range += upper_b1."""
    h298, s298 = evaluate(sp.lower[i], T_REF).h, evaluate(sp.lower[i], T_REF).s
    q = np.array([1e12, -4e9, 6e6, -4000.0, 1.0])            # (T − 1000)⁴ in powers T⁰…T⁴
    sp.lower[i, 2:7] += lower_quartic * q
    sp.upper[i, 2:7] += upper_quartic * q
    sp.upper[i, 2] += -1000.0 * upper_linear
    sp.upper[i, 3] += upper_linear
    if keep:
        lo, up = sp.lower[i:i + 1], sp.upper[i:i + 1]
        set_constants(lo, up, np.array([h298]), np.array([s298]))
    sp.upper[i, 7] += upper_b1


def generate(out: Path, n: int, seed: int = 0, reactions_per_species: float = 3.0) -> dict:
    """Write the database of ``n`` species under ``out`` (``out/raw``, ``out/waivers.toml``,
    ``out/planted.json``). Returns the planted-defect list."""
    rng = np.random.default_rng(seed)
    out = Path(out)
    raw = out / "raw"
    if raw.exists():
        shutil.rmtree(raw)
    raw.mkdir(parents=True)
    refs = references(rng)
    n_special = 40
    pool = composition_pool(n + n_special, rng)
    main = gases(pool[:n], rng)
    spare = pool[n:]
    spare_i = iter(range(len(spare)))

    def fresh(k=1) -> np.ndarray:
        return spare[[next(spare_i) for _ in range(k)]]

    planted: list[dict] = []

    def plant(check_id: str, subject: str, what: str, severity: str | None = None) -> None:
        planted.append(dict(check_id=check_id, subject=subject, what=what, severity=severity))

    # formats of the main species
    order = rng.permutation(n)
    n7, n9 = int(round(n * SHARES["nasa7"])), int(round(n * SHARES["nasa9"]))
    i7, i9, itab = order[:n7], order[n7:n7 + n9], order[n7 + n9:]
    idup = i7[: max(1, int(round(n * DUPLICATE_SHARE)))]

    # ---------------------------------------------------------------- planted gas defects
    bad7 = gases(fresh(9), rng)
    bad7.counts[:] = np.maximum(bad7.counts, 0)
    k = 0
    # cp.nonpositive + cp.gas-floor: Cp dives below zero near 200 K
    cp200 = evaluate(bad7.lower[k], T_LOW).cp / R
    perturb(bad7, k, lower_quartic=-(cp200 + 3.0) / 800.0 ** 4)
    plant("cp.nonpositive", bad7.key[k], "lower range Cp negative near 200 K", "error")
    plant("cp.gas-floor", bad7.key[k], "same record: below 5/2 R", "error")
    k = 1   # cp.gas-floor only: Cp/R dips to about 2 at 200 K
    cp200 = evaluate(bad7.lower[k], T_LOW).cp / R
    perturb(bad7, k, lower_quartic=-(cp200 - 2.0) / 800.0 ** 4)
    plant("cp.gas-floor", bad7.key[k], "Cp/R about 2 at 200 K", "error")
    k = 2   # cp.gas-ceiling: three times the vibrational heat capacity
    h298, s298 = bad7.h298[k:k + 1], evaluate(bad7.lower[k], T_REF).s[None] + 100.0
    vib_lo, vib_hi = bad7.lower[k, 2:7].copy(), bad7.upper[k, 2:7].copy()
    vib_lo[0] -= 4.0
    vib_hi[0] -= 4.0
    bad7.lower[k, 2:7] += 3 * vib_lo
    bad7.upper[k, 2:7] += 3 * vib_hi
    set_constants(bad7.lower[k:k + 1], bad7.upper[k:k + 1], h298, s298)
    plant("cp.gas-ceiling", bad7.key[k], "vibrational Cp × 4: above twice the equipartition limit", "error")
    k = 3   # segment.discontinuity: upper H offset 500 K × R
    perturb(bad7, k, upper_b1=500.0)
    plant("segment.discontinuity", bad7.key[k], "upper b1 + 500 K (ΔH = 4.2 kJ/mol at 1000 K)", "error")
    k = 4   # segment.kink: slope jump of half the slope
    slope = evaluate(bad7.lower[k], T_MID).dcp_dt / R
    perturb(bad7, k, upper_linear=-(0.25 * abs(slope) + 1e-3))
    plant("segment.kink", bad7.key[k], "dCp/dT drops by a quarter at 1000 K", "warning")
    k = 5   # range.extrapolation: upper range to 3000 K, Cp negative by 4500 K
    bad7.t_high[k] = 3000.0
    cp45 = evaluate(bad7.upper[k], 4500.0).cp / R
    perturb(bad7, k, upper_quartic=-1.6 * cp45 / 3500.0 ** 4)
    plant("range.extrapolation", bad7.key[k], "Cp turns negative between 3000 and 4500 K", "warning")
    k = 6   # thirdlaw.gas-entropy-floor: S(298.15) below Sackur–Tetrode
    st = float(sackur_tetrode_entropy(T_REF, bad7.molar_mass[k]))
    set_constants(bad7.lower[k:k + 1], bad7.upper[k:k + 1], bad7.h298[k:k + 1], np.array([st - 3.0]))
    plant("thirdlaw.gas-entropy-floor", bad7.key[k], "S(298.15) 3 J/(mol·K) below translation", "error")
    # 7: a clean species written in nasa7 and, with S + 2 J/(mol·K), in nasa9 (duplicate)
    dup_bad = take(bad7, [7])
    dup_bad.lower[0, 8] += 2.0 / R
    dup_bad.upper[0, 8] += 2.0 / R
    plant("duplicate.disagreement", bad7.key[7], "second source's S higher by 2 J/(mol·K) (ΔG = T ΔS: 12 kJ/mol at 6000 K)", "error")
    # 8: clean in nasa7; isomers for phase.metastable come below
    # schema.species-key + schema.rejected: a record named CO whose formula says CO2
    bad_name = Species(key=["CO(g)"], name=["CO"], counts=np.array([[1, 0, 0, 2, 0, 0]]), state=np.array(["g"]),
                       lower=main.lower[:1].copy(), upper=main.upper[:1].copy(), t_high=np.array([T_HIGH]))
    plant("schema.species-key", "CO(g)", "name CO on a record whose formula field says C1 O2", "warning")
    plant("schema.rejected", "bench-nasa7-1", "the CO/CO2 record above", "error")

    # nasa9 defects
    bad9 = gases(fresh(2), rng)
    stated = bad9.h298.copy()
    stated[0] += 2000.0
    plant("formation.stated-vs-polynomial", bad9.key[0], "stated ΔfH° 2 kJ/mol above H(298.15)", "error")
    # reference element N2 again, H(298.15) = 30 J/mol
    n2 = take(refs, [refs.key.index("N2(g)")])
    n2.lower[0, 7] += 30.0 / R
    n2.upper[0, 7] += 30.0 / R
    plant("formation.reference-element", "N2(g)", "second N2 record with H(298.15) = 30 J/mol", "error")
    # diamond below graphite at 298.15 K
    cnt = np.zeros((1, 6), int)
    cnt[0, 0] = 1
    diamond = einstein_solid(cnt, ["C(diamond)"], ["C(cr,diamond)"], np.array([-3000.0]), np.array([2.38]), rng)
    plant("phase.reference-not-stable", "C(cr,graphite)", "diamond given 3 kJ/mol below graphite", "warning")
    # isomers: b lies 20 kJ/mol above a everywhere
    iso_c = fresh(1)
    iso = gases(np.repeat(iso_c, 3, axis=0), rng)
    for j, dh in ((1, 20e3), (2, 5e3)):
        iso.lower[j], iso.upper[j] = iso.lower[0], iso.upper[0]
        iso.lower[j, 7] += dh / R
        iso.upper[j, 7] += dh / R
    f = formula_text(iso_c)[0]
    iso.name = [f"{f},a", f"{f},b", f"{f},c"]
    iso.key = [f"{f}(g,a)", f"{f}(g,b)", f"{f}(g,c)"]
    plant("phase.metastable", iso.key[1], "isomer b 20 kJ/mol above isomer a at every T", "info")
    plant("cycle.closure", "iso-ac", "isomerisations a→b, b→c, a→c: the last 8 kJ/mol off", "error")
    # one cycle alone cannot tell which member is off: the fit sets aside the lowest reaction id
    # (iso-ab) and names iso-ac and iso-bc as equally suspect
    plant("network.worst-offender", "iso-ab", "set aside by the network fit, tied with iso-ac and iso-bc "
          "(the main network's bad measurement too, where enough reactions test it)", "warning")
    # a crystal and its liquid melting at 500 K; a drg = 0 measurement says 520 K
    mc = fresh(1)
    mf = formula_text(mc)[0]
    n_at = float(mc.sum())
    cr = einstein_solid(mc, [f"{mf}(cr)"], [f"{mf}(cr)"], np.array([-300e3]), np.array([40.0 + 8 * n_at]), rng)
    t_fus, dh_fus = 500.0, 12e3
    liq = einstein_solid(mc, [f"{mf}(L)"], [f"{mf}(l)"], np.zeros(1), np.zeros(1), rng, state="l", extra_cp_r=2.0)
    liq.lower[0, 2:7] = cr.lower[0, 2:7]
    liq.upper[0, 2:7] = cr.upper[0, 2:7]
    liq.lower[0, 2] += 2.0
    liq.upper[0, 2] += 2.0
    # liquid H, S at T_fus = crystal's + ΔH_fus, + ΔH_fus/T_fus; anchored through 298.15 K values
    pc = evaluate(cr.lower[0], t_fus)
    set_constants(liq.lower, liq.upper, np.zeros(1), np.zeros(1))
    pl = evaluate(liq.lower[0], t_fus)
    liq.lower[0, 7] += (pc.h + dh_fus - pl.h) / R
    liq.lower[0, 8] += (pc.s + dh_fus / t_fus - pl.s) / R
    set_constants(liq.lower, liq.upper, evaluate(liq.lower[0], T_REF).h[None], evaluate(liq.lower[0], T_REF).s[None])
    plant("phase.transition-mismatch", f"tr-melt", "drg = 0 stated at 520 K, G curves cross at 500 K", "error")

    # ------------------------------------------------------------------------ sources
    sources: list[dict] = []

    def source(sid: str, path: str, fmt: str, **kw) -> None:
        sources.append(dict(id=sid, path=path, format=fmt, **kw))

    def split(idx: np.ndarray, parts: int) -> list[np.ndarray]:
        parts = max(1, min(parts, len(idx)))
        return [a for a in np.array_split(idx, parts)]

    (raw / "nasa7").mkdir()
    (raw / "nasa9").mkdir()
    (raw / "tables").mkdir()
    (raw / "reactions").mkdir()
    n7_parts = split(i7, 4)
    for j, idx in enumerate(n7_parts):
        parts = [take(main, idx)]
        extra = []
        if j == 0:
            parts = [refs] + parts + [bad7]
        sp = concat(parts)
        text = nasa7_file(sp)
        if j == 0:
            # a record with a garbled coefficient, and the CO/CO2 record
            bad_rec = nasa7_text("C9H9", "BENCH", [("C", 9.0), ("H", 9.0)], "G", T_LOW, T_MID, T_HIGH,
                                 _nasa7_coef(main.lower[0]), _nasa7_coef(main.upper[0])).split("\n")
            bad_rec[1] = bad_rec[1][:15] + "  1.2345X+03   " + bad_rec[1][30:]
            extra.append("\n".join(bad_rec))
            extra.append(nasa7_text("CO", "BENCH", [("C", 1.0), ("O", 2.0)], "G", T_LOW, T_MID, T_HIGH,
                                    _nasa7_coef(bad_name.lower[0]), _nasa7_coef(bad_name.upper[0])))
            plant("schema.rejected", "bench-nasa7-1", "a record with an unparsable coefficient", "error")
            text = text.replace("\nEND\n", "\n" + "\n".join(extra) + "\nEND\n")
        (raw / "nasa7" / f"part{j + 1}.nasa7").write_text(text)
        source(f"bench-nasa7-{j + 1}", f"nasa7/part{j + 1}.nasa7", "nasa7", kind="evaluated", priority=30,
               citation="Synthetic benchmark set, NASA 7-term part (generated)")
    n9_parts = split(i9, 3)
    for j, idx in enumerate(n9_parts):
        sp = take(main, idx)
        stated, shift = None, 0.0
        if j == 0:
            sp = concat([sp, bad9, n2, diamond, iso, cr, liq, dup_bad])
            stated = sp.h298.copy()
            stated[len(idx)] += 2000.0
        if j == 1:
            shift = math.log(1.01325)
        (raw / "nasa9" / f"part{j + 1}.nasa9").write_text(nasa9_file(sp, stated_dfh=stated, b2_shift=shift))
        kw = dict(reference_pressure_bar=1.01325) if j == 1 else {}
        source(f"bench-nasa9-{j + 1}", f"nasa9/part{j + 1}.nasa9", "nasa9", kind="evaluated", priority=20,
               citation="Synthetic benchmark set, NASA 9-term part (generated)", **kw)
    if j >= 1:
        plant("schema.standard-state", "bench-nasa9-2", "source at 1 atm, converted", "info")

    # tables: the table-only species, and duplicates of some NASA-7 species
    tab = table_frame(take(main, itab), refs)
    dup = table_frame(take(main, idup), refs)
    bad_tab = table_frame(gases(fresh(5), rng), refs)
    keys = list(pd.unique(bad_tab["species"]))
    t = bad_tab["t [K]"].to_numpy()

    def rows(key, t_min=0.0):
        return (bad_tab["species"] == key).to_numpy() & (t >= t_min)

    bad_tab.loc[rows(keys[0], 1000.0), "h_minus_href [J/mol]"] += 800.0
    bad_tab.loc[rows(keys[0], 1000.0), "gef [J/(mol*K)]"] -= 800.0 / t[rows(keys[0], 1000.0)]
    plant("table.enthalpy-integral", keys[0], "H − H298 + 800 J/mol from 1000 K", "error")
    r = rows(keys[1], 1200.0)
    bad_tab.loc[r, "s [J/(mol*K)]"] += 0.6
    bad_tab.loc[r, "gef [J/(mol*K)]"] += 0.6
    plant("table.entropy-integral", keys[1], "S + 0.6 J/(mol·K) from 1200 K", "error")
    r = np.flatnonzero(rows(keys[2], 700.0))[0]
    bad_tab.loc[r, "gef [J/(mol*K)]"] += 0.5
    plant("table.gibbs-identity", keys[2], "gef + 0.5 J/(mol·K) in one row", "error")
    r = np.flatnonzero(rows(keys[3], 900.0))[0]
    bad_tab.loc[r, "log_kf"] += 0.05
    plant("table.logk-identity", keys[3], "log Kf + 0.05 in one row", "error")
    r = np.flatnonzero(rows(keys[4], 800.0))[0]
    bad_tab.loc[r, "dfg [J/mol]"] += 3000.0
    bad_tab.loc[r, "log_kf"] -= 3000.0 / (R * 800.0 * LN10)
    plant("table.formation-identity", keys[4], "ΔfG + 3 kJ/mol in one row (log Kf follows)", "error")
    # a gas whose Cp has a narrow bump: tabulated every 10 K, a two-range refit cannot follow it
    bump = gases(fresh(1), rng)
    fine = np.concatenate([[T_REF], np.arange(300.0, 2001.0, 10.0)])
    bt = table_frame(bump, refs, fine)
    bt = _add_bump(bt, center=800.0, width=40.0, height=0.3)
    plant("export.fit-quality", bump.key[0], "Cp bump of 30 % at 800 K (width 40 K): refit misses it", None)
    tables = pd.concat([tab, bad_tab, bt], ignore_index=True)
    # one unreadable row
    bad_row = tables.iloc[[0]].copy()
    bad_row["cp [J/(mol*K)]"] = np.nan
    bad_row["t [K]"] = 2100.0
    tab_keys = pd.unique(tables["species"])
    for j, part_keys in enumerate(split(np.arange(len(tab_keys)), 2)):
        part = tables[tables["species"].isin(set(tab_keys[part_keys]))]
        path = raw / "tables" / f"part{j + 1}.csv"
        write_csv(part, path)
        if j == 0:
            with open(path, "a") as fh:
                fh.write(f"{bad_row['species'].iloc[0]},2100,n/a,1,1,1,1,1,1\n")
            plant("schema.rejected", "bench-tables-1", "a row whose cp is 'n/a'", "error")
        kw = {} if j == 1 else dict(citation="Synthetic benchmark tables (generated)")
        source(f"bench-tables-{j + 1}", f"tables/part{j + 1}.csv", "table-csv", kind="computed", priority=10, **kw)
        if j == 1:
            plant("schema.citation", f"bench-tables-{j + 1}", "source without a citation", "warning")
    write_csv(dup, raw / "tables" / "duplicates.csv")
    source("bench-tables-dup", "tables/duplicates.csv", "table-csv", kind="computed", priority=5,
           citation="Synthetic benchmark tables of some NASA-7 species (generated)")
    # low-temperature crystal tables (Debye): one clean, one from 0 K with a residual entropy,
    # one whose entropy is below what its Cp allows
    lt = np.array([10.0, 15.0, 20.0, 25.0, 30.0, 40.0, 50.0, 60.0, 80.0, 100.0, 120.0, 150.0, 200.0,
                   250.0, T_REF, 300.0])
    cryst = fresh(3)
    ck = [f"{f}(cr)" for f in formula_text(cryst)]
    ctab = pd.concat([
        crystal_table(ck[0], float(cryst[0].sum()), 300.0, lt),
        crystal_table(ck[1], float(cryst[1].sum()), 250.0, np.r_[0.0, lt], s_offset=R * math.log(1.5)),
        crystal_table(ck[2], float(cryst[2].sum()), 120.0, lt[lt >= 30.0], s_offset=-2.0)], ignore_index=True)
    write_csv(ctab, raw / "tables" / "lowtemp.csv")
    source("bench-lowtemp", "tables/lowtemp.csv", "table-csv", kind="measured", priority=10,
           citation="Synthetic low-temperature calorimetry (Debye model, generated)")
    plant("thirdlaw.zero-point", ck[1], "S(0) = R ln 3/2", "error")
    plant("thirdlaw.calorimetric-entropy", ck[2], "S 2 J/(mol·K) below the calorimetric entropy", "error")

    # species register: reference elements (+ a wrong molar mass)
    reg = [dict(species=REFS[e][0], aliases="", molar_mass_g_mol="", reference_element="true",
                geometry="" if e == "C" else "linear", cas="") for e in ELEMENTS]
    mm_bad = main.key[int(i7[-1])]
    reg.append(dict(species=mm_bad, aliases="", molar_mass_g_mol=f"{main.molar_mass[int(i7[-1])] + 1.008:.4f}",
                    reference_element="false", geometry="", cas=""))
    plant("composition.molar-mass", mm_bad, "stated molar mass one H atom too heavy", "error")
    pd.DataFrame(reg).to_csv(raw / "species.csv", index=False, lineterminator="\n")
    source("bench-species", "species.csv", "species-csv", citation="Synthetic benchmark species register")

    # reactions: 3N ΔrH at 298.15 K among the clean main species, plus planted rows
    n_rx = int(round(reactions_per_species * n))
    rx = random_reactions(main, refs, n_rx, rng)
    if n_rx:
        bad_r = int(rng.integers(0, n_rx))
        rx.loc[bad_r, "value"] = round(rx.loc[bad_r, "value"] + 12 * rx.loc[bad_r, "uncertainty"], 4)
        plant("reaction.residual", rx.loc[bad_r, "id"], "measurement 12 u too high", "error")
    extra_rows = []
    # log K series: one consistent, one with an entropy error of 15 J/(mol·K)
    ts = np.array([500.0, 600.0, 700.0, 800.0, 900.0])
    index = {kk: (main, i) for i, kk in enumerate(main.key)} | {kk: (refs, i) for i, kk in enumerate(refs.key)}
    for sid, ds in (("s-clean", 0.0), ("s-entropy", 15.0)):
        one = random_reactions(main, refs, 1, rng, start=0).iloc[0]
        stoich = _stoich_of(one["equation"])
        dg = np.zeros_like(ts)
        for kk, v in stoich.items():
            owner, i = index[kk]
            dg += v * species_g(take(owner, [i]), ts[None, :])[0]
        log_k = -(dg - ts * ds) / (R * ts * LN10)
        for i, (tt, lk) in enumerate(zip(ts, log_k)):
            extra_rows.append(dict(id=f"{sid}-{i}", equation=one["equation"], quantity="log_k", t_k=tt,
                                   value=round(lk + rng.normal(0, 0.002), 5), unit="", series=sid,
                                   uncertainty=0.01, method="synthetic equilibrium"))
    plant("equilibrium.third-law-drift", "series:s-entropy", "ΔrS off by 15 J/(mol·K)", "warning")
    plant("equilibrium.law-disagreement", "series:s-entropy", "ΔrS off by 15 J/(mol·K)", "warning")
    # isomerisations: a separate three-reaction cycle (no reference element links it to the rest)
    for rid, (x, y, v) in {"iso-ab": (0, 1, 20.0), "iso-bc": (1, 2, -15.0), "iso-ac": (0, 2, 13.0)}.items():
        extra_rows.append(dict(id=rid, equation=f"{iso.key[x]} = {iso.key[y]}", quantity="drh", t_k=T_REF,
                               value=v, unit="kJ/mol", series="", uncertainty=0.5, method="synthetic calorimetry"))
    # the melting of the planted crystal (drg = 0 at the wrong temperature)
    extra_rows.append(dict(id="tr-melt", equation=f"{cr.key[0]} = {liq.key[0]}", quantity="drg", t_k=520.0,
                           value=0.0, unit="kJ/mol", series="", uncertainty=0.05, method="synthetic DSC"))
    # an unbalanced equation and a measurement without uncertainty
    k0, k1 = main.key[int(i7[0])], main.key[int(i7[1])]
    extra_rows.append(dict(id="bad-balance", equation=f"{k0} = {k1}", quantity="drh", t_k=T_REF, value=1.0,
                           unit="kJ/mol", series="", uncertainty=1.0, method="synthetic"))
    extra_rows.append(dict(id="bad-nounc", equation=rx.loc[0, "equation"] if n_rx else f"{k0} = {k0}",
                           quantity="drh", t_k=T_REF, value=1.0, unit="kJ/mol", series="", uncertainty=np.nan,
                           method="synthetic"))
    plant("schema.rejected", "bench-reactions-special", "an unbalanced equation", "error")
    plant("schema.rejected", "bench-reactions-special", "a measurement without uncertainty", "error")
    rx_parts = split(np.arange(len(rx)), 2) if len(rx) else []
    for j, idx in enumerate(rx_parts):
        write_csv(rx.iloc[idx], raw / "reactions" / f"part{j + 1}.csv")
        source(f"bench-reactions-{j + 1}", f"reactions/part{j + 1}.csv", "reactions-csv", kind="measured",
               citation="Synthetic reaction calorimetry (generated)")
    write_csv(pd.DataFrame(extra_rows, columns=list(rx.columns)), raw / "reactions" / "special.csv")
    source("bench-reactions-special", "reactions/special.csv", "reactions-csv", kind="measured",
           citation="Synthetic equilibrium and phase-change measurements (generated)")

    # a stray file, the manifest, the waivers
    (raw / "notes").mkdir()
    (raw / "notes" / "todo.txt").write_text("not a source\n")
    plant("schema.unlisted-file", "notes/todo.txt", "a file no source lists", "warning")
    (raw / "sources.toml").write_text(_manifest(sources))
    (out / "waivers.toml").write_text(_waivers(iso.key[1], bad7.key[4]))
    plant("waiver.expired", "segment.kink", "a waiver that expired in 2020", "warning")
    plant("waiver.stale", "phase.metastable", "a waiver for a subject that has no finding", "warning")
    summary = dict(n_species=n, n_records=n + len(idup) + 1, n_reactions=n_rx, planted=planted,
                   sources=[s["id"] for s in sources])
    (out / "planted.json").write_text(json.dumps(summary, indent=1))
    return summary


def _add_bump(df: pd.DataFrame, center: float, width: float, height: float) -> pd.DataFrame:
    """Add a Gaussian bump height·Cp(center)·exp(−((T − c)/w)²/2) to Cp, with its exact H and S
    (integrated on a 0.5 K grid by Simpson's rule), keeping gef, ΔfH, ΔfG, log Kf consistent."""
    from scipy.integrate import cumulative_simpson

    t = df["t [K]"].to_numpy(float)
    cp_c = float(np.interp(center, t, df["cp [J/(mol*K)]"].to_numpy(float)))
    fine = np.arange(T_REF, t.max() + 0.25, 0.5)
    fine[-1] = max(fine[-1], t.max())
    b = height * cp_c * np.exp(-0.5 * ((fine - center) / width) ** 2)
    dh = np.interp(t, fine, cumulative_simpson(b, x=fine, initial=0.0))
    ds = np.interp(t, fine, cumulative_simpson(b / fine, x=fine, initial=0.0))
    bump_t = height * cp_c * np.exp(-0.5 * ((t - center) / width) ** 2)
    df = df.copy()
    df["cp [J/(mol*K)]"] += bump_t
    df["h_minus_href [J/mol]"] += dh
    df["s [J/(mol*K)]"] += ds
    df["gef [J/(mol*K)]"] += ds - dh / t
    df["dfh [J/mol]"] += dh
    df["dfg [J/mol]"] += dh - t * ds
    df["log_kf"] -= (dh - t * ds) / (R * t * LN10)
    return df


def _stoich_of(equation: str) -> dict[str, float]:
    lhs, rhs = equation.split(" = ")
    out: dict[str, float] = {}
    for side, sign in ((lhs, -1.0), (rhs, 1.0)):
        for term in side.split(" + "):
            parts = term.split(" ", 1)
            v, key = (float(parts[0]), parts[1]) if len(parts) == 2 else (1.0, parts[0])
            out[key] = out.get(key, 0.0) + sign * v
    return out


def _manifest(sources: list[dict]) -> str:
    lines = ["# Synthetic benchmark database, written by bench/generate.py", "",
             "[database]", 'name = "thermoledger synthetic benchmark (generated)"',
             "reference_pressure_bar = 1.0", "reference_temperature_k = 298.15", ""]
    for s in sources:
        lines.append("[[source]]")
        for k, v in s.items():
            lines.append(f"{k} = {json.dumps(v)}")
        lines.append("")
    return "\n".join(lines)


def _waivers(metastable_subject: str, kink_subject: str) -> str:
    return "\n".join([
        "# Waivers of the synthetic benchmark (bench/generate.py)", "",
        "[[waiver]]", 'check = "phase.metastable"', f'subject = "{metastable_subject}"',
        'reason = "isomer b is known to be the higher-energy form"', 'by = "bench"', "expires = 2099-12-31", "",
        "[[waiver]]", 'check = "segment.kink"', f'subject = "{kink_subject}"',
        'reason = "an old acceptance, expired"', 'by = "bench"', "expires = 2020-01-01", "",
        "[[waiver]]", 'check = "phase.metastable"', 'subject = "Xe(g)"',
        'reason = "a species no source gives any more"', 'by = "bench"', "expires = 2099-12-31", ""])


def main(argv=None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--n", type=int, default=10000, help="number of species")
    ap.add_argument("--out", type=Path, required=True, help="folder to write (raw/ inside it)")
    ap.add_argument("--seed", type=int, default=0)
    ap.add_argument("--reactions-per-species", type=float, default=3.0)
    a = ap.parse_args(argv)
    s = generate(a.out, a.n, a.seed, a.reactions_per_species)
    print(f"wrote {a.out}/raw: {s['n_species']} species, {s['n_reactions']} reactions, "
          f"{len(s['planted'])} planted defects")
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
