"""Inline SVG plots of a species' functions for the HTML report.

For each species: Cp, H − H(298.15), S and G − G(preferred record) against T, one line per
record (every source), segment joints marked, and the temperatures where findings are worst
shaded. Every record of every plotted species is evaluated in one vectorised call of
:meth:`pipeline.functions.RecordFunctions.evaluate`; each figure is then written as SVG text
directly (see "drawing" below).
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


# ------------------------------------------------------------------------------ drawing
#
# The figure is written as SVG text directly (no plotting library): four panels on a
# 900 × 600 canvas, "nice" ticks (1, 2, 2.5, 5 × 10^k), one path per record, dotted joint
# lines, shaded finding bands and a legend. A few milliseconds per species instead of a
# quarter of a second, so the report stays fast however many species have findings.

_W, _H = 900.0, 600.0
_LEFT, _RIGHT, _TOP, _BOTTOM = 68.0, 24.0, 26.0, 92.0
_HGAP, _VGAP = 64.0, 44.0
_DASH = {"-": "", "--": "6 3", "-.": "6 3 1.5 3", ":": "1.5 2.5"}


def nice_ticks(lo: float, hi: float, target: int = 6) -> np.ndarray:
    """Round tick values covering [lo, hi]: steps of 1, 2, 2.5 or 5 × 10^k, about ``target`` ticks."""
    if not (np.isfinite(lo) and np.isfinite(hi)):
        return np.array([0.0])
    if hi <= lo:
        return np.array([lo])
    raw = (hi - lo) / max(target - 1, 1)
    mag = 10.0 ** np.floor(np.log10(raw))
    step = next(m * mag for m in (1.0, 2.0, 2.5, 5.0, 10.0) if m * mag >= raw * 0.999)
    first = np.ceil(lo / step - 1e-9) * step
    ticks = np.arange(first, hi + step * 1e-9, step)
    return np.where(np.abs(ticks) < step * 1e-9, 0.0, ticks)


def _tick_text(v: float, step: float) -> str:
    if step >= 1 or v == 0:
        return f"{v:.0f}" if abs(v) < 1e6 else f"{v:.3g}"
    e = np.floor(np.log10(step))
    mantissa = round(step / 10 ** e, 6)
    digits = int(min(8, max(0, -e + (1 if mantissa == 2.5 else 0))))
    return f"{v:.{digits}f}"


def _e(text: str) -> str:
    from html import escape

    return escape(str(text), quote=True)


def _path(x: np.ndarray, y: np.ndarray) -> str:
    """SVG path data through finite points, broken where a value is NaN."""
    ok = np.isfinite(x) & np.isfinite(y)
    out, pen = [], False
    for xi, yi, k in zip(np.round(x, 1).tolist(), np.round(y, 1).tolist(), ok.tolist()):
        if not k:
            pen = False
            continue
        out.append(f"{'L' if pen else 'M'}{xi:g} {yi:g}")
        pen = True
    return "".join(out)


def _figure(sp: str, curves: list[dict], g_pref: np.ndarray, pref_id: str | None,
            findings: pd.DataFrame, colour: dict, salt: str) -> str:
    """The 2 × 2 SVG figure of one species (module doc), ready to inline in HTML."""
    panels = (("cp", "Cp  [J/(mol·K)]", 1.0), ("hmh", "H − H(298.15 K)  [kJ/mol]", 1e-3),
              ("s", "S  [J/(mol·K)]", 1.0), ("g", "G − G(preferred record)  [kJ/mol]", 1e-3))
    t_lo = min(np.nanmin(c["t"]) for c in curves)
    t_hi = max(np.nanmax(c["t"]) for c in curves)
    if not t_hi > t_lo:
        t_hi = t_lo + 1.0
    width = max(0.015 * (t_hi - t_lo), 5.0)
    f = findings[findings["t_k"].notna()]
    rank = f["severity"].map({"error": 0, "warning": 1, "info": 2}).where(~f["waived"].astype(bool), 2)
    shaded = (f.assign(_r=rank, _t=f["t_k"].round(6)).sort_values("_r").drop_duplicates("_t")
              .assign(severity=lambda d: d["_r"].map({0: "error", 1: "warning", 2: "info"})))
    pw = (_W - _LEFT - _RIGHT - _HGAP) / 2
    ph = (_H - _TOP - _BOTTOM - _VGAP) / 2
    xt = nice_ticks(t_lo, t_hi, 7)
    xstep = xt[1] - xt[0] if len(xt) > 1 else 1.0
    label = f"Cp, H − H298, S and G − G(preferred) against T for {sp}"
    out = [f'<svg xmlns="http://www.w3.org/2000/svg" viewBox="0 0 {_W:g} {_H:g}" role="img" '
           f'aria-label="{_e(label)}" class="plot" font-family="system-ui, sans-serif" font-size="11">']
    for i, (key, title, scale) in enumerate(panels):
        x0 = _LEFT + (i % 2) * (pw + _HGAP)
        y0 = _TOP + (i // 2) * (ph + _VGAP)
        ys = [((c[key] - g_pref) * scale if key == "g" else c[key] * scale) for c in curves]
        vals = np.concatenate([y[np.isfinite(y)] for y in ys] + [np.empty(0)])
        extra = [0.0] if key == "g" or (key == "cp" and len(vals) and vals.min() <= 0) else []
        vals = np.concatenate([vals, extra])
        if len(vals):
            lo, hi = float(vals.min()), float(vals.max())
        else:
            lo, hi = 0.0, 1.0
        if hi - lo < 1e-9 * max(1.0, abs(hi)):
            lo, hi = lo - max(1.0, abs(lo)) * 0.05, hi + max(1.0, abs(hi)) * 0.05
        pad = 0.05 * (hi - lo)
        lo, hi = lo - pad, hi + pad
        yt = nice_ticks(lo, hi, 6)
        ystep = yt[1] - yt[0] if len(yt) > 1 else 1.0

        def X(t):
            return x0 + (np.asarray(t, float) - t_lo) / (t_hi - t_lo) * pw

        def Y(v):
            return y0 + ph - (np.asarray(v, float) - lo) / (hi - lo) * ph

        out.append(f'<text x="{x0:.1f}" y="{y0 - 7:.1f}" font-weight="bold" font-size="11.5">{_e(title)}</text>')
        out.append(f'<svg x="{x0:.1f}" y="{y0:.1f}" width="{pw:.1f}" height="{ph:.1f}" '
                   f'viewBox="{x0:.1f} {y0:.1f} {pw:.1f} {ph:.1f}" overflow="hidden">')
        for r in shaded.itertuples(index=False):
            a, b = X(r.t_k - width), X(r.t_k + width)
            out.append(f'<rect x="{a:.1f}" y="{y0:.1f}" width="{b - a:.1f}" height="{ph:.1f}" '
                       f'fill="{SHADE[r.severity]}"/>')
        for v in yt:
            out.append(f'<line x1="{x0:.1f}" x2="{x0 + pw:.1f}" y1="{Y(v):.1f}" y2="{Y(v):.1f}" '
                       'stroke="#e3e3e3" stroke-width="0.5"/>')
        for v in xt:
            out.append(f'<line x1="{X(v):.1f}" x2="{X(v):.1f}" y1="{y0:.1f}" y2="{y0 + ph:.1f}" '
                       'stroke="#e3e3e3" stroke-width="0.5"/>')
        if extra:
            out.append(f'<line x1="{x0:.1f}" x2="{x0 + pw:.1f}" y1="{Y(0.0):.1f}" y2="{Y(0.0):.1f}" '
                       f'stroke="{"#888888" if key == "g" else "#a23b2c"}" stroke-width="0.8"/>')
        per_source: dict[str, int] = {}
        for c, y in zip(curves, ys):
            k = per_source.get(c["source"], 0)
            per_source[c["source"]] = k + 1
            col = colour.get(c["source"], "#333333")
            for tj in c["joints"]:
                out.append(f'<line x1="{X(tj):.1f}" x2="{X(tj):.1f}" y1="{y0:.1f}" y2="{y0 + ph:.1f}" '
                           f'stroke="{col}" stroke-width="0.8" stroke-dasharray="1.5 2.5" opacity="0.8"/>')
            dash = _DASH[DASHES[k % len(DASHES)]]
            out.append(f'<path d="{_path(X(c["t"]), Y(y))}" fill="none" stroke="{col}" stroke-width="1.4"'
                       + (f' stroke-dasharray="{dash}"' if dash else "") + "/>")
        if key == "g" and len(curves) == 1:
            out.append(f'<text x="{x0 + pw / 2:.1f}" y="{y0 + ph * 0.38:.1f}" text-anchor="middle" '
                       'fill="#5a5a5a">one record: nothing to compare</text>')
        out.append("</svg>")
        out.append(f'<rect x="{x0:.1f}" y="{y0:.1f}" width="{pw:.1f}" height="{ph:.1f}" fill="none" '
                   'stroke="#555555" stroke-width="0.6"/>')
        for v in yt:
            out.append(f'<text x="{x0 - 4:.1f}" y="{Y(v) + 3.5:.1f}" text-anchor="end" fill="#333333">'
                       f"{_tick_text(v, ystep)}</text>")
        if i >= 2:
            for v in xt:
                out.append(f'<text x="{X(v):.1f}" y="{y0 + ph + 14:.1f}" text-anchor="middle" fill="#333333">'
                           f"{_tick_text(v, xstep)}</text>")
            out.append(f'<text x="{x0 + pw / 2:.1f}" y="{y0 + ph + 30:.1f}" text-anchor="middle">T  [K]</text>')
    # legend: one entry per record, then the joint and band markers
    entries = []
    per_source = {}
    for c in curves:
        k = per_source.get(c["source"], 0)
        per_source[c["source"]] = k + 1
        entries.append(("line", colour.get(c["source"], "#333333"), _DASH[DASHES[k % len(DASHES)]],
                        c["record_id"] + ("  (preferred)" if c["record_id"] == pref_id else "")))
    entries.append(("line", "#777777", "1.5 2.5", "segment joint"))
    entries.append(("band", SHADE["error"], "", "worst T of a finding"))
    # flow layout: entries left to right, wrapping at the canvas width (≈ 6.3 px per character)
    lx, row = _LEFT, 0
    ly = _H - _BOTTOM + 50
    for kind, col, dash, text in entries:
        w = 28 + 6.3 * len(text) + 18
        if lx + w > _W - _RIGHT and lx > _LEFT:
            lx, row = _LEFT, row + 1
        yy = ly + row * 15
        if kind == "band":
            out.append(f'<rect x="{lx:.1f}" y="{yy - 5:.1f}" width="22" height="9" fill="{col}"/>')
        else:
            out.append(f'<line x1="{lx:.1f}" x2="{lx + 22:.1f}" y1="{yy:.1f}" y2="{yy:.1f}" stroke="{col}" '
                       f'stroke-width="1.4"' + (f' stroke-dasharray="{dash}"' if dash else "") + "/>")
        out.append(f'<text x="{lx + 28:.1f}" y="{yy + 3.5:.1f}">{_e(text)}</text>')
        lx += w
    if row > 1:   # grow the canvas for long legends
        out[0] = out[0].replace(f'viewBox="0 0 {_W:g} {_H:g}"', f'viewBox="0 0 {_W:g} {_H + 15 * (row - 1):g}"')
    out.append("</svg>")
    return "".join(out)


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
