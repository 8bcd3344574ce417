"""junit.xml: parses, one suite per check that ran, one case per check × subject, and its
failure count equals the unwaived error and warning findings of findings.json."""
from __future__ import annotations

import xml.etree.ElementTree as ET

import pandas as pd

from pipeline.checks import registry

from .rawdata import SPECIES, findings_json, run_cli, write_raw


def _live_failing(findings):
    return [f for f in findings if f["severity"] in ("error", "warning") and not f["waived"]]


def test_junit_parses_and_counts_failures(release):
    _, out, _ = release
    root = ET.parse(out / "report" / "junit.xml").getroot()
    findings = findings_json(out)
    n_live = len(_live_failing(findings))
    assert n_live >= 4  # the planted defects: two discontinuities, one Cp ≤ 0, one in beta
    assert len(root.findall(".//failure")) == n_live
    assert int(root.get("failures")) == n_live
    assert sum(int(s.get("failures")) for s in root.iter("testsuite")) == n_live
    assert int(root.get("tests")) == len(root.findall(".//testcase"))
    messages = sorted(f.get("message") for f in root.iter("failure"))
    assert messages == sorted(f["message"] for f in _live_failing(findings))


def test_every_check_that_ran_has_cases_per_subject(release):
    _, out, _ = release
    root = ET.parse(out / "report" / "junit.xml").getroot()
    suites = {s.get("name"): s for s in root.iter("testsuite")}
    # every enabled check function ran (no --config): each has its suite
    for spec in registry.runnable("check") + registry.runnable("network"):
        assert spec.id in suites, spec.id
    # per-record checks: one case per species examined; names start with the species key
    species = {"N2(g)", "O2(g)", "CO(g)", "Ar(g)", "H2(g)"}
    assert sum(len(v) for v in SPECIES.values()) == 7  # 7 records of these 5 species
    cases = [c.get("name") for c in suites["cp.nonpositive"].iter("testcase")]
    assert {c.split(" ")[0] for c in cases} == species
    failed = [c.get("name") for c in suites["cp.nonpositive"].iter("testcase") if c.find("failure") is not None]
    assert failed == ["CO(g) [alpha] at 1000 K"]
    disc = suites["segment.discontinuity"]
    assert int(disc.get("failures")) == 3 and int(disc.get("tests")) == 5  # O2, CO, H2 fail; N2, Ar pass


def test_waived_findings_are_skipped_not_failed(tmp_path):
    raw = write_raw(tmp_path / "raw")
    w = tmp_path / "waivers.toml"
    w.write_text('[[waiver]]\ncheck = "segment.discontinuity"\nsubject = "O2(g)"\nreason = "known; refit due"\n'
                 'by = "reviewer"\nexpires = 2999-01-01\n')
    out = tmp_path / "curated"
    proc = run_cli("run", "--raw", str(raw), "--out", str(out), "--waivers", str(w))
    assert proc.returncode == 1, proc.stderr
    findings = findings_json(out)
    waived = [f for f in findings if f["waived"]]
    assert [(f["check_id"], f["subject"]) for f in waived] == [("segment.discontinuity", "O2(g)")]
    root = ET.parse(out / "report" / "junit.xml").getroot()
    assert int(root.get("failures")) == len(_live_failing(findings)) == len(root.findall(".//failure"))
    skipped = root.findall(".//skipped")
    assert int(root.get("skipped")) == len(skipped) == 1
    assert "known; refit due" in skipped[0].get("message")
    # the findings table of the release says the same as findings.json
    import duckdb

    con = duckdb.connect(str(out / "thermo.duckdb"), read_only=True)
    try:
        db = con.execute("SELECT check_id, subject, waived, waiver_reason FROM findings WHERE waived").df()
    finally:
        con.close()
    assert list(db["subject"]) == ["O2(g)"] and db["waiver_reason"].iloc[0].startswith("known; refit due")
