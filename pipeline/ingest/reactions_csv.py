"""Reader for ``reactions-csv``: reaction measurements (ΔrH, ΔrG, log K).

Columns (inputs.md): ``id``, ``equation``, ``quantity`` (``drh`` | ``drg`` | ``log_k``),
``t_k`` [K], ``value``, ``unit`` (optional, per row), ``series`` (optional), ``uncertainty``
(standard uncertainty, k = 1, required) and ``method`` (free text).

Units of ``value`` and ``uncertainty`` for ``drh``/``drg``: the row's ``unit`` cell, else
the column's header bracket (``uncertainty`` without its own bracket follows ``value``'s),
else the manifest's ``energy_unit``; ``cal`` is the thermochemical calorie, 4.184 J. An
energy row with no unit from any of these is rejected (or, when the file has no ``unit``
column and no other unit source at all, the file is refused with exit 2). ``log_k`` is
dimensionless: a unit on such a row is an error.

Equations are parsed by :mod:`pipeline.equation` (element and charge balance);
``stoich_json`` is ``{species_key: ν}``, products positive. A row is one input record; a
row that cannot be read is rejected alone with its reason: unbalanced equation (the
imbalance spelled out), unknown quantity, missing uncertainty, bad unit, repeated id.
"""
from __future__ import annotations

import json
from functools import lru_cache
from pathlib import Path

import numpy as np
import pandas as pd

from ..equation import EquationError, parse_equation
from ..formula import ELECTRON, _key_parts, parse_formulas
from ..errors import InputError, UnitError
from ..manifest import Source
from ..units import column_factor, energy_unit_for, factor_to_si, is_dimensionless
from .base import REACTION_COLUMNS, REJECTED_COLUMNS, ReadResult, frame
from .csvframe import load

COLUMNS = ("id", "equation", "quantity", "t_k", "value", "unit", "series", "uncertainty", "method")
REQUIRED = ("id", "equation", "quantity", "t_k", "value", "uncertainty")
QUANTITIES = ("drh", "drg", "log_k")
_HEADER = "id,equation,quantity,t_k,value,unit,uncertainty,method"


def _blank_none(s: pd.Series) -> pd.Series:
    return s.astype(object).where(s != "", None)


@lru_cache(maxsize=65536)
def _parse(equation: str) -> tuple[str | None, str | None]:
    """(stoich_json, None) or (None, reason)."""
    try:
        r = parse_equation(equation)
    except EquationError as exc:
        return None, f"equation {equation!r}: {exc}"
    return json.dumps(r.stoich, sort_keys=True), None


_BALANCE_TOL = 1e-9     # the tolerance of pipeline.equation.parse_equation


def _arrow_texts(equations):
    """Equations as an Arrow string array (null for anything not a str), and a function
    giving equation ``i`` as it was passed (for :func:`_parse`)."""
    import pyarrow as pa

    if isinstance(equations, pd.Series) and isinstance(equations.dtype, pd.StringDtype) \
            and equations.dtype.storage == "pyarrow":
        text = pa.array(equations.array)
        if isinstance(text, pa.ChunkedArray):
            text = text.combine_chunks()
        return text.cast(pa.string()), equations.iat.__getitem__
    eqs = list(equations)
    return pa.array([e if isinstance(e, str) else None for e in eqs], pa.string()), eqs.__getitem__


def _coefficient_texts(texts):
    """Mask of the Arrow ``texts`` that are a plain coefficient: ``[0-9]+(?:[.][0-9]+)?`` (digits,
    at most one '.', with digits on both sides of it)."""
    import pyarrow.compute as pc

    digits = pc.replace_substring(texts, ".", "", max_replacements=1)
    good = pc.and_(pc.ascii_is_decimal(digits),
                   pc.invert(pc.or_(pc.starts_with(texts, "."), pc.ends_with(texts, "."))))
    return pc.fill_null(good, False).to_numpy(zero_copy_only=False)


def _key_texts(texts):
    """Mask of the Arrow ``texts`` that can be a key of a plain term: not empty, no ' ' or
    '+', nothing for json to escape ('"', backslash), not starting like a number (a digit
    or '.')."""
    import pyarrow as pa
    import pyarrow.compute as pc

    first = pc.utf8_slice_codeunits(texts, 0, 1)
    good = pc.and_(pc.and_(pc.greater(pc.utf8_length(texts), 0),
                           pc.invert(pc.is_in(first, pa.array(list("0123456789."))))),
                   pc.invert(pc.match_substring_regex(texts, r'[ +"\\]')))
    return pc.fill_null(good, False).to_numpy(zero_copy_only=False)


def _equations(equations) -> tuple[np.ndarray, np.ndarray, np.ndarray, tuple | None]:
    """:func:`parse_equations` as ``(stoich_json, reason, bulk, parsed)``: two object arrays
    (None where not applicable), the mask of the equations read by the bulk path, and the
    formulas that path parsed: ``(formulas, batch)``, a list (None where a text was no key)
    and its :class:`~pipeline.formula.FormulaBatch` (or None when nothing was parsed)."""
    import pyarrow as pa
    import pyarrow.compute as pc

    text, equation_of = _arrow_texts(equations)
    n = len(text)
    stoich = np.full(n, None, dtype=object)
    reason = np.full(n, None, dtype=object)
    fast = np.zeros(n, bool)
    parsed_formulas = None
    # the bulk path: printable ASCII, one '='
    cand = np.flatnonzero(pc.fill_null(pc.ascii_is_printable(text), False).to_numpy(zero_copy_only=False))
    sides = pc.split_pattern(text.take(pa.array(cand, pa.int64())), "=")
    two_sides = pc.list_value_length(sides).to_numpy(zero_copy_only=False) == 2
    cand, sides = cand[two_sides], sides.filter(pa.array(two_sides))
    if len(cand):
        eq_parts, side_parts, term_parts = [], [], []
        for k in (0, 1):
            # terms joined by " + " (blanks around a side trimmed; a term with any other blank
            # does not pass the checks below)
            lst = pc.split_pattern(pc.ascii_trim_whitespace(pc.list_element(sides, k)), " + ")
            eq_parts.append(cand[pc.list_parent_indices(lst).to_numpy()])
            side_parts.append(np.full(len(eq_parts[-1]), k, np.int64))
            term_parts.append(pc.list_flatten(lst))
        eq_of = np.concatenate(eq_parts)
        side = np.concatenate(side_parts)
        # every distinct term is read once: KEY or COEFFICIENT KEY, split at its first blank
        enc = pc.dictionary_encode(pa.concat_arrays(term_parts))
        term = enc.indices.to_numpy(zero_copy_only=False)
        terms = enc.dictionary
        pieces = pc.split_pattern(terms, " ", max_splits=1)
        flat = pc.list_flatten(pieces)
        has_coef = pc.list_value_length(pieces).to_numpy(zero_copy_only=False) == 2
        last = np.cumsum(np.where(has_coef, 2, 1)) - 1
        coef_txt = pc.if_else(pa.array(has_coef), flat.take(pa.array(np.where(has_coef, last - 1, last))), "1")
        coef_ok = _coefficient_texts(coef_txt)
        coef_t = pc.cast(pc.if_else(pa.array(coef_ok), coef_txt, "1"), pa.float64()).to_numpy(zero_copy_only=False)
        kenc = pc.dictionary_encode(flat.take(pa.array(last)))
        key_t = kenc.indices.to_numpy(zero_copy_only=False)
        keys = kenc.dictionary
        # every distinct key parsed at once (pipeline.formula's batch parsers)
        key_ok = _key_texts(keys)
        split_ok, formula, state, label = _key_parts(pc.if_else(pa.array(key_ok), keys, None))
        fb = parse_formulas(formula)
        parsed = key_ok & split_ok & fb.ok
        parsed_formulas = (pc.if_else(pa.array(parsed), formula, None).to_pylist(), fb)
        # the normalised key (SpeciesKey.key) of each, and its rank in sorted order (the
        # order of json.dumps(sort_keys=True); byte order is code-point order)
        norm = pc.if_else(pc.is_valid(label), pc.binary_join_element_wise(formula, "(", state, ",", label, ")", ""),
                          pc.binary_join_element_wise(formula, "(", state, ")", ""))
        norm = pc.dictionary_encode(pc.if_else(pa.array(parsed), norm, ""))
        norm_sorted = pc.array_sort_indices(norm.dictionary)
        rank = np.empty(len(norm.dictionary), np.int64)
        rank[norm_sorted.to_numpy(zero_copy_only=False)] = np.arange(len(rank))
        norm_t = rank[norm.indices.to_numpy(zero_copy_only=False)][key_t]
        # element counts, then the charge, of each distinct term's key
        real = np.array([sym != ELECTRON for sym in fb.symbols], bool)[fb.sym]
        width = len(fb.symbols) + 1
        comp = np.zeros((width, len(keys)))
        comp[fb.sym[real], fb.row[real]] = fb.count[real]
        comp[-1] = fb.charge
        bad_t = ~(coef_ok & (coef_t > 0) & parsed[key_t])
        bad = np.zeros(n, bool)
        bad[eq_of[bad_t[term]]] = True
        # a species twice in one equation: sorted by (equation, key), equal neighbours
        key_of_row = norm_t[term]
        pair = eq_of * len(rank) + key_of_row
        order = np.argsort(pair, kind="stable")
        pair = pair[order]
        bad[eq_of[order[1:][pair[1:] == pair[:-1]]]] = True
        # element and charge totals per equation and side (the quantities parse_equation
        # sums, term by term in the order written)
        cell = eq_of * 2 + side
        tot = np.stack([np.bincount(cell, (coef_t * comp[j][key_t])[term], minlength=2 * n) for j in range(width)], 1)
        a, b = tot[0::2], tot[1::2]
        scale = np.maximum(1.0, np.maximum(np.abs(a), np.abs(b)))
        scale[:, -1] = np.maximum(1.0, np.abs(a[:, -1]))
        bad |= (np.abs(a - b) > 0.5 * _BALANCE_TOL * scale).any(axis=1)
        good = order[~bad[eq_of[order]]]              # terms of good equations, by (equation, key)
        if len(good):
            # JSON text {"key": ν, ...}: '"key": ν' once per distinct term and side, joined
            # per equation with Arrow string kernels (keys sorted)
            vals, val_t = np.unique(coef_t, return_inverse=True)
            jval = pa.array([json.dumps(s * v) for v in vals.tolist() for s in (-1.0, 1.0)], pa.string())
            jkey = pc.binary_join_element_wise('"', norm.dictionary.take(norm_sorted), '": ', "").take(pa.array(norm_t))
            item = pc.binary_join_element_wise(pa.concat_arrays([jkey, jkey]),
                                               jval.take(pa.array(np.r_[2 * val_t.ravel(), 2 * val_t.ravel() + 1])), "")
            eq_sorted = eq_of[good]
            starts = np.flatnonzero(np.r_[True, eq_sorted[1:] != eq_sorted[:-1]])
            offsets = pa.array(np.r_[starts, len(eq_sorted)].astype(np.int32))
            items = item.take(pa.array(term[good] + side[good] * len(terms)))
            bodies = pc.binary_join(pa.ListArray.from_arrays(offsets, items), ", ").to_pylist()
            done = eq_sorted[starts]
            stoich[done] = ["{" + t + "}" for t in bodies]
            fast[done] = True
    for i in np.flatnonzero(~fast).tolist():
        stoich[i], reason[i] = _parse(equation_of(i))
    return stoich, reason, fast, parsed_formulas


def parse_equations(equations) -> list[tuple[str | None, str | None]]:
    """(stoich_json, None) or (None, reason) for every equation, vectorised.

    Plainly written equations — printable ASCII, terms ``[n ]KEY`` joined by " + ", integer
    or decimal coefficients, keys without spaces, '+', quotes or backslashes, no species
    twice, balanced with a margin of half the tolerance of
    :func:`pipeline.equation.parse_equation` — are parsed all at once (Arrow string kernels,
    one pass over the distinct keys and coefficient texts, element sums with numpy). Their
    stoichiometry is exactly what ``parse_equation`` gives (ν = ±float(coefficient text),
    keys normalised as ``parse_key`` does, the same JSON). Every other equation (fractions,
    ions, a repeated species, an imbalance or anything near the tolerance, a syntax error)
    goes through ``parse_equation`` itself, which gives the exact reason.
    """
    stoich, reason, _, _ = _equations(equations)
    return list(zip(stoich.tolist(), reason.tolist()))


def read(path: Path, source: Source, rel: str) -> ReadResult:
    """Read one reactions-csv file. ``rel`` is the path as reported (relative to raw/)."""
    cf = load(path, rel, fmt="reactions-csv", allowed=COLUMNS, required=REQUIRED,
              example_header=_HEADER)
    header = dict(zip(cf.names, cf.headers))
    for name in ("id", "equation", "quantity", "unit", "series", "method"):
        if cf.units.get(name) is not None:
            raise InputError(rel, 1, f"a unit on column {header[name]!r}", "no unit on a text column",
                             "remove the bracket")
    column_factor(rel, header["t_k"], cf.units["t_k"], None, "temperature", source.id)
    for name in ("value", "uncertainty"):
        if cf.units.get(name) is not None:   # a bracket must be an energy unit per mol
            column_factor(rel, header[name], cf.units[name], None, "energy", source.id)
    cells = cf.cells
    quantity = cf.text("quantity").str.lower()
    energy = quantity.isin(["drh", "drg"]).to_numpy(dtype=bool)
    # file-level: energies but no unit from anywhere at all → exit 2, never a guess
    if (energy.any() and not cf.has("unit") and cf.units["value"] is None
            and source.energy_unit is None):
        first = int(cells.loc[energy, "_line"].iloc[0])
        raise InputError(rel, first, f"a {quantity[energy].iloc[0]} value without a unit (no "
                         "'unit' column, no [unit] on 'value', no energy_unit in the manifest)",
                         "the unit of every energy value (units are never guessed)",
                         "add a unit column, write 'value [kJ/mol]' in the header, or set "
                         f"energy_unit = \"kJ\" for source {source.id!r} in sources.toml")
    # ids
    ids = cf.text("id")
    cf.reject((ids == "").to_numpy(), "column 'id' is empty — fix: give every measurement a unique id")
    lines = cells["_line"].astype(int) if len(cells) else pd.Series(dtype=int)
    dup = ids.duplicated(keep="first") & (ids != "")
    if dup.any():
        first_line = dict(zip(ids[~ids.duplicated(keep="first")], lines[~ids.duplicated(keep="first")]))
        cf.reject(dup.to_numpy(), pd.Series([f"id {i!r} used again (first on line {first_line[i]}) — "
                                             "fix: give every measurement a unique id" if d else ""
                                             for i, d in zip(ids, dup)], index=cells.index))
    # quantity
    badq = ~quantity.isin(QUANTITIES)
    cf.reject(badq.to_numpy(), "column 'quantity' = " + cf.text("quantity").map(repr)
              + ": expected drh, drg or log_k — fix: correct the quantity")
    # equation
    stoich_json, why, bulk, parsed_formulas = _equations(cf.text("equation"))
    stoich = pd.Series(stoich_json, index=cells.index, dtype=object)
    eq_err = pd.Series(np.where(np.equal(why, None), "", why), index=cells.index, dtype=object)
    cf.reject((eq_err != "").to_numpy(), eq_err)
    # numbers
    fix = "correct the value"
    t = cf.numbers("t_k", "temperature [K]", required=True, fix=fix)
    value = cf.numbers("value", "measured value", required=True, fix=fix)
    unc_txt = cf.text("uncertainty")
    cf.reject((unc_txt == "").to_numpy(), "no uncertainty: a measurement without a standard "
              "uncertainty cannot be weighed — fix: give its standard uncertainty (k = 1) in "
              "the 'uncertainty' column")
    unc = cf.numbers("uncertainty", "standard uncertainty", required=True, fix=fix)
    # units, row by row: unit cell > header bracket > manifest (energies); log_k: none
    row_unit = cf.text("unit")
    v_unit = cf.units["value"]
    u_unit = cf.units.get("uncertainty")
    manifest = energy_unit_for(source.energy_unit, "energy") if source.energy_unit else None
    is_log = (quantity == "log_k").to_numpy(dtype=bool)
    is_e = energy
    uv = row_unit.where(row_unit != "", v_unit or manifest or "")
    uu = row_unit.where(row_unit != "", u_unit or v_unit or manifest or "")
    # factors and verdicts per distinct unit text (a file holds a handful), then per row
    uv_code, uv_text = pd.factorize(uv.to_numpy(object))
    uu_code, uu_text = pd.factorize(uu.to_numpy(object))
    ru_code, ru_text = pd.factorize(row_unit.to_numpy(object))
    fac: dict[str, float | str] = {}
    for u in set(uv_text[np.unique(uv_code[is_e])]) | set(uu_text[np.unique(uu_code[is_e])]):
        if u:
            try:
                fac[u] = factor_to_si(u, "energy")
            except UnitError as exc:
                fac[u] = str(exc)

    def per_row(texts, codes, f):
        return np.array([f(t) for t in texts], dtype=object)[codes]

    fv = per_row(uv_text, uv_code, lambda u: fac.get(u, np.nan))
    fu = per_row(uu_text, uu_code, lambda u: fac.get(u, np.nan))
    fv_bad = np.array([isinstance(x, str) for x in fv], bool)
    fu_bad = np.array([isinstance(x, str) for x in fu], bool)
    dimless = per_row(ru_text, ru_code, is_dimensionless).astype(bool)
    empty_uv = (uv_text == "")[uv_code] if len(uv_code) else np.zeros(0, bool)
    # the first reason that applies, built only for the rows it applies to
    unit_reason = np.full(len(cells), "", dtype=object)
    rules = [(is_log & ~dimless, lambda rows: [f"unit {u!r} on a log_k row: log K is dimensionless — fix: "
                                               "leave the unit cell empty" for u in row_unit.to_numpy(object)[rows]]),
             (is_e & empty_uv, lambda rows: "a value without a unit (empty 'unit' cell, no [unit] on 'value', no "
                                            "energy_unit in the manifest) — fix: write the unit, e.g. kJ/mol"),
             (is_e & fv_bad, lambda rows: [f"unit of value: {x} — fix: write e.g. kJ/mol or kcal/mol" for x in fv[rows]]),
             (is_e & fu_bad, lambda rows: [f"unit of uncertainty: {x} — fix: write e.g. kJ/mol or kcal/mol"
                                           for x in fu[rows]])]
    taken = np.zeros(len(cells), bool)
    for applies, reason in rules:
        rows = applies & ~taken
        if rows.any():
            unit_reason[rows] = reason(rows)
            taken |= rows
    f_val = np.where(is_log, 1.0, pd.to_numeric(pd.Series(np.where(fv_bad, np.nan, fv)), errors="coerce").to_numpy(float))
    f_unc = np.where(is_log, 1.0, pd.to_numeric(pd.Series(np.where(fu_bad, np.nan, fu)), errors="coerce").to_numpy(float))
    unit_si = np.where(is_log, "1", "J/mol")
    cf.reject(unit_reason != "", pd.Series(unit_reason, index=cells.index, dtype=object))
    ok = cf.ok
    out = pd.DataFrame({
        "reaction_id": ids, "source_id": source.id, "file": rel, "line": lines,
        "equation": cf.text("equation"), "stoich_json": stoich, "quantity": quantity,
        "t_k": t, "value": value * f_val, "uncertainty": unc * f_unc, "unit": unit_si,
        "series": _blank_none(cf.text("series")), "method": _blank_none(cf.text("method")),
    }, index=cells.index)[ok]
    result = ReadResult(n_read=cf.n_rows,
                        reactions=out.reset_index(drop=True)[list(REACTION_COLUMNS)] if len(out)
                        else frame([], REACTION_COLUMNS),
                        rejected=frame(cf.rejected_rows(source.id), REJECTED_COLUMNS))
    result.formula_columns = _formula_columns(parsed_formulas, stoich_json[ok & ~bulk])
    return result


def _formula_columns(parsed, stoich_json) -> dict:
    """formula → :func:`pipeline.ingest.resolve._formula_columns` for every species of the
    file's reactions: those of the bulk path from the formulas it parsed (``parsed``, see
    :func:`_equations`; it may hold formulas of rejected rows too), the others from the
    stoichiometry of the equations read one at a time (``stoich_json``). Not a field of
    :class:`ReadResult`: :func:`pipeline.cache._read` hands it on (it is not cached)."""
    from .resolve import _columns_of_formulas, formula_columns_of

    known = _columns_of_formulas(parsed[0], parsed[1]) if parsed is not None else {}
    known.update(formula_columns_of([k for s in stoich_json if isinstance(s, str) for k in json.loads(s)]))
    return known
