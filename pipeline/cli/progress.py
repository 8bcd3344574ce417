"""Progress display: one rich progress bar per stage on a terminal, plain log lines otherwise.

Stages report through ``run.progress(msg, done=None, total=None, stage=None)``:

* ``stage="check"`` opens the next stage (the runner does this before each stage);
* ``done``/``total`` move that stage's bar (``check cp.nonpositive``, 3 of 27);
* a bare ``msg`` only updates the text beside the bar.

On a terminal each stage gets its own bar that stays on screen with its elapsed time. In
CI logs (no TTY) only one plain line per stage is written to stderr, so logs stay short.
"""
from __future__ import annotations

import sys
import time
from contextlib import contextmanager
from typing import IO


class _Plain:
    """Non-TTY: one line per stage, with the time since the run started."""

    def __init__(self, stream: IO[str]):
        self.stream = stream
        self.t0 = time.perf_counter()

    def __call__(self, msg: str, done: int | None = None, total: int | None = None,
                 stage: str | None = None) -> None:
        if stage is not None:
            self.stream.write(f"thermoledger [{time.perf_counter() - self.t0:7.1f} s] {stage}\n")
            self.stream.flush()

    def close(self) -> None:
        self.stream.write(f"thermoledger [{time.perf_counter() - self.t0:7.1f} s] done\n")
        self.stream.flush()


class _Bars:
    """TTY: a rich progress bar per stage (indeterminate until a stage states its total)."""

    def __init__(self, console):
        from rich.progress import BarColumn, MofNCompleteColumn, Progress, TextColumn, TimeElapsedColumn

        self.progress = Progress(TextColumn("{task.fields[stage]:<10}"), BarColumn(bar_width=30),
                                 MofNCompleteColumn(), TimeElapsedColumn(),
                                 TextColumn("{task.description}"), console=console)
        self.task = None
        self.total = None
        self.progress.start()

    def _finish(self) -> None:
        if self.task is not None:
            total = self.total or 1
            self.progress.update(self.task, total=total, completed=total, description="")
            self.progress.stop_task(self.task)

    def __call__(self, msg: str, done: int | None = None, total: int | None = None,
                 stage: str | None = None) -> None:
        if stage is not None:
            self._finish()
            self.task = self.progress.add_task("", total=None, stage=stage)
            self.total = None
            return
        if self.task is None:
            self.task = self.progress.add_task("", total=None, stage="")
        kw = {"description": msg}
        if total is not None:
            kw["total"] = self.total = total
        if done is not None:
            kw["completed"] = done
        self.progress.update(self.task, **kw)

    def close(self) -> None:
        self._finish()
        self.progress.stop()


@contextmanager
def progress_printer(stream: IO[str] | None = None, tty: bool | None = None):
    """Yield the ``run.progress`` callable for the whole run.

    Parameters
    ----------
    stream : where to write (default: stderr, so stdout keeps only the summary).
    tty : force terminal (True) or log (False) behaviour; default: ``stream.isatty()``.
    """
    stream = stream if stream is not None else sys.stderr
    is_tty = stream.isatty() if tty is None else tty
    if is_tty:
        from rich.console import Console

        bars = _Bars(Console(file=stream, force_terminal=True))
        try:
            yield bars
        finally:
            bars.close()
    else:
        plain = _Plain(stream)
        try:
            yield plain
        finally:
            plain.close()
