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
from ..formula import (CACHE_SIZE, ELECTRON, FormulaError, SpeciesKey, parse_formula, parse_formulas, parse_key,
                       parse_keys)
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


#: A term of the fast path: an optional integer or decimal coefficient, one space, a key
#: without spaces or '+' that does not start like a number.
_FAST_TERM = r"^(?:(?P<c>\d+(?:\.\d+)?) )?(?P<k>[^\s+\d.][^\s+]*)$"
_BALANCE_TOL = 1e-9     # the tolerance of pipeline.equation.parse_equation


def _json_str(text: str) -> str:
    """``json.dumps(text)``, without the encoder for plain ASCII text (nothing to escape)."""
    if text.isascii() and text.isprintable() and '"' not in text and "\\" not in text:
        return f'"{text}"'
    return json.dumps(text)


def parse_equations(equations) -> list[tuple[str | None, str | None]]:
    """(stoich_json, None) or (None, reason) for every equation, vectorised.

    Plainly written equations — terms ``[n ]KEY`` joined by " + ", integer or decimal
    coefficients, keys without spaces or '+', no species twice, balanced with a margin of
    half the tolerance of :func:`pipeline.equation.parse_equation` — are parsed all at once
    (Arrow string kernels, one pass over the distinct species keys, element sums with
    numpy). Their stoichiometry is exactly what ``parse_equation`` gives (ν = ±float(coefficient
    text), keys normalised by ``parse_key``, the same JSON). Every other equation
    (fractions, ions, a repeated species, an imbalance or anything near the tolerance, a
    syntax error) goes through ``parse_equation`` itself, which gives the exact reason.
    """
    import pyarrow as pa
    import pyarrow.compute as pc

    eqs = list(equations)
    n = len(eqs)
    result: list = [None] * n
    fast = np.zeros(n, bool)
    text = pa.array([e if isinstance(e, str) else None for e in eqs], pa.string())
    one_eq = pc.equal(pc.count_substring(text, "="), 1).to_numpy(zero_copy_only=False)
    cand = np.flatnonzero(np.nan_to_num(one_eq.astype(float)) > 0) if n else np.empty(0, int)
    if len(cand):
        sides = pc.split_pattern(text.take(pa.array(cand)), "=")
        eq_parts, side_parts, term_parts = [], [], []
        for k in (0, 1):
            lst = pc.split_pattern(pc.list_element(sides, k), " + ")
            eq_parts.append(cand[pc.list_parent_indices(lst).to_numpy()])
            side_parts.append(np.full(len(eq_parts[-1]), k))
            term_parts.append(pc.utf8_trim_whitespace(pc.list_flatten(lst)))
        eq_of = np.concatenate(eq_parts)
        side = np.concatenate(side_parts)
        terms = pa.concat_arrays(term_parts)
        ext = pc.extract_regex(terms, _FAST_TERM)
        ok_term = pc.is_valid(ext).to_numpy(zero_copy_only=False)
        c_txt = pc.if_else(pc.is_valid(ext), pc.struct_field(ext, "c"), "")
        c_txt = pc.if_else(pc.equal(c_txt, ""), "1", c_txt)
        coef = pc.cast(c_txt, pa.float64()).to_numpy(zero_copy_only=False)
        keys = pc.dictionary_encode(pc.if_else(pc.is_valid(ext), pc.struct_field(ext, "k"), ""))
        code = keys.indices.to_numpy(zero_copy_only=False)
        uniq = keys.dictionary.to_pylist()
        # every distinct key parsed at once (pipeline.formula's batch parsers)
        key_ok, formula, state, label = parse_keys(uniq)
        fb = parse_formulas([f if good else None for f, good in zip(formula, key_ok.tolist())])
        parsed = key_ok & fb.ok
        norm = np.array([SpeciesKey(f, st, lb).key if good else ""
                         for f, st, lb, good in zip(formula, state, label, parsed.tolist())], dtype=object)
        # rank of each distinct normalised key in sorted order (json.dumps(sort_keys=True) order)
        norm_uniq, norm_code = np.unique(norm.astype(str), return_inverse=True)
        norm_code = norm_code.ravel()
        real = np.array([sym != ELECTRON for sym in fb.symbols], bool)[fb.sym]
        comp = np.zeros((len(uniq), len(fb.symbols) + 1))     # element counts, then the charge
        comp[fb.row[real], fb.sym[real]] = fb.count[real]
        comp[:, -1] = fb.charge
        bad_row = ~ok_term | ~(coef > 0) | ~parsed[code]
        key_of_row = norm_code[code]
        pair = pd.DataFrame({"e": eq_of, "k": key_of_row})
        bad_row |= pair.duplicated().to_numpy()
        bad = np.zeros(n, bool)
        bad[eq_of[bad_row]] = True
        # element and charge totals per equation and side (the quantities parse_equation sums)
        contrib = coef[:, None] * comp[code]
        a = np.stack([np.bincount(eq_of[side == 0], contrib[side == 0, j], minlength=n)
                      for j in range(comp.shape[1])], axis=1)
        b = np.stack([np.bincount(eq_of[side == 1], contrib[side == 1, j], minlength=n)
                      for j in range(comp.shape[1])], axis=1)
        scale = np.maximum(1.0, np.maximum(np.abs(a), np.abs(b)))
        scale[:, -1] = np.maximum(1.0, np.abs(a[:, -1]))
        bad |= (np.abs(a - b) > 0.5 * _BALANCE_TOL * scale).any(axis=1)
        good = np.flatnonzero(~bad[eq_of])
        if len(good):
            # JSON text {"key": ν, ...}, keys sorted, built with Arrow string kernels
            nu = np.where(side[good] == 1, coef[good], -coef[good])
            vals_u, val_code = np.unique(nu, return_inverse=True)
            order = np.lexsort((key_of_row[good], eq_of[good]))
            jkey = pa.array([_json_str(k) for k in norm_uniq.tolist()], pa.string())
            jval = pa.array([json.dumps(v) for v in vals_u.tolist()], pa.string())
            items = pc.binary_join_element_wise(jkey.take(pa.array(key_of_row[good][order])),
                                                jval.take(pa.array(val_code.ravel()[order])), ": ")
            eq_sorted = eq_of[good][order]
            starts = np.flatnonzero(np.r_[True, eq_sorted[1:] != eq_sorted[:-1]])
            offsets = pa.array(np.r_[starts, len(eq_sorted)].astype(np.int32))
            bodies = pc.binary_join(pa.ListArray.from_arrays(offsets, items), ", ")
            texts = pc.binary_join_element_wise("{", bodies, "}", "")
            for e, t in zip(eq_sorted[starts].tolist(), texts.to_pylist()):
                result[e] = (t, None)
                fast[e] = True
    for i in np.flatnonzero(~fast):
        result[i] = _parse(eqs[i])
    return result


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
    parsed = parse_equations(cf.text("equation"))
    stoich = pd.Series([p[0] for p in parsed], index=cells.index, dtype=object)
    eq_err = pd.Series([p[1] or "" for p in parsed], index=cells.index)
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
    return ReadResult(n_read=cf.n_rows,
                      reactions=out.reset_index(drop=True)[list(REACTION_COLUMNS)] if len(out)
                      else frame([], REACTION_COLUMNS),
                      rejected=frame(cf.rejected_rows(source.id), REJECTED_COLUMNS))
