"""Incremental runs (pipeline/cache.py): an unchanged re-run reuses the release; a changed
file invalidates exactly its own source; what is reused gives the same tables as a fresh run."""
from __future__ import annotations

import json
import shutil
import sys
from pathlib import Path

import duckdb
import pandas as pd
import pytest

from pipeline import cache
from pipeline.config import Config
from pipeline.ingest import READERS
from pipeline.manifest import load_manifest
from pipeline.stages import Run, execute

ROOT = Path(__file__).resolve().parents[1]
sys.path.insert(0, str(ROOT / "bench"))

from generate import generate  # noqa: E402

TABLES = ("sources", "species", "records", "segments", "table_points", "reactions", "findings",
          "rejected", "properties", "reconciled")


@pytest.fixture(scope="module")
def database(tmp_path_factory) -> Path:
    d = tmp_path_factory.mktemp("cache-db")
    generate(d, 30, seed=3, reactions_per_species=1.0)
    return d


def _run(db: Path, raw: Path, out: Path, config: Config | None = None) -> Run:
    r = Run(raw=raw, out=out, config=config or Config(), waivers=db / "waivers.toml")
    return execute(r)


def _tables(out: Path) -> dict[str, pd.DataFrame]:
    con = duckdb.connect(str(out / "thermo.duckdb"), read_only=True)
    try:
        names = {r[0] for r in con.execute("SELECT table_name FROM duckdb_tables()").fetchall()}
        return {t: con.execute(f'SELECT * FROM "{t}"').df() for t in TABLES if t in names} | {
            "runs": con.execute("SELECT * FROM runs").df()}
    finally:
        con.close()


def _same_results(a: dict, b: dict) -> None:
    assert set(a) == set(b)
    for name in a:
        if name == "runs":
            continue
        x, y = a[name], b[name]
        if name == "findings":
            x, y = x.drop(columns="first_seen_run"), y.drop(columns="first_seen_run")
        pd.testing.assert_frame_equal(x, y, check_exact=True, obj=name)


def test_unchanged_rerun_reuses_the_release(database, tmp_path):
    out = tmp_path / "curated"
    first = _run(database, database / "raw", out)
    assert first.extra["reuse"]["sources_reused"] == []            # nothing cached yet
    t1 = _tables(out)
    second = _run(database, database / "raw", out)
    assert second.extra["reuse"] == {"release": first.run_id}
    t2 = _tables(out)
    _same_results(t1, t2)
    # findings keep the run that first reported them
    assert set(t2["findings"]["first_seen_run"]) == {first.run_id}
    runs = t2["runs"]
    assert len(runs) == 2 and runs["cache_key"].nunique() == 1
    assert json.loads(runs["reuse_json"].iloc[-1]) == {"release": first.run_id}
    assert set(json.loads(runs["seconds_json"].iloc[0])) == {"ingest", "validate", "check", "reconcile",
                                                               "emit", "report"}
    assert int(runs["exit_code"].iloc[-1]) == int(runs["exit_code"].iloc[0]) == 1   # planted errors
    summary = (out / "report" / "summary.txt").read_text()
    assert f"reused: every table, finding and report of run {first.run_id}" in summary
    assert 'id="reuse-note"' in (out / "report" / "index.html").read_text()
    report = json.loads((out / "report" / "findings.json").read_text())
    assert report["run_id"] == second.run_id and report["reused_from_run"] == first.run_id
    assert len(report["findings"]) == len(t1["findings"])


def test_changed_file_invalidates_exactly_its_source(database, tmp_path):
    raw = tmp_path / "raw"
    shutil.copytree(database / "raw", raw)
    out = tmp_path / "curated"
    first = _run(database, raw, out)
    keys_before = dict(first.extra["source_keys"])
    # change one number of one table file (a Cp value, consistently nowhere else)
    path = raw / "tables" / "duplicates.csv"
    lines = path.read_text().splitlines()
    cells = lines[3].split(",")
    cells[2] = repr(float(cells[2]) * 1.001)
    lines[3] = ",".join(cells)
    path.write_text("\n".join(lines) + "\n")
    second = _run(database, raw, out)
    reuse = second.extra["reuse"]
    assert reuse["sources_read"] == ["bench-tables-dup"]
    assert sorted(reuse["sources_reused"]) == sorted(set(keys_before) - {"bench-tables-dup"})
    changed = {s for s in keys_before if keys_before[s] != second.extra["source_keys"][s]}
    assert changed == {"bench-tables-dup"}
    kept = {p.name for p in (out / cache.CACHE_DIR / "sources").iterdir()}
    assert kept == set(second.extra["source_keys"].values())        # the stale entry is pruned
    assert "reused: parsed frames of" in (out / "report" / "summary.txt").read_text()
    # the partly cached run gives the tables of a fresh run on the same inputs
    fresh_out = tmp_path / "fresh"
    fresh = _run(database, raw, fresh_out)
    assert fresh.extra["reuse"]["sources_reused"] == []
    _same_results(_tables(out), _tables(fresh_out))


def test_configuration_change_defeats_release_reuse_but_not_parsed_sources(database, tmp_path):
    out = tmp_path / "curated"
    _run(database, database / "raw", out)
    cfg_file = tmp_path / "tol.toml"
    cfg_file.write_text('[checks."segment.discontinuity"]\nh_j_mol = 50.0\n')
    second = _run(database, database / "raw", out, Config.load(cfg_file))
    assert "release" not in second.extra["reuse"]
    assert second.extra["reuse"]["sources_read"] == []
    runs = _tables(out)["runs"]
    assert runs["cache_key"].iloc[0] != runs["cache_key"].iloc[1]


def test_cached_reader_output_round_trips_exactly(database, tmp_path):
    m = load_manifest(database / "raw")
    for src in m.sources:
        fresh = READERS[src.format](m.path_of(src), src, src.path)
        key = cache.source_key(src, cache.file_sha256(m.path_of(src)))
        cache.store_source(tmp_path, key, fresh)
        back = cache.load_source(tmp_path, key)
        assert back.n_read == fresh.n_read and back.notes == fresh.notes
        for name in ("records", "segments", "table_points", "species_meta", "reactions", "rejected"):
            a = getattr(fresh, name).reset_index(drop=True)
            b = getattr(back, name)
            pd.testing.assert_frame_equal(a, b, check_exact=True, obj=f"{src.id} {name}")
            for c in a.columns:
                if a[c].dtype == object:
                    # the same Python types (str, int, float, None) as the reader made
                    assert [type(v) for v in a[c]] == [type(v) for v in b[c]], (src.id, name, c)


def test_run_key_depends_on_content_not_on_file_times(database, tmp_path):
    raw = tmp_path / "raw"
    shutil.copytree(database / "raw", raw)
    run = Run(raw=raw, out=tmp_path / "out", waivers=database / "waivers.toml")
    run.manifest = load_manifest(raw)
    k1 = cache.run_key(run)
    (raw / "species.csv").touch()
    run2 = Run(raw=raw, out=tmp_path / "out", waivers=database / "waivers.toml")
    run2.manifest = load_manifest(raw)
    assert cache.run_key(run2) == k1
    with open(raw / "species.csv", "a") as fh:
        fh.write("\n")          # a blank line: the same records, different bytes → a new key
    run3 = Run(raw=raw, out=tmp_path / "out", waivers=database / "waivers.toml")
    run3.manifest = load_manifest(raw)
    assert cache.run_key(run3) != k1


def test_sources_read_in_worker_processes_give_the_same_tables(database, tmp_path, monkeypatch):
    """Large databases are parsed by one worker process per CPU; the tables must not depend
    on whether a source was read in a worker or in the run's own process."""
    serial = _tables(_run(database, database / "raw", tmp_path / "serial").out)
    monkeypatch.setattr(cache, "PARALLEL_MIN_BYTES", 0)
    monkeypatch.setattr(cache, "_workers", lambda: 2)
    run = _run(database, database / "raw", tmp_path / "parallel")
    parallel = _tables(run.out)
    _same_results(serial, parallel)
    assert sorted(run.extra["reuse"]["sources_read"]) == sorted(s.id for s in run.manifest.sources)
    assert run.extra["reuse"]["reader_processes"] == 2


def test_a_source_that_fails_in_a_worker_raises_the_runs_own_error(tmp_path, monkeypatch):
    """A worker's failure is not reported from the worker: the run reads the source itself and
    raises the usual error, naming file and line."""
    from pipeline.errors import InputError

    raw = tmp_path / "raw"
    raw.mkdir()
    (raw / "sources.toml").write_text(
        '[database]\nname = "t"\n\n[[source]]\nid = "a"\npath = "a.csv"\nformat = "table-csv"\n'
        'citation = "x"\n\n[[source]]\nid = "b"\npath = "b.csv"\nformat = "table-csv"\ncitation = "x"\n')
    (raw / "a.csv").write_text("species,t,cp\nAr(g),298.15,20.786\n")       # cp without a unit
    (raw / "b.csv").write_text("species,t,cp [J/(mol*K)]\nAr(g),298.15,20.786\n")
    monkeypatch.setattr(cache, "PARALLEL_MIN_BYTES", 0)
    monkeypatch.setattr(cache, "_workers", lambda: 2)
    (tmp_path / "waivers.toml").write_text("")
    with pytest.raises(InputError) as err:
        _run(tmp_path, raw, tmp_path / "out")
    assert err.value.file == "a.csv" and err.value.line == 1
    assert "cp" in str(err.value) and "fix" in str(err.value)


def test_reuse_without_pandas_gives_the_summary_and_exit_code_of_the_frames(database, tmp_path):
    """``thermoledger run`` reuses a release through :func:`cache.reuse_unchanged`, which reads
    the findings as plain columns (no pandas); the summary and the exit code must be those
    of the same release read as pandas frames (:func:`execute`)."""
    import re
    import time

    from pipeline.report.summary import summary_text
    from pipeline.stages import exit_code

    out = tmp_path / "curated"
    first = _run(database, database / "raw", out)
    framed = _run(database, database / "raw", out)                  # frames, as execute leaves them
    assert isinstance(framed.findings, pd.DataFrame) and framed.extra["reuse"] == {"release": first.run_id}
    time.sleep(1.1)                                                  # a new run id (to the second)
    light = cache.reuse_unchanged(database / "raw", out, Config(), database / "waivers.toml")
    assert light.reused and light.extra["reuse"] == {"release": framed.run_id}
    assert isinstance(light.findings, cache.FindingColumns) and len(light.findings) == len(framed.findings)
    assert light.counts == framed.counts

    def ids(text):
        return re.sub(r"\d{8}T\d{6}Z", "<run>", text)

    for max_rows in (40, 3):
        text = summary_text(light, max_rows)
        assert ids(text) == ids(summary_text(framed, max_rows))
        assert "since the previous run: 0 new, 0 no longer reported" in text
    assert (out / "report" / "summary.txt").read_text(encoding="utf-8") == summary_text(light)
    f = framed.findings
    cases = [f, f.iloc[:0], f.assign(waived=True), f[f["severity"] != "error"], f[f["severity"] == "info"]]
    for frame in cases:
        columns = cache.FindingColumns({c: frame[c].tolist() for c in ("severity", "waived")})
        for fail_on in ("error", "warning", "never"):
            assert cache.exit_code_of(columns, fail_on) == exit_code(frame, fail_on), (fail_on, len(frame))
    assert [exit_code(f, x) for x in ("error", "warning", "never")] == [1, 1, 0]   # the cases differ
    runs = _tables(out)["runs"]
    assert list(runs["exit_code"]) == [1, 1, 1] and runs["cache_key"].nunique() == 1
    assert json.loads(runs["reuse_json"].iloc[-1]) == {"release": framed.run_id}
