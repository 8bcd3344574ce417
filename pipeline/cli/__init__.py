"""The ``thermoledger`` command line: a thin Typer app, one module per command."""
