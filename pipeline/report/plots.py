"""Inline SVG plots of a species' functions for the HTML report.

For each species: Cp, H − H(298.15), S and G − G(preferred record) against T, one line per
record (every source), segment joints marked, and the temperatures where findings are worst
shaded. Every record of every plotted species is evaluated in one vectorised call of
:meth:`pipeline.functions.RecordFunctions.evaluate`; matplotlib then draws each figure with
its object API (``Figure``, no pyplot state, no display) into an SVG string.
"""
from __future__ import annotations

import io
import re

import numpy as np
import pandas as pd

#: line colours, assigned to sources in sorted order (dark enough to print in grey scale)
PALETTE = ("#1f4e79", "#a23b2c", "#2e7d32", "#6a3d9a", "#b26b00", "#4d4d4d", "#00838f", "#ad1457")
DASHES = ("-", "--", "-.", ":")
SHADE = {"error": "#f4c7c3", "warning": "#fbe3b5", "info": "#d9e6f2"}
N_GRID = 160


def _grid(t_lo: float, t_hi: float, extra: np.ndarray) -> np.ndarray:
    """Plot temperatures: an even grid, both sides of every joint, and the findings' T."""
    g = np.linspace(t_lo, t_hi, N_GRID)
    pts = np.concatenate([g, extra[(extra >= t_lo) & (extra <= t_hi)]])
    return np.unique(pts)


def preferred_records(run, records: pd.DataFrame, findings: pd.DataFrame) -> dict[str, str]:
    """species → preferred record id: the species table's choice when it has one, else the
    rule of :mod:`pipeline.preferred` applied here."""
    from ..preferred import choose_preferred

    sp = run.frames.get("species", pd.DataFrame())
    out: dict[str, str] = {}
    if "preferred_record_id" in sp:
        known = sp.dropna(subset=["preferred_record_id"])
        out.update(zip(known["species"], known["preferred_record_id"]))
    missing = records[~records["species"].isin(list(out))]
    if len(missing) and run.manifest is not None:
        sources = pd.DataFrame([dict(source_id=s.id, priority=s.priority, kind=s.kind) for s in run.manifest.sources])
        pref = choose_preferred(missing, sources, findings)
        out.update(zip(pref["species"], pref["preferred_record_id"]))
    return out


def species_svgs(run, species: list[str], findings: pd.DataFrame, progress=None) -> dict[str, str]:
    """species key → SVG text of its 2×2 figure (species without records are left out)."""
    ctx = run.extra.get("ctx")
    if ctx is None or not species:
        return {}
    rec = ctx.records[ctx.records["species"].isin(species)].sort_values(["species", "source_id", "record_id"])
    if not len(rec):
        return {}
    pref = preferred_records(run, ctx.records[ctx.records["species"].isin(species)], findings)
    seg = ctx.segments[ctx.segments["record_id"].isin(rec["record_id"])]
    joints = (seg.sort_values(["record_id", "t_low_k"]).groupby("record_id")["t_high_k"]
              .apply(lambda s: s.to_numpy(float)[:-1]))
    sp_find = findings[findings["subject"].isin(species) & findings["t_k"].notna()]
    colour = {s: PALETTE[i % len(PALETTE)] for i, s in enumerate(sorted(ctx.records["source_id"].dropna().unique()))}

    # one evaluation for every (record, T) pair and the preferred record at the same T
    plan, rid_parts, t_parts = [], [], []
    for sp, r in rec.groupby("species", sort=False):
        lo, hi = float(r["t_low_k"].min()), float(r["t_high_k"].max())
        jt = np.concatenate([joints.get(x, np.empty(0)) for x in r["record_id"]] + [np.empty(0)])
        extra = np.concatenate([jt, jt * (1 + 1e-9), sp_find.loc[sp_find["subject"] == sp, "t_k"].to_numpy(float)])
        t = _grid(lo, hi, extra)
        for row in r.itertuples(index=False):
            plan.append((sp, row.record_id, row.source_id, len(t), float(row.t_low_k), float(row.t_high_k)))
            rid_parts.append(np.full(len(t), row.record_id, dtype=object))
            t_parts.append(t)
        p = pref.get(sp)
        plan.append((sp, "__pref__", p, len(t), np.nan, np.nan))
        rid_parts.append(np.full(len(t), p if p is not None else r["record_id"].iloc[0], dtype=object))
        t_parts.append(t)
    v = ctx.functions.evaluate(np.concatenate(rid_parts), np.concatenate(t_parts))
    t_all = np.concatenate(t_parts)

    curves: dict[str, list] = {}
    g_pref: dict[str, np.ndarray] = {}
    pos = 0
    for sp, rid, src, n, lo, hi in plan:
        sl = slice(pos, pos + n)
        pos += n
        if rid == "__pref__":
            g_pref[sp] = v.g[sl] if src is not None else np.full(n, np.nan)
            continue
        t = t_all[sl]
        inside = (t >= lo - 1e-9) & (t <= hi + 1e-9)
        mask = np.where(inside, 1.0, np.nan)
        curves.setdefault(sp, []).append(dict(record_id=rid, source=src, t=t, cp=v.cp[sl] * mask,
                                              hmh=v.h_minus_h298[sl] * mask, s=v.s[sl] * mask,
                                              g=v.g[sl] * mask, joints=joints.get(rid, np.empty(0))))
    out = {}
    for i, sp in enumerate(species):
        if sp not in curves:
            continue
        if progress is not None:
            progress(f"plot {sp}", i, len(species))
        f = findings[(findings["subject"] == sp)]
        out[sp] = _figure(sp, curves[sp], g_pref[sp], pref.get(sp), f, colour, salt=f"tl{i}")
    return out


def _figure(sp: str, curves: list[dict], g_pref: np.ndarray, pref_id: str | None,
            findings: pd.DataFrame, colour: dict, salt: str) -> str:
    import matplotlib
    import matplotlib.lines
    import matplotlib.patches
    from matplotlib.figure import Figure

    rc = {"svg.fonttype": "none", "svg.hashsalt": salt, "font.size": 9,
          "axes.edgecolor": "#555555", "axes.linewidth": 0.6, "xtick.color": "#333333",
          "ytick.color": "#333333", "axes.titlesize": 9.5, "axes.titleweight": "bold"}
    with matplotlib.rc_context(rc):
        # fixed margins: an automatic layout engine costs more than the drawing itself
        fig = Figure(figsize=(9.0, 6.0))
        fig.subplots_adjust(left=0.075, right=0.985, top=0.955, bottom=0.15, wspace=0.2, hspace=0.2)
        axes = fig.subplots(2, 2, sharex=True).ravel()
        panels = (("cp", "Cp  [J/(mol·K)]", 1.0), ("hmh", "H − H(298.15 K)  [kJ/mol]", 1e-3),
                  ("s", "S  [J/(mol·K)]", 1.0), ("g", "G − G(preferred record)  [kJ/mol]", 1e-3))
        t_lo = min(np.nanmin(c["t"]) for c in curves)
        t_hi = max(np.nanmax(c["t"]) for c in curves)
        width = max(0.015 * (t_hi - t_lo), 5.0)
        # one band per temperature, in the colour of its most severe live finding
        f = findings[findings["t_k"].notna()]
        rank = f["severity"].map({"error": 0, "warning": 1, "info": 2}).where(~f["waived"].astype(bool), 2)
        shaded = (f.assign(_r=rank, _t=f["t_k"].round(6)).sort_values("_r").drop_duplicates("_t")
                  .assign(severity=lambda d: d["_r"].map({0: "error", 1: "warning", 2: "info"})))
        for ax, (key, title, scale) in zip(axes, panels):
            ax.set_title(title, loc="left")
            ax.grid(True, color="#e3e3e3", linewidth=0.5)
            for r in shaded.itertuples(index=False):
                ax.axvspan(r.t_k - width, r.t_k + width, color=SHADE[r.severity], zorder=0, lw=0)
            per_source: dict[str, int] = {}
            for c in curves:
                k = per_source.get(c["source"], 0)
                per_source[c["source"]] = k + 1
                y = (c[key] - g_pref) * scale if key == "g" else c[key] * scale
                label = c["record_id"] + ("  (preferred)" if c["record_id"] == pref_id else "")
                ax.plot(c["t"], y, color=colour.get(c["source"], "#333333"), ls=DASHES[k % len(DASHES)],
                        lw=1.4, label=label)
                for tj in c["joints"]:
                    ax.axvline(tj, color=colour.get(c["source"], "#333333"), ls=":", lw=0.8, alpha=0.8)
            if key == "cp":
                vals = np.concatenate([c["cp"] for c in curves])
                if np.nanmin(vals) <= 0:
                    ax.axhline(0.0, color="#a23b2c", lw=0.8)
            if key == "g":
                ax.axhline(0.0, color="#888888", lw=0.6)
                if len(curves) == 1:
                    ax.text(0.5, 0.62, "one record: nothing to compare", transform=ax.transAxes,
                            ha="center", va="center", color="#5a5a5a")
                    ax.set_yticks([0.0])
        axes[0].set_xlim(t_lo, t_hi)  # shared: bands at the range ends must not widen it
        for ax in axes[2:]:
            ax.set_xlabel("T  [K]")
        handles, labels = axes[0].get_legend_handles_labels()
        handles.append(matplotlib.lines.Line2D([], [], color="#777777", ls=":", lw=0.8))
        labels.append("segment joint")
        handles.append(matplotlib.patches.Patch(color=SHADE["error"]))
        labels.append("worst T of a finding")
        fig.legend(handles, labels, loc="lower center", ncols=min(4, len(labels)), frameon=False)
        buf = io.StringIO()
        fig.savefig(buf, format="svg", metadata={"Date": None, "Creator": None})
    return _inline(buf.getvalue(), f"Cp, H − H298, S and G − G(preferred) against T for {sp}")


def _inline(svg: str, label: str) -> str:
    """Make a standalone SVG document fit inline in HTML: drop the XML prolog and DOCTYPE,
    let CSS size it (viewBox kept), and give it an accessible name."""
    from html import escape

    svg = svg[svg.index("<svg"):]
    head_end = svg.index(">")
    head = svg[:head_end]
    head = re.sub(r'\s(width|height)="[^"]*"', "", head)
    head += f' role="img" aria-label="{escape(label)}" class="plot"'
    return head + svg[head_end:]
