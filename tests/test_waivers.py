"""Waivers: the file is validated (file, line and fix in every error), a waiver marks the
findings it accepts without hiding them, an expired or stale waiver is itself reported, and
fingerprints (hence first_seen_run and "new since the previous run") do not depend on the
order of the inputs."""
from __future__ import annotations

import dataclasses
import datetime as dt
import json
import time

import duckdb
import numpy as np
import pandas as pd
import pytest

from pipeline.errors import InputError
from pipeline.findings import fingerprint, make_findings
from pipeline.waivers import Waiver, apply_waivers, load_waivers
from tests.report.rawdata import findings_json, run_cli, write_raw

GOOD = '''# accepted findings of the test database
[[waiver]]
check = "segment.discontinuity"
subject = "O2(g)"
source = "alpha"
reason = "upper fit to be replaced"
by = "A. Reviewer"
expires = 2030-06-30
'''


def _write(tmp_path, text, name="waivers.toml"):
    p = tmp_path / name
    p.write_text(text)
    return p


def _findings():
    return make_findings(check_id=["segment.discontinuity", "segment.discontinuity", "cp.nonpositive"],
                         severity="error", subject=["O2(g)", "O2(g)", "CO(g)"], subject_kind="species",
                         source_id=["alpha", "beta", "alpha"], t_k=1000.0, message=["m1", "m2", "m3"])


# ------------------------------------------------------------------------- the file

def test_load_a_valid_file(tmp_path):
    (w,) = load_waivers(_write(tmp_path, GOOD))
    assert (w.check, w.subject, w.source, w.by, w.expires) == (
        "segment.discontinuity", "O2(g)", "alpha", "A. Reviewer", dt.date(2030, 6, 30))
    assert w.line == 2 and w.where.endswith("waivers.toml:2")
    with pytest.raises(dataclasses.FrozenInstanceError):
        w.reason = "changed"  # frozen: a loaded waiver cannot be altered


def test_no_file_means_no_waivers():
    assert load_waivers(None) == ()


@pytest.mark.parametrize("text,line,found,fix", [
    (GOOD.replace('reason = "upper fit to be replaced"\n', ""), 2, "a [[waiver]] without reason",
     "add reason = …"),
    (GOOD.replace("expires = 2030-06-30", 'expires = "2030-06-30"'), 2, "expires = '2030-06-30'",
     "write expires = YYYY-MM-DD"),
    (GOOD.replace("expires = 2030-06-30", "expires = 2030-06-30T12:00:00"), 2, "expires = datetime",
     "write expires = YYYY-MM-DD"),
    (GOOD.replace("segment.discontinuity", "segment.discontinuty"), 2, "check = 'segment.discontinuty'",
     "correct the id"),
    (GOOD.replace('by = "A. Reviewer"', 'by = "  "'), 2, "by = '  '", "write by"),
    (GOOD + "approved = true\n", 2, "unknown key(s) ['approved']", "correct the spelling"),
    (GOOD + "\n" + GOOD, 11, "a second waiver of segment.discontinuity on O2(g) [alpha] (first on line 2)",
     "merge the two entries"),
    (GOOD.replace('check = "segment.discontinuity"', 'check = "waiver.stale"'), 2, "check = 'waiver.stale'",
     "fix or remove the offending waiver"),
    ("[[waiver]\ncheck = 1\n", 1, "invalid TOML", "correct the syntax"),
])
def test_bad_files_name_file_line_and_fix(tmp_path, text, line, found, fix):
    p = _write(tmp_path, text)
    with pytest.raises(InputError) as exc:
        load_waivers(p)
    e = exc.value
    assert (e.file, e.line) == (str(p), line)
    assert found in e.found
    assert fix in e.fix
    assert str(e).startswith(f"found {e.found} in {p}:{line}, expected ")


def test_whole_message_of_a_missing_field(tmp_path):
    p = _write(tmp_path, GOOD.replace('by = "A. Reviewer"\n', ""))
    with pytest.raises(InputError) as exc:
        load_waivers(p)
    assert str(exc.value) == (
        f"found a [[waiver]] without by in {p}:2, expected check, subject, reason, by and expires in "
        "every waiver — fix: add by = … (a reviewer must be able to see who accepted what, why, and "
        "until when)")


def test_missing_file(tmp_path):
    with pytest.raises(InputError, match="no such file"):
        load_waivers(tmp_path / "nope.toml")


# ----------------------------------------------------------------------- applying them

def _waiver(**kw):
    base = dict(check="segment.discontinuity", subject="O2(g)", reason="accepted", by="me",
                expires=dt.date(2030, 1, 1))
    base.update(kw)
    return Waiver(**base)


def test_waiver_marks_findings_without_removing_them():
    f = apply_waivers(_findings(), (_waiver(),), today=dt.date(2029, 1, 1))
    assert len(f) == 3
    assert f["waived"].tolist() == [True, True, False]  # no source: every source's finding
    assert f["waiver_reason"].iloc[0] == "accepted (me, until 2030-01-01)"
    assert pd.isna(f["waiver_reason"].iloc[2])


def test_source_narrows_the_waiver():
    f = apply_waivers(_findings(), (_waiver(source="beta"),), today=dt.date(2029, 1, 1))
    assert f["waived"].tolist() == [False, True, False]


def test_expired_waiver_waives_nothing_and_is_reported():
    w = _waiver(expires=dt.date(2029, 1, 1))
    on_the_day = apply_waivers(_findings(), (w,), today=dt.date(2029, 1, 1))
    assert on_the_day["waived"].sum() == 2  # valid through its expiry date
    f = apply_waivers(_findings(), (w,), today=dt.date(2029, 1, 2))
    assert not f["waived"].any()
    extra = f[f["check_id"] == "waiver.expired"]
    assert len(extra) == 1 and extra["severity"].iloc[0] == "warning"
    assert "expired on 2029-01-01" in extra["message"].iloc[0]
    assert "2 finding(s) count again" in extra["message"].iloc[0]


def test_stale_waiver_is_reported():
    f = apply_waivers(_findings(), (_waiver(subject="N2(g)"),), today=dt.date(2029, 1, 1))
    assert not f["waived"].any()
    stale = f[f["check_id"] == "waiver.stale"]
    assert len(stale) == 1 and stale["severity"].iloc[0] == "warning"
    assert stale["subject"].iloc[0] == "waiver:segment.discontinuity:N2(g)"
    assert "matches no finding" in stale["message"].iloc[0]


# ---------------------------------------------------------------------- through the CLI

def test_cli_waivers_change_the_exit_code(tmp_path):
    raw = write_raw(tmp_path / "raw")
    out = tmp_path / "first"
    assert run_cli("run", "--raw", str(raw), "--out", str(out)).returncode == 1
    errors = sorted({(f["check_id"], f["subject"], f["source_id"])
                     for f in findings_json(out) if f["severity"] == "error"})
    assert ("cp.nonpositive", "CO(g)", "alpha") in errors and len(errors) >= 3

    def entry(check, subject, source=None, expires="2999-12-31", reason="test"):
        src = f'source = "{source}"\n' if source else ""
        return (f'[[waiver]]\ncheck = "{check}"\nsubject = "{subject}"\n{src}reason = "{reason}"\n'
                f'by = "t"\nexpires = {expires}\n\n')

    w = _write(tmp_path, "".join(entry(*e) for e in errors))
    proc = run_cli("run", "--raw", str(raw), "--out", str(tmp_path / "waived"), "--waivers", str(w))
    assert proc.returncode == 0, proc.stdout + proc.stderr  # every error waived
    f = findings_json(tmp_path / "waived")
    assert sum(x["waived"] for x in f) == sum(x["severity"] == "error" for x in findings_json(out))
    assert run_cli("run", "--raw", str(raw), "--out", str(tmp_path / "w2"), "--waivers", str(w),
                   "--fail-on", "warning").returncode == 1  # the kink warning is not waived

    # the Cp ≤ 0 waiver has expired, and one waiver matches nothing: two warnings, and the
    # expired waiver's error counts again
    w2 = _write(tmp_path, "".join(entry(*e) for e in errors if e[0] != "cp.nonpositive")
                + entry("cp.nonpositive", "CO(g)", expires="2001-01-01", reason="old")
                + entry("cp.nonpositive", "Ar(g)", reason="gone"), "w2.toml")
    proc = run_cli("run", "--raw", str(raw), "--out", str(tmp_path / "expired"), "--waivers", str(w2))
    f = findings_json(tmp_path / "expired")
    ids = [x["check_id"] for x in f]
    assert ids.count("waiver.expired") == 1 and ids.count("waiver.stale") == 1
    live_errors = [x for x in f if x["severity"] == "error" and not x["waived"]]
    assert [(x["check_id"], x["subject"]) for x in live_errors] == [("cp.nonpositive", "CO(g)")]
    assert proc.returncode == 1


def test_cli_bad_waivers_file_exits_2_naming_file_and_line(tmp_path):
    raw = write_raw(tmp_path / "raw")
    w = _write(tmp_path, GOOD.replace("expires = 2030-06-30", "expires = tomorrow"))
    proc = run_cli("run", "--raw", str(raw), "--out", str(tmp_path / "c"), "--waivers", str(w))
    assert proc.returncode == 2
    assert f"{w}:" in proc.stderr and "fix:" in proc.stderr
    assert not (tmp_path / "c").exists()  # stopped before any work


# ------------------------------------------------------------------------ fingerprints

def test_fingerprint_is_a_function_of_check_subject_source_only():
    f = _findings()
    fp = fingerprint(f)
    shuffled = f.sample(frac=1.0, random_state=3)
    assert fingerprint(shuffled).tolist() == fp.loc[shuffled.index].tolist()
    moved = f.assign(t_k=1234.0, observed=9.0, message="other words")
    assert fingerprint(moved).tolist() == fp.tolist()  # values and wording are not identity
    assert fp.nunique() == 3


def _release_findings(out):
    con = duckdb.connect(str(out / "thermo.duckdb"), read_only=True)
    try:
        return con.execute("SELECT * FROM findings").df()
    finally:
        con.close()


def test_fingerprints_and_history_survive_shuffled_inputs(tmp_path):
    out = tmp_path / "curated"
    raw1 = write_raw(tmp_path / "raw1")
    raw2 = write_raw(tmp_path / "raw2", seed=7, reverse_sources=True)
    assert (raw1 / "alpha.nasa7").read_text() != (raw2 / "alpha.nasa7").read_text()
    assert (raw1 / "sources.toml").read_text() != (raw2 / "sources.toml").read_text()

    assert run_cli("run", "--raw", str(raw1), "--out", str(out)).returncode == 1
    first = _release_findings(out)
    run1 = first["first_seen_run"].iloc[0]
    time.sleep(1.1)  # run ids have one-second resolution: make the second run's id differ
    assert run_cli("run", "--raw", str(raw2), "--out", str(out)).returncode == 1
    second = _release_findings(out)

    key = ["check_id", "subject", "source_id", "t_k", "message"]
    same_cols = [c for c in first.columns if c != "first_seen_run"]
    pd.testing.assert_frame_equal(first[same_cols].sort_values(key).reset_index(drop=True),
                                  second[same_cols].sort_values(key).reset_index(drop=True))
    assert list(first["fingerprint"]) == list(second["fingerprint"])  # same order too
    assert set(second["first_seen_run"]) == {run1}  # carried through the rerun
    runs = duckdb.connect(str(out / "thermo.duckdb"), read_only=True).execute(
        "SELECT run_id FROM runs ORDER BY run_id").fetchall()
    assert len(runs) == 2 and runs[0][0] == run1 != runs[1][0]
    html = (out / "report" / "index.html").read_text()
    assert f"(run {run1}): <strong>0</strong> new finding(s), 0 no longer reported" in html
