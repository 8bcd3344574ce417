"""Species functions of any record — polynomial or table — through one interface.

``RecordFunctions.evaluate(record_ids, t_k)`` returns Cp, H, S, G and H − H(298.15) for
(record, T) pairs, vectorised over all pairs at once.

Polynomial records go through the canonical evaluator (:mod:`pipeline.thermo`); outside a
polynomial's stated range its end segment is evaluated as written (range checks decide
whether that is acceptable; callers that must not extrapolate restrict T themselves).

Table records are interpolated physically (:class:`TableCurves`): a not-a-knot cubic spline
of Cp through the tabulated points (de Boor, *A Practical Guide to Splines*, 1978, ch. IV —
the interpolant of ``scipy.interpolate.CubicSpline``), built for every table at once, and H
and S carried from the nearest tabulated row at or below T by integrating that spline
exactly, piece by piece (Cp is a cubic on each piece, so ∫Cp dT is a quartic and ∫Cp/T dT
a cubic plus a logarithm — no quadrature error)::

    H(T) − H298 = [H(Ti) − H298] + ∫_Ti^T Cp dT,      S(T) = S(Ti) + ∫_Ti^T Cp/T dT

A tabulated row is therefore reproduced exactly; a row without H − H298 (or S) takes it
from the nearest row that has one through the same integrals. A table with no H − H298
column at all is anchored at 298.15 K (H − H298 = 0 there) when its range holds 298.15 K,
else its H − H298 is NaN. Outside a table's range every value is NaN (tables are never
extrapolated).

Absolute H of a table: H(298.15) = ΔfH°(298.15) when the table gives dfh at 298.15 K
(the convention of the polynomials); otherwise H and G are NaN and only H − H(298.15) is
defined.
"""
from __future__ import annotations

from dataclasses import dataclass
from functools import cached_property

import numpy as np
import pandas as pd
from scipy.linalg import solve_banded

from .constants import T_REF
from .thermo import SegmentIndex, evaluate, sorted_codes

#: A tabulated temperature within this of 298.15 K is the 298.15 K row [K].
T_REF_MATCH_K = 5e-3
#: Slack at a table's ends when deciding in/out of range [K].
_EDGE_K = 1e-6


@dataclass(frozen=True)
class Values:
    """Cp [J/(mol*K)], H [J/mol], S [J/(mol*K)], G [J/mol], H − H(298.15) [J/mol]."""

    cp: np.ndarray
    h: np.ndarray
    s: np.ndarray
    g: np.ndarray
    h_minus_h298: np.ndarray


# ------------------------------------------------------------------------------------------
# Piecewise cubic Hermite curves of Cp for many tables at once
# ------------------------------------------------------------------------------------------

def _group_bounds(rank: np.ndarray, n_groups: int) -> tuple[np.ndarray, np.ndarray]:
    start = np.searchsorted(rank, np.arange(n_groups), side="left")
    stop = np.searchsorted(rank, np.arange(n_groups), side="right")
    return start, stop


def not_a_knot_slopes(t: np.ndarray, y: np.ndarray, start: np.ndarray, stop: np.ndarray) -> np.ndarray:
    """Node slopes dy/dt of the not-a-knot cubic spline of every group, in one banded solve.

    The groups' tridiagonal systems (the continuity of the second derivative at interior
    nodes, and a continuous third derivative at the second and second-last node) are
    stacked into one block-diagonal tridiagonal system: the coupling entries between groups
    are zero, so a single ``solve_banded`` call solves them all. Groups of 3 points give the
    interpolating parabola, of 2 the straight line, of 1 a zero slope (as
    ``scipy.interpolate.CubicSpline`` does).

    Parameters
    ----------
    t : (n,) nodes, ascending within each group [any unit]; y : (n,) values;
    start, stop : (g,) index range of each group.
    """
    n = len(t)
    slope = np.zeros(n)
    if n == 0:
        return slope
    size = stop - start
    last = np.zeros(n, bool)
    last[stop[size > 0] - 1] = True
    dx = np.zeros(n)             # dx[i] = t[i+1] − t[i] inside a group, else 0
    m = np.zeros(n)              # secant slope of piece i
    inner = ~last
    dx[:-1] = np.diff(t)
    dx[last] = 0.0
    safe = np.where(inner & (dx > 0), dx, 1.0)
    m[:-1] = np.diff(y)
    m = np.where(inner, m / safe, 0.0)

    ab = np.zeros((3, n))        # banded storage: ab[1 + i − j, j] = A[i, j]
    b = np.zeros(n)
    ab[1] = 1.0                  # identity rows unless a group overwrites them

    # groups of 2: the line; of 3: the parabola (fixed slopes, identity rows)
    g2 = start[size == 2]
    b[g2] = m[g2]
    b[g2 + 1] = m[g2]
    g3 = start[size == 3]
    f2 = (m[g3 + 1] - m[g3]) / (t[g3 + 2] - t[g3])
    b[g3] = m[g3] - f2 * dx[g3]
    b[g3 + 1] = m[g3] + f2 * dx[g3]
    b[g3 + 2] = m[g3] + f2 * (dx[g3] + 2 * dx[g3 + 1])

    big = size >= 4
    if big.any():
        s0, s1 = start[big], stop[big]
        # interior rows i: dx[i] s[i−1] + 2(dx[i−1] + dx[i]) s[i] + dx[i−1] s[i+1] = 3(dx[i] m[i−1] + dx[i−1] m[i])
        counts = s1 - s0 - 2
        rows = np.repeat(s0 + 1, counts) + (np.arange(counts.sum()) - np.repeat(np.cumsum(counts) - counts, counts))
        ab[1, rows] = 2 * (dx[rows - 1] + dx[rows])
        ab[2, rows - 1] = dx[rows]          # A[i, i−1]
        ab[0, rows + 1] = dx[rows - 1]      # A[i, i+1]
        b[rows] = 3 * (dx[rows] * m[rows - 1] + dx[rows - 1] * m[rows])
        # first row: continuous third derivative at the second node
        d = t[s0 + 2] - t[s0]
        ab[1, s0] = dx[s0 + 1]
        ab[0, s0 + 1] = d
        b[s0] = ((dx[s0] + 2 * d) * dx[s0 + 1] * m[s0] + dx[s0] ** 2 * m[s0 + 1]) / d
        # last row: continuous third derivative at the second-last node
        e = s1 - 1
        d = t[e] - t[e - 2]
        ab[1, e] = dx[e - 2]
        ab[2, e - 1] = d
        b[e] = (dx[e - 1] ** 2 * m[e - 2] + (2 * d + dx[e - 1]) * dx[e - 2] * m[e - 1]) / d
    return solve_banded((1, 1), ab, b, check_finite=False)


def pchip_slopes(t: np.ndarray, y: np.ndarray, start: np.ndarray, stop: np.ndarray) -> np.ndarray:
    """Node slopes of the monotone piecewise cubic (PCHIP) interpolant of every group.

    Fritsch & Butland, "A method for constructing local monotone piecewise cubic
    interpolants", SIAM J. Sci. Stat. Comput. 5 (1984) 300: weighted harmonic mean of the
    neighbouring secants at interior nodes (zero at a local extremum), a shape-preserving
    three-point formula at the ends — the rule of ``scipy.interpolate.PchipInterpolator``.
    """
    n = len(t)
    d = np.zeros(n)
    if n == 0:
        return d
    size = stop - start
    last = np.zeros(n, bool)
    last[stop[size > 0] - 1] = True
    first = np.zeros(n, bool)
    first[start[size > 0]] = True
    h = np.zeros(n)
    h[:-1] = np.diff(t)
    h[last] = 0.0
    m = np.zeros(n)
    m[:-1] = np.diff(y)
    m = np.where(~last & (h > 0), m / np.where(h > 0, h, 1.0), 0.0)
    # interior nodes i (not first, not last): secants m[i−1], m[i]
    interior = np.flatnonzero(~first & ~last)
    m0, m1 = m[interior - 1], m[interior]
    h0, h1 = h[interior - 1], h[interior]
    w1, w2 = 2 * h1 + h0, h1 + 2 * h0
    flat = (np.sign(m0) != np.sign(m1)) | (m0 == 0) | (m1 == 0)
    with np.errstate(divide="ignore", invalid="ignore"):
        whmean = (w1 / m0 + w2 / m1) / (w1 + w2)
        d[interior] = np.where(flat, 0.0, 1.0 / whmean)

    def edge(h0, h1, m0, m1):
        e = ((2 * h0 + h1) * m0 - h0 * m1) / (h0 + h1)
        e = np.where(np.sign(e) != np.sign(m0), 0.0, e)
        return np.where((np.sign(m0) != np.sign(m1)) & (np.abs(e) > 3 * np.abs(m0)), 3 * m0, e)

    s2 = start[size == 2]
    d[s2] = m[s2]
    d[s2 + 1] = m[s2]
    s3 = start[size >= 3]
    e3 = stop[size >= 3] - 1
    d[s3] = edge(h[s3], h[s3 + 1], m[s3], m[s3 + 1])
    d[e3] = edge(h[e3 - 1], h[e3 - 2], m[e3 - 1], m[e3 - 2])
    return d


def _hermite_coefficients(y0, y1, s0, s1, h):
    """Power-form coefficients c0..c3 of a cubic Hermite piece in x = T − Ti."""
    hs = np.where(h > 0, h, 1.0)
    mm = (y1 - y0) / hs
    c2 = np.where(h > 0, (3 * mm - 2 * s0 - s1) / hs, 0.0)
    c3 = np.where(h > 0, (s0 + s1 - 2 * mm) / hs ** 2, 0.0)
    return y0, s0, c2, c3


def _piece_integrals(c0, c1, c2, c3, ti, x):
    """∫_0^x Cp dx' and ∫_0^x Cp/(Ti + x') dx' of the cubic Cp = c0 + c1 x + c2 x² + c3 x³.

    The second follows from dividing the cubic by (x + Ti): Cp/(x + Ti) = q0 + q1 x + q2 x²
    + r/(x + Ti) with r = Cp at T = 0 (synthetic division), so the integral is a cubic plus
    r ln(1 + x/Ti). At Ti = 0 the piece is integrable only if r = c0 = 0 (Cp(0) = 0, the
    third law); otherwise the result is NaN.
    """
    i_cp = x * (c0 + x * (c1 / 2 + x * (c2 / 3 + x * c3 / 4)))
    q2 = c3
    q1 = c2 - ti * q2
    q0 = c1 - ti * q1
    r = c0 - ti * q0
    with np.errstate(divide="ignore", invalid="ignore"):
        log_term = np.where(ti > 0, r * np.log1p(x / np.where(ti > 0, ti, 1.0)),
                            np.where((r == 0) | (x == 0), 0.0, np.nan))
    i_cp_t = x * (q0 + x * (q1 / 2 + x * q2 / 3)) + log_term
    return i_cp, i_cp_t


@dataclass(frozen=True)
class TableCurves:
    """Cp of many tables as piecewise cubic Hermite curves on one flat node array.

    ``t``, ``cp``, ``slope`` hold every record's nodes (records sorted by id, nodes by T);
    record ``k`` owns ``start[k]:stop[k]``. ``int_cp`` and ``int_cp_t`` are ∫Cp dT [J/mol]
    and ∫Cp/T dT [J/(mol*K)] from the record's first node to each node. Build with
    :meth:`from_points`, ``method="spline"`` (not-a-knot cubic spline) or ``"pchip"``.
    """

    record_ids: np.ndarray
    start: np.ndarray
    stop: np.ndarray
    t: np.ndarray
    cp: np.ndarray
    slope: np.ndarray
    int_cp: np.ndarray
    int_cp_t: np.ndarray
    #: position in ``points`` (as given to :meth:`from_points`) of each node
    source_pos: np.ndarray | None = None

    @classmethod
    def from_points(cls, points: pd.DataFrame, method: str = "spline") -> "TableCurves":
        """``points``: frame with ``record_id, t_k, cp_j_mol_k`` (rows without Cp ignored;
        a repeated T keeps its first row)."""
        t_all = points["t_k"].to_numpy(float)
        cp_all = points["cp_j_mol_k"].to_numpy(float)
        pos = np.flatnonzero(~np.isnan(cp_all) & ~np.isnan(t_all))
        # sort by (record, T), stably, on integer codes of the ids (hashing, not text sorting)
        ids, code = sorted_codes(points["record_id"].iloc[pos])
        order = np.lexsort((t_all[pos], code))
        pos, code = pos[order], code[order]
        first = np.ones(len(pos), bool)          # a repeated (record, T) keeps its first row
        first[1:] = (code[1:] != code[:-1]) | (t_all[pos[1:]] != t_all[pos[:-1]])
        pos, rank = pos[first], code[first]
        start, stop = _group_bounds(rank, len(ids))
        t = t_all[pos]
        cp = cp_all[pos]
        if method == "spline":
            slope = not_a_knot_slopes(t, cp, start, stop)
        elif method == "pchip":
            slope = pchip_slopes(t, cp, start, stop)
        else:
            raise ValueError(f"method {method!r}: expected 'spline' or 'pchip'")
        n = len(t)
        last = np.zeros(n, bool)
        last[stop[stop > start] - 1] = True
        h = np.zeros(n)
        h[:-1] = np.diff(t)
        h[last] = 0.0
        y1 = np.append(cp[1:], 0.0) if n else cp
        s1 = np.append(slope[1:], 0.0) if n else slope
        c = _hermite_coefficients(cp, np.where(last, cp, y1), slope, np.where(last, slope, s1), h)
        p_cp, p_cp_t = _piece_integrals(*c, t, h)
        p_cp, p_cp_t = np.where(last, 0.0, p_cp), np.where(last, 0.0, p_cp_t)
        # cumulative from each record's first node: shift piece integrals one node down
        shifted = pd.DataFrame({"g": rank, "a": np.concatenate([[0.0], p_cp[:-1]]) if n else p_cp,
                                "b": np.concatenate([[0.0], p_cp_t[:-1]]) if n else p_cp_t})
        shifted.loc[start[stop > start], ["a", "b"]] = 0.0
        cum = shifted.groupby("g")[["a", "b"]].cumsum()
        # a NaN piece (∫Cp/T from T = 0 with Cp(0) ≠ 0) poisons every later node of its record
        poisoned = shifted[["a", "b"]].isna().astype(int).groupby(shifted["g"]).cumsum() > 0
        cum = cum.mask(poisoned)
        return cls(ids, start, stop, t, cp, slope, cum["a"].to_numpy(float), cum["b"].to_numpy(float), pos)

    def rank_of(self, record_ids) -> np.ndarray:
        """Index of each record id in ``record_ids`` (−1 for an id without table points)."""
        ids = np.asarray(record_ids, dtype=str)
        if len(self.record_ids) == 0:
            return np.full(ids.shape, -1)
        pos = np.clip(np.searchsorted(self.record_ids, ids), 0, len(self.record_ids) - 1)
        return np.where(self.record_ids[pos] == ids, pos, -1)

    def locate(self, rank: np.ndarray, t_k: np.ndarray):
        """For (record rank, T): the node at or below T, the piece holding T, and in-range mask."""
        rank = np.asarray(rank)
        t = np.asarray(t_k, float)
        ok = rank >= 0
        r = np.where(ok, rank, 0)
        lo = self.start[r]
        hi = self.stop[r] - 1
        t_lo, t_hi = self.t[lo], self.t[hi]
        inside = ok & (t >= t_lo - _EDGE_K) & (t <= t_hi + _EDGE_K)
        tc = np.clip(t, t_lo, t_hi)
        # nodes of one record are sorted; searching the flat array with a composite key
        key = self._key
        q = r * self._span + tc
        node = np.clip(np.searchsorted(key, q, side="right") - 1, lo, hi)
        piece = np.clip(node, lo, np.maximum(hi - 1, lo))
        return node, piece, tc, inside

    @cached_property
    def _span(self) -> float:
        return float(max(1.0, np.nanmax(np.abs(self.t)) * 4 + 1)) if len(self.t) else 1.0

    @cached_property
    def _key(self) -> np.ndarray:
        rank = np.repeat(np.arange(len(self.record_ids)), self.stop - self.start)
        return rank * self._span + self.t

    def _piece(self, piece, tc):
        last = piece + 1 >= self.stop[np.searchsorted(self.stop, piece, side="right")]
        nxt = np.where(last, piece, piece + 1)
        h = np.where(last, 0.0, self.t[nxt] - self.t[piece])
        c = _hermite_coefficients(self.cp[piece], self.cp[nxt], self.slope[piece], self.slope[nxt], h)
        return c, tc - self.t[piece]

    def cp_at(self, rank, t_k) -> np.ndarray:
        """Cp [J/(mol*K)] at (record rank, T); NaN outside the record's range."""
        _, piece, tc, inside = self.locate(rank, t_k)
        (c0, c1, c2, c3), x = self._piece(piece, tc)
        return np.where(inside, c0 + x * (c1 + x * (c2 + x * c3)), np.nan)

    def integrals_at(self, rank, t_k):
        """∫Cp dT [J/mol] and ∫Cp/T dT [J/(mol*K)] from the record's first node to T
        (NaN outside the range), with the node at or below T."""
        node, piece, tc, inside = self.locate(rank, t_k)
        c, x = self._piece(piece, tc)
        i_cp, i_cp_t = _piece_integrals(*c, self.t[piece], x)
        nan = np.where(inside, 1.0, np.nan)
        return (self.int_cp[piece] + i_cp) * nan, (self.int_cp_t[piece] + i_cp_t) * nan, node


class _Anchored:
    """Table curves plus the tabulated H − H298 and S they are anchored to (see module doc)."""

    def __init__(self, table_points: pd.DataFrame):
        self.points = table_points
        self.curves = TableCurves.from_points(table_points)
        cv = self.curves
        pts = table_points.iloc[cv.source_pos]       # the nodes' rows, in node order
        n = len(cv.t)
        rank = np.repeat(np.arange(len(cv.record_ids)), cv.stop - cv.start)
        hmh = pts["h_minus_href_j_mol"].to_numpy(float)
        s = pts["s_j_mol_k"].to_numpy(float)
        dfh = pts["dfh_j_mol"].to_numpy(float)
        at_ref = np.abs(cv.t - T_REF) <= T_REF_MATCH_K
        # integration constants: value − ∫ from the first node; carried to rows without a value
        frame = pd.DataFrame({"g": rank, "h": hmh - cv.int_cp, "s": s - cv.int_cp_t})
        filled = frame.groupby("g")[["h", "s"]].ffill()
        filled["g"] = rank
        filled = filled.groupby("g")[["h", "s"]].bfill()
        off_h = filled["h"].to_numpy(float)
        off_s = filled["s"].to_numpy(float)
        # a table without any H − H298: zero at 298.15 K when its range holds it
        no_h = np.isnan(off_h)
        if no_h.any() and len(cv.record_ids):
            rec_ranks = np.unique(rank[no_h])
            i298, _, _ = cv.integrals_at(rec_ranks, np.full(len(rec_ranks), T_REF))
            by_rank = np.full(len(cv.record_ids), np.nan)
            by_rank[rec_ranks] = -i298
            off_h = np.where(no_h, by_rank[rank], off_h)
        self.off_h, self.off_s = off_h, off_s
        h298 = np.full(len(cv.record_ids), np.nan)
        has = at_ref & np.isfinite(dfh)
        h298[rank[has]] = dfh[has]
        self.h298 = h298
        self.n = n

    def evaluate(self, rank, t_k):
        cv = self.curves
        cp = cv.cp_at(rank, t_k)
        i_cp, i_cp_t, node = cv.integrals_at(rank, t_k)
        hmh = self.off_h[node] + i_cp
        s = self.off_s[node] + i_cp_t
        h = hmh + self.h298[np.where(np.asarray(rank) >= 0, rank, 0)]
        return cp, h, s, hmh


class RecordFunctions:
    """Evaluate any record at any temperature (see module docstring).

    Parameters
    ----------
    records : frame with ``record_id, kind``; segments : canonical segments;
    table_points : tabulated rows (SI).
    """

    def __init__(self, records: pd.DataFrame, segments: pd.DataFrame, table_points: pd.DataFrame):
        self.kind = pd.Series(records["kind"].to_numpy(), index=records["record_id"].to_numpy())
        self.kind = self.kind[~self.kind.index.duplicated()]
        self.segments = segments
        self.table_points = table_points

    @cached_property
    def seg_index(self) -> SegmentIndex:
        return SegmentIndex.from_frame(self.segments)

    @cached_property
    def tables(self) -> _Anchored:
        tp = self.table_points
        tables = self.kind.index[self.kind.to_numpy() == "table"]
        return _Anchored(tp[member(tp["record_id"], tables)])

    def evaluate(self, record_ids, t_k) -> Values:
        """Values for (record, T) pairs; ``record_ids`` and ``t_k`` broadcast to one shape.

        Parameters
        ----------
        record_ids : record ids (str); t_k : temperature [K].

        Returns
        -------
        Values
            Cp [J/(mol*K)], H [J/mol], S [J/(mol*K)], G = H − TS [J/mol], H − H298 [J/mol];
            NaN for an unknown record, a table outside its range, and H, G of a table
            without ΔfH at 298.15 K.
        """
        rid, t = np.broadcast_arrays(np.asarray(record_ids, dtype=object), np.asarray(t_k, float))
        shape = t.shape
        # work on the distinct ids (hash factorisation), then broadcast back by code
        codes, uniq = pd.factorize(rid.ravel())
        return self._evaluate_codes(np.asarray(uniq, dtype=object).astype(str), codes, t.ravel(), shape)

    def evaluate_codes(self, record_ids, codes, t_k) -> Values:
        """:meth:`evaluate` of ``record_ids[codes]`` at ``t_k`` (same shape as ``codes``),
        without building that array of ids: for many (record, T) pairs over a few records
        (a grid), the ids are looked up once each. The values are those of :meth:`evaluate`.

        Parameters
        ----------
        record_ids : (m,) record ids (str; repeats allowed); codes : int array, each in
        [0, m); t_k : temperature [K], the shape of ``codes``.
        """
        codes = np.asarray(codes, dtype=np.intp)
        t = np.broadcast_to(np.asarray(t_k, float), codes.shape)
        shape = t.shape
        codes, t = codes.ravel(), t.ravel()
        ids = np.asarray(record_ids, dtype=object)
        present = np.zeros(len(ids), dtype=bool)
        present[codes] = True
        if not present.all():  # only the ids in use
            used = np.flatnonzero(present)
            codes = (np.cumsum(present) - 1)[codes]
            ids = ids[used]
        return self._evaluate_codes(ids.astype(str), codes, t, shape)

    def _evaluate_codes(self, uniq: np.ndarray, codes: np.ndarray, t: np.ndarray, shape) -> Values:
        """Values at (``uniq[codes]``, ``t``) (flat), reshaped to ``shape``."""
        cp, h, s, hmh = (np.full(t.shape, np.nan) for _ in range(4))
        kind_u = self.kind.reindex(uniq).to_numpy()
        poly_u = kind_u == "polynomial"
        is_poly = poly_u[codes] if len(uniq) else np.zeros(len(codes), dtype=bool)
        if is_poly.any():
            si = self.seg_index
            poly_u = np.flatnonzero(poly_u)
            rank_u = np.zeros(len(uniq), dtype=int)
            rank_u[poly_u] = si.rank_of(uniq[poly_u])
            h298_u = np.full(len(uniq), np.nan)
            h298_u[poly_u] = evaluate(si.coef[si.segment_for(rank_u[poly_u], np.full(len(poly_u), T_REF))], T_REF).h
            sel = slice(None) if is_poly.all() else is_poly    # every pair (a grid of polynomials): no masks
            c_p, t_p = codes[sel], t[sel]
            p = evaluate(si.coef[si.segment_for(rank_u[c_p], t_p)], t_p)
            cp[sel], h[sel], s[sel] = p.cp, p.h, p.s
            hmh[sel] = p.h - h298_u[c_p]
        is_tab = (kind_u == "table")[codes] if len(uniq) else np.zeros(len(codes), dtype=bool)
        if is_tab.any() and len(self.tables.curves.record_ids):
            tb = self.tables
            rank = tb.curves.rank_of(uniq)[codes[is_tab]]
            cp[is_tab], h[is_tab], s[is_tab], hmh[is_tab] = tb.evaluate(rank, t[is_tab])
        g = h - t * s
        return Values(*(a.reshape(shape) for a in (cp, h, s, g, hmh)))


def member(values, pool) -> np.ndarray:
    """Elementwise ``value in pool`` for text keys (record ids, species), as a bool array.

    Arrow's hash kernel (``pyarrow.compute.is_in``): pandas' ``isin`` on string columns
    turns every pool value into a Python object first, which dominates the checks at 10⁵
    records. Anything that is not plain text (numbers, nulls in the pool) goes through
    pandas' ``isin``, so the result is always the same.
    """
    import pyarrow as pa
    import pyarrow.compute as pc

    if isinstance(pool, (set, frozenset)):
        pool = list(pool)
    if _arrow_text(values):     # Arrow-backed text: its buffers as they are, no Python objects
        if isinstance(pool, (pd.Series, pd.Index)):
            pool = pool.to_numpy(object)
        try:
            pa_pool = pa.array(np.asarray(pool, dtype=object), type=pa.large_string(), from_pandas=False)
        except (pa.ArrowInvalid, pa.ArrowTypeError):
            pa_pool = None
        if pa_pool is not None and not pa_pool.null_count:
            va = pa.array(values.array).cast(pa.large_string())
            return np.asarray(pc.is_in(va, value_set=pa_pool, skip_nulls=True).to_numpy(zero_copy_only=False),
                              dtype=bool)
    vals = values.to_numpy(object) if isinstance(values, (pd.Series, pd.Index)) else np.asarray(values, dtype=object)
    p = pool.to_numpy(object) if isinstance(pool, (pd.Series, pd.Index)) else np.asarray(pool, dtype=object)
    try:
        va = pa.array(vals, type=pa.string(), from_pandas=True)
        pa_pool = pa.array(p, type=pa.string(), from_pandas=False)
    except (pa.ArrowInvalid, pa.ArrowTypeError):
        return pd.Series(vals, dtype=object).isin(p).to_numpy(bool)
    if pa_pool.null_count:
        return pd.Series(vals, dtype=object).isin(p).to_numpy(bool)
    return pc.is_in(va, value_set=pa_pool, skip_nulls=True).to_numpy(zero_copy_only=False)


def map_keys(values, mapping: pd.Series) -> np.ndarray:
    """``mapping[v]`` for each text key ``v`` of ``values`` (NaN, or None for object values,
    where ``mapping`` has no such key), as an array.

    Each distinct key is looked up once: ``values`` is factorized first (Arrow-backed text
    by Arrow's dictionary encoding), so a long column of repeated keys (table rows → their
    record) costs one pass instead of a hash lookup of a Python string per row.
    """
    codes, uniq = pd.factorize(values)
    mapped = mapping.reindex(np.asarray(uniq, dtype=object)).to_numpy()
    missing = None if mapped.dtype == object else np.nan
    return np.append(mapped, np.array([missing], dtype=mapped.dtype))[codes]   # code −1 → missing


def _arrow_text(values) -> bool:
    """Whether ``values`` is a pandas Series or Index of Arrow-backed strings."""
    dtype = getattr(values, "dtype", None)
    return (isinstance(values, (pd.Series, pd.Index)) and isinstance(dtype, pd.StringDtype)
            and dtype.storage == "pyarrow")


def preferred_record_ids(records: pd.DataFrame, sources: pd.DataFrame | None = None,
                         findings: pd.DataFrame | None = None) -> pd.Series:
    """Preferred record id per species (index: species), by :func:`pipeline.preferred.choose_preferred`.

    Without a ``sources`` frame (``source_id, priority, kind``) every source counts as
    priority 0, provenance "evaluated", so the remaining rules (polynomial before table,
    wider range, record id) decide.
    """
    from .preferred import choose_preferred

    if sources is None or not len(sources):
        sources = pd.DataFrame({"source_id": pd.unique(records["source_id"]), "priority": 0,
                                "kind": "evaluated"})
    if findings is not None and not {"waived", "subject_kind"} <= set(findings.columns):
        findings = None
    pref = choose_preferred(records, sources, findings)
    return pd.Series(pref["preferred_record_id"].to_numpy(), index=pref["species"].to_numpy())
