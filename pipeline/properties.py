"""Curated properties of every species on the standard grid, with formation values.

Grid (per preferred record): 298.15 K, then every 100 K from max(100 K, the record's lower
bound rounded up to the next multiple of 100 K) up to its upper bound. 298.15 K is on the
grid when the record's range reaches it within :data:`T298_ALLOWANCE_K` (many NASA records
start at 300 K and are, by convention, used at 298.15 K).

Columns: Cp, H (absolute, H(298.15) = ΔfH°), S, G = H − TS, H − H(298.15),
gef = −(G − H(298.15))/T = S − (H − H(298.15))/T, and, where the elements' reference
species exist, ΔfH, ΔfG and log Kf:

    ΔfH(T) = H(T) − Σ_el ν_el H_ref,el(T),   ΔfG(T) = G(T) − Σ_el ν_el G_ref,el(T),
    log Kf = −ΔfG / (R T ln 10)

with ν_el the element's count in the species divided by its count in the reference
species' formula (½ O2 per O). Reference species: those declared ``reference_element`` in
species-csv (single-element, neutral); an element without one falls back to its
conventional gaseous form (H2, N2, O2, F2, Cl2, noble gases; Cox, Wagman & Medvedev,
*CODATA Key Values for Thermodynamics*, 1989) when that species exists. When several
reference species of one element are declared (e.g. Fe(cr) and Fe(l)), the one with the
lowest G per atom at each T is used — the stable reference state, as in the JANAF
convention (Chase, *NIST-JANAF Thermochemical Tables*, 4th ed., 1998). Ions use the
electron gas e-(g) as the reference for charge (ν_e = −z), when that species exists.
A reference is used only inside its record's range (298.15 K allowance as above).
For a tabulated preferred record whose H is not absolute, ΔfH, ΔfG and log Kf at a grid
temperature that is also a tabulated row come from the table itself.
"""
from __future__ import annotations

import json
from typing import Callable

import numpy as np
import pandas as pd

from .constants import GASEOUS_REFERENCE_ATOMICITY, LN10, R, T_REF

#: A record whose range starts at most this far above 298.15 K still gets the 298.15 K row [K].
T298_ALLOWANCE_K = 5.0

PROPERTY_COLUMNS = ("species", "record_id", "t_k", "cp_j_mol_k", "h_j_mol", "s_j_mol_k", "g_j_mol",
                    "h_minus_h298_j_mol", "gef_j_mol_k", "dfh_j_mol", "dfg_j_mol", "log_kf")


def standard_grid(t_low_k, t_high_k) -> tuple[np.ndarray, np.ndarray]:
    """The standard grid of many ranges at once.

    Returns (owner, t_k): ``owner[i]`` is the index of the range that grid point ``t_k[i]``
    belongs to; points are ascending within each range.
    """
    lo = np.asarray(t_low_k, float)
    hi = np.asarray(t_high_k, float)
    start = np.maximum(100.0, np.ceil(lo / 100.0 - 1e-9) * 100.0)
    stop = np.floor(hi / 100.0 + 1e-9) * 100.0
    n = np.maximum(0, np.round((stop - start) / 100.0).astype(int) + 1)
    owner = np.repeat(np.arange(len(lo)), n)
    offset = np.arange(len(owner)) - np.repeat(np.cumsum(n) - n, n)
    t = start[owner] + 100.0 * offset
    has298 = in_range(lo, hi, T_REF)
    owner = np.concatenate([owner, np.flatnonzero(has298)])
    t = np.concatenate([t, np.full(int(has298.sum()), T_REF)])
    order = np.lexsort((t, owner))
    return owner[order], t[order]


def in_range(t_low_k, t_high_k, t_k) -> np.ndarray:
    """T inside [t_low, t_high], 298.15 K admitted down to t_low − :data:`T298_ALLOWANCE_K`."""
    t = np.asarray(t_k, float)
    lo = np.asarray(t_low_k, float) - np.where(np.isclose(t, T_REF), T298_ALLOWANCE_K, 0.0)
    return (t >= lo - 1e-9) & (t <= np.asarray(t_high_k, float) + 1e-9)


def stoichiometry(species: pd.DataFrame) -> pd.DataFrame:
    """Long frame ``species, element, count`` from ``elements_json`` and ``charge``
    (the electron as element ``e`` with count −charge)."""
    rows = []
    for key, ej, z in zip(species["species"], species["elements_json"], species["charge"].fillna(0)):
        els = json.loads(ej) if isinstance(ej, str) else {}
        for el, n in els.items():
            if n:
                rows.append((key, el, float(n)))
        if z:
            rows.append((key, "e", -float(z)))
    return pd.DataFrame(rows, columns=["species", "element", "count"])


def element_references(species: pd.DataFrame) -> pd.DataFrame:
    """``element, species, atoms`` — the reference species of each element (module doc)."""
    st = stoichiometry(species)
    n_el = st.groupby("species")["element"].transform("size")
    single = st[(n_el == 1) & (st["element"] != "e")]
    flag = species.set_index("species")["reference_element"].astype("boolean").fillna(False).astype(bool)
    charge = species.set_index("species")["charge"].fillna(0)
    declared = single[single["species"].map(flag).fillna(False).astype(bool).to_numpy()
                      & (single["species"].map(charge) == 0).to_numpy()]
    refs = declared.rename(columns={"count": "atoms"})[["element", "species", "atoms"]]
    keys = set(species["species"])
    extra = []
    for el, n in GASEOUS_REFERENCE_ATOMICITY.items():
        key = f"{el}{n if n > 1 else ''}(g)"
        if el not in set(refs["element"]) and key in keys:
            extra.append((el, key, float(n)))
    if "e-(g)" in keys:
        extra.append(("e", "e-(g)", 1.0))
    out = pd.concat([refs, pd.DataFrame(extra, columns=["element", "species", "atoms"])], ignore_index=True)
    return out.sort_values(["element", "species"]).reset_index(drop=True)


#: (reference species (k,), T (k,)) → H [J/mol], G [J/mol], NaN outside the reference's range.
RefHG = Callable[[np.ndarray, np.ndarray], tuple[np.ndarray, np.ndarray]]


def formation(rows: pd.DataFrame, species: pd.DataFrame, refs: pd.DataFrame, ref_hg: RefHG) -> pd.DataFrame:
    """ΔfH, ΔfG [J/mol] and log Kf for rows ``species, t_k, h_j_mol, g_j_mol``.

    refs : :func:`element_references`; ref_hg : evaluates reference species (module doc).
    Returns a frame aligned with ``rows`` (same index) holding dfh_j_mol, dfg_j_mol, log_kf.
    """
    out = pd.DataFrame({"dfh_j_mol": np.nan, "dfg_j_mol": np.nan, "log_kf": np.nan}, index=rows.index)
    if not len(rows) or not len(refs):
        return out
    st = stoichiometry(species[species["species"].isin(set(rows["species"]))])
    covered = st.assign(ok=st["element"].isin(set(refs["element"]))).groupby("species")["ok"].all()
    st = st[st["species"].map(covered).astype(bool)]
    if not len(st):
        return out
    # reference functions on every temperature used, per element: the lowest G per atom
    temps = np.unique(rows["t_k"].to_numpy(float))
    rr = refs.loc[refs.index.repeat(len(temps))].reset_index(drop=True)
    rr["t_k"] = np.tile(temps, len(refs))
    h, g = ref_hg(rr["species"].to_numpy(dtype=object), rr["t_k"].to_numpy(float))
    rr["h_atom"] = h / rr["atoms"].to_numpy(float)
    rr["g_atom"] = g / rr["atoms"].to_numpy(float)
    rr = rr[np.isfinite(rr["g_atom"]) & np.isfinite(rr["h_atom"])]
    best = rr.sort_values(["element", "t_k", "g_atom", "species"], kind="stable").drop_duplicates(["element", "t_k"])
    # Σ ν H_ref, Σ ν G_ref per (species, T); NaN when any element lacks a reference at T
    r = rows[["species", "t_k"]].reset_index().merge(st, on="species")
    r = r.merge(best[["element", "t_k", "h_atom", "g_atom"]], on=["element", "t_k"], how="left")
    r["nh"] = r["count"] * r["h_atom"]
    r["ng"] = r["count"] * r["g_atom"]
    r["missing"] = r["nh"].isna() | r["ng"].isna()
    grp = r.groupby("index")
    missing = grp["missing"].any()
    sh = grp["nh"].sum().mask(missing).reindex(rows.index)
    sg = grp["ng"].sum().mask(missing).reindex(rows.index)
    out["dfh_j_mol"] = rows["h_j_mol"].astype(float) - sh
    out["dfg_j_mol"] = rows["g_j_mol"].astype(float) - sg
    out["log_kf"] = -out["dfg_j_mol"] / (R * rows["t_k"].astype(float) * LN10)
    return out


def curated_properties(preferred: pd.DataFrame, records: pd.DataFrame, species: pd.DataFrame,
                       functions, table_points: pd.DataFrame | None = None) -> pd.DataFrame:
    """The ``properties`` table: every species' preferred record on its standard grid.

    Parameters
    ----------
    preferred : ``species, preferred_record_id``.
    records : records frame (record_id, kind, t_low_k, t_high_k).
    species : species table (elements_json, charge, reference_element).
    functions : :class:`~pipeline.functions.RecordFunctions` over the records.
    table_points : tabulated rows, for ΔfH/ΔfG/log Kf a table gives where H is not absolute.
    """
    pr = preferred.dropna(subset=["preferred_record_id"]).merge(
        records[["record_id", "t_low_k", "t_high_k"]], left_on="preferred_record_id", right_on="record_id")
    if not len(pr):
        return pd.DataFrame(columns=list(PROPERTY_COLUMNS))
    owner, t = standard_grid(pr["t_low_k"].to_numpy(float), pr["t_high_k"].to_numpy(float))
    rid = pr["record_id"].to_numpy(dtype=object)[owner]
    v = functions.evaluate(rid, t)
    with np.errstate(invalid="ignore", divide="ignore"):
        gef = v.s - v.h_minus_h298 / t
    rows = pd.DataFrame({"species": pr["species"].to_numpy(dtype=object)[owner], "record_id": rid, "t_k": t,
                         "cp_j_mol_k": v.cp, "h_j_mol": v.h, "s_j_mol_k": v.s, "g_j_mol": v.g,
                         "h_minus_h298_j_mol": v.h_minus_h298, "gef_j_mol_k": gef})
    refs = element_references(species)
    ref_rec = preferred.set_index("species")["preferred_record_id"]
    refs = refs[refs["species"].isin(ref_rec.dropna().index)]
    rng = records.set_index("record_id")[["t_low_k", "t_high_k"]]

    def ref_hg(keys, temps):
        rids = ref_rec.loc[keys].to_numpy(dtype=object)
        vv = functions.evaluate(rids, temps)
        ok = in_range(rng.loc[rids, "t_low_k"].to_numpy(float), rng.loc[rids, "t_high_k"].to_numpy(float), temps)
        return np.where(ok, vv.h, np.nan), np.where(ok, vv.g, np.nan)

    form = formation(rows, species, refs, ref_hg)
    rows = pd.concat([rows, form], axis=1)
    if table_points is not None and len(table_points):
        tp = table_points[["record_id", "t_k", "dfh_j_mol", "dfg_j_mol", "log_kf"]]
        m = rows[["record_id", "t_k"]].reset_index().merge(tp, on=["record_id", "t_k"], how="inner")
        m = m.drop_duplicates("index").set_index("index")
        for c in ("dfh_j_mol", "dfg_j_mol", "log_kf"):
            fill = m[c].reindex(rows.index)
            rows[c] = rows[c].where(rows[c].notna(), fill)
    rows = rows.sort_values(["species", "t_k"], kind="stable").reset_index(drop=True)
    return rows[list(PROPERTY_COLUMNS)]
