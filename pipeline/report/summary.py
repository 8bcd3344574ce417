"""The plain-text summary printed at the end of ``thermoledger run``."""
from __future__ import annotations

import pandas as pd


def summary_text(run, max_rows: int = 40) -> str:
    f = run.findings if run.findings is not None else pd.DataFrame(columns=["severity"])
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
    live = f[~f["waived"].astype(bool)] if len(f) else f
    counts = live["severity"].value_counts() if len(live) else pd.Series(dtype=int)
    lines.append(f"  findings: {int(counts.get('error', 0))} error, {int(counts.get('warning', 0))} warning, "
                 f"{int(counts.get('info', 0))} info" + (f"   ({int(f['waived'].sum())} waived)" if len(f) else ""))
    prev = (run.extra.get("previous") or {}).get("findings")
    if prev is not None and len(f):
        new = f[~f["fingerprint"].isin(set(prev["fingerprint"].dropna()))]
        gone = prev[~prev["fingerprint"].isin(set(f["fingerprint"]))]["fingerprint"].nunique()
        lines.append(f"  since the previous run: {len(new)} new, {gone} no longer reported")
    if len(live):
        by = live.groupby(["check_id", "severity"]).size().reset_index(name="n")
        lines.append("")
        lines.append("  by check:")
        for r in by.itertuples(index=False):
            lines.append(f"    {r.check_id:34s} {r.severity:8s} {r.n:6d}")
        lines.append("")
        lines.append("  errors and warnings:")
        shown = live[live["severity"].isin(["error", "warning"])]
        for r in shown.head(max_rows).itertuples(index=False):
            src = f" [{r.source_id}]" if isinstance(r.source_id, str) else ""
            lines.append(f"    {r.severity:7s} {r.check_id:30s} {r.subject}{src}: {r.message}")
            if isinstance(r.hint, str) and r.hint and r.check_id != "schema.rejected":
                lines.append(f"    {'':7s} {'':30s} hint: {r.hint}")
        if len(shown) > max_rows:
            lines.append(f"    … {len(shown) - max_rows} more in curated/report/ and the findings table")
    lines.append("")
    lines.append(f"  outputs: {run.out}/thermo.duckdb, {run.out}/parquet/, {run.out}/report/ "
                 "(index.html, findings.json, junit.xml)")
    return "\n".join(lines) + "\n"
