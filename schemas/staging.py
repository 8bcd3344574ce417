"""Staging-table schemas: units in the column names, physical ranges as checks.

All values are SI after ingest: temperatures in K, energies in J/mol, entropies and heat
capacities in J/(mol·K). Ranges are deliberately wide physical sanity limits (they catch
unit slips and garbage, not subtle errors; the checks do that):

* temperatures 0 < T ≤ 1e5 K; T = 0 only in a table row (a table may start at 0 K);
* T ranges ascending (t_low_k < t_high_k; a one-row table has t_low_k = t_high_k);
* every number finite; |H|, |ΔfH|, |ΔfG| ≤ 1e8 J/mol (100 MJ/mol is far beyond any chemical
  species); 0 ≤ S ≤ 1e5 J/(mol·K); |Cp| ≤ 1e5 J/(mol·K);
* uncertainties ≥ 0 (a reaction measurement's > 0: a zero uncertainty would give it
  infinite weight in the network fit);
* element symbols of the periodic table (``periodictable``), states g, l, cr, aq.

Each check carries the text a curator reads in ``rejected`` (``error=``) and each column
a ``fix`` in its metadata; :mod:`pipeline.validate` assembles them into the reason.
Declarations only: this package never imports ``pipeline`` or DuckDB.
"""
from __future__ import annotations

import json
import math
import re
from functools import lru_cache

import numpy as np
import pandera.pandas as pa
import periodictable
from pandera.pandas import Check, Column, DataFrameSchema

STATES = ["g", "l", "cr", "aq"]
KEY_PATTERN = r"^.+\((g|l|cr|aq)(,[^()]+)?\)$"
T_MAX_K = 1.0e5
E_MAX_J_MOL = 1.0e8
S_MAX_J_MOL_K = 1.0e5
LOGK_MAX = 1.0e6

_FIX_SOURCE = "correct the value in the source file"
_KEY_RE = re.compile(KEY_PATTERN)


# ------------------------------------------------------------------------------ checks

def _finite(error="must be a finite number") -> Check:
    return Check(lambda s: np.isfinite(s.astype(float)), error=error)


def _known_elements(text) -> bool:
    """JSON {symbol: count} with element symbols of the periodic table and counts > 0."""
    try:
        counts = json.loads(text)
    except (TypeError, ValueError):
        return False
    if not isinstance(counts, dict):
        return False
    for sym, n in counts.items():
        try:
            el = periodictable.elements.symbol(sym)
        except (ValueError, TypeError):
            return False
        if el.number == 0 or not isinstance(n, (int, float)) or not (math.isfinite(n) and n > 0):
            return False
    return True


def _stoich_ok(text) -> bool:
    """JSON {species key: ν} with at least one species and finite, non-zero ν."""
    try:
        st = json.loads(text)
    except (TypeError, ValueError):
        return False
    return (isinstance(st, dict) and len(st) > 0
            and all(isinstance(v, (int, float)) and math.isfinite(v) and v != 0 for v in st.values())
            and all(isinstance(k, str) and _KEY_RE.match(k) for k in st))



#: A JSON number as json.dumps writes it (no NaN or Infinity literals).
_JSON_NUM = r"-?(?:0|[1-9][0-9]*)(?:\.[0-9]+)?(?:[eE][-+]?[0-9]+)?"
#: A key of a plainly written JSON map: printable ASCII without quote or backslash.
_JSON_KEY = r'[ !#-\[\]-~]*'


def _json_maps(values, per_text) -> tuple[np.ndarray, np.ndarray, object, np.ndarray, np.ndarray, np.ndarray]:
    """The JSON maps ``{"k": number, ...}`` of ``values`` as json.dumps writes them
    (printable ASCII, ``", "`` and ``": "`` separators, no escapes, no repeated key), split
    with Arrow string kernels: ``(row, key_code, keys, numbers, slow, result)`` — ``row``,
    ``key_code`` (into ``keys``, the distinct keys in ascending order, an Arrow array) and
    ``numbers`` with one entry per item of the texts read here; ``slow`` the positions of
    the other texts, for which ``result`` already holds ``per_text(text)`` (the
    one-at-a-time check).

    A key holds no quote, so ``", "`` ends a number and ``": "`` a key: a text splits into
    key, number, key, number… Keys and numbers are dictionary-encoded together, and each
    distinct number is read and each distinct key numbered once."""
    import pyarrow as pa
    import pyarrow.compute as pc

    texts = [v if isinstance(v, str) else None for v in values]
    arr = pa.array(texts, pa.string())
    item = '"' + _JSON_KEY + '": ' + _JSON_NUM
    fast = pc.fill_null(pc.match_substring_regex(arr, r"^\{" + item + "(?:, " + item + r")*\}$"), False)
    fast = fast.to_numpy(zero_copy_only=False).copy()
    at = np.flatnonzero(fast)
    sub = arr if len(at) == len(texts) else arr.take(pa.array(at, pa.int64()))
    body = pc.utf8_slice_codeunits(sub, 2, -1)                       # without '{"' and '}'
    parts = pc.split_pattern(pc.replace_substring(body, ', "', '": '), '": ')
    n_items = np.diff(parts.offsets.to_numpy(zero_copy_only=False)) // 2
    row = np.repeat(at, n_items)
    enc = pc.dictionary_encode(pc.list_flatten(parts))
    codes = enc.indices.to_numpy(zero_copy_only=False)
    k_code, n_code = codes[0::2], codes[1::2]
    n_dict = len(enc.dictionary)
    # distinct numbers: cast once each
    used = np.zeros(n_dict, bool)
    used[n_code] = True
    u = np.flatnonzero(used)
    value = np.zeros(n_dict)
    value[u] = pc.cast(enc.dictionary.take(pa.array(u, pa.int64())), pa.float64()).to_numpy(zero_copy_only=False)
    numbers = value[n_code]
    # distinct keys, numbered in sorted order
    used[:] = False
    used[k_code] = True
    u = np.flatnonzero(used)
    keys = enc.dictionary.take(pa.array(u, pa.int64()))
    order = pc.sort_indices(keys).to_numpy(zero_copy_only=False)      # ASCII: Python's order
    keys = keys.take(pa.array(order, pa.int64()))
    rank = np.zeros(n_dict, np.int64)
    rank[u[order]] = np.arange(len(u))
    key_code = rank[k_code]
    # a repeated key: json.loads keeps the last value only; the one-at-a-time check decides.
    # Keys in ascending order within a text (as json.dumps(sort_keys=True) writes them) cannot
    # repeat; only the other texts are searched.
    repeated = np.zeros(len(texts), bool)
    if len(row) > 1:
        same = row[1:] == row[:-1]
        suspect = np.zeros(len(texts), bool)
        suspect[row[1:][same & (key_code[1:] <= key_code[:-1])]] = True
        if suspect.any():
            sel = np.flatnonzero(suspect[row])
            pair = np.sort(row[sel].astype(np.int64) * max(len(keys), 1) + key_code[sel])
            dup = np.flatnonzero(pair[1:] == pair[:-1])
            repeated[pair[dup] // max(len(keys), 1)] = True
    keep = ~repeated[row]
    result = np.zeros(len(texts), bool)
    slow = np.flatnonzero(~fast | repeated)
    result[slow] = [per_text(texts[i]) for i in slow.tolist()]
    return row[keep], key_code[keep], keys, numbers[keep], slow, result


#: A number json.loads reads as finite and non-zero, as json.dumps writes it without an
#: exponent (digit counts bounded far inside float range, so nothing overflows or underflows).
_JSON_NONZERO = r"(?:[1-9][0-9]{0,15}(?:\.[0-9]{1,17})?|0\.[0-9]{0,17}[1-9][0-9]{0,17})"
#: A species key (:data:`KEY_PATTERN`) written in a JSON map without escapes.
_JSON_SPECIES_KEY = r"[ !#-\[\]-~]+\((?:g|l|cr|aq)(?:,[ !#-'*-\[\]-~]+)?\)"


def _plainly_valid(values, key: str, number: str) -> np.ndarray:
    """True where a value is a JSON map ``{"k": number, ...}`` written as json.dumps writes
    it whose every key matches ``key`` and every number ``number`` (one Arrow regular
    expression over all texts). Such a map passes its check whatever json.loads keeps of a
    repeated key (every item passes), so only the other texts need reading."""
    import pyarrow as pa
    import pyarrow.compute as pc

    arr = pa.array([v if isinstance(v, str) else None for v in values], pa.string())
    item = '"' + key + '": ' + number
    got = pc.match_substring_regex(arr, r"^\{" + item + "(?:, " + item + r")*\}$")
    return np.array(pc.fill_null(got, False).to_numpy(zero_copy_only=False), bool)


@lru_cache(maxsize=1)
def _element_symbols() -> str:
    """The element symbols :func:`_is_element` accepts, as a regular-expression alternation."""
    return "(?:" + "|".join(sorted((el.symbol for el in periodictable.elements if _is_element(el.symbol)),
                                   key=lambda x: (-len(x), x))) + ")"


def _known_elements_all(s):
    """:func:`_known_elements` of every value of ``s``: maps of element symbols to positive
    plain numbers pass in one pass over the texts (:func:`_plainly_valid`); the others are
    read item by item, still at once (:func:`_json_maps`)."""
    import pandas as pd

    values = s.to_numpy(object)
    result = _plainly_valid(values, _element_symbols(), _JSON_NONZERO)
    rest = np.flatnonzero(~result)
    if len(rest):
        row, code, keys, numbers, _, got = _json_maps(values[rest], _known_elements)
        if len(row):
            known = np.array([_is_element(k) for k in keys.to_pylist()], bool)
            good = known[code] & np.isfinite(numbers) & (numbers > 0)
            got[row] = True
            got[row[~good]] = False
        result[rest] = got
    return pd.Series(result, index=s.index)


def _is_element(sym: str) -> bool:
    try:
        return periodictable.elements.symbol(sym).number != 0
    except (ValueError, TypeError):
        return False


def _stoich_ok_all(s):
    """:func:`_stoich_ok` of every value of ``s``: maps of species keys to non-zero plain
    numbers pass in one pass over the texts (:func:`_plainly_valid`); the others are read
    item by item, still at once (:func:`_json_maps`)."""
    import pandas as pd
    import pyarrow.compute as pc

    values = s.to_numpy(object)
    result = _plainly_valid(values, _JSON_SPECIES_KEY, "-?" + _JSON_NONZERO)
    rest = np.flatnonzero(~result)
    if len(rest):
        row, code, keys, numbers, _, got = _json_maps(values[rest], _stoich_ok)
        if len(row):
            key_ok = pc.match_substring_regex(keys, KEY_PATTERN).to_numpy(zero_copy_only=False)
            good = key_ok[code] & np.isfinite(numbers) & (numbers != 0)
            got[row] = True
            got[row[~good]] = False
        result[rest] = got
    return pd.Series(result, index=s.index)


def _t(what: str, *, allow_zero=False, nullable=False, fix=_FIX_SOURCE) -> Column:
    low = (Check.ge(0.0, error="must be ≥ 0 K (absolute temperature)") if allow_zero
           else Check.gt(0.0, error="must be > 0 K (absolute temperature)"))
    return Column(float, [_finite(), low, Check.le(T_MAX_K, error=f"must be ≤ {T_MAX_K:g} K")],
                  nullable=nullable, coerce=True, description=f"{what} [K]", metadata={"fix": fix})


def _energy(what: str, nullable=True, fix=_FIX_SOURCE) -> Column:
    return Column(float, [_finite(), Check.in_range(-E_MAX_J_MOL, E_MAX_J_MOL,
                                                    error=f"must lie within ±{E_MAX_J_MOL:g} J/mol "
                                                          "(a kJ/J or cal/J unit slip?)")],
                  nullable=nullable, coerce=True, description=f"{what} [J/mol]", metadata={"fix": fix})


def _entropy(what: str, nullable=True, non_negative=False, fix=_FIX_SOURCE) -> Column:
    lo = 0.0 if non_negative else -S_MAX_J_MOL_K
    err = (f"must lie in [0, {S_MAX_J_MOL_K:g}] J/(mol*K) (an entropy is never negative)" if non_negative
           else f"must lie within ±{S_MAX_J_MOL_K:g} J/(mol*K) (a unit slip?)")
    return Column(float, [_finite(), Check.in_range(lo, S_MAX_J_MOL_K, error=err)],
                  nullable=nullable, coerce=True, description=f"{what} [J/(mol*K)]", metadata={"fix": fix})


def _uncertainty(what: str, unit: str, *, positive=False) -> Column:
    c = (Check.gt(0.0, error="must be > 0 (a standard uncertainty of zero would give "
                             "infinite weight)") if positive
         else Check.ge(0.0, error="must be ≥ 0 (a standard uncertainty is never negative)"))
    return Column(float, [_finite(), c], nullable=not positive, coerce=True,
                  description=f"standard uncertainty (k = 1) of {what} [{unit}]",
                  metadata={"fix": "give the standard uncertainty as a positive number"})


def _state() -> Column:
    return Column(str, Check.isin(STATES, error="must be one of g, l, cr, aq (IUPAC state notation)"),
                  description="state", metadata={"fix": "use IUPAC state notation: g, l, cr or aq"})


def _key(unique=False) -> Column:
    return Column(str, Check.str_matches(KEY_PATTERN, error="must be a species key FORMULA(state[,label])"),
                  unique=unique, description="species key",
                  metadata={"fix": "write the key as FORMULA(state), e.g. H2O(g), C(cr,graphite)"})


def _elements(nullable=False) -> Column:
    return Column(None, Check(_known_elements_all, error="must hold element symbols of "
                                "the periodic table with positive counts"),
                  nullable=nullable, description="element counts (JSON)",
                  metadata={"fix": "correct the element symbols of the formula (CL → Cl is read "
                            "case-insensitively; XX is no element)"})


def _ascending(strict_for=None) -> Check:
    """t_low_k < t_high_k; when ``strict_for`` is given (records), tables may have ≤."""
    if strict_for is None:
        return Check(lambda df: df["t_low_k"] < df["t_high_k"],
                     error="T range must ascend (t_low_k < t_high_k)")
    return Check(lambda df: (df["t_low_k"] < df["t_high_k"])
                 | ((df[strict_for] == "table") & (df["t_low_k"] <= df["t_high_k"])),
                 error="T range must ascend (t_low_k < t_high_k)")


# ----------------------------------------------------------------------------- schemas

SPECIES_META = DataFrameSchema(
    {
        "species": _key(),
        "stated_molar_mass_g_mol": Column(float, [_finite(), Check.in_range(0.0, 1.0e4, include_min=False,
                                                                           error="must lie in (0, 1e4] g/mol")],
                                          nullable=True, coerce=True, description="stated molar mass [g/mol]",
                                          metadata={"fix": "write the molar mass in g/mol or leave it empty"}),
        "reference_element": Column(bool, coerce=True, description="reference state of an element",
                                    metadata={"fix": "write true or false"}),
        "geometry": Column(None, Check.isin(["atom", "linear", "nonlinear"],
                                              error="must be atom, linear or nonlinear"), nullable=True,
                           description="gas geometry", metadata={"fix": "correct it or leave it empty"}),
    },
    name="species_meta", strict=False,
)

RECORDS = DataFrameSchema(
    {
        "record_id": Column(str, unique=True, description="record id"),
        "species": _key(),
        "kind": Column(str, Check.isin(["polynomial", "table"], error="must be polynomial or table")),
        "form": Column(str, Check.isin(["nasa7", "nasa9", "shomate", "table"],
                                       error="must be nasa7, nasa9, shomate or table")),
        "state": _state(),
        "elements_json": _elements(),
        "charge": Column(float, [_finite(), Check(lambda s: s == np.round(s), error="must be a whole number")],
                         nullable=True, coerce=True, description="charge [e]",
                         metadata={"fix": "correct the electron count (element E) or the charge"}),
        "t_low_k": _t("lowest temperature", allow_zero=True),
        "t_high_k": _t("highest temperature"),
        "stated_dfh_j_mol": _energy("stated ΔfH°(298.15)"),
        "stated_molar_mass_g_mol": Column(float, [_finite(), Check.gt(0.0, error="must be > 0 g/mol")],
                                          nullable=True, coerce=True, description="stated molar mass [g/mol]",
                                          metadata={"fix": _FIX_SOURCE}),
    },
    checks=[_ascending(strict_for="kind"),
            Check(lambda df: (df["kind"] == "table") | (df["t_low_k"] > 0),
                  error="a polynomial's range must start above 0 K (T = 0 only in a table row)")],
    name="records", strict=False,
)

_coef = {c: Column(float, _finite(), coerce=True, description=f"canonical coefficient {c}",
                   metadata={"fix": "correct the coefficient in the source file"})
         for c in ("a1", "a2", "a3", "a4", "a5", "a6", "a7", "b1", "b2")}
SEGMENTS = DataFrameSchema(
    {"record_id": Column(str), "t_low_k": _t("segment lower bound"), "t_high_k": _t("segment upper bound"),
     **_coef},
    checks=[_ascending()],
    name="segments", strict=False,
)

TABLE_POINTS = DataFrameSchema(
    {
        "record_id": Column(str),
        "t_k": _t("temperature", allow_zero=True),
        "cp_j_mol_k": _entropy("heat capacity", nullable=False),
        "s_j_mol_k": _entropy("entropy", non_negative=True),
        "gef_j_mol_k": _entropy("Gibbs energy function"),
        "h_minus_href_j_mol": _energy("H(T) - H(T_ref)"),
        "dfh_j_mol": _energy("enthalpy of formation"),
        "dfg_j_mol": _energy("Gibbs energy of formation"),
        "log_kf": Column(float, [_finite(), Check.in_range(-LOGK_MAX, LOGK_MAX, error=f"must lie within ±{LOGK_MAX:g}")],
                         nullable=True, coerce=True, description="log10 Kf [1]", metadata={"fix": _FIX_SOURCE}),
        **{f"uncertainty_{c}": _uncertainty(c, u) for c, u in
           (("cp_j_mol_k", "J/(mol*K)"), ("s_j_mol_k", "J/(mol*K)"), ("gef_j_mol_k", "J/(mol*K)"),
            ("h_minus_href_j_mol", "J/mol"), ("dfh_j_mol", "J/mol"), ("dfg_j_mol", "J/mol"), ("log_kf", "1"))},
    },
    checks=[Check(lambda df: (df["t_k"] != 0) | df["gef_j_mol_k"].isna(),
                  error="gef must be empty at T = 0 (-(G - H_ref)/T diverges there)")],
    name="table_points", strict=False,
)

REACTIONS = DataFrameSchema(
    {
        "reaction_id": Column(str, [Check.str_length(min_value=1, error="must not be empty")], unique=True,
                              description="reaction id", metadata={"fix": "give every measurement a unique id"}),
        "stoich_json": Column(None, Check(_stoich_ok_all, error="must be a non-empty "
                                            "JSON map of species keys to non-zero coefficients"),
                              metadata={"fix": "correct the equation"}),
        "quantity": Column(str, Check.isin(["drh", "drg", "log_k"], error="must be drh, drg or log_k")),
        "t_k": _t("temperature of the measurement"),
        "value": Column(float, _finite(), coerce=True, description="measured value [J/mol or 1]",
                        metadata={"fix": _FIX_SOURCE}),
        "uncertainty": _uncertainty("the measured value", "J/mol or 1", positive=True),
    },
    checks=[Check(lambda df: (df["quantity"] == "log_k") | (df["value"].abs() <= E_MAX_J_MOL),
                  error=f"an energy must lie within ±{E_MAX_J_MOL:g} J/mol (a unit slip?)"),
            Check(lambda df: (df["quantity"] != "log_k") | (df["value"].abs() <= LOGK_MAX),
                  error=f"log K must lie within ±{LOGK_MAX:g}")],
    name="reactions", strict=False,
)

SPECIES = DataFrameSchema(
    {
        "species": _key(unique=True),
        "state": _state(),
        "elements_json": _elements(),
        "molar_mass_g_mol": Column(float, [_finite(), Check.ge(0.0, error="must be ≥ 0 g/mol")], coerce=True),
    },
    name="species", strict=False,
)

__all__ = ["pa", "SPECIES_META", "RECORDS", "SEGMENTS", "TABLE_POINTS", "REACTIONS", "SPECIES",
           "STATES", "KEY_PATTERN"]
