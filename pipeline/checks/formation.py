"""Formation-property checks: reference elements, and stated ΔfH° against the polynomial."""
from __future__ import annotations

import numpy as np
import pandas as pd

from ..constants import CAL_TH_J, R, T_REF
from ..findings import empty_findings, make_findings
from ..functions import member
from .context import CheckContext
from .registry import check


def _reference_species(ctx: CheckContext) -> pd.Series:
    """Species keys declared as an element in its reference state."""
    sp = ctx.species
    if "reference_element" not in sp or len(sp) == 0:
        return pd.Series([], dtype=object)
    flag = sp["reference_element"].astype("boolean").fillna(False).astype(bool)
    return sp.loc[flag, "species"]


def _h298(ctx: CheckContext, record_ids: np.ndarray) -> np.ndarray:
    """H(298.15 K) [J/mol] of polynomial records (the segment holding 298.15 K, else the
    nearest end segment: the absolute-enthalpy convention defines H(298.15) by the formula
    even for a record whose range starts above it)."""
    if len(record_ids) == 0:
        return np.empty(0)
    return ctx.seg_index.evaluate_records(np.asarray(record_ids, dtype=str),
                                          np.full(len(record_ids), T_REF)).h


@check("formation.reference-element", tolerances={"warning_j_mol": 1.0, "error_j_mol": 10.0})
def formation_reference_element(ctx: CheckContext) -> pd.DataFrame:
    """An element in its reference state has zero enthalpy and Gibbs energy of formation.

    Relation: ΔfH° = ΔfG° = 0 at every T for the reference state of an element (its
    formation reaction is the identity; IUPAC Green Book, Cohen et al., *Quantities,
    Units and Symbols in Physical Chemistry*, 3rd ed., 2007, §2.11). Polynomials on the
    absolute-enthalpy convention therefore have H(298.15 K) = 0 (McBride, Zehe & Gordon,
    NASA/TP-2002-211556, 2002); tables have dfh = dfg = 0 on every row that gives them.
    Tolerance: warning beyond 1 J/mol (rounding of b1 or of a table), error beyond 10 J/mol
    (common practice).
    """
    cid = "formation.reference-element"
    ref = set(_reference_species(ctx))
    if not ref:
        return empty_findings()
    warn_t, err_t = ctx.tol(cid, "warning_j_mol"), ctx.tol(cid, "error_j_mol")
    rows = []
    rec = ctx.records[member(ctx.records["species"], ref)]
    poly = rec[(rec["kind"] == "polynomial") & member(rec["record_id"], ctx.seg_index.record_ids)]
    if len(poly):
        h = _h298(ctx, poly["record_id"].to_numpy())
        rows.append(pd.DataFrame({
            "species": poly["species"].to_numpy(object), "source_id": poly["source_id"].to_numpy(object),
            "t_k": T_REF, "observed": h, "what": "H(298.15 K) of the polynomial", "zero_at_ref": False}))
    tp = ctx.table_points
    tab_ids = rec.loc[rec["kind"] == "table", "record_id"]
    if len(tp) and len(tab_ids):
        pts = tp[member(tp["record_id"], tab_ids)].merge(rec[["record_id", "species"]], on="record_id")
        long = pd.concat([
            pts[["record_id", "species", "source_id", "t_k"]].assign(observed=pts["dfh_j_mol"], what="ΔfH"),
            pts[["record_id", "species", "source_id", "t_k"]].assign(observed=pts["dfg_j_mol"], what="ΔfG")],
            ignore_index=True)
        long = long[long["observed"].notna()]
        if len(long):
            long["absval"] = long["observed"].abs()
            at_ref = np.isclose(long["t_k"], T_REF, atol=1e-6)
            ok_ref = long[at_ref].groupby("record_id")["absval"].max() <= warn_t
            worst = long.loc[long.groupby("record_id")["absval"].idxmax()]
            worst = worst.assign(zero_at_ref=worst["record_id"].map(ok_ref).fillna(False).astype(bool))
            rows.append(worst[["species", "source_id", "t_k", "observed", "what", "zero_at_ref"]])
    if not rows:
        return empty_findings()
    df = pd.concat(rows, ignore_index=True)
    mag = df["observed"].abs().to_numpy(float)
    sev = np.where(mag > err_t, "error", np.where(mag > warn_t, "warning", None))
    keep = sev != None  # noqa: E711  (object array)
    if not keep.any():
        return empty_findings()
    df, sev = df[keep], sev[keep]
    msgs = [f"{w} of a reference element is {o:.4g} J/mol at {t:g} K; it must be 0"
            for w, o, t in zip(df["what"], df["observed"], df["t_k"])]
    hint = np.where(df["zero_at_ref"].to_numpy(bool),
                    "zero at 298.15 K but not at this T: the table continues past a transition of "
                    "the element's reference state; waive with that reason, or end the table there",
                    "the species is wrongly marked as a reference element, or its enthalpy "
                    "constant (b1 / ΔfH column) is not on the formation convention")
    return make_findings(check_id=cid, severity=sev, subject=df["species"], subject_kind="species",
                         source_id=df["source_id"], t_k=df["t_k"], observed=df["observed"],
                         expected=0.0, tolerance=np.where(sev == "error", err_t, warn_t),
                         unit="J/mol", message=msgs, hint=hint)


def _ratio_near(a: np.ndarray, b: np.ndarray, factor: float, rel: float = 0.01) -> np.ndarray:
    """|a| ≈ factor × |b| or |b| ≈ factor × |a| within ``rel``, same sign."""
    with np.errstate(divide="ignore", invalid="ignore"):
        q = a / b
    return (np.abs(q / factor - 1) < rel) | (np.abs(q * factor - 1) < rel)


@check("formation.stated-vs-polynomial", tolerances={"error_j_mol": 10.0})
def formation_stated_vs_polynomial(ctx: CheckContext) -> pd.DataFrame:
    """A ΔfH°(298.15) stated beside a polynomial equals the polynomial's own H(298.15 K).

    Relation: on the absolute-enthalpy convention H(298.15 K) = ΔfH°(298.15 K), so the
    value a file states with the coefficients (NASA-9 header, Shomate parameter H, the
    TM-4513 line-4 value) and b1 must agree (McBride, Zehe & Gordon, NASA/TP-2002-211556,
    2002; Shomate, J. Phys. Chem. 58 (1954) 368). A mismatch means the two were updated
    separately. Tolerance: error beyond 10 J/mol (the stated values carry 1 J/mol or better;
    common practice).
    """
    cid = "formation.stated-vs-polynomial"
    rec = ctx.records
    rec = rec[(rec["kind"] == "polynomial") & member(rec["record_id"], ctx.seg_index.record_ids)
              & pd.to_numeric(rec["stated_dfh_j_mol"], errors="coerce").notna()]
    if len(rec) == 0:
        return empty_findings()
    stated = rec["stated_dfh_j_mol"].to_numpy(float)
    h = _h298(ctx, rec["record_id"].to_numpy())
    diff = h - stated
    tol = ctx.tol(cid, "error_j_mol")
    keep = np.flatnonzero(np.abs(diff) > tol)
    if len(keep) == 0:
        return empty_findings()
    sel = rec.iloc[keep]
    s, p = stated[keep], h[keep]
    hint = np.select(
        [np.abs(p) <= tol,
         np.abs(s) <= tol,
         np.abs(p + s) <= tol,
         _ratio_near(p, s, 1000.0),
         _ratio_near(p, s, CAL_TH_J),
         _ratio_near(p, s, R)],
        ["the polynomial is written with H(298.15 K) = 0 (sensible enthalpy), not on the "
         "formation convention: add ΔfH°/R to b1",
         "the stated value is blank or zero while the polynomial carries a formation enthalpy",
         "opposite signs: a sign slip in the stated value or in b1",
         "a factor of 1000: kJ/mol read as J/mol (or the reverse)",
         "a factor of 4.184: cal read as J (or the reverse)",
         "a factor of R: ΔfH°/R stated where ΔfH° was meant (or the reverse)"],
        default="the stated ΔfH° and the coefficients come from different evaluations "
                "(ΔfH° updated without refitting b1, or the reverse)")
    msgs = [f"stated ΔfH°(298.15) {a:.6g} J/mol, polynomial gives H(298.15 K) = {b:.6g} J/mol "
            f"(difference {b - a:+.4g} J/mol)" for a, b in zip(s, p)]
    return make_findings(check_id=cid, severity="error", subject=sel["species"],
                         subject_kind="species", source_id=sel["source_id"], t_k=T_REF,
                         observed=p, expected=s, tolerance=tol, unit="J/mol", message=msgs,
                         hint=hint)
