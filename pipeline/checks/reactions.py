"""Reaction and network checks: residuals, Hess cycles, the network fit, second/third law.

These run in the reconcile stage (``stage="network"``), after the per-record checks, so
the curated species functions come from each species' preferred record chosen with the
earlier findings (:func:`pipeline.preferred.choose_preferred`). The numerics live in
:mod:`pipeline.network`; this module maps frames to arrays and results to findings and to
the side tables ``reaction_results`` and ``reconciled``.
"""
from __future__ import annotations

import json
from dataclasses import dataclass
from itertools import chain

import numpy as np
import pandas as pd
import scipy.sparse as sp

from .. import network as nw
from ..constants import GASEOUS_REFERENCE_ATOMICITY, LN10, R, T_REF
from ..findings import empty_findings, make_findings
from ..preferred import choose_preferred
from .context import CheckContext
from .registry import check

UNIT = {"drh": "J/mol", "drg": "J/mol", "log_k": "1"}
RESULT_COLUMNS = ("reaction_id", "computed_value", "residual", "z", "u_combined")
RECONCILED_COLUMNS = ("species", "dfh_298_j_mol", "uncertainty_dfh_298_j_mol", "prior_dfh_298_j_mol",
                      "prior_uncertainty_dfh_298_j_mol", "determined", "chi2", "dof", "reduced_chi2")


# ---------------------------------------------------------------- shared derivations

def _sources(ctx: CheckContext) -> pd.DataFrame:
    src = getattr(ctx, "sources", None)
    if src is not None and len(src):
        return src
    ids = pd.unique(ctx.records["source_id"]) if len(ctx.records) else []
    return pd.DataFrame({"source_id": ids, "priority": 0, "kind": "evaluated"})


def preferred_records(ctx: CheckContext) -> dict:
    """species → preferred record id (sources' priority; records with unwaived errors demoted).

    Computed once per context for the same records, sources and earlier findings
    (``ctx.prior_findings``); callers must not modify the mapping."""
    if not len(ctx.records):
        return {}
    return _cached(ctx, "reactions.preferred", (ctx.records, getattr(ctx, "sources", None), ctx.prior_findings),
                   lambda: _preferred_given(ctx, ctx.prior_findings))


def _preferred_given(ctx: CheckContext, findings: pd.DataFrame | None) -> dict:
    """species → preferred record id with ``findings`` as the earlier findings."""
    if not len(ctx.records):
        return {}
    f = findings
    if f is not None and len(f):
        f = (f.assign(waived=f["waived"].fillna(False).astype(bool)) if "waived" in f
             else f.assign(waived=False))
    pref = choose_preferred(ctx.records, _sources(ctx), f)
    return dict(zip(pref["species"].to_numpy(object), pref["preferred_record_id"].to_numpy(object)))


def _cached(ctx: CheckContext, name: str, inputs: tuple, build):
    """``build()`` kept on the context under ``name`` while ``inputs`` are the same objects."""
    hit = ctx.cached(name, dict)
    if "inputs" not in hit or len(hit["inputs"]) != len(inputs) or any(
            a is not b for a, b in zip(hit["inputs"], inputs)):
        hit.update(inputs=inputs, value=build())
    return hit["value"]


@dataclass(frozen=True)
class Stoichiometry:
    """Every reaction's stoichiometry parsed once, long: term k belongs to reaction row
    ``row[k]`` (position in ``ctx.reactions``), species ``species[code[k]]``, coefficient
    ``nu[k]`` (as stated, zeros included; terms in the order of the JSON text)."""

    row: np.ndarray
    code: np.ndarray
    nu: np.ndarray
    species: np.ndarray
    indptr: np.ndarray      # terms of row i: indptr[i]:indptr[i + 1]

    def select(self, rows: np.ndarray, *, drop_zero: bool = True):
        """(row position within ``rows``, code, nu) of the terms of reaction rows ``rows``
        (ascending), in order; coefficients of zero dropped unless ``drop_zero`` is False."""
        rows = np.asarray(rows, dtype=np.int64)
        lens = self.indptr[rows + 1] - self.indptr[rows]
        k = np.repeat(self.indptr[rows] - np.concatenate([[0], np.cumsum(lens)[:-1]]), lens) \
            + np.arange(int(lens.sum()))
        pos = np.repeat(np.arange(len(rows)), lens)
        if drop_zero:
            nz = self.nu[k] != 0.0
            k, pos = k[nz], pos[nz]
        return pos, self.code[k], self.nu[k]

    def as_dict(self, i: int) -> dict:
        """{species: ν} of reaction row ``i`` (zeros included, as stated)."""
        a, b = self.indptr[i], self.indptr[i + 1]
        return dict(zip(self.species[self.code[a:b]].tolist(), self.nu[a:b].tolist()))


def stoichiometry(ctx: CheckContext) -> Stoichiometry:
    """The parsed stoichiometry of ``ctx.reactions`` (cached on the context)."""
    return _cached(ctx, "reactions.stoichiometry", (ctx.reactions,),
                   lambda: _parse_stoichiometry(ctx.reactions["stoich_json"].to_numpy(object)))


def _parse_stoichiometry(texts: np.ndarray) -> Stoichiometry:
    """Parse every ``stoich_json`` (null: no terms): the flat form that ``json.dumps`` writes
    (``{"key": number, "key": number}``) with Arrow string kernels, anything else with
    ``json`` (one ``json.loads`` of a JSON array; a text that is not valid JSON raises as
    ``json.loads`` of it alone would)."""
    texts = np.asarray(texts, dtype=object)
    fast = _parse_flat_json(texts)
    if fast is not None:
        return fast
    texts = list(texts)
    is_text = [isinstance(t, str) for t in texts]
    body = [t if ok else "{}" for t, ok in zip(texts, is_text)]
    try:
        dicts = json.loads("[" + ",".join(body) + "]") if body else []
        if len(dicts) != len(texts) or not all(isinstance(d, dict) for d in dicts):
            raise ValueError("not one object per reaction")
    except ValueError:
        dicts = [json.loads(t) if ok else {} for t, ok in zip(texts, is_text)]
    for i, (t, ok) in enumerate(zip(texts, is_text)):   # mappings given as objects (frames built in code)
        if not ok and t is not None and not (isinstance(t, float) and np.isnan(t)):
            dicts[i] = dict(t)
    lens = np.fromiter((len(d) for d in dicts), dtype=np.int64, count=len(dicts))
    keys = list(chain.from_iterable(dicts))
    nus = np.asarray(list(chain.from_iterable(d.values() for d in dicts)), dtype=float)
    codes, uniq = pd.factorize(np.asarray(keys, dtype=object), sort=False)
    return _stoich_from(lens, np.asarray(codes, dtype=np.int64), nus, np.asarray(uniq, dtype=object))


def _stoich_from(lens: np.ndarray, codes: np.ndarray, nus: np.ndarray, species: np.ndarray) -> Stoichiometry:
    return Stoichiometry(row=np.repeat(np.arange(len(lens), dtype=np.int64), lens), code=codes, nu=nus,
                         species=species, indptr=np.concatenate([[0], np.cumsum(lens)]).astype(np.int64))


def _parse_flat_json(texts: np.ndarray) -> Stoichiometry | None:
    """The Arrow path of :func:`_parse_stoichiometry`, or None when any text is not in the
    flat form (other spacing, escapes, repeated keys, non-numbers, non-strings …)."""
    import pyarrow as pa
    import pyarrow.compute as pc

    if not len(texts) or not all(isinstance(t, str) or t is None or (isinstance(t, float) and np.isnan(t))
                                 for t in texts):
        return None
    try:
        arr = pa.array(texts, type=pa.string(), from_pandas=True)
        valid = arr.drop_null()
        if not (pc.all(pc.starts_with(valid, "{")).as_py() is not False
                and pc.all(pc.ends_with(valid, "}")).as_py() is not False):
            return None
        inner = pc.utf8_slice_codeunits(arr, 1, -1)
        inner = pc.if_else(pc.equal(inner, ""), pa.scalar(None, pa.string()), inner)     # {} → no terms
        if pc.any(pc.invert(pc.starts_with(inner.drop_null(), '"'))).as_py():
            return None
        pieces = pc.split_pattern(inner, pattern=', "')
        lens = pc.fill_null(pc.list_value_length(pieces), 0).to_numpy(zero_copy_only=False).astype(np.int64)
        kv = pc.split_pattern(pc.list_flatten(pieces), pattern='": ', max_splits=1, reverse=True)
        if len(kv) and pc.any(pc.not_equal(pc.list_value_length(kv), 2)).as_py():
            return None
        keys = pc.list_element(kv, 0) if len(kv) else pa.array([], pa.string())
        first = np.zeros(len(kv), bool)
        first[np.concatenate([[0], np.cumsum(lens)[:-1]])[lens > 0]] = True
        keys = pc.if_else(pa.array(first), pc.utf8_slice_codeunits(keys, 1), keys)   # the first key's quote
        if len(keys) and (pc.any(pc.match_substring(keys, '"')).as_py()
                          or pc.any(pc.match_substring(keys, "\\")).as_py()):
            return None
        nus = (pc.cast(pc.list_element(kv, 1), pa.float64()).to_numpy(zero_copy_only=False) if len(kv)
               else np.zeros(0))
    except (pa.ArrowInvalid, pa.ArrowTypeError, pa.ArrowNotImplementedError, IndexError):
        return None
    enc = pc.dictionary_encode(keys)
    codes = enc.indices.to_numpy(zero_copy_only=False).astype(np.int64)
    species = np.asarray(enc.dictionary.to_pylist(), dtype=object)
    rows = np.repeat(np.arange(len(lens), dtype=np.int64), lens)
    if len(codes) and not np.all(np.diff(np.sort(rows * max(len(species), 1) + codes))):
        return None                                     # a repeated key: json keeps the last value
    return _stoich_from(lens, codes, nus, species)


def _record_ranges(ctx: CheckContext):
    """(index of record ids, t_low [K], t_high [K]) of every record (cached)."""
    def build():
        rec = ctx.records
        return (pd.Index(rec["record_id"].to_numpy(object)), rec["t_low_k"].to_numpy(float),
                rec["t_high_k"].to_numpy(float))
    return _cached(ctx, "reactions.record_ranges", (ctx.records,), build)


def _evaluate(ctx: CheckContext, record_ids: np.ndarray, t_k: np.ndarray, which: int | None = None):
    """(h, g, s, h − h298) of (record, T) pairs; NaN where the record is missing or out of range.

    A record is used inside its stated range only (a fit is not extrapolated), except that
    one starting at most 5 K above 298.15 K serves down to 297.65 K (many NASA records
    start at 300 K and are used at 298.15 K by convention; Cp·5 K is within every tolerance).
    ``which`` = 0…3: only that one of the four arrays.
    """
    rid = np.asarray(record_ids, dtype=object)
    codes, uniq = pd.factorize(rid, use_na_sentinel=True)
    return _evaluate_coded(ctx, np.asarray(uniq, dtype=object), codes, t_k, which)


def _evaluate_coded(ctx: CheckContext, ids: np.ndarray, codes: np.ndarray, t_k: np.ndarray,
                    which: int | None = None):
    """:func:`_evaluate` of pairs (record ``ids[codes[k]]``, ``t_k[k]``); ``codes`` < 0 or an id
    that is not a string: no record. Each distinct (record, T) pair is evaluated once."""
    t = np.asarray(t_k, float)
    codes = np.asarray(codes, dtype=np.int64)
    out = [np.full(len(t), np.nan) for _ in range(4)]
    if not len(t) or not len(ctx.records) or not len(ids):
        return out if which is None else out[which]
    index, lo_all, hi_all = _record_ranges(ctx)

    def locate():
        is_str = np.fromiter((isinstance(r, str) for r in ids), dtype=bool, count=len(ids))
        at = np.full(len(ids), -1, dtype=np.int64)
        if is_str.any():
            at[is_str] = index.get_indexer(ids[is_str])    # raises on repeated record ids, as Series.map did
        return is_str, at

    # the same ids array comes back for every use of one set of terms: locate it once
    is_str, at = _cached(ctx, "reactions.record_positions", (ids, index), locate)
    lo_u = np.where(at >= 0, lo_all[np.maximum(at, 0)], np.nan)
    hi_u = np.where(at >= 0, hi_all[np.maximum(at, 0)], np.nan)
    lo_u = np.where(lo_u <= T_REF + 5.0, np.minimum(lo_u, T_REF - 0.5), lo_u)
    have = codes >= 0
    c = np.maximum(codes, 0)
    ok = have & is_str[c] & np.isfinite(t) & (t >= lo_u[c] - 1e-6) & (t <= hi_u[c] + 1e-6)
    if ok.any():
        k = np.flatnonzero(ok)
        tc, tu = pd.factorize(t[k])                       # few distinct temperatures, usually
        key = codes[k] * len(tu) + tc
        if len(ids) * len(tu) <= 8 * len(k) + 1_000_000:
            present = np.bincount(key, minlength=len(ids) * len(tu)) > 0
            pair = (np.cumsum(present) - 1)[key]
        else:
            _, pair = np.unique(key, return_inverse=True)
            pair = pair.ravel()
        first = np.empty(int(pair.max()) + 1, dtype=np.int64)
        first[pair] = k                                   # one term of each distinct (record, T)
        v = ctx.functions.evaluate(ids[codes[first]].astype(str), t[first])
        for arr, val in zip(out, (v.h, v.g, v.s, v.h_minus_h298)):
            arr[k] = np.asarray(val, float)[pair]
    return out if which is None else out[which]


@dataclass
class Terms:
    """Terms of a set of reaction rows: ``row`` (position within the set), species ``code``
    (into ``species``), ``nu`` (zeros dropped), ``t_k`` [K], and the preferred record
    ``record_ids[code]`` of each species (None: none)."""

    row: np.ndarray
    code: np.ndarray
    nu: np.ndarray
    t_k: np.ndarray
    species: np.ndarray
    record_ids: np.ndarray

    def __len__(self) -> int:
        return len(self.row)

    def evaluate(self, ctx: CheckContext, t_k: np.ndarray | None = None, which: int | None = None):
        """:func:`_evaluate` of each term's preferred record at ``t_k`` (default: its own T)."""
        return _evaluate_coded(ctx, self.record_ids, self.code, self.t_k if t_k is None else t_k, which)


def _terms(ctx: CheckContext, rows: np.ndarray, t_k: np.ndarray, pref: dict) -> Terms:
    """The terms of reaction rows ``rows`` (ascending positions in ``ctx.reactions``; ``t_k``
    their temperatures)."""
    st = stoichiometry(ctx)
    pos, code, nu = st.select(rows)
    rec_u = _cached(ctx, "reactions.species_records", (st, pref),
                    lambda: np.array([pref.get(s) for s in st.species], dtype=object))
    return Terms(row=pos, code=code, nu=nu, t_k=np.asarray(t_k, float)[pos] if len(pos) else np.zeros(0),
                 species=st.species, record_ids=rec_u)


def _species_uncertainty(ctx: CheckContext, long: Terms, column: str, pref: dict) -> np.ndarray:
    """Stated standard uncertainty ``column`` of each term's species at the tabulated T
    nearest the term's T: the preferred record's table first, else any table of the species."""
    out = np.full(len(long), np.nan)
    tp = ctx.table_points
    if not len(long) or not len(tp) or column not in tp:
        return out
    cand = tp.loc[tp[column].notna(), ["record_id", "t_k", column]]
    if not len(cand):
        return out
    cand = cand.merge(ctx.records[["record_id", "species"]], on="record_id")
    cand = cand.assign(t_k=cand["t_k"].astype(float), is_pref=cand["record_id"].eq(cand["species"].map(pref)))
    # only terms of species that have such a table can get a value
    keep = np.flatnonzero(pd.Index(long.species).isin(pd.unique(cand["species"]))[long.code]
                          & np.isfinite(long.t_k))
    left = pd.DataFrame({"pos": keep, "species": long.species[long.code[keep]], "t_k": long.t_k[keep]})
    left = left.sort_values("t_k", kind="stable")
    for subset in (cand[cand["is_pref"]], cand):
        if not len(subset) or not len(left):
            continue
        right = subset.sort_values("t_k", kind="stable")[["species", "t_k", column]]
        m = pd.merge_asof(left, right, on="t_k", by="species", direction="nearest")
        pos = m["pos"].to_numpy()
        val = m[column].to_numpy(float)
        fill = np.isnan(out[pos]) & np.isfinite(val)
        out[pos[fill]] = val[fill]
    return out


def computed_reactions(ctx: CheckContext, pref: dict | None = None) -> pd.DataFrame:
    """Per reaction row: computed value, combined uncertainty, residual, z and missing species.

    ΔrH = Σν H_i(T), ΔrG = Σν G_i(T), log K = −ΔrG/(RT ln 10) from the preferred records'
    functions (absolute-enthalpy convention: H(298.15) = ΔfH°(298.15), so the element
    offsets cancel in a balanced reaction).
    """
    rx = ctx.reactions.reset_index(drop=True)
    n = len(rx)
    pref = preferred_records(ctx) if pref is None else pref
    long = _terms(ctx, np.arange(n), rx["t_k"].to_numpy(float), pref)
    row, nu = long.row, long.nu
    h, g, _, _ = long.evaluate(ctx)
    q = rx["quantity"].to_numpy(object)
    t = rx["t_k"].to_numpy(float)
    drh = nw.reaction_sum(row, nu * h, n)
    drg = nw.reaction_sum(row, nu * g, n)
    with np.errstate(divide="ignore", invalid="ignore"):
        computed = np.where(q == "drh", drh, np.where(q == "drg", drg,
                            np.where(q == "log_k", -drg / (R * t * LN10), np.nan)))
    u_h = _species_uncertainty(ctx, long, "uncertainty_dfh_j_mol", pref)
    u_g = _species_uncertainty(ctx, long, "uncertainty_dfg_j_mol", pref)
    u_g = np.where(np.isfinite(u_g), u_g, u_h)
    is_h = (q == "drh")[row] if len(row) else np.zeros(0, bool)
    u_sp = np.where(is_h, u_h, u_g) * nu
    with np.errstate(divide="ignore", invalid="ignore"):
        scale = np.where(q == "log_k", 1.0 / (R * t * LN10), 1.0)   # J/mol → log10 K units
        u_species_sq = nw.combined_uncertainty(np.zeros(n), row, u_sp, n) ** 2 * scale ** 2
    u_meas = rx["uncertainty"].to_numpy(float)
    u_comb = np.sqrt(u_meas ** 2 + u_species_sq)
    value = rx["value"].to_numpy(float)
    residual = value - computed
    with np.errstate(divide="ignore", invalid="ignore"):
        z = np.where(u_comb > 0, residual / u_comb, np.where(residual == 0, 0.0, np.sign(residual) * np.inf))
    # which species made a value impossible, and why
    term_val = np.where(is_h, h, g)
    missing = np.flatnonzero(~np.isfinite(term_val))
    no_rec = pd.isna(long.record_ids)[long.code[missing]]
    why = np.where(no_rec, "no record", "outside its range or without ΔfH°")
    miss = pd.DataFrame({"row": row[missing], "txt": long.species[long.code[missing]] + " (" + why + ")"})
    miss_txt = miss.groupby("row")["txt"].agg("; ".join) if len(miss) else pd.Series(dtype=object)
    return pd.DataFrame({"reaction_id": rx["reaction_id"].to_numpy(object), "computed_value": computed,
                         "residual": residual, "z": z, "u_combined": u_comb,
                         "missing": pd.Series(miss_txt).reindex(np.arange(n)).to_numpy(object)})


def reference_species(ctx: CheckContext) -> set:
    """Species that are elements in their reference state (ΔfH° = 0 by definition), by
    :func:`pipeline.properties.element_references` (cached on the context)."""
    if not len(ctx.species):
        return set()
    return _cached(ctx, "reactions.reference_species", (ctx.species,), lambda: _reference_species(ctx))


def _reference_species(ctx: CheckContext) -> set:
    """``element_references`` decides each species from its own row (exactly one element,
    the electron of an ion included; the flag; no charge) and the presence of a few fixed
    keys, so it is run on the species with at most one element in ``ctx.elements`` (a
    superset of those) and on those keys: the same result, in much less time."""
    from ..properties import element_references

    sp_ = ctx.species
    fixed = {f"{el}{n if n > 1 else ''}(g)" for el, n in GASEOUS_REFERENCE_ATOMICITY.items()} | {"e-(g)"}
    n_el = ctx.elements.groupby("species").size()
    few = (sp_["species"].map(n_el).fillna(0).to_numpy(float) <= 1) | sp_["species"].isin(fixed).to_numpy()
    return set(element_references(sp_[few].reset_index(drop=True))["species"])


# ------------------------------------------------------------------- reaction.residual

@check("reaction.residual", tolerances={"z_warning": 2.0, "z_error": 3.0}, stage="network")
def reaction_residual(ctx: CheckContext) -> pd.DataFrame:
    """A measured ΔrH, ΔrG or log K agrees with the value computed from the curated species.

    Relation: ΔrH°(T) = Σ ν_i H_i(T), ΔrG°(T) = Σ ν_i G_i(T), log K = −ΔrG°/(RT ln 10), from
    each species' preferred record at the measurement's T (Hess's law); z = (measured −
    computed)/u with u = √(u_meas² + Σ (ν_i u_i)²) over species whose tables state an
    uncertainty (uncertainty_dfh for ΔrH; uncertainty_dfg, else uncertainty_dfh, for
    ΔrG and log K, divided by RT ln 10 for log K).
    Tolerance: warning at |z| > 2, error at |z| > 3 (standard uncertainties, k = 1: about
    5 % and 0.3 % of consistent data exceed these by chance; common practice). A reaction
    whose species have no curated value at T is reported as info.
    Also writes the side table ``reaction_results`` (computed value, residual, z, u).
    Reference: Hess's law; JCGM 100:2008 (GUM) for the combination of uncertainties.
    """
    cid = "reaction.residual"
    rx = ctx.reactions.reset_index(drop=True)
    if not len(rx):
        ctx.tables_out["reaction_results"] = pd.DataFrame({c: pd.Series(dtype=float if c != "reaction_id" else object)
                                                           for c in RESULT_COLUMNS})
        return empty_findings()
    res = computed_reactions(ctx)
    ctx.tables_out["reaction_results"] = res[list(RESULT_COLUMNS)].copy()
    zw, ze = ctx.tol(cid, "z_warning"), ctx.tol(cid, "z_error")
    q = rx["quantity"].to_numpy(object)

    def unit(rows):
        return np.array([UNIT.get(x, "") for x in q[rows]], dtype=object)

    az = np.abs(res["z"].to_numpy(float))
    sev = np.where(az > ze, "error", np.where(az > zw, "warning", None))
    parts = []
    bad = np.flatnonzero(sev != None)  # noqa: E711 (elementwise)
    if len(bad):
        r, x = rx.iloc[bad], res.iloc[bad]
        msgs = [f"measured {_fmt(v, qq)} but the curated species give {_fmt(c, qq)} at {t:g} K: "
                f"residual {_fmt(d, qq)}, z = {zz:+.2f} (u = {_fmt(uu, qq)})"
                for v, c, d, zz, uu, qq, t in zip(r["value"], x["computed_value"], x["residual"], x["z"],
                                                  x["u_combined"], r["quantity"], r["t_k"])]
        parts.append(make_findings(
            check_id=cid, severity=sev[bad], subject=r["reaction_id"], subject_kind="reaction",
            source_id=r["source_id"], t_k=r["t_k"], observed=r["value"], expected=x["computed_value"],
            tolerance=np.where(sev[bad] == "error", ze, zw) * x["u_combined"].to_numpy(float), unit=unit(bad),
            message=msgs,
            hint="a wrong species value (see the cycle and network checks: do other reactions agree?), "
                 "a unit or sign slip in the measurement, or an underestimated uncertainty"))
    nan = np.flatnonzero(res["missing"].notna().to_numpy() | ~np.isfinite(res["computed_value"].to_numpy(float)))
    if len(nan):
        r, x = rx.iloc[nan], res.iloc[nan]
        parts.append(make_findings(
            check_id=cid, severity="info", subject=r["reaction_id"], subject_kind="reaction",
            source_id=r["source_id"], t_k=r["t_k"], observed=r["value"], unit=unit(nan),
            message=[f"cannot compute {qq} at {t:g} K from the curated species: {m if isinstance(m, str) else 'no value'}"
                     for qq, t, m in zip(r["quantity"], r["t_k"], x["missing"])],
            hint="add the missing species (or a table reaching this temperature) to test this measurement"))
    return pd.concat(parts, ignore_index=True) if parts else empty_findings()


def _fmt(x: float, quantity: str) -> str:
    if quantity == "log_k":
        return f"{x:.4g}"
    return f"{x / 1000:.4g} kJ/mol"


# ----------------------------------------------------------------------- cycle.closure

@check("cycle.closure", tolerances={"z_error": 3.0, "same_t_k": 0.5, "max_component_reactions": 3000},
       stage="network")
def cycle_closure(ctx: CheckContext) -> pd.DataFrame:
    """Every independent thermochemical cycle of measurements sums to zero (Hess's law).

    Relation: for measurements of the same quantity at the same temperature (ΔrH; or ΔrG,
    with log K converted by ΔrG = −RT ln 10 · log K), a combination Σ c_k (reaction k) in
    which every species cancels must have Σ c_k v_k = 0; z = Σ c_k v_k / √Σ (c_k u_k)².
    The cycles are a basis of the left null space of the stoichiometric matrix in small
    coprime integers, built simplest-reactions-first and then shortened (fewest
    reactions); every measurement that lies in any cycle lies in at least one basis cycle,
    so a bad measurement always shows (see :func:`pipeline.network.cycle_basis`).
    Temperatures within ``same_t_k`` = 0.5 K count as equal (the ΔCp·ΔT error of 0.5 K is
    below 0.1 kJ/mol for ΔrCp up to 200 J/(mol·K); common practice).
    Tolerance: error at |z| > 3 (0.3 % of consistent cycles by chance; common practice).
    A group of more than ``max_component_reactions`` linked measurements is not
    decomposed (exact integer elimination grows too costly); that is reported as info and
    such networks are tested by network.worst-offender instead.
    Reference: Hess's law; Ruscic et al., J. Phys. Chem. A 108 (2004) 9979 (cycles in a
    thermochemical network).
    """
    cid = "cycle.closure"
    rx = ctx.reactions.reset_index(drop=True)
    if not len(rx):
        return empty_findings()
    q = rx["quantity"].to_numpy(object)
    t = rx["t_k"].to_numpy(float)
    v = rx["value"].to_numpy(float)
    u = rx["uncertainty"].to_numpy(float)
    # log K → ΔrG at its T
    conv = np.where(q == "log_k", -R * t * LN10, 1.0)
    v = v * conv
    u = u * np.abs(conv)
    qg = np.where(q == "drh", "drh", np.where(np.isin(q, ["drg", "log_k"]), "drg", None))
    ok = (qg != None) & np.isfinite(v) & np.isfinite(u) & np.isfinite(t) & rx["stoich_json"].notna().to_numpy()  # noqa: E711
    if not ok.any():
        return empty_findings()
    st = stoichiometry(ctx)
    window = ctx.tol(cid, "same_t_k")
    cap = int(ctx.tol(cid, "max_component_reactions"))
    parts, rows_out = [], []
    idx_ok = np.flatnonzero(ok)
    frame = pd.DataFrame({"i": idx_ok, "qg": qg[idx_ok], "t": t[idx_ok]})
    frame["tc"] = -1
    for name, grp in frame.groupby("qg", sort=True):
        frame.loc[grp.index, "tc"] = nw.cluster_temperatures(grp["t"].to_numpy(), window)
    ids = rx["reaction_id"].astype(str).to_numpy(object)
    src = rx["source_id"].astype(str).to_numpy(object)
    for (name, tc), grp in frame.groupby(["qg", "tc"], sort=True):
        members = grp["i"].to_numpy()
        if len(members) < 2:
            continue
        pos, code, _ = st.select(members, drop_zero=False)
        comp = nw.term_components(pos, code, len(members))
        for c in np.flatnonzero(np.bincount(comp)):
            sel = members[comp == c]
            if len(sel) < 2:
                continue
            if len(sel) > cap:
                parts.append(make_findings(
                    check_id=cid, severity="info", subject=f"cycle:{ids[sel].min()}+…", subject_kind="cycle",
                    t_k=float(np.mean(t[sel])),
                    message=f"{len(sel)} linked {name} measurements near {np.mean(t[sel]):.2f} K: more than "
                            f"{cap}, cycles not enumerated (network.worst-offender tests them)",
                    hint="raise max_component_reactions for cycle.closure in the configuration to enumerate them"))
                continue
            cycles = nw.cycle_basis([st.as_dict(i) for i in sel])
            if not cycles:
                continue
            s, us, z = nw.cycle_closure(cycles, v[sel], u[sel])
            for cyc, si, ui, zi in zip(cycles, s, us, z):
                rows_out.append((name, sel, cyc, si, ui, zi))
    ze = ctx.tol(cid, "z_error")
    bad = [r for r in rows_out if abs(r[5]) > ze]
    if bad:
        subj, srcs, tks, obs, tol, msgs = [], [], [], [], [], []
        for name, sel, cyc, si, ui, zi in bad:
            members = sorted((ids[sel[k]], c) for k, c in cyc.items())
            subj.append("cycle:" + "+".join(m for m, _ in members))
            srcs.append("+".join(sorted({src[sel[k]] for k in cyc})))
            tks.append(float(np.mean([t[sel[k]] for k in cyc])))
            obs.append(si)
            tol.append(ze * ui)
            terms = " ".join(f"{'+' if c > 0 else '−'} {abs(c) if abs(c) != 1 else ''}{m}".replace("  ", " ")
                             for m, c in members).lstrip("+ ").strip()
            msgs.append(f"{'ΔrH' if name == 'drh' else 'ΔrG'} cycle {terms} sums to {si / 1000:.4g} kJ/mol "
                        f"instead of 0: z = {zi:+.2f} (u = {ui / 1000:.3g} kJ/mol)")
        parts.append(make_findings(
            check_id=cid, severity="error", subject=subj, subject_kind="cycle", source_id=srcs, t_k=tks,
            observed=obs, expected=0.0, tolerance=tol, unit="J/mol", message=msgs,
            hint="one of these measurements is wrong (the reaction found in several failing cycles, and "
                 "network.worst-offender, point to it) or its uncertainty is underestimated"))
    return pd.concat(parts, ignore_index=True) if parts else empty_findings()


# ---------------------------------------------------------------- network.worst-offender

def _priors(ctx: CheckContext, species: np.ndarray, pref: dict):
    """Stated ΔfH°(298.15) and its uncertainty per species: the preferred record's table row
    at 298.15 K stating both, else any record's; NaN when none states both."""
    val = np.full(len(species), np.nan)
    unc = np.full(len(species), np.nan)
    tp = ctx.table_points
    if not len(tp) or not len(species):
        return val, unc
    rows = tp[(np.abs(tp["t_k"].astype(float) - T_REF) < 1e-6) & tp["dfh_j_mol"].notna()
              & tp["uncertainty_dfh_j_mol"].notna()][["record_id", "dfh_j_mol", "uncertainty_dfh_j_mol"]]
    rows = rows.merge(ctx.records[["record_id", "species"]], on="record_id")
    rows = rows.assign(rank=np.where(rows["record_id"].eq(rows["species"].map(pref)), 0, 1))
    best = rows.sort_values(["species", "rank", "record_id"], kind="stable").drop_duplicates("species")
    best = best.set_index("species")
    s = pd.Series(species)
    val = s.map(best["dfh_j_mol"]).to_numpy(float)
    unc = s.map(best["uncertainty_dfh_j_mol"]).to_numpy(float)
    return val, unc


NETWORK_CHECK = "network.worst-offender"
#: Networks of at least this many ΔrH measurements at 298.15 K are fitted in a worker
#: process started during the check stage (:func:`start_network_fit`); smaller ones take
#: less time than starting a process.
BACKGROUND_MIN_MEASUREMENTS = 20_000


@dataclass(frozen=True)
class _Network:
    """The ΔrH°(298.15) measurements of the network and its design: ``A`` (measurements ×
    ``unknown`` species, coefficients ν; reference elements left out, ΔfH = 0), the
    reference elements it contains (``ref_in``) and each measurement's rank in reaction-id
    order (``tie_rank``, the tie-break)."""

    meas: pd.DataFrame
    A: sp.csr_matrix
    unknown: np.ndarray
    ref_in: list
    tie_rank: np.ndarray


def _network(ctx: CheckContext) -> _Network | None:
    """:class:`_Network` of ``ctx`` (cached), or None when no measurement qualifies."""
    return _cached(ctx, "reactions.network", (ctx.reactions, ctx.species, ctx.config), lambda: _build_network(ctx))


def _build_network(ctx: CheckContext) -> _Network | None:
    rx = ctx.reactions.reset_index(drop=True)
    if not len(rx):
        return None
    win = ctx.tol(NETWORK_CHECK, "t_window_k")
    sel = ((rx["quantity"] == "drh") & (np.abs(rx["t_k"].astype(float) - T_REF) <= win)
           & np.isfinite(rx["value"].astype(float)) & (rx["uncertainty"].astype(float) > 0)
           & rx["stoich_json"].notna()).to_numpy()
    meas = rx[sel].reset_index(drop=True)
    if not len(meas):
        return None
    st = stoichiometry(ctx)
    row, code, nu = st.select(np.flatnonzero(sel))
    refs = reference_species(ctx)
    is_ref = np.fromiter((s in refs for s in st.species), dtype=bool, count=len(st.species))[code]
    present = np.flatnonzero(np.bincount(code[~is_ref], minlength=len(st.species)))
    unknown = np.array(sorted(st.species[present].tolist()), dtype=object)
    col = np.full(len(st.species), -1, dtype=np.int64)
    col[present] = pd.Index(unknown).get_indexer(st.species[present])
    A = sp.csr_matrix((nu[~is_ref], (row[~is_ref], col[code[~is_ref]])), shape=(len(meas), len(unknown)))
    ref_in = sorted(st.species[np.flatnonzero(np.bincount(code[is_ref], minlength=len(st.species)))].tolist())
    # data the network cannot tell apart (equal |t|): the lowest reaction id is set aside first
    rid_rank = np.empty(len(meas), dtype=np.int64)
    rid_rank[np.argsort(meas["reaction_id"].astype(str).to_numpy(object), kind="stable")] = np.arange(len(meas))
    return _Network(meas=meas, A=A, unknown=unknown, ref_in=ref_in, tie_rank=rid_rank)


def _fit_inputs(ctx: CheckContext, net: _Network, pref: dict) -> tuple[tuple, dict]:
    """Arguments of :func:`pipeline.network.reconcile` for ``net`` with the priors of the
    preferred records ``pref``."""
    prior, prior_sd = _priors(ctx, net.unknown, pref)
    args = (net.A, net.meas["value"].to_numpy(float), net.meas["uncertainty"].to_numpy(float), prior, prior_sd)
    return args, dict(z_max=ctx.tol(NETWORK_CHECK, "z_max"), alpha=ctx.tol(NETWORK_CHECK, "chi2_alpha"),
                      tie_rank=net.tie_rank)


def start_network_fit(ctx: CheckContext, findings: pd.DataFrame | None,
                      min_measurements: int = BACKGROUND_MIN_MEASUREMENTS) -> bool:
    """Start the network fit of ``network.worst-offender`` in a worker process now.

    The fit's priors depend on the preferred records, which depend on the findings of the
    checks (records with errors are demoted); they are taken with the ``findings`` known
    now. The check later uses the worker's result only if its own inputs, built with all
    findings, are identical (:class:`pipeline.network.BackgroundFit`); so the result never
    depends on this start, only the time does. Returns whether a fit was started."""
    net = _network(ctx)
    if net is None or len(net.meas) < min_measurements:
        return False
    args, kwargs = _fit_inputs(ctx, net, _preferred_given(ctx, findings))
    close_background(ctx)
    ctx.cached("reactions.network_background", dict)["fit"] = nw.BackgroundFit(args, kwargs)
    return True


def close_background(ctx: CheckContext) -> None:
    """Stop a network fit started by :func:`start_network_fit` that nothing used."""
    bg = ctx.cached("reactions.network_background", dict).pop("fit", None)
    if bg is not None:
        bg.close()


@check("network.worst-offender", tolerances={"z_max": 3.0, "chi2_alpha": 0.01, "t_window_k": 0.5},
       stage="network")
def network_worst_offender(ctx: CheckContext) -> pd.DataFrame:
    """The ΔrH°(298.15) measurements and stated ΔfH° form one consistent network (least squares).

    Relation: weighted least squares for ΔfH°(298.15) of every species that the ΔrH
    measurements at 298.15 K (± ``t_window_k`` = 0.5 K) connect: each measurement says
    Σ ν_i ΔfH_i = v ± u; elements in their reference states are fixed at 0; a species'
    stated value with a stated uncertainty is a prior (the preferred record's table, else
    any record stating both). Each connected component is one fit with χ² and
    dof = data − rank. Standardised residual t = r/(u √(1 − h)), h the leverage. While
    max |t| > 3 or χ² exceeds its upper 1 % point, the datum with the largest |t| is set
    aside (a warning each, with its residual before and after) and the component refitted.
    Data the network cannot tell apart (|t| equal within 1e-6, e.g. the members of a
    single cycle) are tied: a measurement goes before a stated ΔfH°, then the lowest
    reaction id, and the warning names the others. A datum with h = 1 fixes a
    combination of species by itself and cannot be tested (info). Species the network cannot determine keep their record value
    (determined = false in ``reconciled``). Large components are solved iteratively with
    randomised variance/leverage estimates (see :func:`pipeline.network.reconcile`).
    Tolerance: z_max = 3 (0.3 % false alarms per datum for normal errors) and the 1 %
    χ² point, common practice of gross-error detection.
    Writes the side table ``reconciled`` (one row per species of the network).
    References: Ruscic et al., "Introduction to Active Thermochemical Tables", J. Phys.
    Chem. A 108 (2004) 9979; Narasimhan & Jordache, *Data Reconciliation and Gross Error
    Detection* (2000) (standardised residuals, serial elimination).
    """
    cid = NETWORK_CHECK
    empty_table = pd.DataFrame({c: pd.Series(dtype=object if c == "species" else (bool if c == "determined" else float))
                                for c in RECONCILED_COLUMNS})
    net = _network(ctx)
    if net is None:
        close_background(ctx)
        ctx.tables_out["reconciled"] = empty_table
        return empty_findings()
    meas, unknown, ref_in = net.meas, net.unknown, net.ref_in
    pref = preferred_records(ctx)
    args, kwargs = _fit_inputs(ctx, net, pref)
    prior, prior_sd = args[3], args[4]
    h_rec = _evaluate(ctx, np.array([pref.get(s) for s in unknown], dtype=object), np.full(len(unknown), T_REF),
                      which=0)
    record_value = np.where(np.isfinite(h_rec), h_rec, prior)
    # the fit started early on the second CPU, when its inputs are these (else fitted here)
    bg = ctx.cached("reactions.network_background", dict).pop("fit", None)
    fit = bg.result_for(args, kwargs) if bg is not None else None
    if fit is None:
        fit = nw.reconcile(*args, **kwargs)

    comp = fit.species_component
    chi2 = np.array([fit.chi2[c] for c in comp], float)
    dof = np.array([fit.dof[c] for c in comp], float)
    det = fit.determined
    tbl = pd.DataFrame({
        "species": unknown,
        "dfh_298_j_mol": np.where(det, fit.x_j_mol, record_value),
        "uncertainty_dfh_298_j_mol": np.where(det, fit.sd_j_mol, prior_sd),
        "prior_dfh_298_j_mol": prior, "prior_uncertainty_dfh_298_j_mol": prior_sd,
        "determined": det.astype(bool), "chi2": chi2, "dof": dof,
        "reduced_chi2": np.where(dof > 0, chi2 / np.where(dof > 0, dof, 1), np.nan)})
    if ref_in:
        tbl = pd.concat([tbl, pd.DataFrame({
            "species": ref_in, "dfh_298_j_mol": 0.0, "uncertainty_dfh_298_j_mol": 0.0,
            "prior_dfh_298_j_mol": np.nan, "prior_uncertainty_dfh_298_j_mol": np.nan, "determined": True,
            "chi2": np.nan, "dof": np.nan, "reduced_chi2": np.nan})], ignore_index=True)
    tbl["determined"] = tbl["determined"].astype(bool)
    tbl["dof"] = tbl["dof"].astype("Int64")
    ctx.tables_out["reconciled"] = tbl.sort_values("species", kind="stable").reset_index(drop=True)[list(RECONCILED_COLUMNS)]

    parts = []
    zmax = ctx.tol(cid, "z_max")
    rid = meas["reaction_id"].astype(str).to_numpy(object)

    def tied(e) -> str:
        if not e.tied:
            return ""
        names = [rid[i] if k == "measurement" else f"stated ΔfH° of {unknown[i]}" for k, i in e.tied]
        return ("; equally suspect (they close one cycle, the data cannot tell them apart): "
                + ", ".join(names[:8]) + (" …" if len(names) > 8 else ""))

    ev_m = [e for e in fit.set_aside if e.kind == "measurement"]
    if ev_m:
        k = np.array([e.index for e in ev_m])
        r = meas.iloc[k]
        parts.append(make_findings(
            check_id=cid, severity="warning", subject=r["reaction_id"], subject_kind="reaction",
            source_id=r["source_id"], t_k=r["t_k"], observed=r["value"],
            expected=r["value"].to_numpy(float) - np.array([e.r_after_j_mol for e in ev_m]),
            tolerance=[zmax * abs(e.r_after_j_mol / e.z_after) if e.z_after else np.nan for e in ev_m],
            unit="J/mol",
            message=[f"set aside (step {e.step}): standardised residual {e.t_before:+.2f} in the full fit "
                     f"(residual {e.r_before_j_mol / 1000:+.4g} kJ/mol); against the network without it the "
                     f"residual is {e.r_after_j_mol / 1000:+.4g} kJ/mol (z = {e.z_after:+.2f}){tied(e)}"
                     for e in ev_m],
            hint="this measurement disagrees with the rest of the network: check its value, units, "
                 "stoichiometry and the species it refers to"))
    ev_p = [e for e in fit.set_aside if e.kind == "prior"]
    if ev_p:
        names = unknown[[e.index for e in ev_p]]
        recsrc = pd.Series(names).map(pref).map(
            dict(zip(ctx.records["record_id"], ctx.records["source_id"])) if len(ctx.records) else {})
        parts.append(make_findings(
            check_id=cid, severity="warning", subject=names, subject_kind="species", source_id=recsrc,
            t_k=T_REF, observed=prior[[e.index for e in ev_p]],
            expected=prior[[e.index for e in ev_p]] - np.array([e.r_after_j_mol for e in ev_p]),
            tolerance=[zmax * abs(e.r_after_j_mol / e.z_after) if e.z_after else np.nan for e in ev_p],
            unit="J/mol",
            message=[f"stated ΔfH°(298.15) set aside as a prior (step {e.step}): standardised residual "
                     f"{e.t_before:+.2f}; the network without it gives a difference of "
                     f"{e.r_after_j_mol / 1000:+.4g} kJ/mol (z = {e.z_after:+.2f}){tied(e)}" for e in ev_p],
            hint="the species' tabulated ΔfH° disagrees with the reaction measurements"))
    unt = np.flatnonzero(fit.untestable & fit.active)
    if len(unt):
        r = meas.iloc[unt]
        parts.append(make_findings(
            check_id=cid, severity="info", subject=r["reaction_id"], subject_kind="reaction",
            source_id=r["source_id"], t_k=r["t_k"], observed=r["value"], unit="J/mol",
            message="leverage h = 1: this measurement alone fixes a combination of ΔfH° of its species, "
                    "so the network cannot test it",
            hint="a second, independent measurement (or a stated ΔfH° with uncertainty) of a species "
                 "involved would make it testable"))
    for c, why in fit.stopped_early.items():
        parts.append(make_findings(
            check_id=cid, severity="warning", subject=f"network:{unknown[comp == c][0]}", subject_kind="database",
            message=f"worst-offender loop {why}", hint="the stated uncertainties of this part of the "
            "network look underestimated throughout"))
    return pd.concat(parts, ignore_index=True) if parts else empty_findings()


# ------------------------------------------------------------ second and third law

def law_series(ctx: CheckContext) -> tuple[pd.DataFrame, nw.LawResult | None]:
    """Series of log K (or ΔrG) at several T and their second-/third-law results.

    A series is the rows sharing ``series``, else the rows of one equation (same
    stoichiometry); its id is the ``series`` value, else the id of its first row.
    Returns (per-series frame: series_id, source_id, n, ok; LawResult over the ok ones);
    computed once per context for both law checks (callers must not modify it).
    """
    return _cached(ctx, "reactions.law_series", (ctx.reactions, ctx.records, ctx.segments, ctx.table_points,
                                                 getattr(ctx, "sources", None), ctx.prior_findings),
                   lambda: _law_series(ctx))


def _law_series(ctx: CheckContext) -> tuple[pd.DataFrame, nw.LawResult | None]:
    rx = ctx.reactions.reset_index(drop=True)
    keep = (rx["quantity"].isin(["log_k", "drg"]) & np.isfinite(rx["t_k"].astype(float))
            & np.isfinite(rx["value"].astype(float)) & (rx["uncertainty"].astype(float) > 0)
            & rx["stoich_json"].notna()).to_numpy()
    rows_kept = np.flatnonzero(keep)
    rx = rx[keep].reset_index(drop=True)
    if not len(rx):
        return pd.DataFrame(columns=["series_id", "source_id", "n"]), None
    canon = rx["stoich_json"].map(lambda s: json.dumps(json.loads(s), sort_keys=True))
    ser = rx["series"].astype(object).where(rx["series"].notna() & (rx["series"].astype(str).str.strip() != ""))
    key = np.where(ser.notna(), "s:" + ser.astype(str) + "|" + canon, "e:" + canon)
    rx = rx.assign(_key=key, _ser=ser)
    first = rx.groupby("_key", sort=False).head(1)
    # a series id names one equation; a series value shared by several equations gets /first-row id
    n_eq = rx.groupby("_ser")["_key"].nunique() if ser.notna().any() else pd.Series(dtype=int)

    def series_id(s, first_row) -> str:
        if s is None or (isinstance(s, float) and np.isnan(s)):
            return str(first_row)
        return str(s) if n_eq.get(s, 1) == 1 else f"{s}/{first_row}"

    sid = {k: series_id(s, r) for k, s, r in zip(first["_key"], first["_ser"], first["reaction_id"])}
    rx["_sid"] = rx["_key"].map(sid)
    pref = preferred_records(ctx)
    long = _terms(ctx, rows_kept, rx["t_k"].to_numpy(float), pref)
    row, nu = long.row, long.nu
    _, _, s_t, hmh_t = long.evaluate(ctx)
    s_298 = long.evaluate(ctx, np.full(len(long), T_REF), which=2)
    n = len(rx)
    d_hmh = nw.reaction_sum(row, nu * hmh_t, n)
    d_ss = nw.reaction_sum(row, nu * (s_t - s_298), n)
    d_s298 = nw.reaction_sum(row, nu * s_298, n)
    t = rx["t_k"].to_numpy(float)
    y, fac = nw.minus_r_ln_k(rx["quantity"].to_numpy(object), rx["value"].to_numpy(float), t)
    uy = fac * rx["uncertainty"].to_numpy(float)
    good = np.isfinite(d_hmh) & np.isfinite(d_ss) & np.isfinite(d_s298) & np.isfinite(y)
    rx, t, y, uy, d_hmh, d_ss, d_s298 = (a[good] for a in (rx, t, y, uy, d_hmh, d_ss, d_s298))
    nt = rx.assign(_t=np.round(t, 6)).groupby("_sid")["_t"].transform("nunique").to_numpy()
    use = nt >= 2
    rx, t, y, uy, d_hmh, d_ss, d_s298 = (a[use] for a in (rx, t, y, uy, d_hmh, d_ss, d_s298))
    if not len(rx):
        return pd.DataFrame(columns=["series_id", "source_id", "n"]), None
    codes, uniq = pd.factorize(rx["_sid"], sort=True)
    res = nw.law_analysis(codes, t, y, uy, d_hmh, d_ss, d_s298)
    src = rx.groupby(codes)["source_id"].agg(lambda s: "+".join(sorted(set(map(str, s)))))
    info = pd.DataFrame({"series_id": np.asarray(uniq, dtype=object), "source_id": src.to_numpy(object),
                         "n": res.n_points})
    return info, res


@check("equilibrium.law-disagreement", tolerances={"k_combined": 2.0}, stage="network")
def law_disagreement(ctx: CheckContext) -> pd.DataFrame:
    """Second-law and third-law ΔrH°(298.15) of a log K(T) series agree.

    Relation: third law, per point, ΔrH°(298.15) = −RT ln K − T Δ[(G − H298)/T] with the
    species' Gibbs energy functions, averaged (weighted); second law, the slope of the
    sigma function Σ(T) = −R ln K − Δ(H − H298)/T + Δ(S − S298) = ΔrH°(298.15)/T −
    ΔrS°(298.15) against 1/T (the ΔCp correction from the species functions; derivation
    in :func:`pipeline.network.law_analysis`). ΔrG series are used as −R ln K = ΔrG/T.
    Tolerance: warning when |ΔH(2nd) − ΔH(3rd)| > 2 √(se₂² + se₃²), with standard errors
    from the weighted fits, inflated by the observed scatter (never smaller than the
    stated uncertainties imply); 2 standard uncertainties ≈ 95 % coverage, common practice.
    A disagreement means a wrong entropy or heat capacity of a species, or a temperature-
    dependent systematic error in the measurements.
    Reference: Chase, *NIST-JANAF Thermochemical Tables*, 4th ed. (1998), introduction
    (second- and third-law analysis); common practice of equilibrium-data evaluation.
    """
    cid = "equilibrium.law-disagreement"
    info, res = law_series(ctx)
    if res is None:
        return empty_findings()
    k = ctx.tol(cid, "k_combined")
    uc = np.sqrt(res.se_second_j_mol ** 2 + res.se_third_j_mol ** 2)
    diff = res.dh_second_j_mol - res.dh_third_j_mol
    bad = np.flatnonzero(np.isfinite(diff) & (np.abs(diff) > k * uc))
    if not len(bad):
        return empty_findings()
    return make_findings(
        check_id=cid, severity="warning", subject=["series:" + s for s in info["series_id"].to_numpy()[bad]],
        subject_kind="series", source_id=info["source_id"].to_numpy()[bad],
        t_k=(res.t_min_k[bad] + res.t_max_k[bad]) / 2, observed=res.dh_second_j_mol[bad],
        expected=res.dh_third_j_mol[bad], tolerance=k * uc[bad], unit="J/mol",
        message=[f"second-law ΔrH°(298.15) {a / 1000:.4g} ± {sa / 1000:.2g} kJ/mol vs third-law "
                 f"{b / 1000:.4g} ± {sb / 1000:.2g} kJ/mol ({n} points, {lo:g}–{hi:g} K; second-law "
                 f"ΔrS°(298.15) {ds:.4g} J/(mol·K))"
                 for a, sa, b, sb, n, lo, hi, ds in zip(res.dh_second_j_mol[bad], res.se_second_j_mol[bad],
                                                        res.dh_third_j_mol[bad], res.se_third_j_mol[bad],
                                                        res.n_points[bad], res.t_min_k[bad], res.t_max_k[bad],
                                                        res.ds_second_j_mol_k[bad])],
        hint="compare the second-law ΔrS° with the tables' ΔrS°: a difference points to a wrong "
             "entropy of a species; otherwise a temperature-dependent error in the measurements")


@check("equilibrium.third-law-drift", tolerances={"k_se": 3.0}, stage="network")
def third_law_drift(ctx: CheckContext) -> pd.DataFrame:
    """The third-law ΔrH°(298.15) values of a log K(T) series show no trend with T.

    Relation: third-law values y_i = −RT_i ln K_i − T_i Δ[(G − H298)/T]_i; a weighted
    straight line y = a + b T has slope b = ΔrS°(tables) − ΔrS°(data), zero when the
    species' entropies fit the data (the sign of a wrong entropy is this drift).
    Tolerance: warning when |b| > 3 standard errors (scatter-inflated, never smaller than
    the stated uncertainties imply; needs ≥ 3 temperatures); common practice.
    Reference: Chase, *NIST-JANAF Thermochemical Tables*, 4th ed. (1998), introduction.
    """
    cid = "equilibrium.third-law-drift"
    info, res = law_series(ctx)
    if res is None:
        return empty_findings()
    k = ctx.tol(cid, "k_se")
    b, se = res.drift_j_mol_k, res.se_drift_j_mol_k
    bad = np.flatnonzero((res.n_points >= 3) & np.isfinite(b) & np.isfinite(se) & (np.abs(b) > k * se))
    if not len(bad):
        return empty_findings()
    return make_findings(
        check_id=cid, severity="warning", subject=["series:" + s for s in info["series_id"].to_numpy()[bad]],
        subject_kind="series", source_id=info["source_id"].to_numpy()[bad],
        t_k=(res.t_min_k[bad] + res.t_max_k[bad]) / 2, observed=b[bad], expected=0.0, tolerance=k * se[bad],
        unit="J/(mol*K)",
        message=[f"third-law ΔrH°(298.15) drifts by {x:+.3g} ± {s:.2g} J/(mol·K) over {lo:g}–{hi:g} K "
                 f"({n} points)" for x, s, lo, hi, n in zip(b[bad], se[bad], res.t_min_k[bad], res.t_max_k[bad],
                                                           res.n_points[bad])],
        hint="a positive drift means the tables' ΔrS° exceeds what the data imply by about the drift: "
             "check the entropies (and low-T heat capacities) of the species")
