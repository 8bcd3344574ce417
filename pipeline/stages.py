"""The ordered stages of a run: ingest → validate → check → reconcile → emit → report.

Each stage is a function of the :class:`Run` that adds frames, findings or files to it.
The runner walks :data:`STAGES` in order, times each stage, and collects every finding
before the exit code is decided (:func:`exit_code`).
"""
from __future__ import annotations

import hashlib
import os
import time
from dataclasses import dataclass, field
from pathlib import Path
from typing import Callable

import numpy as np
import pandas as pd

from . import __version__
from .config import Config
from .constants import P_STD_BAR
from .findings import FINDING_COLUMNS, empty_findings, fingerprint, make_findings
from .ingest import base as ib
from .manifest import DATA_FORMATS, Manifest, load_manifest, unlisted_files


@dataclass
class Run:
    """Everything one run reads, derives and writes. Stages fill it in order."""

    raw: Path
    out: Path
    config: Config = field(default_factory=Config)
    waivers: Path | None = None
    fail_on: str = "error"
    #: ``progress(msg, done=None, total=None, stage=None)``; see ``cli/progress.py``
    progress: Callable[..., None] = lambda msg, done=None, total=None, stage=None: None
    manifest: Manifest | None = None
    frames: dict[str, pd.DataFrame] = field(default_factory=dict)
    findings_parts: list[pd.DataFrame] = field(default_factory=list)
    source_stats: list[dict] = field(default_factory=list)
    seconds: dict[str, float] = field(default_factory=dict)
    counts: dict[str, int] = field(default_factory=dict)
    run_id: str = ""
    started: str = ""
    findings: pd.DataFrame | None = None
    extra: dict = field(default_factory=dict)

    @property
    def p_db_bar(self) -> float:
        return self.manifest.database.reference_pressure_bar if self.manifest else P_STD_BAR

    def add_findings(self, df: pd.DataFrame | None) -> None:
        if df is not None and len(df):
            self.findings_parts.append(df)

    def reject(self, rows: pd.DataFrame) -> None:
        if len(rows):
            self.frames["rejected"] = pd.concat([self.frames["rejected"], rows[list(ib.REJECTED_COLUMNS)]],
                                                ignore_index=True)


# ------------------------------------------------------------------------------ ingest

def _sha256(path: Path) -> str:
    return hashlib.sha256(path.read_bytes()).hexdigest()


def stage_ingest(run: Run) -> None:
    """Read the manifest and every source into staging frames (SI units, raw keys)."""
    from .ingest import READERS
    from .ingest.convert import standard_state
    from .ingest.resolve import resolve_records, species_table

    from .cache import read_sources

    run.manifest = m = load_manifest(run.raw)
    # unchanged sources come from OUT/.cache (parsed frames keyed by file hash), the rest are read
    results: dict[str, ib.ReadResult] = read_sources(run, READERS)
    frames = {}
    for name, cols in (("records", ib.RECORD_COLUMNS), ("segments", ib.SEGMENT_COLUMNS),
                       ("table_points", ib.TABLE_POINT_COLUMNS), ("species_meta", ib.SPECIES_META_COLUMNS),
                       ("reactions", ib.REACTION_COLUMNS), ("rejected", ib.REJECTED_COLUMNS)):
        parts = [getattr(r, name) for r in results.values() if len(getattr(r, name))]
        frames[name] = pd.concat(parts, ignore_index=True) if parts else ib.empty(cols)
    run.frames = frames
    run.extra["n_read"] = {sid: r.n_read for sid, r in results.items()}
    run.extra["notes"] = [n for r in results.values() for n in r.notes]

    # Species keys for records, then the species table.
    recs, warn, bad, reasons = resolve_records(frames["records"], frames["species_meta"])
    run.add_findings(warn)
    if bad.any():
        _reject_records(run, recs[bad], [r for r, b in zip(reasons, bad) if b])
        recs = recs[~bad]
    frames["records"] = recs.reset_index(drop=True)
    keys = list(frames["records"]["species"]) + _reaction_species(frames["reactions"])
    known = {}
    for r in results.values():
        known.update(getattr(r, "formula_columns", {}))
    frames["species"] = species_table(keys, frames["species_meta"], known)
    standard_state(run)
    for f in unlisted_files(m):
        run.add_findings(make_findings(check_id="schema.unlisted-file", severity="warning", subject=f,
                                       subject_kind="source", message=f"raw/{f} is not listed in sources.toml",
                                       hint="add a [[source]] for it, or move it out of raw/"))
    for src in m.sources:
        if src.format in DATA_FORMATS and not (src.citation or "").strip():
            run.add_findings(make_findings(check_id="schema.citation", severity="warning", subject=src.id,
                                           subject_kind="source", source_id=src.id,
                                           message=f"source {src.id} has no citation",
                                           hint="add citation = \"who, what, when\" to its [[source]]"))


def _reaction_species(reactions: pd.DataFrame) -> list[str]:
    """Every species key of every reaction (with repeats), from the stoichiometry JSON: the
    keys of all rows are found in one regular-expression pass over the joined text (a key is
    a JSON string followed by ': '); a key with an escape is decoded by ``json``."""
    import json
    import re

    texts = [s for s in reactions["stoich_json"].to_numpy(object) if isinstance(s, str)]
    if not texts:
        return []
    joined = "\n".join(texts)
    if "\\" not in joined:                 # no escapes (the usual case): a simpler, faster pattern
        return re.findall(r'"([^"]*)": ', joined)
    keys = re.findall(r'"((?:[^"\\]|\\.)*)": ', joined)
    return [json.loads(f'"{k}"') if "\\" in k else k for k in keys]


def _reject_records(run: Run, recs: pd.DataFrame, reasons: list[str]) -> None:
    """Move whole records (and their segments/table points) to ``rejected``.

    Each input record is rejected as its reader counted it (accounting identity): a table's
    rows and a Shomate record's rows (one per segment) one by one, any other record once.
    ``raw_text`` is read back verbatim from the raw file.
    """
    from .functions import member

    ids = set(recs["record_id"])
    reason_of = dict(zip(recs["record_id"], reasons))
    root = run.manifest.root if run.manifest is not None else run.raw
    cache: dict = {}
    seg = run.frames["segments"]
    tp = run.frames["table_points"]
    in_seg = member(seg["record_id"], ids)
    in_tp = member(tp["record_id"], ids)
    n_seg = seg[in_seg].groupby("record_id").size()
    per_row = (recs["kind"].eq("table") | recs["form"].eq("shomate")).to_numpy()
    whole = recs[~per_row]
    parts = [pd.DataFrame({
        "source_id": whole["source_id"].to_numpy(), "file": whole["file"].to_numpy(),
        "line": whole["line"].to_numpy(),
        "raw_text": [ib.read_back(root, f, ln, ib.record_lines(fm, int(n_seg.get(r, 0))), cache)
                     or f"record {nm}" for f, ln, fm, r, nm in
                     zip(whole["file"], whole["line"], whole["form"], whole["record_id"], whole["name"])],
        "reason": [reason_of[r] for r in whole["record_id"]]})]
    file_of = dict(zip(recs["record_id"], recs["file"]))
    source_of = dict(zip(recs["record_id"], recs["source_id"]))
    shomate_ids = set(recs.loc[recs["form"].eq("shomate"), "record_id"])
    for rows_of in (tp[in_tp], seg[in_seg & member(seg["record_id"], shomate_ids)]):
        if len(rows_of):
            parts.append(pd.DataFrame({
                "source_id": rows_of["record_id"].map(source_of).to_numpy(),
                "file": rows_of["record_id"].map(file_of).to_numpy(),
                "line": rows_of["line"].to_numpy(),
                "raw_text": [ib.read_back(root, file_of[r], ln, 1, cache) or f"row of {r}"
                             for r, ln in zip(rows_of["record_id"], rows_of["line"])],
                "reason": [reason_of[r] for r in rows_of["record_id"]]}))
    run.reject(pd.concat(parts, ignore_index=True))
    run.frames["table_points"] = tp[~in_tp].reset_index(drop=True)
    run.frames["segments"] = seg[~in_seg].reset_index(drop=True)


# ---------------------------------------------------------------------------- validate

def stage_validate(run: Run) -> None:
    """pandera schemas on every staging frame; failing rows → rejected (whole records)."""
    from .validate import validate_frames

    validate_frames(run)
    _accounting(run)


def _accounting(run: Run) -> None:
    """Rows read = accepted + rejected for every source; a mismatch is a bug, said loudly."""
    from .ingest import PRIMARY_FRAME

    rej = run.frames["rejected"]
    for src in run.manifest.sources:
        primary = PRIMARY_FRAME[src.format]
        if primary == "shomate_rows":
            f = run.frames["segments"].merge(run.frames["records"][["record_id", "source_id"]], on="record_id")
        else:
            f = run.frames[primary]
        accepted = int((f["source_id"] == src.id).sum())
        rejected = int((rej["source_id"] == src.id).sum())
        read = int(run.extra["n_read"][src.id])
        run.source_stats.append(dict(source_id=src.id, rows_read=read, rows_accepted=accepted,
                                     rows_rejected=rejected))
        if read != accepted + rejected:
            run.add_findings(make_findings(
                check_id="schema.rejected", severity="error", subject=src.id, subject_kind="source",
                source_id=src.id, observed=read, expected=accepted + rejected,
                message=f"{src.id}: {read} records read but {accepted} accepted + {rejected} rejected",
                hint="an internal accounting error: please report it with this source file"))
    if len(rej):
        run.add_findings(make_findings(
            check_id="schema.rejected", severity="error",
            subject=[f"{f}:{l}" for f, l in zip(rej["file"], rej["line"])], subject_kind="source",
            source_id=rej["source_id"], message=[r if f"{f}:{l}" in str(r) else f"{f}:{l}: {r}"
                     for f, l, r in zip(rej["file"], rej["line"], rej["reason"])],
            hint="the record is kept verbatim in the rejected table"))


# ------------------------------------------------------------------------------- check

def stage_check(run: Run) -> None:
    """Run every registered check on the validated frames."""
    from .checks import registry
    from .checks.context import CheckContext
    from .checks.reactions import NETWORK_CHECK, start_network_fit
    from .checks.runner import run_checks

    f = run.frames
    ctx = CheckContext(species=f["species"], records=f["records"], segments=f["segments"],
                       table_points=f["table_points"], reactions=f["reactions"],
                       config=run.config, p_db_bar=run.p_db_bar,
                       sources=pd.DataFrame([dict(source_id=s.id, priority=s.priority, kind=s.kind)
                                             for s in run.manifest.sources],
                                            columns=["source_id", "priority", "kind"]))
    run.extra["ctx"] = ctx
    fitting = False
    if run.extra.get("background_network") and NETWORK_CHECK not in run.config.disabled:
        # a large network is fitted on the second CPU while the checks below run here
        fitting = start_network_fit(ctx, pd.concat(run.findings_parts, ignore_index=True)
                                    if run.findings_parts else None)
    specs = [s for s in registry.runnable("check") if s.id not in run.config.disabled]
    # on a large database part of the checks run in a forked process (checks.runner), when
    # a CPU is free for it: the network fit's worker takes one (both on one spare CPU gain
    # nothing and build the shared context twice; at 10⁵ on 2 CPUs check + reconcile took
    # 21.1 s with both, 18.4 s with the fit alone, on a machine whose noise is ±3 s)
    split = None if (os.cpu_count() or 1) - 1 - fitting >= 1 else False
    for spec, found in zip(specs, run_checks(ctx, specs, run.progress, split=split)):
        run.extra.setdefault("checks_ran", []).append(spec.id)
        run.add_findings(found)


# --------------------------------------------------------------------------- reconcile

def stage_reconcile(run: Run) -> None:
    """Reaction residuals, cycles and the network fit (checks registered for stage 'network')."""
    from .checks import registry
    from .checks.runner import safe_run

    ctx = run.extra["ctx"]
    ctx.prior_findings = (pd.concat(run.findings_parts, ignore_index=True)
                          if run.findings_parts else empty_findings())
    specs = [s for s in registry.runnable("network") if s.id not in run.config.disabled]
    for i, spec in enumerate(specs):
        run.progress(f"check {spec.id}", i, len(specs))
        run.extra.setdefault("checks_ran", []).append(spec.id)
        run.add_findings(safe_run(spec, ctx))


# -------------------------------------------------------------------------------- emit

def collect_findings(run: Run) -> pd.DataFrame:
    """All findings in a fixed order, waivers applied (``--waivers``), with fingerprints
    (``first_seen_run`` is carried from the previous release by ``curate``)."""
    from .waivers import apply_waivers, load_waivers

    parts = [p for p in run.findings_parts if len(p)]
    df = pd.concat(parts, ignore_index=True) if parts else empty_findings()
    # waived findings stay, marked; expired or stale waivers become findings themselves
    df = apply_waivers(df, load_waivers(run.waivers), today=run.extra.get("today"))
    sev_rank = df["severity"].map({"error": 0, "warning": 1, "info": 2})
    # the full key (message too) makes the order independent of the order of the inputs
    df = (df.assign(_r=sev_rank).sort_values(["_r", "check_id", "subject", "source_id", "t_k", "message"],
                                             kind="stable", na_position="first")
          .drop(columns="_r").reset_index(drop=True))
    df["fingerprint"] = fingerprint(df) if len(df) else pd.Series(dtype=object)
    df["first_seen_run"] = run.run_id
    return df[list(FINDING_COLUMNS)]


def stage_emit(run: Run) -> None:
    """Preferred records, refits and properties; then the curated release (DuckDB, Parquet)."""
    from .curate import derive, write_release

    run.findings = collect_findings(run)
    derive(run)  # chooses preferred records from these findings; adds export.fit-quality ones
    run.findings = collect_findings(run)
    ctx = run.extra.get("ctx")
    if ctx is not None:
        run.extra.setdefault("extra_tables", {}).update(ctx.tables_out)
    write_release(run)


def stage_report(run: Run) -> None:
    """Reports beside the release (HTML, JSON, JUnit) when the report package provides them."""
    from . import report

    report.write_reports(run)


STAGES: tuple[tuple[str, Callable[[Run], None]], ...] = (
    ("ingest", stage_ingest),
    ("validate", stage_validate),
    ("check", stage_check),
    ("reconcile", stage_reconcile),
    ("emit", stage_emit),
    ("report", stage_report),
)


def execute(run: Run) -> Run:
    """Walk the stages in order, timing each."""
    from . import cache
    from .curate import publish

    run.started, run.run_id = cache.run_stamp()
    # unchanged inputs, configuration, waivers and tool: reuse the current release (cache.py)
    t0 = time.perf_counter()
    run.manifest = load_manifest(run.raw)
    run.extra["cache_key"] = cache.run_key(run)
    if cache.reuse_release(run, t0):
        publish(run)
        return run
    # all stages run: the check stage may start the network fit early (stage_check)
    run.extra["background_network"] = True
    try:
        for name, fn in STAGES:
            run.progress(name, stage=name)
            t0 = time.perf_counter()
            fn(run)
            run.seconds[name] = time.perf_counter() - t0
    finally:
        if "ctx" in run.extra:
            from .checks.reactions import close_background

            close_background(run.extra["ctx"])
    cache.finish(run)  # every stage's seconds, the run key and what was reused, in the runs row
    publish(run)
    return run


def exit_code(findings: pd.DataFrame, fail_on: str) -> int:
    """0 when nothing unwaived is at or above ``fail_on``; 1 otherwise (outputs.md)."""
    if fail_on == "never" or findings is None or not len(findings):
        return 0
    levels = {"error": ("error",), "warning": ("error", "warning")}[fail_on]
    live = findings[~findings["waived"].astype(bool)]
    return int(live["severity"].isin(levels).any())
