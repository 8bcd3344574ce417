"""Species keys and chemical formulas.

A species key is ``FORMULA(state)`` or ``FORMULA(state,label)`` with the state in IUPAC
notation (``g``, ``l``, ``cr``, ``aq``). The formula may carry parentheses, multipliers,
decimal counts, adducts (``CuSO4·5H2O`` or ``CuSO4*5H2O``) and a trailing charge: signs,
optionally followed by the magnitude (``OH-``, ``Na+``, ``SO4-2``, ``Fe+++``, ``e-``). The
charge comes *after* the sign: ``Fe+3`` is Fe³⁺, while ``O3-`` is the ozonide ion O₃⁻ (a
count before the sign belongs to the element, as in NASA-style names). Element
symbols are validated and atomic weights taken from ``periodictable`` (IUPAC standard
atomic weights, abridged conventional values), never from a hand table.
"""
from __future__ import annotations

import re
from dataclasses import dataclass, field
from functools import lru_cache

import numpy as np
import periodictable

STATES: tuple[str, ...] = ("g", "l", "cr", "aq")

#: Elements whose IUPAC standard atomic weight is an interval (IUPAC CIAAW, "Standard
#: atomic weights of the elements 2021", Pure Appl. Chem. 94 (2022) 573).
INTERVAL_ELEMENTS = frozenset(
    {"H", "Li", "B", "C", "N", "O", "Mg", "Si", "S", "Cl", "Ar", "Br", "Tl", "Pb"})

#: Electron pseudo-element used by NASA formula fields (``E`` with count = −charge).
ELECTRON = "e"

_KEY = re.compile(r"^\s*(?P<formula>.+?)\((?P<state>[A-Za-z]+)(?:,(?P<label>[^()]+))?\)\s*$")
_CHARGE = re.compile(r"(?P<sign>[+-]+)(?P<n>\d*)$")
_SIMPLE = re.compile(r"(?:[A-Z][a-z]?(?:\d+(?:\.\d+)?)?)+")
_SIMPLE_TOKEN = re.compile(r"([A-Z][a-z]?)(\d+(?:\.\d+)?)?")
_TOKEN = re.compile(r"([A-Z][a-z]?)|(\d+(?:\.\d+)?)|(\()|(\))|(\[)|(\])")


class FormulaError(ValueError):
    """A formula or species key cannot be parsed; ``str()`` says what and how to fix it."""

    def __init__(self, text: str, why: str, fix: str):
        super().__init__(text, why, fix)
        self.text, self.why, self.fix = text, why, fix

    def __str__(self) -> str:
        return f"found {self.text!r}: {self.why} — fix: {self.fix}"


@dataclass(frozen=True)
class Formula:
    """Parsed composition: element counts (floats), charge [e]."""

    elements: dict = field(hash=False)
    charge: int = 0

    @property
    def n_atoms(self) -> float:
        """Atoms per formula unit (electrons not counted)."""
        return float(sum(v for k, v in self.elements.items() if k != ELECTRON))

    @property
    def molar_mass_g_mol(self) -> float:
        """Molar mass [g/mol] from IUPAC abridged standard atomic weights (periodictable);
        the electron mass (5.486e-4 g/mol) is added or removed for ions."""
        m = sum(_atomic_mass(el) * n for el, n in self.elements.items() if el != ELECTRON)
        return float(m - self.charge * 5.48579909e-4)


@dataclass(frozen=True)
class SpeciesKey:
    """``FORMULA(state[,label])`` split into its parts."""

    formula: str
    state: str
    label: str | None

    @property
    def key(self) -> str:
        inner = self.state if not self.label else f"{self.state},{self.label}"
        return f"{self.formula}({inner})"


#: Distinct formulas and keys remembered: a key is parsed by several readers and stages, so
#: the caches hold every key of a database of up to 2·10⁶ species (about 0.5 kB each).
CACHE_SIZE = 1 << 21


@lru_cache(maxsize=CACHE_SIZE)
def parse_key(text: str) -> SpeciesKey:
    """Split a species key. Raises FormulaError for a missing or unknown state."""
    m = _KEY.match(text or "")
    if not m:
        raise FormulaError(text, "no (state) suffix", "write the key as FORMULA(state), "
                           "e.g. H2O(g), C(cr,graphite)")
    state = m.group("state")
    if state not in STATES:
        raise FormulaError(text, f"state {state!r} is not one of {', '.join(STATES)}",
                           "use IUPAC state notation: g, l, cr or aq")
    label = m.group("label").strip() if m.group("label") else None
    return SpeciesKey(m.group("formula").strip(), state, label)


@lru_cache(maxsize=512)
def _atomic_mass(sym: str) -> float:
    """Standard atomic weight [g/mol] of an element symbol (periodictable, cached)."""
    return periodictable.elements.symbol(sym).mass


@lru_cache(maxsize=512)
def _is_element(sym: str) -> bool:
    """True when ``sym`` passes :func:`_check_symbol` (a symbol of a real element)."""
    try:
        _check_symbol(sym, sym)
    except FormulaError:
        return False
    return True


def _check_symbol(sym: str, text: str) -> None:
    try:
        el = periodictable.elements.symbol(sym)
    except ValueError:
        raise FormulaError(text, f"unknown element symbol {sym!r}",
                           "use a symbol of the periodic table (case matters: Co ≠ CO)")
    if el.number == 0:
        raise FormulaError(text, f"unknown element symbol {sym!r}", "use a real element")


@lru_cache(maxsize=CACHE_SIZE)
def _parse_formula_cached(text: str) -> tuple[tuple[tuple[str, float], ...], int]:
    body = text.strip()
    charge = 0
    if body in ("e-", "e"):
        return ((ELECTRON, 1.0),), -1
    m = _CHARGE.search(body)
    if m and m.start() > 0:
        signs, n = m.group("sign"), m.group("n")
        if len(set(signs)) != 1:
            raise FormulaError(text, "mixed charge signs", "write the charge as +, -, +2 or -2")
        mag = int(n) if n else len(signs)
        if n and len(signs) > 1:
            raise FormulaError(text, "ambiguous charge", "write the charge as +2 or ++, not +2+")
        charge = mag if signs[0] == "+" else -mag
        body = body[: m.start()]
    if not body:
        raise FormulaError(text, "empty formula", "write a formula such as H2O")
    if _SIMPLE.fullmatch(body):
        # symbols and counts only (most formulas): the same sums as the general parser below
        simple: dict[str, float] = {}
        for sym, num in _SIMPLE_TOKEN.findall(body):
            if not _is_element(sym):
                break                      # the general parser raises the exact error
            simple[sym] = simple.get(sym, 0.0) + 1.0
            if num:
                simple[sym] += float(num) - 1
        else:
            elems = {k: v for k, v in simple.items() if v != 0}
            if elems:
                return tuple(sorted(elems.items())), charge
    if "·" in body or "*" in body:
        # adduct: parts joined by '·' (or '*'), each with an optional leading multiplier
        total: dict[str, float] = {}
        for part in re.split(r"[·*]", body):
            m_mult = re.match(r"^\s*(\d+(?:\.\d+)?)?\s*(.*)$", part)
            mult = float(m_mult.group(1)) if m_mult.group(1) else 1.0
            rest = m_mult.group(2).strip()
            if not rest:
                raise FormulaError(text, "an empty part around '·'", "write adducts as CuSO4·5H2O")
            if _CHARGE.search(rest):
                raise FormulaError(text, "a charge inside an adduct part",
                                   "write the charge once, at the end of the formula")
            items, _ = _parse_formula_cached(rest)
            for el, n in items:
                total[el] = total.get(el, 0.0) + mult * n
        return tuple(sorted(total.items())), charge
    stack: list[dict] = [{}]
    pos = 0
    last_group: dict | None = None
    last_symbol: str | None = None
    for tok in _TOKEN.finditer(body):
        if tok.start() != pos:
            raise FormulaError(text, f"unexpected character {body[pos]!r}",
                               "use element symbols, counts and parentheses only")
        pos = tok.end()
        sym, num, op, cl, ob, cb = tok.groups()
        if sym:
            _check_symbol(sym, text)
            stack[-1][sym] = stack[-1].get(sym, 0.0) + 1.0
            last_symbol, last_group = sym, None
        elif num:
            count = float(num)
            if last_group is not None:
                for el, v in last_group.items():
                    stack[-1][el] = stack[-1].get(el, 0.0) + v * (count - 1)
                last_group = None
            elif last_symbol is not None:
                stack[-1][last_symbol] += count - 1
                last_symbol = None
            else:
                raise FormulaError(text, "a count with nothing before it",
                                   "put counts after an element or a closing parenthesis")
        elif op or ob:
            stack.append({})
            last_symbol = last_group = None
        else:
            if len(stack) == 1:
                raise FormulaError(text, "unbalanced parenthesis", "balance the parentheses")
            grp = stack.pop()
            for el, v in grp.items():
                stack[-1][el] = stack[-1].get(el, 0.0) + v
            last_group, last_symbol = grp, None
    if pos != len(body):
        raise FormulaError(text, f"unexpected character {body[pos]!r}",
                           "use element symbols, counts and parentheses only")
    if len(stack) != 1:
        raise FormulaError(text, "unbalanced parenthesis", "balance the parentheses")
    elems = {k: v for k, v in stack[0].items() if v != 0}
    if not elems:
        raise FormulaError(text, "no elements", "write a formula such as H2O")
    return tuple(sorted(elems.items())), charge


def parse_formula(text: str) -> Formula:
    """Parse ``Ca(OH)2``, ``OH-``, ``SO4-2``, ``C1.5H3`` into element counts and charge."""
    items, charge = _parse_formula_cached(text)
    return Formula(dict(items), charge)


def hill_formula(elements: dict, charge: int = 0) -> str:
    """Hill-order formula string (C, H, then alphabetical), with charge suffix."""
    els = {k: v for k, v in elements.items() if k != ELECTRON}
    lead = [k for k in ("C", "H") if k in els] if "C" in els else []
    order = lead + sorted(k for k in els if k not in lead)

    def fmt(n: float) -> str:
        return "" if n == 1 else (str(int(n)) if float(n).is_integer() else f"{n:g}")

    s = "".join(f"{el}{fmt(els[el])}" for el in order)
    if charge:
        s += ("+" if charge > 0 else "-") + (str(abs(charge)) if abs(charge) > 1 else "")
    if not s and charge == -1:
        return "e-"
    return s


def composition_key(elements: dict, charge: int = 0) -> str:
    """Canonical text of a composition, for grouping phases/isomers of one formula."""
    parts = [f"{k}{v:g}" for k, v in sorted(elements.items()) if k != ELECTRON]
    return "".join(parts) + (f"{charge:+d}" if charge else "")


def recase_name(name: str, elements: dict, charge: int = 0) -> str | None:
    """Re-case an upper-case name (``CL2``, ``HE``) so that its formula parse equals
    ``elements``; ``None`` when no casing matches (the caller keeps the name and warns).

    Tries every split of the letters into one- or two-letter symbols (dynamic programming
    over the string), keeping the first whose parse matches the record's own counts.
    """
    target = {k: float(v) for k, v in elements.items() if k != ELECTRON and v}
    m = _CHARGE.search(name)
    suffix = ""
    core = name
    if m and m.start() > 0:
        suffix, core = name[m.start():], name[: m.start()]

    def candidates(s: str, allowed):
        """Casings in depth-first order (one-letter symbol before two-letter), lazily; a
        prefix whose symbol is not allowed cannot match and is not extended."""
        if not s:
            yield ""
            return
        ch = s[0]
        if ch.isalpha():
            for width in (1, 2):
                if len(s) >= width and s[:width].isalpha():
                    sym = s[0].upper() + s[1:width].lower()
                    if not allowed(sym):
                        continue
                    for rest in candidates(s[width:], allowed):
                        yield sym + rest
        else:
            for rest in candidates(s[1:], allowed):
                yield ch + rest

    def first_match(allowed):
        for cand in candidates(core, allowed):
            try:
                f = parse_formula(cand + suffix)
            except FormulaError:
                continue
            if {k: v for k, v in f.elements.items() if k != ELECTRON} == target:
                return cand + suffix
        return None

    if len(core) > 24:
        return None
    # The name as written, when it already parses to the counts (``C31H50N2``, ``NaCl``): for
    # a name in capitals this is also the first casing the search below would try.
    try:
        f = parse_formula(name)
    except FormulaError:
        pass
    else:
        if {k: v for k, v in f.elements.items() if k != ELECTRON} == target:
            return name
    # A matching casing uses only the record's own elements, unless a symbol is written with
    # a zero count: search those casings first (a handful), then every casing.
    return first_match(target.__contains__) or first_match(_is_element)


# ----------------------------------------------------------------- many formulas at once

#: A formula the batch parser reads with string kernels: element symbols with optional
#: integer counts (at most 15 digits, exact in a float), then an optional charge written
#: as one sign with a magnitude or as repeated signs of one kind.
_BATCH_FORMULA = r"^(?P<body>(?:[A-Z][a-z]?\d{0,15})+)(?P<sign>\++|-+)?(?P<n>\d*)$"


@dataclass(frozen=True)
class FormulaBatch:
    """:func:`parse_formula` of many texts, in long format.

    ``ok[i]``: text ``i`` parses; ``charge[i]`` its charge [e]. Element counts are the rows
    ``j`` with ``row[j] == i``, sorted by row and then by symbol (Python string order, as
    :func:`parse_formula`'s ``elements`` are): ``symbols[sym[j]]`` with count ``count[j]``.
    """

    ok: np.ndarray
    charge: np.ndarray
    symbols: tuple
    row: np.ndarray
    sym: np.ndarray
    count: np.ndarray

    def elements(self, i: int) -> dict:
        """{symbol: count} of text ``i`` (as ``parse_formula(text).elements``)."""
        lo, hi = np.searchsorted(self.row, [i, i + 1])
        return {self.symbols[s]: float(c) for s, c in zip(self.sym[lo:hi], self.count[lo:hi])}

    def _sum(self, weight: np.ndarray) -> np.ndarray:
        """Per text, ``weight`` summed left to right in symbol order (the order of a Python
        ``sum`` over ``elements.items()``, so the floats are the same)."""
        return np.bincount(self.row, weight, minlength=len(self.ok))

    def n_atoms(self) -> np.ndarray:
        """Atoms per formula unit, electrons not counted (:attr:`Formula.n_atoms`)."""
        real = np.array([s != ELECTRON for s in self.symbols], bool)
        return self._sum(np.where(real[self.sym], self.count, 0.0))

    def molar_mass_g_mol(self) -> np.ndarray:
        """Molar mass [g/mol] (:attr:`Formula.molar_mass_g_mol`, same arithmetic)."""
        mass = np.array([0.0 if s == ELECTRON else _atomic_mass(s) for s in self.symbols])
        return self._sum(mass[self.sym] * self.count) - self.charge * 5.48579909e-4


def _arrow_strings(texts):
    """``texts`` as an Arrow string array (null for anything that is not a str) and a
    function giving text ``i`` as a Python object (for the one-at-a-time parsers)."""
    import pyarrow as pa

    if isinstance(texts, pa.ChunkedArray):
        texts = texts.combine_chunks()
    if isinstance(texts, pa.Array) and (pa.types.is_string(texts.type) or pa.types.is_large_string(texts.type)):
        return texts, lambda i: texts[i].as_py()
    items = [t if isinstance(t, str) else None for t in texts]
    return pa.array(items, pa.string()), items.__getitem__


def _utf8_bytes(arr) -> tuple[np.ndarray, np.ndarray]:
    """``(data, offsets)`` of an Arrow string array: text ``i`` is ``data[offsets[i]:offsets[i + 1]]``
    (UTF-8 bytes; a null text has no meaning there)."""
    import pyarrow as pa

    bufs = arr.buffers()
    kind = np.int64 if pa.types.is_large_string(arr.type) else np.int32
    offsets = np.frombuffer(bufs[1], kind)[arr.offset:arr.offset + len(arr) + 1].astype(np.int64)
    data = np.frombuffer(bufs[2], np.uint8) if bufs[2] is not None else np.zeros(0, np.uint8)
    return data, offsets


#: 10**k as exact floats, k = 0..15 (the digits of a count are summed with these)
_POW10 = np.array([float(10 ** k) for k in range(16)])


def _symbol_tokens(arr) -> tuple[np.ndarray, list, np.ndarray, np.ndarray]:
    """Tokens of formula bodies that match ``(?:[A-Z][a-z]?[0-9]{0,15})+`` (no nulls), read from
    their bytes with numpy: ``(row, symbols, code, count)``, one entry per token — the text it
    belongs to, its symbol ``symbols[code]`` and its count (``float`` of its digits, 1 without
    any; at most 15 digits, so the sums of digit × 10^k are exact integers)."""
    data, offsets = _utf8_bytes(arr)
    lo, hi = int(offsets[0]), int(offsets[-1])
    buf = np.append(data[lo:hi], np.uint8(0))            # a 0 after the end: no letter follows
    ends = offsets[1:] - lo
    upper = (buf >= 65) & (buf <= 90)
    at = np.flatnonzero(upper)                           # every token starts with its capital
    row = np.searchsorted(ends, at, side="right")
    nxt = buf[at + 1]
    second = np.where((nxt >= 97) & (nxt <= 122), nxt, 0).astype(np.int64)
    uniq, code = np.unique(buf[at].astype(np.int64) * 256 + second, return_inverse=True)
    symbols = [chr(u // 256) + (chr(u % 256) if u % 256 else "") for u in uniq.tolist()]
    tok_end = np.minimum(np.append(at[1:], len(buf) - 1), ends[row])
    dig = np.flatnonzero((buf >= 48) & (buf <= 57))
    tok = np.cumsum(upper)[dig] - 1
    value = (buf[dig] - 48).astype(float) * _POW10[tok_end[tok] - 1 - dig]
    count = np.bincount(tok, value, minlength=len(at))
    count[np.bincount(tok, minlength=len(at)) == 0] = 1.0
    return row, symbols, code.ravel(), count


def parse_formulas(texts) -> FormulaBatch:
    """:func:`parse_formula` of every text at once; a text that does not parse has
    ``ok = False`` (ask :func:`parse_formula` for the reason). ``texts``: a sequence, or an
    Arrow string array.

    Formulas of the common shape (:data:`_BATCH_FORMULA`) are split into symbols and counts
    from their bytes with numpy and summed; integer counts make the sums exact, so the result
    equals the one-at-a-time parser's. Every other text (parentheses, adducts, decimal
    counts, unusual charges, unknown symbols, all counts zero) goes through
    :func:`parse_formula` itself.
    """
    import pyarrow as pa
    import pyarrow.compute as pc

    arr, text_of = _arrow_strings(texts)
    n = len(arr)
    ok = np.zeros(n, bool)
    charge = np.zeros(n, np.int64)
    ext = pc.extract_regex(arr, _BATCH_FORMULA)
    fast = pc.is_valid(ext).to_numpy(zero_copy_only=False) if n else np.zeros(0, bool)
    rows_f = np.flatnonzero(fast)
    parts_row, parts_sym, parts_cnt = [], [], []
    sym_names: list[str] = []
    if len(rows_f):
        ext_f = ext.take(pa.array(rows_f))
        sign = pc.fill_null(pc.struct_field(ext_f, "sign"), "")
        mag = pc.struct_field(ext_f, "n")
        sign_len = pc.utf8_length(sign).to_numpy(zero_copy_only=False)
        mag_len = pc.utf8_length(mag).to_numpy(zero_copy_only=False)
        has_mag = mag_len > 0
        # a magnitude needs exactly one sign (the general parser says why otherwise)
        good = ~(has_mag & (sign_len != 1)) & (mag_len <= 9)
        mag_val = pc.cast(pc.if_else(pa.array(has_mag & good), mag, "0"), pa.int64()).to_numpy(zero_copy_only=False)
        mag_val = np.where(has_mag, mag_val, sign_len)
        is_minus = pc.starts_with(sign, "-").to_numpy(zero_copy_only=False)
        z = np.where(is_minus, -mag_val, mag_val)
        # one token per element symbol, with its count
        tok_row, uniq, code, cnt = _symbol_tokens(pc.struct_field(ext_f, "body"))
        known = np.array([_is_element(s) for s in uniq], bool)
        # unknown symbols: the general parser raises the exact error
        bad = np.zeros(len(rows_f), bool)
        bad[tok_row[~known[code]]] = True
        good &= ~bad
        # symbols in Python string order; sum repeated symbols of one formula (exact: integers)
        order_names = sorted(uniq)
        rank = np.empty(len(uniq), np.int64)
        rank[[uniq.index(s) for s in order_names]] = np.arange(len(uniq))
        sym_names = order_names
        keep = good[tok_row]
        r_local, s_rank, c = tok_row[keep], rank[code[keep]], cnt[keep]
        key = r_local * max(len(uniq), 1) + s_rank
        ukey, inv = np.unique(key, return_inverse=True)
        tot = np.bincount(inv.ravel(), c, minlength=len(ukey))
        nz = tot != 0
        u_row = ukey // max(len(uniq), 1)
        has_any = np.zeros(len(rows_f), bool)
        has_any[u_row[nz]] = True
        good &= has_any               # every count zero: the general parser says "no elements"
        sel = nz & good[u_row]
        parts_row.append(rows_f[u_row[sel]])
        parts_sym.append(ukey[sel] % max(len(uniq), 1))
        parts_cnt.append(tot[sel])
        ok[rows_f[good]] = True
        charge[rows_f[good]] = z[good]
    sym_index = {s: i for i, s in enumerate(sym_names)}
    slow_row, slow_sym, slow_cnt = [], [], []
    for i in np.flatnonzero(~ok).tolist():
        t = text_of(i)
        if t is None:
            continue
        try:
            items, z = _parse_formula_cached(t)
        except FormulaError:
            continue
        ok[i] = True
        charge[i] = z
        for el, v in items:
            if el not in sym_index:
                sym_index[el] = len(sym_names)
                sym_names.append(el)
            slow_row.append(i)
            slow_sym.append(sym_index[el])
            slow_cnt.append(v)
    row = np.concatenate(parts_row + [np.asarray(slow_row, np.int64)]).astype(np.int64)
    sym = np.concatenate(parts_sym + [np.asarray(slow_sym, np.int64)]).astype(np.int64)
    count = np.concatenate(parts_cnt + [np.asarray(slow_cnt, float)]).astype(float)
    # the symbols in use, in one order (Python string order) for fast and slow rows alike
    used = np.unique(sym)
    final = sorted(sym_names[k] for k in used)
    remap = np.zeros(len(sym_names), np.int64)
    remap[used] = [final.index(sym_names[k]) for k in used]
    sym = remap[sym]
    order = np.lexsort((sym, row))
    return FormulaBatch(ok=ok, charge=charge, symbols=tuple(final), row=row[order], sym=sym[order],
                        count=count[order])


def _key_parts(arr):
    """:func:`parse_key` of an Arrow string array, the plain keys only: ``(ok, formula,
    state, label)``, ``ok`` a numpy mask and the others Arrow arrays (null where ``ok`` is
    False; ``label`` also where the key has none).

    Printable-ASCII keys are split with one Arrow regular expression (the pattern of
    :func:`parse_key`); a key that does not match there, holds other characters (whose
    whitespace rules could differ) or has a label of blanks (``parse_key`` keeps it as '')
    is not ``ok`` here: ask :func:`parse_key`."""
    import pyarrow as pa
    import pyarrow.compute as pc

    ext = pc.extract_regex(arr, _KEY.pattern)
    state = pc.struct_field(ext, "state")
    printable = pc.ascii_is_printable(arr)
    raw_label = pc.struct_field(ext, "label")
    label = pc.utf8_trim_whitespace(raw_label)
    has_label = pc.greater(pc.utf8_length(label), 0)
    blank_label = pc.and_(pc.greater(pc.utf8_length(raw_label), 0), pc.invert(has_label))
    mask = pc.fill_null(pc.and_(pc.and_(pc.is_in(state, pa.array(STATES)), printable),
                                pc.invert(blank_label)), False)
    formula = pc.if_else(mask, pc.utf8_trim_whitespace(pc.struct_field(ext, "formula")), None)
    label = pc.if_else(pc.and_(mask, has_label), label, None)
    state = pc.if_else(mask, state, None)
    return mask.to_numpy(zero_copy_only=False).copy(), formula, state, label


def parse_keys(texts) -> tuple[np.ndarray, list, list, list]:
    """:func:`parse_key` of many texts at once: ``(ok, formula, state, label)``, the last
    three lists holding None where ``ok`` is False (ask :func:`parse_key` for the reason).

    Plain keys are split with Arrow string kernels (:func:`_key_parts`); every other key
    goes through :func:`parse_key` itself."""
    arr, text_of = _arrow_strings(texts)
    ok, formula, state, label = _key_parts(arr)
    formula, state, label = formula.to_pylist(), state.to_pylist(), label.to_pylist()
    for i in np.flatnonzero(~ok).tolist():
        t = text_of(i)
        if t is None:
            continue
        try:
            sk = parse_key(t)
        except FormulaError:
            continue
        ok[i] = True
        formula[i], state[i], label[i] = sk.formula, sk.state, sk.label
    return ok, formula, state, label
