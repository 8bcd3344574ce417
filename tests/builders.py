"""Build staging frames and check contexts from synthetic data, for tests.

Every builder goes through the same code the pipeline uses (species_table, the canonical
segment conversions), so a test exercises the real contracts.
"""
from __future__ import annotations

import json

import numpy as np
import pandas as pd

from pipeline.checks.context import CheckContext
from pipeline.config import Config
from pipeline.formula import parse_formula, parse_key
from pipeline.ingest import base as ib
from pipeline.ingest.resolve import species_table
from pipeline.thermo import COEF_COLUMNS


def _elements(species: str) -> dict:
    f = parse_formula(parse_key(species).formula)
    return {k: v for k, v in f.elements.items() if k != "e"}


def poly_record(species: str, source: str, segments: list[tuple[float, float, np.ndarray]], *,
                form: str = "nasa7", stated_dfh_j_mol: float = np.nan, line: int = 1):
    """A polynomial record: ``segments`` is a list of (t_low_k, t_high_k, canonical coef (9,))."""
    rid = f"{source}/{species}"
    rec = dict(record_id=rid, source_id=source, name=species, species_hint=species, species=species,
               state=parse_key(species).state, label=parse_key(species).label,
               elements_json=json.dumps(_elements(species)), charge=parse_formula(parse_key(species).formula).charge,
               kind="polynomial", form=form, file=f"{source}.dat", line=line,
               t_low_k=segments[0][0], t_high_k=segments[-1][1], stated_dfh_j_mol=stated_dfh_j_mol,
               stated_molar_mass_g_mol=np.nan, date_code="")
    segs = [dict(record_id=rid, segment=i, t_low_k=lo, t_high_k=hi, **dict(zip(COEF_COLUMNS, np.asarray(c, float))))
            for i, (lo, hi, c) in enumerate(segments)]
    return rec, segs


def table_record(species: str, source: str, t_k, *, line: int = 2, **columns):
    """A table record: ``columns`` maps SI column names (cp_j_mol_k, s_j_mol_k, …) to arrays."""
    rid = f"{source}/{species}"
    t = np.asarray(t_k, float)
    rec = dict(record_id=rid, source_id=source, name=species, species_hint=species, species=species,
               state=parse_key(species).state, label=parse_key(species).label,
               elements_json=json.dumps(_elements(species)), charge=0, kind="table", form="table",
               file=f"{source}.csv", line=line, t_low_k=float(t.min()), t_high_k=float(t.max()),
               stated_dfh_j_mol=np.nan, stated_molar_mass_g_mol=np.nan, date_code="")
    pts = pd.DataFrame({"record_id": rid, "source_id": source, "line": np.arange(len(t)) + line, "t_k": t})
    for c in ib.TABLE_POINT_COLUMNS:
        if c not in pts:
            pts[c] = np.asarray(columns[c], float) if c in columns else np.nan
    return rec, pts[list(ib.TABLE_POINT_COLUMNS)]


def context(poly=(), tables=(), *, species_meta: pd.DataFrame | None = None,
            reactions: pd.DataFrame | None = None, config: Config | None = None,
            p_db_bar: float = 1.0) -> CheckContext:
    """A CheckContext from ``poly`` (list of poly_record results) and ``tables``
    (list of table_record results). ``species_meta`` rows (species, geometry,
    reference_element, stated_molar_mass_g_mol, aliases) refine the species table."""
    recs = [r for r, _ in poly] + [r for r, _ in tables]
    segs = [s for _, ss in poly for s in ss]
    records = ib.frame(recs, ib.RECORD_COLUMNS + ("species",))
    segments = ib.frame(segs, ib.SEGMENT_COLUMNS)
    tp = pd.concat([p for _, p in tables], ignore_index=True) if tables else ib.empty(ib.TABLE_POINT_COLUMNS)
    meta = species_meta if species_meta is not None else ib.empty(ib.SPECIES_META_COLUMNS)
    for c in ib.SPECIES_META_COLUMNS:
        if c not in meta:
            meta = meta.assign(**{c: None})
    rx = reactions if reactions is not None else ib.empty(ib.REACTION_COLUMNS)
    keys = list(records["species"]) + [k for s in rx["stoich_json"].dropna() for k in json.loads(s)]
    species = species_table(keys, meta)
    for c in ("t_low_k", "t_high_k", "stated_dfh_j_mol", "stated_molar_mass_g_mol"):
        records[c] = records[c].astype(float)
    return CheckContext(species=species, records=records, segments=segments, table_points=tp,
                        reactions=rx, config=config or Config(), p_db_bar=p_db_bar)


def findings_of(df: pd.DataFrame, check_id: str) -> pd.DataFrame:
    return df[df["check_id"] == check_id]
