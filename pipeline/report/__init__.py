"""Reports written beside the release: the plain-text summary, findings.json, and (when
available) the HTML report and junit.xml. Every writer puts its files in the build folder;
``curate.publish`` swaps them in with the rest of the release."""
from __future__ import annotations

import json

import pandas as pd

from .summary import summary_text

CAUTION = ("Caution: these data and checks support, but do not replace, licensed engineering "
           "judgement. Where results feed a safety decision (reactive hazards, energy release, "
           "process design), follow local codes and licensed engineering practice.")


def write_reports(run) -> None:
    rdir = run.extra["build_dir"] / "report"
    rdir.mkdir(exist_ok=True)
    findings = run.findings if run.findings is not None else pd.DataFrame()
    records = json.loads(findings.to_json(orient="records", double_precision=10)) if len(findings) else []
    doc = {"tool": "thermoledger", "run_id": run.run_id, "database": run.manifest.database.name,
           "caution": CAUTION, "findings": records}
    (rdir / "findings.json").write_text(json.dumps(doc, indent=1, ensure_ascii=False), encoding="utf-8")
    (rdir / "summary.txt").write_text(summary_text(run), encoding="utf-8")
