"""Atomic publication and deterministic contents of the release."""
from __future__ import annotations

import hashlib
import os
import signal
import subprocess
import sys
import time

import duckdb

from tests.curate.rawdata import build_release, model_nasa7, standard_raw

#: run metadata: the runs table, and when each finding was first seen
METADATA = {"runs": None, "findings": ["first_seen_run"]}


def table_hashes(db) -> dict[str, str]:
    """SHA-256 of every table's rows, ordered by all columns, run metadata left out."""
    out = {}
    with duckdb.connect(str(db), read_only=True) as con:
        names = [r[0] for r in con.execute("SELECT table_name FROM duckdb_tables() WHERE NOT internal "
                                           "ORDER BY 1").fetchall()]
        for n in names:
            if n in METADATA and METADATA[n] is None:
                continue
            drop = METADATA.get(n) or []
            cols = [r[0] for r in con.execute("SELECT column_name FROM duckdb_columns() WHERE table_name = ? "
                                              "ORDER BY column_index", [n]).fetchall() if r[0] not in drop]
            sel = ", ".join(f'"{c}"' for c in cols)
            rows = con.execute(f'SELECT {sel} FROM "{n}" ORDER BY ALL').fetchall()
            out[n] = hashlib.sha256(repr(rows).encode()).hexdigest()
    return out


def test_same_inputs_give_identical_tables(tmp_path):
    raw = standard_raw(tmp_path / "raw")
    build_release(raw, tmp_path / "a")
    build_release(raw, tmp_path / "b")
    build_release(raw, tmp_path / "a")          # a second run over an existing release
    ha, hb = table_hashes(tmp_path / "a" / "thermo.duckdb"), table_hashes(tmp_path / "b" / "thermo.duckdb")
    assert ha.keys() == hb.keys() and "properties" in ha and "preferred_segments" in ha
    assert ha == hb
    with duckdb.connect(str(tmp_path / "a" / "thermo.duckdb"), read_only=True) as con:
        assert con.execute("SELECT count(*) FROM runs").fetchall()[0][0] == 2   # history carried forward
    assert len(list((tmp_path / "a" / ".releases").iterdir())) <= 2             # old releases pruned


def _snapshot(db):
    with duckdb.connect(str(db), read_only=True) as con:
        return (sorted(r[0] for r in con.execute("SELECT species FROM species").fetchall()),
                con.execute("SELECT count(*) FROM runs").fetchall()[0][0], table_hashes(db))


def test_a_run_killed_during_emit_leaves_the_previous_release(tmp_path):
    """The run is killed (SIGKILL) while its build folder holds a half-finished database;
    the previous release still opens, complete and unchanged; the next run cleans up."""
    out = tmp_path / "curated"
    raw = standard_raw(tmp_path / "raw")
    build_release(raw, out)
    before = _snapshot(out / "thermo.duckdb")
    # new inputs (one more species), run in a subprocess that pauses inside emit
    standard_raw(tmp_path / "raw", extra_nasa7={"more": model_nasa7("O2(g)").replace("O2    ", "O3    ", 1)
                                                .replace("O   2", "O   3", 1)})
    env = dict(os.environ, THERMOLEDGER_EMIT_PAUSE_S="60")
    proc = subprocess.Popen([sys.executable, "-c", "from pipeline.cli.app import main; main()", "run", "--raw", str(tmp_path / "raw"),
                             "--out", str(out)], env=env, stdout=subprocess.DEVNULL, stderr=subprocess.PIPE)
    try:
        deadline = time.time() + 120
        while time.time() < deadline:
            builds = list(out.glob(".build-*"))
            if builds and (builds[0] / "thermo.duckdb").exists():
                break
            assert proc.poll() is None, proc.stderr.read().decode()
            time.sleep(0.05)
        else:
            raise AssertionError("the run never reached emit")
        time.sleep(0.5)                       # well inside the pause: tables written, nothing published
    finally:
        proc.send_signal(signal.SIGKILL)
        proc.wait(timeout=30)
    assert list(out.glob(".build-*")), "the killed run's build folder should still be there"
    assert _snapshot(out / "thermo.duckdb") == before
    assert (out / "parquet" / "species.parquet").is_file() and (out / "report").is_dir()
    # the next run publishes the new release and removes the dead run's build folder
    build_release(tmp_path / "raw", out)
    species, n_runs, _ = _snapshot(out / "thermo.duckdb")
    assert "O3(g)" in species and n_runs == 2
    assert not list(out.glob(".build-*"))


def test_a_release_in_the_plain_layout_is_taken_over(tmp_path):
    """An output folder holding plain items (thermo.duckdb, parquet/, report/ as real files,
    e.g. from an older version) is switched to the linked layout by the next run."""
    import shutil

    out = tmp_path / "curated"
    raw = standard_raw(tmp_path / "raw")
    build_release(raw, out)
    for item in ("thermo.duckdb", "parquet", "report"):
        real = (out / item).resolve()
        (out / item).unlink()
        (shutil.copytree if real.is_dir() else shutil.copy2)(real, out / item)
    (out / ".current").unlink()
    shutil.rmtree(out / ".releases")
    assert not (out / "thermo.duckdb").is_symlink()
    before = _snapshot(out / "thermo.duckdb")
    build_release(raw, out)
    after = _snapshot(out / "thermo.duckdb")
    assert (out / "thermo.duckdb").is_symlink() and (out / ".current").is_symlink()
    assert after[0] == before[0] and after[1] == before[1] + 1
    assert not [p for p in out.iterdir() if p.name.startswith(".old-")]
