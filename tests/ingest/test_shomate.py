"""shomate-csv reader: one record per species, one segment per row, published equations."""
from __future__ import annotations

import numpy as np
import pytest

from pipeline.errors import InputError
from pipeline.ingest import shomate_csv
from pipeline.thermo import COEF_COLUMNS, evaluate

from .conftest import DATA, assert_accounted, source
from .writers import csv_text

HEADER = ["species", "t_min_k", "t_max_k", "A", "B", "C", "D", "E", "F", "G", "H"]


def shomate_published(p, T):
    """Shomate (J. Phys. Chem. 58 (1954) 368) in the NIST WebBook form, t = T/1000:
    Cp = A + Bt + Ct² + Dt³ + E/t²; H − H298 = At + Bt²/2 + Ct³/3 + Dt⁴/4 − E/t + F − H [kJ/mol];
    S = A ln t + Bt + Ct²/2 + Dt³/3 − E/(2t²) + G."""
    A, B, C, D, E, F, G, H = p
    t = T / 1000.0
    cp = A + B * t + C * t**2 + D * t**3 + E / t**2
    dh = A * t + B * t**2 / 2 + C * t**3 / 3 + D * t**4 / 4 - E / t + F - H
    s = A * np.log(t) + B * t + C * t**2 / 2 + D * t**3 / 3 - E / (2 * t**2) + G
    return cp, dh * 1000.0, s


@pytest.fixture(scope="module")
def result():
    return shomate_csv.read(DATA / "shomate.csv", source("shomate-csv"), "nist/shomate.csv")


def test_records_and_segments(result):
    rec = result.records.set_index("species_hint")
    assert sorted(rec.index) == ["H2O(g)", "N2(g)"]
    assert rec.loc["H2O(g)", ["t_low_k", "t_high_k", "line"]].tolist() == [500.0, 6000.0, 3]
    assert rec.loc["H2O(g)", "stated_dfh_j_mol"] == pytest.approx(-241826.4, abs=1e-6)
    assert rec.loc["N2(g)", "stated_dfh_j_mol"] == 0.0
    seg = result.segments[result.segments["record_id"] == "s/H2O(g)"]
    assert list(seg["segment"]) == [0, 1] and list(seg["line"]) == [3, 4]


def test_bad_row_rejected_alone(result):
    assert_accounted(result, "shomate-csv")
    (bad,) = result.rejected.itertuples()
    assert bad.line == 6 and bad.file == "nist/shomate.csv"
    assert bad.reason == ("column 'H' = 'abc': not a finite number (Shomate parameter H) — fix: "
                          "correct the value in the file")


def test_segments_evaluate_as_the_published_equations(result):
    p = [[30.09200, 6.832514, 6.793435, -2.534480, 0.082139, -250.8810, 223.3967, -241.8264],
         [41.96426, 8.622053, -1.499780, 0.098119, -11.15764, -272.1797, 219.7809, -241.8264]]
    seg = result.segments[result.segments["record_id"] == "s/H2O(g)"]
    for (_, row), params in zip(seg.iterrows(), p):
        T = np.linspace(row["t_low_k"], row["t_high_k"], 9)
        got = evaluate(row[list(COEF_COLUMNS)].to_numpy(float), T)
        cp, dh, s = shomate_published(params, T)
        np.testing.assert_allclose(got.cp, cp, rtol=1e-12)
        np.testing.assert_allclose(got.s, s, rtol=1e-12)
        # absolute H = ΔfH + (H − H298), with H the parameter [kJ/mol]
        np.testing.assert_allclose(got.h, params[7] * 1000 + dh, rtol=1e-12)


def test_nitrogen_against_janaf(result):
    """JANAF (Chase 1998) N2(g) at 298.15 K: Cp = 29.124, S = 191.609 J/(mol*K) (from memory);
    the WebBook Shomate fit reproduces them to its fit quality (< 0.01 %)."""
    seg = result.segments[result.segments["record_id"] == "s/N2(g)"].iloc[0]
    p = evaluate(seg[list(COEF_COLUMNS)].to_numpy(float), 298.15)
    assert p.cp == pytest.approx(29.124, abs=0.005)
    assert p.s == pytest.approx(191.609, abs=0.005)
    assert p.h == pytest.approx(0.0, abs=30.0)      # H(298.15) = ΔfH = 0 within the fit's F rounding


def test_round_trip(tmp_path):
    rng = np.random.default_rng(11)
    rows = [["CO2(g)", 298.0, 1200.0, *rng.normal(30, 5, 8).round(6)],
            ["CO2(g)", 1200.0, 6000.0, *rng.normal(30, 5, 8).round(6)]]
    rows[1][-1] = rows[0][-1]
    p = tmp_path / "x.csv"
    p.write_text(csv_text(HEADER, rows))
    r = shomate_csv.read(p, source("shomate-csv"), "x.csv")
    for (_, seg), row in zip(r.segments.iterrows(), rows):
        T = np.array([row[1], (row[1] + row[2]) / 2, row[2]])
        got = evaluate(seg[list(COEF_COLUMNS)].to_numpy(float), T)
        cp, dh, s = shomate_published(row[3:], T)
        np.testing.assert_allclose(got.cp, cp, rtol=1e-12)
        np.testing.assert_allclose(got.s, s, rtol=1e-12)


def test_overlapping_ranges_reject_every_row_of_the_species(tmp_path):
    rows = [["CO(g)", 298, 1300, *range(8)], ["CO(g)", 1200, 6000, *range(8)], ["N2(g)", 100, 500, *range(8)]]
    p = tmp_path / "x.csv"
    p.write_text(csv_text(HEADER, rows))
    r = shomate_csv.read(p, source("shomate-csv"), "x.csv")
    assert list(r.records["species_hint"]) == ["N2(g)"]
    assert sorted(r.rejected["line"]) == [2, 3]
    assert "ranges of CO(g) overlap (line 3 starts at 1200 K before the range of line 2 ends at 1300 K)" \
        in r.rejected["reason"].iloc[0]
    assert_accounted(r, "shomate-csv")


def test_units_are_fixed(tmp_path):
    p = tmp_path / "x.csv"
    p.write_text(csv_text(HEADER[:10] + ["H [kcal/mol]"], [["CO(g)", 298, 1300, *range(8)]]))
    with pytest.raises(InputError) as e:
        shomate_csv.read(p, source("shomate-csv"), "x.csv")
    assert "Shomate parameter H" in str(e.value) and e.value.line == 1
    p.write_text(csv_text(HEADER[:10] + ["H [kJ/mol]"], [["CO(g)", 298, 1300, *range(8)]]))
    assert len(shomate_csv.read(p, source("shomate-csv"), "x.csv").records) == 1


def test_missing_column_is_an_input_error(tmp_path):
    p = tmp_path / "x.csv"
    p.write_text(csv_text(HEADER[:-1], [["CO(g)", 298, 1300, *range(7)]]))
    with pytest.raises(InputError) as e:
        shomate_csv.read(p, source("shomate-csv"), "x.csv")
    assert str(e.value).startswith("found header without column(s) ['h'] in x.csv:1")


def test_bad_species_key_rejected(tmp_path):
    p = tmp_path / "x.csv"
    p.write_text(csv_text(HEADER, [["CO", 298, 1300, *range(8)], ["Qq(g)", 298, 1300, *range(8)]]))
    r = shomate_csv.read(p, source("shomate-csv"), "x.csv")
    assert len(r.records) == 0
    assert list(r.rejected["reason"]) == [
        "species key found 'CO': no (state) suffix — fix: write the key as FORMULA(state), e.g. H2O(g), C(cr,graphite)",
        "species key found 'Qq': unknown element symbol 'Qq' — fix: use a symbol of the periodic table (case matters: Co ≠ CO)"]
