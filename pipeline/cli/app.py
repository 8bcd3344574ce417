"""Entry point: ``thermoledger`` with one sub-command per module of this package."""
from __future__ import annotations

import typer

from . import checks as checks_cmd
from . import diff as diff_cmd
from . import export as export_cmd
from . import props as props_cmd
from . import run as run_cmd
from . import sql as sql_cmd

app = typer.Typer(no_args_is_help=True, add_completion=False,
                  help="Ingest, check, reconcile and curate a thermochemical database.")


@app.callback()
def _root() -> None:
    """thermoledger: a release tool for thermochemical databases."""


app.command("run")(run_cmd.run)
app.command("checks")(checks_cmd.checks)
app.command("sql")(sql_cmd.sql)
app.command("props")(props_cmd.props)
app.command("diff")(diff_cmd.diff)
app.command("export")(export_cmd.export)


def main() -> None:  # console script
    app()
