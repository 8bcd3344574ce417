"""Canonical 9-term segments and the one vectorised evaluator.

Every polynomial form (NASA 7-term, NASA 9-term, Shomate) is converted on ingest to the
canonical segment of McBride, Zehe & Gordon, *NASA Glenn Coefficients for Calculating
Thermodynamic Properties of Individual Species*, NASA/TP-2002-211556 (2002), eqs. 2-4::

    Cp/R   = a1 T^-2 + a2 T^-1 + a3 + a4 T + a5 T^2 + a6 T^3 + a7 T^4
    H/(RT) = -a1 T^-2 + a2 ln(T)/T + a3 + a4 T/2 + a5 T^2/3 + a6 T^3/4 + a7 T^4/5 + b1/T
    S/R    = -a1 T^-2/2 - a2/T + a3 ln T + a4 T + a5 T^2/2 + a6 T^3/3 + a7 T^4/4 + b2

with H(298.15 K) = ΔfH°(298.15 K) ("absolute" enthalpy convention) and G = H − TS.
Coefficient arrays have shape ``(..., 9)`` in the order ``a1..a7, b1, b2`` (``COEF_COLUMNS``).
Everything downstream evaluates through :func:`evaluate` or :func:`evaluate_records`.
"""
from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from .constants import R

COEF_COLUMNS: tuple[str, ...] = ("a1", "a2", "a3", "a4", "a5", "a6", "a7", "b1", "b2")


@dataclass(frozen=True)
class Properties:
    """Standard molar properties on a grid; every array has the same shape.

    cp : heat capacity [J/(mol*K)]; h : enthalpy [J/mol]; s : entropy [J/(mol*K)];
    g : Gibbs energy G = H − TS [J/mol]; dcp_dt : dCp/dT [J/(mol*K^2)].
    """

    cp: np.ndarray
    h: np.ndarray
    s: np.ndarray
    g: np.ndarray
    dcp_dt: np.ndarray


def evaluate(coef: np.ndarray, t_k: np.ndarray) -> Properties:
    """Evaluate canonical segments at temperatures, broadcasting.

    Parameters
    ----------
    coef : array (..., 9)
        Canonical coefficients a1..a7, b1, b2 (Cp/R in K powers, b1 in K, b2 dimensionless).
    t_k : array
        Temperature [K], broadcastable against ``coef.shape[:-1]``. Use :func:`on_grid` to
        evaluate n segments on an m-point grid as an (n, m) array.

    Returns
    -------
    Properties
        Cp [J/(mol*K)], H [J/mol], S [J/(mol*K)], G [J/mol] and dCp/dT [J/(mol*K^2)].
    """
    c = np.asarray(coef, dtype=float)
    t = np.asarray(t_k, dtype=float)
    a1, a2, a3, a4, a5, a6, a7, b1, b2 = (c[..., i] for i in range(9))
    inv = 1.0 / t
    lnt = np.log(t)
    # Horner forms of the positive-power parts.
    poly_cp = a3 + t * (a4 + t * (a5 + t * (a6 + t * a7)))
    cp_r = a1 * inv * inv + a2 * inv + poly_cp
    h_r = (-a1 * inv + a2 * lnt
           + t * (a3 + t * (a4 / 2 + t * (a5 / 3 + t * (a6 / 4 + t * a7 / 5)))) + b1)
    s_r = (-a1 * inv * inv / 2 - a2 * inv + a3 * lnt
           + t * (a4 + t * (a5 / 2 + t * (a6 / 3 + t * a7 / 4))) + b2)
    dcp_r = -2 * a1 * inv ** 3 - a2 * inv * inv + a4 + t * (2 * a5 + t * (3 * a6 + t * 4 * a7))
    cp = R * cp_r
    h = R * h_r
    s = R * s_r
    return Properties(cp=cp, h=h, s=s, g=h - t * s, dcp_dt=R * dcp_r)


def heat_capacity(coef: np.ndarray, t_k: np.ndarray) -> np.ndarray:
    """Cp [J/(mol*K)] alone (cheaper than :func:`evaluate` when H, S, G are not needed)."""
    c = np.asarray(coef, dtype=float)
    t = np.asarray(t_k, dtype=float)
    shape = np.broadcast_shapes(c.shape[:-1], t.shape)
    # Horner in place (the same operations in the same order as the plain expression
    # c2 + t(c3 + t(c4 + t(c5 + t c6))) + (c0/T + c1)/T, without a temporary per step)
    acc = np.multiply(t, c[..., 6], out=np.empty(shape))
    for k in (5, 4, 3):
        acc += c[..., k]
        acc *= t
    acc += c[..., 2]
    inv = np.divide(1.0, t, out=np.empty(shape)) if t.shape == shape else 1.0 / t
    low = np.multiply(c[..., 0], inv, out=np.empty(shape))
    low += c[..., 1]
    low *= inv
    low += acc
    low *= R
    return low


def on_grid(coef: np.ndarray, t_k: np.ndarray) -> Properties:
    """Evaluate n segments (n, 9) on one grid (m,) → (n, m) arrays."""
    return evaluate(np.asarray(coef, float)[:, None, :], np.asarray(t_k, float)[None, :])


# ---------------------------------------------------------------------------------------
# Conversions of the published forms into the canonical segment
# ---------------------------------------------------------------------------------------

def from_nasa7(c: np.ndarray) -> np.ndarray:
    """NASA 7-term coefficients (..., 7) → canonical (..., 9).

    Cp/R = c1 + c2 T + c3 T² + c4 T³ + c5 T⁴; H/RT adds c6/T; S/R adds c7
    (McBride, Gordon & Reno, NASA TM-4513, 1993, eqs. 1-3).
    """
    c = np.asarray(c, dtype=float)
    out = np.zeros(c.shape[:-1] + (9,))
    out[..., 2:7] = c[..., 0:5]
    out[..., 7] = c[..., 5]
    out[..., 8] = c[..., 6]
    return out


def to_nasa7(coef: np.ndarray) -> np.ndarray:
    """Canonical (..., 9) → NASA 7-term (..., 7); requires a1 = a2 = 0."""
    coef = np.asarray(coef, dtype=float)
    if np.any(coef[..., 0:2] != 0):
        raise ValueError("segment has T^-2 or T^-1 terms: it has no exact NASA 7-term form")
    return np.concatenate([coef[..., 2:7], coef[..., 7:9]], axis=-1)


def from_shomate(p: np.ndarray) -> np.ndarray:
    """Shomate parameters (..., 8) in the order A, B, C, D, E, F, G, H → canonical (..., 9).

    With t = T/1000 (Shomate, J. Phys. Chem. 58 (1954) 368; NIST Chemistry WebBook form):
    Cp = A + Bt + Ct² + Dt³ + E/t² [J/(mol*K)];
    H − H298 = At + Bt²/2 + Ct³/3 + Dt⁴/4 − E/t + F − H [kJ/mol];
    S = A ln t + Bt + Ct²/2 + Dt³/3 − E/(2t²) + G [J/(mol*K)].
    Since H (the parameter) is ΔfH°(298.15), absolute H(T) = 1000 (At + … − E/t + F) J/mol,
    so b1 = 1000 F / R, and b2 = (G − A ln 1000) / R. H itself is not part of the segment
    (it is the stated ΔfH, checked by ``formation.stated-vs-polynomial``).
    """
    p = np.asarray(p, dtype=float)
    A, B, C, D, E, F, G = (p[..., i] for i in range(7))
    out = np.zeros(p.shape[:-1] + (9,))
    out[..., 0] = E * 1e6 / R
    out[..., 2] = A / R
    out[..., 3] = B / (1e3 * R)
    out[..., 4] = C / (1e6 * R)
    out[..., 5] = D / (1e9 * R)
    out[..., 7] = 1e3 * F / R
    out[..., 8] = (G - A * np.log(1e3)) / R
    return out


# ---------------------------------------------------------------------------------------
# Many records, each a set of segments
# ---------------------------------------------------------------------------------------

def sorted_codes(values) -> tuple[np.ndarray, np.ndarray]:
    """``np.unique(values.astype(str), return_inverse=True)`` by hashing: the distinct values
    in sorted (code point) order as a numpy text array, and each value's index in it.
    Sorting fixed-width text arrays of 10⁶ ids costs seconds; hashing costs a fraction."""
    import pandas as pd

    codes, uniq = pd.factorize(pd.Series(values).astype(str), sort=True)
    return np.asarray(uniq, dtype=str), codes.astype(np.intp)


@dataclass(frozen=True)
class SegmentIndex:
    """Segments of many records, sorted for vectorised lookup.

    Built from a segments frame with columns ``record_id, t_low_k, t_high_k, a1..b2``.
    ``evaluate_records`` picks, for each (record, T) pair, the segment whose range holds T
    (the lower segment at a joint; the nearest end segment outside the record's range).
    """

    record_ids: np.ndarray      # (r,) unique record ids, sorted
    seg_record: np.ndarray      # (n,) integer rank of each segment's record
    t_low: np.ndarray           # (n,) [K]
    t_high: np.ndarray          # (n,) [K]
    coef: np.ndarray            # (n, 9)
    first: np.ndarray           # (r,) index of the record's first segment
    last: np.ndarray            # (r,) index of its last segment

    @classmethod
    def from_frame(cls, segments) -> "SegmentIndex":
        seg = segments.sort_values(["record_id", "t_low_k"], kind="stable")
        ids, rank = sorted_codes(seg["record_id"])
        first = np.searchsorted(rank, np.arange(len(ids)), side="left")
        last = np.searchsorted(rank, np.arange(len(ids)), side="right") - 1
        return cls(record_ids=ids, seg_record=rank,
                   t_low=seg["t_low_k"].to_numpy(float), t_high=seg["t_high_k"].to_numpy(float),
                   coef=seg[list(COEF_COLUMNS)].to_numpy(float), first=first, last=last)

    def rank_of(self, record_ids) -> np.ndarray:
        """Integer ranks of record ids; raises KeyError for an unknown id."""
        ids = np.asarray(record_ids, dtype=str)
        pos = np.searchsorted(self.record_ids, ids)
        pos = np.clip(pos, 0, max(len(self.record_ids) - 1, 0))
        if len(ids) and (len(self.record_ids) == 0 or np.any(self.record_ids[pos] != ids)):
            missing = ids[(len(self.record_ids) == 0) | (self.record_ids[pos] != ids)]
            raise KeyError(f"records without segments: {sorted(set(missing))[:5]}")
        return pos

    def segment_for(self, rank: np.ndarray, t_k: np.ndarray) -> np.ndarray:
        """Index of the segment of record ``rank`` that holds ``t_k`` (broadcast)."""
        rank, t = np.broadcast_arrays(np.asarray(rank), np.asarray(t_k, float))
        # Composite key: record rank dominates, then t_high. Temperatures are < 1e6 K.
        span = 1.0e6
        keys = self.seg_record * span + np.minimum(self.t_high, span - 1)
        q = rank * span + np.clip(t, 0, span - 1)
        idx = np.searchsorted(keys, q.ravel(), side="left").reshape(q.shape)
        return np.clip(idx, self.first[rank], self.last[rank])

    def evaluate_records(self, record_ids, t_k) -> Properties:
        """Properties of records at temperatures; ``record_ids`` and ``t_k`` broadcast."""
        rank = self.rank_of(np.atleast_1d(record_ids))
        rank = rank.reshape(np.shape(record_ids)) if np.ndim(record_ids) else rank[0]
        idx = self.segment_for(rank, t_k)
        return evaluate(self.coef[idx], t_k)
