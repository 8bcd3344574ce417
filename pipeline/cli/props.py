"""``thermoledger props``: one species' properties on a temperature grid."""
from __future__ import annotations

import sys
from pathlib import Path

import typer

from .sql import Format, open_read_only, render


def parse_grid(text: str) -> tuple[float, float, float]:
    """``FROM:TO:STEP`` (or a single temperature) [K] → (from, to, step)."""
    parts = text.split(":")
    try:
        vals = [float(p) for p in parts]
    except ValueError:
        vals = []
    if len(vals) == 1:
        vals = [vals[0], vals[0], 1.0]
    if len(vals) != 3 or not (vals[0] > 0 and vals[1] >= vals[0] and vals[2] > 0):
        raise typer.BadParameter(f"found {text!r}, expected FROM:TO:STEP in kelvin with 0 < FROM ≤ TO and "
                                 "STEP > 0 — fix: e.g. --t 300:3000:100")
    if (vals[1] - vals[0]) / vals[2] > 1e5:
        raise typer.BadParameter(f"found {text!r}: more than 100000 temperatures — fix: use a larger STEP")
    return vals[0], vals[1], vals[2]


def props(
    species: str = typer.Argument(..., help="species key, e.g. 'H2O(g)'"),
    t: str = typer.Option("298.15:1000:100", "--t", help="FROM:TO:STEP in kelvin"),
    db: Path = typer.Option(Path("curated/thermo.duckdb"), "--db", help="the curated database"),
    fmt: Format = typer.Option(Format.table, "--format", help="table | csv | json"),
) -> None:
    """Cp, H, S, G, H − H298 and gef of one species (and ΔfH, ΔfG, log Kf where the
    elements' reference species exist), from the preferred record's segments."""
    import numpy as np

    from ..properties import formation
    from ..thermo import COEF_COLUMNS, SegmentIndex

    t_from, t_to, t_step = parse_grid(t)
    con = open_read_only(db)
    try:
        known = con.execute("SELECT count(*) FROM preferred_segments WHERE species = ?", [species]).fetchall()[0][0]
        if not known:
            close = con.execute("SELECT species FROM species ORDER BY jaro_winkler_similarity(lower(species), "
                                "lower(?)) DESC LIMIT 3", [species]).fetchall()
            typer.echo(f"thermoledger: found no curated functions for species {species!r}, expected a key of "
                       f"the species table with a preferred record — fix: did you mean "
                       f"{', '.join(r[0] for r in close)}?", err=True)
            raise typer.Exit(2)
        df = con.execute("SELECT * FROM props(?, ?, ?, ?)", [species, t_from, t_to, t_step]).df()
        sp = con.execute("SELECT * FROM species").df()
        refs = con.execute("SELECT * FROM element_references").df()
        segs = con.execute("SELECT * FROM preferred_segments").df()
    finally:
        con.close()
    segs = segs[segs["h_defined"].astype(bool)]
    idx = SegmentIndex.from_frame(segs.assign(record_id=segs["species"])[["record_id", "t_low_k", "t_high_k",
                                                                           *COEF_COLUMNS]])
    refs = refs[refs["species"].isin(set(segs["species"]))]

    def ref_hg(keys, temps):
        p = idx.evaluate_records(np.asarray(keys, dtype=str), np.asarray(temps, float))
        return p.h, p.g

    f = formation(df[["species", "t_k", "h_j_mol", "g_j_mol"]].astype({"h_j_mol": float, "g_j_mol": float}),
                  sp, refs, ref_hg)
    out = df.join(f)
    sys.stdout.write(render(out, fmt.value))
