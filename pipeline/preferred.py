"""The preferred record of each species: the one curated properties come from.

Rule (in order): records without unwaived error findings first; then the source's
``priority`` (higher first); then provenance kind evaluated > measured > computed >
estimated; then polynomial before table (a fit covers its range continuously); then the
wider temperature range; then record id (deterministic). The reason is recorded.
"""
from __future__ import annotations

import pandas as pd

KIND_ORDER = {"evaluated": 0, "measured": 1, "computed": 2, "estimated": 3}


def choose_preferred(records: pd.DataFrame, sources: pd.DataFrame,
                     findings: pd.DataFrame | None = None) -> pd.DataFrame:
    """One row per species: ``species, preferred_record_id, preferred_reason``.

    Parameters
    ----------
    records : records frame (record_id, species, source_id, kind, t_low_k, t_high_k).
    sources : frame with ``source_id, priority, kind`` (provenance).
    findings : findings frame; error findings (not waived) on (species, source) demote
        that source's record of the species.
    """
    if not len(records):
        return pd.DataFrame(columns=["species", "preferred_record_id", "preferred_reason"])
    r = records.merge(sources[["source_id", "priority", "kind"]].rename(columns={"kind": "provenance"}),
                      on="source_id", how="left")
    r["has_error"] = False
    if findings is not None and len(findings):
        err = findings[(findings["severity"] == "error") & ~findings["waived"].astype(bool)
                       & findings["subject_kind"].eq("species")]
        bad = set(zip(err["subject"], err["source_id"]))
        r["has_error"] = [(s, src) in bad for s, src in zip(r["species"], r["source_id"])]
    r["kind_rank"] = r["provenance"].map(KIND_ORDER).fillna(9)
    r["form_rank"] = (r["kind"] != "polynomial").astype(int)
    r["span"] = r["t_high_k"].astype(float) - r["t_low_k"].astype(float)
    r = r.sort_values(["species", "has_error", "priority", "kind_rank", "form_rank", "span", "record_id"],
                      ascending=[True, True, False, True, True, False, True], kind="stable")
    n = r.groupby("species")["record_id"].transform("size")
    first = r.groupby("species").head(1).copy()
    reasons = []
    for row, count in zip(first.itertuples(index=False), n.loc[first.index]):
        if count == 1:
            reasons.append("only record")
        else:
            why = [f"priority {row.priority}", str(row.provenance)]
            if not row.has_error:
                why.insert(0, "no unwaived errors")
            reasons.append(f"best of {count}: " + ", ".join(why))
    return pd.DataFrame({"species": first["species"].to_numpy(),
                         "preferred_record_id": first["record_id"].to_numpy(),
                         "preferred_reason": reasons})
