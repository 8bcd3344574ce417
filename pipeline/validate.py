"""Run the pandera schemas of ``schemas/`` on the staging frames, lazily.

Every failing row goes to ``rejected`` with the schema's reason (all failures of the row,
collected); a failing segment or table row rejects its whole record, so a record is never
half-loaded. One ``schema.rejected`` finding per rejected input record is raised later by
the accounting step.
"""
from __future__ import annotations

import pandas as pd
import pandera.errors

from schemas import STAGING_SCHEMAS


def failures(schema, df: pd.DataFrame) -> dict[int, str]:
    """Row index → reason text for every row of ``df`` that fails ``schema`` (lazy)."""
    if not len(df):
        return {}
    try:
        schema.validate(df, lazy=True)
        return {}
    except pandera.errors.SchemaErrors as exc:
        fc = exc.failure_cases
    out: dict[int, list[str]] = {}
    for row in fc.itertuples(index=False):
        idx = row.index
        col = row.column if isinstance(row.column, str) and row.column else "row"
        what = f"{col}: fails {row.check} (value {row.failure_case!r})"
        if idx is None or (isinstance(idx, float) and pd.isna(idx)):
            # a column-level failure (missing column, wrong dtype): every row fails
            for i in df.index:
                out.setdefault(i, []).append(what)
            continue
        out.setdefault(int(idx), []).append(what)
    return {i: f"schema {schema.name}: " + "; ".join(dict.fromkeys(v)) for i, v in out.items()}


def validate_frames(run) -> None:
    """Validate every staging frame and move failing rows (whole records) to ``rejected``."""
    from .stages import _reject_records

    f = run.frames
    for name in ("species_meta", "reactions"):
        bad = failures(STAGING_SCHEMAS[name], f[name])
        if bad:
            rows = f[name].loc[list(bad)]
            run.reject(pd.DataFrame({"source_id": rows["source_id"], "file": rows["file"],
                                     "line": rows["line"], "raw_text": [str(r) for r in rows.to_dict("records")],
                                     "reason": [bad[i] + " — fix: correct the value in the source file" for i in bad]}))
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
            where = f" (line {fr.at[i, 'line']})" if name == "table_points" else f" (segment {fr.at[i, 'segment']})"
            reasons.setdefault(rid, why + where)
    if reasons:
        bad = rec[rec["record_id"].isin(reasons)]
        _reject_records(run, bad, [reasons[r] + " — fix: correct the record in the source file"
                                   for r in bad["record_id"]])
        f["records"] = rec[~rec["record_id"].isin(reasons)].reset_index(drop=True)
