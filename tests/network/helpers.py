"""Species and reaction frames for the network tests.

Species are built with a constant heat capacity so that every value a test expects can be
written in closed form (Kirchhoff's law): H(T) = ΔfH°(298.15) + Cp (T − 298.15),
S(T) = S°(298.15) + Cp ln(T/298.15).
"""
from __future__ import annotations

import importlib.util
import json
from pathlib import Path

import numpy as np
import pandas as pd

from pipeline.constants import R, T_REF
from pipeline.ingest import base as ib
from tests.builders import context, poly_record, table_record


def const_cp(key: str, dfh_j_mol: float, s298_j_mol_k: float, cp_j_mol_k: float, *, source: str = "poly",
             t_range=(200.0, 3000.0)):
    """A one-segment polynomial record with constant Cp (canonical a3 = Cp/R)."""
    a3 = cp_j_mol_k / R
    coef = np.zeros(9)
    coef[2] = a3
    coef[7] = dfh_j_mol / R - a3 * T_REF            # H = R (a3 T + b1)
    coef[8] = s298_j_mol_k / R - a3 * np.log(T_REF)  # S = R (a3 ln T + b2)
    return poly_record(key, source, [(t_range[0], t_range[1], coef)])


def const_cp_table(key: str, dfh_j_mol: float, u_dfh_j_mol: float, s298_j_mol_k: float, cp_j_mol_k: float,
                   *, source: str = "tab", t_k=(T_REF, 400.0, 600.0, 800.0, 1000.0)):
    """A table record with constant Cp that states ΔfH°(298.15) and its uncertainty."""
    t = np.asarray(t_k, float)
    n = len(t)
    dfh = np.full(n, np.nan)
    udfh = np.full(n, np.nan)
    dfh[0], udfh[0] = dfh_j_mol, u_dfh_j_mol
    return table_record(key, source, t, cp_j_mol_k=np.full(n, cp_j_mol_k),
                        s_j_mol_k=s298_j_mol_k + cp_j_mol_k * np.log(t / T_REF),
                        h_minus_href_j_mol=cp_j_mol_k * (t - T_REF), dfh_j_mol=dfh, uncertainty_dfh_j_mol=udfh)


def reactions(rows) -> pd.DataFrame:
    """rows: (id, {species: ν}, quantity, t_k, value, uncertainty[, series]) → reactions frame."""
    recs = []
    for i, r in enumerate(rows):
        rid, st, q, t, v, u = r[:6]
        series = r[6] if len(r) > 6 else None
        recs.append(dict(reaction_id=rid, source_id="meas", file="meas.csv", line=i + 2,
                         equation=" + ".join(f"{-n:g} {k}" for k, n in st.items() if n < 0) + " = "
                         + " + ".join(f"{n:g} {k}" for k, n in st.items() if n > 0),
                         stoich_json=json.dumps(st), quantity=q, t_k=float(t), value=float(v),
                         uncertainty=float(u), unit="J/mol" if q != "log_k" else "", series=series,
                         method="test"))
    return ib.frame(recs, ib.REACTION_COLUMNS)


def reference_meta(*keys: str) -> pd.DataFrame:
    """species-csv rows declaring ``keys`` as elements in their reference state."""
    return pd.DataFrame({"species": list(keys), "aliases": "", "stated_molar_mass_g_mol": np.nan,
                         "reference_element": True, "geometry": None, "cas": None, "source_id": "meta",
                         "file": "species.csv", "line": np.arange(len(keys)) + 2})


def network_context(poly=(), tables=(), rx=None, refs=("C(cr,graphite)",), config=None):
    return context(poly=list(poly), tables=list(tables), species_meta=reference_meta(*refs), reactions=rx,
                   config=config)


def network_bench():
    """bench/network_scale.py as a module (its synthetic network generator)."""
    spec = importlib.util.spec_from_file_location(
        "network_scale", Path(__file__).resolve().parents[2] / "bench" / "network_scale.py")
    module = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(module)
    return module
