"""Heat-capacity checks: positivity and ideal-gas bounds."""
from __future__ import annotations

import numpy as np
import pandas as pd

from ..constants import R
from ..findings import empty_findings, make_findings
from ..thermo import COEF_COLUMNS
from .context import CheckContext, cp_extrema
from .registry import check


@check("cp.nonpositive")
def cp_nonpositive(ctx: CheckContext) -> pd.DataFrame:
    """Cp must be positive over a record's whole stated range.

    Relation: Cp = (∂H/∂T)_p > 0 for any stable phase (thermal stability, Callen,
    *Thermodynamics and an Introduction to Thermostatistics*, 2nd ed., 1985, §8.2).
    Polynomials: the exact minimum of Cp on each segment (ends and the real roots of
    dCp/dT, see ``cp_extrema``), so no excursion between grid points is missed.
    Tables: every tabulated Cp except the T = 0 row.
    Tolerance: none — error for any Cp ≤ 0 J/(mol·K).
    """
    parts = []
    seg = ctx.segment_species
    if len(seg):
        ext = segment_cp_extrema(ctx)        # shared with the other Cp checks (computed once)
        cp_min = ext["cp_min"].to_numpy(float)
        low = cp_min <= 0                    # the failing segments, then the worst per record
        seg = seg[low].assign(t_min=ext["t_min_k"].to_numpy(float)[low], cp_min=cp_min[low])
        bad = seg.loc[seg.groupby("record_id")["cp_min"].idxmin()]
        if len(bad):
            parts.append(make_findings(
                check_id="cp.nonpositive", severity="error", subject=bad["species"],
                subject_kind="species", source_id=bad["source_id"], t_k=bad["t_min"],
                observed=bad["cp_min"], expected=0.0, tolerance=0.0, unit="J/(mol*K)",
                message=[f"Cp falls to {c:.3g} J/(mol·K) at {t:.0f} K inside the stated range"
                         for c, t in zip(bad["cp_min"], bad["t_min"])],
                hint="a sign or exponent typo in a coefficient, or a fit used far outside its data"))
    tp = ctx.table_points
    if len(tp):
        tp = tp[((tp["t_k"] > 0) & (tp["cp_j_mol_k"] <= 0)).to_numpy()]   # failing rows only
        tp = tp.merge(ctx.records[["record_id", "species"]], on="record_id", how="left")
        bad = tp.loc[tp.groupby("record_id")["cp_j_mol_k"].idxmin()]
        if len(bad):
            parts.append(make_findings(
                check_id="cp.nonpositive", severity="error", subject=bad["species"],
                subject_kind="species", source_id=bad["source_id"], t_k=bad["t_k"],
                observed=bad["cp_j_mol_k"], expected=0.0, tolerance=0.0, unit="J/(mol*K)",
                message=[f"tabulated Cp is {c:.3g} J/(mol·K) at {t:g} K"
                         for c, t in zip(bad["cp_j_mol_k"], bad["t_k"])],
                hint="a sign typo or a shifted column in the table"))
    return pd.concat(parts, ignore_index=True) if parts else empty_findings()


# ---------------------------------------------------------------------------------------
# Ideal-gas bounds
# ---------------------------------------------------------------------------------------

#: Translation alone: Cp/R of a structureless ideal gas (kinetic theory; 3/2 R + R).
CP_TRANSLATION_R = 2.5


def gas_ceiling_r(n_atoms, geometry) -> tuple[np.ndarray, np.ndarray]:
    """Harmonic equipartition limit of an ideal gas's Cp, in units of R, and an atom mask.

    Classical limit of translation (3/2 R) + rotation (R linear, 3/2 R nonlinear) + every
    vibration fully excited (R each) + R for Cp − Cv: (3N − 3/2) R linear, (3N − 2) R
    nonlinear, 5/2 R for an atom (McQuarrie, *Statistical Mechanics*, 2000, ch. 8).
    A species of one atom (or none: the electron) is always an atom and a diatomic always
    linear, whatever the metadata say; otherwise ``geometry`` ("linear"/"nonlinear") decides
    and unknown geometry takes the linear value, the larger one, so it never raises a false
    alarm. NaN where the atom count is unknown.
    """
    n = np.asarray(n_atoms, float)
    geo = np.asarray(pd.Series(geometry, dtype=object).fillna("").str.lower(), dtype=object)
    atom = n <= 1
    nonlinear = (geo == "nonlinear") & (n >= 3)
    limit = np.where(atom, CP_TRANSLATION_R, np.where(nonlinear, 3 * n - 2.0, 3 * n - 1.5))
    return np.where(np.isfinite(n), limit, np.nan), atom


def segment_cp_extrema(ctx: CheckContext) -> pd.DataFrame:
    """Exact Cp extrema of every segment (rows aligned with ``ctx.segment_species``):
    t_min_k, cp_min, t_max_k, cp_max [K, J/(mol*K)] from :func:`cp_extrema`. Cached on the
    context, since several checks need them and the root finding dominates their cost."""
    cached = ctx.__dict__.get("_segment_cp_extrema")
    if cached is not None:
        return cached
    seg = ctx.segment_species
    coef = seg[list(COEF_COLUMNS)].to_numpy(float)
    t_min, cp_min, t_max, cp_max = cp_extrema(coef, seg["t_low_k"].to_numpy(float),
                                              seg["t_high_k"].to_numpy(float))
    out = pd.DataFrame({"record_id": seg["record_id"].to_numpy(object), "t_min_k": t_min,
                        "cp_min": cp_min, "t_max_k": t_max, "cp_max": cp_max})
    ctx.__dict__["_segment_cp_extrema"] = out
    return out


def record_cp_extrema(ctx: CheckContext) -> pd.DataFrame:
    """Exact Cp minimum and maximum of every record over its stated range, with species data.

    Polynomials: per segment by :func:`cp_extrema` (range ends plus the real roots of
    dCp/dT), then the worst segment per record. Tables: the tabulated rows with T > 0.
    Columns: record_id, species, source_id, kind, state, n_atoms, geometry, t_min_k,
    cp_min, t_max_k, cp_max [K, J/(mol*K)]. Cached on the context (several checks use it).
    """
    cached = ctx.__dict__.get("_record_cp_extrema")
    if cached is not None:
        return cached
    parts = []
    if len(ctx.segment_species):
        s = segment_cp_extrema(ctx)
        lo = s.loc[s.groupby("record_id")["cp_min"].idxmin(), ["record_id", "t_min_k", "cp_min"]]
        hi = s.loc[s.groupby("record_id")["cp_max"].idxmax(), ["record_id", "t_max_k", "cp_max"]]
        parts.append(lo.merge(hi, on="record_id"))
    tp = ctx.table_points
    if len(tp):
        tp = tp[(tp["t_k"] > 0) & tp["cp_j_mol_k"].notna()][["record_id", "t_k", "cp_j_mol_k"]]
        if len(tp):
            g = tp.groupby("record_id")["cp_j_mol_k"]
            lo = tp.loc[g.idxmin()].rename(columns={"t_k": "t_min_k", "cp_j_mol_k": "cp_min"})
            hi = tp.loc[g.idxmax()].rename(columns={"t_k": "t_max_k", "cp_j_mol_k": "cp_max"})
            parts.append(lo.merge(hi, on="record_id"))
    cols = ["record_id", "species", "source_id", "kind", "state", "n_atoms", "geometry"]
    if parts:
        ext = pd.concat(parts, ignore_index=True)
        rs = ctx.record_species
        out = ext.merge(rs[[c for c in cols if c in rs.columns]], on="record_id", how="left")
    else:
        out = pd.DataFrame(columns=cols + ["t_min_k", "cp_min", "t_max_k", "cp_max"])
    ctx.__dict__["_record_cp_extrema"] = out
    return out


@check("cp.gas-floor", tolerances={"margin_r": 0.01})
def cp_gas_floor(ctx: CheckContext) -> pd.DataFrame:
    """An ideal gas's Cp cannot fall below that of translation alone, 5/2 R.

    Relation: Cp = Cv + R and Cv ≥ 3/2 R (three translational degrees of freedom are fully
    classical at any temperature a table reaches; internal modes only add), so
    Cp ≥ 5/2 R = 20.786 J/(mol·K) at every T (McQuarrie, *Statistical Mechanics*, 2000,
    ch. 5). Polynomials: the exact minimum over each segment (``cp_extrema``); tables:
    every row with T > 0. Tolerance: error below 5/2 R − ``margin_r`` R (default 0.01 R =
    0.083 J/(mol·K), room for the rounding of fitted coefficients; common practice).
    """
    cid = "cp.gas-floor"
    ext = record_cp_extrema(ctx)
    ext = ext[ext["state"] == "g"]
    floor = CP_TRANSLATION_R * R
    margin = ctx.tol(cid, "margin_r") * R
    bad = ext[ext["cp_min"] < floor - margin]
    if len(bad) == 0:
        return empty_findings()
    return make_findings(
        check_id=cid, severity="error", subject=bad["species"], subject_kind="species",
        source_id=bad["source_id"], t_k=bad["t_min_k"], observed=bad["cp_min"], expected=floor,
        tolerance=margin, unit="J/(mol*K)",
        message=[f"gas Cp falls to {c:.4g} J/(mol·K) at {t:g} K, below translation's "
                 f"5/2 R = {floor:.3f} J/(mol·K)" for c, t in zip(bad["cp_min"], bad["t_min_k"])],
        hint="condensed-phase data filed as a gas, a fit used outside the data it was made "
             "from, or a mistyped coefficient")


@check("cp.gas-ceiling", tolerances={
    "molecule_warning_factor": 1.25, "molecule_error_factor": 2.0,
    "atom_warning_factor": 2.0, "atom_error_factor": 4.0})
def cp_gas_ceiling(ctx: CheckContext) -> pd.DataFrame:
    """An ideal gas's Cp stays near or below its harmonic equipartition limit.

    Relation: with every vibration fully excited, Cp → (3N − 3/2) R for a linear molecule,
    (3N − 2) R for a nonlinear one and 5/2 R for an atom (``gas_ceiling_r``; McQuarrie,
    *Statistical Mechanics*, 2000, ch. 8). Anharmonicity, centrifugal stretching and
    electronic excitation push real gases somewhat above it at high T; an atom's electronic
    partition function legitimately lifts its Cp well above 5/2 R where low-lying levels
    are populated (N, O, Cl at thousands of kelvin; McQuarrie 2000, ch. 5).
    Tolerance: molecules warning above 1.25 × and error above 2 × the limit; atoms warning
    above 2 × and error above 4 × (common practice; each factor configurable). Polynomials:
    the exact maximum per segment (``cp_extrema``); tables: every row. Unknown geometry
    uses the linear (larger) limit.
    """
    cid = "cp.gas-ceiling"
    ext = record_cp_extrema(ctx)
    ext = ext[ext["state"] == "g"]
    if len(ext) == 0:
        return empty_findings()
    limit_r, atom = gas_ceiling_r(ext["n_atoms"].to_numpy(float), ext["geometry"].to_numpy(object))
    limit = limit_r * R
    warn_f = np.where(atom, ctx.tol(cid, "atom_warning_factor"), ctx.tol(cid, "molecule_warning_factor"))
    err_f = np.where(atom, ctx.tol(cid, "atom_error_factor"), ctx.tol(cid, "molecule_error_factor"))
    cp_max = ext["cp_max"].to_numpy(float)
    with np.errstate(invalid="ignore"):
        is_err = cp_max > err_f * limit
        is_warn = ~is_err & (cp_max > warn_f * limit)
    keep = np.flatnonzero(is_err | is_warn)
    if len(keep) == 0:
        return empty_findings()
    sel = ext.iloc[keep]
    sev = np.where(is_err[keep], "error", "warning")
    tol = np.where(is_err[keep], err_f[keep], warn_f[keep]) * limit[keep]
    geo = pd.Series(sel["geometry"].to_numpy(object)).fillna("unknown geometry, linear assumed")
    n_sel = sel["n_atoms"].to_numpy(float)
    kind = np.where(atom[keep], "atom", np.where(n_sel == 2, "linear", geo.to_numpy(object)))
    ratio = cp_max[keep] / limit[keep]
    msgs = [f"gas Cp reaches {c:.4g} J/(mol·K) at {t:g} K, {q:.2f} × the harmonic limit "
            f"{lim:.2f} J/(mol·K) ({k}, {n:g} atoms)"
            for c, t, q, lim, k, n in zip(cp_max[keep], sel["t_max_k"], ratio, limit[keep], kind,
                                          sel["n_atoms"])]
    hint = np.where(ratio > 50, "a unit or exponent slip (J vs kJ, or a wrong power of ten in a coefficient)",
                    "condensed-phase data filed as a gas, a wrong atom count or geometry, or a fit "
                    "used beyond the data it was made from")
    return make_findings(
        check_id=cid, severity=sev, subject=sel["species"], subject_kind="species",
        source_id=sel["source_id"], t_k=sel["t_max_k"], observed=cp_max[keep], expected=limit[keep],
        tolerance=tol, unit="J/(mol*K)", message=msgs, hint=hint)
