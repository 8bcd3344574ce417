"""Ideal-gas reference records for check tests, built from libraries outside the project.

* Cp, H − H(298.15) and S − S(298.15) of N2, O2, CO2, H2O, CH4 and Ar from CoolProp's
  reference equations of state (ideal-gas part; Bell et al., Ind. Eng. Chem. Res. 53
  (2014) 2498), each only up to its equation's Tmax (methane: 625 K);
* absolute S°(298.15) from ``chemicals`` 1.x, ``S0g(CAS, method="WEBBOOK")`` (NIST
  Chemistry WebBook), and ΔfH°(298.15) from ``Hfg(CAS, method="ATCT_G")`` (Active
  Thermochemical Tables, Ruscic et al.);
* stated molar masses from CoolProp's fluid data (``AbstractState.molar_mass()``).

Two records per gas: a table on the CoolProp grid, and a NASA-7 fit made here by least
squares (two segments joined at 1000 K with Cp and dCp/dT continuous, b1 and b2 fixed by
ΔfH° and S° at 298.15 K and by continuity of H and S at the joint). Every builder returns
fresh objects, so a test may plant a defect in them.
"""
from __future__ import annotations

import copy
from functools import lru_cache

import numpy as np
import pandas as pd

from pipeline.checks import registry
from pipeline.constants import R, T_REF
from pipeline.findings import empty_findings
from pipeline.thermo import evaluate
from tests.builders import context, poly_record, table_record
from tests.reference import coolprop_ideal_gas

#: species key → (CoolProp fluid, CAS, geometry, reference element?)
GASES = {
    "N2(g)": ("Nitrogen", "7727-37-9", "linear", True),
    "O2(g)": ("Oxygen", "7782-44-7", "linear", True),
    "CO2(g)": ("CarbonDioxide", "124-38-9", "linear", False),
    "H2O(g)": ("Water", "7732-18-5", "nonlinear", False),
    "CH4(g)": ("Methane", "74-82-8", "nonlinear", False),
    "Ar(g)": ("Argon", "7440-37-1", "atom", True),
}
T_LOW_K = 300.0
T_JOINT_K = 1000.0

MY_CHECKS = ("cp.gas-floor", "cp.gas-ceiling", "segment.kink", "range.extrapolation",
             "formation.reference-element", "formation.stated-vs-polynomial",
             "thirdlaw.zero-point", "thirdlaw.calorimetric-entropy",
             "thirdlaw.gas-entropy-floor", "composition.molar-mass")


@lru_cache(maxsize=None)
def _reference(species: str):
    import CoolProp.CoolProp as CP
    import chemicals

    fluid, cas, _, _ = GASES[species]
    t_max = CP.AbstractState("HEOS", fluid).Tmax()
    t = np.r_[T_REF, np.arange(T_LOW_K, t_max + 1e-9, 25.0)]
    cp, dh, ds = coolprop_ideal_gas(fluid, t)
    s298 = chemicals.S0g(cas, method="WEBBOOK")
    h298 = chemicals.Hfg(cas, method="ATCT_G")
    mass = CP.AbstractState("HEOS", fluid).molar_mass() * 1e3
    return t, cp, dh, ds + s298, h298, s298, mass


def reference(species: str):
    """(t_k, cp, H − H298, S, ΔfH°298, S°298, molar mass) as fresh arrays."""
    return copy.deepcopy(_reference(species))


def fit_nasa7(species: str) -> list[tuple[float, float, np.ndarray]]:
    """Constrained least-squares NASA-7 fit (canonical coefficients) of one gas."""
    t, cp, _, _, h298, s298, _ = reference(species)
    t_max = t[-1]
    tau = t / 1000.0
    y = cp / R
    if t_max <= T_JOINT_K:   # one segment (methane: CoolProp stops at 625 K)
        A = np.vander(tau, 5, increasing=True)
        p = np.linalg.lstsq(A, y, rcond=None)[0]
        segs = [(T_LOW_K, t_max, p)]
    else:
        lo, hi = tau <= 1.0, tau >= 1.0
        A = np.zeros((len(tau) + hi.sum(), 10))
        b = np.r_[y[lo], y[hi]]
        A = np.zeros((len(b), 10))
        A[: lo.sum(), :5] = np.vander(tau[lo], 5, increasing=True)
        A[lo.sum():, 5:] = np.vander(tau[hi], 5, increasing=True)
        j = np.arange(5)
        C = np.zeros((2, 10))
        C[0, :5], C[0, 5:] = 1.0, -1.0          # Cp equal at τ = 1
        C[1, :5], C[1, 5:] = j, -j              # dCp/dτ equal at τ = 1
        K = np.block([[2 * A.T @ A, C.T], [C, np.zeros((2, 2))]])
        sol = np.linalg.solve(K, np.r_[2 * A.T @ b, 0.0, 0.0])
        segs = [(T_LOW_K, T_JOINT_K, sol[:5]), (T_JOINT_K, t_max, sol[5:10])]
    out = []
    prev = None
    for lo_k, hi_k, p in segs:
        coef = np.zeros(9)
        coef[2:7] = p / 1000.0 ** np.arange(5)
        if prev is None:
            h0, s0 = evaluate(coef, T_REF).h, evaluate(coef, T_REF).s
            coef[7], coef[8] = (h298 - h0) / R, (s298 - s0) / R
        else:
            h0, s0 = evaluate(coef, lo_k).h, evaluate(coef, lo_k).s
            coef[7] = (evaluate(prev, lo_k).h - h0) / R
            coef[8] = (evaluate(prev, lo_k).s - s0) / R
        out.append((lo_k, hi_k, coef))
        prev = coef
    return out


def gas_table(species: str, source: str = "coolprop"):
    """A table record of one gas (ΔfH = ΔfG = 0 rows for reference elements)."""
    t, cp, dh, s, _, _, _ = reference(species)
    cols = dict(cp_j_mol_k=cp, h_minus_href_j_mol=dh, s_j_mol_k=s)
    if GASES[species][3]:
        cols.update(dfh_j_mol=np.zeros_like(t), dfg_j_mol=np.zeros_like(t))
    return table_record(species, source, t, **cols)


def gas_poly(species: str, source: str = "fit"):
    """The NASA-7 fit as a polynomial record stating ΔfH°(298.15) and the molar mass."""
    _, _, _, _, h298, _, mass = reference(species)
    rec, segs = poly_record(species, source, fit_nasa7(species), stated_dfh_j_mol=h298)
    rec["stated_molar_mass_g_mol"] = mass
    return rec, segs


def species_meta(species=tuple(GASES)) -> pd.DataFrame:
    rows = []
    for sp in species:
        _, cas, geometry, ref = GASES[sp]
        rows.append(dict(species=sp, aliases="", stated_molar_mass_g_mol=reference(sp)[6],
                         reference_element=ref, geometry=geometry, cas=cas,
                         source_id="species", file="species.csv", line=len(rows) + 2))
    return pd.DataFrame(rows)


def gas_context(tables=None, polys=None, **kw):
    """Context with every gas as a table and as a fit (or the records given)."""
    tables = [gas_table(s) for s in GASES] if tables is None else tables
    polys = [gas_poly(s) for s in GASES] if polys is None else polys
    return context(polys, tables, species_meta=species_meta(), **kw)


def run_checks(ctx, ids=MY_CHECKS) -> pd.DataFrame:
    """Findings of the given check ids on ``ctx``."""
    parts = [registry.spec_for(i).func(ctx) for i in ids]
    parts = [p for p in parts if len(p)]
    return pd.concat(parts, ignore_index=True) if parts else empty_findings()


def config_from(tmp_path, text: str):
    """A Config loaded from TOML text, through the same loader as ``--config``."""
    from pipeline.config import Config

    path = tmp_path / "thermoledger.toml"
    path.write_text(text, encoding="utf-8")
    return Config.load(path)
