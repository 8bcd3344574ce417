"""nasa9 reader: the published nine-term layout and equations, states, charges, rejections."""
from __future__ import annotations

import numpy as np
import pandas as pd
import pytest

from pipeline.constants import R
from pipeline.ingest import nasa9
from pipeline.thermo import COEF_COLUMNS, evaluate

from .conftest import DATA, assert_accounted, source
from .writers import NASA9_HEADER, nasa9_record


def nasa9_published(a, t):
    """NASA/TP-2002-211556 (McBride, Zehe & Gordon, 2002), eqs. 2-4, written out:
    Cp/R = a1 T⁻² + a2 T⁻¹ + a3 + a4 T + a5 T² + a6 T³ + a7 T⁴;
    H/RT = −a1 T⁻² + a2 ln T / T + a3 + a4 T/2 + a5 T²/3 + a6 T³/4 + a7 T⁴/5 + b1/T;
    S/R  = −a1 T⁻²/2 − a2 T⁻¹ + a3 ln T + a4 T + a5 T²/2 + a6 T³/3 + a7 T⁴/4 + b2."""
    a1, a2, a3, a4, a5, a6, a7, b1, b2 = a
    cp = a1 / t**2 + a2 / t + a3 + a4 * t + a5 * t**2 + a6 * t**3 + a7 * t**4
    h = -a1 / t**2 + a2 * np.log(t) / t + a3 + a4 * t / 2 + a5 * t**2 / 3 + a6 * t**3 / 4 + a7 * t**4 / 5 + b1 / t
    s = -a1 / t**2 / 2 - a2 / t + a3 * np.log(t) + a4 * t + a5 * t**2 / 2 + a6 * t**3 / 3 + a7 * t**4 / 4 + b2
    return R * cp, R * h * t, R * s


@pytest.fixture(scope="module")
def small():
    return nasa9.read(DATA / "small.nasa9", source("nasa9"), "tp/small.nasa9")


def test_records_states_labels_charges(small):
    rec = small.records.set_index("name")
    assert list(rec.index) == ["H2O", "Al2O3(a)", "H2O(L)", "H3O+"]
    assert rec.loc["H2O", ["state", "charge"]].tolist() == ["g", 0]
    assert rec.loc["Al2O3(a)", ["state", "label"]].tolist() == ["cr", "a"]
    assert rec.loc["H2O(L)", "state"] == "l" and pd.isna(rec.loc["H2O(L)", "label"])
    assert rec.loc["H3O+", "charge"] == 1 and rec.loc["H3O+", "elements_json"] == '{"H": 3.0, "O": 1.0}'
    assert rec.loc["H2O", "stated_dfh_j_mol"] == -241826.4
    assert rec.loc["H2O", "stated_molar_mass_g_mol"] == 18.01528
    assert rec.loc["Al2O3(a)", "elements_json"] == '{"Al": 2.0, "O": 3.0}'


def test_rejections_are_explained(small):
    assert_accounted(small, "nasa9")
    rej = small.rejected.set_index("line")
    assert "non-standard exponents -2 -1 0 1 2 3 4 5" in rej.loc[27, "reason"]
    assert "0 temperature intervals" in rej.loc[33, "reason"]
    assert rej.loc[33, "raw_text"].startswith("JP-4")
    assert len(small.rejected) == 2


def test_segments_evaluate_as_the_published_equations(small):
    seg = small.segments[small.segments["record_id"] == "s/H2O"].sort_values("t_low_k")
    text = (DATA / "small.nasa9").read_text().splitlines()
    # coefficients as printed in the file (D16.9), read independently of the reader
    def coef(i):
        l1, l2 = text[i], text[i + 1]
        f = lambda s: float(s.replace("D", "E"))
        return [f(l1[k:k + 16]) for k in range(0, 80, 16)] + [f(l2[0:16]), f(l2[16:32]), f(l2[48:64]), f(l2[64:80])]
    for (_, row), line in zip(seg.iterrows(), (6, 9)):
        t = np.linspace(row["t_low_k"], row["t_high_k"], 7)
        p = evaluate(row[list(COEF_COLUMNS)].to_numpy(float), t)
        cp, h, s = nasa9_published(coef(line), t)
        np.testing.assert_allclose(p.cp, cp, rtol=1e-12)
        np.testing.assert_allclose(p.h, h, rtol=1e-12)
        np.testing.assert_allclose(p.s, s, rtol=1e-12)


def test_water_against_janaf(small):
    """JANAF (Chase, NIST-JANAF Thermochemical Tables, 4th ed., 1998), H2O(g) at 1000 K:
    Cp = 41.268 J/(mol*K), S = 232.738 J/(mol*K), H − H298 = 26.000 kJ/mol (from memory).
    The file holds the NIST WebBook Shomate fit in nine-term form; the fit reproduces
    JANAF to 0.05 % in Cp (its stated fit quality), hence the tolerances."""
    seg = small.segments[small.segments["record_id"] == "s/H2O"].sort_values("t_low_k").iloc[0]
    p = evaluate(seg[list(COEF_COLUMNS)].to_numpy(float), 1000.0)
    assert p.cp == pytest.approx(41.268, rel=5e-4)
    assert p.s == pytest.approx(232.738, abs=0.02)
    assert (p.h - -241826.4) == pytest.approx(26000.0, abs=20.0)


def test_round_trip_with_header_and_end_markers(tmp_path):
    rng = np.random.default_rng(3)
    iv = [(200.0, 1000.0, *rng.normal(size=9)), (1000.0, 6000.0, *rng.normal(size=9))]
    p = tmp_path / "rt.nasa9"
    p.write_text(NASA9_HEADER + "\n" + nasa9_record("CH4", {"C": 1, "H": 4}, 0, 16.04246, -74600.0, iv)
                 + "\nEND PRODUCTS\nEND REACTANTS\n")
    r = nasa9.read(p, source("nasa9"), "rt.nasa9")
    assert len(r.records) == 1 and len(r.rejected) == 0
    got = r.segments.sort_values("t_low_k")[list(COEF_COLUMNS)].to_numpy(float)
    np.testing.assert_allclose(got, np.array([i[2:] for i in iv]), rtol=1e-9)   # D16.9: 10 digits


def test_truncated_and_broken_records_resynchronise(tmp_path):
    c = np.arange(1.0, 10.0)
    good = nasa9_record("CO", {"C": 1, "O": 1}, 0, 28.0101, -110535.2, [(200.0, 1000.0, *c), (1000.0, 6000.0, *c)])
    short = nasa9_record("CO2", {"C": 1, "O": 2}, 0, 44.0095, -393510.0, [(200.0, 1000.0, *c), (1000.0, 6000.0, *c)])
    short = "\n".join(short.split("\n")[:-3])                          # declares 2 intervals, holds 1
    broken = good.replace("CO  ", "O2  ", 1).split("\n")
    broken[3] = broken[3][:20] + "#" + broken[3][21:]                     # garbage in a coefficient
    p = tmp_path / "x.nasa9"
    p.write_text("\n".join([short, "\n".join(broken), good, good.split("\n")[0]]) + "\n")
    r = nasa9.read(p, source("nasa9"), "x.nasa9")
    assert list(r.records["name"]) == ["CO"]
    reasons = list(r.rejected["reason"])
    assert "declares 2 intervals but the next record starts at line 6 after 1" in reasons[0]
    assert "unparsable interval 1 coefficient a2" in reasons[1]
    assert "expected a species name line" in reasons[2]         # the lone name line at the end
    assert_accounted(r, "nasa9")


def test_overlapping_intervals_rejected(tmp_path):
    c = np.arange(1.0, 10.0)
    p = tmp_path / "x.nasa9"
    p.write_text(nasa9_record("CO", {"C": 1, "O": 1}, 0, 28.0, 0.0, [(200.0, 1000.0, *c), (900.0, 6000.0, *c)]) + "\n")
    r = nasa9.read(p, source("nasa9"), "x.nasa9")
    assert len(r.records) == 0
    assert "interval 2 starts at 900 K, before interval 1 ends at 1000 K" in r.rejected["reason"].iloc[0]


@pytest.mark.parametrize("name,flag,expected", [
    ("H2O", 0, ("g", None)), ("H2O(L)", 1, ("l", None)), ("H2O(l)", 2, ("l", None)),
    ("NaCl(cr)", 1, ("cr", None)), ("NaCl(s)", 1, ("cr", None)), ("NaCl", 1, ("cr", None)),
    ("Fe(a)", 1, ("cr", "a")), ("Na2SO4(I)", 1, ("cr", "I")), ("C(gr)", 1, ("cr", "gr")),
])
def test_state_rules(name, flag, expected):
    assert nasa9.state_of(name, flag) == expected


# ---------------------------------------------------- the batch parser equals the general one
# nasa9._plain_intervals reads plain intervals with numpy; every interval it does not take
# goes to _parse_interval. The two must give the same frames on any file.

import random  # noqa: E402
from pathlib import Path  # noqa: E402

from .conftest import assert_batch_equal, mutate_lines  # noqa: E402

_BASES = [(DATA / "small.nasa9").read_text(),
          (Path(__file__).resolve().parents[2] / "raw" / "ellery" / "ellery87.nasa9").read_text()]


@pytest.mark.parametrize("seed", range(4))
def test_batch_parser_equals_the_interval_parser(tmp_path, seed):
    """30 mutated files per seed: the frames and notes with the batch parser on and off are
    identical (values, dtypes, rejected rows and their reasons)."""
    rng = random.Random(seed)
    path = tmp_path / "m.nasa9"
    for _ in range(30):
        path.write_text(mutate_lines(rng.choice(_BASES), rng, (0, 10, 11, 22, 23, 28, 32, 48, 50, 52, 64, 65)))
        assert_batch_equal(nasa9, path, source("nasa9"))


def test_frames_built_from_tuples_equal_frames_from_dicts():
    """The reader builds its records and segments frames column by column; they must equal
    what ``base.frame`` builds from one dict per row (values, dtypes, column order), also
    for a label column mixing None and text and a ΔfH° column with NaN."""
    import json
    import math

    from pipeline.ingest.base import RECORD_COLUMNS, SEGMENT_COLUMNS, frame

    keys = ["record_id", "name", "state", "label", "elements_json", "charge", "line", "t_low_k", "t_high_k",
            "stated_dfh_j_mol", "stated_molar_mass_g_mol", "date_code"]
    rows = [("s/A", "A", "cr", None, '{"C": 1.0}', 0, 1, 200.0, 1000.0, math.nan, 12.011, ""),
            ("s/B(a)", "B(a)", "cr", "a", '{"B": 1.0}', -1, 5, 300.0, 6000.0, -5.5, 10.81, "g 1/02")]
    for part in (rows, rows[:1], rows[1:]):
        dicts = [dict(zip(keys, r), source_id="s", species_hint=None, kind="polynomial", form="nasa9", file="f")
                 for r in part]
        pd.testing.assert_frame_equal(nasa9._record_frame(part, "s", "f"), frame(dicts, RECORD_COLUMNS),
                                      check_exact=True)
    segs = [("s/A", 0, 200.0, 1000.0, *np.linspace(-1, 1, 9), 3), ("s/A", 1, 1000.0, 6000.0, *range(9), 6)]
    dicts = [dict(zip(SEGMENT_COLUMNS, s)) for s in segs]
    pd.testing.assert_frame_equal(nasa9._segment_frame(segs), frame(dicts, SEGMENT_COLUMNS), check_exact=True)
    assert nasa9._segment_frame([]).columns.tolist() == list(SEGMENT_COLUMNS)
    for elements in ({"C": 31.0, "H": 50.5, "N": 2.0}, {"Cl": 1e-20}, {"X'": 1.0}, {"C": math.nan}, {}):
        assert nasa9._elements_json(elements) == json.dumps(elements, sort_keys=True)
