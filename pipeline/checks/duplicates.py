"""Duplicate checks: two records of one species key (from two sources) must agree.

Only records of the same species key are compared: species that differ in label
(``C(cr,graphite)``, ``C(cr,diamond)``) are distinct species, never duplicates.
"""
from __future__ import annotations

import numpy as np
import pandas as pd

from ..constants import CAL_TH_J, R_LN_ATM
from ..findings import empty_findings, make_findings
from ..functions import member
from .context import CheckContext
from .registry import check

CID = "duplicate.disagreement"
#: Grid points compared per block (memory bound: a few tens of MB per block).
BLOCK_POINTS = 500_000


def record_pairs(ctx: CheckContext) -> pd.DataFrame:
    """Every unordered pair of records of one species key with a common T range.

    Columns: ``pair, species, state, rid_a, rid_b, src_a, src_b, lo, hi`` (common range [K]).
    """
    rec = ctx.records[["record_id", "species", "source_id", "t_low_k", "t_high_k"]]
    rec = rec[rec["species"].duplicated(keep=False).to_numpy()]     # a species with one record has no pair
    pairs = rec.merge(rec, on="species", suffixes=("_a", "_b"))
    pairs = pairs[pairs["record_id_a"] < pairs["record_id_b"]]
    lo = np.maximum(pairs["t_low_k_a"].to_numpy(float), pairs["t_low_k_b"].to_numpy(float))
    hi = np.minimum(pairs["t_high_k_a"].to_numpy(float), pairs["t_high_k_b"].to_numpy(float))
    out = pd.DataFrame({"species": pairs["species"].to_numpy(object),
                        "rid_a": pairs["record_id_a"].to_numpy(object), "rid_b": pairs["record_id_b"].to_numpy(object),
                        "src_a": pairs["source_id_a"].to_numpy(object), "src_b": pairs["source_id_b"].to_numpy(object),
                        "lo": lo, "hi": hi})
    out = out[out["hi"] > out["lo"]].reset_index(drop=True)
    state = ctx.species.set_index("species")["state"]
    out["state"] = out["species"].map(state)
    out["pair"] = np.arange(len(out))
    return out


def pair_grid(ctx: CheckContext, pairs: pd.DataFrame, spacing_k: float) -> pd.DataFrame:
    """Temperatures ``pair, t_k`` at which each pair is compared, sorted.

    A uniform grid over the common range with at most ``spacing_k`` between points (and
    at least 64 points), plus every tabulated temperature and segment boundary of either
    record inside it. Why this covers the range: between those nodes both records are
    smooth (a cubic spline piece, a polynomial segment), so their difference is smooth
    on the scale of the node spacing (≥ 50 K in practice); 20 K samples every 100 K table
    interval five times, and the nodes themselves — where a mistyped row or a segment
    step puts the worst disagreement — are always included.
    """
    width = (pairs["hi"] - pairs["lo"]).to_numpy(float)
    n = np.maximum(64, np.ceil(width / spacing_k).astype(int) + 1)
    p = np.repeat(pairs["pair"].to_numpy(), n)
    k = np.arange(n.sum()) - np.repeat(np.cumsum(n) - n, n)
    t = np.repeat(pairs["lo"].to_numpy(float), n) + np.repeat(width, n) * k / np.repeat(n - 1, n)
    grid = [pd.DataFrame({"pair": p, "t_k": t})]
    nodes = _nodes(ctx, np.concatenate([pairs["rid_a"].to_numpy(object), pairs["rid_b"].to_numpy(object)]))
    for side in ("rid_a", "rid_b"):
        m = pairs[["pair", side, "lo", "hi"]].merge(nodes, left_on=side, right_on="record_id")
        m = m[(m["t_k"] >= m["lo"]) & (m["t_k"] <= m["hi"])]
        grid.append(m[["pair", "t_k"]])
    g = pd.concat(grid, ignore_index=True).astype({"t_k": float})
    return g.drop_duplicates().sort_values(["pair", "t_k"], kind="stable").reset_index(drop=True)


def _nodes(ctx: CheckContext, record_ids: np.ndarray) -> pd.DataFrame:
    """``record_id, t_k``: every tabulated temperature and segment boundary of the records
    ``record_ids`` (selected by hash lookup: the database's nodes are never merged whole)."""
    tp, seg = ctx.table_points, ctx.segments
    tp = tp.loc[member(tp["record_id"], record_ids), ["record_id", "t_k"]]
    seg = seg.loc[member(seg["record_id"], record_ids), ["record_id", "t_low_k", "t_high_k"]]
    return pd.concat([tp, seg[["record_id", "t_low_k"]].rename(columns={"t_low_k": "t_k"}),
                      seg[["record_id", "t_high_k"]].rename(columns={"t_high_k": "t_k"})], ignore_index=True)


def _constant(x: pd.Series, group: np.ndarray, rel: float) -> pd.DataFrame:
    """Per group: mean and whether the values vary by less than ``rel`` of |mean|."""
    df = pd.DataFrame({"g": group, "x": x}).dropna()
    a = df.groupby("g")["x"].agg(["mean", "min", "max", "size"])
    a["constant"] = ((a["max"] - a["min"]) < rel * a["mean"].abs()) & (a["size"] >= 2)
    return a


@check(CID, tolerances={
    "cp_rel": 0.02, "s_j_mol_k": 1.0, "h_j_mol": 1000.0, "g_j_mol": 1000.0, "error_factor": 4.0,
    "ratio_rel": 0.01, "cp_equal_rel": 0.0005, "atm_s_j_mol_k": 0.01, "offset_h_j_mol": 100.0,
    "offset_s_j_mol_k": 0.05, "constant_rel": 0.1, "grid_k": 20.0})
def duplicate_disagreement(ctx: CheckContext) -> pd.DataFrame:
    """Two sources for one species key must agree over their common temperature range.

    Relation: on a grid over the common range (uniform, ≤ 20 K apart, plus every table
    row and segment boundary of either record), compare Cp, S, H − H(298.15) and, where
    both records give ΔfH (a polynomial's H(298.15), a table's dfh at 298.15 K), G = H − TS.
    Tolerance: warning beyond ΔCp 2 % (relative to the larger), ΔS 1 J/(mol·K),
    Δ(H − H298) 1 kJ/mol, ΔG 1 kJ/mol; error at 4 × these (common practice: independent
    evaluations of one species typically agree to a few tenths of these).
    Exact patterns are reported even below those tolerances, with a diagnosis hint:
    a ratio of 4.184 or 1000 (within 1 %) at every point in Cp, S or H − H298 → error
    (thermochemical calorie vs joule, NBS 1956; a kilo prefix); for a gas, S differing by
    a constant R ln 1.01325 = 0.1094 J/(mol·K) (± 0.01) with Cp equal within 0.05 % → error
    (1 atm vs 1 bar standard state, IUPAC 1982); a constant ΔH ≥ 100 J/mol with equal Cp
    → warning (different ΔfH, or H − H298 on another reference temperature); a constant
    ΔS ≥ 0.05 J/(mol·K) with equal Cp → warning (different entropy constant). "Constant"
    means varying by less than 10 % of its mean over the common range.
    One finding per pair of records (source ids joined by "+").
    """
    pairs = record_pairs(ctx)
    if not len(pairs):
        return empty_findings()
    tol = {k: ctx.tol(CID, k) for k in ("cp_rel", "s_j_mol_k", "h_j_mol", "g_j_mol", "error_factor",
                                        "ratio_rel", "cp_equal_rel", "atm_s_j_mol_k", "offset_h_j_mol",
                                        "offset_s_j_mol_k", "constant_rel", "grid_k")}
    # blocks of about BLOCK_POINTS grid points, so memory stays bounded on large databases
    n_pts = np.maximum(64, (pairs["hi"] - pairs["lo"]).to_numpy(float) / tol["grid_k"])
    block = np.floor(np.cumsum(n_pts) / BLOCK_POINTS).astype(int)
    parts = [_compare(ctx, pairs[block == b].reset_index(drop=True).assign(pair=lambda d: np.arange(len(d))), tol)
             for b in np.unique(block)]
    return pd.concat(parts, ignore_index=True) if parts else empty_findings()


def _compare(ctx: CheckContext, pairs: pd.DataFrame, tol: dict) -> pd.DataFrame:
    """Findings of one block of pairs (``pair`` = 0…n−1)."""
    grid = pair_grid(ctx, pairs, tol["grid_k"])
    p = grid["pair"].to_numpy()
    t = grid["t_k"].to_numpy(float)
    va = ctx.functions.evaluate(pairs["rid_a"].to_numpy(object)[p], t)
    vb = ctx.functions.evaluate(pairs["rid_b"].to_numpy(object)[p], t)
    with np.errstate(invalid="ignore", divide="ignore"):
        scale_cp = np.maximum(np.abs(va.cp), np.abs(vb.cp))
        d = pd.DataFrame({
            "pair": p, "t_k": t,
            "cp": np.abs(va.cp - vb.cp) / np.where(scale_cp > 0, scale_cp, np.nan),
            "s": np.abs(va.s - vb.s), "hmh": np.abs(va.h_minus_h298 - vb.h_minus_h298),
            "g": np.abs(va.g - vb.g)})
    limits = {"cp": tol["cp_rel"], "s": tol["s_j_mol_k"], "hmh": tol["h_j_mol"], "g": tol["g_j_mol"]}
    units = {"cp": "1", "s": "J/(mol*K)", "hmh": "J/mol", "g": "J/mol"}
    names = {"cp": "ΔCp", "s": "ΔS", "hmh": "Δ(H − H298)", "g": "ΔG"}
    # per pair: the worst point of each quantity, as a multiple of its tolerance
    for q, lim in limits.items():
        d[q + "_r"] = d[q] / lim
    rcols = [q + "_r" for q in limits]
    d["worst_r"] = d[rcols].max(axis=1, skipna=True)
    d["worst_q"] = d[rcols].fillna(-1.0).to_numpy().argmax(axis=1)
    top = d.loc[d["worst_r"].fillna(-1.0).groupby(d["pair"]).idxmax()].set_index("pair")
    maxima = d.groupby("pair")[list(limits)].max()

    # exact patterns
    rel = tol["constant_rel"]
    cp_equal = maxima["cp"] < tol["cp_equal_rel"]
    hints: dict[int, list[str]] = {}
    pat_sev = pd.Series(0, index=pairs["pair"])   # 0 none, 1 warning, 2 error
    pat_obs: dict[int, tuple[float, float, float, str]] = {}

    def flag(mask: pd.Series, level: int, text, obs=None):
        for i in mask[mask].index:
            hints.setdefault(i, []).append(text(i) if callable(text) else text)
            pat_sev[i] = max(pat_sev[i], level)
            if obs is not None and i not in pat_obs:
                pat_obs[i] = obs(i)

    # ratio patterns: which quantities of which side are 4.184 or 1000 × the other's
    ratio_hits: dict[tuple, list[str]] = {}     # (pair, factor, bigger side) → quantities
    ratio_obs: dict[tuple, float] = {}
    band = np.log1p(tol["ratio_rel"])
    for q, a, b in (("Cp", va.cp, vb.cp), ("S", va.s, vb.s), ("H − H298", va.h_minus_h298, vb.h_minus_h298)):
        with np.errstate(invalid="ignore", divide="ignore"):
            # only points where both values are well away from zero (H − H298 near 298.15 K)
            ref_a = pd.Series(np.abs(a)).groupby(p).transform("max").to_numpy()
            ref_b = pd.Series(np.abs(b)).groupby(p).transform("max").to_numpy()
            ok = (np.abs(a) > 1e-3 * ref_a) & (np.abs(b) > 1e-3 * ref_b) & (a / b > 0)
            lr = np.where(ok, np.log(np.abs(a / b)), np.nan)
        s = pd.DataFrame({"pair": p, "lr": lr}).dropna().groupby("pair")["lr"].agg(["min", "max", "size"])
        for factor in (CAL_TH_J, 1000.0):
            for sign, side in ((1, "a"), (-1, "b")):
                hit = (s["size"] >= 3) & ((s["min"] * sign - np.log(factor)).abs() < band) \
                    & ((s["max"] * sign - np.log(factor)).abs() < band)
                for i in hit[hit].index:
                    ratio_hits.setdefault((i, factor, side), []).append(q)
                    ratio_obs.setdefault((i, factor, side), float(np.exp(sign * s.at[i, "min"])))
    why = {CAL_TH_J: "calorie/joule: one source is in thermochemical calories (4.184 J)",
           1000.0: "kilo prefix: one source is in kJ where J is meant, or the reverse"}
    for (i, factor, side), qs_hit in ratio_hits.items():
        big, small = pairs.at[i, "src_" + side], pairs.at[i, "src_" + ("b" if side == "a" else "a")]
        mask = pd.Series(False, index=pairs["pair"])
        mask[i] = True
        flag(mask, 2, f"{', '.join(qs_hit)} of {big} {'is' if len(qs_hit) == 1 else 'are'} {factor:g} × "
                      f"{small}'s at every point — {why[factor]}",
             obs=lambda i, k=(i, factor, side): (ratio_obs[k], k[1], tol["ratio_rel"] * k[1], "1"))

    ds = _constant(pd.Series(va.s - vb.s), p, rel).reindex(pairs["pair"])
    gas = pairs.set_index("pair")["state"].eq("g")
    atm = gas & cp_equal & ds["constant"].fillna(False).astype(bool) \
        & ((ds["mean"].abs() - R_LN_ATM).abs() <= tol["atm_s_j_mol_k"])
    def _atm_hint(i):
        low, high = ((pairs.at[i, "src_b"], pairs.at[i, "src_a"]) if ds.at[i, "mean"] > 0
                     else (pairs.at[i, "src_a"], pairs.at[i, "src_b"]))
        return (f"S of {low} is lower than {high}'s by {abs(ds.at[i, 'mean']):.4f} J/(mol·K) = R ln 1.01325 "
                f"at every point with equal Cp: a 1 atm / 1 bar slip — either {low} holds 1 atm values but "
                f"is declared at 1 bar, or {high} holds 1 bar values but is declared at 1 atm; check "
                "reference_pressure_bar of both sources in sources.toml")

    flag(atm, 2, _atm_hint,
         obs=lambda i: (abs(ds.at[i, "mean"]), R_LN_ATM, tol["atm_s_j_mol_k"], "J/(mol*K)"))
    s_off = cp_equal & ds["constant"].fillna(False).astype(bool) \
        & (ds["mean"].abs() >= tol["offset_s_j_mol_k"]) & ~atm
    flag(s_off, 1, lambda i: (f"S differs by a constant {ds.at[i, 'mean']:+.3f} J/(mol·K) with equal Cp: "
                              "a different entropy constant (S298 or the b2 coefficient)"),
         obs=lambda i: (abs(ds.at[i, "mean"]), 0.0, tol["offset_s_j_mol_k"], "J/(mol*K)"))
    h_ref_off = pd.Series(False, index=pairs["pair"])
    for q, diff, why in (("H − H298", va.h_minus_h298 - vb.h_minus_h298,
                          "H − H(T_ref) on another reference temperature (e.g. H − H(0))"),
                         ("H", va.h - vb.h, "a different ΔfH(298.15) (or an element reference not at zero)")):
        dh = _constant(pd.Series(diff), p, rel).reindex(pairs["pair"])
        h_off = cp_equal & dh["constant"].fillna(False).astype(bool) & (dh["mean"].abs() >= tol["offset_h_j_mol"])
        h_off = h_off & ~h_ref_off          # an H − H298 offset shifts H too: one diagnosis
        h_ref_off = h_off
        flag(h_off, 1, lambda i, dh=dh, q=q, why=why: (
            f"{q} differs by a constant {dh.at[i, 'mean']:+.0f} J/mol with equal Cp: {why}"),
            obs=lambda i, dh=dh: (abs(dh.at[i, "mean"]), 0.0, tol["offset_h_j_mol"], "J/mol"))

    worst_r = top["worst_r"].reindex(pairs["pair"]).fillna(0.0)
    tol_sev = np.where(worst_r > tol["error_factor"], 2, np.where(worst_r > 1, 1, 0))
    sev = np.maximum(tol_sev, pat_sev.to_numpy())
    keep = np.flatnonzero(sev > 0)
    if not len(keep):
        return empty_findings()
    rows = []
    qs = list(limits)
    for i in keep:
        pr = pairs.iloc[i]
        parts = [f"{names[q]} up to {maxima.at[i, q] * (100 if q == 'cp' else 1):.3g}"
                 f"{' %' if q == 'cp' else ' ' + units[q].replace('*', '·')}"
                 for q in qs if np.isfinite(maxima.at[i, q])]
        msg = f"{pr.src_a} and {pr.src_b} disagree over {pr.lo:g}–{pr.hi:g} K: " + ", ".join(parts)
        if tol_sev[i] > 0:
            q = qs[int(top.at[i, "worst_q"])]
            t_w = float(top.at[i, "t_k"])
            obs, exp, tl, unit = float(top.at[i, q]), 0.0, limits[q], units[q]
            msg += f"; worst {names[q]} at {t_w:g} K ({top.at[i, 'worst_r']:.2g} × tolerance)"
        else:
            t_w = float(top.at[i, "t_k"]) if i in top.index else float(pr.lo)
            obs, exp, tl, unit = pat_obs.get(i, (np.nan, np.nan, np.nan, ""))
        h = hints.get(i)
        rows.append(dict(severity=("warning", "error")[sev[i] - 1], subject=pr.species,
                         source_id="+".join(sorted({pr.src_a, pr.src_b})), t_k=t_w, observed=obs,
                         expected=exp, tolerance=tl, unit=unit,
                         message=msg + ("; the pattern matches a known mistake (see hint)" if h else ""),
                         hint="; ".join(h) if h else "independent data disagree: compare the sources' "
                                                     "origins and prefer the better documented one"))
    f = pd.DataFrame(rows)
    return make_findings(check_id=CID, subject_kind="species", **{c: f[c] for c in f.columns})

