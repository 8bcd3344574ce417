"""CSV frames: the Arrow reading of plain files equals the csv module's, cell for cell.

``csvframe._read_plain`` reads plain CSV files (ASCII, quotes only around whole fields)
with Arrow string kernels; ``load`` must then give exactly the frame, early rejects, row
count, header and units that the csv-module path (``csvutil.read_rows``) gives. Numbers are
read by Arrow's cast where the text is a plain decimal (``_floats``) and must equal pandas'
``to_numeric`` bit for bit (including the sign of zero).
"""
from __future__ import annotations

import random

import numpy as np
import pandas as pd
import pytest
from hypothesis import given, settings, strategies as st

import pipeline.ingest.csvframe as cfm
from pipeline.ingest import reactions_csv, shomate_csv, table_csv

from .conftest import DATA

ALLOWED = table_csv.COLUMNS + reactions_csv.COLUMNS + shomate_csv.COLUMNS

_FIELDS = ["H2O(g)", '"C(cr,graphite)"', "298.15", " 1.5 ", "", "  ", "#x", " #x", "-0", "1e3", "a b",
           '"a, b"', '""', '"x"y', 'x"y', "1,2", '"unclosed', "\t", "kJ/mol", ".5", "+2"]
_HEADERS = ["species,t [K],cp [J/(mol*K)]", "id,equation,quantity,t_k,value,unit,uncertainty,method"]


@st.composite
def _csv_text(draw) -> str:
    header = draw(st.sampled_from(_HEADERS))
    width = header.count(",") + 1
    lines = [draw(st.sampled_from(["", "# comment", " , ,", ""]))] * draw(st.integers(0, 1)) + [header]
    for _ in range(draw(st.integers(0, 8))):
        n = draw(st.integers(max(width - 2, 0), width + 1))
        lines.append(",".join(draw(st.sampled_from(_FIELDS)) for _ in range(n)))
        if draw(st.integers(0, 6)) == 0:
            lines.append(draw(st.sampled_from(["", " ", ",,,", "# c,d", '"#q",1', "\r"])))
    end = draw(st.sampled_from(["\n", "\r\n"]))
    return end.join(lines) + draw(st.sampled_from(["", end]))


def _both(path, monkeypatch):
    fast = cfm.load(path, "f.csv", fmt="t", allowed=ALLOWED, required=(), example_header="")
    with monkeypatch.context() as m:
        m.setattr(cfm, "_read_plain", lambda p: None)
        general = cfm.load(path, "f.csv", fmt="t", allowed=ALLOWED, required=(), example_header="")
    return fast, general


def _assert_same(fast, general):
    pd.testing.assert_frame_equal(fast.cells, general.cells)
    assert (fast.early_rejects, fast.n_rows, fast.headers, fast.units) == \
        (general.early_rejects, general.n_rows, general.headers, general.units)


@settings(max_examples=300, deadline=None)
@given(text=_csv_text())
def test_plain_reading_equals_the_csv_module(text, tmp_path_factory):
    path = tmp_path_factory.mktemp("csv") / "f.csv"
    path.write_bytes(text.encode())
    mp = pytest.MonkeyPatch()
    try:
        fast, general = _both(path, mp)
    finally:
        mp.undo()
    _assert_same(fast, general)


def test_plain_reading_is_taken_for_quoted_files(tmp_path, monkeypatch):
    """Files with one or several quoted fields per line (and the shipped test data) take the
    Arrow path, and give the csv module's frame."""
    rows = ['id,equation,quantity,t_k,value,unit,uncertainty,method',
            'r1,"C(cr,graphite) + O2(g) = CO2(g)",drh,298.15,-393.5,kJ/mol,0.1,x',
            '"r2","C(cr,graphite) = C(cr,diamond)",drh,298.15,1.9,kJ/mol,0.1,"a, b"',
            'r3,H2O(l) = H2O(g),drh,298.15,44,kJ/mol,0.1,x',
            'r4,x,drh,298.15,44,kJ/mol,0.1,"y"']
    path = tmp_path / "q.csv"
    path.write_text("\n".join(rows) + "\n")
    assert cfm._read_plain(path) is not None
    _assert_same(*_both(path, monkeypatch))
    for name in ("reactions.csv", "table_cal.csv", "shomate.csv"):
        assert cfm._read_plain(DATA / name) is not None
        _assert_same(*_both(DATA / name, monkeypatch))


_NUMBER_TEXT = st.one_of(
    st.floats(allow_nan=True, allow_infinity=True).map(repr),
    st.integers(-10 ** 20, 10 ** 20).map(str),
    st.text(alphabet="0123456789+-.eE x_", max_size=12),
    st.sampled_from(["-0", "+0", "-0.0", "1.", ".5", "1e400", "nan", "Infinity", "0x10", "1_000", ""]))


@settings(max_examples=300, deadline=None)
@given(st.lists(_NUMBER_TEXT, max_size=15), st.sampled_from(["str", object]))
def test_floats_equal_pandas_to_numeric(texts, dtype):
    txt = pd.Series(texts, dtype=dtype)
    got = cfm._floats(txt).to_numpy()
    want = pd.to_numeric(txt.where(txt != "", None), errors="coerce").astype(float).to_numpy()
    assert got.dtype == want.dtype == np.float64
    assert np.array_equal(got, want, equal_nan=True)
    assert (np.signbit(got) == np.signbit(want)).all()


def test_floats_of_many_decimals_equal_float():
    """Random decimal texts up to 25 digits: Arrow's cast, pandas and ``float`` agree."""
    rng = random.Random(3)
    texts = []
    for _ in range(20000):
        d = "".join(rng.choice("0123456789") for _ in range(rng.randint(1, 25)))
        p = rng.randint(0, len(d))
        t = rng.choice(["", "-", "+"]) + d[:p] + "." + d[p:] + rng.choice(["", f"e{rng.randint(-300, 300)}"])
        texts.append(t)
    got = cfm._floats(pd.Series(texts, dtype="str")).to_numpy()
    assert np.array_equal(got, np.array([float(t) for t in texts]))
