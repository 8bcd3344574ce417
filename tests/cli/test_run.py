"""``thermoledger run`` when the release can be reused: decided and done without pandas,
scipy, pint or the checks, with the same outputs, summary and exit code; a bad
configuration or waivers file still stops it (exit 2) and a changed input still runs the
whole pipeline."""
from __future__ import annotations

import json
import re
import subprocess
import sys
from pathlib import Path

import duckdb
import pytest

ROOT = Path(__file__).resolve().parents[2]
sys.path.insert(0, str(ROOT / "bench"))

from generate import generate  # noqa: E402

#: Prints the imported modules (JSON) as the last line of stderr when the command exits.
_CODE = ("import atexit, json, sys\n"
         "atexit.register(lambda: sys.stderr.write('\\nMODULES ' + json.dumps(sorted(sys.modules)) + '\\n'))\n"
         "from pipeline.cli.app import main\n"
         "main()\n")
#: What a reuse must not import: the pipeline's heavy dependencies and the check registry.
HEAVY = ("pandas", "numpy", "scipy", "pint", "pyarrow", "pandera", "pipeline.checks", "pipeline.stages",
         "pipeline.curate")


def _run(*args) -> tuple[subprocess.CompletedProcess, set[str]]:
    proc = subprocess.run([sys.executable, "-c", _CODE, "run", *map(str, args)],
                          capture_output=True, text=True, timeout=600)
    marker = proc.stderr.rindex("\nMODULES ")
    modules = set(json.loads(proc.stderr[marker + len("\nMODULES "):]))
    proc.stderr = proc.stderr[:marker]
    return proc, modules


def _runs(out: Path) -> list[tuple]:
    con = duckdb.connect(str(out / "thermo.duckdb"), read_only=True)
    try:
        return con.execute("SELECT run_id, exit_code, cache_key, reuse_json FROM runs").fetchall()
    finally:
        con.close()


def _ids(text: str) -> str:
    return re.sub(r"\d{8}T\d{6}Z", "<run>", text)


@pytest.fixture(scope="module")
def first(tmp_path_factory):
    """A database and the release of one full run of it: (db folder, out folder, process)."""
    db = tmp_path_factory.mktemp("cli-reuse")
    generate(db, 30, seed=4, reactions_per_species=1.0)
    out = db / "curated"
    proc, modules = _run("--raw", db / "raw", "--out", out, "--waivers", db / "waivers.toml")
    assert proc.returncode == 1, proc.stderr          # planted errors
    assert "pandas" in modules                        # a full run (the test can tell the two apart)
    return db, out, proc


def test_unchanged_rerun_imports_none_of_the_pipeline_and_says_the_same(first):
    db, out, proc1 = first
    proc, modules = _run("--raw", db / "raw", "--out", out, "--waivers", db / "waivers.toml")
    assert proc.returncode == proc1.returncode == 1, proc.stderr
    assert not modules & set(HEAVY), sorted(modules & set(HEAVY))
    runs = _runs(out)
    assert json.loads(runs[-1][3]) == {"release": runs[-2][0]} and runs[-1][1] == 1
    assert runs[-1][2] == runs[-2][2]
    # the summary of the reuse is the full run's, plus what was reused and that nothing is new
    # (the full run had no previous release to compare with)
    reused = f"  reused: every table, finding and report of run {runs[-2][0]} (inputs, configuration, " \
             "waivers and tool unchanged)\n"
    since = "  since the previous run: 0 new, 0 no longer reported\n"
    assert reused in proc.stdout and since in proc.stdout and "since" not in proc1.stdout
    assert _ids(proc.stdout.replace(reused, "").replace(since, "")) == _ids(proc1.stdout)
    assert (out / "report" / "summary.txt").read_text(encoding="utf-8") == proc.stdout
    report = json.loads((out / "report" / "findings.json").read_text(encoding="utf-8"))
    assert report["run_id"] == runs[-1][0] and report["reused_from_run"] == runs[-2][0]
    assert 'id="reuse-note"' in (out / "report" / "index.html").read_text(encoding="utf-8")
    assert [ln.split("] ")[-1] for ln in proc.stderr.strip().splitlines()] == ["done"]
    # --fail-on is not part of the run key: the reuse judges the release's findings by it
    proc, _ = _run("--raw", db / "raw", "--out", out, "--waivers", db / "waivers.toml", "--fail-on", "never")
    assert proc.returncode == 0 and _runs(out)[-1][1] == 0
    assert "release" in json.loads(_runs(out)[-1][3])


@pytest.mark.parametrize("name,text,message", [
    ("config", '[checks."no.such"]\nx = 1\n', "an unknown check id"),
    ("config", '[checks."segment.discontinuity"]\nh_jmol = 1\n', "one of cp_rel, g_j_mol, h_j_mol"),
    ("waivers", '[[waiver]]\ncheck = "no.such"\nsubject = "X"\nreason = "r"\nby = "b"\nexpires = 2999-01-01\n',
     "a check id listed by `thermoledger checks`"),
])
def test_bad_configuration_or_waivers_exit_2_before_any_reuse(first, tmp_path, name, text, message):
    db, out, _ = first
    bad = tmp_path / f"{name}.toml"
    bad.write_text(text)
    before = _runs(out)
    args = ["--raw", db / "raw", "--out", out, "--waivers", bad if name == "waivers" else db / "waivers.toml"]
    if name == "config":
        args += ["--config", bad]
    proc, modules = _run(*args)
    assert proc.returncode == 2, proc.stdout + proc.stderr
    assert "thermoledger: found" in proc.stderr and message in proc.stderr and str(bad) in proc.stderr
    assert proc.stdout == ""
    assert _runs(out) == before                       # nothing was done
    assert "pandas" not in modules                    # ids judged without importing the checks


def test_changed_input_runs_the_whole_pipeline(first, tmp_path):
    import shutil

    db, _, proc1 = first
    raw = tmp_path / "raw"
    shutil.copytree(db / "raw", raw)
    out = tmp_path / "curated"
    shutil.copytree(db / "curated", out, symlinks=True)
    (raw / "species.csv").write_text((raw / "species.csv").read_text() + "\n")   # new bytes, same records
    proc, modules = _run("--raw", raw, "--out", out, "--waivers", db / "waivers.toml")
    assert proc.returncode == 1 and "pandas" in modules
    runs = _runs(out)
    reuse = json.loads(runs[-1][3])
    assert "release" not in reuse and reuse["sources_read"]
    assert runs[-1][2] != runs[-2][2]
    stages = [ln.split("] ")[-1] for ln in proc.stderr.strip().splitlines()]
    assert stages == ["ingest", "validate", "check", "reconcile", "emit", "report", "done"]
