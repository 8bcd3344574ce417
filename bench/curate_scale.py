"""Benchmark of the emit stage's derived outputs on a synthetic database.

    python bench/curate_scale.py --n-poly 10000 --n-table 500

Times (wall and CPU of the process, its threads included: on a shared machine compare the
CPU seconds): preferred records, NASA-9 refits of the tabulated species, the properties
table (standard grid), writing the release (DuckDB + Parquet + macros), and the SQL macros
evaluating g(species, T) for every species at 10 temperatures.
"""
from __future__ import annotations

import argparse
import json
import sys
import tempfile
import time
from pathlib import Path

import duckdb
import numpy as np
import pandas as pd

sys.path.insert(0, str(Path(__file__).resolve().parents[1]))

from pipeline.constants import R, T_REF  # noqa: E402
from pipeline.curate import derive, write_release  # noqa: E402
from pipeline.findings import empty_findings  # noqa: E402
from pipeline.ingest import base as ib  # noqa: E402
from pipeline.manifest import Database, Manifest, Source  # noqa: E402
from pipeline.stages import Run, collect_findings  # noqa: E402
from pipeline.thermo import COEF_COLUMNS  # noqa: E402


def synthetic(n_poly: int, n_table: int, folder: Path) -> Run:
    rng = np.random.default_rng(1)
    (folder / "raw").mkdir(parents=True)
    (folder / "raw" / "x.nasa7").write_text("")
    src = Source(id="syn", path="x.nasa7", format="nasa7", priority=0)
    m = Manifest(root=folder / "raw", database=Database(name="bench"), sources=(src,))
    keys = [f"C{i + 1}H{2 * i + 2}(g)" for i in range(n_poly + n_table)]
    recs, segs = [], []
    for i, k in enumerate(keys[:n_poly]):
        c = np.array([0, 0, 3.5 + rng.random(), 1e-3 * rng.random(), 0, 0, 0, -1000.0 * i, 5.0])
        recs.append(dict(record_id=f"syn/{k}", source_id="syn", species=k, kind="polynomial", form="nasa7",
                         t_low_k=200.0, t_high_k=6000.0))
        for j, (lo, hi) in enumerate(((200.0, 1000.0), (1000.0, 6000.0))):
            segs.append(dict(record_id=f"syn/{k}", segment=j, t_low_k=lo, t_high_k=hi, **dict(zip(COEF_COLUMNS, c))))
    t = np.concatenate([[T_REF], np.arange(300.0, 3001.0, 100.0)])
    pts = []
    for k in keys[n_poly:]:
        a = 3.5 + rng.random()
        recs.append(dict(record_id=f"syn/{k}", source_id="syn", species=k, kind="table", form="table",
                         t_low_k=T_REF, t_high_k=3000.0))
        pts.append(pd.DataFrame({"record_id": f"syn/{k}", "source_id": "syn", "line": 1, "t_k": t,
                                 "cp_j_mol_k": R * (a + 1e-4 * t), "s_j_mol_k": 200 + R * a * np.log(t / T_REF),
                                 "h_minus_href_j_mol": R * a * (t - T_REF), "dfh_j_mol": np.where(t == T_REF, 0.0, np.nan)}))
    species = pd.DataFrame({"species": keys, "formula": [k[:-3] for k in keys], "state": "g", "label": None,
                            "charge": 0, "elements_json": [json.dumps({"C": i + 1, "H": 2 * i + 2}) for i in range(len(keys))],
                            "reference_element": False})
    tp = pd.concat(pts, ignore_index=True) if pts else ib.empty(ib.TABLE_POINT_COLUMNS)
    for c in ib.TABLE_POINT_COLUMNS:
        if c not in tp:
            tp[c] = np.nan
    run = Run(raw=folder / "raw", out=folder / "out", manifest=m, run_id="bench", started="now")
    run.frames = {"records": ib.frame(recs, ib.RECORD_COLUMNS + ("species",)), "segments": pd.DataFrame(segs),
                  "table_points": tp, "species": species, "reactions": ib.empty(ib.REACTION_COLUMNS),
                  "rejected": ib.empty(ib.REJECTED_COLUMNS)}
    run.source_stats = [dict(source_id="syn", rows_read=len(recs), rows_accepted=len(recs), rows_rejected=0)]
    run.findings_parts = [empty_findings()]
    return run


def main() -> None:
    ap = argparse.ArgumentParser()
    ap.add_argument("--n-poly", type=int, default=10000)
    ap.add_argument("--n-table", type=int, default=500)
    a = ap.parse_args()
    with tempfile.TemporaryDirectory() as d:
        run = synthetic(a.n_poly, a.n_table, Path(d))
        run.findings = collect_findings(run)
        t0, c0 = time.perf_counter(), time.process_time()
        derived = derive(run)
        t1, c1 = time.perf_counter(), time.process_time()
        run.findings = collect_findings(run)
        write_release(run)
        t2, c2 = time.perf_counter(), time.process_time()
        db = run.extra["build_dir"] / "thermo.duckdb"
        with duckdb.connect(str(db), read_only=True) as con:
            t3 = time.perf_counter()
            n = con.execute("SELECT count(g(species, t)) FROM species, (SELECT unnest(range(300, 3000, 300))::DOUBLE t)"
                            ).fetchall()[0][0]
            t4 = time.perf_counter()
        print(f"species: {a.n_poly} polynomial + {a.n_table} tabulated; properties rows {len(derived['properties'])}")
        print(f"derive (preferred, refits, properties): {t1 - t0:.2f} s wall, {c1 - c0:.2f} s CPU")
        print(f"write release (DuckDB, macros, Parquet): {t2 - t1:.2f} s wall, {c2 - c1:.2f} s CPU")
        print(f"SQL g(species, T) for {n} pairs: {t4 - t3:.2f} s")


if __name__ == "__main__":
    main()
