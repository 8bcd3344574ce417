"""``thermoledger run``: the whole pipeline on a raw folder."""
from __future__ import annotations

import sys
from enum import Enum
from pathlib import Path

import typer

from ..config import Config
from ..errors import ThermoledgerError


class FailOn(str, Enum):
    error = "error"
    warning = "warning"
    never = "never"


def run(
    raw: Path = typer.Option(Path("raw"), "--raw", help="folder holding sources.toml and the raw files"),
    out: Path = typer.Option(Path("curated"), "--out", help="folder of the curated release"),
    config: Path = typer.Option(None, "--config", help="TOML file overriding check tolerances"),
    waivers: Path = typer.Option(None, "--waivers", help="TOML file of [[waiver]] entries (check, "
                                 "subject, reason, by, expires; optional source) accepting findings"),
    fail_on: FailOn = typer.Option(FailOn.error, "--fail-on", help="lowest severity that makes the exit code 1"),
) -> None:
    """Ingest, validate, check, reconcile; write curated tables and reports."""
    from ..report.summary import summary_text
    from ..stages import Run, execute, exit_code
    from ..waivers import load_waivers
    from .progress import progress_printer

    try:
        cfg = Config.load(config)
        load_waivers(waivers)  # a bad waivers file stops the run before any work (exit 2)
        r = Run(raw=raw, out=out, config=cfg, waivers=waivers, fail_on=fail_on.value)
        with progress_printer() as say:
            r.progress = say
            execute(r)
    except ThermoledgerError as exc:
        typer.echo(f"thermoledger: {exc}", err=True)
        raise typer.Exit(2)
    sys.stdout.write(summary_text(r))
    raise typer.Exit(exit_code(r.findings, fail_on.value))
