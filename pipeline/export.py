"""Write polynomial files (NASA 7- or 9-term) from a curated release.

Each species is written from its preferred record:

* ``nasa9`` (McBride, Zehe & Gordon, NASA/TP-2002-211556, 2002, Appendix A): every
  canonical segment is a NASA-9 interval, written exactly; a tabulated preferred record is
  written as its NASA-9 refit stored in the release (``preferred_segments``, ``fits``).
* ``nasa7`` (McBride, Gordon & Reno, NASA TM-4513, 1993; classic four-line layout): a
  record of two contiguous segments without T⁻² and T⁻¹ terms is written exactly (one
  segment: split in two identical halves); anything else — a Shomate or NASA-9 record with
  T⁻² or T⁻¹ terms, more than two segments, a table — is refitted to two NASA-7 ranges by
  :func:`pipeline.refit.refit` from the record's own functions, and the residuals are
  reported with the ``export.fit-quality`` rule.

Names are written so the project's readers give back the same species key: the formula,
with ``(label)`` for a labelled condensed species (nasa7 phase letter G/L/S; nasa9 phase
flag 0 for gases, otherwise ``(L)``, ``(cr)`` or the label as suffix). A species in state
``aq`` has no representation in either format and is skipped with a note.
"""
from __future__ import annotations

import json
from dataclasses import dataclass, field
from pathlib import Path

import duckdb
import numpy as np
import pandas as pd

from .constants import T_REF
from .errors import InputError
from .functions import RecordFunctions
from .refit import FIT_TOLERANCES, quality_findings, refit
from .thermo import COEF_COLUMNS, evaluate, to_nasa7

FORMATS = ("nasa7", "nasa9")
NASA7_PHASE = {"g": "G", "l": "L", "cr": "S"}
NASA9_EXPONENTS = (-2.0, -1.0, 0.0, 1.0, 2.0, 3.0, 4.0, 0.0)


@dataclass
class Export:
    """The written text, the refits made (or reused) with their residuals, the
    ``export.fit-quality`` findings, and notes about species that were skipped or altered."""

    text: str
    fits: pd.DataFrame
    findings: pd.DataFrame
    notes: list[str] = field(default_factory=list)


def load(db: Path) -> dict[str, pd.DataFrame]:
    """Tables an export needs, read through a read-only connection."""
    db = Path(db)
    if not db.is_file():
        raise InputError(str(db), None, "no such database", "a curated thermo.duckdb",
                         "run `thermoledger run` first or pass --db")
    con = duckdb.connect(str(db), read_only=True)
    try:
        names = {r[0] for r in con.execute("SELECT table_name FROM duckdb_tables()").fetchall()}
        need = ("species", "records", "segments", "table_points", "preferred_segments")
        missing = [n for n in need if n not in names]
        if missing:
            raise InputError(str(db), None, f"a database without table(s) {missing}",
                             "a release written by this version of thermoledger", "re-run `thermoledger run`")
        out = {n: con.execute(f'SELECT * FROM "{n}"').df() for n in need}
        out["fits"] = con.execute('SELECT * FROM "fits"').df() if "fits" in names else pd.DataFrame()
        return out
    finally:
        con.close()


def _num(n: float) -> str:
    return str(int(n)) if float(n).is_integer() else f"{n:g}"


def _names(sp: pd.DataFrame, form: str) -> tuple[list[str], list[str]]:
    """Record names per species (module doc) and notes for labels the format cannot carry."""
    names, notes = [], []
    for key, formula, state, label in zip(sp["species"], sp["formula"], sp["state"], sp["label"]):
        label = label if isinstance(label, str) and label else None
        if form == "nasa7":
            name = f"{formula}({label})" if label and state == "cr" else formula
        else:
            name = formula if state == "g" else (f"{formula}({label})" if label and state == "cr"
                                                 else f"{formula}(L)" if state == "l" else f"{formula}(cr)")
        if label and state != "cr":
            notes.append(f"{key}: the label {label!r} of a {state} species has no place in {form}; "
                         "re-reading needs an alias in species-csv")
        names.append(name)
    return names, notes


def _elements(sp_row) -> list[tuple[str, float]]:
    els = json.loads(sp_row.elements_json) if isinstance(sp_row.elements_json, str) else {}
    pairs = [(el, float(n)) for el, n in sorted(els.items()) if n]
    z = int(sp_row.charge or 0)
    if z:
        pairs.append(("E", float(-z)))
    return pairs


def _e15(x: float) -> str:
    return f"{x:15.8E}"


def _d16(x: float) -> str:
    return f"{x:16.9E}".replace("E", "D")


def nasa7_text(name: str, date: str, elements: list[tuple[str, float]], phase: str,
               t_low: float, t_mid: float, t_high: float, lower: np.ndarray, upper: np.ndarray,
               *, t_common_width: int = 8, pad_unused: bool = False) -> str:
    """Four 80-column lines (classic layout; inputs.md "nasa7"). ``lower``/``upper`` are
    NASA-7 coefficient vectors (7,).

    ``t_common_width`` 8 writes T_common as F8.3 in columns 66–73 (room for a fifth element
    in 74–78); 10 writes it as F10.3 over 66–75, as many real files do (four elements at
    most). ``pad_unused`` writes unused element pairs as a blank symbol and a zero count.
    """
    if len(name) > 18 or " " in name:
        raise ValueError(f"name {name!r} does not fit columns 1-18")
    if len(elements) > (5 if t_common_width == 8 else 4):
        raise ValueError(f"{name}: {len(elements)} elements; the layout holds "
                         f"{5 if t_common_width == 8 else 4}")
    pairs = "".join(f"{el.upper():<2}{_num(n):>3}" for el, n in elements[:4])
    if pad_unused:
        pairs += "    0" * (4 - min(len(elements), 4))
    fifth = "".join(f"{el.upper():<2}{_num(n):>3}" for el, n in elements[4:5])
    line1 = (f"{name:<18}{date[:6]:<6}{pairs:<20}{phase:1}{t_low:10.3f}{t_high:10.3f}"
             + (f"{t_mid:8.3f}{fifth:<5}" if t_common_width == 8 else f"{t_mid:10.3f}")).ljust(79) + "1"
    c = list(upper) + list(lower)
    line2 = "".join(_e15(x) for x in c[0:5]) + "    2"
    line3 = "".join(_e15(x) for x in c[5:10]) + "    3"
    line4 = "".join(_e15(x) for x in c[10:14]) + " " * 19 + "4"
    for ln in (line1, line2, line3, line4):
        if len(ln) != 80:
            raise ValueError(f"{name}: a line of {len(ln)} columns (a number too wide for its field)")
    return "\n".join([line1, line2, line3, line4])


def nasa9_text(name: str, comment: str, ref: str, elements: list[tuple[str, float]], phase: int,
               molar_mass: float, dfh: float, segs: np.ndarray, t_lo: np.ndarray, t_hi: np.ndarray,
               *, h298_minus_h0: float | None = None, pad_unused: bool = False,
               exponents=NASA9_EXPONENTS) -> str:
    """A NASA-9 record (inputs.md "nasa9"); ``segs`` (k, 9) canonical coefficients.
    ΔfH°(298.15) is left blank when unknown; H(298.15) − H(0) [J/mol] is written only when
    given (a release does not know it). ``exponents`` are written as given (the standard
    set unless a reader test needs another)."""
    if len(name) > 18 or " " in name:
        raise ValueError(f"name {name!r} does not fit columns 1-18")
    if len(elements) > 5:
        raise ValueError(f"{name}: {len(elements)} elements; the layout holds 5")
    pairs = "".join(f"{el.upper():<2}{n:6.2f}" for el, n in elements)
    pairs = (pairs + "    0.00" * (5 - len(elements))) if pad_unused else pairs.ljust(40)
    dfh_txt = f"{dfh:15.3f}" if np.isfinite(dfh) else " " * 15
    out = [f"{name:<18}{comment}"[:80],
           f"{len(segs):2d} {ref[:6]:<6} {pairs}{phase:2d}{molar_mass:13.7f}{dfh_txt}"]
    exps = "".join(f"{e:5.1f}" for e in exponents)
    h0 = f"  {h298_minus_h0:15.3f}" if h298_minus_h0 is not None else ""
    for c, lo, hi in zip(segs, t_lo, t_hi):
        out.append(f"{lo:11.3f}{hi:11.3f}7{exps}{h0}")
        out.append("".join(_d16(x) for x in c[0:5]))
        out.append(_d16(c[5]) + _d16(c[6]) + " " * 16 + _d16(c[7]) + _d16(c[8]))
    return "\n".join(out)


def _nasa7_exact(segs: pd.DataFrame) -> pd.Series:
    """Per species: True when its segments are one or two contiguous NASA-7 segments of a
    record (no T⁻² or T⁻¹ terms), vectorised over all species."""
    s = segs.sort_values(["species", "segment"], kind="stable")
    ok = (s["a1"].to_numpy(float) == 0) & (s["a2"].to_numpy(float) == 0) & (s["origin"] == "record").to_numpy()
    gap = (s.groupby("species")["t_low_k"].shift(-1) - s["t_high_k"]).abs()
    g = s.assign(ok=ok, gap=gap.fillna(0.0)).groupby("species")
    return g["ok"].all() & (g.size() <= 2) & (g["gap"].max() < 1e-6)


def export(tables: dict[str, pd.DataFrame], form: str, species: list[str] | None = None) -> Export:
    """Build the file text of ``form`` for ``species`` (default: every species with a
    preferred record). Raises InputError for an unknown species or form."""
    if form not in FORMATS:
        raise InputError("--format", None, repr(form), "nasa7 or nasa9", "pass --format nasa7 or --format nasa9")
    sp_all = tables["species"]
    psegs = tables["preferred_segments"].sort_values(["species", "segment"], kind="stable")
    if species:
        unknown = sorted(set(species) - set(sp_all["species"]))
        if unknown:
            raise InputError("--species", None, f"unknown species {unknown}", "keys of the species table",
                             "check the spelling, e.g. thermoledger sql \"SELECT species FROM species\"")
        sp = sp_all[sp_all["species"].isin(species)]
    else:
        sp = sp_all
    notes: list[str] = []
    no_pref = sp[~sp["species"].isin(set(psegs["species"]))]
    notes += [f"{k}: no preferred record with a polynomial or a refit; not written" for k in no_pref["species"]]
    sp = sp[sp["species"].isin(set(psegs["species"]))]
    aq = sp[sp["state"] == "aq"]
    notes += [f"{k}: state aq has no representation in {form}; not written" for k in aq["species"]]
    sp = sp[sp["state"] != "aq"].sort_values("species").reset_index(drop=True)
    psegs = psegs[psegs["species"].isin(set(sp["species"]))]
    fits = pd.DataFrame()
    findings = None
    # segments to write, per species: (coef (k, 9), t_lo (k,), t_hi (k,))
    seg_of: dict[str, tuple] = {}
    for key, s in psegs.groupby("species", sort=False):
        seg_of[key] = (s[list(COEF_COLUMNS)].to_numpy(float), s["t_low_k"].to_numpy(float),
                       s["t_high_k"].to_numpy(float))
    if form == "nasa9":
        stored = tables.get("fits", pd.DataFrame())
        if len(stored):
            fits = stored[stored["species"].isin(set(psegs.loc[psegs["origin"] == "refit", "species"]))]
    else:
        exact = _nasa7_exact(psegs) if len(psegs) else pd.Series(dtype=bool)
        need = sorted(exact.index[~exact.astype(bool)])
        if need:
            fits = _refit_nasa7(tables, psegs, need)
            for key, s in fits["_segments"].items():
                seg_of[key] = s
            fits = fits.drop(columns="_segments").reset_index(drop=True)
    if len(fits):
        src = tables["records"].set_index("record_id")["source_id"]
        findings = quality_findings(fits, fits["species"], fits["record_id"].map(src), FIT_TOLERANCES)
    names, label_notes = _names(sp, form)
    notes += label_notes
    h_def = psegs.groupby("species")["h_defined"].all()
    refitted = set(fits["species"]) if len(fits) else set()
    rec_of = psegs.groupby("species")["record_id"].first()
    date = tables["records"].set_index("record_id")["date_code"] if "date_code" in tables["records"] else None
    blocks = []
    for row, name in zip(sp.itertuples(index=False), names):
        coef, lo, hi = seg_of[row.species]
        els = _elements(row)
        code = "REFIT" if row.species in refitted else (
            str(date.get(rec_of[row.species], "") or "") if date is not None else "")
        try:
            if form == "nasa7":
                if len(coef) == 1:
                    mid = float(np.round((lo[0] + hi[0]) / 2))
                    coef, lo, hi = np.repeat(coef, 2, axis=0), np.array([lo[0], mid]), np.array([mid, hi[0]])
                c7 = to_nasa7(coef)
                text = nasa7_text(name, code, els, NASA7_PHASE[row.state], lo[0], hi[0], hi[1], c7[0], c7[1])
                if row.species in refitted:
                    text = f"! {row.species}: NASA-7 refit of {rec_of[row.species]}\n" + text
                if not h_def[row.species]:
                    text = f"! {row.species}: H(298.15) unknown, written as 0\n" + text
            else:
                dfh = float(evaluate(coef[_holding(lo, hi)], T_REF).h) if h_def[row.species] else np.nan
                comment = f" {rec_of[row.species]}" + (" (NASA-9 refit of a table)" if row.species in refitted else "")
                text = nasa9_text(name, comment, code, els, 0 if row.state == "g" else 1,
                                  float(row.molar_mass_g_mol), dfh, coef, lo, hi)
        except ValueError as exc:
            notes.append(f"{row.species}: not written: {exc}")
            continue
        blocks.append(text)
    if form == "nasa7":
        t_lo = min((seg_of[k][1][0] for k in sp["species"]), default=300.0)
        head = ["! thermoledger export: NASA 7-term polynomials (NASA TM-4513 layout), SI, 1 bar",
                "THERMO", f"{t_lo:10.3f}{1000.0:10.3f}{6000.0:10.3f}"]
        text = "\n".join(head + blocks + ["END"]) + "\n"
    else:
        head = ["thermo", "    200.000  1000.000  6000.000 20000.000"]
        text = "\n".join(head + blocks + ["END PRODUCTS", "END REACTANTS"]) + "\n"
    from .findings import empty_findings

    return Export(text=text, fits=fits, findings=findings if findings is not None else empty_findings(), notes=notes)


def _holding(lo: np.ndarray, hi: np.ndarray) -> int:
    """Index of the segment that holds 298.15 K (the nearest end segment outside)."""
    i = int(np.searchsorted(hi, T_REF, side="left"))
    return min(i, len(hi) - 1)


def _refit_nasa7(tables: dict[str, pd.DataFrame], psegs: pd.DataFrame, keys: list[str]) -> pd.DataFrame:
    """NASA-7 refits of the preferred records of ``keys`` from the records' own functions."""
    rec = tables["records"]
    first = psegs[psegs["species"].isin(keys)].drop_duplicates("species")
    items = first[["species", "record_id"]].merge(rec[["record_id", "t_low_k", "t_high_k"]], on="record_id")
    funcs = RecordFunctions(rec, tables["segments"], tables["table_points"])
    h_def = dict(zip(first["record_id"], first["h_defined"].astype(bool)))

    def values(rids, t):
        rid = np.broadcast_to(np.asarray(rids, dtype=object)[:, None], np.shape(t))
        v = funcs.evaluate(rid, t)
        known = np.array([h_def.get(r, True) for r in np.asarray(rids, dtype=object)])[:, None]
        return v.cp, np.where(known, v.h, v.h_minus_h298), v.s

    fit = refit(items[["record_id", "t_low_k", "t_high_k"]], values, "nasa7")
    out = fit.fits.merge(items[["record_id", "species"]], on="record_id")
    segs = {}
    for rid, s in fit.segments.groupby("record_id", sort=False):
        segs[rid] = (s[list(COEF_COLUMNS)].to_numpy(float), s["t_low_k"].to_numpy(float), s["t_high_k"].to_numpy(float))
    out["_segments"] = out["record_id"].map(segs)
    out = out.set_index("species", drop=False)
    return out
