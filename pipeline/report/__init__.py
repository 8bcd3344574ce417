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


def report_texts(run, progress=None) -> dict[str, str]:
    """The texts of ``findings.json``, ``junit.xml`` and ``index.html`` for the run's
    findings (``progress``: as ``run.progress``, or None for no messages)."""
    from .html import render_html
    from .junit import junit_xml

    say = progress or (lambda *a, **k: None)
    findings = run.findings if run.findings is not None else empty_report_findings()
    records = json.loads(findings.to_json(orient="records", double_precision=10)) if len(findings) else []
    doc = {"tool": "thermoledger", "run_id": run.run_id, "database": run.manifest.database.name,
           "caution": CAUTION, "findings": records}
    texts = {"findings.json": json.dumps(doc, indent=1, ensure_ascii=False)}
    say("junit.xml")
    texts["junit.xml"] = junit_xml(run, findings)
    say("index.html")
    texts["index.html"] = render_html(run, findings, progress=progress)
    return texts


def prepare_reports(run) -> None:
    """:func:`report_texts` ahead of the report stage (the emit stage calls it on its
    second thread while DuckDB stores the tables), kept in ``run.extra`` with the findings
    frame they describe; :func:`write_reports` uses them while ``run.findings`` is still
    that frame. An error here is left for the report stage to raise."""
    findings = run.findings
    try:
        texts = report_texts(run)
    except Exception:  # noqa: BLE001 - the report stage computes (and raises) it again
        return
    run.extra["report_texts"] = (findings, texts)


def write_reports(run) -> None:
    """Write findings.json, junit.xml, index.html and summary.txt into the build folder."""
    rdir = run.extra["build_dir"] / "report"
    rdir.mkdir(exist_ok=True)
    ready = run.extra.pop("report_texts", None)
    if ready is not None and ready[0] is run.findings and run.findings is not None:
        texts = ready[1]
    else:
        texts = report_texts(run, progress=run.progress)
    for name in ("findings.json", "junit.xml", "index.html"):
        (rdir / name).write_text(texts[name], encoding="utf-8")
    (rdir / "summary.txt").write_text(summary_text(run), encoding="utf-8")


def empty_report_findings() -> pd.DataFrame:
    import pandas as pd

    from ..findings import FINDING_COLUMNS, empty_findings

    f = empty_findings()
    for c in FINDING_COLUMNS[len(f.columns):]:
        f[c] = pd.Series(dtype=bool if c == "waived" else object)
    return f[list(FINDING_COLUMNS)]
