"""``thermoledger diff``: species added/removed, properties beyond tolerance, findings."""
from __future__ import annotations

from tests.cli.run_cli import thermoledger
from tests.curate.rawdata import build_release, model_nasa7, standard_raw


def test_identical_releases_exit_0(tmp_path, release):
    _, out = release
    r = thermoledger("diff", out / "thermo.duckdb", out / "thermo.duckdb")
    assert r.returncode == 0, r.stdout + r.stderr
    assert "species added: 0" in r.stdout and "anywhere on the grid (worst T): 0" in r.stdout


def test_changes_beyond_tolerance_exit_1(tmp_path, release):
    """H2O(g) with ΔfH shifted by 2 kJ/mol: G moves by 2 kJ/mol at every T, beyond the
    1 kJ/mol duplicate.disagreement tolerance (checks.md); Cp, S, H − H298 unchanged.
    O3(g) is new."""
    _, old = release
    raw = standard_raw(tmp_path / "raw")
    o3 = model_nasa7("O2(g)").replace("O2    ", "O3    ", 1).replace("O   2", "O   3", 1)
    main = "\n".join([model_nasa7("H2(g)"), model_nasa7("O2(g)"), model_nasa7("H2O(g)", dh=2000.0), o3])
    (raw / "main.nasa7").write_text("THERMO\n   200.000  1000.000  5000.000\n" + main + "\nEND\n")
    build_release(raw, tmp_path / "new")
    r = thermoledger("diff", old / "thermo.duckdb", tmp_path / "new" / "thermo.duckdb")
    assert r.returncode == 1, r.stdout + r.stderr
    assert "species added: 1" in r.stdout and "+ O3(g)" in r.stdout
    changed = [ln for ln in r.stdout.splitlines() if ln.startswith("  H2O(g)")]
    assert changed and all("g_j_mol" in ln for ln in changed)
    assert "findings appeared" in r.stdout


def test_config_overrides_the_tolerance(tmp_path, release):
    """With the G tolerance raised to 3 kJ/mol (duplicate.disagreement g_j_mol override),
    the 2 kJ/mol ΔfH shift is no longer a change beyond tolerance."""
    _, old = release
    raw = standard_raw(tmp_path / "raw")
    main = "\n".join([model_nasa7("H2(g)"), model_nasa7("O2(g)"), model_nasa7("H2O(g)", dh=2000.0)])
    (raw / "main.nasa7").write_text("THERMO\n   200.000  1000.000  5000.000\n" + main + "\nEND\n")
    build_release(raw, tmp_path / "new")
    cfg = tmp_path / "tol.toml"
    cfg.write_text('[checks."duplicate.disagreement"]\ng_j_mol = 3000.0\n')
    r = thermoledger("diff", old / "thermo.duckdb", tmp_path / "new" / "thermo.duckdb", "--config", cfg)
    assert r.returncode == 0, r.stdout + r.stderr
    r = thermoledger("diff", old / "thermo.duckdb", tmp_path / "new" / "thermo.duckdb")
    assert r.returncode == 1
