"""Reports written beside the release: ``index.html`` (the self-contained review page),
``findings.json``, ``junit.xml`` and the plain-text summary. Every writer puts its files in
the build folder; ``curate.publish`` swaps them in with the rest of the release."""
from __future__ import annotations

import json
from typing import TYPE_CHECKING

from .summary import summary_text

if TYPE_CHECKING:
    import pandas as pd

CAUTION = ("Caution: these data and checks support, but do not replace, licensed engineering "
           "judgement. Where results feed a safety decision (reactive hazards, energy release, "
           "process design), follow local codes and licensed engineering practice.")


def write_reports(run) -> None:
    """Write findings.json, junit.xml, index.html and summary.txt into the build folder."""
    from .html import render_html
    from .junit import junit_xml

    rdir = run.extra["build_dir"] / "report"
    rdir.mkdir(exist_ok=True)
    findings = run.findings if run.findings is not None else empty_report_findings()
    records = json.loads(findings.to_json(orient="records", double_precision=10)) if len(findings) else []
    doc = {"tool": "thermoledger", "run_id": run.run_id, "database": run.manifest.database.name,
           "caution": CAUTION, "findings": records}
    (rdir / "findings.json").write_text(json.dumps(doc, indent=1, ensure_ascii=False), encoding="utf-8")
    run.progress("junit.xml")
    (rdir / "junit.xml").write_text(junit_xml(run, findings), encoding="utf-8")
    run.progress("index.html")
    (rdir / "index.html").write_text(render_html(run, findings), encoding="utf-8")
    (rdir / "summary.txt").write_text(summary_text(run), encoding="utf-8")


def empty_report_findings() -> pd.DataFrame:
    import pandas as pd

    from ..findings import FINDING_COLUMNS, empty_findings

    f = empty_findings()
    for c in FINDING_COLUMNS[len(f.columns):]:
        f[c] = pd.Series(dtype=bool if c == "waived" else object)
    return f[list(FINDING_COLUMNS)]
