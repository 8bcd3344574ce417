"""Incremental runs: content hashes decide what a run may reuse from the previous one.

Two levels, both keyed by SHA-256 digests of content (never by file times):

1. **The whole release.** The run key hashes everything a result depends on: the tool
   (version and a fingerprint of its own code), the manifest's bytes, the SHA-256 of every
   listed source file, the names of unlisted files under ``raw/`` (they raise findings),
   the configuration (tolerance overrides, disabled checks), the waivers file's bytes and
   which of its waivers have expired by today. Every run stores its key in the ``runs``
   table (``cache_key``). When a new run's key equals the key of the current release's
   last run, nothing any check could see has changed: the run copies that release (tables,
   Parquet, reports), appends its own ``runs`` row (``reuse_json`` names the run whose
   results it carries), and the summary and report say so. Findings keep their
   ``first_seen_run``; nothing is new since the previous run.

2. **Parsed sources.** A source's reader output (its staging frames, the records it
   rejected, its counts and notes) is stored as Parquet under
   ``OUT/.cache/sources/<key>/``, keyed by the tool fingerprint, the source's identity in
   the manifest (id, path, format, energy unit, NASA-7 layout: what a reader sees) and the
   file's SHA-256. An unchanged source is loaded instead of parsed; a changed file gets a
   new key, so exactly that source is read again. Everything after reading (key
   resolution, standard-state conversion, validation, every check, the network) runs on
   the whole database as in a fresh run, so the results are the same. Entries no source
   of the current manifest uses are removed at the end of a run.

The ``runs`` row of every run records in ``reuse_json`` what was reused:
``{"release": "<run id>"}`` or ``{"sources_reused": [...], "sources_read": [...]}``.

Level 1 needs duckdb and the standard library only: ``thermoledger run`` first calls
:func:`reuse_unchanged`, and imports the pipeline (pandas, scipy, the checks) only when the
release cannot be reused.
"""
from __future__ import annotations

import datetime as dt
import hashlib
import json
import os
import shutil
import time
from dataclasses import dataclass, field
from pathlib import Path
from typing import Callable

CACHE_DIR = ".cache"
#: Files of the code whose content is part of the tool fingerprint.
_CODE_ROOTS = ("pipeline", "schemas")
_FRAMES = ("records", "segments", "table_points", "species_meta", "reactions", "rejected")
RUNS_EXTRA_DOCS = {
    "cache_key": "SHA-256 of everything the results depend on (inputs, configuration, waivers, tool)",
    "reuse_json": "what this run reused: {\"release\": run id} or the sources whose parsed frames it reused",
}


def file_sha256(path: Path) -> str:
    """SHA-256 of a file's bytes, read in 1 MiB blocks."""
    h = hashlib.sha256()
    with open(path, "rb") as fh:
        for block in iter(lambda: fh.read(1 << 20), b""):
            h.update(block)
    return h.hexdigest()


_FINGERPRINT: str | None = None


def tool_fingerprint() -> str:
    """Version plus a digest of the package's own source files (a changed check is a new tool)."""
    global _FINGERPRINT
    if _FINGERPRINT is None:
        from . import __version__

        root = Path(__file__).resolve().parents[1]
        h = hashlib.sha256(__version__.encode())
        for sub in _CODE_ROOTS:
            for p in sorted((root / sub).rglob("*.py")):
                h.update(str(p.relative_to(root)).encode())
                h.update(p.read_bytes())
        _FINGERPRINT = f"{__version__}+{h.hexdigest()[:16]}"
    return _FINGERPRINT


def source_hashes(run) -> dict[str, str]:
    """source id → SHA-256 of its file (computed once per run, kept in ``run.extra["hashes"]``)."""
    hashes = run.extra.setdefault("hashes", {})
    for src in run.manifest.sources:
        if src.id not in hashes:
            hashes[src.id] = file_sha256(run.manifest.path_of(src))
    return hashes


def _config_doc(config) -> dict:
    return {"overrides": {k: dict(sorted(v.items())) for k, v in sorted(config.overrides.items())},
            "disabled": sorted(config.disabled)}


def run_key(run) -> str:
    """The key of level 1 (module doc). ``run.manifest`` must be loaded."""
    from .manifest import unlisted_files
    from .waivers import load_waivers

    m = run.manifest
    h = hashlib.sha256()

    def part(name: str, value) -> None:
        h.update(name.encode() + b"\0" + json.dumps(value, sort_keys=True, default=str).encode() + b"\0")

    part("tool", tool_fingerprint())
    part("manifest", hashlib.sha256((m.root / "sources.toml").read_bytes()).hexdigest())
    part("sources", source_hashes(run))
    part("unlisted", unlisted_files(m))
    part("config", _config_doc(run.config))
    if run.waivers is not None:
        today = run.extra.get("today") or dt.date.today()
        waivers = load_waivers(run.waivers)
        part("waivers", hashlib.sha256(Path(run.waivers).read_bytes()).hexdigest())
        part("expired", [w.line for w in waivers if w.expired(today)])
    else:
        part("waivers", None)
    return h.hexdigest()


# ------------------------------------------------------------------- level 1: the release

def run_stamp() -> tuple[str, str]:
    """``(started, run_id)`` of a run starting now: ISO 8601 UTC to the second, and the same
    instant as a compact id (``20261202T143817Z``)."""
    started = dt.datetime.now(dt.timezone.utc).isoformat(timespec="seconds")
    return started, started.replace(":", "").replace("-", "").replace("+0000", "Z")


class FindingColumns:
    """A release's findings as columns of Python values, read with duckdb alone: what the
    summary (:func:`pipeline.report.summary.summary_text`) and the exit code of a reused
    release need. ``len(f)`` is the number of findings, ``f[name]`` one column (a list), in
    the table's order."""

    def __init__(self, columns: dict[str, list]):
        self.columns = columns

    @classmethod
    def read(cls, con) -> "FindingColumns":
        from .report.summary import COLUMNS

        rows = con.execute(f"SELECT {', '.join(COLUMNS)} FROM findings").fetchall()
        return cls({name: [r[i] for r in rows] for i, name in enumerate(COLUMNS)})

    def __len__(self) -> int:
        return len(self.columns["severity"])

    def __getitem__(self, name: str) -> list:
        return self.columns[name]


def exit_code_of(findings, fail_on: str) -> int:
    """:func:`pipeline.stages.exit_code` (the same rule) without pandas: ``findings`` is
    anything with ``len`` and ``severity`` and ``waived`` columns (:class:`FindingColumns`)."""
    if fail_on == "never" or findings is None or not len(findings):
        return 0
    levels = {"error": ("error",), "warning": ("error", "warning")}[fail_on]
    return int(any(s in levels for s, w in zip(findings["severity"], findings["waived"]) if not bool(w)))


def previous_run(out: Path) -> dict | None:
    """The last ``runs`` row of the current release (with ``cache_key``), or None."""
    import duckdb

    db = out / "thermo.duckdb"
    if not db.is_file():
        return None
    try:
        con = duckdb.connect(str(db), read_only=True)
    except duckdb.Error:
        return None
    try:
        cols = {r[0] for r in con.execute(
            "SELECT column_name FROM duckdb_columns() WHERE table_name = 'runs'").fetchall()}
        if "cache_key" not in cols:
            return None
        con.execute("SELECT * FROM runs")
        names = [d[0] for d in con.description]
        rows = con.fetchall()
    except duckdb.Error:
        return None
    finally:
        con.close()
    return dict(zip(names, rows[-1])) if rows else None


def _link_or_copy(src: Path, dst: Path) -> None:
    try:
        os.link(src, dst)
    except OSError:
        shutil.copy2(src, dst)


def reuse_release(run, t0: float | None = None, frames: bool = True) -> bool:
    """Level 1: when the run key equals the current release's, build the new release from it
    (module doc) and return True; otherwise return False and change nothing.

    ``run.findings`` (and ``run.extra["previous"]["findings"]``) become the release's
    findings: a pandas frame as a full run leaves them (``frames=True``), or
    :class:`FindingColumns` read without pandas (``frames=False``, :func:`reuse_unchanged`).
    """
    import duckdb

    from .release import build_dir, remove_stale_builds

    t0 = time.perf_counter() if t0 is None else t0

    key = run.extra["cache_key"]
    prev = previous_run(run.out)
    if prev is None or prev.get("cache_key") != key:
        return False
    cur = run.out / ".current"
    src_dir = cur.resolve() if cur.is_symlink() else None
    if src_dir is None or not (src_dir / "thermo.duckdb").is_file():
        return False
    remove_stale_builds(run.out)
    bdir = run.extra["build_dir"] = build_dir(run)
    shutil.copy2(src_dir / "thermo.duckdb", bdir / "thermo.duckdb")   # a runs row is appended to it
    for sub in ("parquet", "report"):
        if (src_dir / sub).is_dir():
            (bdir / sub).mkdir()
            for p in (src_dir / sub).iterdir():
                if p.is_file() and p.name not in ("runs.parquet", "summary.txt", "index.html", "findings.json"):
                    _link_or_copy(p, bdir / sub / p.name)
    con = duckdb.connect(str(bdir / "thermo.duckdb"))
    try:
        if frames:
            findings = con.execute("SELECT * FROM findings").df()
            findings["waived"] = findings["waived"].astype(bool)
            run.extra["previous"] = {"findings": findings, "runs": con.execute("SELECT * FROM runs").df()}
        else:
            findings = FindingColumns.read(con)
            run.extra["previous"] = {"findings": findings}
        counts = {t: con.execute(f'SELECT count(*) FROM "{t}"').fetchall()[0][0]
                  for t in ("species", "records", "segments", "table_points", "reactions", "rejected")}
        run.findings = findings
        run.counts.update(counts)
        run.extra["reused_release"] = str(prev["run_id"])
        run.extra["reuse"] = {"release": str(prev["run_id"])}
        row = dict(run_id=run.run_id, started_utc=run.started, tool_version=prev.get("tool_version"),
                   database_name=prev.get("database_name"), input_hashes_json=prev.get("input_hashes_json"),
                   counts_json=prev.get("counts_json"),
                   seconds_json=json.dumps({"reuse": round(time.perf_counter() - t0, 4)}),
                   exit_code=exit_code_of(findings, run.fail_on), cache_key=key,
                   reuse_json=json.dumps(run.extra["reuse"]))
        # the other columns of ``runs`` (none today) stay NULL
        con.execute(f"INSERT INTO runs ({', '.join(row)}) VALUES ({', '.join('?' * len(row))})", list(row.values()))
        con.execute("CHECKPOINT")
        if (bdir / "parquet").is_dir():
            con.execute(f"COPY runs TO '{(bdir / 'parquet' / 'runs.parquet').as_posix()}' (FORMAT parquet)")
    finally:
        con.close()
    if (src_dir / "report").is_dir():
        _refresh_reports(run, src_dir / "report", bdir / "report")
    return True


def _refresh_reports(run, old: Path, new: Path) -> None:
    """Reports of a reused release: findings.json and summary.txt rewritten for this run;
    index.html copied with a note at the top saying what was reused."""
    from .report import CAUTION
    from .report.summary import summary_text

    doc = json.loads((old / "findings.json").read_text(encoding="utf-8")) if (old / "findings.json").is_file() \
        else {"tool": "thermoledger", "caution": CAUTION, "findings": []}
    doc["run_id"] = run.run_id
    doc["reused_from_run"] = run.extra["reused_release"]
    (new / "findings.json").write_text(json.dumps(doc, indent=1, ensure_ascii=False), encoding="utf-8")
    (new / "summary.txt").write_text(summary_text(run), encoding="utf-8")
    html_path = old / "index.html"
    if html_path.is_file():
        from html import escape

        html = html_path.read_text(encoding="utf-8")
        note = (f'<div class="status pass" id="reuse-note"><strong>Run {escape(run.run_id)} reused this '
                f"release unchanged.</strong> Inputs, configuration, waivers and tool are identical to run "
                f"{escape(run.extra['reused_release'])}, whose results are shown below; nothing is new since "
                "it.</div>")
        marker = "</nav>"
        html = html.replace(marker, marker + note, 1) if marker in html else note + html
        (new / "index.html").write_text(html, encoding="utf-8")


@dataclass
class ReleaseRun:
    """What a reuse of the release reads and writes of a run: :class:`pipeline.stages.Run`
    without the frames and stages, so that ``thermoledger run`` can reuse a release before it
    imports pandas (:func:`reuse_unchanged`)."""

    raw: Path
    out: Path
    config: object                      # pipeline.config.Config
    waivers: Path | None = None
    fail_on: str = "error"
    progress: Callable[..., None] = lambda msg, done=None, total=None, stage=None: None
    manifest: object = None             # pipeline.manifest.Manifest
    run_id: str = ""
    started: str = ""
    findings: FindingColumns | None = None
    counts: dict = field(default_factory=dict)
    frames: dict = field(default_factory=dict)
    extra: dict = field(default_factory=dict)

    @property
    def reused(self) -> bool:
        return "release" in (self.extra.get("reuse") or {})


def reuse_unchanged(raw: Path, out: Path, config, waivers: Path | None = None,
                    fail_on: str = "error") -> ReleaseRun:
    """Level 1 with duckdb and the standard library only: load the manifest, compute the run
    key and, when it equals the current release's, reuse and publish that release.

    Returns the run; ``run.reused`` says whether the release was reused. When it was not,
    nothing was changed: the full pipeline runs next (and checks the key again), starting
    from the source hashes computed here (``run.extra["hashes"]``).
    """
    from .manifest import load_manifest
    from .release import publish

    run = ReleaseRun(raw=raw, out=Path(out), config=config, waivers=waivers, fail_on=fail_on)
    run.started, run.run_id = run_stamp()
    t0 = time.perf_counter()
    run.manifest = load_manifest(run.raw)
    run.extra["cache_key"] = run_key(run)
    if reuse_release(run, t0, frames=False):
        publish(run)
    return run


# -------------------------------------------------------------- level 2: parsed sources

def source_key(src, sha: str) -> str:
    doc = {"tool": tool_fingerprint(), "id": src.id, "path": src.path, "format": src.format,
           "energy_unit": src.energy_unit, "nasa7_layout": src.nasa7_layout, "sha256": sha}
    return hashlib.sha256(json.dumps(doc, sort_keys=True).encode()).hexdigest()


def _source_dir(out: Path, key: str) -> Path:
    return out / CACHE_DIR / "sources" / key


def load_source(out: Path, key: str):
    """The cached :class:`~pipeline.ingest.base.ReadResult` of ``key``, or None."""
    import pandas as pd

    from .ingest.base import ReadResult

    d = _source_dir(out, key)
    meta_path = d / "meta.json"
    if not meta_path.is_file():
        return None
    try:
        meta = json.loads(meta_path.read_text())
        frames = {}
        for name in _FRAMES:
            df = pd.read_parquet(d / f"{name}.parquet")
            for c, dtype in meta["dtypes"][name].items():
                if dtype == "object" and c in df and df[c].dtype != object:
                    df[c] = df[c].astype(object).where(df[c].notna(), None)
            frames[name] = df
    except (OSError, ValueError, KeyError):
        return None
    return ReadResult(n_read=int(meta["n_read"]), notes=list(meta["notes"]), **frames)


def store_source(out: Path, key: str, result) -> None:
    """Write ``result`` under ``key`` (atomically: a temporary folder renamed into place)."""
    d = _source_dir(out, key)
    if (d / "meta.json").is_file():
        return
    tmp = d.with_name(d.name + f".tmp-{os.getpid()}")
    shutil.rmtree(tmp, ignore_errors=True)
    tmp.mkdir(parents=True)
    dtypes = {}
    for name in _FRAMES:
        df = getattr(result, name).reset_index(drop=True)
        dtypes[name] = {c: str(df[c].dtype) for c in df.columns}
        df.to_parquet(tmp / f"{name}.parquet", index=False)
    (tmp / "meta.json").write_text(json.dumps({"n_read": int(result.n_read), "notes": list(result.notes),
                                               "dtypes": dtypes}))
    try:
        os.replace(tmp, d)
    except OSError:               # another run stored it first
        shutil.rmtree(tmp, ignore_errors=True)


#: Parse sources in worker processes when the files still to be read hold at least this
#: many bytes in total (below it, starting the workers costs more than it saves).
PARALLEL_MIN_BYTES = 16 << 20


def _workers() -> int:
    try:
        return len(os.sched_getaffinity(0))
    except AttributeError:                      # not Linux
        return os.cpu_count() or 1


def _read(reader, path: Path, src):
    """``reader``'s result, with the species keys its records build for themselves
    (:func:`pipeline.ingest.resolve.built_keys`, the costly part of resolving keys).

    Python's cyclic garbage collector is paused meanwhile: a reader builds millions of small
    objects (cells, record dicts, key strings) that hold no reference cycles, and each full
    collection would traverse all of them again (measured: a quarter to a third of the CPU
    time of the NASA and table readers). Whatever cycles a read leaves are collected once
    the collector runs again."""
    import gc

    from .ingest.resolve import built_keys, formula_columns_of
    from .stages import _reaction_species

    was_enabled = gc.isenabled()
    gc.disable()
    try:
        result = reader(path, src, src.path)
        # a reader that parsed its species' formulas in bulk hands their columns on (reactions-csv)
        known = getattr(result, "formula_columns", None)
        keys = []
        if len(result.records):
            result.records = built_keys(result.records)
            keys += [h if isinstance(h, str) and h else b for h, b in
                     zip(result.records["species_hint"].to_numpy(object), result.records["built_key"].to_numpy(object))]
        if len(result.reactions) and known is None:
            keys += _reaction_species(result.reactions)
        # not a field: travels back from a worker with the result, is not cached with it
        result.formula_columns = {**(known or {}), **formula_columns_of(keys)}
    finally:
        if was_enabled:
            gc.enable()
    return result


def _read_in_worker(reader, path: Path, src, out: Path, key: str):
    """A worker's job: read one source and store it in the cache. Any error is returned as
    None: the parent then reads the source itself, so the error it raises is its own."""
    try:
        result = _read(reader, path, src)
    except Exception:                           # noqa: BLE001 - re-raised by the parent's own read
        return None
    try:
        store_source(out, key, result)
    except OSError:
        pass
    return result


def read_sources(run, readers: dict) -> dict:
    """Every source's ReadResult: from the cache when its key is there, else read (and stored).

    Sources still to be read are parsed in parallel worker processes (one per CPU, largest
    file first) when they are large together (:data:`PARALLEL_MIN_BYTES`); each source is
    read by exactly the same reader either way. Records ``run.extra["reuse"] =
    {"sources_reused": [...], "sources_read": [...], "reader_processes": n}``.
    """
    from .errors import InputError

    m = run.manifest
    hashes = source_hashes(run)
    results, reused, keys, todo = {}, [], {}, []
    for src in m.sources:
        reader = readers.get(src.format)
        if reader is None:
            raise InputError("sources.toml", src.line, f"format {src.format!r}",
                             "a format this version reads: " + ", ".join(sorted(readers)),
                             "upgrade thermoledger or convert the file")
        key = keys[src.id] = source_key(src, hashes[src.id])
        got = load_source(run.out, key)
        if got is not None:
            results[src.id] = got
            reused.append(src.id)
        else:
            todo.append(src)
    sizes = {s.id: m.path_of(s).stat().st_size for s in todo}
    workers = min(_workers(), len(todo))
    if workers < 2 or sum(sizes.values()) < PARALLEL_MIN_BYTES:
        workers = 1
    if workers > 1:
        import concurrent.futures as cf
        import multiprocessing as mp

        try:
            with cf.ProcessPoolExecutor(max_workers=workers, mp_context=mp.get_context("spawn")) as pool:
                futures = {pool.submit(_read_in_worker, readers[s.format], m.path_of(s), s, run.out,
                                       keys[s.id]): s for s in sorted(todo, key=lambda s: -sizes[s.id])}
                for done, fut in enumerate(cf.as_completed(futures)):
                    src = futures[fut]
                    run.progress(f"read {src.path}", done + 1, len(todo))
                    results[src.id] = fut.result()
        except (cf.process.BrokenProcessPool, OSError, RuntimeError):
            # no workers here (a killed worker, a main module that cannot be imported again,
            # no /dev/shm): whatever the workers did not read is read below, in this process
            workers = 1
    for i, src in enumerate(todo):
        if results.get(src.id) is None:             # serial, or a worker's read failed
            run.progress(f"reading {src.path}", i, len(todo))
            results[src.id] = _read(readers[src.format], m.path_of(src), src)
            try:
                store_source(run.out, keys[src.id], results[src.id])
            except OSError:
                pass          # a read-only or full disk costs speed, not results
    run.extra["source_keys"] = keys
    run.extra["reuse"] = {"sources_reused": reused, "sources_read": [s.id for s in todo],
                          "reader_processes": workers if todo else 0}
    return {s.id: results[s.id] for s in m.sources}


def prune_sources(out: Path, keep: set[str]) -> None:
    """Remove cached sources that no source of the current manifest uses."""
    root = out / CACHE_DIR / "sources"
    if not root.is_dir():
        return
    for d in root.iterdir():
        if d.name not in keep:
            shutil.rmtree(d, ignore_errors=True)


# ------------------------------------------------------------------------ end of a run

def finish(run) -> None:
    """Complete the build's ``runs`` row: every stage's seconds (emit and report included),
    the run key and what was reused; rewrite ``parquet/runs.parquet`` to match."""
    import duckdb

    bdir = run.extra.get("build_dir")
    if bdir is None or not (bdir / "thermo.duckdb").is_file():
        return
    con = duckdb.connect(str(bdir / "thermo.duckdb"))
    try:
        cols = {r[0] for r in con.execute(
            "SELECT column_name FROM duckdb_columns() WHERE table_name = 'runs'").fetchall()}
        for c, doc in RUNS_EXTRA_DOCS.items():
            if c not in cols:
                con.execute(f"ALTER TABLE runs ADD COLUMN {c} VARCHAR")
            con.execute(f"COMMENT ON COLUMN runs.{c} IS '{doc.replace(chr(39), chr(39) * 2)}'")
        # this run's row is the last one (run ids of two runs in one second are equal)
        con.execute("UPDATE runs SET seconds_json = ?, cache_key = ?, reuse_json = ? "
                    "WHERE rowid = (SELECT max(rowid) FROM runs)",
                    [json.dumps({k: round(v, 4) for k, v in run.seconds.items()}),
                     run.extra.get("cache_key"), json.dumps(run.extra.get("reuse"))])
        con.execute("CHECKPOINT")
        if (bdir / "parquet").is_dir():
            con.execute(f"COPY runs TO '{(bdir / 'parquet' / 'runs.parquet').as_posix()}' (FORMAT parquet)")
    finally:
        con.close()
    if "source_keys" in run.extra:
        prune_sources(run.out, set(run.extra["source_keys"].values()))
