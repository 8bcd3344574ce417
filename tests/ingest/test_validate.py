"""pandera staging schemas and the validate stage: readable reasons, whole records, accounting."""
from __future__ import annotations

import json

import numpy as np
import pandas as pd
import pytest

from pipeline.ingest import base as ib
from pipeline.stages import Run, stage_ingest, stage_validate
from pipeline.validate import failures
from schemas import STAGING_SCHEMAS

from .writers import csv_text


def _records(**over):
    row = dict(record_id="s/CO(g)", species="CO(g)", source_id="s", name="CO", kind="polynomial", form="nasa7",
               state="g", elements_json='{"C": 1.0, "O": 1.0}', charge=0, t_low_k=300.0, t_high_k=5000.0,
               stated_dfh_j_mol=np.nan, stated_molar_mass_g_mol=np.nan, file="f", line=1)
    row.update(over)
    return pd.DataFrame([row])


def test_clean_record_passes():
    assert failures(STAGING_SCHEMAS["records"], _records()) == {}


@pytest.mark.parametrize("over,needle", [
    (dict(t_low_k=6000.0), "T range must ascend (t_low_k < t_high_k) (t_low_k = 6000, t_high_k = 5000)"),
    (dict(t_low_k=-5.0), "column t_low_k (lowest temperature [K]) = -5: must be ≥ 0 K (absolute temperature)"),
    (dict(t_low_k=0.0), "a polynomial's range must start above 0 K"),
    (dict(t_high_k=np.inf), "column t_high_k (highest temperature [K]) = inf: must be a finite number"),
    (dict(state="s"), "column state (state) = 's': must be one of g, l, cr, aq"),
    (dict(elements_json='{"Xx": 1}'), "must hold element symbols of the periodic table"),
    (dict(elements_json='{"C": -1}'), "must hold element symbols of the periodic table"),
    (dict(stated_dfh_j_mol=-2.4e9), "must lie within ±1e+08 J/mol (a kJ/J or cal/J unit slip?)"),
    (dict(stated_molar_mass_g_mol=0.0), "must be > 0 g/mol"),
    (dict(charge=0.5), "must be a whole number"),
    (dict(t_low_k="abc"), "column t_low_k = 'abc' is not a number"),
])
def test_record_failures_read_well(over, needle):
    (reason,) = failures(STAGING_SCHEMAS["records"], _records(**over)).values()
    assert reason.startswith("schema records: ")
    assert needle in reason
    assert " — fix: " in reason


def test_one_bad_cell_fails_only_its_row():
    df = pd.concat([_records(), _records(record_id="s/X", t_low_k="abc")], ignore_index=True)
    assert list(failures(STAGING_SCHEMAS["records"], df)) == [1]


def test_tables_may_start_at_zero_kelvin_and_have_one_row():
    rec = pd.concat([_records(kind="table", form="table", t_low_k=0.0, t_high_k=298.15),
                     _records(record_id="s/one", kind="table", form="table", t_low_k=298.15, t_high_k=298.15)],
                    ignore_index=True)
    assert failures(STAGING_SCHEMAS["records"], rec) == {}
    tp = pd.DataFrame({c: [np.nan, np.nan] for c in ib.TABLE_POINT_COLUMNS})
    tp["record_id"] = "s/Na(cr)"
    tp["t_k"] = [0.0, 0.0]
    tp["cp_j_mol_k"] = [0.0, 0.0]
    tp["s_j_mol_k"] = [0.0, 0.0]
    tp["gef_j_mol_k"] = [np.nan, 3.0]
    bad = failures(STAGING_SCHEMAS["table_points"], tp)
    assert list(bad) == [1]
    assert "gef must be empty at T = 0" in bad[1]


def test_table_ranges():
    tp = pd.DataFrame({c: [np.nan] for c in ib.TABLE_POINT_COLUMNS})
    tp = tp.assign(record_id="r", t_k=300.0, cp_j_mol_k=30.0, s_j_mol_k=-1.0, uncertainty_dfh_j_mol=-3.0)
    (reason,) = failures(STAGING_SCHEMAS["table_points"], tp).values()
    assert "column s_j_mol_k (entropy [J/(mol*K)]) = -1: must lie in [0, 100000] J/(mol*K)" in reason
    assert "column uncertainty_dfh_j_mol" in reason and "must be ≥ 0" in reason


def test_reaction_schema():
    rx = pd.DataFrame({"reaction_id": ["a", "b", "c"], "quantity": ["drh", "log_k", "drh"],
                       "t_k": [298.15, 1000.0, 298.15], "value": [-1e5, -3.0, 5e9],
                       "uncertainty": [0.0, 0.1, 1.0], "stoich_json": [json.dumps({"H2(g)": -1, "H(g)": 2})] * 3})
    bad = failures(STAGING_SCHEMAS["reactions"], rx)
    assert sorted(bad) == [0, 2]
    assert "must be > 0 (a standard uncertainty of zero would give infinite weight)" in bad[0]
    assert "an energy must lie within ±1e+08 J/mol" in bad[2]


def test_coefficients_finite():
    seg = pd.DataFrame([dict(record_id="r", segment=0, t_low_k=300.0, t_high_k=1000.0, a1=0, a2=0, a3=np.inf,
                             a4=0, a5=0, a6=0, a7=0, b1=0, b2=0)])
    (reason,) = failures(STAGING_SCHEMAS["segments"], seg).values()
    assert "column a3 (canonical coefficient a3) = inf: must be a finite number" in reason


MANIFEST = """[database]
name = "v"
[[source]]
id = "sh"
path = "s.csv"
format = "shomate-csv"
citation = "test"
[[source]]
id = "tb"
path = "t.csv"
format = "table-csv"
citation = "test"
"""


def test_rejected_record_is_accounted_row_by_row(tmp_path):
    """A Shomate record whose second range is inverted is rejected whole, one rejected row
    per input row; a table whose one row has a negative entropy is rejected row by row."""
    raw = tmp_path / "raw"
    raw.mkdir()
    (raw / "sources.toml").write_text(MANIFEST)
    hdr = ["species", "t_min_k", "t_max_k", "A", "B", "C", "D", "E", "F", "G", "H"]
    (raw / "s.csv").write_text(csv_text(hdr, [["CO(g)", 298, 1300, 25, 6, 4, -2, 0.1, -118, 227, -110.5],
                                              ["CO(g)", 6000, 1300, 35, 1, -0.2, 0.01, -3, -127, 231, -110.5],
                                              ["N2(g)", 100, 500, 28.98641, 1.853978, -9.647459, 16.63537,
                                               0.000117, -8.671914, 226.4168, 0.0]]))
    (raw / "t.csv").write_text(csv_text(["species", "t [K]", "cp [J/(mol*K)]", "s [J/(mol*K)]"],
                                        [["He(g)", 298.15, 20.786, 126.15], ["He(g)", 500, 20.786, -1],
                                         ["Ar(g)", 298.15, 20.786, 154.85]]))
    run = Run(raw=raw, out=tmp_path / "out")
    stage_ingest(run)
    stage_validate(run)
    stats = {s["source_id"]: s for s in run.source_stats}
    assert stats["sh"] == dict(source_id="sh", rows_read=3, rows_accepted=1, rows_rejected=2)
    assert stats["tb"] == dict(source_id="tb", rows_read=3, rows_accepted=1, rows_rejected=2)
    rej = run.frames["rejected"].set_index(["file", "line"])
    why = rej.loc[("s.csv", 3), "reason"]
    assert why.startswith("record CO(g) rejected whole: segment 1 (line 3): schema segments: "
                          "T range must ascend (t_low_k < t_high_k) (t_low_k = 6000, t_high_k = 1300)")
    assert rej.loc[("s.csv", 2), "raw_text"].startswith("CO(g),298,1300")       # verbatim
    assert "row at line 3: schema table_points: column s_j_mol_k" in rej.loc[("t.csv", 2), "reason"]
    f = pd.concat(run.findings_parts)
    assert (f["check_id"] == "schema.rejected").sum() == 4


# ------------------------------------------- JSON checks read at once equal one-at-a-time
# schemas.staging reads plainly written element and stoichiometry maps with Arrow kernels;
# the verdict must equal the one-text check on any text (repeated keys, escapes, NaN
# literals, overflowing numbers, bad keys all decided one at a time).

import json  # noqa: E402

import pandas as pd  # noqa: E402
from hypothesis import given, settings  # noqa: E402
from hypothesis import strategies as st  # noqa: E402

from schemas.staging import _known_elements, _known_elements_all, _stoich_ok, _stoich_ok_all  # noqa: E402

_KEYS = ["C", "H", "Xx", "c", "n", "", "é", "Na", "H2(g)", "C(cr,graphite)", "A(g, b)", "A(s)", "A(g,)",
         "(g)", "x(g)(g)", 'q"(g)', "e-(aq)", "OH-(aq)"]
_NUMBERS = st.one_of(st.sampled_from([0.0, -0.0, 1.0, -1.0, 2, 1e308, float("nan"), float("inf")]),
                     st.floats(allow_nan=False, allow_infinity=False), st.integers(-5, 5))


@st.composite
def _json_map_text(draw) -> str:
    items = draw(st.lists(st.tuples(st.sampled_from(_KEYS), _NUMBERS), max_size=4))
    text = "{" + ", ".join(f"{json.dumps(k)}: {json.dumps(v)}" for k, v in items) + "}"
    return draw(st.sampled_from([text, text.replace(", ", ","), text[:-1], "[1]", "x", text + " "]))


@settings(max_examples=300, deadline=None, derandomize=True)
@given(st.lists(st.one_of(_json_map_text(), st.none()), min_size=1, max_size=8))
def test_json_checks_at_once_equal_one_at_a_time(texts):
    s = pd.Series(texts, dtype=object)
    assert list(_known_elements_all(s)) == [_known_elements(t) for t in texts]
    assert list(_stoich_ok_all(s)) == [bool(_stoich_ok(t)) for t in texts]


@pytest.mark.parametrize("texts,check_all,check_one", [
    (['{"C": 1.0, "C": -2.0}', '{"C": -2.0, "C": 1.0}', '{"C": 1e999}', '{"C": 1e-400}', '{"C": NaN}',
      '{"\\u00e9": 1}', '{"C":1.0}', '{"Na": 2, "Cl": 2}', '{"n": 1.0}', '{}'], _known_elements_all, _known_elements),
    (['{"A(g)": 1.0, "A(g)": 0.0}', '{"A(g)": 0.0, "A(g)": 1.0}', '{"A(g)": -0.0}', '{"A(g,x, \\"y)": 1}',
      '{"A(g)": 1e999}', '{"A(g,)": 1}', '{"A(g, b)": 2}', '{}'], _stoich_ok_all, _stoich_ok),
])
def test_json_checks_at_once_on_hard_cases(texts, check_all, check_one):
    """Repeated keys (json.loads keeps the last), escapes, overflow and underflow, NaN."""
    assert list(check_all(pd.Series(texts, dtype=object))) == [bool(check_one(t)) for t in texts]


@pytest.mark.parametrize("texts,check_all,check_one", [
    (['{"C": 1.0, "C": 2.0}', '{"D": 1, "T": 2}', '{"C": 0.5}', '{"C": 0.0}', '{"C": 1e-05}', '{"C": 1e+16}',
      '{"C": ' + "9" * 400 + '.5}', '{"C": 0.' + "0" * 400 + '1}', '{"Og": 1, "H": 2}', '{"H": 1, "X": 1}',
      '{"H": -1}', '{"H":1}'], _known_elements_all, _known_elements),
    (['{"A(g)": 1.0, "A(g)": 2.0}', '{"A(g)": -0.5, "B(cr,x y)": 2}', '{"A(q)": 1.0}', '{"(g)": 1.0}',
      '{"A(g,(x)": 1.0}', '{"A(g)": 1e-05}', '{"A(g)": 0.' + "0" * 400 + '1}', '{"A(g)": -0.0}',
      '{"A(cr,a)": 3, "B(aq)": 0}', '{"A(l)":1}'], _stoich_ok_all, _stoich_ok),
])
def test_json_checks_plain_maps_and_the_rest(texts, check_all, check_one):
    """Maps whose every item passes are accepted in one pass over the texts; repeated keys,
    exponents, zeros, long digit strings and unknown keys are read item by item. Both give
    the one-at-a-time answer."""
    assert list(check_all(pd.Series(texts, dtype=object))) == [bool(check_one(t)) for t in texts]
