"""Write the curated release: ``thermo.duckdb`` with commented tables and SQL macros, and
Parquet copies; derive preferred records, refits and the ``properties`` table.

Atomic publication. A run builds its whole release in a fresh folder beside the current
one (``OUT/.build-<run>-<pid>``). :func:`publish` renames that folder, complete, to
``OUT/.releases/<run>-<pid>`` and then switches the symbolic link ``OUT/.current`` to it
with one ``os.replace`` — an atomic rename (POSIX ``rename(2)``) — so the release items
``OUT/thermo.duckdb``, ``OUT/parquet`` and ``OUT/report`` (themselves fixed links into
``.current``) change all together, from the complete old release to the complete new one.
A run killed before the switch leaves the previous release untouched; its stale build
folder is removed by the next run. Where symbolic links are unavailable, each item is
renamed into place on its own (each item still either wholly old or wholly new).

Determinism. Every table is sorted on a full key before it is written, and derived
values are computed with numpy (no multithreaded floating-point aggregation), so the same
inputs give the same table contents; only ``runs`` and ``findings.first_seen_run`` carry
run metadata.
"""
from __future__ import annotations

import json
import os
import time
from pathlib import Path

import duckdb
import numpy as np
import pandas as pd

from .release import (BUILD_PREFIX, RELEASE_ITEMS, build_dir, publish,  # noqa: F401
                      remove_stale_builds)
from .thermo import COEF_COLUMNS


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
        "meta_source_id": "species-csv source that declared the species (null if none)",
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
    "table_points": ("Tabulated rows as read, converted to SI and to the database's standard pressure.", {
        "record_id": "table record", "source_id": "manifest id", "line": "line in the raw file",
        "t_k": "temperature [K]", "cp_j_mol_k": "standard molar heat capacity [J/(mol*K)]",
        "s_j_mol_k": "standard molar entropy [J/(mol*K)]",
        "gef_j_mol_k": "Gibbs energy function −(G − H(298.15))/T [J/(mol*K)]",
        "h_minus_href_j_mol": "H(T) − H(298.15) [J/mol]", "dfh_j_mol": "standard enthalpy of formation [J/mol]",
        "dfg_j_mol": "standard Gibbs energy of formation [J/mol]",
        "log_kf": "decimal log of the formation equilibrium constant [1]"}),
    "reactions": ("Reaction measurements with parsed stoichiometry, SI values; computed values and "
                  "residuals where the network stage supplied them.", {
        "reaction_id": "unique id", "source_id": "manifest id", "file": "raw file", "line": "line in the raw file",
        "equation": "equation as written", "stoich_json": "species → stoichiometric coefficient (products > 0), JSON",
        "quantity": "drh | drg | log_k", "t_k": "temperature of the measurement [K]",
        "value": "measured value [J/mol; 1 for log_k]", "uncertainty": "standard uncertainty, k = 1 [unit of value]",
        "unit": "unit as written in the source", "series": "series id (log K at several T)",
        "method": "experimental method", "computed": "value computed from the curated species [unit of value]",
        "residual": "measured − computed [unit of value]", "z": "residual / combined standard uncertainty [1]",
        "u_combined": "combined standard uncertainty of the residual [unit of value]"}),
    "reconciled": ("Network least-squares ΔfH°(298.15) per species with its standard uncertainty and the fit's χ².", {}),
    "properties": ("Curated properties of each species' preferred record on the standard grid: 298.15 K, then "
                   "every 100 K from max(100 K, lower bound rounded up) to the upper bound. Formation values "
                   "from the elements' reference species (ΔfH = H − Σ ν_el H_ref,el).", {
        "species": "species key", "record_id": "preferred record evaluated", "t_k": "temperature [K]",
        "cp_j_mol_k": "heat capacity Cp [J/(mol*K)]", "h_j_mol": "absolute enthalpy, H(298.15) = ΔfH° [J/mol]",
        "s_j_mol_k": "entropy [J/(mol*K)]", "g_j_mol": "Gibbs energy G = H − TS [J/mol]",
        "h_minus_h298_j_mol": "H(T) − H(298.15) [J/mol]",
        "gef_j_mol_k": "Gibbs energy function −(G − H(298.15))/T [J/(mol*K)]",
        "dfh_j_mol": "enthalpy of formation from the reference elements [J/mol]",
        "dfg_j_mol": "Gibbs energy of formation from the reference elements [J/mol]",
        "log_kf": "decimal log of the formation equilibrium constant, −ΔfG/(RT ln 10) [1]"}),
    "preferred_segments": ("Canonical segments the SQL macros cp/h/s/g evaluate: the preferred record's, or "
                           "for a tabulated preferred record its NASA-9 refit (see fits).", {
        "species": "species key", "record_id": "preferred record", "origin": "record | refit (fitted to a table)",
        "segment": "index within the species, ascending T", "t_low_k": "segment lower bound [K]",
        "t_high_k": "segment upper bound [K]",
        **{c: f"canonical coefficient {c}" for c in COEF_COLUMNS},
        "is_last": "the highest segment (used above its range)",
        "h_defined": "absolute H known (false: a table without ΔfH at 298.15 K; h() and g() are NULL)"}),
    "fits": ("Constrained least-squares refits (two ranges; Cp, H, S continuous at the joint; H and S exact "
             "at 298.15 K) of tabulated preferred records, with residuals against the table.", {
        "species": "species key", "record_id": "table record fitted", "form": "nasa7 | nasa9",
        "t_low_k": "fit range lower bound [K]", "t_high_k": "fit range upper bound [K]",
        "t_joint_k": "joint temperature chosen to minimise the residual [K]",
        "t_anchor_k": "temperature where H and S are exact [K]",
        "max_abs_dcp_j_mol_k": "max |ΔCp| fit − table [J/(mol*K)]", "max_rel_dcp": "max |ΔCp|/Cp [1]",
        "rms_dcp_j_mol_k": "rms ΔCp [J/(mol*K)]", "max_abs_dh_j_mol": "max |ΔH| [J/mol]",
        "max_abs_ds_j_mol_k": "max |ΔS| [J/(mol*K)]", "t_worst_k": "temperature of the worst relative ΔCp [K]",
        "h298_basis": "where H(298.15) comes from: table dfh, or unknown (set to 0)"}),
    "element_references": ("Reference species of each element used for formation values.", {
        "element": "element symbol (e: the electron)", "species": "reference species key",
        "atoms": "atoms of the element per formula unit of the reference species [1]"}),
    "macros": ("The SQL macros stored in this file.", {"name": "macro name", "description": "signature and meaning"}),
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


def _column_doc(table: str, col: str, docs: dict | None = None) -> str:
    docs = (docs or DOCS).get(table, ("", {}))[1]
    if col in docs:
        return docs[col]
    if col.startswith("uncertainty_"):
        return f"standard uncertainty (k = 1) of {col[len('uncertainty_'):]}"
    units = {"_j_mol_k": "J/(mol*K)", "_j_mol": "J/mol", "_k": "K", "_g_mol": "g/mol", "_bar": "bar"}
    for suf, u in units.items():
        if col.endswith(suf):
            return f"{col[: -len(suf)].replace('_', ' ')} [{u}]"
    return col.replace("_", " ")


def _sql_ready(col: pd.Series) -> pd.Series | None:
    """An object column in the form DuckDB should store, or None to keep it as it is.

    All booleans → nullable boolean; all numbers → numeric; all null → None values (SQL
    type NULL); otherwise text, each value ``str(v)`` and None/NaN → NULL. The kind comes
    from pandas' ``infer_dtype`` (one pass in C); only mixed columns, and text columns
    holding unusual null markers (``pd.NA``, ``NaT``: written as their text, as always),
    are converted value by value.
    """
    kind = pd.api.types.infer_dtype(col, skipna=True)
    if kind == "empty":
        return pd.Series([None] * len(col), index=col.index, dtype=object)
    if kind == "boolean":
        return col.astype("boolean")
    if kind in ("integer", "floating", "mixed-integer-float"):
        return pd.to_numeric(col)
    if kind == "string":
        vals = col.to_numpy(dtype=object)
        null = pd.isna(vals)
        # the kinds of missing value present (a handful of types, not one check per value)
        kinds = set(map(type, vals[null]))
        if not null.any() or all(t is type(None) or issubclass(t, float) for t in kinds):
            return None  # text with None/NaN for missing: Arrow writes exactly that
    return _sql_ready_by_value(col)


def _sql_ready_by_value(col: pd.Series) -> pd.Series:
    """:func:`_sql_ready` value by value (the general case)."""
    non_null = col.dropna()
    if len(non_null) and non_null.map(lambda v: isinstance(v, (bool, np.bool_))).all():
        return col.astype("boolean")
    if len(non_null) and non_null.map(lambda v: isinstance(v, (int, float, np.number)) and not isinstance(v, bool)).all():
        return pd.to_numeric(col)
    return col.map(lambda v: None if v is None or (isinstance(v, float) and np.isnan(v)) else str(v))


def arrow_frame(df: pd.DataFrame):
    """``df`` as DuckDB and the Parquet writer are given it: an Arrow table (no copy of the
    numeric columns; columns in one chunk each), or, where Arrow cannot hold a column, the
    frame itself (DuckDB then scans it with its own pandas reader). Object columns are
    typed by :func:`_sql_ready`."""
    import pyarrow as pa

    fixed = {}
    for c in df.columns:
        if df[c].dtype == object:
            ready = _sql_ready(df[c])
            if ready is not None:
                fixed[c] = ready
    if fixed:
        df = df.assign(**fixed)
    try:
        table = pa.Table.from_pandas(df, preserve_index=False)
    except (pa.ArrowInvalid, pa.ArrowTypeError, pa.ArrowNotImplementedError):
        return df
    # a text column concatenated from many frames arrives in as many chunks, and DuckDB
    # pays per chunk (145,000 rows in 5,000 chunks: 2.4 s instead of 0.04 s): one chunk each
    if any(col.num_chunks > 1 for col in table.columns):
        table = table.combine_chunks()
    return table


def write_table(con: duckdb.DuckDBPyConnection, name: str, df, docs: dict | None = None) -> None:
    """Create ``name`` from ``df`` and attach table and column comments (``docs``, default
    :data:`DOCS`; an undocumented column gets a comment built from its name and unit).

    SQL types follow the dtypes (text → VARCHAR, float → DOUBLE with NaN → NULL, int →
    BIGINT, bool → BOOLEAN); object columns are typed by :func:`_sql_ready`. The frame is
    handed to DuckDB as one Arrow table (:func:`arrow_frame`; ``df`` may already be one).
    """
    import pyarrow as pa

    docs = docs or DOCS
    frame = df if isinstance(df, pa.Table) else arrow_frame(df)
    columns = list(frame.column_names if isinstance(frame, pa.Table) else frame.columns)
    con.register("_frame", frame)
    try:
        con.execute(f'CREATE OR REPLACE TABLE "{name}" AS SELECT * FROM _frame')
    finally:
        con.unregister("_frame")
    del frame
    table_doc = docs.get(name, ("", {}))[0] or f"{name.replace('_', ' ')} (side table of a pipeline stage)"
    comments = [f'COMMENT ON TABLE "{name}" IS {_comment_sql(table_doc)}']
    comments += [f'COMMENT ON COLUMN "{name}"."{c}" IS {_comment_sql(_column_doc(name, c, docs))}' for c in columns]
    con.execute(";\n".join(comments))


def parquet_ready(frame):
    """The Arrow table of a release table as :func:`write_parquet` writes it, with the
    Parquet schema DuckDB's ``COPY … (FORMAT parquet)`` of the stored table gives: a column
    is required (not null) when it holds no null, every column of an empty table too;
    no Arrow or pandas metadata. None when that cannot be written so (a DataFrame that
    Arrow could not hold; a type other than text, BIGINT, DOUBLE, BOOLEAN, NULL; an
    empty table with a NULL-typed column, which Arrow keeps nullable): such a table is
    copied by DuckDB from the database."""
    import pyarrow as pa

    if not isinstance(frame, pa.Table):
        return None
    fields = []
    for field, col in zip(frame.schema, frame.columns):
        t = field.type
        if pa.types.is_null(t):
            if not frame.num_rows:
                return None
            fields.append(pa.field(field.name, t))
            continue
        if not (pa.types.is_string(t) or pa.types.is_large_string(t) or pa.types.is_boolean(t)
                or (pa.types.is_integer(t) and t.bit_width == 64 and pa.types.is_signed_integer(t))
                or pa.types.is_float64(t)):
            return None
        fields.append(pa.field(field.name, t, nullable=col.null_count > 0))
    return frame.cast(pa.schema(fields))


def write_parquet(frame, path: Path) -> None:
    """Write :func:`parquet_ready` ``frame`` as Parquet (snappy, as DuckDB's default; text
    columns dictionary-encoded, numbers plain, which for measured values costs less and
    stores about as small)."""
    import pyarrow as pa
    import pyarrow.parquet as pq

    text = [f.name for f in frame.schema if pa.types.is_string(f.type) or pa.types.is_large_string(f.type)]
    pq.write_table(frame, str(path), compression="snappy", use_dictionary=text, store_schema=False)


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


#: Fault-injection hook for the atomicity test: seconds emit sleeps after writing the
#: tables and before finishing the build (never set in normal use).
PAUSE_ENV = "THERMOLEDGER_EMIT_PAUSE_S"


def derive(run) -> dict:
    """Preferred records, refits of tabulated preferred records, ``properties``.

    Stores the results in ``run.extra["derived"]`` and adds ``export.fit-quality``
    findings to ``run.findings_parts`` (the emit stage collects findings again after).
    """
    from concurrent.futures import ThreadPoolExecutor

    from .functions import RecordFunctions
    from .macros import preferred_segments
    from .preferred import choose_preferred
    from .properties import curated_properties, element_entries, element_references
    from .refit import FIT_TOLERANCES, T_FIT_MIN_K, quality_findings, refit

    f = run.frames
    records, segments, tp = f["records"], f["segments"], f["table_points"]
    sources = pd.DataFrame([dict(source_id=s.id, priority=s.priority, kind=s.kind) for s in run.manifest.sources],
                           columns=["source_id", "priority", "kind"])
    preferred = choose_preferred(records, sources, run.findings)
    ctx = run.extra.get("ctx")
    funcs = ctx.functions if ctx is not None else RecordFunctions(records, segments, tp)
    # tabulated preferred records → NASA-9 refits (macros and exports then work uniformly)
    kind = records.set_index("record_id")["kind"] if len(records) else pd.Series(dtype=object)
    tab = preferred[preferred["preferred_record_id"].map(kind).eq("table").to_numpy()]
    items = tab.merge(records[["record_id", "source_id", "t_low_k", "t_high_k"]],
                      left_on="preferred_record_id", right_on="record_id")
    items = items[items["t_high_k"].astype(float) - np.maximum(items["t_low_k"].astype(float), T_FIT_MIN_K) >= 10.0]
    mid = (items["t_low_k"].to_numpy(float) + items["t_high_k"].to_numpy(float)) / 2
    h_mid = funcs.evaluate(items["record_id"].to_numpy(dtype=object), mid).h if len(items) else np.empty(0)
    h_defined = dict(zip(items["record_id"], np.isfinite(h_mid)))  # absolute H known
    tol = {k: run.config.tol("export.fit-quality", k) for k in FIT_TOLERANCES}

    def fitted():
        """The refits, their ``fits`` rows and findings, and the macros' segments."""
        fit = refit(items[["record_id", "t_low_k", "t_high_k"]], table_values(funcs, h_defined), "nasa9")
        fits = fit.fits.merge(items[["record_id", "species", "source_id"]], on="record_id", how="left")
        quality = quality_findings(fits, fits["species"], fits["source_id"], tol)
        fits["h298_basis"] = fits["record_id"].map(
            lambda r: "table dfh at 298.15 K" if h_defined.get(r) else "unknown (set to 0)")
        fits = fits[["species"] + [c for c in fits.columns if c not in ("species", "source_id")]]
        return fits, quality, preferred_segments(preferred, records, segments, fit.segments, h_defined)

    # the refits run in a second thread while this one computes the properties table: both
    # spend their time in numpy, which releases the GIL, so the two cores share the work
    # (each result is what it would be alone: pure functions of the same inputs, which
    # both threads only read)
    with ThreadPoolExecutor(max_workers=1) as pool:
        fit_job = pool.submit(fitted)
        entries = element_entries(f["species"])  # parsed once for both
        refs = element_references(f["species"], entries)
        refs = refs[refs["species"].isin(set(preferred.dropna(subset=["preferred_record_id"])["species"]))]
        props = curated_properties(preferred, records, f["species"], funcs, tp, refs=refs, entries=entries)
        fits, quality, psegs = fit_job.result()
    run.add_findings(quality)
    derived = dict(preferred=preferred, fits=fits, preferred_segments=psegs, properties=props,
                   element_references=refs.reset_index(drop=True))
    run.extra["derived"] = derived
    return derived


def table_values(funcs, h_defined: dict):
    """Values of table records for :func:`pipeline.refit.refit`: absolute H where the table
    gives ΔfH at 298.15 K, else H − H(298.15) (the fit then has H(298.15) = 0)."""

    def values(rids, t):
        rids = np.asarray(rids, dtype=object)
        # each id looked up once, not once per T
        v = funcs.evaluate_codes(rids, np.broadcast_to(np.arange(len(rids))[:, None], np.shape(t)), t)
        known = np.array([h_defined.get(r, False) for r in np.asarray(rids, dtype=object)])[:, None]
        return v.cp, np.where(known, v.h, v.h_minus_h298), v.s

    return values


def write_release(run) -> None:
    """Write every curated table, the macros and the Parquet copies into the build folder.

    Each table is sorted (:func:`curated_tables`) and converted to Arrow once
    (:func:`arrow_frame`); DuckDB stores it and pyarrow writes its Parquet copy from the
    same Arrow table (:func:`write_parquet`). The work runs on three threads (DuckDB and
    pyarrow release the GIL): DuckDB stores the largest table, ``properties``, on a
    second connection in a transaction of its own (DuckDB compresses a table's columns
    on the thread that inserts it: one core for a whole table), while the main connection
    stores the others, in one transaction with the comments and macros, as a further
    thread sorts and converts them and writes every Parquet copy; that thread then
    prepares the report texts (:func:`pipeline.report.prepare_reports`; not when
    ``post_sql`` hooks may change the run). Both connections commit before the hooks run;
    the build folder is published only when complete (:func:`publish`), so the second
    transaction is never seen on its own. (The order in which tables are created is not
    visible in the file: DuckDB lists its tables by name.) A table Arrow cannot write as DuckDB
    would (:func:`parquet_ready`) is copied from the database with ``COPY``, as are all
    tables when a ``post_sql`` hook may have changed them.
    """
    from concurrent.futures import ThreadPoolExecutor

    from . import macros
    from .report import prepare_reports

    run.out.mkdir(parents=True, exist_ok=True)
    remove_stale_builds(run.out)
    prev = previous_release(run.out)
    run.extra["previous"] = prev
    bdir = run.extra["build_dir"] = build_dir(run)
    if "derived" not in run.extra:
        derive(run)
    tables = curated_tables(run, prev, lazy=True)
    hooks = run.extra.get("post_sql") or []
    pq = bdir / "parquet"
    pq.mkdir()
    # a stage that adds a side table may document it: run.extra["table_docs"][name] = (text, {col: text})
    docs = dict(DOCS)
    for name, (text, cols) in (run.extra.get("table_docs") or {}).items():
        old_text, old_cols = docs.get(name, ("", {}))
        docs[name] = (text or old_text, {**old_cols, **cols})

    def convert(name: str):
        """The table as Arrow (or a frame) and as :func:`parquet_ready` makes it (None:
        its Parquet copy is DuckDB's ``COPY``)."""
        frame = arrow_frame(tables[name]())
        return frame, None if hooks else parquet_ready(frame)

    def prepare(name: str):
        """:func:`convert`, and the Parquet copy written when Arrow can."""
        frame, ready = convert(name)
        if ready is not None:
            write_parquet(ready, pq / f"{name}.parquet")
        return frame, ready is None

    first = [n for n in tables if n == "properties"]
    pool = ThreadPoolExecutor(max_workers=1)
    side = ThreadPoolExecutor(max_workers=1)  # DuckDB stores `first` there, on its own connection
    con = duckdb.connect(str(bdir / "thermo.duckdb"))
    cur = con.cursor()  # a second connection to the same database, used only by `side`

    def store_alone(name: str, frame) -> None:
        """:func:`write_table` in a transaction of the second connection."""
        cur.execute("BEGIN TRANSACTION")
        write_table(cur, name, frame, docs)
        cur.execute("COMMIT")

    try:
        # `pool` prepares the other tables, in order, while DuckDB stores the first (`side`)
        jobs = {name: pool.submit(prepare, name) for name in tables if name not in first}
        writes, copy_later = [], []
        report_job = first_job = None
        con.execute("BEGIN TRANSACTION")  # one commit for the other tables, comments and macros
        for name in first + list(jobs):
            if name in jobs:
                frame, by_copy = jobs.pop(name).result()
            else:
                frame, ready = convert(name)
                if ready is not None:
                    writes.append(pool.submit(write_parquet, ready, pq / f"{name}.parquet"))
                by_copy = ready is None
                del ready
            if by_copy:
                copy_later.append(name)
            if report_job is None and not hooks:
                # the report texts, after the Parquet copy of the largest table, while
                # DuckDB stores the others (the findings are final: curated_tables)
                report_job = pool.submit(prepare_reports, run)
            if name in first:
                first_job = side.submit(store_alone, name, frame)
            else:
                write_table(con, name, frame, docs)
            del frame
        macros.install(con)
        con.execute("COMMIT")
        if first_job is not None:
            first_job.result()
        for hook in hooks:
            hook(con, run)
        pause = float(os.environ.get(PAUSE_ENV, "0") or 0)
        if pause > 0:
            time.sleep(pause)
        for name in copy_later:
            con.execute(f"COPY \"{name}\" TO '{(pq / (name + '.parquet')).as_posix()}' (FORMAT parquet)")
        for job in writes:
            job.result()
        if report_job is not None:
            report_job.result()
        con.execute("CHECKPOINT")
    finally:
        side.shutdown(wait=True, cancel_futures=True)
        pool.shutdown(wait=True, cancel_futures=True)
        cur.close()
        con.close()


def _sort_key(col: pd.Series) -> pd.Series:
    """How :func:`_sorted` compares a column: text (object or string dtype) as text with
    nulls as ""; anything else as it is."""
    if col.dtype == object or str(col.dtype) in ("string", "str"):
        return col.astype("string").fillna("")
    return col


def _strictly_ascending(key: pd.DataFrame) -> bool:
    """True when every row of ``key`` is strictly after the previous one (compared column
    by column, as ``sort_values`` orders them): the rows are in order and unique, and a
    stable sort would not move any. False when unsure (nulls in a non-text column, types
    that are not plain numbers or text)."""
    import pyarrow as pa
    import pyarrow.compute as pc

    n = len(key)
    if n < 2:
        return True
    open_ = np.ones(n - 1, dtype=bool)  # pairs whose order the columns so far leave open
    for c in key.columns:
        col = key[c]
        if str(col.dtype) == "string":
            arr = pa.array(col.array)
            a, b = arr.slice(0, n - 1), arr.slice(1)
            lt = pc.less(a, b).to_numpy(zero_copy_only=False)
            eq = pc.equal(a, b).to_numpy(zero_copy_only=False)
        elif isinstance(col.dtype, np.dtype) and col.dtype.kind in "biuf":
            v = col.to_numpy()
            if v.dtype.kind == "f" and np.isnan(v).any():
                return False
            lt, eq = v[:-1] < v[1:], v[:-1] == v[1:]
        else:
            return False
        if (open_ & ~(lt | eq)).any():
            return False
        open_ &= eq
        if not open_.any():
            return True
    return not open_.any()


def _sorted(df: pd.DataFrame, keys: list[str] | None = None) -> pd.DataFrame:
    """Rows in a deterministic order: by ``keys`` when they are unique, else by ``keys`` then
    every other column (text columns compared as text, nulls first)."""
    if not len(df):
        return df.reset_index(drop=True)
    if keys:
        key = pd.DataFrame({c: _sort_key(df[c]) for c in keys}, index=df.index)
        if _strictly_ascending(key):
            return df.reset_index(drop=True)  # already in key order, key unique: sorting moves nothing
        order = key.sort_values(keys, kind="stable", na_position="first").index
        if _strictly_ascending(key.loc[order]):
            return df.loc[order].reset_index(drop=True)  # the key is unique: this is the order
    if keys and not df.duplicated(keys).any():
        # a unique key orders the rows completely: no need to compare every column
        cols = list(keys)
    else:
        cols = list(dict.fromkeys((keys or []) + list(df.columns)))
    key = pd.DataFrame({c: _sort_key(df[c]) for c in cols}, index=df.index)
    order = key.sort_values(cols, kind="stable", na_position="first").index
    return df.loc[order].reset_index(drop=True)


def curated_tables(run, prev: dict[str, pd.DataFrame], lazy: bool = False) -> dict:
    """The tables of the release, in a fixed order, rows sorted deterministically.

    ``lazy``: instead of each frame, a function of no arguments that returns it (sorting
    and merging only when called, in any thread; what the run itself records — the
    findings' ``first_seen_run`` and the ``runs`` row — is settled here, at once)."""
    from .macros import MACRO_DOCS
    from .stages import exit_code

    f = run.frames
    m = run.manifest
    d = run.extra.get("derived") or {}
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
    species = f["species"].drop(columns=["preferred_record_id", "preferred_reason"], errors="ignore")
    pref = d.get("preferred")
    if pref is not None and len(pref):
        species = species.merge(pref, on="species", how="left")
    else:
        species = species.assign(preferred_record_id=None, preferred_reason=None)
    extra = run.extra.get("extra_tables") or {}
    tables = {
        "sources": lambda: sources,
        "species": lambda: _sorted(species, ["species"]),
        "records": lambda: _sorted(f["records"], ["record_id"]),
        "segments": lambda: _sorted(f["segments"], ["record_id", "segment"]),
        "table_points": lambda: _sorted(f["table_points"], ["record_id", "t_k"]),
        "reactions": lambda: _sorted(_with_results(f["reactions"], extra), ["reaction_id"]),
        "findings": lambda: findings,
        "rejected": lambda: _sorted(f["rejected"], ["source_id", "file", "line"]),
        "runs": lambda: runs,
    }
    for name, keys in (("properties", ["species", "t_k"]), ("preferred_segments", ["species", "segment"]),
                       ("fits", ["species", "record_id"]), ("element_references", ["element", "species"])):
        if name in d:
            tables[name] = lambda df=d[name], keys=keys: _sorted(df, keys)
    tables["macros"] = lambda: pd.DataFrame(sorted(MACRO_DOCS.items()), columns=["name", "description"])
    for name, df in extra.items():
        if name != "reaction_results":  # merged into `reactions` (outputs.md)
            tables[name] = lambda df=df: _sorted(df)
    tables = {k: (lambda fn=fn: fn().reset_index(drop=True)) for k, fn in tables.items()}
    return tables if lazy else {k: fn() for k, fn in tables.items()}


def _with_results(reactions: pd.DataFrame, extra_tables: dict) -> pd.DataFrame:
    """Reactions with the network stage's computed value, residual, z and combined u."""
    res = extra_tables.get("reaction_results")
    cols = {"computed_value": "computed", "residual": "residual", "z": "z", "u_combined": "u_combined"}
    if res is None or not len(res):
        return reactions.assign(**{c: np.nan for c in cols.values()})
    res = res.rename(columns=cols)[["reaction_id", *cols.values()]]
    return reactions.drop(columns=[c for c in cols.values() if c in reactions]).merge(res, on="reaction_id", how="left")


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
