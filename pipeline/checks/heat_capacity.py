"""Heat-capacity checks: positivity and ideal-gas bounds."""
from __future__ import annotations

import numpy as np
import pandas as pd

from ..findings import empty_findings, make_findings
from .context import CheckContext, cp_extrema
from .registry import check


@check("cp.nonpositive")
def cp_nonpositive(ctx: CheckContext) -> pd.DataFrame:
    """Cp must be positive over a record's whole stated range.

    Relation: Cp = (∂H/∂T)_p > 0 for any stable phase (thermal stability, Callen,
    *Thermodynamics and an Introduction to Thermostatistics*, 2nd ed., 1985, §8.2).
    Polynomials: the exact minimum of Cp on each segment (ends and the real roots of
    dCp/dT, see ``cp_extrema``), so no excursion between grid points is missed.
    Tables: every tabulated Cp except the T = 0 row.
    Tolerance: none — error for any Cp ≤ 0 J/(mol·K).
    """
    parts = []
    seg = ctx.segment_species
    if len(seg):
        coef = seg[["a1", "a2", "a3", "a4", "a5", "a6", "a7", "b1", "b2"]].to_numpy(float)
        t_min, cp_min, _, _ = cp_extrema(coef, seg["t_low_k"].to_numpy(float), seg["t_high_k"].to_numpy(float))
        seg = seg.assign(t_min=t_min, cp_min=cp_min)
        worst = seg.loc[seg.groupby("record_id")["cp_min"].idxmin()]
        bad = worst[worst["cp_min"] <= 0]
        if len(bad):
            parts.append(make_findings(
                check_id="cp.nonpositive", severity="error", subject=bad["species"],
                subject_kind="species", source_id=bad["source_id"], t_k=bad["t_min"],
                observed=bad["cp_min"], expected=0.0, tolerance=0.0, unit="J/(mol*K)",
                message=[f"Cp falls to {c:.3g} J/(mol·K) at {t:.0f} K inside the stated range"
                         for c, t in zip(bad["cp_min"], bad["t_min"])],
                hint="a sign or exponent typo in a coefficient, or a fit used far outside its data"))
    tp = ctx.table_points
    if len(tp):
        tp = tp[(tp["t_k"] > 0) & tp["cp_j_mol_k"].notna()]
        tp = tp.merge(ctx.records[["record_id", "species"]], on="record_id", how="left")
        idx = tp.groupby("record_id")["cp_j_mol_k"].idxmin()
        worst = tp.loc[idx]
        bad = worst[worst["cp_j_mol_k"] <= 0]
        if len(bad):
            parts.append(make_findings(
                check_id="cp.nonpositive", severity="error", subject=bad["species"],
                subject_kind="species", source_id=bad["source_id"], t_k=bad["t_k"],
                observed=bad["cp_j_mol_k"], expected=0.0, tolerance=0.0, unit="J/(mol*K)",
                message=[f"tabulated Cp is {c:.3g} J/(mol·K) at {t:g} K"
                         for c, t in zip(bad["cp_j_mol_k"], bad["t_k"])],
                hint="a sign typo or a shifted column in the table"))
    return pd.concat(parts, ignore_index=True) if parts else empty_findings()
