"""The check runner (pipeline.checks.runner): split over a forked process, the checks give
exactly the findings of a serial run, in the same order; a failing check or a forked
process that dies loses nothing. (Whether the split saves time is measured in bench/.)

The database is the benchmark generator's (bench/generate.py), whose planted defects make
every check family fire.
"""
from __future__ import annotations

import os
import sys
from pathlib import Path

import pandas as pd
import pytest

from pipeline.checks import registry, runner
from pipeline.checks.context import CheckContext
from pipeline.checks.registry import CheckSpec
from pipeline.findings import make_findings
from pipeline.stages import Run, stage_ingest, stage_validate

ROOT = Path(__file__).resolve().parents[2]
sys.path.insert(0, str(ROOT / "bench"))

import generate as gen  # noqa: E402

needs_fork = pytest.mark.skipif(not runner.can_fork(), reason="the split needs fork (Linux)")


@pytest.fixture(scope="module")
def frames(tmp_path_factory):
    d = tmp_path_factory.mktemp("runner-db")
    gen.generate(d, 200, seed=5, reactions_per_species=1.0)
    run = Run(raw=d / "raw", out=d / "out")
    stage_ingest(run)
    stage_validate(run)
    return run.frames, run.p_db_bar


def _ctx(frames) -> CheckContext:
    f, p = frames
    return CheckContext(species=f["species"], records=f["records"], segments=f["segments"],
                        table_points=f["table_points"], reactions=f["reactions"], p_db_bar=p)


def _spec(check_id: str, func) -> CheckSpec:
    return CheckSpec(check_id, func, doc="A stand-in check for the runner's tests.")


@needs_fork
def test_split_gives_the_serial_findings(frames):
    specs = registry.runnable("check")
    serial = runner.run_checks(_ctx(frames), specs, split=False)
    split = runner.run_checks(_ctx(frames), specs, split=True)
    assert len(serial) == len(split) == len(specs)
    for spec, a, b in zip(specs, serial, split):
        pd.testing.assert_frame_equal(a, b, obj=spec.id)
    # the forked share did work that shows: the planted table defects were found there
    moved = [f for s, f in zip(specs, split) if s.id in runner.SECOND_PROCESS_CHECKS]
    assert sum(len(f) for f in moved) > 0
    assert not any((f["subject"] == "(check failed)").any() for f in split)


def _where(ctx) -> pd.DataFrame:
    return make_findings(check_id="test.where", severity="info", subject="pid", subject_kind="database",
                         observed=float(os.getpid()), message="ran here")


@needs_fork
def test_second_share_runs_in_another_process(frames):
    spec = _spec("test.where", _where)
    here, = runner.run_checks(_ctx(frames), [spec], split=False, second=frozenset({spec.id}))
    there, = runner.run_checks(_ctx(frames), [spec], split=True, second=frozenset({spec.id}))
    assert here["observed"].iloc[0] == os.getpid()
    assert there["observed"].iloc[0] != os.getpid()


def _broken(ctx):
    raise ZeroDivisionError("planted")


@needs_fork
def test_a_check_that_fails_in_the_fork_is_an_error_finding(frames):
    spec = _spec("test.broken", _broken)
    got, = runner.run_checks(_ctx(frames), [spec], split=True, second=frozenset({spec.id}))
    assert list(got["severity"]) == ["error"] and list(got["subject"]) == ["(check failed)"]
    assert "ZeroDivisionError: planted" in got["message"].iloc[0]


@needs_fork
def test_checks_of_a_dead_fork_run_here(frames):
    parent = os.getpid()

    def dies_in_fork(ctx):
        if os.getpid() != parent:
            os._exit(3)                     # the forked process ends without sending anything
        return _where(ctx)

    spec = _spec("test.dies", dies_in_fork)
    got, = runner.run_checks(_ctx(frames), [spec], split=True, second=frozenset({spec.id}))
    assert got["observed"].iloc[0] == parent


def test_small_databases_are_not_split(frames, monkeypatch):
    ctx = _ctx(frames)
    assert runner.staging_rows(ctx) < runner.SPLIT_MIN_ROWS

    def no_fork(*a, **k):
        raise AssertionError("forked for a small database")

    monkeypatch.setattr(runner, "_Forked", no_fork)
    spec = _spec("test.where", _where)
    got, = runner.run_checks(ctx, [spec], second=frozenset({spec.id}))
    assert got["observed"].iloc[0] == os.getpid()


def test_second_share_names_registered_checks():
    """A renamed check must not silently fall out of the forked share."""
    ids = {s.id for s in registry.runnable("check")}
    assert runner.SECOND_PROCESS_CHECKS <= ids


@needs_fork
def test_side_tables_of_forked_checks_come_back(frames):
    """A check that leaves a side table in ``ctx.tables_out`` (as the network check does
    with ``reconciled``) leaves it in this process's context too when it ran in the fork."""
    def with_table(ctx):
        ctx.tables_out["test_side"] = pd.DataFrame({"pid": [os.getpid()]})
        return _where(ctx)

    spec = _spec("test.side", with_table)
    ctx = _ctx(frames)
    got, = runner.run_checks(ctx, [spec], split=True, second=frozenset({spec.id}))
    assert ctx.tables_out["test_side"]["pid"].iloc[0] == got["observed"].iloc[0] != os.getpid()
