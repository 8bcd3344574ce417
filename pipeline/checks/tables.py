"""Table checks: the tabulated columns of one record agree with each other.

A table states Cp, S, H − H(T_ref), gef, ΔfH, ΔfG and log Kf side by side; thermodynamics
ties them together (H and S are integrals of Cp; gef, ΔfG and log Kf are functions of the
others). These checks find rows that break those ties: copying errors, columns
taken from different data sets, columns in another unit.

Integrals over a table use the not-a-knot cubic spline of Cp through its rows (never
trapezoids: on a 100 K grid the trapezoid error alone exceeds the entropy tolerance), and
the integration-error estimate is |∫ spline − ∫ PCHIP| over the same interval (two
interpolants that both honour the rows differ only by what the rows leave unknown).
"""
from __future__ import annotations

import json

import numpy as np
import pandas as pd

from ..constants import LN10, R, T_REF
from ..findings import empty_findings, make_findings
from ..functions import T_REF_MATCH_K, TableCurves, map_keys, member
from .context import CheckContext
from .registry import check


def table_nodes(ctx: CheckContext) -> pd.DataFrame:
    """Rows of every table record that tabulate Cp, sorted by record and T (one row per T),
    with species, and the spline and PCHIP integrals ∫Cp dT [J/mol], ∫Cp/T dT [J/(mol*K)]
    from the record's first row (columns ``i_cp, i_cp_t, p_cp, p_cp_t``). Computed once per
    context (the integral checks share it)."""
    return ctx.cached("tables.table_nodes", lambda: _table_nodes(ctx))


def _table_nodes(ctx: CheckContext) -> pd.DataFrame:
    tables = ctx.records.loc[ctx.records["kind"] == "table", ["record_id", "species"]]
    tables = tables.drop_duplicates("record_id")
    # the species functions already hold these nodes (table rows with Cp, sorted by record
    # and T, one per T) and their spline: reuse both
    anchored = ctx.functions.tables
    spline = anchored.curves
    nodes = anchored.points.iloc[spline.source_pos]
    sp_of = pd.Series(tables["species"].to_numpy(object), index=tables["record_id"].to_numpy(object))
    nodes = nodes.assign(species=map_keys(nodes["record_id"], sp_of))
    if not len(nodes):
        return nodes.reset_index(drop=True)
    pchip = TableCurves.from_points(nodes, "pchip")
    if not np.array_equal(spline.t, nodes["t_k"].to_numpy(float)):   # same sort, same rows
        raise RuntimeError("table nodes and spline nodes are out of step (internal error)")
    nodes = nodes.assign(i_cp=spline.int_cp, i_cp_t=spline.int_cp_t, p_cp=pchip.int_cp, p_cp_t=pchip.int_cp_t)
    nodes["at_ref"] = (nodes["t_k"] - T_REF).abs() <= T_REF_MATCH_K
    return nodes.reset_index(drop=True)


def _reference_rows(nodes: pd.DataFrame, column: str) -> np.ndarray:
    """Per node, the position of its record's reference row for ``column``: the 298.15 K
    row if it is tabulated with a value, else the first row that has a value (NaN if none)."""
    n = len(nodes)
    code = pd.factorize(nodes["record_id"])[0]
    has = nodes[column].notna().to_numpy()
    rank = np.where(nodes["at_ref"].to_numpy(bool) & has, 0, np.where(has, 1, 2))
    # per record the smallest (rank, position), as one integer key
    key = rank.astype(np.int64) * (n + 1) + np.arange(n)
    best = np.full(code.max() + 1 if n else 0, 3 * (n + 1), dtype=np.int64)
    np.minimum.at(best, code, key)
    best = best[code]
    return np.where(best // (n + 1) < 2, (best % (n + 1)).astype(float), np.nan)


def _worst_per_record(df: pd.DataFrame, ratio: str) -> pd.DataFrame:
    """The failing row with the largest ``ratio`` per record, with the count of failing rows."""
    n_bad = df.groupby("record_id")["record_id"].transform("size")
    df = df.assign(n_bad=n_bad)
    return df.loc[df.groupby("record_id")[ratio].idxmax()].reset_index(drop=True)


def _integral_check(ctx: CheckContext, cid: str, column: str, integral: str, pchip: str,
                    tol_abs: float, tol_rel: float, unit: str, what: str) -> pd.DataFrame:
    nodes = table_nodes(ctx)
    if not len(nodes):
        return empty_findings()
    ref = _reference_rows(nodes, column)
    col = nodes[column].to_numpy(float)
    pos = np.flatnonzero(np.isfinite(ref) & ~np.isnan(col))      # ``nodes`` is indexed by position
    ref = ref[pos].astype(np.int64)
    tab = col[pos] - col[ref]
    ints = nodes[integral].to_numpy(float)
    spl = ints[pos] - ints[ref]
    ints = nodes[pchip].to_numpy(float)
    pch = ints[pos] - ints[ref]
    est = np.abs(spl - pch)
    tol = np.maximum(tol_abs, tol_rel * np.abs(tab)) + est
    res = tab - spl
    with np.errstate(invalid="ignore"):
        ratio = np.abs(res) / tol
    bad = ratio > 1
    if not bad.any():
        return empty_findings()
    t_ref = nodes["t_k"].to_numpy(float)[ref]
    frame = nodes.iloc[pos[bad]].assign(tab=tab[bad], spl=spl[bad], est=est[bad], tol=tol[bad], res=res[bad],
                                        ratio=ratio[bad], t_ref=t_ref[bad])
    w = _worst_per_record(frame, "ratio")
    # rows compared per record (those with a value and a reference row)
    code, uniq = pd.factorize(nodes["record_id"].to_numpy(object)[pos])
    n_rows = pd.Series(np.bincount(code, minlength=len(uniq)), index=uniq)
    msgs, hints = [], []
    for r in w.itertuples(index=False):
        ref_txt = ("298.15 K" if abs(r.t_ref - T_REF) <= T_REF_MATCH_K
                   else f"the first row, {r.t_ref:g} K (no 298.15 K row)")
        msgs.append(f"{what}: tabulated {r.tab:.6g} {unit} from {ref_txt} to {r.t_k:g} K, "
                    f"but ∫ of the tabulated Cp gives {r.spl:.6g} {unit} "
                    f"(off by {r.res:+.3g}, tolerance {r.tol:.3g} incl. integration error {r.est:.2g}); "
                    f"{r.n_bad} of {n_rows[r.record_id]} rows fail")
        if r.n_bad == 1:
            hints.append("one row off: a copying error in that row (its value or its Cp)")
        elif r.n_bad >= n_rows[r.record_id] - 1:
            hints.append("every row off: the reference row itself is wrong, or Cp and this column "
                         "come from different data sets or units")
        else:
            hints.append("several rows off: columns merged from different data sets, or Cp smoothed "
                         "after the column was computed")
    return make_findings(check_id=cid, severity="error", subject=w["species"], subject_kind="species",
                         source_id=w["source_id"], t_k=w["t_k"], observed=w["tab"], expected=w["spl"],
                         tolerance=w["tol"], unit=unit, message=msgs, hint=hints)


@check("table.enthalpy-integral", tolerances={"h_j_mol": 20.0, "h_rel": 0.001})
def table_enthalpy_integral(ctx: CheckContext) -> pd.DataFrame:
    """Tabulated H − H(T_ref) must equal the integral of the tabulated Cp.

    Relation: H(T) − H(T_r) = ∫_{T_r}^{T} Cp dT (Kirchhoff), with Cp the not-a-knot cubic
    spline through the rows, integrated exactly. T_r is the 298.15 K row when tabulated,
    else the table's first row with a value (the message says which).
    Tolerance: error when |tabulated − integral| > max(20 J/mol, 0.1 % of |H(T) − H(T_r)|)
    + |∫ spline − ∫ PCHIP| (the interpolation uncertainty between rows). 20 J/mol allows
    the rounding of tables printed to 0.01 kJ/mol; 0.1 % the relative precision of
    tabulated Cp integrated over a wide range (common practice; cf. the consistency of
    Chase, *NIST-JANAF Thermochemical Tables*, 4th ed., 1998).
    """
    cid = "table.enthalpy-integral"
    return _integral_check(ctx, cid, "h_minus_href_j_mol", "i_cp", "p_cp",
                           ctx.tol(cid, "h_j_mol"), ctx.tol(cid, "h_rel"), "J/mol", "H − H(T_ref)")


@check("table.entropy-integral", tolerances={"s_j_mol_k": 0.05})
def table_entropy_integral(ctx: CheckContext) -> pd.DataFrame:
    """Tabulated S must follow from the integral of the tabulated Cp/T.

    Relation: S(T) − S(T_r) = ∫_{T_r}^{T} Cp/T dT, with Cp the not-a-knot cubic spline
    through the rows, integrated exactly (each cubic piece divided by T gives a quadratic
    plus r/T); T_r as in ``table.enthalpy-integral``.
    Tolerance: error beyond 0.05 J/(mol·K) + |∫ spline − ∫ PCHIP|; tables print S to
    0.001–0.01 J/(mol·K), and 0.05 J/(mol·K) is the precision of good calorimetric
    entropies (common practice; Chase, *NIST-JANAF Thermochemical Tables*, 4th ed., 1998).
    """
    cid = "table.entropy-integral"
    return _integral_check(ctx, cid, "s_j_mol_k", "i_cp_t", "p_cp_t",
                           ctx.tol(cid, "s_j_mol_k"), 0.0, "J/(mol*K)", "S − S(T_ref)")


def _row_frame(ctx: CheckContext) -> pd.DataFrame:
    """Table rows above 0 K with their record's species; computed once per context (the
    identity checks share it; callers must not modify it)."""
    return ctx.cached("tables.row_frame", lambda: _table_rows(ctx))


def _table_rows(ctx: CheckContext) -> pd.DataFrame:
    tables = ctx.records.loc[ctx.records["kind"] == "table", ["record_id", "species"]]
    tp = ctx.table_points
    tp = tp[member(tp["record_id"], tables["record_id"]) & (tp["t_k"] > 0)]
    return tp.merge(tables, on="record_id", how="left")


def _per_row_findings(cid, rows, observed, expected, tol, unit, message, hint) -> pd.DataFrame:
    res = np.abs(observed - expected)
    frame = rows.assign(obs=observed, exp=expected, res=res, ratio=res / tol)
    bad = frame[frame["ratio"] > 1]
    if not len(bad):
        return empty_findings()
    w = _worst_per_record(bad, "ratio")
    return make_findings(check_id=cid, severity="error", subject=w["species"], subject_kind="species",
                         source_id=w["source_id"], t_k=w["t_k"], observed=w["obs"], expected=w["exp"],
                         tolerance=tol, unit=unit, message=[message(r) for r in w.itertuples(index=False)],
                         hint=[hint(r) for r in w.itertuples(index=False)])


@check("table.gibbs-identity", tolerances={"gef_j_mol_k": 0.02})
def table_gibbs_identity(ctx: CheckContext) -> pd.DataFrame:
    """Tabulated gef must equal S − (H − H(T_ref))/T in every row.

    Relation: gef = −(G − H(T_ref))/T = S − (H − H(T_ref))/T, since G = H − TS.
    Tolerance: error beyond 0.02 J/(mol·K): rounding of S and gef to 0.001–0.01 J/(mol·K)
    and of H − H(T_ref) to 1–10 J/mol (divided by T ≥ 100 K) stays below it (common
    practice; the gef column of Chase, *NIST-JANAF Thermochemical Tables*, 4th ed., 1998).
    """
    cid = "table.gibbs-identity"
    rows = _row_frame(ctx)
    rows = rows[rows[["gef_j_mol_k", "s_j_mol_k", "h_minus_href_j_mol"]].notna().all(axis=1)]
    if not len(rows):
        return empty_findings()
    t = rows["t_k"].to_numpy(float)
    expected = rows["s_j_mol_k"].to_numpy(float) - rows["h_minus_href_j_mol"].to_numpy(float) / t
    observed = rows["gef_j_mol_k"].to_numpy(float)
    tol = ctx.tol(cid, "gef_j_mol_k")

    def hint(r):
        if abs(r.obs + r.exp) < tol:
            return "sign: the column holds (G − H_ref)/T instead of −(G − H_ref)/T"
        return "a copying error, or gef relative to another reference (H(0) vs H(298.15))" \
            if r.n_bad < 3 else "gef computed with another H reference (e.g. H(0)) or another S column"

    return _per_row_findings(
        cid, rows, observed, expected, tol, "J/(mol*K)",
        lambda r: (f"gef = {r.obs:.4f} J/(mol·K) at {r.t_k:g} K but S − (H − H_ref)/T = {r.exp:.4f} "
                   f"({r.n_bad} rows fail)"), hint)


@check("table.logk-identity", tolerances={"log_k": 0.002})
def table_logk_identity(ctx: CheckContext) -> pd.DataFrame:
    """Tabulated log Kf must equal −ΔfG/(RT ln 10) in every row.

    Relation: ΔfG° = −RT ln Kf, with R the CODATA 2018 gas constant (exact).
    Tolerance: error beyond 0.002 (tables print log K to 0.001; ΔfG to 0.01 kJ/mol moves
    log K by < 0.002 above 300 K) — common practice.
    """
    cid = "table.logk-identity"
    rows = _row_frame(ctx)
    rows = rows[rows[["log_kf", "dfg_j_mol"]].notna().all(axis=1)]
    if not len(rows):
        return empty_findings()
    t = rows["t_k"].to_numpy(float)
    expected = -rows["dfg_j_mol"].to_numpy(float) / (R * t * LN10)
    observed = rows["log_kf"].to_numpy(float)
    tol = ctx.tol(cid, "log_k")

    def hint(r):
        if abs(r.exp) > 10 * tol and abs(r.obs / r.exp - LN10) < 0.01 * LN10:
            return "natural logarithm: the column holds ln Kf, not log10 Kf"
        if abs(r.obs + r.exp) <= tol:
            return "sign: ΔfG = −RT ln K (the column has the opposite sign)"
        if abs(r.exp) > 10 * tol and abs(r.obs / r.exp * 4.184 - 1) < 0.01:
            return "ΔfG in calories: the dfg column's unit is wrong"
        return "a copying error in log Kf or in ΔfG"

    return _per_row_findings(
        cid, rows, observed, expected, tol, "1",
        lambda r: f"log Kf = {r.obs:.4f} at {r.t_k:g} K but −ΔfG/(RT ln 10) = {r.exp:.4f} ({r.n_bad} rows fail)",
        hint)


def element_counts(species: pd.DataFrame, elements: pd.DataFrame | None = None) -> pd.DataFrame:
    """Long frame ``species, element, n`` of atoms per formula unit; an ion also gets the
    pseudo-element ``e`` with n = −charge (electrons taken up on formation). ``elements``:
    the parsed counts when already at hand (``CheckContext.elements``)."""
    if elements is None:
        parsed = species["elements_json"].map(lambda j: json.loads(j) if isinstance(j, str) else {})
        el = pd.DataFrame([(k, e, float(n)) for k, d in zip(species["species"], parsed) for e, n in d.items()],
                          columns=["species", "element", "n"])
    else:
        el = elements[["species", "element", "n"]]
    ions = species[species["charge"].fillna(0) != 0]
    e = pd.DataFrame({"species": ions["species"], "element": "e", "n": -ions["charge"].astype(float)})
    out = pd.concat([el, e], ignore_index=True)
    return out[out["n"] != 0]


def _row_elements(species: pd.Series, counts: pd.DataFrame):
    """The element counts of each row's species, long: ``row`` (position in ``species``),
    ``element`` (code into the returned ``elements``) and ``n`` (arrays; rows in order, each
    species' elements in ``counts`` order). Species are matched by code, not by merging
    text keys row by row."""
    code, uniq = pd.factorize(species)
    counts = counts[member(counts["species"], uniq)]
    c = pd.Index(uniq).get_indexer(counts["species"].to_numpy(object))
    el_code, elements = pd.factorize(counts["element"].to_numpy(object))
    order = np.argsort(c, kind="stable")
    c, el, n = c[order], el_code[order], counts["n"].to_numpy(float)[order]
    per = np.bincount(c, minlength=len(uniq))
    start = np.cumsum(per) - per
    rep = per[code]
    row = np.repeat(np.arange(len(code)), rep)
    pos = np.repeat(start[code], rep) + (np.arange(rep.sum()) - np.repeat(np.cumsum(rep) - rep, rep))
    return row, el[pos], n[pos], np.asarray(elements, dtype=object)


def _reference_entropy_at(ref: pd.DataFrame, elements: np.ndarray, el_code: np.ndarray,
                          t_k: np.ndarray, row: np.ndarray) -> np.ndarray:
    """``s_atom`` of :func:`reference_entropies` (``ref``) for each pair (element
    ``elements[el_code]``, temperature ``t_k[row]``); NaN where the element has no
    reference form at that T. A dense element × temperature table, looked up by code."""
    out = np.full(len(el_code), np.nan)
    if not len(ref) or not len(el_code):
        return out
    t_code, t_u = pd.factorize(np.asarray(t_k, float))
    t_u = np.asarray(t_u, float)
    re = pd.Index(elements).get_indexer(ref["element"].to_numpy(object))
    rt = pd.Index(t_u).get_indexer(ref["t_k"].to_numpy(float))    # ref's T are exactly these
    ok = (re >= 0) & (rt >= 0)
    table = np.full((len(elements), len(t_u)), np.nan)
    table[re[ok], rt[ok]] = ref["s_atom"].to_numpy(float)[ok]
    return table[el_code, t_code[row]]


def reference_entropies(ctx: CheckContext, t_k: np.ndarray) -> pd.DataFrame:
    """Entropy per atom [J/(mol*K)] of each element's reference form at each temperature.

    Reference forms are the species declared ``reference_element`` (one element, neutral),
    plus the electron (formula ``e-``) as the reference of charge. Each is evaluated on its
    preferred record, only inside that record's range. Where several declared forms of one
    element cover T (a reference that changes phase with T), the one of lowest G per atom
    is taken (the stable one), else the first by key. Returns ``element, t_k, s_atom,
    ref_species``.
    """
    sp = ctx.species
    is_ref = sp["reference_element"].fillna(False).astype(bool).to_numpy()
    refs = sp[is_ref]
    single = refs["elements_json"].map(lambda j: json.loads(j) if isinstance(j, str) else {})
    is_el = (single.map(len) == 1) & (refs["charge"] == 0)
    el = refs[is_el].assign(element=single[is_el].map(lambda d: next(iter(d))),
                            k=single[is_el].map(lambda d: float(next(iter(d.values())))))
    electron = sp[sp["formula"] == "e-"].assign(element="e", k=1.0)
    cand = pd.concat([el, electron], ignore_index=True)[["species", "element", "k"]]
    cand["record_id"] = ctx.preferred.reindex(cand["species"].to_numpy(object)).to_numpy(object)
    cand = cand.dropna(subset=["record_id"]).merge(ctx.records[["record_id", "t_low_k", "t_high_k"]],
                                                   on="record_id", how="left")
    t = np.unique(np.asarray(t_k, float))
    if not len(cand) or not len(t):
        return pd.DataFrame(columns=["element", "t_k", "s_atom", "ref_species"])
    v = ctx.functions.evaluate(cand["record_id"].to_numpy(object)[:, None], t[None, :])
    lo = cand["t_low_k"].to_numpy(float)[:, None] - 1e-6
    hi = cand["t_high_k"].to_numpy(float)[:, None] + 1e-6
    inside = (t[None, :] >= lo) & (t[None, :] <= hi) & np.isfinite(v.s)
    k = cand["k"].to_numpy(float)[:, None]
    long = pd.DataFrame({
        "element": np.repeat(cand["element"].to_numpy(object), len(t)),
        "ref_species": np.repeat(cand["species"].to_numpy(object), len(t)),
        "t_k": np.tile(t, len(cand)), "s_atom": (v.s / k).ravel(), "g_atom": (v.g / k).ravel(),
        "inside": inside.ravel()})
    long = long[long["inside"]]
    long = long.sort_values(["element", "t_k", "g_atom", "ref_species"], na_position="last", kind="stable")
    return long.groupby(["element", "t_k"], as_index=False).head(1)[["element", "t_k", "s_atom", "ref_species"]]


@check("table.formation-identity", tolerances={"dfg_j_mol": 100.0})
def table_formation_identity(ctx: CheckContext) -> pd.DataFrame:
    """Tabulated ΔfG must equal ΔfH − T ΔfS, with ΔfS from the reference elements' entropies.

    Relation: ΔfS(T) = S(T) − Σ_e (n_e / k_e) S_ref,e(T), where n_e atoms of element e are
    in the species and its declared reference form holds k_e atoms (O2: ½ per O atom);
    S of the species is its own table's, S of each reference form comes from its
    preferred record (the electron is the reference of charge for ions). Rows whose
    elements have no declared reference form covering T are not checked (one info finding
    per table says which elements are missing).
    Tolerance: error beyond 0.1 kJ/mol × max(1, T/298.15 K): the reference elements' own
    entropies carry fit errors of ~0.1 J/(mol·K) that grow with T (common practice;
    consistency of Chase, *NIST-JANAF Thermochemical Tables*, 4th ed., 1998).
    """
    cid = "table.formation-identity"
    rows = _row_frame(ctx)
    rows = rows[rows[["dfh_j_mol", "dfg_j_mol"]].notna().all(axis=1)].reset_index(drop=True)
    if not len(rows):
        return empty_findings()
    t = rows["t_k"].to_numpy(float)
    s_species = ctx.functions.evaluate(rows["record_id"].to_numpy(object), t).s
    rows = rows.assign(row=np.arange(len(rows)), s=s_species)
    row, el_code, n, elements = _row_elements(rows["species"], element_counts(ctx.species, ctx.elements))
    s_atom = _reference_entropy_at(reference_entropies(ctx, t), elements, el_code, t, row)
    # Σ n_e S_ref,e per row: NaN if any element has no reference form at T; 0 with no
    # elements (the electron itself)
    gap = np.isnan(s_atom)
    s_ref = np.bincount(row, weights=np.where(gap, 0.0, n * s_atom), minlength=len(rows))
    s_ref[np.bincount(row, weights=gap, minlength=len(rows)) > 0] = np.nan
    rows["s_ref"] = s_ref
    missing = pd.DataFrame({"record_id": rows["record_id"].to_numpy(object)[row[gap]],
                            "element": elements[el_code[gap]]})
    parts = []
    if len(missing):
        miss = missing.groupby("record_id")["element"].agg(lambda e: ", ".join(sorted(set(e))))
        info = rows.drop_duplicates("record_id").set_index("record_id").loc[miss.index]
        parts.append(make_findings(
            check_id=cid, severity="info", subject=info["species"], subject_kind="species",
            source_id=info["source_id"], unit="J/mol",
            message=[f"ΔfG not checked at some rows: no reference form of {m} covers their temperatures"
                     for m in miss], hint="declare the elements' reference species (reference_element = true)"))
    rows = rows[rows["s_ref"].notna() & rows["s"].notna()]
    if len(rows):
        t = rows["t_k"].to_numpy(float)
        dfs = rows["s"].to_numpy(float) - rows["s_ref"].to_numpy(float)
        expected = rows["dfh_j_mol"].to_numpy(float) - t * dfs
        observed = rows["dfg_j_mol"].to_numpy(float)
        tol = ctx.tol(cid, "dfg_j_mol") * np.maximum(1.0, t / T_REF)
        res = np.abs(observed - expected)
        frame = rows.assign(obs=observed, exp=expected, tol=tol, ratio=res / tol, dfs=dfs)
        bad = frame[frame["ratio"] > 1]
        if len(bad):
            w = _worst_per_record(bad, "ratio")
            parts.append(make_findings(
                check_id=cid, severity="error", subject=w["species"], subject_kind="species",
                source_id=w["source_id"], t_k=w["t_k"], observed=w["obs"], expected=w["exp"],
                tolerance=w["tol"], unit="J/mol",
                message=[f"ΔfG = {r.obs / 1e3:.3f} kJ/mol at {r.t_k:g} K but ΔfH − TΔfS = {r.exp / 1e3:.3f} "
                         f"(ΔfS = {r.dfs:.3f} J/(mol·K) from the reference elements; {r.n_bad} rows fail)"
                         for r in w.itertuples(index=False)],
                hint=["ΔfG, ΔfH and S come from different data sets, the elements' reference entropies "
                      "differ from the ones the table used, or a row is mistyped"] * len(w)))
    return pd.concat(parts, ignore_index=True) if parts else empty_findings()
