"""Reader for ``table-csv``: tabulated thermodynamic functions, one row per species and T.

Columns (inputs.md): ``species`` (key), ``t`` [K], ``cp``, ``s``, ``gef`` (energy unit per
mol per kelvin), ``h_minus_href``, ``dfh``, ``dfg`` (energy unit per mol), ``log_kf``
(dimensionless) and ``uncertainty_<column>`` (standard uncertainty, k = 1, in the unit of
its own header bracket, else the manifest's). Only ``species``, ``t`` and ``cp`` are
required; an empty cell in an optional column means "not given".

Units: a header bracket (``cp [cal/(mol*K)]``) wins over the manifest's ``energy_unit``;
an energy or entropy column with neither is an :class:`~pipeline.errors.InputError` (exit 2)
naming the file, line 1 and the fix — units are never guessed. ``cal`` is the
thermochemical calorie, 4.184 J (:mod:`pipeline.units`). ``t`` must be in kelvin.

A row at T = 0 may hold cp = 0, s = 0 and an empty gef; ``INFINITE`` (as JANAF-style tables
print gef and log Kf at 0 K) is read there as "not given", since both diverge as T → 0.
One record per species key; its rows go to ``table_points`` (SI). A row that cannot be
read, or repeats a (species, T) already read, is rejected alone with the reason.
"""
from __future__ import annotations

from pathlib import Path

import numpy as np
import pandas as pd

from ..manifest import Source
from ..units import column_factor
from .base import (RECORD_COLUMNS, REJECTED_COLUMNS, TABLE_POINT_COLUMNS, TABLE_QUANTITIES,
                   TABLE_SI, ReadResult, frame)
from .csvframe import load, species_keys

#: What each quantity column holds (for its unit).
KIND = {"cp": "entropy", "s": "entropy", "gef": "entropy", "h_minus_href": "energy",
        "dfh": "energy", "dfg": "energy", "log_kf": "dimensionless"}
WHAT = {"cp": "heat capacity", "s": "entropy", "gef": "Gibbs energy function",
        "h_minus_href": "H(T) - H(T_ref)", "dfh": "enthalpy of formation",
        "dfg": "Gibbs energy of formation", "log_kf": "log10 Kf"}
COLUMNS = (("species", "t") + TABLE_QUANTITIES + tuple(f"uncertainty_{q}" for q in TABLE_QUANTITIES))
REQUIRED = ("species", "t", "cp")
_HEADER = "species,t [K],cp [J/(mol*K)],s [J/(mol*K)],dfh [kJ/mol]"
_INFINITE = {"infinite", "inf", "+inf", "infinity"}


def read(path: Path, source: Source, rel: str) -> ReadResult:
    """Read one table-csv file. ``rel`` is the path as reported (relative to raw/)."""
    cf = load(path, rel, fmt="table-csv", allowed=COLUMNS, required=REQUIRED,
              example_header=_HEADER)
    factors = {"t": column_factor(rel, cf.headers[cf.names.index("t")], cf.units["t"],
                                  source.energy_unit, "temperature", source.id)}
    for name in cf.names:
        q = name[len("uncertainty_"):] if name.startswith("uncertainty_") else name
        if q in KIND:
            factors[name] = column_factor(rel, cf.headers[cf.names.index(name)], cf.units[name],
                                          source.energy_unit, KIND[q], source.id)
    keys = species_keys(cf)
    fix = "correct the cell, or leave an optional cell empty for 'not given'"
    t = cf.numbers("t", "temperature [K]", required=True, fix=fix)
    at_zero = (t == 0).to_numpy()
    for col in ("gef", "log_kf"):           # diverge at T = 0: 'INFINITE' there = not given
        if col in cf.cells:
            inf_text = cf.cells[col].str.lower().isin(_INFINITE).to_numpy()
            cf.cells.loc[inf_text & at_zero, col] = ""
    values = {}
    for name in cf.names:
        if name in factors and name != "t":
            q = name[len("uncertainty_"):] if name.startswith("uncertainty_") else name
            what = ("standard uncertainty of " if q != name else "") + WHAT[q]
            values[name] = cf.numbers(name, what, required=(name == "cp"), fix=fix) * factors[name]
    neg_t = (t < 0).to_numpy()
    cf.reject(neg_t, pd.Series("column " + cf.header_of("t") + " = " + cf.text("t")
                               + ": a negative absolute temperature — fix: write T in kelvin",
                               index=cf.cells.index))
    ok = cf.ok
    cells = cf.cells
    pts = pd.DataFrame({"key": keys["key"], "line": cells["_line"].astype(int) if len(cells)
                        else pd.Series(dtype=int), "t_k": t}, index=cells.index)
    # a repeated (species, T) is rejected (the first one read stays)
    dup = ok & pts.duplicated(["key", "t_k"], keep=False).to_numpy()
    if dup.any():
        sub = pts[dup]
        first_line = sub.groupby(["key", "t_k"])["line"].transform("min")
        later = sub["line"] > first_line
        idx = sub.index[later.to_numpy()]
        reason = pd.Series([f"{k} at T = {tk:g} K again (first on line {fl}) — fix: keep one row "
                            "per species and temperature"
                            for k, tk, fl in zip(sub.loc[idx, "key"], sub.loc[idx, "t_k"],
                                                 first_line[later])], index=idx)
        cf.reject(cells.index.isin(idx), reason.reindex(cells.index).fillna(""))
    ok = cf.ok
    pts = pts[ok]
    rid = source.id + "/" + pts["key"]
    tp = pd.DataFrame({"record_id": rid, "source_id": source.id, "line": pts["line"], "t_k": pts["t_k"]})
    for q in TABLE_QUANTITIES:
        tp[TABLE_SI[q]] = values[q][ok] if q in values else np.nan
        u = f"uncertainty_{q}"
        tp[f"uncertainty_{TABLE_SI[q]}"] = values[u][ok] if u in values else np.nan
    tp = tp.sort_values(["record_id", "t_k"], kind="stable")
    k = keys[ok]
    g = pts.groupby("key", sort=True)
    rec = pd.DataFrame({"t_low_k": g["t_k"].min(), "t_high_k": g["t_k"].max(), "line": g["line"].min()})
    rec = rec.join(k.drop_duplicates("key").set_index("key")[["state", "label", "elements_json", "charge"]])
    records = pd.DataFrame({
        "record_id": source.id + "/" + rec.index, "source_id": source.id, "name": rec.index,
        "species_hint": rec.index, "state": rec["state"], "label": rec["label"],
        "elements_json": rec["elements_json"], "charge": rec["charge"], "kind": "table",
        "form": "table", "file": rel, "line": rec["line"], "t_low_k": rec["t_low_k"],
        "t_high_k": rec["t_high_k"], "stated_dfh_j_mol": np.nan, "stated_molar_mass_g_mol": np.nan,
        "date_code": None})
    return ReadResult(n_read=cf.n_rows,
                      records=records.reset_index(drop=True)[list(RECORD_COLUMNS)] if len(records)
                      else frame([], RECORD_COLUMNS),
                      table_points=tp.reset_index(drop=True)[list(TABLE_POINT_COLUMNS)] if len(tp)
                      else frame([], TABLE_POINT_COLUMNS),
                      rejected=frame(cf.rejected_rows(source.id), REJECTED_COLUMNS))
