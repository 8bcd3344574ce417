"""Thermochemical tables of ideal gases built from libraries outside the project, for tests.

* Cp, H − H(298.15) and S − S(298.15): CoolProp's ideal-gas functions of its reference
  equations of state (Bell, Wronski, Quoilin & Lemort, Ind. Eng. Chem. Res. 53 (2014)
  2498), each only up to its equation's Tmax (methane: 625 K; hydrogen: 1000 K);
* absolute S°(298.15): ``chemicals`` 1.x, ``S0g(CAS, method=...)`` — "JANAF" (Chase,
  *NIST-JANAF Thermochemical Tables*, 4th ed., 1998) where chemicals has it, else
  "WEBBOOK" (NIST Chemistry WebBook, SRD 69).

Tables are printed the way published tables are: a 100 K grid with rows at 298.15 and
300 K, Cp, S and gef rounded to 0.001 J/(mol·K), H − H(298.15) to 1 J/mol (the precision
of Chase 1998). The elements N2, O2, H2 and Ar carry ΔfH = ΔfG = log Kf = 0 in every row.
"""
from __future__ import annotations

from functools import lru_cache

import numpy as np
import pandas as pd

from pipeline.constants import T_REF
from tests.builders import table_record
from tests.reference import coolprop_ideal_gas

#: species key → (CoolProp fluid, CAS, chemicals S0g method, reference element?)
GASES = {
    "N2(g)": ("Nitrogen", "7727-37-9", "WEBBOOK", True),
    "O2(g)": ("Oxygen", "7782-44-7", "WEBBOOK", True),
    "H2(g)": ("Hydrogen", "1333-74-0", "WEBBOOK", True),
    "Ar(g)": ("Argon", "7440-37-1", "WEBBOOK", True),
    "CO2(g)": ("CarbonDioxide", "124-38-9", "JANAF", False),
    "H2O(g)": ("Water", "7732-18-5", "JANAF", False),
    "CH4(g)": ("Methane", "74-82-8", "JANAF", False),
}


def grid(fluid: str) -> np.ndarray:
    """200 K (or 298.15 K where the equation of state starts above 200 K), 298.15, 300,
    then every 100 K up to the equation's Tmax (rounded down to 100 K), plus Tmax."""
    import CoolProp.CoolProp as CP

    st = CP.AbstractState("HEOS", fluid)
    t_max = min(st.Tmax(), 2000.0)
    start = [200.0] if st.Tmin() <= 200.0 else []
    t = np.r_[start, T_REF, np.arange(300.0, t_max + 1e-9, 100.0)]
    return np.unique(np.r_[t, t_max])


@lru_cache(maxsize=None)
def _columns(species: str, t_key: tuple | None) -> dict:
    import chemicals

    fluid, cas, method, is_element = GASES[species]
    t = grid(fluid) if t_key is None else np.asarray(t_key, float)
    cp, dh, ds = coolprop_ideal_gas(fluid, t)
    s = chemicals.S0g(cas, method=method) + ds
    cols = dict(t_k=t, cp_j_mol_k=cp, s_j_mol_k=s, h_minus_href_j_mol=dh, gef_j_mol_k=s - dh / t)
    if is_element:
        cols.update(dfh_j_mol=np.zeros_like(t), dfg_j_mol=np.zeros_like(t), log_kf=np.zeros_like(t))
    return cols


def columns(species: str, t_k=None, rounded: bool = True) -> dict:
    """Fresh column arrays (SI) of ``species``' table; ``t_k`` overrides the grid."""
    cols = {k: v.copy() for k, v in _columns(species, None if t_k is None else tuple(np.asarray(t_k, float))).items()}
    if rounded:
        for k in ("cp_j_mol_k", "s_j_mol_k", "gef_j_mol_k"):
            cols[k] = np.round(cols[k], 3)
        cols["h_minus_href_j_mol"] = np.round(cols["h_minus_href_j_mol"], 0)
    return cols


def table(species: str, source: str = "cp", t_k=None, rounded: bool = True, **override):
    """A ``table_record`` of ``species``; ``override`` replaces or adds columns (SI)."""
    cols = columns(species, t_k, rounded)
    cols.update(override)
    t = cols.pop("t_k")
    return table_record(species, source, t, **cols)


def element_meta(*species: str) -> pd.DataFrame:
    """species-csv rows declaring ``species`` reference elements."""
    return pd.DataFrame({"species": list(species), "reference_element": True,
                         "stated_molar_mass_g_mol": np.nan, "aliases": ""})
