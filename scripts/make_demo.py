"""Generate the shipped demo database in ``raw/`` from physical models.

Usage::

    python scripts/make_demo.py            # writes raw/ next to this script's parent
    python scripts/make_demo.py --out DIR  # writes the same files into DIR

The scenario is fictional: the **Tollbridge Combustion Laboratory** (TCL) keeps three sources
of its own — its evaluated NASA-7 gas set, an older NASA-9 + Shomate compilation (the
"Ellery compilation", 1987; its NASA-9 file at 1 atm), and its calorimetry group's
low-temperature tables and reaction measurements. All numbers are computed from the models
in ``demo_physics.py`` (RRHO gases, Debye crystals, a liquid joined at its melting point)
with invented but realistic parameters listed below; ΔfH°(298.15) values are textbook
values quoted from memory and rounded. **The data are invented for the demo only.**

Fits (all by equality-constrained linear least squares on Cp/R, relative residuals,
continuity of Cp and dCp/dT at every joint; H and S exact at 298.15 K and continuous at
every joint through the integration constants):

* NASA-7 (McBride, Gordon & Reno, NASA TM-4513, 1993): 200–1000–3500 K (combustion practice).
* NASA-9 (McBride, Zehe & Gordon, NASA/TP-2002-211556, 2002): 200–1000–6000 K for gases,
  200–1000–T_max for crystals, single intervals for Mg, ice and liquid water (the last two
  with a cubic Cp only: a3–a6 free, so they extrapolate like the model).
* Shomate (Shomate, J. Phys. Chem. 58 (1954) 368): 298–1200–6000 K.

Beyond each outer end, model points from max(T_low/2, 50 K) to 1.5 T_high enter the fit
with weight 0.05, so the polynomials also extrapolate sensibly a little beyond their stated
ranges (common practice: simulations routinely step just outside a fit's range).

Planted problems (each documented in ``raw/README.md`` and asserted by
``tests/test_demo_cli.py``) are made by small, named edits after a clean fit; the
generator asserts that each edit really has the intended effect.

The output is deterministic (fixed seed, fixed formatting): regenerating reproduces the
shipped files byte for byte.
"""
from __future__ import annotations

import argparse
import csv
import io
import json
import math
import re
import sys
from dataclasses import dataclass, replace
from pathlib import Path

import numpy as np
import periodictable
from scipy.interpolate import CubicSpline
from scipy.linalg import null_space

sys.path.insert(0, str(Path(__file__).resolve().parent))
from demo_physics import (ATM_BAR, P_STD_BAR, R, T_REF, Crystal, Gas, Liquid,  # noqa: E402
                          crystal_dfh_for_liquid)

from pipeline.export import nasa7_text, nasa9_text  # noqa: E402  (the project's own writers)
from pipeline.thermo import to_nasa7  # noqa: E402

SEED = 20240611
LAB = "Tollbridge Combustion Laboratory"

def atomic_weight(symbol: str) -> float:
    """IUPAC abridged standard atomic weight [g/mol] from periodictable (the values
    thermochemical tables use), the same source the pipeline checks molar masses against."""
    return float(periodictable.elements.symbol(symbol).mass)


def elements_of(formula: str) -> dict[str, int]:
    """Element counts of a plain formula such as ``CH4`` or ``MgO`` (no parentheses)."""
    out: dict[str, int] = {}
    for sym, n in re.findall(r"([A-Z][a-z]?)(\d*)", formula):
        out[sym] = out.get(sym, 0) + (int(n) if n else 1)
    return out


def molar_mass(formula: str) -> float:
    return sum(atomic_weight(s) * n for s, n in elements_of(formula).items())


def formula_of(key: str) -> str:
    return key.split("(")[0]


# -------------------------------------------------------------------------------------
# The species models. Wavenumbers and rotational constants [cm⁻¹] are invented but close to
# spectroscopic values (from memory; fundamentals used as harmonic wavenumbers); electronic
# levels as (degeneracy, energy [cm⁻¹]). ΔfH°(298.15) [J/mol]: textbook values from memory.
# -------------------------------------------------------------------------------------

def _gas(key, geometry, sigma=1, rot=(), vib=(), elec=((1, 0.0),), dfh=0.0):
    return Gas(key, molar_mass(formula_of(key)), geometry, sigma, tuple(rot), tuple(vib),
               tuple(elec), float(dfh))


GASES: dict[str, Gas] = {g.key: g for g in [
    _gas("H2(g)", "linear", 2, (60.85,), (4161.0,)),
    _gas("O2(g)", "linear", 2, (1.4377,), (1556.0,), ((3, 0.0), (2, 7918.0), (1, 13195.0))),
    _gas("N2(g)", "linear", 2, (1.998,), (2330.0,)),
    _gas("H2O(g)", "nonlinear", 2, (27.88, 14.51, 9.28), (3657.0, 1595.0, 3756.0), dfh=-241826.0),
    _gas("CO(g)", "linear", 1, (1.9313,), (2143.0,), dfh=-110530.0),
    _gas("CO2(g)", "linear", 2, (0.3902,), (1333.0, 667.0, 667.0, 2349.0), dfh=-393510.0),
    _gas("CH4(g)", "nonlinear", 12, (5.241, 5.241, 5.241),
         (2917.0, 1534.0, 1534.0, 3019.0, 3019.0, 3019.0, 1306.0, 1306.0, 1306.0), dfh=-74600.0),
    _gas("OH(g)", "linear", 1, (18.91,), (3570.0,), ((2, 0.0), (2, 139.2)), dfh=37340.0),
    _gas("NO(g)", "linear", 1, (1.672,), (1876.0,), ((2, 0.0), (2, 121.1)), dfh=91290.0),
    _gas("NH3(g)", "nonlinear", 3, (9.444, 9.444, 6.196),
         (3337.0, 950.0, 3444.0, 3444.0, 1627.0, 1627.0), dfh=-45900.0),
    _gas("Ar(g)", "atom"),
    _gas("Ne(g)", "atom"),
    _gas("O(g)", "atom", elec=((5, 0.0), (3, 158.3), (1, 227.0), (5, 15868.0)), dfh=249180.0),
    _gas("H(g)", "atom", elec=((2, 0.0),), dfh=217998.0),
    _gas("N2O(g)", "linear", 1, (0.4190,), (1285.0, 589.0, 589.0, 2224.0), dfh=82050.0),
    _gas("HO2(g)", "nonlinear", 1, (20.36, 1.118, 1.056), (3436.0, 1392.0, 1098.0),
         ((2, 0.0),), dfh=12300.0),
    _gas("C2H2(g)", "linear", 2, (1.1766,), (3374.0, 1974.0, 3289.0, 612.0, 612.0, 730.0, 730.0),
         dfh=226730.0),
]}

# Crystals: Debye temperature θ_D [K], Einstein modes, γ [J/(mol*K²)], Nernst–Lindemann A [mol/J].
GRAPHITE = Crystal("C(cr,graphite)", 1, 1450.0, a_nl=6.0e-7, dfh298_j_mol=0.0, t_max_k=4000.0)
DIAMOND = Crystal("C(cr,diamond)", 1, 1850.0, a_nl=1.0e-7, dfh298_j_mol=1895.0, t_max_k=3000.0)
MAGNESIUM = Crystal("Mg(cr)", 1, 330.0, gamma_el=1.3e-3, a_nl=7.0e-6, dfh298_j_mol=0.0, t_max_k=923.0)
MGO = Crystal("MgO(cr)", 2, 750.0, a_nl=6.7e-7, dfh298_j_mol=-601600.0, t_max_k=3100.0)
# Ice: three translational lattice modes (Debye) + three librations (Einstein, 900 K).
_ICE0 = Crystal("H2O(cr)", 1, 260.0, einstein=((900.0, 3),), a_nl=1.0e-5, t_max_k=400.0)
# Liquid water: Cp = 75.28 + 6e-4 (T − 308)² − 6e-6 (T − 308)³ J/(mol*K); ΔfusH = 6010 J/mol at
# 273.15 K; ΔfH°(H2O, l, 298.15) = −285830 J/mol.
_WATER_CP = (75.28, 0.0, 6.0e-4, -6.0e-6)
_T_FUS, _DH_FUS = 273.15, 6010.0
ICE = replace(_ICE0, dfh298_j_mol=crystal_dfh_for_liquid(_ICE0, _T_FUS, _DH_FUS, _WATER_CP, 308.0, -285830.0))
WATER = Liquid("H2O(l)", ICE, _T_FUS, _DH_FUS, _WATER_CP, 308.0, -285830.0)

CONDENSED = {c.key: c for c in (GRAPHITE, DIAMOND, MAGNESIUM, MGO, ICE, WATER)}
MODELS = {**GASES, **CONDENSED}

#: Species metadata for species.csv: aliases, reference element flag.
ALIASES = {"C(cr,graphite)": "C(gr);GRAPHITE", "C(cr,diamond)": "C(dia);DIAMOND",
           "H2O(l)": "H2O(L);WATER-LIQ", "H2O(cr)": "ICE", "H2O(g)": "WATER-VAP",
           "Ar(g)": "ARGON"}
REFERENCE_ELEMENTS = {"H2(g)", "O2(g)", "N2(g)", "C(cr,graphite)", "Mg(cr)", "Ar(g)", "Ne(g)"}


# -------------------------------------------------------------------------------------
# Canonical 9-term segments (NASA/TP-2002-211556 eqs. 2-4): coef = a1..a7, b1, b2
# -------------------------------------------------------------------------------------
EXPONENTS = np.array([-2, -1, 0, 1, 2, 3, 4])


def canon_eval(coef, t):
    """Cp [J/(mol*K)], H [J/mol], S [J/(mol*K)], dCp/dT of one canonical segment."""
    a1, a2, a3, a4, a5, a6, a7, b1, b2 = coef
    t = np.asarray(t, float)
    cp = a1 / t ** 2 + a2 / t + a3 + a4 * t + a5 * t ** 2 + a6 * t ** 3 + a7 * t ** 4
    h = (-a1 / t + a2 * np.log(t) + a3 * t + a4 * t ** 2 / 2 + a5 * t ** 3 / 3 + a6 * t ** 4 / 4
         + a7 * t ** 5 / 5 + b1)
    s = (-a1 / (2 * t ** 2) - a2 / t + a3 * np.log(t) + a4 * t + a5 * t ** 2 / 2 + a6 * t ** 3 / 3
         + a7 * t ** 4 / 4 + b2)
    dcp = -2 * a1 / t ** 3 - a2 / t ** 2 + a4 + 2 * a5 * t + 3 * a6 * t ** 2 + 4 * a7 * t ** 3
    return R * cp, R * h, R * s, R * dcp


@dataclass(frozen=True)
class Fit:
    """A fitted record: segment bounds and canonical coefficients."""

    key: str
    bounds: tuple                 # (T0, T1, …, Tn) [K]
    coef: np.ndarray              # (n, 9)
    p_bar: float                  # standard pressure the S values refer to

    def segment_of(self, t):
        return np.clip(np.searchsorted(self.bounds, t, side="left") - 1, 0, len(self.coef) - 1)

    def eval(self, t):
        t = np.atleast_1d(np.asarray(t, float))
        k = self.segment_of(t)
        out = [np.empty_like(t) for _ in range(4)]
        for j in range(len(self.coef)):
            m = k == j
            if m.any():
                for o, v in zip(out, canon_eval(self.coef[j], t[m])):
                    o[m] = v
        return out


def fit_record(model, bounds, free_exponents, p_bar=P_STD_BAR, *, soft=True,
               fit_window=None, anchor_t=T_REF) -> Fit:
    """Fit Cp of ``model`` over segments ``bounds`` with the given free exponents.

    Least squares on relative Cp residuals, 400 points per segment (weight 1) plus soft
    points (weight 0.05) from max(T0/2, 50 K) below and to 1.5 T_n above; equality
    constraints Cp and dCp/dT continuous at each interior joint (null-space method).
    Then b1, b2 make H and S exact at ``anchor_t`` (in the segment holding it, else the
    nearest) and continuous at each joint. ``fit_window`` optionally widens the
    weight-1 window (e.g. ice is fitted to 298.15 K although stated to 273.15 K).
    """
    bounds = tuple(float(b) for b in bounds)
    nseg = len(bounds) - 1
    exps = list(free_exponents)
    ne = len(exps)
    scale = 1000.0
    lo_w, hi_w = fit_window or (bounds[0], bounds[-1])
    ts, ws, segs = [], [], []
    edges = list(bounds)
    edges[0], edges[-1] = min(bounds[0], lo_w), max(bounds[-1], hi_w)
    for j in range(nseg):
        t = np.linspace(edges[j], edges[j + 1], 400)
        ts.append(t); ws.append(np.ones_like(t)); segs.append(np.full(t.shape, j))
    if soft:
        lo_s = max(bounds[0] / 2, 50.0)
        if lo_s < edges[0]:
            t = np.linspace(lo_s, edges[0], 60)[:-1]
            ts.append(t); ws.append(np.full(t.shape, 0.05)); segs.append(np.zeros(t.shape, int))
        t = np.linspace(edges[-1], 1.5 * bounds[-1], 60)[1:]
        ts.append(t); ws.append(np.full(t.shape, 0.05)); segs.append(np.full(t.shape, nseg - 1))
    t = np.concatenate(ts); w = np.concatenate(ws); sg = np.concatenate(segs)
    y = model.cp(t) / R
    x = t / scale
    A = np.zeros((len(t), nseg * ne))
    for j in range(nseg):
        m = sg == j
        for i, e in enumerate(exps):
            A[m, j * ne + i] = x[m] ** e
    wr = w / y
    # constraints: Cp and dCp/dT equal at interior joints
    C = []
    for j in range(1, nseg):
        xj = bounds[j] / scale
        row_v = np.zeros(nseg * ne); row_d = np.zeros(nseg * ne)
        for i, e in enumerate(exps):
            row_v[(j - 1) * ne + i] = xj ** e; row_v[j * ne + i] = -xj ** e
            row_d[(j - 1) * ne + i] = e * xj ** (e - 1); row_d[j * ne + i] = -e * xj ** (e - 1)
        C += [row_v, row_d]
    if C:
        N = null_space(np.array(C))
        z, *_ = np.linalg.lstsq((A * wr[:, None]) @ N, y * wr, rcond=None)
        c = N @ z
    else:
        c, *_ = np.linalg.lstsq(A * wr[:, None], y * wr, rcond=None)
    c = np.where(np.abs(c) < 1e-11 * np.max(np.abs(c)), 0.0, c)   # round-off of exact fits
    coef = np.zeros((nseg, 9))
    for j in range(nseg):
        for i, e in enumerate(exps):
            val = c[j * ne + i] / scale ** e
            coef[j, int(e) + 2] = val
    # integration constants
    k0 = int(np.clip(np.searchsorted(bounds, anchor_t, side="left") - 1, 0, nseg - 1))
    _set_constants(coef[k0], anchor_t, float(model.h(anchor_t)), float(model.s(anchor_t, p_bar)))
    for j in range(k0 + 1, nseg):
        _, h, s, _ = canon_eval(coef[j - 1], bounds[j])
        _set_constants(coef[j], bounds[j], float(h), float(s))
    for j in range(k0 - 1, -1, -1):
        _, h, s, _ = canon_eval(coef[j + 1], bounds[j + 1])
        _set_constants(coef[j], bounds[j + 1], float(h), float(s))
    return Fit(model.key, bounds, coef, p_bar)


def _set_constants(coef, t, h_target, s_target):
    coef[7] = coef[8] = 0.0
    _, h, s, _ = canon_eval(coef, t)
    coef[7] = (h_target - float(h)) / R
    coef[8] = (s_target - float(s)) / R
    coef[7:9] = np.where(np.abs(coef[7:9]) < 1e-8, 0.0, coef[7:9])   # round-off, not data


def fit_report(fit: Fit, model) -> dict:
    """Largest deviations of a fit from its model inside the stated range."""
    t = np.linspace(fit.bounds[0], fit.bounds[-1], 2000)
    cp, h, s, _ = fit.eval(t)
    return dict(cp_rel=float(np.max(np.abs(cp / model.cp(t) - 1))),
                h=float(np.max(np.abs(h - model.h(t)))),
                s=float(np.max(np.abs(s - model.s(t, fit.p_bar)))))


# -------------------------------------------------------------------------------------
# Writers
# -------------------------------------------------------------------------------------

def nasa7_lines(name: str, fit: Fit, formula: dict, phase: str, date_code: str) -> list[str]:
    """Four 80-column lines (classic layout, NASA TM-4513 column map), through the
    project's own writer; T_common as F10.3 over columns 66-75 and unused element pairs
    written as zero counts, as many real files do (inputs.md)."""
    assert len(fit.coef) == 2
    lo, up = (to_nasa7(c) for c in fit.coef)
    return nasa7_text(name, date_code, list(formula.items()), phase, fit.bounds[0], fit.bounds[1],
                      fit.bounds[2], lo, up, t_common_width=10, pad_unused=True).split("\n")


def nasa9_lines(name: str, comment: str, fit: Fit, formula: dict, phase_flag: int,
                ref_code: str, dfh: float, h298_minus_h0: float) -> list[str]:
    """One NASA-9 record (NASA/TP-2002-211556, Appendix A column map), through the
    project's own writer."""
    return nasa9_text(name, comment, ref_code, list(formula.items()), phase_flag,
                      molar_mass_of_formula(formula), dfh, np.asarray(fit.coef),
                      fit.bounds[:-1], fit.bounds[1:], h298_minus_h0=h298_minus_h0,
                      pad_unused=True).split("\n")


def molar_mass_of_formula(formula: dict) -> float:
    return sum(atomic_weight(s) * n for s, n in formula.items())


def shomate_rows(key: str, fit: Fit, dfh: float) -> list[str]:
    """Rows ``species,t_min_k,t_max_k,A,…,H`` of one Shomate record.

    From the canonical segment (see pipeline docs): A = R a3, B = 10³ R a4, C = 10⁶ R a5,
    D = 10⁹ R a6, E = 10⁻⁶ R a1, F = 10⁻³ R b1, G = R b2 + A ln 1000, H = ΔfH/1000 [kJ/mol].
    """
    rows = []
    for j, c in enumerate(fit.coef):
        a1, a2, a3, a4, a5, a6, a7, b1, b2 = c
        assert a2 == 0 and a7 == 0
        A = R * a3; B = 1e3 * R * a4; C = 1e6 * R * a5; D = 1e9 * R * a6; E = 1e-6 * R * a1
        F = 1e-3 * R * b1; G = R * b2 + A * math.log(1000.0); H = dfh / 1000.0
        vals = [A, B, C, D, E, F, G, H]
        rows.append(csv_line([key, f"{fit.bounds[j]:.2f}", f"{fit.bounds[j + 1]:.2f}"]
                             + [f"{v:.10g}" for v in vals]))
    return rows


def _num(v) -> str:
    if v is None or (isinstance(v, float) and not math.isfinite(v)):
        return ""
    return f"{v:.7g}"


def csv_line(fields) -> str:
    """One CSV line (RFC 4180 quoting: fields holding commas or quotes are quoted)."""
    buf = io.StringIO()
    csv.writer(buf, lineterminator="").writerow(fields)
    return buf.getvalue()


# -------------------------------------------------------------------------------------
# Tables
# -------------------------------------------------------------------------------------

LOW_T_GRID = [10, 15, 20, 25, 30, 35, 40, 45, 50, 60, 70, 80, 90, 100, 110, 120, 140, 160, 180,
              200, 220, 240, 260, 280, 298.15, 300]
MGO_GRID = LOW_T_GRID[:-2] + [T_REF, 300, 350, 400, 450, 500, 600, 700, 800, 900, 1000]


def table_rows(model, grid, *, energy=1.0, formation=False, t_formation_min=200.0,
               u_dfh_j_mol=None):
    """Rows of one species' table: dict of column → value (energy divided by ``energy``).

    cp, s, h_minus_href = H(T) − H(298.15), gef = S − (H − H298)/T (empty at T = 0);
    with ``formation``, dfh, dfg and log_kf from the reference elements' models at
    T ≥ ``t_formation_min`` (where the element gases' own data are defined).
    """
    rows = []
    h_ref = float(model.h(T_REF))
    for t in grid:
        t = float(t)
        if t == 0.0:
            cp, s, hmh, gef = 0.0, 0.0, float(model.h(0.0)) - h_ref, None
        else:
            cp = float(model.cp(t)); s = float(model.s(t)); hmh = float(model.h(t)) - h_ref
            gef = s - hmh / t
        row = {"t": t, "cp": cp / energy, "s": s / energy, "h_minus_href": hmh / energy,
               "gef": None if gef is None else gef / energy}
        if formation:
            if t >= t_formation_min:
                dfh, dfg = formation_values(model, t)
                row.update(dfh=dfh / energy, dfg=dfg / energy,
                           log_kf=-dfg / (R * t * math.log(10.0)),
                           uncertainty_dfh=None if u_dfh_j_mol is None else u_dfh_j_mol / energy)
            else:
                row.update(dfh=None, dfg=None, log_kf=None, uncertainty_dfh=None)
        rows.append(row)
    return rows


def formation_values(model, t):
    """ΔfH and ΔfG [J/mol] of a species from its reference elements' models at T."""
    els = elements_of(formula_of(model.key))
    ref = {"H": (GASES["H2(g)"], 0.5), "O": (GASES["O2(g)"], 0.5), "N": (GASES["N2(g)"], 0.5),
           "C": (GRAPHITE, 1.0), "Mg": (MAGNESIUM, 1.0)}
    dfh = float(model.h(t)); dfg = float(model.g(t))
    for el, n in els.items():
        m, per = ref[el]
        dfh -= n * per * float(m.h(t)); dfg -= n * per * float(m.g(t))
    return dfh, dfg


def write_table_csv(rows_by_species, header_units, columns):
    """CSV text: header with optional unit brackets, one row per species and T."""
    head = ["species"] + [f"{c} [{header_units[c]}]" if header_units.get(c) else c for c in columns]
    lines = [csv_line(head)]
    for key, rows in rows_by_species:
        for r in rows:
            lines.append(csv_line([key] + [_num(r.get(c)) if c != "t" else _fmt_t(r["t"])
                                           for c in columns]))
    return lines


def _fmt_t(t: float) -> str:
    return f"{t:g}" if t != T_REF else "298.15"


# -------------------------------------------------------------------------------------
# Reactions
# -------------------------------------------------------------------------------------

def parse_equation(eq: str) -> dict[str, float]:
    """``a A + b B = c C`` → {species: ν} (products > 0); coefficients may be fractions."""
    left, right = eq.split("=")
    out: dict[str, float] = {}
    for side, sign in ((left, -1.0), (right, 1.0)):
        for term in side.split(" + "):
            term = term.strip()
            m = re.match(r"^(?:(\d+(?:/\d+)?|\d*\.\d+)\s+)?(.+)$", term)
            coef, key = m.group(1), m.group(2)
            if coef is None:
                v = 1.0
            elif "/" in coef:
                a, b = coef.split("/")
                v = float(a) / float(b)
            else:
                v = float(coef)
            out[key] = out.get(key, 0.0) + sign * v
    return out


def reaction_value(stoich, quantity, t):
    """ΔrH or ΔrG [J/mol], or log10 K, from the models (1 bar)."""
    if quantity == "drh":
        return sum(n * float(MODELS[k].h(t)) for k, n in stoich.items())
    drg = sum(n * float(MODELS[k].g(t)) for k, n in stoich.items())
    if quantity == "drg":
        return drg
    return -drg / (R * t * math.log(10.0))


#: id, equation, quantity, T [K], standard uncertainty (kJ/mol or log units), method
REACTIONS = [
    ("r01", "C(cr,graphite) + O2(g) = CO2(g)", "drh", T_REF, 0.13, "bomb combustion calorimetry"),
    ("r02", "C(cr,diamond) + O2(g) = CO2(g)", "drh", T_REF, 0.15, "bomb combustion calorimetry"),
    ("r03", "C(cr,graphite) = C(cr,diamond)", "drh", T_REF, 0.05, "differential combustion calorimetry"),
    ("r04", "CO(g) + 1/2 O2(g) = CO2(g)", "drh", T_REF, 0.20, "flame calorimetry"),
    ("r05", "C(cr,graphite) + 1/2 O2(g) = CO(g)", "drh", T_REF, 0.30, "bomb calorimetry, partial combustion"),
    ("r06", "H2(g) + 1/2 O2(g) = H2O(l)", "drh", T_REF, 0.04, "flame calorimetry"),
    ("r07", "H2O(l) = H2O(g)", "drh", T_REF, 0.03, "vaporisation calorimetry"),
    ("r08", "H2(g) + 1/2 O2(g) = H2O(g)", "drh", T_REF, 0.05, "flame calorimetry"),
    ("r09", "CH4(g) + 2 O2(g) = CO2(g) + 2 H2O(l)", "drh", T_REF, 0.30, "flame calorimetry"),
    ("r10", "CH4(g) + 2 O2(g) = CO2(g) + 2 H2O(g)", "drh", T_REF, 0.40, "flame calorimetry"),
    ("r11", "C(cr,graphite) + 2 H2(g) = CH4(g)", "drh", T_REF, 0.40, "hydrogenation calorimetry"),
    ("r12", "CH4(g) + H2O(g) = CO(g) + 3 H2(g)", "drh", T_REF, 0.50, "flow calorimetry"),
    ("r13", "CO(g) + H2O(g) = CO2(g) + H2(g)", "drh", T_REF, 0.30, "flow calorimetry"),
    ("r14", "4 NH3(g) + 3 O2(g) = 2 N2(g) + 6 H2O(l)", "drh", T_REF, 1.00, "bomb combustion calorimetry"),
    ("r15", "1/2 N2(g) + 3/2 H2(g) = NH3(g)", "drh", T_REF, 0.30, "flow calorimetry"),
    ("r16", "4 NH3(g) + 5 O2(g) = 4 NO(g) + 6 H2O(g)", "drh", T_REF, 1.20, "flow calorimetry"),
    ("r17", "1/2 N2(g) + 1/2 O2(g) = NO(g)", "drh", T_REF, 0.40, "flow calorimetry"),
    ("r18", "Mg(cr) + 1/2 O2(g) = MgO(cr)", "drh", T_REF, 0.30, "oxygen bomb calorimetry"),
    ("r19", "Mg(cr) + H2O(l) = MgO(cr) + H2(g)", "drh", T_REF, 0.80, "reaction calorimetry"),
    ("r20", "H2(g) = 2 H(g)", "drh", T_REF, 0.20, "spectroscopic D0 with thermal corrections"),
    ("r21", "O2(g) = 2 O(g)", "drh", T_REF, 0.20, "spectroscopic D0 with thermal corrections"),
    ("r22", "H2O(g) = H(g) + OH(g)", "drh", T_REF, 0.40, "photodissociation threshold"),
    ("r23", "OH(g) = O(g) + H(g)", "drh", T_REF, 0.50, "photodissociation threshold"),
    ("r24", "H2O(cr) = H2O(l)", "drh", _T_FUS, 0.02, "adiabatic calorimetry, fusion"),
    ("r25", "H2O(cr) = H2O(l)", "drg", _T_FUS, 0.005, "melting point at 1 bar"),
] + [
    (f"k{i + 1:02d}", "1/2 N2(g) + 3/2 H2(g) = NH3(g)", "log_k", float(t), 0.01, "flow equilibrium")
    for i, t in enumerate(range(400, 801, 50))
]
#: The one bad measurement: r10 reported 6.0 kJ/mol too high (soot correction omitted).
BAD_REACTION, BAD_SHIFT_KJ = "r10", 6.0
#: Rows written in kcal/mol (per-row unit column) instead of the manifest's kJ.
KCAL_ROWS = {"r03"}


def reaction_lines(rng) -> list[str]:
    lines = ["id,equation,quantity,t_k,value,unit,uncertainty,series,method"]
    for rid, eq, q, t, u, method in REACTIONS:
        st = parse_equation(eq)
        _check_balance(rid, st)
        if q == "log_k":
            value = reaction_value(st, q, t) + 0.3 * u * rng.standard_normal()
            unit, val_s, u_s, series = "", f"{value:.4f}", f"{u:.3f}", "nh3-synthesis"
        else:
            if q == "drg" and rid == "r25":
                value_kj = 0.0          # the definition of the transition temperature
            else:
                value_kj = reaction_value(st, q, t) / 1000.0 + 0.3 * u * rng.standard_normal()
            if rid == BAD_REACTION:
                value_kj += BAD_SHIFT_KJ
            if rid in KCAL_ROWS:
                unit, val_s, u_s = "kcal/mol", f"{value_kj / 4.184:.4f}", f"{u / 4.184:.4f}"
            else:
                unit, val_s, u_s = "", f"{value_kj:.3f}", f"{u:.3f}"
            series = ""
        lines.append(csv_line([rid, eq, q, f"{t:g}" if t != T_REF else "298.15", val_s, unit, u_s,
                               series, method]))
    return lines


def _check_balance(rid, stoich):
    tot: dict[str, float] = {}
    for k, n in stoich.items():
        for el, c in elements_of(formula_of(k)).items():
            tot[el] = tot.get(el, 0.0) + n * c
    bad = {el: v for el, v in tot.items() if abs(v) > 1e-12}
    assert not bad, f"{rid} does not balance: {bad}"


# -------------------------------------------------------------------------------------
# The scenario
# -------------------------------------------------------------------------------------

#: The TCL set follows combustion practice (200-1000-3500 K); the compilation goes to 6000 K.
NASA7_BOUNDS = (200.0, 1000.0, 3500.0)
GAS_BOUNDS = (200.0, 1000.0, 6000.0)
NASA7_EXPS = (0, 1, 2, 3, 4)
NASA9_EXPS = (-2, -1, 0, 1, 2, 3, 4)
SHOMATE_EXPS = (-2, 0, 1, 2, 3)

NASA7_SET = ["H2(g)", "O2(g)", "N2(g)", "H2O(g)", "CO(g)", "CO2(g)", "CH4(g)", "OH(g)", "NO(g)",
             "NH3(g)", "Ar(g)", "O(g)", "H(g)"]
NASA7_NAMES = {"Ar(g)": "AR"}   # written in capitals (re-cased by the reader)
NASA9_GASES = ["O2(g)", "N2(g)", "H2O(g)", "CO2(g)", "CO(g)", "OH(g)", "Ne(g)"]
SHOMATE_SET = ["H2(g)", "CO(g)", "CH4(g)", "NH3(g)", "NO(g)", "Ar(g)"]
#: NASA-9 condensed records: name, model, bounds, free exponents, fit window
NASA9_CONDENSED = [
    ("C(gr)", GRAPHITE, (200.0, 1000.0, 4000.0), NASA9_EXPS, None),
    ("C(dia)", DIAMOND, (200.0, 1000.0, 3000.0), NASA9_EXPS, None),
    ("Mg(cr)", MAGNESIUM, (200.0, 923.0), NASA9_EXPS, None),
    ("MgO(cr)", MGO, (200.0, 1000.0, 3100.0), NASA9_EXPS, None),
    ("H2O(cr)", ICE, (200.0, 273.15), (0, 1, 2, 3), (200.0, T_REF)),
    ("H2O(L)", WATER, (273.15, 373.15), (0, 1, 2, 3), None),
]


def build(out: Path, verbose: bool = True) -> dict:
    """Write every raw file into ``out``; return a summary of fits and planted problems."""
    out.mkdir(parents=True, exist_ok=True)
    rng = np.random.default_rng(SEED)
    report: dict = {"fits": {}, "planted": {}}
    files: dict[str, str] = {}

    # ---- species.csv
    lines = ["species,aliases,molar_mass_g_mol,reference_element,geometry"]
    for key in sorted(MODELS):
        m = MODELS[key]
        geometry = m.geometry if isinstance(m, Gas) else ""
        lines.append(csv_line([key, ALIASES.get(key, ""), f"{molar_mass(formula_of(key)):.4f}",
                               "true" if key in REFERENCE_ELEMENTS else "false", geometry]))
    files["species.csv"] = "\n".join(lines) + "\n"

    # ---- source 1: TCL evaluated NASA-7 gas set
    n7 = ["! Tollbridge Combustion Laboratory, evaluated gas-phase set TCL-24 (NASA 7-term).",
          "! INVENTED DATA for the thermoledger demo: computed from RRHO models, see raw/README.md.",
          "THERMO",
          "   200.000  1000.000  3500.000"]
    tcl_fits = {}
    for key in NASA7_SET:
        gas = GASES[key]
        fit = tcl_fits[key] = fit_record(gas, NASA7_BOUNDS, NASA7_EXPS)
        report["fits"][f"nasa7 {key}"] = fit_report(fit, gas)
        name = NASA7_NAMES.get(key, formula_of(key))
        n7 += nasa7_lines(name, fit, elements_of(formula_of(key)), "G", "TCL 24")
    # planted 1: N2O — upper range from an older frequency set (bend 560 instead of 589 cm⁻¹),
    # fitted and anchored on its own: the two ranges do not meet at 1000 K.
    n2o = GASES["N2O(g)"]
    n2o_old = replace(n2o, vib_cm=(1285.0, 560.0, 560.0, 2224.0))
    good = fit_record(n2o, NASA7_BOUNDS, NASA7_EXPS)
    old = fit_record(n2o_old, NASA7_BOUNDS, NASA7_EXPS)
    bad = Fit(n2o.key, good.bounds, np.stack([good.coef[0], old.coef[1]]), P_STD_BAR)
    jump = [np.subtract(b, a) for a, b in zip(canon_eval(bad.coef[0], 1000.0), canon_eval(bad.coef[1], 1000.0))]
    assert abs(jump[2]) > 0.1 or abs(jump[1]) > 100, "planted discontinuity too small"
    report["planted"]["N2O(g) discontinuity at 1000 K (dCp, dH, dS)"] = [float(v) for v in jump[:3]]
    n7 += nasa7_lines("N2O", bad, {"N": 2, "O": 1}, "G", "TCL 24")
    # planted 2: HO2 — the lower range's T coefficient has a typo in its exponent (×10).
    ho2 = GASES["HO2(g)"]
    fit = fit_record(ho2, NASA7_BOUNDS, NASA7_EXPS)
    typo = fit.coef.copy()
    assert typo[0, 3] < 0, "HO2: the T coefficient should be negative for this typo to bite"
    typo[0, 3] *= 10.0                    # E-03 written as E-02
    bad = Fit(ho2.key, fit.bounds, typo, P_STD_BAR)
    tt = np.linspace(200, 1000, 801)
    cp_min = float(np.min(bad.eval(tt)[0]))
    assert cp_min < 0, "planted negative Cp did not go negative"
    report["planted"]["HO2(g) min Cp in 200-1000 K"] = cp_min
    n7 += nasa7_lines("HO2", bad, {"H": 1, "O": 2}, "G", "TCL 24")
    # planted 6: C2H2 — a malformed number (letter O for a zero) in line 3.
    c2h2 = GASES["C2H2(g)"]
    fit = fit_record(c2h2, NASA7_BOUNDS, NASA7_EXPS)
    rec = nasa7_lines("C2H2", fit, {"C": 2, "H": 2}, "G", "TCL 24")
    l3 = rec[2]
    field2 = l3[15:30]
    mangled = field2[:5] + "O" + field2[6:] if field2[5].isdigit() else field2[:4] + "O" + field2[5:]
    rec[2] = l3[:15] + mangled + l3[30:]
    report["planted"]["C2H2 malformed field"] = mangled.strip()
    report["planted"]["C2H2 record line"] = len(n7) + 1
    n7 += rec
    n7.append("END")
    files["tollbridge/tcl24_gases.nasa7"] = "\n".join(n7) + "\n"

    # ---- source 2a: Ellery compilation, NASA-9, at 1 atm
    n9 = ["! Ellery Thermochemical Compilation, 3rd ed. (1987), NASA 9-term records.",
          "! Standard state 1 atm. INVENTED DATA for the thermoledger demo (raw/README.md).",
          "thermo",
          "    200.000   1000.000   6000.000  20000.000   1/01/87"]
    for key in NASA9_GASES:
        gas = GASES[key]
        if key == "N2(g)":
            # planted 3b: N2 copied unchanged from a 1 bar source (the TCL polynomial, here in
            # 9-term form) into this 1 atm compilation: same Cp, S not shifted by R ln 1.01325.
            fit = tcl_fits[key]
        else:
            fit = fit_record(gas, GAS_BOUNDS, NASA9_EXPS, p_bar=ATM_BAR)
        report["fits"][f"nasa9 {key}"] = fit_report(fit, gas)
        dfh = gas.dfh298_j_mol
        h0 = float(gas.h_minus_h0(T_REF))
        if key == "Ne(g)":
            # planted 4: Ne on the H(0 K) = 0 convention: H(298.15) = H298 − H0 = 5/2 R T
            shift = h0
            fit.coef[:, 7] += shift / R
            dfh = shift
            report["planted"]["Ne(g) H(298.15) J/mol"] = float(canon_eval(fit.coef[0], T_REF)[1])
        n9 += nasa9_lines(formula_of(key), "Ellery 1987 (invented)", fit, elements_of(formula_of(key)),
                          0, "E 1987", dfh, h0)
    for name, model, bounds, exps, window in NASA9_CONDENSED:
        fit = fit_record(model, bounds, exps, p_bar=ATM_BAR, fit_window=window)
        report["fits"][f"nasa9 {model.key}"] = fit_report(fit, model)
        h0 = float(model.h_minus_h0(T_REF))
        n9 += nasa9_lines(name, "Ellery 1987 (invented)", fit, elements_of(formula_of(model.key)),
                          1, "E 1987", model.dfh298_j_mol, h0)
    n9.append("END PRODUCTS")
    files["ellery/ellery87.nasa9"] = "\n".join(n9) + "\n"

    # ---- source 2b: Ellery compilation, Shomate parameters, 1 bar
    sh = ["species,t_min_k,t_max_k,A,B,C,D,E,F,G,H"]
    for key in SHOMATE_SET:
        gas = GASES[key]
        fit = fit_record(gas, (298.0, 1200.0, 6000.0), SHOMATE_EXPS)
        report["fits"][f"shomate {key}"] = fit_report(fit, gas)
        sh += shomate_rows(key, fit, gas.dfh298_j_mol)
    files["ellery/ellery87_shomate.csv"] = "\n".join(sh) + "\n"

    # ---- source 3a: TCL calorimetry, low-temperature tables (J via the manifest)
    cols = ["t", "cp", "s", "h_minus_href", "gef"]
    rows = [("Mg(cr)", table_rows(MAGNESIUM, [0] + LOW_T_GRID)),
            ("C(cr,graphite)", table_rows(GRAPHITE, LOW_T_GRID)),
            ("C(cr,diamond)", table_rows(DIAMOND, LOW_T_GRID))]
    files["calorimetry/lowtemp_solids.csv"] = "\n".join(
        ["# TCL calorimetry group: adiabatic low-temperature calorimetry (INVENTED DATA, raw/README.md)"]
        + write_table_csv(rows, {}, cols)) + "\n"

    # ---- source 3b: water, in calories (header brackets), with formation properties
    ice_grid = [10, 15, 20, 25, 30, 40, 50, 60, 70, 80, 90, 100, 120, 140, 160, 180, 200, 220, 240,
                260, 270, _T_FUS]
    liq_grid = [_T_FUS, 280, 290, T_REF, 300, 310, 320, 330, 340, 350, 360, 370, 373.15]
    cal = 4.184
    cols_f = ["t", "cp", "s", "h_minus_href", "gef", "dfh", "dfg", "log_kf", "uncertainty_dfh"]
    units = {"t": "K", "cp": "cal/(mol*K)", "s": "cal/(mol*K)", "h_minus_href": "cal/mol",
             "gef": "cal/(mol*K)", "dfh": "cal/mol", "dfg": "cal/mol", "uncertainty_dfh": "cal/mol"}
    rows = [("H2O(cr)", table_rows(ICE, ice_grid, energy=cal, formation=True, u_dfh_j_mol=60.0)),
            ("H2O(l)", table_rows(WATER, liq_grid, energy=cal, formation=True, u_dfh_j_mol=40.0))]
    files["calorimetry/water_1962.csv"] = "\n".join(
        ["# TCL calorimetry group, ice and liquid water (1962), thermochemical calories (INVENTED DATA)"]
        + write_table_csv(rows, units, cols_f)) + "\n"

    # ---- source 3c: MgO — planted 3: labelled J but the numbers are calories
    units_j = {"t": "K", "cp": "J/(mol*K)", "s": "J/(mol*K)", "h_minus_href": "J/mol", "gef": "J/(mol*K)"}
    rows = [("MgO(cr)", table_rows(MGO, MGO_GRID, energy=cal))]
    files["calorimetry/mgo_1958.csv"] = "\n".join(
        ["# TCL calorimetry group, MgO (1958; transcribed 1990) (INVENTED DATA)"]
        + write_table_csv(rows, units_j, cols)) + "\n"

    # ---- source 3d: reaction measurements
    files["calorimetry/reactions.csv"] = "\n".join(reaction_lines(rng)) + "\n"

    files["sources.toml"] = SOURCES_TOML
    files["README.md"] = readme_text(report)

    # self-checks: table integrals with a cubic spline (what a consumer will do)
    report["table_spline_max_ds"] = _table_selfcheck()
    # guards: a spline through the tables must integrate to their S well inside the
    # table.entropy-integral tolerance (0.05 J/(mol*K)); every clean fit within 2 % in Cp
    assert report["table_spline_max_ds"] < 0.01, report["table_spline_max_ds"]
    assert all(v["cp_rel"] < 0.02 for v in report["fits"].values()), report["fits"]
    for rel, text in sorted(files.items()):
        path = out / rel
        path.parent.mkdir(parents=True, exist_ok=True)
        path.write_bytes(text.encode("utf-8"))
    if verbose:
        print(json.dumps(report, indent=1, default=float))
    return report


def _table_selfcheck() -> float:
    """Largest |S(T) − S(T0) − ∫ spline(Cp)/T dT| over the J tables [J/(mol*K)]."""
    worst = 0.0
    for model, grid in ((MAGNESIUM, [0] + LOW_T_GRID), (GRAPHITE, LOW_T_GRID), (DIAMOND, LOW_T_GRID),
                        (MGO, MGO_GRID)):
        t = np.array(grid, float)
        cp = np.array([float(f"{v:.7g}") for v in model.cp(t)])
        s = np.array([float(f"{v:.7g}") for v in model.s(t)])
        sp = CubicSpline(t, cp)
        tt = np.linspace(t[0], t[-1], 20001)
        f = np.where(tt > 0, sp(tt) / np.where(tt > 0, tt, 1), 0)
        cum = np.concatenate([[0], np.cumsum((f[1:] + f[:-1]) / 2 * np.diff(tt))])
        s_int = s[0] + np.interp(t, tt, cum)
        worst = max(worst, float(np.max(np.abs(s_int - s))))
    return worst


SOURCES_TOML = '''# Demo database of the (fictional) Tollbridge Combustion Laboratory.
# INVENTED DATA, generated by scripts/make_demo.py from physical models: see README.md.

[database]
name = "Tollbridge Combustion Laboratory demo database (invented data)"
reference_pressure_bar = 1.0
reference_temperature_k = 298.15

[[source]]
id = "tcl-species"
path = "species.csv"
format = "species-csv"
citation = "Tollbridge Combustion Laboratory, species register (invented for the demo), 2024"

[[source]]
id = "tcl-gases-2024"
path = "tollbridge/tcl24_gases.nasa7"
format = "nasa7"
kind = "evaluated"
priority = 30
citation = "Tollbridge Combustion Laboratory, evaluated gas-phase set TCL-24 (invented for the demo), 2024"
license = "CC0-1.0"

[[source]]
id = "ellery-1987-nasa9"
path = "ellery/ellery87.nasa9"
format = "nasa9"
kind = "evaluated"
priority = 20
reference_pressure_bar = 1.01325
citation = "Ellery Thermochemical Compilation, 3rd ed., NASA 9-term records (invented for the demo), 1987"

[[source]]
id = "ellery-1987-shomate"
path = "ellery/ellery87_shomate.csv"
format = "shomate-csv"
kind = "evaluated"
priority = 20
citation = "Ellery Thermochemical Compilation, 3rd ed., Shomate parameters (invented for the demo), 1987"

[[source]]
id = "tcl-calorimetry-lowtemp"
path = "calorimetry/lowtemp_solids.csv"
format = "table-csv"
kind = "measured"
priority = 10
energy_unit = "J"
citation = "TCL calorimetry group, adiabatic low-temperature calorimetry of Mg, graphite and diamond (invented for the demo), 2019"

[[source]]
id = "tcl-calorimetry-water"
path = "calorimetry/water_1962.csv"
format = "table-csv"
kind = "measured"
priority = 10
citation = "TCL calorimetry group, ice and liquid water, thermochemical calories (invented for the demo), 1962"

[[source]]
id = "tcl-calorimetry-mgo"
path = "calorimetry/mgo_1958.csv"
format = "table-csv"
kind = "measured"
priority = 10
citation = "TCL calorimetry group, magnesium oxide (invented for the demo), 1958, transcribed 1990"

[[source]]
id = "tcl-reactions"
path = "calorimetry/reactions.csv"
format = "reactions-csv"
kind = "measured"
energy_unit = "kJ"
citation = "TCL calorimetry group, reaction enthalpies and ammonia equilibrium (invented for the demo), 1995-2023"
'''


def _gas_table() -> str:
    rows = ["| species | geometry | σ | rotational constants / cm⁻¹ | vibrational wavenumbers / cm⁻¹ "
            "| electronic levels (g, cm⁻¹) | ΔfH°(298.15) / kJ mol⁻¹ |",
            "|---|---|---|---|---|---|---|"]
    for g in GASES.values():
        vib = ", ".join(f"{v:g}" for v in g.vib_cm) or "—"
        rot = ", ".join(f"{v:g}" for v in g.rot_cm) or "—"
        el = "; ".join(f"({n}, {e:g})" for n, e in g.elec)
        rows.append(f"| {g.key} | {g.geometry} | {g.sigma if g.geometry != 'atom' else '—'} | {rot} "
                    f"| {vib} | {el} | {g.dfh298_j_mol / 1000:g} |")
    return "\n".join(rows)


def _crystal_table() -> str:
    rows = ["| species | n (Debye) | θ_D / K | Einstein modes (Θ_E / K × n) | γ / J mol⁻¹ K⁻² "
            "| Nernst–Lindemann A / mol J⁻¹ | ΔfH°(298.15) / kJ mol⁻¹ |", "|---|---|---|---|---|---|---|"]
    for c in (GRAPHITE, DIAMOND, MAGNESIUM, MGO, ICE):
        ein = ", ".join(f"{t:g} × {n}" for t, n in c.einstein) or "—"
        rows.append(f"| {c.key} | {c.n_debye:g} | {c.theta_debye_k:g} | {ein} | {c.gamma_el:g} "
                    f"| {c.a_nl:g} | {c.dfh298_j_mol / 1000:.3f} |")
    return "\n".join(rows)


def _fit_summary(report: dict) -> str:
    """One sentence per polynomial form: the largest relative Cp deviation from the models."""
    parts = []
    for form, label in (("nasa7", "NASA-7"), ("nasa9", "NASA-9"), ("shomate", "Shomate")):
        fits = {k.split(" ", 1)[1]: v for k, v in report["fits"].items() if k.startswith(form + " ")}
        worst = max(fits, key=lambda k: fits[k]["cp_rel"])
        rest = max((v["cp_rel"] for k, v in fits.items() if k != worst), default=0.0)
        parts.append(f"{label} records within {100 * fits[worst]['cp_rel']:.2f} % ({worst}; "
                     f"the others within {100 * rest:.2f} %)")
    return "; ".join(parts)


def readme_text(report: dict) -> str:
    return README_TEMPLATE.format(gas_table=_gas_table(), crystal_table=_crystal_table(),
                                  seed=SEED, bad=BAD_REACTION, shift=BAD_SHIFT_KJ,
                                  fit_summary=_fit_summary(report))


README_TEMPLATE = (Path(__file__).resolve().parent / "demo_readme.md").read_text(encoding="utf-8")


def main(argv=None) -> int:
    ap = argparse.ArgumentParser(description="Generate the thermoledger demo database (invented data).")
    ap.add_argument("--out", type=Path, default=Path(__file__).resolve().parent.parent / "raw",
                    help="folder to write (default: raw/ of the repository)")
    ap.add_argument("--quiet", action="store_true", help="do not print the fit report")
    args = ap.parse_args(argv)
    build(args.out, verbose=not args.quiet)
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
