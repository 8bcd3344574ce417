"""How the registered checks run: one after another, or split over two processes.

Every check is a pure function of the :class:`~pipeline.checks.context.CheckContext`, so
the checks of the check stage can run in any order and in any process and give the same
findings. On a large database (:data:`SPLIT_MIN_ROWS`) and where the operating system
forks processes cheaply (Linux), :func:`run_checks` runs a fixed share of them
(:data:`SECOND_PROCESS_CHECKS`) in a forked copy of this process, which sees the
context's frames without copying or pickling them, while this process runs the rest; the
forked process sends its findings back through a pipe. A check that fails in either
process becomes an error finding (:func:`safe_run`), as in a serial run; if the forked
process cannot start or dies, its checks run here. The findings are returned in the
order of ``specs`` either way; side tables the forked checks put in ``ctx.tables_out``
come back with them (its other context caches do not).
"""
from __future__ import annotations

import gc
import sys
import traceback
from typing import Callable, Sequence

import pandas as pd

from ..findings import make_findings
from .registry import CheckSpec

#: Check stages with fewer staging rows (records + segments + table points + reactions)
#: than this run in one process: a fork and the context caches built twice cost more
#: than they save.
SPLIT_MIN_ROWS = 200_000

#: The checks the forked process runs: the table family, the calorimetric third-law
#: checks, the composition check and the phase checks; about half of the stage's time
#: (measured at 10⁶ species: 48.6 s there against 48.4 s in this process, the shared
#: context each half builds for itself included).
SECOND_PROCESS_CHECKS = frozenset({
    "table.enthalpy-integral", "table.entropy-integral", "table.gibbs-identity", "table.logk-identity",
    "table.formation-identity", "composition.molar-mass", "thirdlaw.zero-point",
    "thirdlaw.calorimetric-entropy", "phase.transition-mismatch", "phase.reference-not-stable",
    "phase.metastable",
})


def safe_run(spec: CheckSpec, ctx) -> pd.DataFrame:
    """Run one check; a crash becomes an error finding instead of ending the run."""
    try:
        return spec.func(ctx)
    except Exception as exc:  # a broken check must not hide the others' findings
        tb = traceback.format_exception_only(type(exc), exc)[-1].strip()
        return make_findings(check_id=spec.id, severity="error", subject="(check failed)",
                             subject_kind="database", message=f"check {spec.id} failed: {tb}",
                             hint="a thermoledger bug: please report it with the input that caused it")


def staging_rows(ctx) -> int:
    """Rows the checks work through: records, segments, table points, reactions."""
    return sum(len(f) for f in (ctx.records, ctx.segments, ctx.table_points, ctx.reactions))


def can_fork() -> bool:
    """Whether a forked copy of this process is a safe and cheap second worker (Linux)."""
    import multiprocessing as mp

    return sys.platform.startswith("linux") and "fork" in mp.get_all_start_methods()


def run_checks(ctx, specs: Sequence[CheckSpec], progress: Callable[[str, int, int], None] | None = None,
               split: bool | None = None, second: frozenset = SECOND_PROCESS_CHECKS) -> list[pd.DataFrame]:
    """Findings of each of ``specs`` on ``ctx``, in the order of ``specs``.

    ``split``: run the checks whose ids are in ``second`` in a forked process (None: when
    the context has at least :data:`SPLIT_MIN_ROWS` staging rows and :func:`can_fork`).
    ``progress(message, done, total)`` is told about the checks run in this process.
    """
    specs = list(specs)
    if split is None:
        split = staging_rows(ctx) >= SPLIT_MIN_ROWS and can_fork()
    other = [s for s in specs if s.id in second] if split else []
    mine = [s for s in specs if s not in other]
    found: dict[str, pd.DataFrame] = {}
    worker = _Forked(ctx, other) if other else None
    for i, spec in enumerate(mine):
        if progress is not None:
            progress(f"check {spec.id}", i, len(specs))
        found[spec.id] = safe_run(spec, ctx)
    if worker is not None:
        got, tables = worker.results()
        ctx.tables_out.update(tables)
        for i, spec in enumerate(other):
            if spec.id not in got:          # the forked process did not deliver: run it here
                if progress is not None:
                    progress(f"check {spec.id}", len(mine) + i, len(specs))
                got[spec.id] = safe_run(spec, ctx)
        found.update(got)
    return [found[s.id] for s in specs]


class _Forked:
    """``specs`` run by :func:`safe_run` in a forked copy of this process."""

    def __init__(self, ctx, specs: list[CheckSpec]):
        import multiprocessing as mp

        self.specs = specs
        self.proc = self.conn = None
        fork = mp.get_context("fork")
        recv, send = fork.Pipe(duplex=False)
        # objects that exist now are never collected in the copy: its collector does not
        # walk (and so write to, and copy) the pages of the frames both processes share
        gc.freeze()
        try:
            self.proc = fork.Process(target=_child, args=(send, ctx, specs), daemon=True)
            self.proc.start()
            self.conn = recv
        except OSError:
            self.proc = None
            recv.close()
        finally:
            gc.unfreeze()
            send.close()

    def results(self) -> tuple[dict[str, pd.DataFrame], dict]:
        """(check id → findings, the side tables the checks added to ``ctx.tables_out``)
        of the forked process; ({}, {}) if it failed to deliver."""
        if self.proc is None:
            return {}, {}
        try:
            found, tables = self.conn.recv()
            got = dict(found)
        except (EOFError, OSError):
            got, tables = {}, {}
        finally:
            self.conn.close()
            self.proc.join()
        return got, tables


def _child(conn, ctx, specs: list[CheckSpec]) -> None:
    """The forked process: run ``specs`` and send their findings (the arguments of a
    forked process are inherited, not pickled)."""
    try:
        before = dict(ctx.tables_out)
        found = [(s.id, safe_run(s, ctx)) for s in specs]
        conn.send((found, {k: v for k, v in ctx.tables_out.items() if before.get(k) is not v}))
    finally:
        conn.close()
