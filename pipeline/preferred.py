"""The preferred record of each species: the one curated properties come from.

Rule (in order): records without unwaived error findings first; then the source's
``priority`` (higher first); then provenance kind evaluated > measured > computed >
estimated; then polynomial before table (a fit covers its range continuously); then the
wider temperature range; then record id (deterministic). The reason names the criterion
that separated the chosen record from the runner-up.
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
        bad = (err[["subject", "source_id"]].drop_duplicates()
               .rename(columns={"subject": "species", "source_id": "_src"}).assign(_bad=True))
        flag = r[["species", "source_id"]].merge(bad, left_on=["species", "source_id"],
                                                 right_on=["species", "_src"], how="left")["_bad"]
        r["has_error"] = flag.fillna(False).astype(bool).to_numpy()
    # a species with one record has nothing to choose between: only the others are ranked
    alone = ~r["species"].duplicated(keep=False).to_numpy()
    single = pd.DataFrame({"species": r["species"].to_numpy()[alone],
                           "preferred_record_id": r["record_id"].to_numpy()[alone],
                           "preferred_reason": "only record"})
    r = r[~alone]
    if not len(r):
        return single.sort_values("species", kind="stable").reset_index(drop=True)
    r["kind_rank"] = r["provenance"].map(KIND_ORDER).fillna(9)
    r["form_rank"] = (r["kind"] != "polynomial").astype(int)
    r["span"] = r["t_high_k"].astype(float) - r["t_low_k"].astype(float)
    r = r.sort_values(["species", "has_error", "priority", "kind_rank", "form_rank", "span", "record_id"],
                      ascending=[True, True, False, True, True, False, True], kind="stable")
    n = r.groupby("species")["record_id"].transform("size")
    first = r.groupby("species").head(1)
    second = r.groupby("species").nth(1).set_index("species").reindex(first["species"])
    count = n.loc[first.index].to_numpy()
    f = first.set_index("species")
    # the first criterion on which the chosen record beats the runner-up
    decided = [
        (f["has_error"] != second["has_error"], "the other records have unwaived error findings"),
        (f["priority"] != second["priority"],
         "highest source priority (" + _int_text(f["priority"]) + " over " + _int_text(second["priority"]) + ")"),
        (f["kind_rank"] != second["kind_rank"],
         "same priority; provenance " + f["provenance"].astype(str) + " over " + second["provenance"].astype(str)),
        (f["form_rank"] != second["form_rank"], "same priority and provenance; a polynomial over a table"),
        (f["span"] != second["span"], "same priority, provenance and form; the widest temperature range"),
    ]
    why = pd.Series("all else equal; first record id", index=f.index, dtype=object)
    for cond, text in reversed(decided):
        why = why.where(~cond.fillna(False).astype(bool), text)
    tail = pd.Series(", all with unwaived errors", index=f.index).where(f["has_error"].astype(bool), "")
    reasons = [("only record" if c == 1 else f"best of {c}: {w}{t}")
               for c, w, t in zip(count, why.to_numpy(), tail.to_numpy())]
    chosen = pd.DataFrame({"species": first["species"].to_numpy(),
                           "preferred_record_id": first["record_id"].to_numpy(),
                           "preferred_reason": reasons})
    return (pd.concat([single, chosen], ignore_index=True).sort_values("species", kind="stable")
            .reset_index(drop=True))


def _int_text(v: pd.Series) -> pd.Series:
    """Whole numbers as text without a decimal point (priorities are integers)."""
    return pd.to_numeric(v, errors="coerce").round().astype("Int64").astype(str)
