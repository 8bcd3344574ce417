"""Composition checks: stated molar masses against IUPAC standard atomic weights."""
from __future__ import annotations

import numpy as np
import pandas as pd
import periodictable

from ..findings import empty_findings, make_findings
from ..formula import INTERVAL_ELEMENTS
from .context import CheckContext
from .registry import check


@check("composition.molar-mass", tolerances={"base_g_mol": 0.01, "per_interval_atom_g_mol": 0.01})
def composition_molar_mass(ctx: CheckContext) -> pd.DataFrame:
    """A stated molar mass equals the sum of the standard atomic weights of its formula.

    Relation: M = Σ n_i A_r(i) g/mol (ions: ∓ the electron's 5.486e-4 g/mol per charge),
    with the conventional (abridged) IUPAC standard atomic weights (CIAAW, "Standard
    atomic weights of the elements 2021", Pure Appl. Chem. 94 (2022) 573; values from
    ``periodictable``). Stated masses come from species-csv and from records that carry
    one (NASA-9 header, TM-4513 line 1). Tolerance: error beyond 0.01 g/mol + 0.01 g/mol
    per atom of an element whose standard atomic weight is an interval (H, Li, B, C, N,
    O, Mg, Si, S, Cl, Ar, Br, Tl, Pb): older compilations use other, equally valid,
    values inside those intervals (CIAAW 2021; the tolerance is common practice).
    """
    cid = "composition.molar-mass"
    sp = ctx.species
    if len(sp) == 0:
        return empty_findings()
    el = ctx.elements
    # atoms of interval elements per species (long counts, summed per species)
    pos = pd.Index(sp["species"].to_numpy(object)).get_indexer(el["species"].to_numpy(object))
    interval = el["element"].isin(list(INTERVAL_ELEMENTS)).to_numpy() & (pos >= 0)
    n_interval = np.bincount(pos[interval], el["n"].to_numpy(float)[interval], minlength=len(sp))
    base = sp[["species", "molar_mass_g_mol"]].assign(n_interval=n_interval)
    parts = []
    stated_sp = pd.to_numeric(sp.get("stated_molar_mass_g_mol"), errors="coerce")
    if stated_sp is not None:
        src = sp["meta_source_id"] if "meta_source_id" in sp else pd.Series(None, index=sp.index, dtype=object)
        m = stated_sp.notna()
        parts.append(base[m].assign(stated=stated_sp[m].to_numpy(float), source_id=src[m].to_numpy(object),
                                    where="species list"))
    rec = ctx.records
    if "stated_molar_mass_g_mol" in rec:
        stated_rec = pd.to_numeric(rec["stated_molar_mass_g_mol"], errors="coerce")
        r = rec[stated_rec.notna()].assign(stated=stated_rec[stated_rec.notna()])
        if len(r):
            r = r[["species", "source_id", "stated"]].merge(base, on="species", how="left")
            parts.append(r.assign(where="record"))
    if not parts:
        return empty_findings()
    df = pd.concat(parts, ignore_index=True)
    tol = ctx.tol(cid, "base_g_mol") + ctx.tol(cid, "per_interval_atom_g_mol") * df["n_interval"].to_numpy(float)
    diff = df["stated"].to_numpy(float) - df["molar_mass_g_mol"].to_numpy(float)
    keep = np.flatnonzero(np.abs(diff) > tol)
    if len(keep) == 0:
        return empty_findings()
    sel = df.iloc[keep].reset_index(drop=True)
    d = diff[keep]
    # recognisable pattern: the difference is one atom of an element of the formula
    counts_sel = (el[el["species"].isin(set(sel["species"]))]
                  .pivot(index="species", columns="element", values="n")
                  .reindex(sel["species"].to_numpy(object)).fillna(0.0).astype(float))
    hint = np.full(len(sel), "the stated mass or the formula is wrong (or uses outdated atomic weights)",
                   dtype=object)
    for el in counts_sel.columns:
        w = periodictable.elements.symbol(el).mass
        match = (counts_sel[el].to_numpy() > 0) & (np.abs(np.abs(d) - w) < 0.05)
        hint = np.where(match, f"off by one {el} atom ({w:.3f} g/mol): the formula's {el} count or "
                               "the stated mass is wrong", hint)
    msgs = [f"stated molar mass {s:.5g} g/mol ({wh}) differs from the formula's "
            f"{m:.5g} g/mol by {x:+.4g} g/mol" for s, wh, m, x in
            zip(sel["stated"], sel["where"], sel["molar_mass_g_mol"], d)]
    return make_findings(check_id=cid, severity="error", subject=sel["species"],
                         subject_kind="species", source_id=sel["source_id"],
                         observed=sel["stated"], expected=sel["molar_mass_g_mol"],
                         tolerance=tol[keep], unit="g/mol", message=msgs, hint=hint)
