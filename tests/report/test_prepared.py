"""The report texts prepared by the emit stage (on its second thread, while DuckDB stores
the tables) are the texts the report stage would compute, and are used only while the
run's findings are the frame they were made from."""
from __future__ import annotations

import json

from pipeline.report import prepare_reports, report_texts, write_reports
from pipeline.stages import Run, execute

from .rawdata import write_raw


def test_prepared_texts_are_the_computed_ones_and_only_for_their_findings(tmp_path):
    raw = write_raw(tmp_path / "raw")
    run = execute(Run(raw=raw, out=tmp_path / "curated", fail_on="never"))
    assert len(run.findings) >= 2
    # what the run wrote (texts prepared during emit) is what the report code computes now
    fresh = report_texts(run)
    for name, text in fresh.items():
        assert (tmp_path / "curated" / "report" / name).read_text(encoding="utf-8") == text, name
    run.extra["build_dir"] = tmp_path / "again"  # the release is published: write beside it
    rdir = tmp_path / "again" / "report"
    (tmp_path / "again").mkdir()
    # prepared texts are used while run.findings is the same frame ...
    prepare_reports(run)
    assert run.extra["report_texts"][0] is run.findings
    run.extra["report_texts"][1]["junit.xml"] = "<marker/>"
    write_reports(run)
    assert (rdir / "junit.xml").read_text(encoding="utf-8") == "<marker/>"
    assert "report_texts" not in run.extra  # used once
    # ... and not once the findings have changed: the report is computed again
    prepare_reports(run)
    run.findings = run.findings.iloc[1:].reset_index(drop=True)
    write_reports(run)
    doc = json.loads((rdir / "findings.json").read_text(encoding="utf-8"))
    assert len(doc["findings"]) == len(run.findings)
    assert (rdir / "junit.xml").read_text(encoding="utf-8") == report_texts(run)["junit.xml"]
