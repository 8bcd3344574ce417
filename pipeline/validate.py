"""Run the pandera schemas of ``schemas/`` on the staging frames, lazily.

Every failing row goes to ``rejected`` with a reason a curator can act on: where (the
row's own line when it differs from the record's), which column, which value, what the
schema expects and the fix, for all failures of the row (lazy validation collects them).
A failing segment or table row rejects its whole record, so a record is never half-loaded;
species-meta and reaction rows are rejected one by one. One ``schema.rejected`` finding
per rejected input record is raised by the accounting step (``stages._accounting``).

Numeric columns are coerced first, cell by cell, so one unreadable cell fails its own row
instead of the whole column.
"""
from __future__ import annotations

import numpy as np
import pandas as pd
import pandera.errors

from schemas import STAGING_SCHEMAS

#: pandera's built-in check names → curator text (checks declared with ``error=`` already read well).
_BUILTIN = {
    "not_nullable": "is missing (required)",
    "field_uniqueness": "is not unique",
    "column_in_dataframe": "column is missing",
}


def _fmt(value) -> str:
    if isinstance(value, float):
        return "empty" if np.isnan(value) else f"{value:.6g}"
    return repr(value)


def _coerce_numbers(schema, df: pd.DataFrame) -> tuple[pd.DataFrame, dict[int, list[str]]]:
    """Numeric schema columns converted cell by cell; unreadable cells → per-row failures.
    A float64 column is numbers already: it is left as it is (``df`` is copied only when a
    column changes)."""
    out: dict[int, list[str]] = {}
    copied = False
    for name, col in schema.columns.items():
        if name not in df or str(col.dtype) not in ("float64", "int64") or df[name].dtype == np.float64:
            continue
        if not copied:
            df, copied = df.copy(), True
        raw = df[name]
        num = pd.to_numeric(raw, errors="coerce")
        bad = raw.notna() & num.isna()
        for i in df.index[bad.to_numpy()]:
            out.setdefault(i, []).append(f"column {name} = {raw.at[i]!r} is not a number")
        df[name] = num.astype(float)
    return df, out


def failures(schema, df: pd.DataFrame) -> dict[int, str]:
    """Row index → reason text for every row of ``df`` that fails ``schema`` (lazy)."""
    if not len(df):
        return {}
    df, out = _coerce_numbers(schema, df)
    try:
        schema.validate(df, lazy=True)
        fc = None
    except pandera.errors.SchemaErrors as exc:
        fc = exc.failure_cases
    if fc is not None:
        frame_level = fc["schema_context"].eq("DataFrameSchema")
        for row in fc[~frame_level].itertuples(index=False):
            col = row.column if isinstance(row.column, str) and row.column else "row"
            check = _BUILTIN.get(str(row.check), str(row.check))
            c = schema.columns.get(col)
            unit = f" ({c.description})" if c is not None and c.description else ""
            what = f"column {col}{unit} = {_fmt(row.failure_case)}: {check}"
            idx = row.index
            if idx is None or (isinstance(idx, float) and pd.isna(idx)):
                for i in df.index:          # a column-level failure: every row fails
                    out.setdefault(i, []).append(what)
            else:
                out.setdefault(int(idx), []).append(what)
        # frame-wide checks: one failure per cell of the row; name the columns the message names
        for (idx, check), grp in fc[frame_level].groupby(["index", "check"], dropna=False, sort=False):
            vals = [f"{c} = {_fmt(v)}" for c, v in zip(grp["column"], grp["failure_case"])
                    if isinstance(c, str) and c in str(check)]
            what = f"{check}" + (f" ({', '.join(vals)})" if vals else "")
            if idx is None or (isinstance(idx, float) and pd.isna(idx)):
                for i in df.index:
                    out.setdefault(i, []).append(what)
            else:
                out.setdefault(int(idx), []).append(what)
    reasons = {}
    for i, items in out.items():
        items = list(dict.fromkeys(items))
        fixes = []
        for name, col in schema.columns.items():
            fix = (col.metadata or {}).get("fix")
            if fix and any(f"column {name} " in it or f"column {name}=" in it for it in items):
                fixes.append(fix)
        fix = "; ".join(dict.fromkeys(fixes)) or "correct the record in the source file"
        reasons[i] = f"schema {schema.name}: " + "; ".join(items) + f" — fix: {fix}"
    return reasons


def _dedupe_reactions(run) -> None:
    """A reaction id used by an earlier row (any source) → the later row is rejected."""
    rx = run.frames["reactions"]
    dup = rx["reaction_id"].duplicated(keep="first") & rx["reaction_id"].notna()
    if not dup.any():
        return
    first = rx[~rx["reaction_id"].duplicated(keep="first")].set_index("reaction_id")
    rows = rx[dup]
    run.reject(pd.DataFrame({
        "source_id": rows["source_id"], "file": rows["file"], "line": rows["line"],
        "raw_text": rows["equation"].astype(str),
        "reason": [f"reaction id {r!r} already used by {first.at[r, 'file']}:{first.at[r, 'line']} "
                   "— fix: give every measurement a unique id (ids are global across sources)"
                   for r in rows["reaction_id"]]}))
    run.frames["reactions"] = rx[~dup].reset_index(drop=True)


def validate_frames(run) -> None:
    """Validate every staging frame and move failing rows (whole records) to ``rejected``."""
    from .functions import member
    from .ingest.base import read_back
    from .stages import _reject_records

    f = run.frames
    root = run.manifest.root if getattr(run, "manifest", None) is not None else run.raw
    cache: dict = {}
    _dedupe_reactions(run)
    for name in ("species_meta", "reactions"):
        bad = failures(STAGING_SCHEMAS[name], f[name])
        if bad:
            rows = f[name].loc[list(bad)]
            run.reject(pd.DataFrame({
                "source_id": rows["source_id"], "file": rows["file"], "line": rows["line"],
                "raw_text": [read_back(root, fl, ln, 1, cache) or str(r) for fl, ln, r in
                             zip(rows["file"], rows["line"], rows.to_dict("records"))],
                "reason": [bad[i] for i in rows.index]}))
            f[name] = f[name].drop(index=list(bad)).reset_index(drop=True)
    # records, with their segments and table rows: any failure rejects the whole record
    reasons: dict[str, str] = {}
    rec = f["records"]
    for i, why in failures(STAGING_SCHEMAS["records"], rec).items():
        reasons[rec.at[i, "record_id"]] = why
    for name in ("segments", "table_points"):
        fr = f[name]
        for i, why in failures(STAGING_SCHEMAS[name], fr).items():
            rid = fr.at[i, "record_id"]
            ln = fr.at[i, "line"] if "line" in fr else None
            where = (f"row at line {int(ln)}" if name == "table_points" and pd.notna(ln)
                     else f"segment {fr.at[i, 'segment']}" + (f" (line {int(ln)})" if pd.notna(ln) else ""))
            reasons.setdefault(rid, f"{where}: {why}")
    if reasons:
        bad = rec[member(rec["record_id"], set(reasons))]
        _reject_records(run, bad, [f"record {n} rejected whole: {reasons[r]}"
                                   for r, n in zip(bad["record_id"], bad["name"])])
        f["records"] = rec[~member(rec["record_id"], set(reasons))].reset_index(drop=True)
