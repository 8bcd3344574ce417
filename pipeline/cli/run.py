"""``thermoledger run``: the whole pipeline on a raw folder.

An unchanged re-run (same inputs, configuration, waivers and tool) reuses the current
release; that is decided and done first, with duckdb and the standard library only
(:func:`pipeline.cache.reuse_unchanged`), and the pipeline (pandas, scipy, the checks) is
imported only when the release cannot be reused.
"""
from __future__ import annotations

import sys
from enum import Enum
from pathlib import Path

import typer


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
    from ..cache import exit_code_of, reuse_unchanged
    from ..config import Config
    from ..errors import ThermoledgerError
    from ..report.summary import summary_text
    from ..waivers import load_waivers
    from .progress import progress_printer

    try:
        cfg = Config.load(config)
        load_waivers(waivers)  # a bad waivers file stops the run before any work (exit 2)
        with progress_printer() as say:
            r = reuse_unchanged(raw, out, cfg, waivers, fail_on.value)
            if not r.reused:
                from ..stages import Run, execute

                hashes = r.extra.get("hashes", {})
                r = Run(raw=raw, out=out, config=cfg, waivers=waivers, fail_on=fail_on.value)
                r.progress = say
                r.extra["hashes"] = hashes      # the source files were hashed once already
                execute(r)
    except ThermoledgerError as exc:
        typer.echo(f"thermoledger: {exc}", err=True)
        raise typer.Exit(2)
    sys.stdout.write(summary_text(r))
    if "release" in (r.extra.get("reuse") or {}):
        raise typer.Exit(exit_code_of(r.findings, fail_on.value))
    from ..stages import exit_code

    raise typer.Exit(exit_code(r.findings, fail_on.value))
