"""What a check sees: the staging frames after ingest and validation, plus shared helpers.

Derived quantities that several checks need (species attributes joined to records, the
segment index, exact Cp extrema per segment) are computed once and cached.
"""
from __future__ import annotations

from dataclasses import dataclass, field
from functools import cached_property

import numpy as np
import pandas as pd

from ..config import Config
from ..constants import P_STD_BAR, R
from ..thermo import COEF_COLUMNS, SegmentIndex, evaluate, heat_capacity, sorted_codes


@dataclass
class CheckContext:
    """Inputs of the check stage. Frames follow the column contracts of ``ingest.base``;
    ``species`` has one row per species key (see ``ingest.resolve``)."""

    species: pd.DataFrame
    records: pd.DataFrame
    segments: pd.DataFrame
    table_points: pd.DataFrame
    reactions: pd.DataFrame
    config: Config = field(default_factory=Config)
    p_db_bar: float = P_STD_BAR
    #: Side tables a check produces for the release (e.g. ``reconciled``); emit writes them.
    tables_out: dict = field(default_factory=dict)
    #: Findings of earlier checks (network checks may read the per-record ones).
    prior_findings: pd.DataFrame | None = None
    #: Manifest sources (``source_id, priority, kind``) for the preferred-record rule; None: all priority 0.
    sources: pd.DataFrame | None = None

    def tol(self, check_id: str, name: str) -> float:
        return self.config.tol(check_id, name)

    @cached_property
    def functions(self):
        """:class:`~pipeline.functions.RecordFunctions` over every record."""
        from ..functions import RecordFunctions

        return RecordFunctions(self.records, self.segments, self.table_points)

    def cached(self, name: str, build):
        """``build()`` computed once per context and kept under ``name``: derived frames that
        several checks share (callers must not modify what they get)."""
        store = self.__dict__.setdefault("_memo", {})
        if name not in store:
            store[name] = build()
        return store[name]

    @cached_property
    def preferred(self) -> pd.Series:
        """Preferred record id per species (index: species key), by
        :func:`pipeline.functions.preferred_record_ids` over every record and ``sources``."""
        from ..functions import preferred_record_ids

        return preferred_record_ids(self.records, self.sources)

    @cached_property
    def elements(self) -> pd.DataFrame:
        """Element counts of every species, long: ``species, element, n`` (atoms per formula
        unit, the counts ``elements_json`` holds; electrons not included, zero counts dropped)."""
        from ..formula import ELECTRON, parse_formulas

        sp = self.species
        # elements_json is written from the formula (ingest.resolve.species_table): the
        # formulas parsed at once give the same counts, in the same (symbol) order
        b = parse_formulas(sp["formula"].to_numpy(object))
        keep = np.array([s != ELECTRON for s in b.symbols], bool)[b.sym] & (b.count != 0)
        symbols = np.array(b.symbols, dtype=object)
        return pd.DataFrame({"species": pd.Series(sp["species"].to_numpy(object)[b.row[keep]], dtype=object),
                             "element": pd.Series(symbols[b.sym[keep]], dtype=object),
                             "n": b.count[keep].astype(float)})

    @cached_property
    def seg_index(self) -> SegmentIndex:
        return self.functions.seg_index      # one index for the checks and the functions

    @cached_property
    def record_species(self) -> pd.DataFrame:
        """Records joined with their species' attributes (state, n_atoms, geometry, …)."""
        cols = ["species", "state", "n_atoms", "geometry", "molar_mass_g_mol", "charge_species"]
        sp = self.species.rename(columns={"charge": "charge_species"})
        sp = sp[[c for c in cols if c in sp.columns]]
        rec = self.records.drop(columns=[c for c in sp.columns if c != "species" and c in self.records])
        return rec.merge(sp, on="species", how="left")

    @cached_property
    def segment_species(self) -> pd.DataFrame:
        """Segments with record and species attributes, sorted by record and T."""
        rs = self.record_species[["record_id", "species", "source_id", "state", "n_atoms", "geometry"]]
        seg = self.segments.merge(rs, on="record_id", how="left")
        return seg.sort_values(["record_id", "t_low_k"], kind="stable").reset_index(drop=True)


#: Segments per block in :func:`cp_extrema`.
_EXTREMA_BLOCK = 50_000


def cp_extrema(coef: np.ndarray, t_lo: np.ndarray, t_hi: np.ndarray, n_grid: int = 33):
    """Exact minimum and maximum of Cp over each segment's range, vectorised.

    Cp has its extrema at the range ends or where dCp/dT = 0. Multiplying dCp/dT by T³
    gives the polynomial −2a1 − a2 T + a4 T³ + 2a5 T⁴ + 3a6 T⁵ + 4a7 T⁶; its real roots
    inside the range are found for all segments at once from the eigenvalues of stacked
    companion matrices (segments grouped by polynomial degree). A coarse grid of ``n_grid``
    points is added as a guard against ill-conditioned roots; with the roots included the
    result does not depend on grid density, so a narrow excursion cannot be missed.

    Parameters
    ----------
    coef : (n, 9) canonical coefficients; t_lo, t_hi : (n,) range [K].

    Returns
    -------
    t_min [K], cp_min [J/(mol*K)], t_max [K], cp_max [J/(mol*K)] — arrays of shape (n,).
    """
    coef = np.asarray(coef, float)
    n = len(coef)
    t_lo = np.asarray(t_lo, float)
    t_hi = np.asarray(t_hi, float)
    if n == 0:
        e = np.empty(0)
        return e, e, e, e
    if n > _EXTREMA_BLOCK:      # blocks: the (n, ~40) candidate arrays stay small in memory
        parts = [cp_extrema(coef[i:i + _EXTREMA_BLOCK], t_lo[i:i + _EXTREMA_BLOCK],
                            t_hi[i:i + _EXTREMA_BLOCK], n_grid) for i in range(0, n, _EXTREMA_BLOCK)]
        return tuple(np.concatenate([p[k] for p in parts]) for k in range(4))
    a1, a2, a4, a5, a6, a7 = (coef[:, i] for i in (0, 1, 3, 4, 5, 6))
    # derivative polynomial, highest degree first: [4a7, 3a6, 2a5, a4, 0, -a2, -2a1]
    poly = np.stack([4 * a7, 3 * a6, 2 * a5, a4, np.zeros(n), -a2, -2 * a1], axis=1)
    cand = [t_lo[:, None], t_hi[:, None],
            t_lo[:, None] + (t_hi - t_lo)[:, None] * np.linspace(0, 1, n_grid)[None, :]]
    roots_all = np.full((n, 6), np.nan)
    nz = poly != 0
    lead = np.where(nz.any(axis=1), nz.argmax(axis=1), 7)  # index of first nonzero coefficient
    # trailing zero coefficients are roots at T = 0 (NASA-7 segments: a1 = a2 = 0 gives a
    # cubic times T³): divided out, so a smaller companion matrix is solved; T = 0 is kept
    # as a root (never inside a range of positive temperatures)
    trail = np.where(nz.any(axis=1), nz[:, ::-1].argmax(axis=1), 0)
    for code in np.unique(lead * 8 + trail):
        k, z = int(code) // 8, int(code) % 8
        deg = 6 - k - z
        rows = np.flatnonzero((lead == k) & (trail == z))
        if z and deg >= 0:
            roots_all[rows, max(deg, 0)] = 0.0
        if deg < 1:
            continue
        p = poly[rows, k:7 - z]
        p = p / p[:, :1]
        if deg == 3:        # the NASA-7 case: closed form (many times faster than eigenvalues)
            roots_all[rows, :3] = _cubic_real_roots(p)
            continue
        comp = np.zeros((len(rows), deg, deg))
        comp[:, 0, :] = -p[:, 1:]
        if deg > 1:
            comp[:, np.arange(1, deg), np.arange(deg - 1)] = 1.0
        with np.errstate(all="ignore"):
            r = np.linalg.eigvals(comp)
        real = np.where(np.abs(r.imag) <= 1e-9 * np.maximum(1.0, np.abs(r.real)), r.real, np.nan)
        roots_all[rows, :deg] = real
    inside = (roots_all > t_lo[:, None]) & (roots_all < t_hi[:, None])
    roots_in = np.where(inside, roots_all, t_lo[:, None])
    cand.append(roots_in)
    t = np.concatenate(cand, axis=1)
    cp = heat_capacity(coef[:, None, :], t)
    imin = np.nanargmin(cp, axis=1)
    imax = np.nanargmax(cp, axis=1)
    rows = np.arange(n)
    return t[rows, imin], cp[rows, imin], t[rows, imax], cp[rows, imax]


def _cubic_real_roots(p: np.ndarray) -> np.ndarray:
    """Real roots of monic cubics x³ + a x² + b x + c (rows of ``p`` = [1, a, b, c]), NaN
    where a root is complex; (m, 3).

    Trigonometric form for three real roots, Cardano's for one (Press et al., *Numerical
    Recipes*, 3rd ed., 2007, §5.6), each root then polished by two Newton steps on the cubic
    itself, which restores full precision where the closed form loses digits. A double root
    (a point of inflection of Cp, never an extremum) may come out once only.
    """
    a, b, c = p[:, 1], p[:, 2], p[:, 3]
    q = (a * a - 3.0 * b) / 9.0
    r = (2.0 * a ** 3 - 9.0 * a * b + 27.0 * c) / 54.0
    out = np.full((len(p), 3), np.nan)
    with np.errstate(all="ignore"):
        three = r * r < q ** 3
        sq = np.sqrt(np.where(three, q, 0.0))
        theta = np.arccos(np.clip(np.where(three, r / np.where(three, sq ** 3, 1.0), 0.0), -1.0, 1.0))
        for j, shift in enumerate((0.0, 2 * np.pi, -2 * np.pi)):
            out[:, j] = np.where(three, -2.0 * sq * np.cos((theta + shift) / 3.0) - a / 3.0, np.nan)
        big = -np.sign(r) * np.cbrt(np.abs(r) + np.sqrt(np.maximum(r * r - q ** 3, 0.0)))
        one = np.where(big != 0, big + q / np.where(big != 0, big, 1.0), 0.0) - a / 3.0
        out[:, 0] = np.where(three, out[:, 0], one)
        for _ in range(2):
            f = ((out + a[:, None]) * out + b[:, None]) * out + c[:, None]
            df = (3.0 * out + 2.0 * a[:, None]) * out + b[:, None]
            step = np.where(np.isfinite(df) & (df != 0), f / np.where(df != 0, df, 1.0), 0.0)
            out = out - np.where(np.isfinite(step), step, 0.0)
    return out


def r_units(x: np.ndarray) -> np.ndarray:
    """Express J/(mol*K) in units of R."""
    return np.asarray(x) / R
