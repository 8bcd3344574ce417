"""The plain-text summary printed at the end of ``thermoledger run``.

The findings are read column by column as Python lists, so the same code serves a run's
pandas frame and the columns an unchanged re-run reads from the release with duckdb alone
(:class:`pipeline.cache.FindingColumns`): the text is the same whichever it is given.
"""
from __future__ import annotations

#: The findings columns the summary reads.
COLUMNS = ("check_id", "severity", "subject", "source_id", "message", "hint", "waived", "fingerprint")


def _column(findings, name: str) -> list:
    """One column as a list: ``Series.tolist()`` (Python scalars), or the list itself."""
    col = findings[name]
    return col.tolist() if hasattr(col, "tolist") else list(col)


def _null(v) -> bool:
    """Missing as pandas counts it (None, NaN)."""
    return v is None or (isinstance(v, float) and v != v)


def summary_text(run, max_rows: int = 40) -> str:
    f = run.findings
    m = run.manifest
    def n(name: str) -> int:   # a reused release knows its counts without loading the tables
        return int(run.counts[name]) if name in run.counts else len(run.frames.get(name, ()))

    lines = [f"thermoledger run {run.run_id} — {m.database.name}",
             f"  sources: {len(m.sources)}   species: {n('species')}   "
             f"records: {n('records')}   segments: {n('segments')}   "
             f"table rows: {n('table_points')}   reactions: {n('reactions')}   "
             f"rejected: {n('rejected')}"]
    reuse = run.extra.get("reuse") or {}
    if "release" in reuse:
        lines.append(f"  reused: every table, finding and report of run {reuse['release']} (inputs, "
                     "configuration, waivers and tool unchanged)")
    elif reuse.get("sources_reused"):
        lines.append(f"  reused: parsed frames of {len(reuse['sources_reused'])} unchanged source(s); "
                     f"read {len(reuse.get('sources_read', []))}: " + (", ".join(reuse.get("sources_read", []))
                                                                        or "none"))
    n_rows = len(f) if f is not None else 0
    c = {k: _column(f, k) for k in COLUMNS} if n_rows else {k: [] for k in COLUMNS}
    live = [i for i, w in enumerate(c["waived"]) if not bool(w)]
    counts: dict = {}
    for i in live:
        counts[c["severity"][i]] = counts.get(c["severity"][i], 0) + 1
    lines.append(f"  findings: {counts.get('error', 0)} error, {counts.get('warning', 0)} warning, "
                 f"{counts.get('info', 0)} info"
                 + (f"   ({sum(1 for w in c['waived'] if not _null(w) and w)} waived)" if n_rows else ""))
    prev = (run.extra.get("previous") or {}).get("findings")
    if prev is not None and n_rows:
        before = {p for p in _column(prev, "fingerprint") if not _null(p)}
        now = set(c["fingerprint"])
        new = sum(1 for p in c["fingerprint"] if p not in before)
        gone = len({p for p in before if p not in now})
        lines.append(f"  since the previous run: {new} new, {gone} no longer reported")
    if live:
        by: dict = {}
        for i in live:
            key = (c["check_id"][i], c["severity"][i])
            if not (_null(key[0]) or _null(key[1])):
                by[key] = by.get(key, 0) + 1
        lines.append("")
        lines.append("  by check:")
        for (check_id, severity), k in sorted(by.items()):
            lines.append(f"    {check_id:34s} {severity:8s} {k:6d}")
        lines.append("")
        lines.append("  errors and warnings:")
        shown = [i for i in live if c["severity"][i] in ("error", "warning")]
        for i in shown[:max_rows]:
            check_id, severity, source_id, hint = c["check_id"][i], c["severity"][i], c["source_id"][i], c["hint"][i]
            src = f" [{source_id}]" if isinstance(source_id, str) else ""
            lines.append(f"    {severity:7s} {check_id:30s} {c['subject'][i]}{src}: {c['message'][i]}")
            if isinstance(hint, str) and hint and check_id != "schema.rejected":
                lines.append(f"    {'':7s} {'':30s} hint: {hint}")
        if len(shown) > max_rows:
            lines.append(f"    … {len(shown) - max_rows} more in curated/report/ and the findings table")
    lines.append("")
    lines.append(f"  outputs: {run.out}/thermo.duckdb, {run.out}/parquet/, {run.out}/report/ "
                 "(index.html, findings.json, junit.xml)")
    return "\n".join(lines) + "\n"
