"""Segment checks: continuity of Cp, H, S, G and of dCp/dT where two segments meet."""
from __future__ import annotations

import numpy as np
import pandas as pd

from ..findings import empty_findings, make_findings
from ..thermo import COEF_COLUMNS, evaluate
from .context import CheckContext
from .registry import check


def joints(ctx: CheckContext) -> pd.DataFrame:
    """One row per pair of consecutive segments of a record: lower and upper coefficients,
    the joint temperature (the lower segment's T_high) and the gap to the upper T_low."""
    seg = ctx.segment_species
    if len(seg) == 0:
        return pd.DataFrame()
    nxt = seg.shift(-1)
    same = (seg["record_id"] == nxt["record_id"]).to_numpy()
    lo = seg[same].reset_index(drop=True)
    hi = nxt[same].reset_index(drop=True)
    out = lo[["record_id", "species", "source_id"]].copy()
    out["t_joint"] = lo["t_high_k"].to_numpy(float)
    out["gap"] = hi["t_low_k"].to_numpy(float) - lo["t_high_k"].to_numpy(float)
    out["coef_lo"] = list(lo[list(COEF_COLUMNS)].to_numpy(float))
    out["coef_hi"] = list(hi[list(COEF_COLUMNS)].to_numpy(float))
    return out


@check("segment.discontinuity", tolerances={
    "cp_rel": 0.005, "h_j_mol": 100.0, "s_j_mol_k": 0.1, "g_j_mol": 200.0, "warning_fraction": 0.1})
def segment_discontinuity(ctx: CheckContext) -> pd.DataFrame:
    """Cp, H, S and G must agree where two segments of one record meet.

    Relation: at the joint T_j, Cp_lo(T_j) = Cp_hi(T_j), H_lo = H_hi, S_lo = S_hi and hence
    G_lo = G_hi; a jump means the two fits were made independently, or a coefficient is
    wrong. Tolerance: error when ΔCp > 0.5 % of Cp, ΔH > 100 J/mol, ΔS > 0.1 J/(mol·K) or
    ΔG > 200 J/mol; warning at a tenth of each (common practice in evaluating NASA fits:
    the published NASA Glenn fits join to far better than this, McBride, Zehe & Gordon,
    NASA/TP-2002-211556, 2002). A gap or overlap between the ranges is reported too.
    One finding per joint, naming the quantity furthest beyond its tolerance.
    """
    j = joints(ctx)
    if len(j) == 0:
        return empty_findings()
    cid = "segment.discontinuity"
    t = j["t_joint"].to_numpy(float)
    plo = evaluate(np.stack(j["coef_lo"].to_numpy()), t)
    phi = evaluate(np.stack(j["coef_hi"].to_numpy()), t)
    tol = {"cp": ctx.tol(cid, "cp_rel"), "h": ctx.tol(cid, "h_j_mol"),
           "s": ctx.tol(cid, "s_j_mol_k"), "g": ctx.tol(cid, "g_j_mol")}
    frac = ctx.tol(cid, "warning_fraction")
    scale_cp = np.maximum(np.abs(plo.cp), np.abs(phi.cp))
    delta = {"cp": np.abs(phi.cp - plo.cp) / np.where(scale_cp > 0, scale_cp, 1.0),
             "h": np.abs(phi.h - plo.h), "s": np.abs(phi.s - plo.s), "g": np.abs(phi.g - plo.g)}
    names = list(delta)
    ratio = np.stack([delta[k] / tol[k] for k in names], axis=1)
    worst = np.argmax(ratio, axis=1)
    worst_ratio = ratio[np.arange(len(t)), worst]
    gap = j["gap"].to_numpy(float)
    severity = np.where(worst_ratio > 1, "error", np.where(worst_ratio > frac, "warning", None))
    severity = np.where(np.abs(gap) > 1e-6, "error", severity)
    keep = severity != None  # noqa: E711  (object array comparison)
    if not keep.any():
        return empty_findings()
    units = {"cp": "1", "h": "J/mol", "s": "J/(mol*K)", "g": "J/mol"}
    labels = {"cp": "Cp (relative)", "h": "H", "s": "S", "g": "G"}
    lo_vals = {"cp": plo.cp, "h": plo.h, "s": plo.s, "g": plo.g}
    hi_vals = {"cp": phi.cp, "h": phi.h, "s": phi.s, "g": phi.g}
    rows = np.flatnonzero(keep)
    msgs, obs, tols, unit = [], [], [], []
    for r in rows:
        if abs(gap[r]) > 1e-6:
            kind = "gap" if gap[r] > 0 else "overlap"
            msgs.append(f"segments leave a {kind} of {abs(gap[r]):g} K at {t[r]:g} K")
            obs.append(gap[r]); tols.append(0.0); unit.append("K")
            continue
        k = names[worst[r]]
        parts = ", ".join(f"Δ{labels[q].split()[0]}={delta[q][r]:.3g}{'' if q == 'cp' else ' ' + units[q]}"
                          for q in names)
        msgs.append(f"{labels[k]} jumps at the {t[r]:g} K joint "
                    f"({lo_vals[k][r]:.6g} below, {hi_vals[k][r]:.6g} above; {parts})")
        obs.append(delta[k][r]); tols.append(tol[k]); unit.append(units[k])
    sel = j.iloc[rows]
    return make_findings(check_id=cid, severity=severity[rows], subject=sel["species"],
                         subject_kind="species", source_id=sel["source_id"], t_k=t[rows],
                         observed=obs, expected=0.0, tolerance=tols, unit=unit, message=msgs,
                         hint=["ranges fitted separately without joint constraints, or a "
                               "mistyped coefficient" if abs(gap[r]) <= 1e-6 else
                               "the stated ranges do not meet" for r in rows])


@check("segment.kink", tolerances={"slope_rel": 0.10, "slope_abs_j_mol_k2": 1.0e-3})
def segment_kink(ctx: CheckContext) -> pd.DataFrame:
    """The slope dCp/dT should not jump where two segments of one record meet.

    Relation: Cp(T) of a real substance within one phase is smooth, so at a joint T_j the
    two segments should share dCp/dT as well as Cp; a jump in slope is a kink that shows as
    a spike in derived quantities (e.g. the temperature derivative of Cp used by solvers)
    and usually means the segments were fitted without a slope constraint at the joint.
    Tolerance: warning when |dCp/dT_hi − dCp/dT_lo| exceeds both 10 % of the larger
    |dCp/dT| and 1e-3 J/(mol·K²) (the absolute floor keeps flat, nearly constant Cp from
    tripping the relative test); common practice. Derivatives from the canonical evaluator
    (``thermo.evaluate``, exact for the polynomial).
    """
    cid = "segment.kink"
    j = joints(ctx)
    if len(j) == 0:
        return empty_findings()
    t = j["t_joint"].to_numpy(float)
    d_lo = evaluate(np.stack(j["coef_lo"].to_numpy()), t).dcp_dt
    d_hi = evaluate(np.stack(j["coef_hi"].to_numpy()), t).dcp_dt
    jump = np.abs(d_hi - d_lo)
    scale = np.maximum(np.abs(d_lo), np.abs(d_hi))
    rel, floor = ctx.tol(cid, "slope_rel"), ctx.tol(cid, "slope_abs_j_mol_k2")
    tol = np.maximum(rel * scale, floor)
    keep = np.flatnonzero(jump > tol)
    if len(keep) == 0:
        return empty_findings()
    sel = j.iloc[keep]
    flip = np.sign(d_lo[keep]) * np.sign(d_hi[keep]) < 0
    msgs = [f"dCp/dT jumps from {a:.3g} to {b:.3g} J/(mol·K²) at the {tj:g} K joint "
            f"({100 * q:.0f} % of the larger slope)"
            for a, b, tj, q in zip(d_lo[keep], d_hi[keep], t[keep], jump[keep] / np.maximum(scale[keep], 1e-300))]
    hint = np.where(flip, "the slope changes sign at the joint: the segments were fitted separately "
                          "and one bends away near its end",
                    "the segments were fitted without a slope constraint at the joint")
    return make_findings(check_id=cid, severity="warning", subject=sel["species"],
                         subject_kind="species", source_id=sel["source_id"], t_k=t[keep],
                         observed=jump[keep], expected=0.0, tolerance=tol[keep],
                         unit="J/(mol*K^2)", message=msgs, hint=hint)
