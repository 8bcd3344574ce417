"""Reader for ``shomate-csv``: Shomate coefficients, one row per temperature range.

Columns ``species, t_min_k, t_max_k, A, B, C, D, E, F, G, H``; several rows per species for
several ranges. With t = T/1000 (Shomate, J. Phys. Chem. 58 (1954) 368; the form of the
NIST Chemistry WebBook, Linstrom & Mallard eds., NIST SRD 69)::

    Cp          = A + B t + C t² + D t³ + E/t²                        [J/(mol*K)]
    H − H298.15 = A t + B t²/2 + C t³/3 + D t⁴/4 − E/t + F − H        [kJ/mol]
    S           = A ln t + B t + C t²/2 + D t³/3 − E/(2 t²) + G       [J/(mol*K)]

The units are fixed by the form (a header bracket may repeat them, never change them).
Each row becomes one canonical segment (:func:`pipeline.thermo.from_shomate`); one record
per species key holds its rows as segments in ascending T. H is ΔfH°(298.15) [kJ/mol] and
becomes ``records.stated_dfh_j_mol`` (× 1000): taken from the range that holds 298.15 K,
else the lowest range (a note records a species whose rows disagree).

Each row is one input record (``PRIMARY_FRAME`` counts segments): a row that cannot be
read is rejected alone; ranges of one species that overlap reject all its rows.
"""
from __future__ import annotations

from pathlib import Path

import numpy as np
import pandas as pd

from ..constants import T_REF
from ..errors import InputError, UnitError
from ..manifest import Source
from ..thermo import COEF_COLUMNS, from_shomate
from ..units import factor_to_si, is_kelvin
from .base import RECORD_COLUMNS, REJECTED_COLUMNS, SEGMENT_COLUMNS, ReadResult, frame
from .csvframe import load, species_keys

PARAMS = ("a", "b", "c", "d", "e", "f", "g", "h")
COLUMNS = ("species", "t_min_k", "t_max_k") + PARAMS
#: Fixed unit kind and SI factor of each parameter (F and H in kJ/mol, the rest J/(mol*K)).
PARAM_UNITS = {p: ("energy", 1000.0) if p in ("f", "h") else ("entropy", 1.0) for p in PARAMS}
#: Overlap between consecutive ranges tolerated as rounding of the range ends [K].
OVERLAP_TOL_K = 1.0
_HEADER = "species,t_min_k,t_max_k,A,B,C,D,E,F,G,H"


def _check_brackets(cf, rel: str) -> None:
    for name, unit in cf.units.items():
        if unit is None:
            continue
        if name in ("t_min_k", "t_max_k"):
            if not is_kelvin(unit):
                raise InputError(rel, 1, f"column {name!r} in {unit!r}", "kelvin",
                                 "convert the range ends to K")
            continue
        if name not in PARAM_UNITS:
            raise InputError(rel, 1, f"a unit on column {name!r}", "no unit on a key column",
                             "remove the bracket")
        kind, factor = PARAM_UNITS[name]
        fixed = "kJ/mol" if kind == "energy" else "J/(mol*K)"
        try:
            ok = np.isclose(factor_to_si(unit, kind), factor, rtol=1e-12)
        except UnitError:
            ok = False
        if not ok:
            raise InputError(rel, 1, f"unit {unit!r} on Shomate parameter {name.upper()}",
                             f"{fixed} (the Shomate form fixes the units)",
                             f"convert the parameter to {fixed} or remove the bracket")


def read(path: Path, source: Source, rel: str) -> ReadResult:
    """Read one shomate-csv file. ``rel`` is the path as reported (relative to raw/)."""
    cf = load(path, rel, fmt="shomate-csv", allowed=COLUMNS, required=COLUMNS,
              example_header=_HEADER)
    _check_brackets(cf, rel)
    keys = species_keys(cf)
    fix = "correct the value in the file"
    t_lo = cf.numbers("t_min_k", "range start [K]", required=True, fix=fix)
    t_hi = cf.numbers("t_max_k", "range end [K]", required=True, fix=fix)
    p = np.column_stack([cf.numbers(c, f"Shomate parameter {c.upper()}", required=True, fix=fix)
                         .to_numpy() for c in PARAMS]) if len(cf.cells) else np.zeros((0, 8))
    ok = cf.ok
    cells = cf.cells
    rows = pd.DataFrame({"key": keys["key"], "state": keys["state"], "label": keys["label"],
                         "elements_json": keys["elements_json"], "charge": keys["charge"],
                         "line": cells["_line"].astype(int) if len(cells) else pd.Series(dtype=int),
                         "t_lo": t_lo, "t_hi": t_hi}, index=cells.index)[ok]
    p = p[ok]
    rows = rows.assign(**{f"p{i}": p[:, i] for i in range(8)})
    # per species: order by T, reject all rows of a species whose ranges overlap
    rows = rows.sort_values(["key", "t_lo", "line"], kind="stable")
    prev_hi = rows.groupby("key", sort=False)["t_hi"].shift()
    prev_line = rows.groupby("key", sort=False)["line"].shift()
    overlap = (rows["t_lo"] < prev_hi - OVERLAP_TOL_K).to_numpy()
    if overlap.any():
        bad_keys = set(rows.loc[overlap, "key"])
        detail = {k: f"line {int(l)} starts at {lo:g} K before the range of line {int(pl)} ends at {ph:g} K"
                  for k, l, lo, pl, ph in zip(rows.loc[overlap, "key"], rows.loc[overlap, "line"],
                                              rows.loc[overlap, "t_lo"], prev_line[overlap], prev_hi[overlap])}
        m = rows["key"].isin(bad_keys)
        idx = rows.index[m]
        reasons = pd.Series([f"ranges of {k} overlap ({detail[k]}) — fix: make each range start "
                             "where the previous one ends" for k in rows.loc[m, "key"]], index=idx)
        cf.reject(cells.index.isin(idx), reasons.reindex(cells.index).fillna(""))
        rows = rows[~m]
    gaps = rows["t_lo"] > rows.groupby("key", sort=False)["t_hi"].shift() + OVERLAP_TOL_K
    notes = [f"{rel}:{l}: {k} has a gap below {lo:g} K between Shomate ranges"
             for k, l, lo in zip(rows.loc[gaps, "key"], rows.loc[gaps, "line"], rows.loc[gaps, "t_lo"])]
    seg_no = rows.groupby("key", sort=False).cumcount()
    coef = from_shomate(rows[[f"p{i}" for i in range(8)]].to_numpy(float))
    rid = source.id + "/" + rows["key"]
    segments = pd.DataFrame({"record_id": rid, "segment": seg_no, "t_low_k": rows["t_lo"],
                             "t_high_k": rows["t_hi"], **{c: coef[:, i] for i, c in enumerate(COEF_COLUMNS)},
                             "line": rows["line"]})
    # one record per species; stated ΔfH from the range holding 298.15 K, else the lowest
    holds = (rows["t_lo"] <= T_REF) & (T_REF <= rows["t_hi"])
    pick = rows.assign(_pref=~holds).sort_values(["key", "_pref", "t_lo"], kind="stable")
    first = pick.groupby("key", sort=False).head(1).set_index("key")
    h_spread = rows.groupby("key")["p7"].agg(lambda s: s.max() - s.min())
    notes += [f"{rel}: {k}: H parameter differs between ranges by {d:g} kJ/mol; the value of "
              "the range holding 298.15 K (else the lowest) is the stated ΔfH°(298.15)"
              for k, d in h_spread[h_spread > 1e-9].items()]
    g = rows.groupby("key", sort=True)
    rec = pd.DataFrame({"t_low_k": g["t_lo"].min(), "t_high_k": g["t_hi"].max(),
                        "line": g["line"].min()})
    rec = rec.join(first[["state", "label", "elements_json", "charge", "p7"]])
    records = pd.DataFrame({
        "record_id": source.id + "/" + rec.index, "source_id": source.id, "name": rec.index,
        "species_hint": rec.index, "state": rec["state"], "label": rec["label"],
        "elements_json": rec["elements_json"], "charge": rec["charge"], "kind": "polynomial",
        "form": "shomate", "file": rel, "line": rec["line"], "t_low_k": rec["t_low_k"],
        "t_high_k": rec["t_high_k"], "stated_dfh_j_mol": rec["p7"] * 1000.0,
        "stated_molar_mass_g_mol": np.nan, "date_code": None})
    return ReadResult(n_read=cf.n_rows,
                      records=records.reset_index(drop=True)[list(RECORD_COLUMNS)] if len(records)
                      else frame([], RECORD_COLUMNS),
                      segments=segments.reset_index(drop=True)[list(SEGMENT_COLUMNS)] if len(segments)
                      else frame([], SEGMENT_COLUMNS),
                      rejected=frame(cf.rejected_rows(source.id), REJECTED_COLUMNS), notes=notes)
