"""The check registry: complete against the specification, duplicates refused, docstrings."""
from __future__ import annotations

import pytest

from pipeline.checks import registry

#: Every id of the three tables of the checks specification (checks.md).
SPEC_IDS = [
    "cp.nonpositive", "cp.gas-floor", "cp.gas-ceiling", "segment.discontinuity", "segment.kink",
    "range.extrapolation", "table.enthalpy-integral", "table.entropy-integral",
    "table.gibbs-identity", "table.logk-identity", "table.formation-identity",
    "formation.reference-element", "formation.stated-vs-polynomial", "thirdlaw.zero-point",
    "thirdlaw.calorimetric-entropy", "thirdlaw.gas-entropy-floor", "composition.molar-mass",
    "duplicate.disagreement", "phase.reference-not-stable", "phase.metastable",
    "phase.transition-mismatch", "reaction.residual", "cycle.closure", "network.worst-offender",
    "equilibrium.law-disagreement", "equilibrium.third-law-drift",
]


@pytest.mark.parametrize("check_id", SPEC_IDS)
def test_every_spec_id_is_registered_and_documented(check_id):
    spec = registry.spec_for(check_id)
    assert spec is not None, f"{check_id} is not registered"
    assert spec.func is not None
    doc = spec.doc.lower()
    assert len(doc.splitlines()) >= 3, "docstring must state physics, tolerance and source"
    assert any(w in doc for w in ("tolerance", "error", "warning", "info")), "docstring names no rule"


def test_duplicate_registration_is_refused():
    @registry.check("zz-test.once")
    def first(ctx):
        """A test check.

        Relation: none. Tolerance: none. Source: this test.
        """

    try:
        with pytest.raises(ValueError, match="registered twice"):
            @registry.check("zz-test.once")
            def second(ctx):
                """Again."""
    finally:
        registry._REGISTRY.pop("zz-test.once")


def test_undocumented_check_is_refused():
    with pytest.raises(ValueError, match="no docstring"):
        @registry.check("zz-test.nodoc")
        def nodoc(ctx):
            pass
    assert registry.spec_for("zz-test.nodoc") is None


def test_bad_id_is_refused():
    with pytest.raises(ValueError, match="dotted name"):
        registry.CheckSpec("nodot", None, doc="x")
