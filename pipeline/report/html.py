"""``index.html``: the self-contained review report of one release.

One file, no network: styles, the filter script and every plot (SVG) are inline, and the
page links nothing outside itself. Sections, in the order a reviewer works:

1. status and summary — unwaived findings by check × severity and by source;
2. new since the previous run — findings whose fingerprint the previous release did not
   have (and those that disappeared);
3. all findings — a table filtered by severity, check, source and free text (a small
   inline script; without scripts the whole table shows);
4. species plots — for the most severe species with findings (capped, see ``MAX_PLOTS``);
5. the reaction network — cycles that do not close, worst offenders, reconciled values;
6. the caution about safety-relevant use.
"""
from __future__ import annotations

import hashlib
import math
from html import escape

import numpy as np
import pandas as pd

MAX_PLOTS = 60
MAX_ROWS = 5000
MAX_NEW = 500
NETWORK_IDS = ("cycle.closure", "network.worst-offender")
SEV_RANK = {"error": 0, "warning": 1, "info": 2}

CSS = """
:root { --ink:#1d1d1d; --muted:#5a5a5a; --line:#d6d6d6; --band:#f5f5f2; --accent:#1f4e79; }
* { box-sizing: border-box; }
body { margin:0; color:var(--ink); background:#fff; font:15px/1.45 system-ui, -apple-system,
       "Segoe UI", Roboto, "Helvetica Neue", Arial, sans-serif; }
main { max-width:1080px; margin:0 auto; padding:1.2rem 1.2rem 3rem; }
h1 { font-size:1.55rem; margin:0 0 .2rem; }
h2 { font-size:1.2rem; margin:2.2rem 0 .6rem; padding-bottom:.25rem; border-bottom:2px solid var(--ink); }
h3 { font-size:1.02rem; margin:1.4rem 0 .4rem; }
p { margin:.4rem 0; }
a { color:var(--accent); }
.meta { color:var(--muted); font-size:.9rem; }
nav { margin:.8rem 0; font-size:.92rem; }
nav a { margin-right:1rem; }
.status { margin:1rem 0; padding:.7rem .9rem; border-left:6px solid; background:var(--band); }
.status.fail { border-color:#a23b2c; } .status.pass { border-color:#2e7d32; }
.caution { margin:1rem 0; padding:.6rem .9rem; border:1px solid #b26b00; background:#fffaf0; font-size:.92rem; }
table { width:100%; border-collapse:collapse; table-layout:fixed; margin:.4rem 0 1rem; font-size:.88rem; }
th, td { text-align:left; vertical-align:top; padding:.3rem .4rem; border-bottom:1px solid var(--line);
         overflow-wrap:anywhere; word-break:normal; }
th { background:var(--band); font-weight:600; border-bottom:1px solid #999; }
td.num, th.num { text-align:right; font-variant-numeric:tabular-nums; }
table.counts { width:auto; min-width:50%; max-width:100%; table-layout:auto; }
.sev { display:inline-block; padding:0 .35rem; border-radius:3px; font-size:.8rem; font-weight:600; }
.sev-error { color:#8a1c12; background:#f9dcd8; } .sev-warning { color:#6b4200; background:#fdebc8; }
.sev-info { color:#1f4e79; background:#e3edf7; }
.tag { display:inline-block; margin-left:.25rem; padding:0 .3rem; border:1px solid #888; border-radius:3px;
       font-size:.72rem; color:#333; }
tr.waived td { color:#6b6b6b; }
small, .small { color:var(--muted); font-size:.82rem; }
#filters { display:flex; flex-wrap:wrap; gap:.5rem 1rem; align-items:end; margin:.5rem 0; padding:.6rem;
           background:var(--band); border:1px solid var(--line); }
#filters label { display:flex; flex-direction:column; font-size:.8rem; color:var(--muted); }
#filters select, #filters input[type=search] { font:inherit; font-size:.9rem; padding:.15rem .3rem; max-width:16rem; }
#filters label.inline { flex-direction:row; align-items:center; gap:.3rem; }
#f-count { margin-left:auto; font-size:.85rem; }
figure { margin:.4rem 0 1rem; break-inside:avoid; page-break-inside:avoid; }
svg.plot { width:100%; height:auto; display:block; }
.species { border-top:1px solid var(--line); padding-top:.2rem; }
ul.flist { margin:.2rem 0 .6rem 1.1rem; padding:0; font-size:.88rem; }
@media print {
  body { font-size:11pt; } main { max-width:none; padding:0; }
  nav, #filters { display:none; } a { color:inherit; text-decoration:none; }
  h2 { break-after:avoid; } .species { break-inside:avoid; }
}
"""

SCRIPT = """
(function () {
  var table = document.getElementById('findings-table');
  if (!table) { return; }
  var rows = Array.prototype.slice.call(table.tBodies[0].rows);
  var sev = document.getElementById('f-sev'), chk = document.getElementById('f-check'),
      src = document.getElementById('f-source'), txt = document.getElementById('f-text'),
      wv = document.getElementById('f-waived'), cnt = document.getElementById('f-count');
  var texts = rows.map(function (r) { return r.textContent.toLowerCase(); });
  function apply() {
    var s = sev.value, c = chk.value, o = src.value, t = txt.value.trim().toLowerCase(),
        w = wv.checked, n = 0;
    rows.forEach(function (r, i) {
      var d = r.dataset;
      var ok = (!s || d.sev === s) && (!c || d.check === c) && (!o || d.source === o) &&
               (w || d.waived !== '1') && (!t || texts[i].indexOf(t) >= 0);
      r.hidden = !ok;
      if (ok) { n += 1; }
    });
    cnt.textContent = n + ' of ' + rows.length + ' findings shown';
  }
  [sev, chk, src, wv].forEach(function (e) { e.addEventListener('change', apply); });
  txt.addEventListener('input', apply);
  Array.prototype.forEach.call(document.querySelectorAll('a[data-check]'), function (a) {
    a.addEventListener('click', function () {
      sev.value = a.dataset.sev || ''; chk.value = a.dataset.check; src.value = ''; txt.value = '';
      apply();
    });
  });
  document.getElementById('f-reset').addEventListener('click', function () {
    sev.value = ''; chk.value = ''; src.value = ''; txt.value = ''; wv.checked = true; apply();
  });
  apply();
})();
"""


# --------------------------------------------------------------------------- helpers

def _e(x) -> str:
    if x is None or (isinstance(x, float) and math.isnan(x)):
        return ""
    return escape(str(x))


def _num(x, digits: int = 4) -> str:
    try:
        x = float(x)
    except (TypeError, ValueError):
        return ""
    return "" if math.isnan(x) else f"{x:.{digits}g}"


def species_anchor(key: str) -> str:
    return "sp-" + hashlib.sha1(key.encode()).hexdigest()[:10]


def _sev(s: str) -> str:
    return f'<span class="sev sev-{_e(s)}">{_e(s)}</span>'


def _src(x) -> str:
    return x if isinstance(x, str) and x else ""


def _values(r) -> str:
    obs, exp, tol = _num(r.observed), _num(r.expected), _num(r.tolerance)
    if not (obs or exp):
        return ""
    unit = _e(r.unit) if isinstance(r.unit, str) and r.unit not in ("1", "") else ""
    out = f"{obs or '–'} vs {exp or '–'}"
    if tol:
        out += f" <small>(tol {tol})</small>"
    return out + (f" <small>{unit}</small>" if unit else "")


def _finding_rows(df: pd.DataFrame, new: set, plotted: set) -> str:
    rows = []
    for r in df.itertuples(index=False):
        src = _src(r.source_id)
        subj = _e(r.subject).replace("+", "+<wbr>").replace(":", ":<wbr>")  # long cycle ids wrap
        if r.subject in plotted:
            subj = f'<a href="#{species_anchor(r.subject)}">{subj}</a>'
        tags = ""
        if r.fingerprint in new:
            tags += '<span class="tag">new</span>'
        waived = bool(r.waived)
        if waived:
            tags += '<span class="tag">waived</span>'
        extra = ""
        if isinstance(r.hint, str) and r.hint:
            extra += f"<br><small>hint: {_e(r.hint)}</small>"
        if waived:
            extra += f"<br><small>waived: {_e(r.waiver_reason)}</small>"
        rows.append(
            f'<tr data-sev="{_e(r.severity)}" data-check="{_e(r.check_id)}" data-source="{_e(src) or "-"}" '
            f'data-waived="{int(waived)}"{" class=waived" if waived else ""}>'
            f"<td>{_sev(r.severity)}{tags}</td><td>{_e(r.check_id).replace('.', '.<wbr>')}</td>"
            f"<td>{subj}<br><small>{_e(src) or '—'}</small></td>"
            f'<td class="num">{_num(r.t_k, 5)}</td><td>{_values(r)}</td>'
            f"<td>{_e(r.message)}{extra}</td></tr>")
    return "\n".join(rows)


def _findings_table(df: pd.DataFrame, new: set, plotted: set, table_id: str | None = None) -> str:
    tid = f' id="{table_id}"' if table_id else ""
    return (f"<table{tid}><colgroup><col style=\"width:10%\"><col style=\"width:15%\">"
            "<col style=\"width:14%\"><col style=\"width:7%\"><col style=\"width:15%\"><col></colgroup>"
            "<thead><tr><th>severity</th><th>check</th><th>subject / source</th><th class=\"num\">T [K]</th>"
            "<th>observed vs expected</th><th>message</th></tr></thead><tbody>\n"
            + _finding_rows(df, new, plotted) + "\n</tbody></table>")


def _counts_table(live: pd.DataFrame, waived: pd.DataFrame, by: str, label: str, link: bool) -> str:
    from ..checks import registry

    keys = sorted(set(live[by].fillna("—")) | set(waived[by].fillna("—")))
    if not keys:
        return "<p>No findings.</p>"
    lc = live.assign(_k=live[by].fillna("—")).groupby(["_k", "severity"]).size()
    wc = waived.assign(_k=waived[by].fillna("—")).groupby("_k").size()
    head = (f"<table class=\"counts\"><thead><tr><th>{label}</th><th class=\"num\">error</th>"
            "<th class=\"num\">warning</th><th class=\"num\">info</th><th class=\"num\">waived</th>"
            + ("<th>what it tests</th>" if link else "") + "</tr></thead><tbody>")
    body = []
    for k in keys:
        cells = []
        for s in ("error", "warning", "info"):
            n = int(lc.get((k, s), 0))
            if n and link:
                cells.append(f'<td class="num"><a href="#findings" data-check="{_e(k)}" data-sev="{s}">{n}</a></td>')
            else:
                cells.append(f'<td class="num">{n or ""}</td>')
        w = int(wc.get(k, 0))
        doc = ""
        if link:
            spec = registry.spec_for(k)
            doc = f"<td><small>{_e(spec.summary) if spec else ''}</small></td>"
        body.append(f"<tr><td>{_e(k)}</td>{''.join(cells)}<td class=\"num\">{w or ''}</td>{doc}</tr>")
    return head + "".join(body) + "</tbody></table>"


def _generic_table(df: pd.DataFrame, max_rows: int = 100) -> str:
    cols = list(df.columns)
    head = "".join(f"<th>{_e(c).replace('_', '_<wbr>')}</th>" for c in cols)
    body = []
    for row in df.head(max_rows).itertuples(index=False):
        cells = []
        for v in row:
            if isinstance(v, (float, int)) and not isinstance(v, bool):
                cells.append(f'<td class="num">{_num(v, 6)}</td>')
            else:
                cells.append(f"<td>{_e(v)}</td>")
        body.append("<tr>" + "".join(cells) + "</tr>")
    more = f"<p class=\"small\">First {max_rows} of {len(df)} rows; the rest are in the database.</p>" \
        if len(df) > max_rows else ""
    return f"<table><thead><tr>{head}</tr></thead><tbody>{''.join(body)}</tbody></table>{more}"


def plot_order(findings: pd.DataFrame, species_keys: set) -> list[str]:
    """Species with findings, most severe first: unwaived errors, then warnings, then the rest
    (waived or info), more findings first, then by key."""
    # membership of the few findings' subjects in the set (isin would hash the whole set)
    f = findings[np.fromiter((s in species_keys for s in findings["subject"]), dtype=bool, count=len(findings))]
    if not len(f):
        return []
    rank = f["severity"].map(SEV_RANK).where(~f["waived"].astype(bool), 3)
    g = (f.assign(_rank=rank, _err=(rank == 0).astype(int), _warn=(rank == 1).astype(int))
         .groupby("subject").agg(best=("_rank", "min"), errs=("_err", "sum"), warns=("_warn", "sum")))
    g = g.reset_index().sort_values(["best", "errs", "warns", "subject"], ascending=[True, False, False, True])
    return list(g["subject"])


# ------------------------------------------------------------------------------ page

def render_html(run, findings: pd.DataFrame, progress="run") -> str:
    """The whole page as one string (``progress``: as ``run.progress`` — the default —,
    or None for no messages)."""
    from .. import __version__
    from . import CAUTION
    from .plots import species_svgs
    from ..stages import exit_code

    m = run.manifest
    db_name = m.database.name if m is not None else "database"
    f = findings.copy()
    if not len(f):
        f = f.reindex(columns=list(findings.columns))
    waived_mask = f["waived"].astype(bool) if len(f) else pd.Series(dtype=bool)
    live, waived = f[~waived_mask], f[waived_mask]

    # ---- new since the previous run
    prev = (run.extra.get("previous") or {}).get("findings")
    prev_runs = (run.extra.get("previous") or {}).get("runs")
    prev_id = str(prev_runs["run_id"].iloc[-1]) if prev_runs is not None and len(prev_runs) else None
    if prev is not None:
        prev_fp = set(prev["fingerprint"].dropna())
        new_mask = ~f["fingerprint"].isin(prev_fp)
        cur_fp = set(f["fingerprint"].dropna())
        resolved = prev[~prev["fingerprint"].isin(cur_fp)].drop_duplicates("fingerprint")
    else:
        new_mask = pd.Series(True, index=f.index)
        resolved = f.iloc[0:0]
    new_df = f[new_mask]
    new_fp = set(new_df["fingerprint"])

    # ---- plots
    ctx = run.extra.get("ctx")
    rec_species = set(ctx.records["species"].dropna().unique().tolist()) \
        if ctx is not None and len(ctx.records) else set()
    order = plot_order(f, rec_species)
    plotted_list = order[:MAX_PLOTS]
    svgs = species_svgs(run, plotted_list, f, progress=run.progress if progress == "run" else progress)
    plotted = set(svgs)

    code = exit_code(f, run.fail_on)
    n_err = int((live["severity"] == "error").sum())
    n_warn = int((live["severity"] == "warning").sum())
    n_info = int((live["severity"] == "info").sum())
    frames = run.frames
    counts = (f"{len(m.sources) if m else 0} sources · {len(frames.get('species', []))} species · "
              f"{len(frames.get('records', []))} records · {len(frames.get('reactions', []))} reactions · "
              f"{len(frames.get('rejected', []))} rejected input records")
    reuse = run.extra.get("reuse") or {}
    if reuse.get("sources_reused"):
        counts += (f" · parsed frames of {len(reuse['sources_reused'])} unchanged source(s) reused from the "
                   f"cache, {len(reuse.get('sources_read', []))} source(s) read")

    out = ['<!DOCTYPE html><html lang="en"><head><meta charset="utf-8">',
           '<meta name="viewport" content="width=device-width, initial-scale=1">',
           f"<title>Review: {_e(db_name)} — run {_e(run.run_id)}</title>",
           f"<style>{CSS}</style></head><body><main>",
           f"<h1>Release review: {_e(db_name)}</h1>",
           f'<p class="meta">run {_e(run.run_id)} · thermoledger {_e(__version__)} · {_e(counts)}</p>',
           '<nav><a href="#summary">Summary</a><a href="#new">New since previous run</a>'
           '<a href="#findings">All findings</a><a href="#species">Species plots</a>'
           '<a href="#network">Reaction network</a></nav>']
    verdict = ("blocks the release" if code else "passes") + f" at --fail-on {_e(run.fail_on)}"
    out.append(f'<div class="status {"fail" if code else "pass"}"><strong>This run {verdict}</strong> '
               f"(exit code {code}). Not waived: {n_err} error(s), {n_warn} warning(s), {n_info} info; "
               f"waived: {len(waived)}.</div>")
    out.append(f'<p class="caution"><strong>Caution.</strong> {_e(CAUTION.removeprefix("Caution: "))}</p>')

    # ---- summary
    out.append('<h2 id="summary">Summary</h2>')
    out.append("<h3>By check and severity</h3><p class=\"small\">Counts are unwaived findings; "
               "a number links to those findings in the table below.</p>")
    out.append(_counts_table(live, waived, "check_id", "check", link=True))
    seen = set(f["check_id"].dropna())
    quiet = [c for c in dict.fromkeys(run.extra.get("checks_ran", [])) if c not in seen]
    if quiet:
        out.append(f'<p class="small">Checks that ran and found nothing ({len(quiet)}): '
                   + ", ".join(f"<code>{_e(c)}</code>" for c in quiet) + "</p>")
    out.append("<h3>By source</h3>")
    out.append(_counts_table(live, waived, "source_id", "source", link=False))

    # ---- new since the previous run
    out.append('<h2 id="new">New since the previous run</h2>')
    if prev is None:
        out.append("<p>No previous release in this output folder: every finding is new. "
                   "The next run will list only what changed.</p>")
    else:
        out.append(f"<p>Compared with the previous release (run {_e(prev_id) or 'unknown'}): "
                   f"<strong>{len(new_df)}</strong> new finding(s), {len(resolved)} no longer reported. "
                   "A finding is identified by its check, subject and source (its fingerprint), "
                   "so reordered inputs do not make it new.</p>")
    if len(new_df):
        shown = new_df.head(MAX_NEW)
        out.append(_findings_table(shown, new_fp, plotted, table_id="new-table"))
        if len(new_df) > MAX_NEW:
            out.append(f"<p class=\"small\">First {MAX_NEW} of {len(new_df)} new findings (most severe "
                       "first); filter the full table below for the rest.</p>")
    if len(resolved):
        items = "".join(f"<li>{_e(r.check_id)} · {_e(r.subject)}"
                        f"{' [' + _e(r.source_id) + ']' if _src(r.source_id) else ''}</li>"
                        for r in resolved.head(200).itertuples(index=False))
        out.append(f"<h3>No longer reported</h3><ul class=\"flist\">{items}</ul>")

    # ---- all findings
    out.append('<h2 id="findings">All findings</h2>')
    checks = sorted(f["check_id"].dropna().unique())
    sources = sorted({_src(s) or "-" for s in f["source_id"]})
    opt = lambda vals, label: "".join(f'<option value="{_e(v)}">{_e(label(v))}</option>' for v in vals)  # noqa: E731
    out.append('<div id="filters">'
               '<label>severity<select id="f-sev"><option value="">all</option>'
               + opt(("error", "warning", "info"), str) + "</select></label>"
               '<label>check<select id="f-check"><option value="">all</option>' + opt(checks, str) + "</select></label>"
               '<label>source<select id="f-source"><option value="">all</option>'
               + opt(sources, lambda v: "(none)" if v == "-" else v) + "</select></label>"
               '<label>text<input type="search" id="f-text" placeholder="species, message…"></label>'
               '<label class="inline"><input type="checkbox" id="f-waived" checked> show waived</label>'
               '<label class="inline"><button type="button" id="f-reset">reset</button></label>'
               f'<span id="f-count">{min(len(f), MAX_ROWS)} findings</span></div>')
    shown = f.head(MAX_ROWS)
    out.append(_findings_table(shown, new_fp, plotted, table_id="findings-table"))
    if len(f) > MAX_ROWS:
        out.append(f"<p class=\"small\">The table holds the {MAX_ROWS} most severe of {len(f)} findings; "
                   "findings.json and the findings table of thermo.duckdb hold them all.</p>")

    # ---- species plots
    out.append('<h2 id="species">Species plots</h2>')
    n_sp = len(order)
    if not n_sp:
        out.append("<p>No species has findings.</p>")
    else:
        cap = (f"Plots for the {len(plotted)} most severe of {n_sp} species with findings "
               f"(at most {MAX_PLOTS} are drawn; the others are in the findings table). "
               if n_sp > MAX_PLOTS else f"Plots for all {n_sp} species with findings. ")
        out.append(f"<p>{cap}Each source is one line (dashes tell a source's records apart); dotted "
                   "verticals mark segment joints; shaded bands mark the temperature where a finding "
                   "is worst (red: error, amber: warning, blue: info or waived). G is plotted against "
                   "the preferred record, which therefore lies on zero.</p>")
    rec = ctx.records if ctx is not None else pd.DataFrame(columns=["species"])
    for sp in plotted_list:
        if sp not in svgs:
            continue
        sf = f[f["subject"] == sp]
        items = "".join(f"<li>{_sev(r.severity)}{' <span class=tag>waived</span>' if bool(r.waived) else ''} "
                        f"{_e(r.check_id)} [{_e(_src(r.source_id)) or '—'}]"
                        f"{(' at ' + _num(r.t_k, 5) + ' K') if _num(r.t_k) else ''}: {_e(r.message)}</li>"
                        for r in sf.itertuples(index=False))
        recs = rec[rec["species"] == sp]
        rlist = ", ".join(f"{_e(r.record_id)} ({_num(r.t_low_k, 5)}–{_num(r.t_high_k, 5)} K)"
                          for r in recs.itertuples(index=False))
        out.append(f'<section class="species" id="{species_anchor(sp)}"><h3>{_e(sp)}</h3>'
                   f'<p class="small">records: {rlist}</p><ul class="flist">{items}</ul>'
                   f"<figure>{svgs[sp]}</figure></section>")

    # ---- network
    out.append('<h2 id="network">Reaction network</h2>')
    net = f[f["check_id"].isin(NETWORK_IDS)]
    cyc = net[net["check_id"] == "cycle.closure"]
    worst = net[net["check_id"] == "network.worst-offender"]
    out.append("<h3>Cycles that do not close</h3>")
    out.append(_findings_table(cyc, new_fp, plotted) if len(cyc) else
               "<p>No thermochemical cycle fails to close (or the data form no cycle).</p>")
    out.append("<h3>Worst offenders</h3>")
    if len(worst):
        w = (worst.assign(_r=worst["severity"].map(SEV_RANK), _abs=worst["observed"].abs())
             .sort_values(["_r", "_abs"], ascending=[True, False]).drop(columns=["_r", "_abs"]))
        out.append("<p class=\"small\">Measurements set aside by the network fit, largest standardised "
                   "residual first.</p>" + _findings_table(w, new_fp, plotted))
    else:
        out.append("<p>The network fit set no measurement aside.</p>")
    recon = ctx.tables_out.get("reconciled") if ctx is not None else None
    if recon is not None and len(recon):
        out.append("<h3>Reconciled enthalpies of formation</h3>" + _generic_table(recon))
    elif not len(frames.get("reactions", [])):
        out.append("<p class=\"small\">This database has no reaction measurements.</p>")

    out.append(f'<p class="small" style="margin-top:2rem">Files beside this page: findings.json (every '
               f"finding), junit.xml (for CI), summary.txt. Generated by thermoledger {_e(__version__)}.</p>")
    out.append(f"</main><script>{SCRIPT}</script></body></html>")
    return "\n".join(out)
