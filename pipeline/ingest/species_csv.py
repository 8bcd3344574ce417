"""Reader for ``species-csv``: species metadata and aliases (inputs.md, "Species identity").

Columns: ``species`` (key, required), ``aliases`` (``;``-separated), ``molar_mass_g_mol``,
``reference_element`` (true/false), ``geometry`` (atom | linear | nonlinear | blank),
``cas``. A row with an unparsable key, an unknown element, a bad boolean or geometry, or a
non-numeric molar mass is rejected with the reason.
"""
from __future__ import annotations

import math
from pathlib import Path

from ..errors import InputError
from ..formula import FormulaError, parse_formula, parse_key
from ..manifest import Source
from .base import REJECTED_COLUMNS, SPECIES_META_COLUMNS, ReadResult, frame, rejected_row
from .csvutil import is_csv_error, read_rows

COLUMNS = ("species", "aliases", "molar_mass_g_mol", "reference_element", "geometry", "cas")
GEOMETRIES = ("atom", "linear", "nonlinear")
_TRUE = {"true", "yes", "1", "y", "t"}
_FALSE = {"false", "no", "0", "n", "f", ""}


def read(path: Path, source: Source, rel: str) -> ReadResult:
    header, rows = read_rows(path)
    names = [h.split("[")[0].strip().lower() for h in header]
    if "species" not in names:
        raise InputError(rel, 1, f"header {header!r}", "a 'species' column",
                         "add the header line species,aliases,molar_mass_g_mol,reference_element,geometry,cas")
    unknown = [h for h in names if h not in COLUMNS]
    if unknown:
        raise InputError(rel, 1, f"unknown column(s) {unknown}", "columns among " + ", ".join(COLUMNS),
                         "rename or remove them")
    out, rejected = [], []
    seen: dict[str, int] = {}
    for line, fields, raw in rows:
        def reject(reason: str):
            rejected.append(rejected_row(source.id, rel, line, raw, reason))

        if is_csv_error(fields):
            reject(f"CSV syntax: {fields[1]} — fix: quote fields that hold commas")
            continue
        if len(fields) > len(names):
            reject(f"{len(fields)} fields but the header has {len(names)} — fix: quote keys with commas, e.g. \"C(cr,graphite)\"")
            continue
        row = dict(zip(names, [f.strip() for f in fields]))
        key = row.get("species", "")
        try:
            sk = parse_key(key)
            parse_formula(sk.formula)
        except FormulaError as exc:
            reject(f"species {exc}")
            continue
        if key in seen:
            reject(f"species {key!r} declared again (first on line {seen[key]}) — fix: keep one row per species")
            continue
        ref = row.get("reference_element", "").lower()
        if ref not in _TRUE | _FALSE:
            reject(f"reference_element {row['reference_element']!r} is not true/false — fix: write true or false")
            continue
        geometry = row.get("geometry", "").lower() or None
        if geometry is not None and geometry not in GEOMETRIES:
            reject(f"geometry {geometry!r} is not one of atom, linear, nonlinear — fix: correct it or leave blank")
            continue
        mm_text = row.get("molar_mass_g_mol", "")
        mm = math.nan
        if mm_text:
            try:
                mm = float(mm_text)
            except ValueError:
                reject(f"molar_mass_g_mol {mm_text!r} is not a number — fix: write g/mol as a number")
                continue
        seen[key] = line
        out.append(dict(species=sk.key, aliases=row.get("aliases", "") or "",
                        stated_molar_mass_g_mol=mm, reference_element=ref in _TRUE,
                        geometry=geometry, cas=row.get("cas") or None, source_id=source.id,
                        file=rel, line=line))
    return ReadResult(n_read=len(rows), species_meta=frame(out, SPECIES_META_COLUMNS),
                      rejected=frame(rejected, REJECTED_COLUMNS))
