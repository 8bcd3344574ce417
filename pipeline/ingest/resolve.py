"""Species keys for records, and the ``species`` table.

Rules (inputs.md, "Species identity"): an alias from species-csv always wins (matched
case-insensitively against the record's name or key); a record that names a full key
(table-csv, shomate-csv) uses it; otherwise the key is built from the record: the name
without a trailing parenthesised suffix, re-cased so its formula parse equals the record's
own element counts, then the state (and a polymorph label taken from the suffix).
"""
from __future__ import annotations

import json
import re
from functools import lru_cache

import numpy as np
import pandas as pd

from ..findings import make_findings
from ..formula import (CACHE_SIZE, ELECTRON, FormulaError, SpeciesKey, composition_key, parse_formula,
                       parse_formulas, parse_key, parse_keys, recase_name)

_SUFFIX = re.compile(r"^(?P<base>.+?)\((?P<suffix>[^()]*)\)$")
_STATE_WORDS = {"g": "g", "l": "l", "liq": "l", "cr": "cr", "s": "cr", "c": "cr", "aq": "aq"}


def alias_map(species_meta: pd.DataFrame) -> dict[str, str]:
    """Lower-cased alias or key → species key."""
    out: dict[str, str] = {}
    for key, aliases in zip(species_meta["species"], species_meta["aliases"].fillna("")):
        out[key.lower()] = key
        for a in str(aliases).split(";"):
            if a.strip():
                out[a.strip().lower()] = key
    return out


def _split_comma_label(name: str) -> tuple[str, str | None]:
    """``C3H6,propylene`` → (``C3H6``, ``propylene``): an isomer label after the first comma
    outside parentheses, as NASA-style names write it. No comma → (name, None)."""
    depth = 0
    for i, ch in enumerate(name):
        depth += (ch == "(") - (ch == ")")
        if ch == "," and depth == 0:
            label = name[i + 1:].strip()
            return name[:i].strip(), (label or None)
    return name, None


def build_key(name: str, state: str, label: str | None, elements: dict, charge: int) -> tuple[str, bool]:
    """Key from a record's own name, state and element counts.

    ``C3H6,propylene`` (an isomer label after a comma) → ``C3H6(g,propylene)``;
    ``Al2O3(a)`` with state ``cr`` → ``Al2O3(cr,a)``; ``H2O(L)`` → ``H2O(l)``.

    Returns ``(key, recased)``; ``recased`` is False when no casing of the name matched the
    element counts and the name was kept as written.
    """
    base = name.strip()
    base, comma_label = _split_comma_label(base)
    if label is None and comma_label:
        label = comma_label
    m = _SUFFIX.match(base)
    if m:
        base = m.group("base")
        suffix = m.group("suffix").strip()
        word = suffix.lower()
        if label is None and word not in _STATE_WORDS and state in ("cr", "l") and suffix:
            label = suffix
    formula = recase_name(base, elements, charge) if elements else None
    ok = formula is not None
    formula = formula or base
    return SpeciesKey(formula, state, label).key, ok


#: Columns :func:`built_keys` adds to a source's records (dropped by :func:`resolve_records`).
BUILT_COLUMNS = ("built_key", "built_ok", "built_reason")


def key_reason(key: str, elements: dict) -> str | None:
    """Why ``key`` cannot name a record with these element counts (None: it can): the key
    does not parse, or its formula contradicts the counts."""
    try:
        sk = parse_key(key)
        f = parse_formula(sk.formula)
    except FormulaError as exc:
        return f"species key: {exc}"
    if elements:
        mine = {k: float(v) for k, v in f.elements.items() if k != "e"}
        theirs = {k: float(v) for k, v in elements.items() if v}
        if mine != theirs and all(k[0].isupper() for k in theirs):
            return (f"record elements {theirs} contradict species {key!r} "
                    f"({mine}) — fix: correct the alias or the formula field")
    return None


def _elements_of(elements_json, memo: dict) -> dict:
    """{element: count} of a record's ``elements_json`` ({} when missing); ``memo`` keeps the
    texts already parsed (many records share a composition)."""
    if not isinstance(elements_json, str):
        return {}
    got = memo.get(elements_json)
    if got is None:
        got = memo[elements_json] = json.loads(elements_json)
    return got


def built_keys(records: pd.DataFrame) -> pd.DataFrame:
    """``records`` with :func:`build_key`'s result for every record that names no full key
    (``species_hint``): ``built_key``, ``built_ok`` and ``built_reason`` (:func:`key_reason`). It depends on the record alone, so it
    is computed where the source is read (in a worker process for large databases, and kept
    with the source's cached frames); :func:`resolve_records` still lets an alias win."""
    out = records.copy()
    keys, oks, reasons = [], [], []
    parsed: dict = {}
    for name, hint, state, label, ej, charge in zip(
            *(records[c].to_numpy(object) for c in ("name", "species_hint", "state", "label", "elements_json",
                                                   "charge"))):
        if isinstance(hint, str) and hint:
            keys.append(None)
            oks.append(True)
            reasons.append(None)
            continue
        elements = _elements_of(ej, parsed)
        z = 0 if pd.isna(charge) else int(charge)
        key, ok = build_key(name, state, label if isinstance(label, str) else None, elements, z)
        keys.append(key)
        oks.append(ok)
        reasons.append(key_reason(key, elements))
    out["built_key"] = pd.Series(keys, index=out.index, dtype=object)
    out["built_ok"] = np.asarray(oks, bool)
    out["built_reason"] = pd.Series(reasons, index=out.index, dtype=object)
    return out


def _key_reasons(keys: list, ejs: list) -> list:
    """:func:`key_reason` of ``(keys[i], elements of ejs[i])`` for every ``i``, the keys and
    formulas parsed at once (:func:`pipeline.formula.parse_keys`, :func:`parse_formulas`).
    A key that does not parse, or whose formula contradicts the counts, is asked of
    :func:`key_reason` itself, for its message; the rest are compared here as it compares."""
    ok, formula, _, _ = parse_keys(keys)
    b = parse_formulas([f if good else None for f, good in zip(formula, ok.tolist())])
    good = ok & b.ok
    lo = np.searchsorted(b.row, np.arange(len(keys) + 1)).tolist()
    symbols, sym, count = b.symbols, b.sym.tolist(), b.count.tolist()
    parsed: dict = {}
    out = []
    for i, (key, ej) in enumerate(zip(keys, ejs)):
        elements = _elements_of(ej, parsed)
        if not good[i]:
            out.append(key_reason(key, elements))
            continue
        if not elements:
            out.append(None)
            continue
        mine = {symbols[s]: float(c) for s, c in zip(sym[lo[i]:lo[i + 1]], count[lo[i]:lo[i + 1]])
                if symbols[s] != "e"}
        theirs = {k: float(v) for k, v in elements.items() if v}
        if mine != theirs and all(k[0].isupper() for k in theirs):
            out.append(key_reason(key, elements))
        else:
            out.append(None)
    return out


def resolve_records(records: pd.DataFrame, species_meta: pd.DataFrame):
    """Assign ``species`` to every record. Returns (records, findings, bad_mask, reasons).

    ``bad_mask`` marks records whose key cannot be parsed at all or whose declared key's
    formula contradicts the record's element counts; the caller rejects them.

    A key built where the source was read comes with its :func:`key_reason`; the other keys
    (declared, or an alias) are checked here, each distinct (key, element counts) once.
    """
    amap = alias_map(species_meta)
    hinted = np.array([isinstance(h, str) and h != "" for h in records["species_hint"].to_numpy(object)], bool)
    if "built_key" not in records:
        records = built_keys(records)
    elif (need := (records["built_key"].isna().to_numpy() & ~hinted)).any():
        # parts read without the keys (e.g. parsed frames cached by an earlier version)
        records = records.copy()
        done = built_keys(records[need].drop(columns=list(BUILT_COLUMNS)))
        records.loc[need, "built_key"] = done["built_key"].to_numpy(object)
        records.loc[need, "built_ok"] = done["built_ok"].to_numpy(bool)
        records.loc[need, "built_reason"] = done["built_reason"].to_numpy(object)
    cols = {c: records[c].to_numpy(object) for c in
            ("record_id", "source_id", "name", "species_hint", "elements_json", "built_key", "built_ok",
             "built_reason")}
    names, hints, built = cols["name"], cols["species_hint"], cols["built_key"]
    # the key: an alias of the name or the declared key, else the declared key, else the built
    # key (or the alias it is); a built key whose name could not be re-cased is warned about
    keys = np.where(hinted, hints, built)
    own = ~hinted & np.array([r is None or isinstance(r, str) for r in cols["built_reason"]], bool)
    warn = ~hinted & ~cols["built_ok"].astype(bool)
    if amap:
        def aliased(texts):
            return np.array([isinstance(t, str) and t.lower() in amap for t in texts], bool)
        for i in np.flatnonzero(aliased(names) | aliased(hints) | (~hinted & aliased(built))).tolist():
            key = None
            for cand in (names[i], hints[i]):
                if isinstance(cand, str) and cand.lower() in amap:
                    key = amap[cand.lower()]
                    break
            if key is None and not hinted[i]:
                key = amap.get(built[i].lower())        # the built key may itself be a declared alias
            if key is not None:
                keys[i], own[i], warn[i] = key, False, False
    keys = keys.tolist()
    warn_rows = [(cols["record_id"][i], keys[i], cols["source_id"][i], names[i])
                 for i in np.flatnonzero(warn).tolist()]
    # a reason per distinct (key, element counts), decided by its first record (as a memo would):
    # the one that came with a built key, else key_reason's
    ejs = [e if isinstance(e, str) else None for e in cols["elements_json"]]
    k_code, _ = pd.factorize(np.asarray(keys, object))
    e_code, _ = pd.factorize(np.asarray(ejs, object))
    pair, first, inverse = np.unique(k_code.astype(np.int64) * (len(ejs) + 1) + (e_code + 1),
                                     return_index=True, return_inverse=True)
    reason_of = [None] * len(pair)
    br = cols["built_reason"]
    todo = []
    for j, i in enumerate(first.tolist()):
        if own[i]:
            reason_of[j] = br[i]
        else:
            todo.append(j)
    if todo:
        rows = first[todo].tolist()
        for j, reason in zip(todo, _key_reasons([keys[i] for i in rows], [ejs[i] for i in rows])):
            reason_of[j] = reason
    reasons = [reason_of[j] for j in inverse.tolist()]
    out = records.drop(columns=list(BUILT_COLUMNS))
    out["species"] = keys
    findings = make_findings(
        check_id="schema.species-key", severity="warning",
        subject=[w[1] for w in warn_rows], subject_kind="species",
        source_id=[w[2] for w in warn_rows],
        message=[f"name {w[3]!r} could not be re-cased to match its element counts; kept as written"
                 for w in warn_rows],
        hint="add an alias for this record in species-csv") if warn_rows else None
    return out, findings, np.array([r is not None for r in reasons], dtype=bool), reasons


def _elements_json(elements: dict) -> str:
    """``json.dumps({element: count}, sort_keys=True)`` without the electron, written directly
    (element symbols need no escaping; counts are floats, written as ``repr`` as json does)."""
    items = sorted((k, v) for k, v in elements.items() if k != "e")
    if all(k.isascii() and k.isalnum() and isinstance(v, float) and v == v and abs(v) != float("inf")
           for k, v in items):
        return "{" + ", ".join(f'"{k}": {v!r}' for k, v in items) + "}"
    return json.dumps({k: v for k, v in items}, sort_keys=True)


@lru_cache(maxsize=CACHE_SIZE)
def _formula_columns(formula: str) -> tuple:
    """(charge, elements_json, composition, n_atoms, molar_mass_g_mol) of one formula; many
    species share a formula (phases, polymorphs, isomers), and stages ask again."""
    f = parse_formula(formula)
    return (f.charge, _elements_json(f.elements), composition_key(f.elements, f.charge), f.n_atoms,
            f.molar_mass_g_mol)


def formula_columns_of(keys) -> dict:
    """formula → :func:`_formula_columns` for the formulas of these species keys (those that
    parse); computed where a source is read and handed to :func:`species_table`.

    All distinct formulas are parsed at once (:func:`pipeline.formula.parse_formulas`) and
    their texts built with Arrow string kernels; the values equal :func:`_formula_columns`'s."""
    distinct = pd.unique(pd.Series(keys, dtype=object)) if len(keys) else []
    ok, formula, _, _ = parse_keys([k for k in distinct if isinstance(k, str)])
    return _columns_of_formulas({f for f, good in zip(formula, ok.tolist()) if good})


def _columns_of_formulas(formulas, batch=None) -> dict:
    """formula → :func:`_formula_columns` for every formula that parses, all at once.

    ``batch``: :func:`~pipeline.formula.parse_formulas` of ``formulas`` already computed (a
    sequence aligned with it, None where a text is to be left out; repeats allowed)."""
    import pyarrow as pa
    import pyarrow.compute as pc

    if batch is None:
        formulas = sorted(formulas)
        batch = parse_formulas(formulas)
    b = batch
    if not b.ok.any():
        return {}
    real = np.array([s != ELECTRON for s in b.symbols], bool)[b.sym]
    row, sym, count = b.row[real], b.sym[real], b.count[real]
    # one text per distinct (symbol, count) pair, joined per formula in symbol order
    values, value_code = np.unique(count, return_inverse=True)
    pair, pair_code = np.unique(sym * len(values) + value_code.ravel(), return_inverse=True)
    pair_code = pair_code.ravel()
    names = [b.symbols[k] for k in (pair // len(values)).tolist()]
    counts = values[pair % len(values)].tolist()
    json_items = pa.array([f'"{k}": {v!r}' for k, v in zip(names, counts)], pa.string())
    comp_items = pa.array([f"{k}{v:g}" for k, v in zip(names, counts)], pa.string())
    offsets = pa.array(np.searchsorted(row, np.arange(len(formulas) + 1)).astype(np.int32))
    codes = pa.array(pair_code)
    ej = pc.binary_join(pa.ListArray.from_arrays(offsets, json_items.take(codes)), ", ").to_pylist()
    comp = pc.binary_join(pa.ListArray.from_arrays(offsets, comp_items.take(codes)), "").to_pylist()
    n_atoms, mass = b.n_atoms().tolist(), b.molar_mass_g_mol().tolist()
    return {f: (z, "{" + e + "}", c + (f"{z:+d}" if z else ""), n, mm)
            for f, good, z, e, c, n, mm in zip(formulas, b.ok.tolist(), b.charge.tolist(), ej, comp, n_atoms, mass)
            if good and f is not None}


def species_table(keys: list[str], species_meta: pd.DataFrame, known: dict | None = None) -> pd.DataFrame:
    """One row per species key with formula, state, label, charge, elements and molar mass.

    ``known``: formula → :func:`_formula_columns`, already computed (by the readers)."""
    meta = species_meta.drop_duplicates("species").set_index("species")
    meta_rows = {k: i for i, k in enumerate(meta.index)}
    m_cols = {c: meta[c].to_numpy(object) for c in
              ("stated_molar_mass_g_mol", "reference_element", "geometry", "cas", "aliases", "source_id")}
    cols = ["species", "formula", "state", "label", "charge", "elements_json", "composition",
            "n_atoms", "molar_mass_g_mol", "stated_molar_mass_g_mol", "reference_element",
            "geometry", "cas", "aliases", "meta_source_id"]
    all_keys = sorted(set(keys) | set(meta.index))
    if not all_keys:
        return pd.DataFrame(columns=cols)
    ok, formula, state, label = parse_keys(all_keys)
    if not ok.all():
        parse_key(all_keys[int(np.flatnonzero(~ok)[0])])       # raises the reason
    known = dict(known or {})
    known.update(_columns_of_formulas({f for f in formula if f not in known}))
    derived = [known.get(f) or _formula_columns(f) for f in formula]     # the latter raises the reason
    charge, ej, comp, n_atoms, mm_calc = ([d[k] for d in derived] for k in range(5))
    n = len(all_keys)
    mm = np.full(n, np.nan)
    ref = np.zeros(n, bool)
    geo = np.array([None] * n, dtype=object)
    cas, aliases, msrc = geo.copy(), np.array([""] * n, dtype=object), geo.copy()
    for j, key in enumerate(all_keys):
        i = meta_rows.get(key)
        if i is None:
            continue
        v = m_cols["stated_molar_mass_g_mol"][i]
        mm[j] = float(v) if pd.notna(v) else np.nan
        ref[j] = bool(m_cols["reference_element"][i])
        g = m_cols["geometry"][i]
        geo[j] = g if isinstance(g, str) else None
        cas[j], aliases[j], msrc[j] = m_cols["cas"][i], m_cols["aliases"][i], m_cols["source_id"][i]
    atoms = np.asarray(n_atoms, float)
    geo = np.where(pd.isna(geo) & (atoms == 1), "atom", geo).astype(object)
    geo[pd.isna(geo)] = None
    rows = {"species": all_keys, "formula": formula, "state": state, "label": label, "charge": charge, "elements_json": ej, "composition": comp,
            "n_atoms": atoms, "molar_mass_g_mol": np.asarray(mm_calc, float), "stated_molar_mass_g_mol": mm,
            "reference_element": ref, "geometry": geo, "cas": cas, "aliases": aliases, "meta_source_id": msrc}
    return pd.DataFrame(rows, columns=cols)
