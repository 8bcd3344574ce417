"""Progress display: a rich status line on a terminal, plain log lines to stderr otherwise."""
from __future__ import annotations

import sys
from contextlib import contextmanager


@contextmanager
def progress_printer():
    """Yield ``say(message)``; on a TTY it updates one rich status line, else it is quiet
    except for stage names (CI logs stay short)."""
    if sys.stderr.isatty():
        from rich.console import Console

        console = Console(stderr=True)
        with console.status("starting") as status:
            yield lambda msg: status.update(msg)
    else:
        yield lambda msg: None
