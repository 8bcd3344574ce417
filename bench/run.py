"""Benchmark ``thermoledger run`` on synthetic databases and compare every stage with a floor.

    python bench/run.py --n 10000                         # one full run (+ an unchanged re-run)
    python bench/run.py --n 10000 --n 100000 --write-readme
    python bench/run.py --n 1000000 --checks-only         # ingest, validate and the check stage only

For each N: ``bench/generate.py`` writes the database (cached in the work folder by N and
seed), then the real command runs as a subprocess into a fresh output folder, and again,
unchanged, into the same folder (the incremental re-run). Stage seconds come from the
``runs`` table (``seconds_json``); peak memory is the larger of ``ru_maxrss`` (the largest
single process of the run's tree, ``resource.getrusage(RUSAGE_CHILDREN)``) and the peak of
the tree's summed proportional set size (PSS, sampled every 0.1 s from ``/proc``), read by a
small launcher around each run: the check stage forks and the reader and network workers
are spawned, so the largest process alone would under-count.
``--checks-only`` runs the stages ingest → validate → check in a subprocess instead (no
release is written).

The floor, measured in the same process as the stage times it is compared with:

* ``numpy``: ``pipeline.thermo.on_grid`` — Cp, H, S, G and dCp/dT of every polynomial
  segment at 100 temperatures (200–6000 K), in blocks of 20 000 segments: the least work a
  check that samples every segment densely must do;
* ``duckdb``: one scan of every column of the ``segments``, ``table_points`` and
  ``reactions`` tables (full runs: of the release just written; checks-only: of the
  staging frames registered in an in-memory database).

Each stage is reported as a ratio to their sum. Results go to ``bench/results/results.json``
and ``bench/results/results.md``; ``--write-readme`` puts the table in README.md between
the ``<!-- bench:start -->`` and ``<!-- bench:end -->`` markers.
"""
from __future__ import annotations

import argparse
import json
import os
import platform
import shutil
import subprocess
import sys
import time
from pathlib import Path

HERE = Path(__file__).resolve().parent
ROOT = HERE.parent
RESULTS = HERE / "results"
STAGES = ("ingest", "validate", "check", "reconcile", "emit", "report")
#: Targets on a 2-core machine (the project's brief).
TARGET_FULL_S = {100_000: 60.0}
TARGET_PEAK_MB = 4096.0
TARGET_CHECK_RATIO_1M = 3.0
TARGET_SCALING = 11.0
TARGET_RERUN_FRACTION = 0.10
FLOOR_GRID = 100
FLOOR_BLOCK = 20_000

# A launcher that runs a command and reports the peak memory of its process tree [kB]:
# ru_maxrss (the largest single process) and, sampled every 0.1 s on Linux, the sum of the
# proportional set sizes (PSS) of every process in the tree, which counts the pages that
# forked or spawned workers share once (the memory the run really holds at once).
_LAUNCHER = r"""
import json, os, resource, subprocess, sys, threading, time

def tree(pid):
    out, todo = [], [pid]
    while todo:
        q = todo.pop()
        out.append(q)
        try:
            for t in os.listdir(f"/proc/{q}/task"):
                with open(f"/proc/{q}/task/{t}/children") as fh:
                    todo += [int(c) for c in fh.read().split()]
        except OSError:
            pass
    return out

def pss_kb(pid):
    try:
        with open(f"/proc/{pid}/smaps_rollup") as fh:
            return next((int(x.split()[1]) for x in fh if x.startswith("Pss:")), 0)
    except OSError:
        return 0

t0 = time.perf_counter()
p = subprocess.Popen(sys.argv[2:], stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True)
peak = [0]

def sample():
    while p.poll() is None:
        peak[0] = max(peak[0], sum(pss_kb(q) for q in tree(p.pid)))
        time.sleep(0.1)

sampler = threading.Thread(target=sample, daemon=True)
if os.path.isdir("/proc/self"):
    sampler.start()
out, err = p.communicate()
wall = time.perf_counter() - t0
ru = resource.getrusage(resource.RUSAGE_CHILDREN)
with open(sys.argv[1], "w") as fh:
    json.dump({"rc": p.returncode, "wall_s": wall, "maxrss_kb": ru.ru_maxrss, "pss_tree_kb": peak[0],
               "stdout": out[-20000:], "stderr": err[-20000:]}, fh)
"""


def measured(cmd: list[str], tag: Path) -> dict:
    """Run ``cmd`` under the launcher; returns rc, wall_s, peak_mb, stdout, stderr."""
    out = tag.with_suffix(".measure.json")
    env = dict(os.environ, PYTHONPATH=str(ROOT) + os.pathsep + os.environ.get("PYTHONPATH", ""))
    subprocess.run([sys.executable, "-c", _LAUNCHER, str(out), *cmd], check=True, env=env)
    res = json.loads(out.read_text())
    # the larger of the two measures (module doc)
    res["peak_mb"] = max(res.pop("maxrss_kb"), res.get("pss_tree_kb", 0)) / 1024.0
    return res


def thermoledger_cmd() -> list[str]:
    """``thermoledger`` from the code beside this script (PYTHONPATH is set to it in ``measured``)."""
    return [sys.executable, "-c", "from pipeline.cli.app import main; main()"]


def generate(n: int, work: Path, seed: int) -> tuple[Path, float]:
    """The database of ``n`` species in ``work/n{n}-s{seed}`` (re-generated when the
    generator changed); returns its folder and the generation seconds (0 when cached)."""
    d = work / f"n{n}-s{seed}"
    stamp = d / "generator.sha"
    import hashlib

    sha = hashlib.sha256((HERE / "generate.py").read_bytes()).hexdigest()
    if stamp.exists() and stamp.read_text() == sha and (d / "raw" / "sources.toml").exists():
        return d, 0.0
    t0 = time.perf_counter()
    subprocess.run([sys.executable, str(HERE / "generate.py"), "--n", str(n), "--out", str(d),
                    "--seed", str(seed)], check=True, stdout=subprocess.DEVNULL)
    stamp.write_text(sha)
    return d, time.perf_counter() - t0


def last_run_row(db: Path) -> dict:
    import duckdb

    con = duckdb.connect(str(db), read_only=True)
    try:
        df = con.execute("SELECT * FROM runs").df()
        counts = {t: con.execute(f'SELECT count(*) FROM "{t}"').fetchall()[0][0]
                  for t in ("species", "records", "segments", "table_points", "reactions", "findings", "rejected")}
    finally:
        con.close()
    row = df.iloc[-1].to_dict()
    row["table_counts"] = counts
    return row


# ------------------------------------------------------------------------------- floor

_FLOOR = r"""
import json, sys, time
import numpy as np
sys.path.insert(0, sys.argv[3])
from pipeline.thermo import COEF_COLUMNS, on_grid
import duckdb
db = sys.argv[1]
con = duckdb.connect(db, read_only=True)
coef = con.execute("SELECT " + ", ".join(COEF_COLUMNS) + " FROM segments").fetchnumpy()
coef = np.column_stack([coef[c] for c in COEF_COLUMNS]).astype(float)
grid = np.linspace(200.0, 6000.0, int(sys.argv[2]))
t0 = time.perf_counter()
acc = 0.0
for i in range(0, len(coef), %(block)d):
    p = on_grid(coef[i:i + %(block)d], grid)
    acc += float(p.cp.sum() + p.h.sum() + p.s.sum() + p.g.sum() + p.dcp_dt.sum())
t_np = time.perf_counter() - t0
t0 = time.perf_counter()
for t in ("segments", "table_points", "reactions"):
    cols = [r[0] for r in con.execute(f"SELECT column_name FROM duckdb_columns() WHERE table_name = '{t}'").fetchall()]
    expr = ", ".join(f'count("{c}")' for c in cols)
    con.execute(f'SELECT {expr} FROM "{t}"').fetchall()
t_db = time.perf_counter() - t0
print(json.dumps({"numpy_s": t_np, "duckdb_s": t_db, "segments": len(coef), "grid": len(grid), "checksum": acc}))
""" % {"block": FLOOR_BLOCK}


def floor_of_release(db: Path) -> dict:
    env = dict(os.environ, PYTHONPATH=str(ROOT) + os.pathsep + os.environ.get("PYTHONPATH", ""))
    p = subprocess.run([sys.executable, "-c", _FLOOR, str(db), str(FLOOR_GRID), str(ROOT)],
                       check=True, capture_output=True, text=True, env=env)
    return json.loads(p.stdout.strip().splitlines()[-1])


# In one process: ingest, validate, check; then the floor on the same frames.
_CHECKS_ONLY = r"""
import json, sys, time
sys.path.insert(0, sys.argv[4])
from pathlib import Path
import numpy as np
from pipeline.stages import Run, stage_ingest, stage_validate, stage_check
from pipeline.thermo import COEF_COLUMNS, on_grid
run = Run(raw=Path(sys.argv[1]), out=Path(sys.argv[2]))
sec = {}
for name, fn in (("ingest", stage_ingest), ("validate", stage_validate), ("check", stage_check)):
    t0 = time.perf_counter(); fn(run); sec[name] = time.perf_counter() - t0
coef = run.frames["segments"][list(COEF_COLUMNS)].to_numpy(float)
grid = np.linspace(200.0, 6000.0, int(sys.argv[3]))
t0 = time.perf_counter()
acc = 0.0
for i in range(0, len(coef), %(block)d):
    p = on_grid(coef[i:i + %(block)d], grid)
    acc += float(p.cp.sum() + p.h.sum() + p.s.sum() + p.g.sum() + p.dcp_dt.sum())
t_np = time.perf_counter() - t0
import duckdb
con = duckdb.connect()
t_db = 0.0
for t in ("segments", "table_points", "reactions"):
    df = run.frames[t]
    con.register("_f", df)
    t0 = time.perf_counter()
    con.execute("SELECT " + ", ".join(f'count("{c}")' for c in df.columns) + " FROM _f").fetchall()
    t_db += time.perf_counter() - t0
    con.unregister("_f")
n_find = sum(len(p) for p in run.findings_parts)
counts = {k: int(len(v)) for k, v in run.frames.items()}
print(json.dumps({"seconds": sec, "numpy_s": t_np, "duckdb_s": t_db, "segments": len(coef),
                  "grid": len(grid), "findings": n_find, "counts": counts}))
""" % {"block": FLOOR_BLOCK}


# ------------------------------------------------------------------------------- runs

def bench_full(n: int, db_dir: Path, work: Path) -> dict:
    out = work / f"out-n{n}"
    if out.exists():
        shutil.rmtree(out)
    cmd = thermoledger_cmd() + ["run", "--raw", str(db_dir / "raw"), "--out", str(out),
                                "--waivers", str(db_dir / "waivers.toml")]
    first = measured(cmd, work / f"full-n{n}")
    if first["rc"] not in (0, 1):
        raise SystemExit(f"thermoledger run failed (exit {first['rc']}):\n{first['stderr'][-3000:]}")
    row = last_run_row(out / "thermo.duckdb")
    floor = floor_of_release(out / "thermo.duckdb")
    second = measured(cmd, work / f"rerun-n{n}")
    row2 = last_run_row(out / "thermo.duckdb")
    seconds = json.loads(row["seconds_json"])
    return dict(n=n, mode="full", wall_s=first["wall_s"], peak_mb=first["peak_mb"], exit_code=first["rc"],
                stages_s={k: seconds.get(k) for k in STAGES}, floor=floor,
                counts=row["table_counts"], rerun_wall_s=second["wall_s"], rerun_peak_mb=second["peak_mb"],
                rerun_stages_s=json.loads(row2["seconds_json"]),
                rerun_reuse=json.loads(row2.get("reuse_json") or "null") if isinstance(row2.get("reuse_json"), str) else None,
                summary_tail=second["stdout"].splitlines()[:6])


def bench_checks_only(n: int, db_dir: Path, work: Path) -> dict:
    out = work / f"out-n{n}-checks"
    tag = work / f"checks-n{n}"
    res = measured([sys.executable, "-c", _CHECKS_ONLY, str(db_dir / "raw"), str(out), str(FLOOR_GRID),
                    str(ROOT)], tag)
    if res["rc"] != 0:
        raise SystemExit(f"checks-only run failed:\n{res['stderr'][-3000:]}")
    info = json.loads(res["stdout"].strip().splitlines()[-1])
    return dict(n=n, mode="checks-only", wall_s=res["wall_s"], peak_mb=res["peak_mb"],
                stages_s={k: info["seconds"].get(k) for k in STAGES},
                floor={k: info[k] for k in ("numpy_s", "duckdb_s", "segments", "grid")},
                counts=info["counts"], findings=info["findings"])


# ---------------------------------------------------------------------------- reports

def ratios(entry: dict) -> dict:
    floor = entry["floor"]["numpy_s"] + entry["floor"]["duckdb_s"]
    return {k: (v / floor if v is not None and floor > 0 else None) for k, v in entry["stages_s"].items()}


def targets(entries: list[dict]) -> list[dict]:
    out = []
    full = {e["n"]: e for e in entries if e["mode"] == "full"}
    for n, limit in TARGET_FULL_S.items():
        if n in full:
            e = full[n]
            out.append(dict(target=f"full run N = {n:,}: ≤ {limit:g} s", value=f"{e['wall_s']:.1f} s",
                            met=e["wall_s"] <= limit))
            out.append(dict(target=f"full run N = {n:,}: peak memory ≤ {TARGET_PEAK_MB / 1024:g} GB",
                            value=f"{e['peak_mb'] / 1024:.2f} GB", met=e["peak_mb"] <= TARGET_PEAK_MB))
    chk = [e for e in entries if e["n"] >= 1_000_000 and e["stages_s"].get("check") is not None]
    for e in chk:
        r = e["stages_s"]["check"] / e["floor"]["numpy_s"]
        out.append(dict(target=f"check stage N = {e['n']:,}: ≤ {TARGET_CHECK_RATIO_1M:g} × numpy floor",
                        value=f"{r:.2f} ×", met=r <= TARGET_CHECK_RATIO_1M))
    if 10_000 in full and 100_000 in full:
        r = full[100_000]["wall_s"] / full[10_000]["wall_s"]
        out.append(dict(target=f"time(100k) / time(10k) ≤ {TARGET_SCALING:g}", value=f"{r:.2f}",
                        met=r <= TARGET_SCALING))
    for n, e in sorted(full.items()):
        f = e["rerun_wall_s"] / e["wall_s"]
        out.append(dict(target=f"unchanged re-run N = {n:,}: ≤ {TARGET_RERUN_FRACTION:.0%} of a full run",
                        value=f"{f:.1%} ({e['rerun_wall_s']:.1f} s)", met=f <= TARGET_RERUN_FRACTION))
    return out


def markdown(entries: list[dict], tgt: list[dict], meta: dict) -> str:
    def s(x):
        return "—" if x is None else f"{x:.1f}" if x >= 10 else f"{x:.2f}"

    lines = [f"Measured {meta['date']} on {meta['machine']} ({meta['cpus']} CPUs), Python {meta['python']}; "
             "`python bench/run.py --n 10000 --n 100000 --write-readme` regenerates this table.", "",
             "| N | mode | " + " | ".join(STAGES) + " | total (wall) | floor numpy + DuckDB | peak memory | "
             "unchanged re-run |",
             "|---:|---|" + "---:|" * len(STAGES) + "---:|---:|---:|---:|"]
    for e in entries:
        r = ratios(e)
        cells = [f"{s(e['stages_s'][k])} s ({r[k]:.1f}×)" if e["stages_s"].get(k) is not None else "—"
                 for k in STAGES]
        fl = e["floor"]
        rerun = f"{e['rerun_wall_s']:.1f} s" if "rerun_wall_s" in e else "—"
        lines.append(f"| {e['n']:,} | {e['mode']} | " + " | ".join(cells)
                     + f" | {e['wall_s']:.1f} s | {fl['numpy_s']:.2f} + {fl['duckdb_s']:.2f} s | "
                       f"{e['peak_mb'] / 1024:.2f} GB | {rerun} |")
    lines += ["", "Stage cells: seconds (ratio to the floor). Floor: Cp, H, S, G, dCp/dT of every segment "
              f"at {FLOOR_GRID} temperatures with numpy (`thermo.on_grid`, blocks of {FLOOR_BLOCK:,}) plus "
              "one DuckDB scan of every column of segments, table_points and reactions. Total includes "
              "interpreter start-up.", "", "| target | measured | met |", "|---|---:|:---:|"]
    for t in tgt:
        lines.append(f"| {t['target']} | {t['value']} | {'yes' if t['met'] else '**no**'} |")
    return "\n".join(lines) + "\n"


def write_readme(md: str) -> None:
    readme = ROOT / "README.md"
    text = readme.read_text()
    start, end = "<!-- bench:start -->", "<!-- bench:end -->"
    if start not in text or end not in text:
        raise SystemExit(f"README.md has no {start} … {end} block")
    head, rest = text.split(start, 1)
    _, tail = rest.split(end, 1)
    readme.write_text(head + start + "\n" + md + end + tail)


class _NAction(argparse.Action):
    """``--n`` appends a size; a following ``--checks-only`` applies to the last ``--n``."""

    def __call__(self, parser, ns, values, option_string=None):
        items = list(getattr(ns, "runs", None) or [])
        if option_string == "--checks-only":
            if not items:
                parser.error("--checks-only follows an --n")
            items[-1] = (items[-1][0], True)
        else:
            items.append((int(values), False))
        ns.runs = items


def main(argv=None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--n", action=_NAction, help="number of species (repeatable)")
    ap.add_argument("--checks-only", nargs=0, action=_NAction, help="the preceding --n: ingest, validate, check only")
    ap.add_argument("--seed", type=int, default=0)
    ap.add_argument("--work", type=Path, default=Path(os.environ.get("TMPDIR", "/tmp")) / "thermoledger-bench",
                    help="folder for generated databases and outputs")
    ap.add_argument("--write-readme", action="store_true", help="put the results table into README.md")
    ap.add_argument("--keep", action="store_true", help="keep the run outputs in the work folder")
    ap.add_argument("--fresh", action="store_true", help="drop earlier results instead of merging them")
    a = ap.parse_args(argv)
    runs = getattr(a, "runs", None) or [(10_000, False)]
    a.work.mkdir(parents=True, exist_ok=True)
    entries = []
    for n, checks_only in runs:
        db_dir, gen_s = generate(n, a.work, a.seed)
        print(f"N = {n:,}: database in {db_dir} ({'cached' if not gen_s else f'generated in {gen_s:.1f} s'})",
              flush=True)
        e = bench_checks_only(n, db_dir, a.work) if checks_only else bench_full(n, db_dir, a.work)
        e["generate_s"] = gen_s
        entries.append(e)
        r = ratios(e)
        print(f"  wall {e['wall_s']:.1f} s, peak {e['peak_mb']:.0f} MB, floor numpy {e['floor']['numpy_s']:.2f} s "
              f"+ DuckDB {e['floor']['duckdb_s']:.2f} s", flush=True)
        for k in STAGES:
            if e["stages_s"].get(k) is not None:
                print(f"    {k:10s} {e['stages_s'][k]:8.2f} s  {r[k]:6.2f} × floor", flush=True)
        if "rerun_wall_s" in e:
            print(f"  unchanged re-run: {e['rerun_wall_s']:.1f} s ({e['rerun_wall_s'] / e['wall_s']:.1%})", flush=True)
        if not a.keep:
            for p in a.work.glob(f"out-n{n}*"):
                shutil.rmtree(p, ignore_errors=True)
    meta = dict(date=time.strftime("%Y-%m-%d"), machine=platform.machine() + " " + platform.system(),
                cpus=os.cpu_count(), python=platform.python_version())
    for e in entries:
        e["date"] = meta["date"]
    # keep the earlier results of other sizes/modes (e.g. a separate --checks-only run)
    old_file = RESULTS / "results.json"
    if old_file.is_file() and not a.fresh:
        done = {(e["n"], e["mode"]) for e in entries}
        old = [e for e in json.loads(old_file.read_text()).get("entries", []) if (e["n"], e["mode"]) not in done]
        entries = sorted(old + entries, key=lambda e: (e["mode"] != "full", e["n"]))
    tgt = targets(entries)
    RESULTS.mkdir(exist_ok=True)
    (RESULTS / "results.json").write_text(json.dumps(dict(meta=meta, entries=entries, targets=tgt), indent=1,
                                                     default=str))
    md = markdown(entries, tgt, meta)
    (RESULTS / "results.md").write_text(md)
    print(md)
    if a.write_readme:
        write_readme(md)
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
