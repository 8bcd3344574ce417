"""``thermoledger export``: write NASA 7- or 9-term polynomial files from the curated data."""
from __future__ import annotations

import sys
from enum import Enum
from pathlib import Path

import typer


class Form(str, Enum):
    nasa7 = "nasa7"
    nasa9 = "nasa9"


def export(
    fmt: Form = typer.Option(..., "--format", help="nasa7 | nasa9"),
    db: Path = typer.Option(Path("curated/thermo.duckdb"), "--db", help="the curated database"),
    species: list[str] = typer.Option(None, "--species", help="species key (repeat for several; default all)"),
    output: Path = typer.Option(None, "-o", "--output", help="file to write (default: standard output)"),
) -> None:
    """Write polynomial files; tabulated-only species (and segments the form cannot hold)
    are refitted first and the fit residuals are reported on standard error."""
    from ..errors import ThermoledgerError
    from ..export import export as build, load

    try:
        result = build(load(db), fmt.value, list(species) if species else None)
    except ThermoledgerError as exc:
        typer.echo(f"thermoledger: {exc}", err=True)
        raise typer.Exit(2)
    if output is not None:
        tmp = output.with_name(output.name + ".tmp")
        tmp.write_text(result.text, encoding="utf-8")
        tmp.replace(output)
    else:
        sys.stdout.write(result.text)
    for note in result.notes:
        typer.echo(f"note: {note}", err=True)
    if len(result.fits):
        typer.echo(f"refits ({fmt.value}, two ranges; residuals against the source record):", err=True)
        for r in result.fits.itertuples(index=False):
            typer.echo(f"  {r.species:24s} joint {r.t_joint_k:7.1f} K  max ΔCp {100 * r.max_rel_dcp:.3f} %  "
                       f"rms ΔCp {r.rms_dcp_j_mol_k:.3g} J/(mol·K)  max ΔH {r.max_abs_dh_j_mol:.3g} J/mol  "
                       f"max ΔS {r.max_abs_ds_j_mol_k:.3g} J/(mol·K)", err=True)
    f = result.findings
    for r in f.itertuples(index=False):
        typer.echo(f"{r.severity}: {r.check_id} {r.subject}: {r.message}", err=True)
    raise typer.Exit(1 if len(f) and (f["severity"] == "error").any() else 0)
