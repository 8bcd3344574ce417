"""``thermoledger diff``: what changed between two releases, beyond tolerance.

Compared: species added and removed; for species in both, the curated ``properties`` at
298.15 K and the worst difference over their common grid; findings (by fingerprint) that
appeared or disappeared. Tolerances are the ``duplicate.disagreement`` warning limits of
the checks (checks.md): two releases of one species are two sources of it. Exit 1 when a
species was added or removed or a property changed beyond tolerance, else 0; findings
that appeared or disappeared are listed but do not change the exit code.
"""
from __future__ import annotations

import sys
from pathlib import Path
from typing import TYPE_CHECKING

import typer

from .sql import open_read_only

if TYPE_CHECKING:
    import pandas as pd

#: duplicate.disagreement warning limits (checks.md): Cp relative, S [J/(mol*K)],
#: H − H298 [J/mol], G [J/mol]. ``diff --config`` reads that check's overrides.
TOLERANCES = {"cp_rel": 0.02, "s_j_mol_k": 1.0, "h_minus_h298_j_mol": 1000.0, "g_j_mol": 1000.0}


def tolerances(config: Path | None) -> dict:
    """The duplicate.disagreement tolerances in force (defaults, or the --config file's)."""
    from ..checks import registry
    from ..config import Config

    cfg = Config.load(config)
    cid = "duplicate.disagreement"
    if registry.spec_for(cid) is None:
        return dict(TOLERANCES)
    return {"cp_rel": cfg.tol(cid, "cp_rel"), "s_j_mol_k": cfg.tol(cid, "s_j_mol_k"),
            "h_minus_h298_j_mol": cfg.tol(cid, "h_j_mol"), "g_j_mol": cfg.tol(cid, "g_j_mol")}


def _read(db: Path) -> dict[str, pd.DataFrame]:
    con = open_read_only(db)
    try:
        names = {r[0] for r in con.execute("SELECT table_name FROM duckdb_tables()").fetchall()}
        out = {}
        for t in ("species", "properties", "findings"):
            if t not in names:
                typer.echo(f"thermoledger: found no table {t} in {db}, expected a curated release — fix: pass "
                           "thermo.duckdb files written by `thermoledger run`", err=True)
                raise typer.Exit(2)
            out[t] = con.execute(f'SELECT * FROM "{t}"').df()
        return out
    finally:
        con.close()


def compare(old: dict[str, pd.DataFrame], new: dict[str, pd.DataFrame], tol: dict | None = None) -> dict:
    """Differences of two releases' tables (see module doc)."""
    import numpy as np
    import pandas as pd

    tol = dict(TOLERANCES, **(tol or {}))
    so, sn = set(old["species"]["species"]), set(new["species"]["species"])
    po, pn = old["properties"], new["properties"]
    m = po.merge(pn, on=["species", "t_k"], suffixes=("_old", "_new"))
    rows = []
    for q, lim in (("cp_j_mol_k", tol["cp_rel"]), ("s_j_mol_k", tol["s_j_mol_k"]),
                   ("h_minus_h298_j_mol", tol["h_minus_h298_j_mol"]), ("g_j_mol", tol["g_j_mol"])):
        a, b = m[f"{q}_old"].astype(float), m[f"{q}_new"].astype(float)
        d = (b - a).abs()
        if q == "cp_j_mol_k":
            d = d / a.abs().where(a.abs() > 0)
        defined = a.notna() | b.notna()
        changed_nan = a.isna() != b.isna()
        ratio = (d / lim).where(~changed_nan, np.inf).where(defined, 0.0).fillna(0.0)
        rows.append(pd.DataFrame({"species": m["species"], "t_k": m["t_k"], "quantity": q, "old": a, "new": b,
                                  "difference": d, "tolerance": lim, "ratio": ratio}))
    long = pd.concat(rows, ignore_index=True) if rows else pd.DataFrame()
    at298 = long[np.isclose(long["t_k"], 298.15)] if len(long) else long
    worst = (long.sort_values(["ratio", "species", "quantity", "t_k"], ascending=[False, True, True, True])
             .drop_duplicates(["species", "quantity"]) if len(long) else long)
    beyond = worst[worst["ratio"] > 1].sort_values(["species", "quantity"]) if len(worst) else worst
    fo, fn = old["findings"], new["findings"]
    appeared = fn[~fn["fingerprint"].isin(set(fo["fingerprint"]))] if len(fn) else fn
    gone = fo[~fo["fingerprint"].isin(set(fn["fingerprint"]))] if len(fo) else fo
    return dict(added=sorted(sn - so), removed=sorted(so - sn),
                changed_298=at298[at298["ratio"] > 1] if len(at298) else at298,
                changed=beyond, appeared=appeared, disappeared=gone)


def diff(
    old: Path = typer.Argument(..., help="the older release's thermo.duckdb"),
    new: Path = typer.Argument(..., help="the newer release's thermo.duckdb"),
    config: Path = typer.Option(None, "--config", help="TOML file overriding duplicate.disagreement tolerances"),
) -> None:
    """What changed between two releases beyond the duplicate.disagreement tolerances."""
    from ..errors import ThermoledgerError

    try:
        tol = tolerances(config)
    except ThermoledgerError as exc:
        typer.echo(f"thermoledger: {exc}", err=True)
        raise typer.Exit(2)
    d = compare(_read(old), _read(new), tol)
    w = sys.stdout.write
    w(f"species added: {len(d['added'])}\n" + "".join(f"  + {k}\n" for k in d["added"]))
    w(f"species removed: {len(d['removed'])}\n" + "".join(f"  - {k}\n" for k in d["removed"]))
    w(f"properties beyond tolerance at 298.15 K: {len(d['changed_298'])}\n")
    for r in d["changed_298"].itertuples(index=False):
        w(f"  {r.species:24s} {r.quantity:20s} {r.old:.8g} → {r.new:.8g}\n")
    w(f"properties beyond tolerance anywhere on the grid (worst T): {len(d['changed'])}\n")
    for r in d["changed"].itertuples(index=False):
        w(f"  {r.species:24s} {r.quantity:20s} at {r.t_k:g} K: {r.old:.8g} → {r.new:.8g} "
          f"(|Δ| {r.difference:.4g}, tolerance {r.tolerance:g})\n")
    for label, f in (("findings appeared", d["appeared"]), ("findings disappeared", d["disappeared"])):
        w(f"{label}: {len(f)}\n")
        for r in f.sort_values(["check_id", "subject"]).itertuples(index=False):
            w(f"  {r.severity:7s} {r.check_id:30s} {r.subject}: {r.message}\n")
    raise typer.Exit(1 if (d["added"] or d["removed"] or len(d["changed"])) else 0)
