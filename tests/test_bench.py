"""The benchmark's database generator (bench/generate.py), kept from rotting by one small run.

The generated files must read back through the project's readers with nothing rejected but
the planted defects, the planted defects must all be found, and the clean species must
raise no error or warning. The generator's heat-capacity templates are checked against the
Einstein function they stand for (Einstein, Ann. Phys. 22 (1907) 180). No timing here:
speed is measured by bench/run.py.
"""
from __future__ import annotations

import json
import sys
from pathlib import Path

import numpy as np
import pytest

from pipeline.constants import R
from pipeline.physics import sackur_tetrode_entropy
from pipeline.stages import Run, execute, stage_ingest, stage_validate
from pipeline.thermo import evaluate

ROOT = Path(__file__).resolve().parents[1]
sys.path.insert(0, str(ROOT / "bench"))

import generate as gen  # noqa: E402

N = 200


@pytest.fixture(scope="module")
def database(tmp_path_factory) -> tuple[Path, dict]:
    d = tmp_path_factory.mktemp("bench-db")
    summary = gen.generate(d, N, seed=11, reactions_per_species=1.0)
    return d, summary


@pytest.fixture(scope="module")
def release(database, tmp_path_factory):
    d, summary = database
    out = tmp_path_factory.mktemp("bench-out")
    run = execute(Run(raw=d / "raw", out=out, waivers=d / "waivers.toml"))
    return run, summary


def _planted(summary, check_id):
    return [p for p in summary["planted"] if p["check_id"] == check_id]


def test_files_read_back_with_only_the_planted_rejections(database, tmp_path):
    d, summary = database
    run = Run(raw=d / "raw", out=tmp_path / "out")
    stage_ingest(run)
    stage_validate(run)
    rej = run.frames["rejected"]
    planted = _planted(summary, "schema.rejected")
    assert len(rej) == len(planted) == 5
    assert sorted(rej["source_id"]) == sorted(p["subject"] for p in planted)
    # what each rejection is about, by its reason
    reasons = " | ".join(rej["reason"])
    for text in ("unparsable line 2 coefficient", "contradict species 'CO(g)'", "'n/a'",
                 "does not balance", "no uncertainty"):
        assert text in reasons, text
    # every generated species made it in: N main + the planted and reference species
    assert len(run.frames["species"]) >= N
    # nothing lost: rows read = accepted + rejected for every source
    assert all(s["rows_read"] == s["rows_accepted"] + s["rows_rejected"] for s in run.source_stats)


def test_every_planted_defect_is_found(release):
    run, summary = release
    f = run.findings
    for p in summary["planted"]:
        hit = f[f["check_id"] == p["check_id"]]
        if p["check_id"] == "schema.rejected":
            assert (hit["source_id"] == p["subject"]).any(), p
        elif p["check_id"].startswith("waiver."):
            assert len(hit), p
        elif p["check_id"] == "cycle.closure":
            assert hit["subject"].str.contains(p["subject"], regex=False).any(), p
        elif p["check_id"] in ("schema.citation", "schema.standard-state", "schema.unlisted-file"):
            assert hit["subject"].astype(str).str.contains(p["subject"], regex=False).any(), p
        else:
            assert (hit["subject"] == p["subject"]).any(), p
        if p["severity"] is not None and p["check_id"] not in ("schema.rejected",):
            sub = hit if p["check_id"].startswith(("waiver.", "schema.")) else hit[
                hit["subject"].astype(str).str.contains(p["subject"], regex=False)]
            assert (sub["severity"] == p["severity"]).any(), (p, sorted(set(sub["severity"])))


def test_clean_species_raise_no_error_or_warning(release):
    """Every error or warning is about a planted defect. ``export.fit-quality`` is left out:
    it judges the pipeline's own NASA-9 refits of tables, not the generated data."""
    run, summary = release
    planted = {p["subject"] for p in summary["planted"]}
    f = run.findings
    f = f[f["severity"].isin(["error", "warning"]) & (f["subject_kind"] == "species")
          & (f["check_id"] != "export.fit-quality")]
    stray = f[~f["subject"].isin(planted)]
    assert stray.empty, stray[["check_id", "subject", "message"]].to_string()


def test_reactions_close_on_the_generating_enthalpies(database, tmp_path):
    """ΔrH°(298.15) read back = Σ ν H(298.15) of the species' polynomials as read back, within
    the stated u (the generator adds noise of at most ±u; Hess's law)."""
    d, summary = database
    run = Run(raw=d / "raw", out=tmp_path / "out")
    stage_ingest(run)
    f = run.frames
    seg = f["segments"].merge(f["records"][["record_id", "species", "form"]], on="record_id")
    seg = seg[(seg["form"] == "nasa7") & (seg["segment"] == 0)].drop_duplicates("species")
    coef = seg[["a1", "a2", "a3", "a4", "a5", "a6", "a7", "b1", "b2"]].to_numpy(float)
    h298 = dict(zip(seg["species"], evaluate(coef, 298.15).h))
    bad = {p["subject"] for p in summary["planted"] if p["check_id"] == "reaction.residual"}
    checked = 0
    rx = f["reactions"]
    rx = rx[(rx["quantity"] == "drh") & ~rx["reaction_id"].isin(bad)]
    for stoich, value, u in zip(rx["stoich_json"], rx["value"], rx["uncertainty"]):
        nu = json.loads(stoich)
        if all(k in h298 for k in nu):
            calc = sum(v * h298[k] for k, v in nu.items())
            assert abs(value - calc) <= u * (1 + 1e-6) + 0.1, (nu, value, calc, u)   # 0.1 J/mol: 4 decimals in kJ
            checked += 1
    assert checked >= 10


@pytest.mark.parametrize("theta", gen.THETAS_LOW + gen.THETAS_HIGH)
def test_templates_follow_the_einstein_function(theta):
    """Each template is two quartics of the Einstein heat capacity x² eˣ/(eˣ − 1)², x = Θ/T
    (Einstein 1907), continuous in value, slope and curvature at 1000 K. Tolerance 0.1 (in Cv/R of one
    mode, whose range is 0…1): a quartic over a decade of T cannot follow the function's
    exponential onset more closely; the benchmark needs realistic shapes, not exact ones."""
    lo, hi = gen.fit_template(theta)
    t1, t2 = np.linspace(100.0, 1000.0, 901), np.linspace(1000.0, 9000.0, 801)
    g1, g2 = np.polyval(lo[::-1], t1), np.polyval(hi[::-1], t2)
    assert np.max(np.abs(g1 - gen.einstein_cv_r(theta, t1))) < 0.1
    assert np.max(np.abs(g2 - gen.einstein_cv_r(theta, t2))) < 0.1
    assert abs(np.polyval(lo[::-1], 1000.0) - np.polyval(hi[::-1], 1000.0)) < 1e-9
    d1 = np.polyval(np.polyder(lo[::-1]), 1000.0)
    d2 = np.polyval(np.polyder(hi[::-1]), 1000.0)
    assert abs(d1 - d2) < 1e-9 * max(1.0, abs(d1))
    c1 = np.polyval(np.polyder(lo[::-1], 2), 1000.0)
    c2 = np.polyval(np.polyder(hi[::-1], 2), 1000.0)
    assert abs(c1 - c2) < 1e-9 * max(1e-9, abs(c1))
    # high-temperature limit: every mode classical, Cv/R → 1
    assert abs(float(gen.einstein_cv_r(theta, 1e6)) - 1.0) < 1e-6


def test_generated_gases_lie_above_translation():
    """Cp ≥ 5/2 R and S ≥ Sackur–Tetrode S (Sackur 1911, Tetrode 1912) for clean gases."""
    rng = np.random.default_rng(5)
    counts = gen.composition_pool(300, rng)
    sp = gen.gases(counts, rng)
    t = np.linspace(200.0, 6000.0, 300)
    coef = np.where((t <= 1000.0)[None, :, None], sp.lower[:, None, :], sp.upper[:, None, :])
    p = evaluate(coef, np.broadcast_to(t, (len(counts), len(t))))
    assert (p.cp >= 2.5 * R - 1e-9).all()
    st = sackur_tetrode_entropy(t[None, :], sp.molar_mass[:, None])
    assert (p.s > st).all()
    # and H(298.15) is the ΔfH° the species were given, continuous at 1000 K
    hj_lo, hj_hi = evaluate(sp.lower, 1000.0).h, evaluate(sp.upper, 1000.0).h
    assert np.allclose(hj_lo, hj_hi, rtol=0, atol=1e-6 * np.abs(hj_lo).max())


def test_planted_list_is_written(database):
    d, summary = database
    doc = json.loads((d / "planted.json").read_text())
    assert doc["n_species"] == N and len(doc["planted"]) == len(summary["planted"]) >= 30


def test_fast_paths_read_exactly_what_the_general_ones_read(database, monkeypatch):
    """The vectorised readings the benchmark relies on (plain CSV with Arrow, equations in
    bulk) give exactly the frames of the csv module and of ``parse_equation`` one by one."""
    import pandas as pd

    import pipeline.ingest.csvframe as cfm
    from pipeline.ingest import reactions_csv, table_csv

    d, _ = database
    allowed = table_csv.COLUMNS + reactions_csv.COLUMNS
    files = sorted((d / "raw").rglob("*.csv"))
    assert len(files) >= 6
    fast = {p: cfm.load(p, p.name, fmt="t", allowed=allowed, required=(), example_header="")
            for p in files if p.name != "species.csv"}
    assert any(cfm._read_plain(p) is not None for p in fast)          # the fast path is taken
    monkeypatch.setattr(cfm, "_read_plain", lambda path: None)
    for p, a in fast.items():
        b = cfm.load(p, p.name, fmt="t", allowed=allowed, required=(), example_header="")
        pd.testing.assert_frame_equal(a.cells, b.cells, obj=p.name)
        assert (a.early_rejects, a.n_rows, a.headers, a.units) == (b.early_rejects, b.n_rows, b.headers, b.units)
    eqs = [e for p in fast if "reactions" in str(p) for e in pd.read_csv(p)["equation"]]
    eqs += ["1/2 O2(g) + H2(g) = H2O(g)", "Na+(g) + e-(g) = Na(g)", "H2(g) + H2(g) = H4(g)",
            "CO(g) + 0.5 O2(g) = CO2(g) + 1e-12 H2(g)", "A(g) = B(g) = C(g)", "", "2H2(g) + O2(g) = 2 H2O(g)"]
    assert reactions_csv.parse_equations(eqs) == [reactions_csv._parse.__wrapped__(e) for e in eqs]
