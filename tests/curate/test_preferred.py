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
