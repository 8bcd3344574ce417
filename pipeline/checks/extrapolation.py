"""Behaviour of a polynomial just outside its stated range."""
from __future__ import annotations

import numpy as np
import pandas as pd

from ..constants import R
from ..findings import empty_findings, make_findings
from ..thermo import COEF_COLUMNS
from .context import CheckContext, cp_extrema
from .heat_capacity import CP_TRANSLATION_R, gas_ceiling_r
from .registry import check


@check("range.extrapolation", tolerances={"low_fraction": 0.5, "low_min_k": 50.0, "high_factor": 1.5})
def range_extrapolation(ctx: CheckContext) -> pd.DataFrame:
    """A polynomial extrapolated a little beyond its range keeps a physical Cp.

    Relation: simulations routinely evaluate fits slightly outside their stated range, so
    the end segments, extended from max(T_low × 0.5, 50 K) up to T_low and from T_high up
    to 1.5 × T_high, must keep Cp > 0 (thermal stability) and, for a gas, within the
    ideal-gas bounds 5/2 R … harmonic limit of ``cp.gas-floor`` and ``cp.gas-ceiling``
    (the same margins, read from those checks' configuration, so one setting governs both).
    Evaluated exactly: ``cp_extrema`` on the extended intervals (ends plus the real roots
    of dCp/dT), so no excursion between grid points is missed. Tables are never
    extrapolated (``functions`` returns NaN outside them) and are not checked.
    Tolerance: warning if Cp ≤ 0 anywhere on the extensions; info if it only leaves the
    gas bounds. Extension sizes configurable (``low_fraction``, ``low_min_k``,
    ``high_factor``). Common practice.
    """
    cid = "range.extrapolation"
    seg = ctx.segment_species
    if len(seg) == 0:
        return empty_findings()
    first = seg.drop_duplicates("record_id", keep="first").reset_index(drop=True)
    last = seg.drop_duplicates("record_id", keep="last").reset_index(drop=True)
    t_low = first["t_low_k"].to_numpy(float)
    lo_start = np.maximum(t_low * ctx.tol(cid, "low_fraction"), ctx.tol(cid, "low_min_k"))
    t_high = last["t_high_k"].to_numpy(float)
    hi_end = t_high * ctx.tol(cid, "high_factor")
    # one interval per record and side; an empty side (e.g. T_low ≤ 50 K) collapses to its end
    coef = np.concatenate([first[list(COEF_COLUMNS)].to_numpy(float),
                           last[list(COEF_COLUMNS)].to_numpy(float)])
    a = np.concatenate([np.minimum(lo_start, t_low), t_high])
    b = np.concatenate([t_low, np.maximum(hi_end, t_high)])
    t_min, cp_min, t_max, cp_max = cp_extrema(coef, a, b)
    n = len(first)
    side = np.repeat(np.array(["below", "above"]), n)
    frame = pd.DataFrame({
        "record_id": np.tile(first["record_id"].to_numpy(object), 2),
        "species": np.tile(first["species"].to_numpy(object), 2),
        "source_id": np.tile(first["source_id"].to_numpy(object), 2),
        "state": np.tile(first["state"].to_numpy(object), 2),
        "n_atoms": np.tile(first["n_atoms"].to_numpy(float), 2),
        "geometry": np.tile(first["geometry"].to_numpy(object), 2),
        "t_low_k": np.tile(t_low, 2), "t_high_k": np.tile(t_high, 2),
        "a": a, "b": b, "side": side,
        "t_min": t_min, "cp_min": cp_min, "t_max": t_max, "cp_max": cp_max})
    frame = frame[frame["b"] > frame["a"]].reset_index(drop=True)
    if len(frame) == 0:
        return empty_findings()

    gas = (frame["state"] == "g").to_numpy()
    limit_r, atom = gas_ceiling_r(frame["n_atoms"].to_numpy(float), frame["geometry"].to_numpy(object))
    warn_f = np.where(atom, ctx.tol("cp.gas-ceiling", "atom_warning_factor"),
                      ctx.tol("cp.gas-ceiling", "molecule_warning_factor"))
    ceiling = warn_f * limit_r * R
    floor = (CP_TRANSLATION_R - ctx.tol("cp.gas-floor", "margin_r")) * R
    cp_lo = frame["cp_min"].to_numpy(float)
    cp_hi = frame["cp_max"].to_numpy(float)
    negative = cp_lo <= 0
    with np.errstate(invalid="ignore"):
        over = gas & (cp_hi > ceiling)
        under = gas & ~negative & (cp_lo < floor)
    # badness per row: negative Cp ranks first (severity), then the relative excursion
    score = np.where(negative, 1e6 + np.abs(cp_lo),
                     np.where(over, cp_hi / ceiling, 0.0) + np.where(under, floor / np.maximum(cp_lo, 1e-300), 0.0))
    frame = frame.assign(negative=negative, over=over, under=under, score=score,
                         ceiling=ceiling, floor=floor)
    bad = frame[frame["negative"] | frame["over"] | frame["under"]]
    if len(bad) == 0:
        return empty_findings()
    worst = bad.loc[bad.groupby("record_id")["score"].idxmax()]
    neg = worst["negative"].to_numpy()
    use_min = neg | (worst["under"].to_numpy() & ~worst["over"].to_numpy())
    t_k = np.where(use_min, worst["t_min"], worst["t_max"])
    observed = np.where(use_min, worst["cp_min"], worst["cp_max"])
    expected = np.where(neg, 0.0, np.where(use_min, worst["floor"], worst["ceiling"]))
    what = np.where(neg, "turns negative", np.where(use_min, "falls below translation's 5/2 R",
                                                    "rises above the ideal-gas ceiling"))
    msgs = [f"extrapolated {s} the stated range {lo:g}–{hi:g} K, Cp {w} "
            f"({o:.4g} J/(mol·K) at {t:.0f} K; bound {e:.4g})"
            for s, lo, hi, w, o, t, e in zip(worst["side"], worst["t_low_k"], worst["t_high_k"],
                                             what, observed, t_k, expected)]
    hint = np.where(neg, "the fit diverges just outside its data: do not extrapolate it, or "
                         "refit with more data or constrained ends",
                    "the fit bends away outside its data: widen or constrain the fit before "
                    "anyone extrapolates it")
    return make_findings(check_id=cid, severity=np.where(neg, "warning", "info"),
                         subject=worst["species"], subject_kind="species",
                         source_id=worst["source_id"], t_k=t_k, observed=observed,
                         expected=expected, tolerance=0.0, unit="J/(mol*K)", message=msgs,
                         hint=hint)
