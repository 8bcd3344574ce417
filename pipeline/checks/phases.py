"""Phase checks: forms of one composition (phases, polymorphs, isomers) and of one element.

At fixed T and p the stable form of a composition is the one of lowest Gibbs energy
(Gibbs, "On the equilibrium of heterogeneous substances", 1876; any textbook, e.g.
Callen, *Thermodynamics*, 2nd ed., 1985, ch. 9). Every species is evaluated on its
preferred record (:func:`pipeline.functions.preferred_record_ids`), only inside that
record's range (no extrapolation).
"""
from __future__ import annotations

import json

import numpy as np
import pandas as pd

from ..constants import T_REF
from ..findings import empty_findings, make_findings
from ..functions import preferred_record_ids
from .context import CheckContext
from .registry import check

#: Grid spacing for comparing or root-finding G curves [K]. ΔG between two forms is smooth
#: (dΔG/dT = −ΔS, and ΔS changes slowly away from a transition), so 10 K brackets every
#: crossing of curves that are not nearly tangent; bisection then refines it to 1e-6 K.
GRID_K = 10.0
#: Grid points evaluated per block (memory bound).
BLOCK_POINTS = 500_000


def species_forms(ctx: CheckContext) -> pd.DataFrame:
    """Species with their preferred record and its range, reference flag, element info.

    Columns: ``species, composition, state, charge, reference_element, record_id,
    source_id, kind, t_low_k, t_high_k, element`` (the element of a one-element species,
    else None) and ``k`` (its atoms per formula unit).
    """
    return ctx.cached("phases.species_forms", lambda: _species_forms(ctx))


def _species_forms(ctx: CheckContext) -> pd.DataFrame:
    sp = ctx.species.copy()
    pref = ctx.preferred
    sp["record_id"] = pref.reindex(sp["species"].to_numpy(object)).to_numpy(object)
    sp = sp.dropna(subset=["record_id"])
    rec = ctx.records.drop_duplicates("record_id").set_index("record_id")
    pos = rec.index.get_indexer(sp["record_id"].to_numpy(object))
    for c in ("source_id", "kind", "t_low_k", "t_high_k"):
        sp[c] = rec[c].to_numpy()[pos]
    # one-element species: their element and atoms per formula unit (from ctx.elements)
    el = ctx.elements
    per = el.groupby("species", sort=False).agg(n_el=("element", "size"), element=("element", "first"),
                                                 k=("n", "first"))
    per = per.reindex(sp["species"].to_numpy(object))
    one = (per["n_el"].to_numpy(float) == 1) & (sp["charge"].fillna(0).to_numpy(float) == 0)
    sp["element"] = np.where(one, per["element"].to_numpy(object), None)
    sp["k"] = np.where(one, per["k"].to_numpy(float), np.nan)
    sp["reference_element"] = sp["reference_element"].fillna(False).astype(bool)
    return sp.reset_index(drop=True)


def species_values(ctx: CheckContext, forms: pd.DataFrame, idx: np.ndarray, t_k: np.ndarray):
    """Cp, H, S, G of ``forms.iloc[idx]`` at ``t_k`` (broadcast), NaN outside each record's
    range. A declared reference form whose table gives no ΔfH takes H(298.15) = 0, its
    definition."""
    idx, t = np.broadcast_arrays(np.asarray(idx), np.asarray(t_k, float))
    i = idx.ravel()
    tt = t.ravel()
    # only the rows asked for leave Arrow (a text column of every species costs more than this)
    u, inv = np.unique(i, return_inverse=True)
    sub = forms.iloc[u]
    rid = sub["record_id"].to_numpy(object)[inv]
    v = ctx.functions.evaluate(rid, tt)
    inside = (tt >= sub["t_low_k"].to_numpy(float)[inv] - 1e-6) & (tt <= sub["t_high_k"].to_numpy(float)[inv] + 1e-6)
    h = np.where(np.isnan(v.h) & sub["reference_element"].to_numpy(bool)[inv], v.h_minus_h298, v.h)
    nan = np.where(inside, 1.0, np.nan)
    s = v.s * nan
    h = h * nan
    return (v.cp * nan).reshape(t.shape), h.reshape(t.shape), s.reshape(t.shape), (h - tt * s).reshape(t.shape)


@check("phase.reference-not-stable", tolerances={"g_j_mol": 10.0})
def phase_reference_not_stable(ctx: CheckContext) -> pd.DataFrame:
    """An element's declared reference form should be its most stable form at 298.15 K.

    Relation: among every form of the element whose range includes 298.15 K — phases,
    polymorphs and molecules (O, O2, O3) — the reference has the lowest G per atom,
    G/k with k atoms per formula unit (the standard reference state is the stable form
    at 298.15 K and 1 bar: Cox, Wagman & Medvedev, *CODATA Key Values for
    Thermodynamics*, 1989). Conventional exceptions exist (white phosphorus) and are
    waived with their reason.
    Tolerance: warning when another form is lower by more than 10 J/mol per atom (the
    reference's own H(298.15) may be 10 J/mol off zero before ``formation.reference-element``
    calls it an error; common practice).
    """
    cid = "phase.reference-not-stable"
    forms = species_forms(ctx)
    forms = forms[forms["element"].notna()].reset_index(drop=True)
    if not len(forms) or not forms["reference_element"].any():
        return empty_findings()
    _, _, _, g = species_values(ctx, forms, np.arange(len(forms)), T_REF)
    forms = forms.assign(g_atom=g / forms["k"].to_numpy(float)).dropna(subset=["g_atom"])
    refs = forms[forms["reference_element"]]
    best = forms.sort_values(["element", "g_atom", "species"]).groupby("element").head(1).set_index("element")
    r = refs.assign(best=refs["element"].map(best["species"]), g_best=refs["element"].map(best["g_atom"]))
    tol = ctx.tol(cid, "g_j_mol")
    bad = r[(r["g_best"] < r["g_atom"] - tol) & (r["best"] != r["species"])]
    if not len(bad):
        return empty_findings()
    return make_findings(
        check_id=cid, severity="warning", subject=bad["species"], subject_kind="species",
        source_id=bad["source_id"], t_k=T_REF, observed=bad["g_atom"], expected=bad["g_best"],
        tolerance=tol, unit="J/mol",
        message=[f"{r.species} is declared the reference of {r.element}, but {r.best} has a lower G per atom "
                 f"at 298.15 K by {(r.g_atom - r.g_best) / 1e3:.3f} kJ/mol"
                 for r in bad.itertuples(index=False)],
        hint="the wrong form is flagged reference_element, the more stable form's ΔfH or S is wrong, "
             "or this is a conventional reference (waive it with the reason)")


def _grid(lo: np.ndarray, hi: np.ndarray, spacing: float, extra: np.ndarray | None = None) -> pd.DataFrame:
    """Uniform grid per interval [lo, hi] (≥ 16 points, ≤ ``spacing`` apart) plus optional
    extra points inside; columns ``i, t_k`` sorted."""
    width = hi - lo
    n = np.maximum(16, np.ceil(width / spacing).astype(int) + 1)
    i = np.repeat(np.arange(len(lo)), n)
    k = np.arange(n.sum()) - np.repeat(np.cumsum(n) - n, n)
    t = np.repeat(lo, n) + np.repeat(width, n) * k / np.repeat(n - 1, n)
    g = pd.DataFrame({"i": i, "t_k": t})
    if extra is not None:
        x = pd.DataFrame({"i": np.arange(len(lo)), "t_k": extra})
        g = pd.concat([g, x[(x["t_k"] > lo) & (x["t_k"] < hi)]], ignore_index=True)
    return g.drop_duplicates().sort_values(["i", "t_k"], kind="stable").reset_index(drop=True)


@check("phase.metastable")
def phase_metastable(ctx: CheckContext) -> pd.DataFrame:
    """A form whose G lies above another form of the same composition over its whole range.

    Relation: at each T of form a's range, the lowest-G form of a's composition (same
    element counts and charge: phases, polymorphs, isomers; species differing only in
    label are such forms) is found; if at every T some other form has G_b(T) < G_a(T),
    a is metastable over its whole range, and the smallest margin min_T(G_a − min_b G_b)
    is reported with where it occurs and against which form (e.g. diamond above graphite
    by about 2.9 kJ/mol at 298.15 K and 1 bar: Chase, *NIST-JANAF Thermochemical Tables*,
    4th ed., 1998). Compared on a grid ≤ 10 K apart over a's range; a T where no other
    form is defined makes a the stable form there.
    Tolerance: none — info, context for the curator (metastable phases are legitimate data).
    """
    cid = "phase.metastable"
    forms = species_forms(ctx)
    multi = forms.groupby("composition")["species"].transform("size") >= 2
    forms = forms[multi].reset_index(drop=True)
    if not len(forms):
        return empty_findings()
    fi = forms.assign(pos=np.arange(len(forms)))
    pairs = fi.merge(fi, on="composition", suffixes=("_a", "_b"))
    pairs = pairs[pairs["species_a"] != pairs["species_b"]].sort_values(["pos_a", "pos_b"]).reset_index(drop=True)
    # blocks of whole forms a, about BLOCK_POINTS grid points each: memory stays bounded
    n_pts = np.maximum(16, (pairs["t_high_k_a"] - pairs["t_low_k_a"]).to_numpy(float) / GRID_K)
    first_of_a = np.r_[True, pairs["pos_a"].to_numpy()[1:] != pairs["pos_a"].to_numpy()[:-1]]
    start_pts = np.cumsum(n_pts) - n_pts
    block = np.maximum.accumulate(np.where(first_of_a, np.floor(start_pts / BLOCK_POINTS), 0)).astype(int)
    sel = pd.concat([_margins(ctx, forms, pairs[block == b]) for b in np.unique(block)])
    if not len(sel):
        return empty_findings()
    a = forms.iloc[sel.index.to_numpy()]
    return make_findings(
        check_id=cid, severity="info", subject=a["species"], subject_kind="species",
        source_id=a["source_id"], t_k=sel["t_k"], observed=sel["margin"], expected=0.0, tolerance=0.0,
        unit="J/mol",
        message=[f"{sp} lies above {b} in G over its whole range {lo:g}–{hi:g} K, by at least "
                 f"{m / 1e3:.3f} kJ/mol (at {tm:g} K): metastable"
                 for sp, b, lo, hi, m, tm in zip(a["species"], sel["below"], a["t_low_k"], a["t_high_k"],
                                                sel["margin"], sel["t_k"])],
        hint="a metastable form (legitimate); if it should be stable somewhere, its ΔfH or S is off")


def _margins(ctx, forms, pairs) -> pd.DataFrame:
    """For the forms a in ``pairs`` (all their pairs (a, b)): per grid T of a's range,
    G_a − min_b G_b; a is kept when that is positive at every T. Index: position of a in
    ``forms``; columns ``t_k, margin, below`` (the lowest form at the smallest margin)."""
    grid = _grid(pairs["t_low_k_a"].to_numpy(float), pairs["t_high_k_a"].to_numpy(float), GRID_K)
    i = grid["i"].to_numpy()
    t = grid["t_k"].to_numpy(float)
    ga = species_values(ctx, forms, pairs["pos_a"].to_numpy()[i], t)[3]
    gb = species_values(ctx, forms, pairs["pos_b"].to_numpy()[i], t)[3]
    d = pd.DataFrame({"a": pairs["pos_a"].to_numpy()[i], "b": pairs["species_b"].to_numpy(object)[i],
                      "t_k": t, "ga": ga, "dg": ga - gb})
    # the lowest other form at each (a, T): the largest G_a − G_b
    best = d.dropna(subset=["dg"]).sort_values(["a", "t_k", "dg"]).groupby(["a", "t_k"]).tail(1)
    # every T of a's range where a itself is defined must have some lower form
    need = d.dropna(subset=["ga"]).drop_duplicates(["a", "t_k"])
    best = need[["a", "t_k"]].merge(best[["a", "t_k", "dg", "b"]], on=["a", "t_k"], how="left")
    worst = best.sort_values(["a", "dg"], na_position="first").groupby("a").head(1).set_index("a")
    worst = worst[worst["dg"] > 0]
    return worst.rename(columns={"dg": "margin", "b": "below"})[["t_k", "margin", "below"]]


def _maybe_two_species(stoich_json: pd.Series) -> np.ndarray:
    """Whether each stoichiometry JSON text may hold exactly two species: one '": ' per
    species unless a key holds an escaped quote (a backslash); nulls: False. Arrow-backed
    text is counted by Arrow's substring kernels, Python strings by ``str.count`` (never
    converted from one to the other: that costs more than the count)."""
    if isinstance(stoich_json.dtype, pd.StringDtype) and stoich_json.dtype.storage == "pyarrow":
        import pyarrow as pa
        import pyarrow.compute as pc

        a = pa.array(stoich_json.array)
        two = pc.or_(pc.equal(pc.count_substring(a, '": '), 2), pc.match_substring(a, "\\"))
        return np.asarray(two.fill_null(False).to_numpy(zero_copy_only=False), dtype=bool)
    return np.fromiter((isinstance(j, str) and (j.count('": ') == 2 or "\\" in j)
                        for j in stoich_json.to_numpy(object)), dtype=bool, count=len(stoich_json))


def _transition_reactions(ctx: CheckContext) -> pd.DataFrame:
    """Reactions between two species of the same composition: ``reaction_id, source_id,
    quantity, t_k, value, uncertainty, react, prod, nu`` (ν of the product, > 0)."""
    rx = ctx.reactions
    if not len(rx):
        return pd.DataFrame()
    # only two-species reactions can be transitions: without a backslash (no escaped quote
    # in a key) a stoich JSON has exactly one '": ' per species, so the rest are not parsed;
    # the rows and columns used are selected once
    keep = rx["quantity"].isin(["drg", "drh"]).to_numpy(bool) & _maybe_two_species(rx["stoich_json"])
    rx = rx[["reaction_id", "source_id", "quantity", "t_k", "value", "uncertainty", "stoich_json"]].iloc[
        np.flatnonzero(keep)]
    st = rx["stoich_json"].map(lambda j: json.loads(j) if isinstance(j, str) else {})
    two = st.map(len) == 2
    rx, st = rx[two], st[two]
    if not len(rx):
        return pd.DataFrame()
    items = st.map(lambda d: sorted(d.items(), key=lambda kv: kv[1]))
    out = pd.DataFrame({
        "reaction_id": rx["reaction_id"].to_numpy(object), "source_id": rx["source_id"].to_numpy(object),
        "quantity": rx["quantity"].to_numpy(object), "t_k": rx["t_k"].to_numpy(float),
        "value": rx["value"].to_numpy(float), "uncertainty": rx["uncertainty"].to_numpy(float),
        "react": items.map(lambda x: x[0][0]).to_numpy(object), "prod": items.map(lambda x: x[1][0]).to_numpy(object),
        "nu_r": items.map(lambda x: float(x[0][1])).to_numpy(float),
        "nu": items.map(lambda x: float(x[1][1])).to_numpy(float)})
    comp = ctx.species.set_index("species")["composition"]
    same = (out["react"].map(comp) == out["prod"].map(comp)) & np.isclose(out["nu"], -out["nu_r"]) & (out["nu"] > 0)
    return out[same.to_numpy()].reset_index(drop=True)


def _delta(ctx, forms, tr, t):
    """ν(G_prod − G_react) [J/mol] and ν(S_prod − S_react) [J/(mol*K)] at t."""
    _, _, sp, gp = species_values(ctx, forms, tr["p_pos"].to_numpy(), t)
    _, _, sr, gr = species_values(ctx, forms, tr["r_pos"].to_numpy(), t)
    nu = tr["nu"].to_numpy(float)
    return nu * (gp - gr), nu * (sp - sr)


@check("phase.transition-mismatch", tolerances={"t_warning_k": 1.0, "t_error_k": 5.0,
                                                "z_warning": 2.0, "z_error": 3.0, "match_k": 0.5})
def phase_transition_mismatch(ctx: CheckContext) -> pd.DataFrame:
    """A stated phase transition must sit where the two forms' G curves cross.

    Relation: a transition A = B stated as ΔrG = 0 at T_t (a ``drg`` row with value 0
    between two species of one composition) requires G_B(T_t) = G_A(T_t); the crossing
    T_x is root-found (bracketed on a 10 K grid over the common range, then bisection to
    1e-6 K). Without a crossing inside the common range, T_x is estimated to first order
    from the end nearest T_t: T_x = T_e + ΔG(T_e)/ΔS(T_e) (since dΔG/dT = −ΔS), and the
    message says so. A ``drh`` of the same reaction at T_t (within 0.5 K) must equal
    T_t ΔS(T_t), since ΔH = TΔS where ΔG = 0 (Clausius, common textbook result).
    Tolerance: crossing — warning beyond 1 K, error beyond 5 K (common practice: tabulated
    transition temperatures are known to better than 1 K for most substances); drh —
    z = (measured − T ΔS)/u with u the measurement's standard uncertainty, warning at
    |z| > 2, error at |z| > 3 (the rule of ``reaction.residual``).
    """
    cid = "phase.transition-mismatch"
    tr = _transition_reactions(ctx)
    if not len(tr):
        return empty_findings()
    forms = species_forms(ctx)
    pos = pd.Series(np.arange(len(forms)), index=forms["species"])
    tr["r_pos"] = tr["react"].map(pos)
    tr["p_pos"] = tr["prod"].map(pos)
    missing = tr[tr["r_pos"].isna() | tr["p_pos"].isna()]
    tr = tr.dropna(subset=["r_pos", "p_pos"]).astype({"r_pos": int, "p_pos": int}).reset_index(drop=True)
    parts = []
    if len(missing):
        parts.append(make_findings(
            check_id=cid, severity="info", subject=missing["reaction_id"], subject_kind="reaction",
            source_id=missing["source_id"], t_k=missing["t_k"],
            message=[f"transition {r} = {p} not checked: a species has no record"
                     for r, p in zip(missing["react"], missing["prod"])],
            hint="add records for both phases"))
    stated = tr[(tr["quantity"] == "drg") & (tr["value"].abs() <= 1e-6)].reset_index(drop=True)
    if len(stated):
        parts.append(_crossings(ctx, cid, forms, stated))
        parts.append(_enthalpies(ctx, cid, forms, stated, tr[tr["quantity"] == "drh"].reset_index(drop=True)))
    parts = [p for p in parts if p is not None and len(p)]
    return pd.concat(parts, ignore_index=True) if parts else empty_findings()


def _crossings(ctx, cid, forms, tr) -> pd.DataFrame:
    rf, pf = forms.iloc[tr["r_pos"]], forms.iloc[tr["p_pos"]]
    lo = np.maximum(rf["t_low_k"].to_numpy(float), pf["t_low_k"].to_numpy(float))
    hi = np.minimum(rf["t_high_k"].to_numpy(float), pf["t_high_k"].to_numpy(float))
    t_st = tr["t_k"].to_numpy(float)
    has_range = hi >= lo
    n = len(tr)
    t_x = np.full(n, np.nan)
    how = np.full(n, "", dtype=object)
    # 1. bracket sign changes of ΔG on a grid over the common range; take the one nearest T_t
    idx = np.flatnonzero(hi > lo)
    if len(idx):
        g = _grid(lo[idx], hi[idx], GRID_K, extra=t_st[idx])
        sub = tr.iloc[idx[g["i"].to_numpy()]]
        dg, _ = _delta(ctx, forms, sub, g["t_k"].to_numpy(float))
        g["dg"] = dg
        nxt = g.shift(-1)
        br = g[(g["i"] == nxt["i"]) & (np.sign(g["dg"]) * np.sign(nxt["dg"]) <= 0)
               & g["dg"].notna() & nxt["dg"].notna()].copy()
        br["t_b"] = nxt.loc[br.index, "t_k"]
        br["dist"] = np.abs((br["t_k"] + br["t_b"]) / 2 - t_st[idx[br["i"].to_numpy()]])
        br = br.sort_values(["i", "dist"]).groupby("i").head(1)
        if len(br):
            which = idx[br["i"].to_numpy()]
            a, b = br["t_k"].to_numpy(float), br["t_b"].to_numpy(float)
            sub = tr.iloc[which]
            fa, _ = _delta(ctx, forms, sub, a)
            for _ in range(60):                              # bisection, all transitions at once
                mid = (a + b) / 2
                fm, _ = _delta(ctx, forms, sub, mid)
                left = np.sign(fm) == np.sign(fa)
                a, fa = np.where(left, mid, a), np.where(left, fm, fa)
                b = np.where(left, b, mid)
                if np.all(b - a < 1e-6):
                    break
            t_x[which] = (a + b) / 2
            how[which] = "G curves cross"
    # 2. no crossing inside: first-order estimate from the common-range end nearest T_t
    est = np.isnan(t_x) & has_range
    if est.any():
        te = np.clip(t_st[est], lo[est], hi[est])
        sub = tr[est]
        dg, ds = _delta(ctx, forms, sub, te)
        with np.errstate(divide="ignore", invalid="ignore"):
            t_x[est] = te + dg / ds
        how[est] = [f"no crossing inside the common range; first-order estimate from ΔG = {a:.4g} J/mol "
                    f"and ΔS = {b:.4g} J/(mol·K) at {c:g} K" for a, b, c in zip(dg, ds, te)]
    tw, te_ = ctx.tol(cid, "t_warning_k"), ctx.tol(cid, "t_error_k")
    off = np.abs(t_x - t_st)
    sev = np.where(off > te_, "error", np.where(off > tw, "warning", None))
    unknown = np.isnan(t_x)
    sev = np.where(unknown, "info", sev)
    keep = np.flatnonzero(sev != None)  # noqa: E711
    if not len(keep):
        return empty_findings()
    k = tr.iloc[keep]
    msgs = []
    for j, r in zip(keep, k.itertuples(index=False)):
        if unknown[j]:
            msgs.append(f"{r.react} = {r.prod} stated at {r.t_k:g} K: crossing not found "
                        f"({'no common range' if not has_range[j] else 'G unknown (no ΔfH) or ΔS = 0'})")
        else:
            msgs.append(f"{r.react} = {r.prod} stated at {r.t_k:g} K, but their G curves cross at "
                        f"{t_x[j]:.2f} K ({how[j]}): {t_x[j] - r.t_k:+.2f} K")
    return make_findings(
        check_id=cid, severity=sev[keep], subject=k["reaction_id"], subject_kind="reaction",
        source_id=k["source_id"], t_k=t_st[keep], observed=t_x[keep], expected=t_st[keep],
        tolerance=np.where(sev[keep] == "error", te_, tw), unit="K", message=msgs,
        hint=["the stated transition temperature, or ΔfH/S of one phase, is wrong (the phases' data "
              "may come from different evaluations)" if not unknown[j] else
              "give both phases absolute enthalpies (ΔfH) over a common range" for j in keep])


def _enthalpies(ctx, cid, forms, stated, drh) -> pd.DataFrame:
    if not len(drh):
        return empty_findings()
    key = lambda df: df["react"].where(df["react"] < df["prod"], df["prod"]) + "|" + \
        df["prod"].where(df["react"] < df["prod"], df["react"])  # noqa: E731
    s = stated.assign(key=key(stated))[["key", "t_k"]].rename(columns={"t_k": "t_stated"})
    m = drh.assign(key=key(drh)).merge(s, on="key")
    m = m[np.abs(m["t_k"] - m["t_stated"]) <= ctx.tol(cid, "match_k")].drop_duplicates("reaction_id")
    if not len(m):
        return empty_findings()
    t = m["t_k"].to_numpy(float)
    _, ds = _delta(ctx, forms, m, t)
    expected = t * ds
    u = m["uncertainty"].to_numpy(float)
    with np.errstate(divide="ignore", invalid="ignore"):
        z = (m["value"].to_numpy(float) - expected) / u
    zw, ze = ctx.tol(cid, "z_warning"), ctx.tol(cid, "z_error")
    sev = np.where(np.abs(z) > ze, "error", np.where(np.abs(z) > zw, "warning", None))
    sev = np.where(np.isnan(expected), "info", sev)
    keep = np.flatnonzero(sev != None)  # noqa: E711
    if not len(keep):
        return empty_findings()
    k = m.iloc[keep]
    return make_findings(
        check_id=cid, severity=sev[keep], subject=k["reaction_id"], subject_kind="reaction",
        source_id=k["source_id"], t_k=t[keep], observed=k["value"], expected=expected[keep],
        tolerance=np.where(sev[keep] == "error", ze, zw) * u[keep], unit="J/mol",
        message=[f"ΔtrsH of {r.react} = {r.prod} at {r.t_k:g} K measured {r.value / 1e3:.4g} kJ/mol, "
                 f"but T ΔS there is {e / 1e3:.4g} kJ/mol (z = {zz:+.2f})" if np.isfinite(e) else
                 f"ΔtrsH of {r.react} = {r.prod} at {r.t_k:g} K not checked: a phase's S is unknown there"
                 for r, e, zz in zip(k.itertuples(index=False), expected[keep], z[keep])],
        hint="the transition enthalpy disagrees with the phases' entropies: one phase's S (or Cp) "
             "is off, or the measurement's uncertainty is understated")
