"""Curated properties of every species on the standard grid, with formation values.

Grid (per preferred record): 298.15 K, then every 100 K from max(100 K, the record's lower
bound rounded up to the next multiple of 100 K) up to its upper bound. 298.15 K is on the
grid when the record's range reaches it within :data:`T298_ALLOWANCE_K` (many NASA records
start at 300 K and are, by convention, used at 298.15 K).

Columns: Cp, H (absolute, H(298.15) = ΔfH°), S, G = H − TS, H − H(298.15),
gef = −(G − H(298.15))/T = S − (H − H(298.15))/T, and, where the elements' reference
species exist, ΔfH, ΔfG and log Kf:

    ΔfH(T) = H(T) − Σ_el ν_el H_ref,el(T),   ΔfG(T) = G(T) − Σ_el ν_el G_ref,el(T),
    log Kf = −ΔfG / (R T ln 10)

with ν_el the element's count in the species divided by its count in the reference
species' formula (½ O2 per O). Reference species: those declared ``reference_element`` in
species-csv (single-element, neutral); an element without one falls back to its
conventional gaseous form (H2, N2, O2, F2, Cl2, noble gases; Cox, Wagman & Medvedev,
*CODATA Key Values for Thermodynamics*, 1989) when that species exists. When several
reference species of one element are declared (e.g. Fe(cr) and Fe(l)), the one with the
lowest G per atom at each T is used — the stable reference state, as in the JANAF
convention (Chase, *NIST-JANAF Thermochemical Tables*, 4th ed., 1998). Ions use the
electron gas e-(g) as the reference for charge (ν_e = −z), when that species exists.
A reference is used only inside its record's range (298.15 K allowance as above).
For a tabulated preferred record whose H is not absolute, ΔfH, ΔfG and log Kf at a grid
temperature that is also a tabulated row come from the table itself.
"""
from __future__ import annotations

import json
from typing import Callable

import numpy as np
import pandas as pd

from .constants import GASEOUS_REFERENCE_ATOMICITY, LN10, R, T_REF

#: A record whose range starts at most this far above 298.15 K still gets the 298.15 K row [K].
T298_ALLOWANCE_K = 5.0

PROPERTY_COLUMNS = ("species", "record_id", "t_k", "cp_j_mol_k", "h_j_mol", "s_j_mol_k", "g_j_mol",
                    "h_minus_h298_j_mol", "gef_j_mol_k", "dfh_j_mol", "dfg_j_mol", "log_kf")


def standard_grid(t_low_k, t_high_k) -> tuple[np.ndarray, np.ndarray]:
    """The standard grid of many ranges at once.

    Returns (owner, t_k): ``owner[i]`` is the index of the range that grid point ``t_k[i]``
    belongs to; points are ascending within each range.
    """
    lo = np.asarray(t_low_k, float)
    hi = np.asarray(t_high_k, float)
    start = np.maximum(100.0, np.ceil(lo / 100.0 - 1e-9) * 100.0)
    stop = np.floor(hi / 100.0 + 1e-9) * 100.0
    n = np.maximum(0, np.round((stop - start) / 100.0).astype(int) + 1)   # multiples of 100 K
    has298 = in_range(lo, hi, T_REF)
    m = n + has298                                                           # points per range
    owner = np.repeat(np.arange(len(lo)), m)
    pos = np.arange(len(owner)) - np.repeat(np.cumsum(m) - m, m)            # index within the range
    # 298.15 K goes after the multiples of 100 K below it (start is a multiple of 100 K)
    k298 = np.clip(np.ceil((T_REF - start) / 100.0), 0, n).astype(int)
    at298 = has298[owner] & (pos == k298[owner])
    offset = pos - (has298[owner] & (pos > k298[owner]))
    t = np.where(at298, T_REF, start[owner] + 100.0 * offset)
    return owner, t


def in_range(t_low_k, t_high_k, t_k) -> np.ndarray:
    """T inside [t_low, t_high], 298.15 K admitted down to t_low − :data:`T298_ALLOWANCE_K`."""
    t = np.asarray(t_k, float)
    lo = np.asarray(t_low_k, float) - np.where(np.isclose(t, T_REF), T298_ALLOWANCE_K, 0.0)
    return (t >= lo - 1e-9) & (t <= np.asarray(t_high_k, float) + 1e-9)


def _element_dicts(species: pd.DataFrame) -> list[dict]:
    """``elements_json`` of every row as a dict ({} where it is not text)."""
    texts = species["elements_json"].to_numpy(dtype=object)  # (not tolist(): one Python call per value)
    all_text = set(map(type, texts)) <= {str}
    is_text = [True] * len(texts) if all_text else [isinstance(ej, str) for ej in texts]
    try:  # one parse of all the objects at once (each on its own if that does not fit)
        parsed = json.loads("[" + ",".join(texts if all_text else (ej for ej, ok in zip(texts, is_text) if ok)) + "]")
        if len(parsed) != sum(is_text) or not set(map(type, parsed)) <= {dict}:
            raise ValueError("not one JSON object per species")
        if all_text:
            return parsed
        parsed = iter(parsed)
        return [next(parsed) if ok else {} for ok in is_text]
    except ValueError:
        return [json.loads(ej) if ok else {} for ej, ok in zip(texts, is_text)]


def element_entries(species: pd.DataFrame) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Element entries of every row of ``species``, flat: ``(lens, names, counts)`` with
    ``lens[i]`` the entries of row i and, row after row, their symbols (object array) and
    counts (float) in the order of ``elements_json`` (zero counts left out), then the
    electron ``e`` with count −charge for an ion.

    The entries of all rows are gathered with a few list comprehensions and numpy; values
    that are not plain numbers (a count written as text, a charge that is not a number)
    take the value-by-value rule (``float(n)`` of each truthy ``n``, ``−float(z)`` of a
    truthy charge), which gives the same entries.
    """
    dicts = _element_dicts(species)
    charges = species["charge"].fillna(0).tolist()
    n_raw = np.fromiter(map(len, dicts), dtype=np.intp, count=len(dicts))
    names = np.array([el for d in dicts for el in d], dtype=object)
    values = [n for d in dicts for n in d.values()]
    if set(map(type, values)) <= {int, float, bool}:
        try:
            counts = np.array(values, dtype=float)
        except OverflowError:  # an integer beyond float: float(n) raises alike
            counts = np.array([float(n) for n in values], dtype=float)
        keep = counts != 0                                    # the truthy counts (NaN is truthy)
    else:
        keep = np.array([bool(n) for n in values], dtype=bool)
        counts = np.array([float(n) for n, k in zip(values, keep) if k], dtype=float)
        full = np.zeros(len(values))
        full[keep] = counts
        counts = full
    owner = np.repeat(np.arange(len(dicts)), n_raw)[keep]
    names, counts = names[keep], counts[keep]
    if set(map(type, charges)) <= {int, float, bool, np.int64, np.float64}:
        z = np.asarray(charges, dtype=float)
        ion = np.flatnonzero(z != 0)
        e_counts = -z[ion]
    else:
        ion = np.array([i for i, v in enumerate(charges) if v], dtype=np.intp)
        e_counts = np.array([-float(charges[i]) for i in ion], dtype=float)
    if len(ion):  # the electron after the row's elements
        order = np.argsort(np.concatenate([2 * owner, 2 * ion + 1]), kind="stable")
        owner = np.concatenate([owner, ion])[order]
        names = np.concatenate([names, np.full(len(ion), "e", dtype=object)])[order]
        counts = np.concatenate([counts, e_counts])[order]
    lens = np.bincount(owner, minlength=len(dicts)).astype(np.intp)
    return lens, names, counts


def _stoich_lists(species: pd.DataFrame) -> list[tuple[list[str], list[float]]]:
    """Per row of ``species``: element symbols and counts in the order of ``elements_json``
    (zero counts left out), then the electron ``e`` with count −charge for an ion."""
    lens, names, counts = element_entries(species)
    bounds = np.concatenate([[0], np.cumsum(lens)]).tolist()
    names, counts = names.tolist(), counts.tolist()
    return [(names[a:b], counts[a:b]) for a, b in zip(bounds[:-1], bounds[1:])]


def stoichiometry(species: pd.DataFrame) -> pd.DataFrame:
    """Long frame ``species, element, count`` from ``elements_json`` and ``charge``
    (the electron as element ``e`` with count −charge)."""
    lens, names, counts = element_entries(species)
    if not len(names):
        return pd.DataFrame([], columns=["species", "element", "count"])
    return pd.DataFrame({"species": np.repeat(species["species"].to_numpy(dtype=object), lens),
                         "element": names, "count": counts}, columns=["species", "element", "count"])


def _take_entries(entries, rows: np.ndarray) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """The :func:`element_entries` of the rows at positions ``rows``."""
    lens, names, counts = entries
    first = np.cumsum(lens) - lens
    take = lens[rows]
    idx = np.repeat(first[rows] - (np.cumsum(take) - take), take) + np.arange(int(take.sum()))
    return take, names[idx], counts[idx]


def element_references(species: pd.DataFrame, entries=None) -> pd.DataFrame:
    """``element, species, atoms`` — the reference species of each element (module doc).
    ``entries``: :func:`element_entries` of ``species`` when already computed."""
    keys_arr = species["species"].to_numpy(dtype=object)
    lens, names, counts = entries if entries is not None else element_entries(species)
    first = np.cumsum(lens) - lens                          # each row's first entry
    code, _ = pd.factorize(keys_arr, use_na_sentinel=False)
    size = np.bincount(code, weights=lens)[code]            # stoichiometry entries per species key
    one = np.flatnonzero((size == 1) & (lens == 1))
    one = one[names[first[one]] != "e"]
    single = pd.DataFrame({"species": keys_arr[one], "element": names[first[one]], "count": counts[first[one]]},
                          columns=["species", "element", "count"])
    flag = species.set_index("species")["reference_element"].astype("boolean").fillna(False).astype(bool)
    charge = species.set_index("species")["charge"].fillna(0)
    declared = single[single["species"].map(flag).fillna(False).astype(bool).to_numpy()
                      & (single["species"].map(charge) == 0).to_numpy()]
    refs = declared.rename(columns={"count": "atoms"})[["element", "species", "atoms"]]
    keys = set(keys_arr.tolist())
    extra = []
    for el, n in GASEOUS_REFERENCE_ATOMICITY.items():
        key = f"{el}{n if n > 1 else ''}(g)"
        if el not in set(refs["element"]) and key in keys:
            extra.append((el, key, float(n)))
    if "e-(g)" in keys:
        extra.append(("e", "e-(g)", 1.0))
    out = pd.concat([refs, pd.DataFrame(extra, columns=["element", "species", "atoms"])], ignore_index=True)
    return out.sort_values(["element", "species"]).reset_index(drop=True)


#: (reference species (k,), T (k,)) → H [J/mol], G [J/mol], NaN outside the reference's range.
RefHG = Callable[[np.ndarray, np.ndarray], tuple[np.ndarray, np.ndarray]]


def formation(rows: pd.DataFrame, species: pd.DataFrame, refs: pd.DataFrame, ref_hg: RefHG) -> pd.DataFrame:
    """ΔfH, ΔfG [J/mol] and log Kf for rows ``species, t_k, h_j_mol, g_j_mol``.

    refs : :func:`element_references`; ref_hg : evaluates reference species (module doc).
    Returns a frame aligned with ``rows`` (same index) holding dfh_j_mol, dfg_j_mol, log_kf.
    """
    out = pd.DataFrame({"dfh_j_mol": np.nan, "dfg_j_mol": np.nan, "log_kf": np.nan}, index=rows.index)
    if not len(rows) or not len(refs):
        return out
    code, keys = pd.factorize(rows["species"].to_numpy(dtype=object))
    st = _Stoichiometry.of(species, np.asarray(keys, dtype=object), refs)
    if not st.usable.any():
        return out
    t = rows["t_k"].to_numpy(float)
    temps = np.unique(t)
    ref_h, ref_g = reference_atoms(refs, ref_hg, temps, st.elements)
    tc = np.searchsorted(temps, t)
    # the summation rule (see _row_sums) depends on the row order and on NaN terms anywhere
    in_order = pd.Index(rows.index[st.rows_usable(code)]).is_monotonic_increasing
    plain = [in_order and not st.any_nan_term(code, tc, ref) for ref in (ref_h, ref_g)]
    dfh, dfg, log_kf = st.formation(code, t, rows["h_j_mol"].to_numpy(float), rows["g_j_mol"].to_numpy(float),
                                    tc, ref_h, ref_g, plain)
    out["dfh_j_mol"], out["dfg_j_mol"], out["log_kf"] = dfh, dfg, log_kf
    return out


def reference_atoms(refs: pd.DataFrame, ref_hg: RefHG, temps: np.ndarray,
                    elements: list[str]) -> tuple[np.ndarray, np.ndarray]:
    """H and G per atom [J/mol] of each element's stable reference at each temperature.

    Returns two (len(elements), len(temps)) arrays: the reference with the lowest G per atom
    at T (ties: the first species key), NaN where no reference of the element covers T.
    """
    rr = refs.loc[refs.index.repeat(len(temps))].reset_index(drop=True)
    rr["t_k"] = np.tile(temps, len(refs))
    h, g = ref_hg(rr["species"].to_numpy(dtype=object), rr["t_k"].to_numpy(float))
    rr["h_atom"] = h / rr["atoms"].to_numpy(float)
    rr["g_atom"] = g / rr["atoms"].to_numpy(float)
    rr = rr[np.isfinite(rr["g_atom"]) & np.isfinite(rr["h_atom"])]
    best = rr.sort_values(["element", "t_k", "g_atom", "species"], kind="stable").drop_duplicates(["element", "t_k"])
    best = best[best["element"].isin(elements)]
    ref_h = np.full((len(elements), len(temps)), np.nan)
    ref_g = np.full((len(elements), len(temps)), np.nan)
    el = pd.Index(elements).get_indexer(best["element"])
    tc = np.searchsorted(temps, best["t_k"].to_numpy(float))
    ref_h[el, tc] = best["h_atom"].to_numpy(float)
    ref_g[el, tc] = best["g_atom"].to_numpy(float)
    return ref_h, ref_g


class _Stoichiometry:
    """Element counts of a list of species as padded arrays: ``el[i, k]`` is the code (in
    :attr:`elements`, the elements that have a reference species) of species i's k-th
    element in ``elements_json`` order (the electron last), −1 past its last element;
    ``count[i, k]`` its count. ``usable[i]``: the species is known, has at least one element
    and every one of its elements has a reference (formation values defined)."""

    def __init__(self, elements: list[str], el: np.ndarray, count: np.ndarray, usable: np.ndarray):
        self.elements, self.el, self.count, self.usable = elements, el, count, usable
        # the same terms flat, row after row (usable species only): n_terms[i] of species i
        # starting at off[i] in el_flat / count_flat
        has = (el >= 0) & usable[:, None]
        self.n_terms = has.sum(axis=1).astype(np.intp)
        self.off = np.cumsum(self.n_terms) - self.n_terms
        self.el_flat, self.count_flat = el[has], count[has]

    @classmethod
    def of(cls, species: pd.DataFrame, keys: np.ndarray, refs: pd.DataFrame, entries=None) -> "_Stoichiometry":
        """The species ``keys`` (rows of ``species``, the first of a repeated key;
        ``entries``: :func:`element_entries` of ``species`` when already computed)."""
        elements = sorted(set(refs["element"]))
        first = np.flatnonzero(~species["species"].duplicated(keep="first").to_numpy())
        pos = pd.Index(species["species"].to_numpy(dtype=object)[first]).get_indexer(keys)
        known = np.flatnonzero(pos >= 0)
        rows = first[pos[known]]
        lens, names, counts = (_take_entries(entries, rows) if entries is not None
                               else element_entries(species.iloc[rows]))
        width = int(lens.max()) if len(lens) else 0
        ecode = pd.Index(elements, dtype=object).get_indexer(names) if len(names) else np.zeros(0, dtype=np.intp)
        row = np.repeat(np.arange(len(lens)), lens)                     # parsed row of each entry
        k = np.arange(len(names)) - np.repeat(np.cumsum(lens) - lens, lens)
        ok_row = (lens > 0) & (np.bincount(row, weights=ecode < 0, minlength=len(lens)) == 0)
        fill = ok_row[row]
        el = np.full((len(keys), width), -1, dtype=np.intp)
        count = np.zeros((len(keys), width))
        usable = np.zeros(len(keys), dtype=bool)
        usable[known] = ok_row
        el[known[row[fill]], k[fill]] = ecode[fill]
        count[known[row[fill]], k[fill]] = counts[fill]
        return cls(elements, el, count, usable)

    def rows_usable(self, code: np.ndarray) -> np.ndarray:
        """Rows (species ``code`` into this list, −1 unknown) whose formation values are defined."""
        ok = code >= 0
        ok[ok] = self.usable[code[ok]]
        return ok

    def terms(self, code: np.ndarray, tc: np.ndarray, per_atom: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        """ν_el · X_ref,el per row and element: (n, width) values and the mask of real terms
        (a prefix of each row; none for a row whose species is not usable). ``tc``: the
        rows' temperature codes; ``per_atom``: (element × T) from :func:`reference_atoms`."""
        ok = self.rows_usable(code)
        c = np.where(ok, code, 0)
        if not len(self.el):
            return np.zeros((len(code), 0)), np.zeros((len(code), 0), dtype=bool)
        el = self.el[c]
        has = (el >= 0) & ok[:, None]
        with np.errstate(invalid="ignore", over="ignore"):
            val = self.count[c] * per_atom[np.maximum(el, 0), tc[:, None]]
        return val, has

    def any_nan_term(self, code: np.ndarray, tc: np.ndarray, per_atom: np.ndarray) -> bool:
        """Whether any real term of these rows is NaN (an element without a reference at T)."""
        nan = np.isnan(per_atom)
        if np.isfinite(self.count_flat).all() and (self.count_flat != 0).all():
            # a finite non-zero count times a number or ±inf is never NaN: a term is NaN
            # exactly where its reference value is; with the species' elements and each T's
            # NaN elements as bit sets, a row has a NaN term where the two intersect
            if not nan.any():
                return False
            if len(self.elements) <= 63:
                bit = np.left_shift(np.int64(1), np.arange(len(self.elements), dtype=np.int64))
                species_bits = np.bitwise_or.reduce(np.where(self.el >= 0, bit[np.maximum(self.el, 0)], 0), axis=1) \
                    if self.el.shape[1] else np.zeros(len(self.el), dtype=np.int64)
                t_bits = (nan * bit[:, None]).sum(axis=0)
                ok = self.rows_usable(code)
                return bool((species_bits[code[ok]] & t_bits[tc[ok]]).any())
        val, has = self.terms(code, tc, per_atom)
        return bool((has & np.isnan(val)).any())

    def plain_sums(self, code: np.ndarray, tc: np.ndarray,
                   per_atom: tuple[np.ndarray, ...]) -> tuple[list[np.ndarray], list[np.ndarray]]:
        """:func:`_row_sums` with ``plain`` of the terms of each table in ``per_atom`` (the
        same sums, bit for bit): the rows' real terms gathered flat, row after row (the
        order of ``val[has]``), and added per row with ``numpy.add.reduceat``. Returns the
        sums and, per table, the rows with a NaN term."""
        ok = self.rows_usable(code)
        c = np.where(ok, code, 0)
        nt = np.where(ok, self.n_terms[c] if len(self.n_terms) else 0, 0)
        total = int(nt.sum())
        start = np.cumsum(nt) - nt
        rows = nt > 0
        term = np.repeat(self.off[c] - start, nt) + np.arange(total)
        cnt = self.count_flat[term]
        idx = self.el_flat[term] * per_atom[0].shape[1] + np.repeat(tc, nt)
        del term
        sums, bads = [], []
        for table in per_atom:
            with np.errstate(invalid="ignore", over="ignore"):
                v = cnt * np.ravel(table)[idx]
            out = np.zeros(len(code))
            if total:
                out[rows] = np.add.reduceat(v, start[rows])
            bad = np.zeros(len(code), dtype=bool)
            nan = np.isnan(v)
            if nan.any():
                bad[np.repeat(np.arange(len(code)), nt)[nan]] = True
            sums.append(out)
            bads.append(bad)
        return sums, bads

    def compensated_sums(self, code: np.ndarray, tc: np.ndarray,
                         per_atom: tuple[np.ndarray, ...]) -> tuple[list[np.ndarray], list[np.ndarray]]:
        """:func:`_row_sums` without ``plain`` (the compensated sum, term by term, NaN terms
        skipped) of the terms of each table in ``per_atom``: the rows' sums and, per table,
        the rows with a NaN term. The sums of rows without a NaN term are those of
        :func:`_row_sums` bit for bit (a row with one is NaN to its caller, whatever its
        sum). The rows are taken in order of decreasing term count, so that the rows with a
        k-th term are a leading slice: element column k is gathered and added for them
        alone, without per-column gathers and scatters of the running sums."""
        ok = self.rows_usable(code)
        c = np.where(ok, code, 0)
        nt = np.where(ok, self.n_terms[c] if len(self.n_terms) else 0, 0)
        n = len(code)
        order = np.argsort(-nt, kind="stable")
        c, tcs = c[order], tc[order]
        hist = np.bincount(nt, minlength=self.el.shape[1] + 1)
        m = hist[::-1].cumsum()[::-1][1:]                                 # m[k]: rows with a k-th term
        sums = [np.zeros(n) for _ in per_atom]
        comps = [np.zeros(n) for _ in per_atom]
        bads = [np.zeros(n, dtype=bool) for _ in per_atom]
        n_t = per_atom[0].shape[1] if per_atom else 0
        for k in range(self.el.shape[1]):
            r = int(m[k])
            if not r:
                break
            ck = c[:r]
            cnt = self.count[:, k][ck]
            idx = self.el[:, k][ck] * n_t + tcs[:r]
            for table, total, comp, bad in zip(per_atom, sums, comps, bads):
                tot, cmp = total[:r], comp[:r]
                with np.errstate(invalid="ignore", over="ignore"):
                    v = cnt * np.ravel(table)[idx]
                    bad[:r] |= np.isnan(v)
                    y = v - cmp
                    s = tot + y
                    cc = (s - tot) - y
                cc[~np.isfinite(cc)] = 0.0  # an infinite term: keep the infinite sum (as pandas does)
                tot[...] = s
                cmp[...] = cc
        back = np.empty_like(order)
        back[order] = np.arange(n)
        return [x[back] for x in sums], [b[back] for b in bads]

    def formation(self, code: np.ndarray, t: np.ndarray, h: np.ndarray, g: np.ndarray, tc: np.ndarray,
                  ref_h: np.ndarray, ref_g: np.ndarray, plain: list[bool]) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
        """ΔfH, ΔfG [J/mol], log Kf [1] of rows (species ``code`` into this list, −1 unknown;
        T [K] with codes ``tc``; H, G [J/mol]); ``ref_h``, ``ref_g`` from :func:`reference_atoms`;
        ``plain`` (for H, for G): the summation rule of :func:`_row_sums`."""
        flat = [i for i in (0, 1) if plain[i]]
        got, bads = self.plain_sums(code, tc, tuple((ref_h, ref_g)[i] for i in flat)) if flat else ([], [])
        sums = {i: (x, b) for i, x, b in zip(flat, got, bads)}
        rest = [i for i in (0, 1) if not plain[i]]
        if rest:  # a compensated sum term by term (_row_sums)
            got, bads = self.compensated_sums(code, tc, tuple((ref_h, ref_g)[i] for i in rest))
            sums.update({i: (x, b) for i, x, b in zip(rest, got, bads)})
        (sh, bad_h), (sg, bad_g) = sums[0], sums[1]
        missing = ~self.rows_usable(code) | bad_h | bad_g
        sh[missing] = np.nan
        sg[missing] = np.nan
        with np.errstate(invalid="ignore", divide="ignore"):
            dfh = h - sh
            dfg = g - sg
            log_kf = -dfg / (R * t * LN10)
        log_kf[np.isnan(log_kf)] = np.nan  # one NaN (the negation above sets its sign bit)
        return dfh, dfg, log_kf


def _row_sums(val: np.ndarray, has: np.ndarray, plain: bool) -> tuple[np.ndarray, np.ndarray]:
    """Σ_k val[i, k] over each row's real terms (in element order), and whether a term is NaN.

    The arithmetic is that of pandas' grouped sum over the long (row × element) frame, which
    is how these sums were computed before, so the table's values stay the same to the last
    bit: when every term of the whole frame is a number and the rows come in order
    (``plain``), pandas adds each row with ``numpy.add.reduceat`` (the first term plus numpy's
    pairwise sum of the others), else with a compensated (Kahan) sum term by term, NaN terms
    skipped (such rows are set to NaN by the caller).
    """
    n = len(val)
    bad = (has & np.isnan(val)).any(axis=1)
    total = np.zeros(n)
    if plain:
        n_terms = has.sum(axis=1)
        rows = n_terms > 0
        if rows.any():
            starts = (np.cumsum(n_terms) - n_terms)[rows]
            total[rows] = np.add.reduceat(val[has], starts)
        return total, bad
    comp = np.zeros(n)
    with np.errstate(invalid="ignore", over="ignore"):
        for k in range(val.shape[1]):
            use = has[:, k] & ~np.isnan(val[:, k])
            if not has[:, k].any():
                break
            y = val[:, k] - comp
            s = total + y
            c = (s - total) - y
            c[~np.isfinite(c)] = 0.0  # an infinite term: keep the infinite sum (as pandas does)
            total = np.where(use, s, total)
            comp = np.where(use, c, comp)
    return total, bad


#: grid rows evaluated at once (bounds the temporaries of the evaluation and formation)
BLOCK_ROWS = 1 << 19


def _text_take(col: pd.Series, idx: np.ndarray):
    """``col`` (text) at positions ``idx`` as a ``str`` array, without Python objects."""
    return col.astype("str").array.take(idx)


def curated_properties(preferred: pd.DataFrame, records: pd.DataFrame, species: pd.DataFrame,
                       functions, table_points: pd.DataFrame | None = None,
                       refs: pd.DataFrame | None = None, entries=None) -> pd.DataFrame:
    """The ``properties`` table: every species' preferred record on its standard grid.

    Parameters
    ----------
    preferred : ``species, preferred_record_id``.
    records : records frame (record_id, kind, t_low_k, t_high_k).
    species : species table (elements_json, charge, reference_element).
    functions : :class:`~pipeline.functions.RecordFunctions` over the records.
    table_points : tabulated rows, for ΔfH/ΔfG/log Kf a table gives where H is not absolute.
    refs : :func:`element_references` of ``species`` when already computed.
    entries : :func:`element_entries` of ``species`` when already computed.

    Rows are sorted by species and T. The grid is evaluated in blocks of
    :data:`BLOCK_ROWS` rows; formation values come from each species' element counts (padded
    arrays) and a per-element × per-T table of the references, without long-format merges.
    """
    pr = preferred.dropna(subset=["preferred_record_id"]).merge(
        records[["record_id", "t_low_k", "t_high_k"]], left_on="preferred_record_id", right_on="record_id")
    if not len(pr):
        return pd.DataFrame(columns=list(PROPERTY_COLUMNS))
    presorted = not pr["species"].duplicated().any()
    if presorted:  # one record per species: the grid comes out in (species, T) order
        pr = pr.iloc[np.argsort(pr["species"].to_numpy(dtype=object), kind="stable")].reset_index(drop=True)
    owner, t = standard_grid(pr["t_low_k"].to_numpy(float), pr["t_high_k"].to_numpy(float))
    rid_pr = pr["record_id"].to_numpy(dtype=object)
    n = len(t)
    names = ("cp_j_mol_k", "h_j_mol", "s_j_mol_k", "g_j_mol", "h_minus_h298_j_mol", "dfh_j_mol", "dfg_j_mol",
             "log_kf")
    # every row of the first five is set block by block below; the formation values may stay NaN
    col = {c: np.empty(n) if k < 5 else np.full(n, np.nan) for k, c in enumerate(names)}

    if refs is None:
        refs = element_references(species, entries)
    ref_rec = preferred.set_index("species")["preferred_record_id"]
    refs = refs[refs["species"].isin(ref_rec.dropna().index)]
    rng = records.set_index("record_id")[["t_low_k", "t_high_k"]]

    def ref_hg(keys, temps):
        rids = ref_rec.loc[keys].to_numpy(dtype=object)
        vv = functions.evaluate(rids, temps)
        ok = in_range(rng.loc[rids, "t_low_k"].to_numpy(float), rng.loc[rids, "t_high_k"].to_numpy(float), temps)
        return np.where(ok, vv.h, np.nan), np.where(ok, vv.g, np.nan)

    st = _Stoichiometry.of(species, pr["species"].to_numpy(dtype=object), refs, entries) if len(refs) else None
    with_formation = st is not None and n > 0 and bool(st.usable.any())
    if with_formation:
        temps = np.unique(t)
        tc = np.searchsorted(temps, t)
        ref_h, ref_g = reference_atoms(refs, ref_hg, temps, st.elements)
        # rows come in order; the summation rule depends on NaN terms anywhere (_row_sums)
        plain = [not any(st.any_nan_term(owner[i:i + BLOCK_ROWS], tc[i:i + BLOCK_ROWS], ref)
                         for i in range(0, n, BLOCK_ROWS)) for ref in (ref_h, ref_g)]
    for i in range(0, n, BLOCK_ROWS):
        j = min(n, i + BLOCK_ROWS)
        v = functions.evaluate_codes(rid_pr, owner[i:j], t[i:j])   # the grid's record ids looked up once each
        for c, a in zip(names, (v.cp, v.h, v.s, v.g, v.h_minus_h298)):
            col[c][i:j] = a
        if with_formation:
            form = st.formation(owner[i:j], t[i:j], v.h, v.g, tc[i:j], ref_h, ref_g, plain)
            for c, a in zip(("dfh_j_mol", "dfg_j_mol", "log_kf"), form):
                col[c][i:j] = a
    with np.errstate(invalid="ignore", divide="ignore"):
        gef = col["s_j_mol_k"] - col["h_minus_h298_j_mol"] / t
    if table_points is not None and len(table_points):
        _fill_from_tables(col, table_points, pr["record_id"], rid_pr, owner, t)
    rows = pd.DataFrame({"species": _text_take(pr["species"], owner), "record_id": _text_take(pr["record_id"], owner),
                         "t_k": t, **{c: col.pop(c) for c in names[:5]}, "gef_j_mol_k": gef,
                         **{c: col.pop(c) for c in names[5:]}}, copy=False)
    if not presorted:
        rows = rows.sort_values(["species", "t_k"], kind="stable").reset_index(drop=True)
    return rows[list(PROPERTY_COLUMNS)]


def _fill_from_tables(col: dict, table_points: pd.DataFrame, pr_rid: pd.Series, rid_pr: np.ndarray,
                      owner: np.ndarray, t: np.ndarray) -> None:
    """Where a formation value is NaN and the record is a table with a row at that T, take
    the table's value (its first row at that T)."""
    from .functions import member

    tp = table_points[["record_id", "t_k", "dfh_j_mol", "dfg_j_mol", "log_kf"]].drop_duplicates(["record_id", "t_k"])
    tabulated = member(pr_rid, tp["record_id"].dropna().unique())
    sel = np.flatnonzero(tabulated[owner])
    if not len(sel):
        return
    m = pd.DataFrame({"record_id": rid_pr[owner[sel]], "t_k": t[sel], "_row": sel}).merge(
        tp, on=["record_id", "t_k"], how="inner")
    pos = m["_row"].to_numpy()
    for c in ("dfh_j_mol", "dfg_j_mol", "log_kf"):
        fill = m[c].to_numpy(dtype=float, na_value=np.nan)
        target = col[c]
        empty = np.isnan(target[pos])
        target[pos[empty]] = fill[empty]
