"""nasa7 reader: fixed columns, the published 7-term equations, malformed records."""
from __future__ import annotations

import subprocess
import sys
from pathlib import Path

import numpy as np
import pytest

from pipeline.constants import R
from pipeline.ingest import nasa7
from pipeline.thermo import COEF_COLUMNS, evaluate

from .conftest import DATA, assert_accounted, assert_batch_equal, mutate_lines, source
from .writers import nasa7_record


def nasa7_published(c, t):
    """NASA TM-4513 (McBride, Gordon & Reno, 1993), eqs. 1-3, written out independently:
    Cp/R = a1 + a2 T + a3 T² + a4 T³ + a5 T⁴;
    H/RT = a1 + a2 T/2 + a3 T²/3 + a4 T³/4 + a5 T⁴/5 + a6/T;
    S/R  = a1 ln T + a2 T + a3 T²/2 + a4 T³/3 + a5 T⁴/4 + a7."""
    a1, a2, a3, a4, a5, a6, a7 = c
    cp = a1 + a2 * t + a3 * t**2 + a4 * t**3 + a5 * t**4
    h = a1 + a2 * t / 2 + a3 * t**2 / 3 + a4 * t**3 / 4 + a5 * t**4 / 5 + a6 / t
    s = a1 * np.log(t) + a2 * t + a3 * t**2 / 2 + a4 * t**3 / 3 + a5 * t**4 / 4 + a7
    return R * cp, R * h * t, R * s


def test_malformed_record_is_rejected_and_the_rest_loaded():
    r = nasa7.read(DATA / "mixed.nasa7", source("nasa7"), "legacy/mixed.nasa7")
    assert list(r.records["name"]) == ["N2", "AR", "NAOH(L)"]
    assert r.n_read == 4 and len(r.rejected) == 1
    bad = r.rejected.iloc[0]
    assert (bad["file"], bad["line"]) == ("legacy/mixed.nasa7", 8)
    assert bad["reason"].startswith("legacy/mixed.nasa7:8: nasa7 record: unparsable line 3 coefficient 2 '5x.xx52800E+00' "
                                    "in columns 16-30")
    assert "fix:" in bad["reason"]
    assert bad["raw_text"].count("\n") == 3 and bad["raw_text"].startswith("O2 ")
    assert_accounted(r, "nasa7")


def test_states_elements_and_ranges():
    r = nasa7.read(DATA / "mixed.nasa7", source("nasa7"), "x")
    rec = r.records.set_index("name")
    assert rec.loc["N2", "state"] == "g" and rec.loc["NAOH(L)", "state"] == "l"
    assert rec.loc["AR", "elements_json"] == '{"Ar": 1.0}'
    assert rec.loc["N2", "t_low_k"] == 300.0 and rec.loc["N2", "t_high_k"] == 5000.0
    seg = r.segments[r.segments["record_id"] == "s/N2"].sort_values("t_low_k")
    assert list(seg["t_high_k"]) == [1000.0, 5000.0]


def test_canonical_segment_evaluates_as_the_published_equations():
    r = nasa7.read(DATA / "mixed.nasa7", source("nasa7"), "x")
    seg = r.segments[r.segments["record_id"] == "s/N2"].sort_values("t_low_k")
    lower = [3.29867700E+00, 1.40824040E-03, -3.96322200E-06, 5.64151500E-09, -2.44485400E-12,
             -1.02089990E+03, 3.95037200E+00]
    upper = [2.92664000E+00, 1.48797680E-03, -5.68476000E-07, 1.00970380E-10, -6.75335100E-15,
             -9.22797700E+02, 5.98052800E+00]
    for (_, row), c, t in zip(seg.iterrows(), (lower, upper), (np.linspace(300, 1000, 8), np.linspace(1000, 5000, 9))):
        p = evaluate(row[list(COEF_COLUMNS)].to_numpy(float), t)
        cp, h, s = nasa7_published(c, t)
        np.testing.assert_allclose(p.cp, cp, rtol=1e-12)
        np.testing.assert_allclose(p.h, h, rtol=1e-12, atol=1e-9)
        np.testing.assert_allclose(p.s, s, rtol=1e-12)


def test_round_trip(tmp_path):
    rng = np.random.default_rng(7)
    up, lo = rng.normal(size=7), rng.normal(size=7)
    up[1:5] *= [1e-3, 1e-7, 1e-11, 1e-15]
    lo[1:5] *= [1e-3, 1e-6, 1e-9, 1e-12]
    p = tmp_path / "rt.nasa7"
    p.write_text(nasa7_record("CH4", {"C": 1, "H": 4}, "G", 200, 1000, 3500, up, lo) + "\n")
    r = nasa7.read(p, source("nasa7"), "rt.nasa7")
    seg = r.segments.sort_values("t_low_k")
    got_lo = seg.iloc[0][["a3", "a4", "a5", "a6", "a7", "b1", "b2"]].to_numpy(float)
    got_up = seg.iloc[1][["a3", "a4", "a5", "a6", "a7", "b1", "b2"]].to_numpy(float)
    # E15.8 keeps 9 significant digits
    np.testing.assert_allclose(got_lo, lo, rtol=1e-8)
    np.testing.assert_allclose(got_up, up, rtol=1e-8)
    assert (seg[["a1", "a2"]].to_numpy() == 0).all()


def test_wrong_line_number_resynchronises(tmp_path):
    good = nasa7_record("AR", {"AR": 1}, "G", 300, 1000, 5000, [2.5, 0, 0, 0, 0, -745.375, 4.366],
                        [2.5, 0, 0, 0, 0, -745.375, 4.366])
    broken = good.split("\n")
    broken[2] = broken[2][:79] + "7"
    p = tmp_path / "x.nasa7"
    p.write_text("\n".join(broken) + "\n" + good.replace("AR    ", "AR2   ", 1) + "\n")
    r = nasa7.read(p, source("nasa7"), "x.nasa7")
    assert len(r.records) == 1
    assert "line 3 should be line 3 of the record" in r.rejected["reason"].iloc[0]
    assert_accounted(r, "nasa7")


MANIFEST = """[database]
name = "nasa7 only"

[[source]]
id = "legacy"
path = "mixed.nasa7"
format = "nasa7"
citation = "hand-written test file"
"""


def thermoledger() -> list[str]:
    exe = Path(sys.executable).with_name("thermoledger")
    return [str(exe)] if exe.exists() else [sys.executable, "-m", "pipeline.cli.app"]


def test_malformed_record_through_the_cli(tmp_path):
    import duckdb

    raw = tmp_path / "raw"
    raw.mkdir()
    (raw / "mixed.nasa7").write_bytes((DATA / "mixed.nasa7").read_bytes())
    (raw / "sources.toml").write_text(MANIFEST)
    out = tmp_path / "curated"
    proc = subprocess.run(thermoledger() + ["run", "--raw", str(raw), "--out", str(out), "--fail-on", "never"],
                          capture_output=True, text=True, timeout=300)
    assert proc.returncode == 0, proc.stderr
    con = duckdb.connect(str(out / "thermo.duckdb"), read_only=True)
    try:
        rej = con.execute("SELECT file, line, reason FROM rejected").fetchall()
        recs = con.execute("SELECT species FROM records ORDER BY species").fetchall()
        src = con.execute("SELECT rows_read, rows_accepted, rows_rejected FROM sources").fetchall()
        found = con.execute("SELECT count(*) FROM findings WHERE check_id = 'schema.rejected' "
                            "AND message LIKE '%mixed.nasa7:8%'").fetchall()
    finally:
        con.close()
    assert rej == [("mixed.nasa7", 8, pytest.approx(rej[0][2]))]
    assert "unparsable line 3 coefficient 2" in rej[0][2]
    assert [x for (x,) in recs] == ["Ar(g)", "N2(g)", "NaOH(l)"]
    assert src == [(4, 3, 1)]
    assert found == [(1,)]


# ---------------------------------------------------- the batch parser equals the general one
# nasa7._parse_blocks reads plain records with numpy; every record it does not take goes to
# _parse_record. The two must give the same frames on any file: compare against a run with
# the batch parser switched off, on column-aware mutations of real records.

import dataclasses  # noqa: E402
import random  # noqa: E402

_BASES = [(DATA / "mixed.nasa7").read_text(),
          (Path(__file__).resolve().parents[2] / "raw" / "tollbridge" / "tcl24_gases.nasa7").read_text()]


@pytest.mark.parametrize("seed", range(4))
def test_batch_parser_equals_the_record_parser(tmp_path, seed):
    """30 mutated files per seed, both layouts: the frames with the batch parser on and off
    are identical (values, dtypes, rejected rows and their reasons)."""
    rng = random.Random(seed)
    path = tmp_path / "m.nasa7"
    for _ in range(30):
        path.write_text(mutate_lines(rng.choice(_BASES), rng, (24, 29, 45, 55, 65, 73, 78)))
        for layout in ("classic", "tm4513"):
            src = dataclasses.replace(source("nasa7"), nasa7_layout=layout)
            assert_batch_equal(nasa7, path, src)
