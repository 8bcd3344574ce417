"""Standard-state conversion of sources whose reference pressure differs from the database's.

For p_s = a source's standard pressure and p° = the database's (inputs.md):

* a gas's own S and gef gain R ln(p_s/p°); its G loses RT ln(p_s/p°); H and Cp unchanged;
  a condensed phase's own functions are unchanged (its molar volume makes the pressure
  effect V Δp ≈ 2e-5 m³/mol × 1325 Pa ≈ 0.03 J/mol, far inside every tolerance);
* a tabulated ΔfG changes by −Δn RT ln(p_s/p°), Δn = (1 if the species is a gas) − Σ of
  the formation reaction's coefficients of gaseous reference elements; log Kf follows;
* a measured ΔrG or log K of a reaction changes likewise with Δn = Σ ν over gaseous species.

The ideal-gas relation S(p) = S(p°) − R ln(p/p°) is standard (e.g. Atkins & de Paula,
*Physical Chemistry*, 2006, §3.3); R ln(1.01325) = 0.1094 J/(mol·K).
"""
from __future__ import annotations

import json
import math

import numpy as np
import pandas as pd

from ..constants import GASEOUS_REFERENCE_ATOMICITY, LN10, R
from ..findings import make_findings
from ..functions import member


def reference_gas_atomicity(species: pd.DataFrame) -> dict[str, float]:
    """Element → atoms per molecule of its gaseous reference species.

    The database's own declared reference species win; otherwise the standard table.
    """
    out = dict(GASEOUS_REFERENCE_ATOMICITY)
    ref = species[species["reference_element"].astype(bool)]
    for els, state, n_atoms in zip(ref["elements_json"], ref["state"], ref["n_atoms"]):
        e = json.loads(els)
        if len(e) == 1:
            el = next(iter(e))
            if state == "g":
                out[el] = float(n_atoms)
            else:
                out.pop(el, None)
    return out


def formation_delta_n(species: pd.DataFrame, only=None) -> pd.Series:
    """Δn of gas in each species' formation reaction from its reference elements.

    Element counts come from the species' formulas, parsed at once (the same counts as its
    ``elements_json``), and are summed in symbol order as a Python loop would. ``only``: the
    species keys wanted (default all); the reference elements come from all of ``species``."""
    from ..formula import ELECTRON, parse_formulas

    atom = reference_gas_atomicity(species)
    if only is not None:
        species = species[_isin(species["species"], set(only))]
    b = parse_formulas(species["formula"].to_numpy(object))
    gaseous = np.array([s in atom and s != ELECTRON for s in b.symbols], bool)[b.sym]
    atoms = np.array([atom.get(s, 1.0) for s in b.symbols])[b.sym]
    total = np.bincount(b.row, np.where(gaseous, b.count / atoms, 0.0), minlength=len(species))
    gas = (species["state"].to_numpy(object) == "g").astype(float)
    return pd.Series(gas - total, index=species["species"].to_numpy())


def _isin(values: pd.Series, pool: set) -> np.ndarray:
    """Elementwise ``value in pool`` for text keys, as :func:`pipeline.functions.member`
    finds it, with Arrow's hash kernel on an Arrow-backed column as it is (no Python object
    per row); anything else goes through :func:`~pipeline.functions.member`."""
    import pyarrow as pa
    import pyarrow.compute as pc

    if not len(pool) or not len(values):
        return np.zeros(len(values), bool)
    try:
        arr = pa.array(values, from_pandas=True)
        if not (pa.types.is_string(arr.type) or pa.types.is_large_string(arr.type)):
            raise TypeError(arr.type)
        value_set = pa.array(list(pool), arr.type)
    except (pa.ArrowInvalid, pa.ArrowTypeError, TypeError):
        return member(values, pool)
    return pc.is_in(arr, value_set=value_set, skip_nulls=True).to_numpy(zero_copy_only=False)


def standard_state(run) -> None:
    """Convert every source whose ``reference_pressure_bar`` differs from the database's."""
    f = run.frames
    p_db = run.p_db_bar
    rec = f["records"]
    pressure = {src.id: src.reference_pressure_bar for src in run.manifest.sources}
    rec["source_pressure_bar"] = (rec["source_id"].map(pressure).astype(float) if len(rec)
                                  else pd.Series(np.nan, index=rec.index))
    for src in run.manifest.sources:
        ratio = src.reference_pressure_bar / p_db
        if math.isclose(ratio, 1.0, rel_tol=1e-12):
            continue
        lnr = math.log(ratio)
        state = f["species"].set_index("species")["state"]
        recs = rec[(rec["source_id"] == src.id).to_numpy(bool)]
        gas_ids = set(recs.loc[recs["species"].map(state).eq("g"), "record_id"])
        seg = f["segments"]
        m = _isin(seg["record_id"], gas_ids)
        seg.loc[m, "b2"] = seg.loc[m, "b2"].astype(float) + lnr
        tp = f["table_points"]
        tm = _isin(tp["record_id"], set(recs["record_id"])) if len(tp) else np.zeros(0, bool)
        if tm.any():            # the source's table rows (none: nothing to convert there)
            gm = tm & _isin(tp["record_id"], gas_ids)
            for col in ("s_j_mol_k", "gef_j_mol_k"):
                tp.loc[gm, col] = tp.loc[gm, col].astype(float) + R * lnr
            dn = formation_delta_n(f["species"], only=set(recs["species"]))
            sp_of = tp.loc[tm, "record_id"].map(dict(zip(recs["record_id"], recs["species"])))
            dn_rows = sp_of.map(dn).astype(float).to_numpy()
            t = tp.loc[tm, "t_k"].astype(float).to_numpy()
            tp.loc[tm, "dfg_j_mol"] = tp.loc[tm, "dfg_j_mol"].astype(float) - dn_rows * R * t * lnr
            tp.loc[tm, "log_kf"] = tp.loc[tm, "log_kf"].astype(float) + dn_rows * lnr / LN10
        rx = f["reactions"]
        if len(rx):
            rm = (rx["source_id"] == src.id) & rx["quantity"].isin(["drg", "log_k"])
            dn = [sum(v for k, v in json.loads(s).items() if k.endswith("(g)") or "(g," in k)
                  for s in rx.loc[rm, "stoich_json"]]
            dn = np.asarray(dn, float)
            t = rx.loc[rm, "t_k"].astype(float).to_numpy()
            is_g = (rx.loc[rm, "quantity"] == "drg").to_numpy()
            val = rx.loc[rm, "value"].astype(float).to_numpy()
            rx.loc[rm, "value"] = np.where(is_g, val - dn * R * t * lnr, val + dn * lnr / LN10)
        run.add_findings(make_findings(
            check_id="schema.standard-state", severity="info", subject=src.id, subject_kind="source",
            source_id=src.id, observed=src.reference_pressure_bar, expected=p_db, unit="bar",
            message=(f"{src.id} is at {src.reference_pressure_bar:g} bar: converted to {p_db:g} bar "
                     f"(gas S and gef +{R * lnr:.4f} J/(mol·K); ΔfG, log Kf, ΔrG, log K by their Δn)"),
            hint="recorded in records.source_pressure_bar"))
