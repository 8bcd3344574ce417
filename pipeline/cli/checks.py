"""``thermoledger checks``: list every check id with its default tolerances and summary."""
from __future__ import annotations

import typer


def checks() -> None:
    """List every check id, its default tolerances and its one-line summary."""
    from ..checks import registry

    for spec in registry.all_specs():
        tols = ", ".join(f"{k}={v:g}" for k, v in spec.tolerances.items())
        typer.echo(f"{spec.id:34s} {spec.summary}" + (f"  [{tols}]" if tols else ""))
