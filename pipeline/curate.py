"""Write the curated release: ``thermo.duckdb`` with commented tables, and Parquet copies.

Outputs are built in a fresh folder beside the release (``OUT/.build-<run>``) and swapped
in by :func:`publish` only when complete, so a crash leaves the previous release intact.
"""
from __future__ import annotations

import json
import os
import shutil
from pathlib import Path

import duckdb
import numpy as np
import pandas as pd

from .thermo import COEF_COLUMNS

RELEASE_ITEMS = ("thermo.duckdb", "parquet", "report")

#: table → (table comment, {column: comment}). Every column written must be documented.
DOCS: dict[str, tuple[str, dict[str, str]]] = {
    "sources": ("One row per manifest source, with its file hash and record accounting "
                "(rows_read = rows_accepted + rows_rejected).", {
        "source_id": "manifest id", "path": "file path relative to raw/", "format": "raw format",
        "kind": "provenance: measured | computed | evaluated | estimated",
        "priority": "higher wins when two sources give one species", "citation": "free-text citation",
        "license": "licence of the data", "reference_pressure_bar": "the source's standard pressure [bar]",
        "energy_unit": "manifest energy unit for columns without their own", "nasa7_layout": "classic | tm4513",
        "sha256": "SHA-256 of the file's bytes", "rows_read": "input records read",
        "rows_accepted": "input records in the staging tables", "rows_rejected": "input records in rejected"}),
    "species": ("One row per species key FORMULA(state[,label]).", {
        "species": "species key", "formula": "formula as written in the key", "state": "g | l | cr | aq",
        "label": "polymorph/isomer label", "charge": "charge number [e]",
        "elements_json": "element counts as JSON", "composition": "canonical composition (groups phases)",
        "n_atoms": "atoms per formula unit", "molar_mass_g_mol": "molar mass from IUPAC atomic weights [g/mol]",
        "stated_molar_mass_g_mol": "molar mass stated in species-csv [g/mol]",
        "reference_element": "true if the reference state of an element", "geometry": "atom | linear | nonlinear | null",
        "cas": "CAS registry number", "aliases": "';'-separated aliases",
        "preferred_record_id": "record used for curated properties", "preferred_reason": "why that record"}),
    "records": ("One row per species × source representation (polynomial or table).", {
        "record_id": "source_id/name[#k]", "species": "species key", "source_id": "manifest id",
        "name": "name as written in the source", "species_hint": "key as written (CSV formats)",
        "state": "state implied by the record", "label": "label implied by the record",
        "elements_json": "element counts stated by the record (JSON)", "charge": "charge [e]",
        "kind": "polynomial | table", "form": "nasa7 | nasa9 | shomate | table",
        "file": "raw file", "line": "first line of the record", "t_low_k": "lowest T [K]", "t_high_k": "highest T [K]",
        "stated_dfh_j_mol": "ΔfH°(298.15) stated beside the polynomial [J/mol]",
        "stated_molar_mass_g_mol": "molar mass stated in the record [g/mol]", "date_code": "date/reference code",
        "source_pressure_bar": "standard pressure of the source before conversion [bar]"}),
    "segments": ("Polynomial segments in the canonical 9-term form (NASA/TP-2002-211556): "
                 "Cp/R = a1/T² + a2/T + a3 + a4 T + a5 T² + a6 T³ + a7 T⁴; H/(RT) adds b1/T; S/R adds b2.", {
        "record_id": "record", "segment": "index within the record, ascending T",
        "t_low_k": "segment lower bound [K]", "t_high_k": "segment upper bound [K]",
        **{c: f"canonical coefficient {c} (Cp/R in powers of K)" for c in COEF_COLUMNS}}),
    "table_points": ("Tabulated rows as read, converted to SI and to the database's standard pressure.", {}),
    "reactions": ("Reaction measurements with parsed stoichiometry, SI values.", {}),
    "findings": ("One row per finding of a check (fixed column order).", {
        "check_id": "dotted check id", "severity": "error | warning | info",
        "subject": "species key, reaction id, cycle:… or series:…", "subject_kind": "species | reaction | cycle | series | source | database",
        "source_id": "source concerned", "t_k": "temperature where worst [K]", "observed": "observed value [unit]",
        "expected": "expected value [unit]", "tolerance": "tolerance [unit]", "unit": "unit of observed/expected/tolerance",
        "message": "one-line explanation", "hint": "likely cause", "waived": "accepted by a waiver",
        "waiver_reason": "the waiver's reason", "fingerprint": "stable identity (check, subject, source)",
        "first_seen_run": "run that first reported it"}),
    "rejected": ("Input records that did not enter the database, verbatim, with the reason.", {
        "source_id": "manifest id", "file": "raw file", "line": "line number", "raw_text": "the record as read",
        "reason": "why it was rejected and how to fix it"}),
    "runs": ("One row per run of the pipeline (all runs of this release's history).", {
        "run_id": "run id (UTC start time)", "started_utc": "start time", "tool_version": "thermoledger version",
        "database_name": "manifest database name", "input_hashes_json": "source id → SHA-256",
        "counts_json": "counts per stage", "seconds_json": "wall seconds per stage", "exit_code": "exit code"}),
}


def _comment_sql(text: str) -> str:
    return "'" + text.replace("'", "''") + "'"


def _column_doc(table: str, col: str) -> str:
    docs = DOCS.get(table, ("", {}))[1]
    if col in docs:
        return docs[col]
    if col.startswith("uncertainty_"):
        return f"standard uncertainty (k = 1) of {col[len('uncertainty_'):]}"
    units = {"_j_mol_k": "J/(mol*K)", "_j_mol": "J/mol", "_k": "K", "_g_mol": "g/mol", "_bar": "bar"}
    for suf, u in units.items():
        if col.endswith(suf):
            return f"{col[: -len(suf)].replace('_', ' ')} [{u}]"
    return col.replace("_", " ")


def write_table(con: duckdb.DuckDBPyConnection, name: str, df: pd.DataFrame) -> None:
    """Create ``name`` from ``df`` and attach table and column comments."""
    df = df.copy()
    for c in df.columns:
        if df[c].dtype == object:
            non_null = df[c].dropna()
            if len(non_null) and non_null.map(lambda v: isinstance(v, (bool, np.bool_))).all():
                df[c] = df[c].astype("boolean")
            elif len(non_null) and non_null.map(lambda v: isinstance(v, (int, float, np.number)) and not isinstance(v, bool)).all():
                df[c] = pd.to_numeric(df[c])
            else:
                df[c] = df[c].map(lambda v: None if v is None or (isinstance(v, float) and np.isnan(v)) else str(v))
    con.register("_frame", df)
    con.execute(f'CREATE OR REPLACE TABLE "{name}" AS SELECT * FROM _frame')
    con.unregister("_frame")
    con.execute(f'COMMENT ON TABLE "{name}" IS {_comment_sql(DOCS.get(name, (name, {}))[0] or name)}')
    for c in df.columns:
        con.execute(f'COMMENT ON COLUMN "{name}"."{c}" IS {_comment_sql(_column_doc(name, c))}')


def previous_release(out: Path) -> dict[str, pd.DataFrame]:
    """Tables of the current release that a new run carries forward (runs, findings)."""
    db = out / "thermo.duckdb"
    if not db.is_file():
        return {}
    try:
        con = duckdb.connect(str(db), read_only=True)
    except duckdb.Error:
        return {}
    try:
        tables = {r[0] for r in con.execute("SELECT table_name FROM duckdb_tables()").fetchall()}
        return {t: con.execute(f'SELECT * FROM "{t}"').df() for t in ("runs", "findings") if t in tables}
    finally:
        con.close()


def build_dir(run) -> Path:
    d = run.out / f".build-{run.run_id}-{os.getpid()}"
    if d.exists():
        shutil.rmtree(d)
    d.mkdir(parents=True)
    return d


def write_release(run) -> None:
    """Write every curated table into the build folder (DuckDB + Parquet)."""
    run.out.mkdir(parents=True, exist_ok=True)
    prev = previous_release(run.out)
    run.extra["previous"] = prev
    bdir = run.extra["build_dir"] = build_dir(run)
    tables = curated_tables(run, prev)
    con = duckdb.connect(str(bdir / "thermo.duckdb"))
    try:
        for name, df in tables.items():
            write_table(con, name, df)
        extra_sql = run.extra.get("post_sql") or []
        for hook in extra_sql:
            hook(con, run)
        pq = bdir / "parquet"
        pq.mkdir()
        for name in tables:
            con.execute(f"COPY \"{name}\" TO '{(pq / (name + '.parquet')).as_posix()}' (FORMAT parquet)")
    finally:
        con.close()


def curated_tables(run, prev: dict[str, pd.DataFrame]) -> dict[str, pd.DataFrame]:
    """The tables of the release, in a fixed order, rows sorted deterministically."""
    from .stages import exit_code

    f = run.frames
    m = run.manifest
    stats = {s["source_id"]: s for s in run.source_stats}
    sources = pd.DataFrame([dict(
        source_id=s.id, path=s.path, format=s.format, kind=s.kind, priority=s.priority,
        citation=s.citation, license=s.license, reference_pressure_bar=s.reference_pressure_bar,
        energy_unit=s.energy_unit, nasa7_layout=s.nasa7_layout,
        sha256=run.extra.setdefault("hashes", {}).setdefault(s.id, _sha(m.path_of(s))),
        rows_read=stats.get(s.id, {}).get("rows_read", 0),
        rows_accepted=stats.get(s.id, {}).get("rows_accepted", 0),
        rows_rejected=stats.get(s.id, {}).get("rows_rejected", 0)) for s in m.sources])
    findings = run.findings.copy()
    if "findings" in prev and len(prev["findings"]) and len(findings):
        first = dict(zip(prev["findings"]["fingerprint"], prev["findings"]["first_seen_run"]))
        findings["first_seen_run"] = findings["fingerprint"].map(first).fillna(findings["first_seen_run"])
    run.findings = findings
    runs_row = pd.DataFrame([dict(
        run_id=run.run_id, started_utc=run.started, tool_version=_version(),
        database_name=m.database.name, input_hashes_json=json.dumps(run.extra["hashes"], sort_keys=True),
        counts_json=json.dumps(_counts(run), sort_keys=True),
        seconds_json=json.dumps({k: round(v, 4) for k, v in run.seconds.items()}),
        exit_code=exit_code(findings, run.fail_on))])
    runs = pd.concat([prev["runs"], runs_row], ignore_index=True) if "runs" in prev else runs_row
    species = f["species"].copy()
    for col in ("preferred_record_id", "preferred_reason"):
        if col not in species:
            species[col] = None
    tables = {
        "sources": sources,
        "species": species.sort_values("species"),
        "records": f["records"].sort_values("record_id"),
        "segments": f["segments"].sort_values(["record_id", "segment"]),
        "table_points": f["table_points"].sort_values(["record_id", "t_k"]),
        "reactions": f["reactions"].sort_values("reaction_id"),
        "findings": findings,
        "rejected": f["rejected"].sort_values(["source_id", "file", "line"], na_position="first"),
        "runs": runs,
    }
    tables.update(run.extra.get("extra_tables", {}))
    return {k: v.reset_index(drop=True) for k, v in tables.items()}


def _counts(run) -> dict:
    f = run.frames
    c = {k: int(len(v)) for k, v in f.items() if isinstance(v, pd.DataFrame)}
    c["findings"] = int(len(run.findings)) if run.findings is not None else 0
    return c


def _sha(path: Path) -> str:
    import hashlib

    return hashlib.sha256(path.read_bytes()).hexdigest()


def _version() -> str:
    from . import __version__

    return __version__


def publish(run) -> None:
    """Swap the complete build folder's items into ``out`` (each a single rename).

    The old items are first renamed aside, the new ones renamed in, then the old removed,
    so at every instant each item is either the complete old or the complete new one.
    """
    bdir: Path = run.extra["build_dir"]
    old = run.out / f".old-{run.run_id}-{os.getpid()}"
    old.mkdir()
    for item in RELEASE_ITEMS:
        new, cur = bdir / item, run.out / item
        if not new.exists():
            continue
        if cur.exists():
            os.replace(cur, old / item)
        os.replace(new, cur)
    shutil.rmtree(old, ignore_errors=True)
    shutil.rmtree(bdir, ignore_errors=True)
