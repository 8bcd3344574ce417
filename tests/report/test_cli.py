"""``thermoledger run`` exit codes (outputs.md: 0 nothing unwaived at or above --fail-on,
1 such findings, 2 unusable input or command line) and its progress output."""
from __future__ import annotations

import io

import pytest

from pipeline.cli.progress import progress_printer

from .rawdata import SPECIES, findings_json, run_cli, write_raw


@pytest.mark.parametrize("fail_on,code", [("error", 1), ("warning", 1), ("never", 0)])
def test_fail_on_with_planted_errors(release, tmp_path, fail_on, code):
    raw, _, _ = release
    proc = run_cli("run", "--raw", str(raw), "--out", str(tmp_path / "c"), "--fail-on", fail_on)
    assert proc.returncode == code, proc.stderr


def test_clean_database_exits_0_and_warnings_follow_fail_on(tmp_path, monkeypatch):
    import tests.report.rawdata as rd

    clean = {"alpha": [r for r in SPECIES["alpha"] if r[0] in ("N2", "AR")]}
    monkeypatch.setattr(rd, "SPECIES", clean)
    raw = rd.write_raw(tmp_path / "raw")
    proc = run_cli("run", "--raw", str(raw), "--out", str(tmp_path / "c"))
    findings = findings_json(tmp_path / "c")
    assert not [f for f in findings if f["severity"] == "error"], findings
    assert proc.returncode == 0, proc.stdout
    warn = any(f["severity"] == "warning" for f in findings)
    assert run_cli("run", "--raw", str(raw), "--out", str(tmp_path / "d"),
                   "--fail-on", "warning").returncode == int(warn)


def test_unusable_input_and_command_line_exit_2(tmp_path):
    proc = run_cli("run", "--raw", str(tmp_path / "missing"), "--out", str(tmp_path / "c"))
    assert proc.returncode == 2
    assert "sources.toml" in proc.stderr and "fix:" in proc.stderr
    raw = write_raw(tmp_path / "raw")
    proc = run_cli("run", "--raw", str(raw), "--fail-on", "sometimes")
    assert proc.returncode == 2 and "sometimes" in proc.stderr


def test_no_tty_gives_one_plain_line_per_stage(release):
    _, _, proc = release
    lines = proc.stderr.strip().splitlines()
    stages = [ln.split("] ")[-1] for ln in lines]
    assert stages == ["ingest", "validate", "check", "reconcile", "emit", "report", "done"]
    assert "\x1b[" not in proc.stderr  # no terminal escapes in CI logs
    assert proc.stdout.startswith("thermoledger run ")  # stdout holds only the summary


def test_tty_shows_a_bar_per_stage():
    buf = io.StringIO()
    with progress_printer(stream=buf, tty=True) as say:
        say("ingest", stage="ingest")
        say("reading a.nasa7", 0, 2)
        say("reading b.nasa7", 1, 2)
        say("check", stage="check")
        for i in range(3):
            say(f"check c{i}", i, 3)
    text = buf.getvalue()
    assert "ingest" in text and "check" in text
    assert "2/2" in text and "3/3" in text  # each stage's bar completes with its own total
    assert "\x1b[" in text  # drawn with terminal control sequences
