"""The preferred-record rule (pipeline.preferred)."""
from __future__ import annotations

import pandas as pd

from pipeline.findings import make_findings
from pipeline.preferred import choose_preferred


def _records():
    return pd.DataFrame({"record_id": ["a/X", "b/X", "c/X", "d/Y", "e/Y"], "species": ["X(g)"] * 3 + ["Y(g)"] * 2,
                         "source_id": ["a", "b", "c", "d", "e"], "kind": "polynomial",
                         "t_low_k": 200.0, "t_high_k": 6000.0})


SOURCES = pd.DataFrame({"source_id": list("abcde"), "priority": [5, 10, 10, 0, 0],
                        "kind": ["evaluated", "estimated", "measured", "computed", "evaluated"]})


def _errors(subject, source, waived=False):
    f = make_findings(check_id="cp.nonpositive", severity="error", subject=subject, subject_kind="species",
                      source_id=source, message="m")
    return f.assign(waived=waived)


def test_priority_then_kind():
    p = choose_preferred(_records(), SOURCES).set_index("species")
    assert p.loc["X(g)", "preferred_record_id"] == "c/X"     # priority 10, measured beats estimated
    assert p.loc["Y(g)", "preferred_record_id"] == "e/Y"     # same priority: evaluated beats computed
    assert p.loc["X(g)", "preferred_reason"] == "best of 3: same priority; provenance measured over estimated"
    assert p.loc["Y(g)", "preferred_reason"] == "best of 2: same priority; provenance evaluated over computed"


def test_unwaived_error_demotes_and_waived_does_not():
    p = choose_preferred(_records(), SOURCES, _errors("X(g)", "c")).set_index("species")
    assert p.loc["X(g)", "preferred_record_id"] == "b/X"
    assert p.loc["X(g)", "preferred_reason"] == "best of 3: highest source priority (10 over 5)"
    p = choose_preferred(_records(), SOURCES, pd.concat([_errors("X(g)", "c"), _errors("X(g)", "b")]))
    assert p.set_index("species").loc["X(g)", "preferred_reason"] == \
        "best of 3: the other records have unwaived error findings"
    p = choose_preferred(_records(), SOURCES, _errors("X(g)", "c", waived=True)).set_index("species")
    assert p.loc["X(g)", "preferred_record_id"] == "c/X"


def test_single_record_species_among_others():
    """A species with one record keeps it ("only record"), also when it has an error; the
    result has one row per species, sorted by species key, whichever order records come in."""
    extra = pd.DataFrame({"record_id": ["a/W", "e/Z"], "species": ["W(g)", "Z(cr)"], "source_id": ["a", "e"],
                          "kind": ["table", "polynomial"], "t_low_k": 100.0, "t_high_k": 900.0})
    recs = pd.concat([extra.iloc[[1]], _records(), extra.iloc[[0]]], ignore_index=True)
    p = choose_preferred(recs, SOURCES, _errors("W(g)", "a"))
    assert list(p["species"]) == ["W(g)", "X(g)", "Y(g)", "Z(cr)"]
    got = p.set_index("species")
    assert got.loc["W(g)", "preferred_record_id"] == "a/W" and got.loc["W(g)", "preferred_reason"] == "only record"
    assert got.loc["Z(cr)", "preferred_record_id"] == "e/Z"
    assert got.loc["X(g)", "preferred_record_id"] == "c/X" and got.loc["Y(g)", "preferred_record_id"] == "e/Y"
    only = choose_preferred(extra, SOURCES)
    assert list(only["preferred_record_id"]) == ["a/W", "e/Z"] and set(only["preferred_reason"]) == {"only record"}
