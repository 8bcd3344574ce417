"""Species functions of any record — polynomial or table — through one interface.

``RecordFunctions.evaluate(record_ids, t_k)`` returns Cp, H, S, G and H − H(298.15) for
(record, T) pairs, vectorised. Polynomial records go through the canonical evaluator
(:mod:`pipeline.thermo`). Table records are interpolated physically: a cubic spline of Cp
through the tabulated points, and H and S carried from the nearest tabulated row at or
below T by integrating that spline (H(T) = H(Ti) + ∫ Cp dT, S(T) = S(Ti) + ∫ Cp/T dT,
8-point Gauss–Legendre on the spline, exact to rounding for a cubic). Outside a table's
range the values are NaN (tables are never extrapolated).

Absolute H of a table: H(298.15) = ΔfH°(298.15) when the table gives dfh at 298.15 K
(the same convention as the polynomials); otherwise H and G are NaN and only
H − H(298.15) is defined.
"""
from __future__ import annotations

from dataclasses import dataclass
from functools import cached_property

import numpy as np
import pandas as pd
from scipy.interpolate import CubicSpline

from .constants import T_REF
from .thermo import SegmentIndex, evaluate

_GL_X, _GL_W = np.polynomial.legendre.leggauss(8)


@dataclass(frozen=True)
class Values:
    """Cp [J/(mol*K)], H [J/mol], S [J/(mol*K)], G [J/mol], H − H(298.15) [J/mol]."""

    cp: np.ndarray
    h: np.ndarray
    s: np.ndarray
    g: np.ndarray
    h_minus_h298: np.ndarray


class _Table:
    """One table record: spline of Cp and anchor rows for H and S."""

    def __init__(self, pts: pd.DataFrame):
        pts = pts.sort_values("t_k").drop_duplicates("t_k")
        t = pts["t_k"].to_numpy(float)
        cp = pts["cp_j_mol_k"].to_numpy(float)
        self.t_lo, self.t_hi = float(t[0]), float(t[-1])
        self.spline = CubicSpline(t, cp, bc_type="not-a-knot") if len(t) >= 3 else None
        self._t, self._cp = t, cp
        # H − H298 anchors: tabulated where given, else integrated from 298.15 K (or the first row)
        hmh = pts["h_minus_href_j_mol"].to_numpy(float)
        s = pts["s_j_mol_k"].to_numpy(float)
        dfh = pts["dfh_j_mol"].to_numpy(float)
        at_ref = np.isclose(t, T_REF, atol=1e-6)
        self.h298 = float(dfh[at_ref][0]) if at_ref.any() and np.isfinite(dfh[at_ref][0]) else np.nan
        base = float(t[at_ref][0]) if at_ref.any() else t[0]
        self.h_anchor = np.where(np.isfinite(hmh), hmh, [self._int_cp(base, ti) for ti in t])
        # without any tabulated H−H298, the anchors above are relative to `base`
        if not np.isfinite(hmh).any() and not at_ref.any() and self.t_lo < T_REF < self.t_hi:
            shift = self._int_cp(base, T_REF)
            self.h_anchor = self.h_anchor - shift
        self.s_anchor = s
        if not np.isfinite(s).all() and np.isfinite(s).any():
            k = int(np.flatnonzero(np.isfinite(s))[0])
            self.s_anchor = np.array([s[i] if np.isfinite(s[i]) else s[k] + self._int_cp_t(t[k], t[i])
                                      for i in range(len(t))])

    def cp(self, x):
        if self.spline is None:
            return np.interp(x, self._t, self._cp)
        return self.spline(x)

    def _gl(self, a, b, f):
        a = np.asarray(a, float)
        b = np.asarray(b, float)
        mid, half = (a + b) / 2, (b - a) / 2
        x = mid[..., None] + half[..., None] * _GL_X
        return half * np.sum(_GL_W * f(x), axis=-1)

    def _int_cp(self, a, b):
        return self._gl(a, b, self.cp)

    def _int_cp_t(self, a, b):
        return self._gl(a, b, lambda x: self.cp(x) / x)

    def evaluate(self, t):
        t = np.asarray(t, float)
        out_of_range = (t < self.t_lo - 1e-9) | (t > self.t_hi + 1e-9)
        tc = np.clip(t, self.t_lo, self.t_hi)
        i = np.clip(np.searchsorted(self._t, tc, side="right") - 1, 0, len(self._t) - 1)
        ti = self._t[i]
        cp = self.cp(tc)
        hmh = self.h_anchor[i] + self._int_cp(ti, tc)
        with np.errstate(invalid="ignore", divide="ignore"):
            s = self.s_anchor[i] + np.where(ti > 0, self._int_cp_t(np.maximum(ti, 1e-12), tc),
                                            self._int_cp_t(np.full_like(tc, 1e-9), np.maximum(tc, 1e-9)))
        h = hmh + self.h298
        nan = np.where(out_of_range, np.nan, 1.0)
        return cp * nan, h * nan, s * nan, hmh * nan


class RecordFunctions:
    """Evaluate any record at any temperature (see module docstring).

    Parameters
    ----------
    records : frame with ``record_id, kind``; segments : canonical segments;
    table_points : tabulated rows (SI).
    """

    def __init__(self, records: pd.DataFrame, segments: pd.DataFrame, table_points: pd.DataFrame):
        self.kind = dict(zip(records["record_id"], records["kind"]))
        self.segments = segments
        self.table_points = table_points
        self._tables: dict[str, _Table] = {}

    @cached_property
    def seg_index(self) -> SegmentIndex:
        return SegmentIndex.from_frame(self.segments)

    def table(self, record_id: str) -> _Table:
        if record_id not in self._tables:
            pts = self.table_points[self.table_points["record_id"] == record_id]
            pts = pts[pts["cp_j_mol_k"].notna()]
            self._tables[record_id] = _Table(pts)
        return self._tables[record_id]

    def evaluate(self, record_ids, t_k) -> Values:
        """Values for (record, T) pairs; ``record_ids`` and ``t_k`` broadcast to one shape."""
        rid, t = np.broadcast_arrays(np.asarray(record_ids, dtype=object), np.asarray(t_k, float))
        shape = t.shape
        rid, t = rid.ravel(), t.ravel()
        cp, h, s, hmh = (np.full(t.shape, np.nan) for _ in range(4))
        is_poly = np.array([self.kind.get(r) == "polynomial" for r in rid], dtype=bool)
        if is_poly.any():
            p = self.seg_index.evaluate_records(rid[is_poly].astype(str), t[is_poly])
            p298 = self.seg_index.evaluate_records(rid[is_poly].astype(str), np.full(is_poly.sum(), T_REF))
            cp[is_poly], h[is_poly], s[is_poly] = p.cp, p.h, p.s
            hmh[is_poly] = p.h - p298.h
        for r in np.unique(rid[~is_poly]):
            if self.kind.get(r) != "table":
                continue
            m = rid == r
            cp[m], h[m], s[m], hmh[m] = self.table(r).evaluate(t[m])
        g = h - t * s
        return Values(*(a.reshape(shape) for a in (cp, h, s, g, hmh)))
