"""Tolerance overrides: validated against the registry, read by checks."""
from __future__ import annotations

import pytest

from pipeline.config import Config
from pipeline.errors import ConfigError


def test_defaults_come_from_the_registry():
    cfg = Config()
    assert cfg.tol("segment.discontinuity", "h_j_mol") == 100.0  # checks.md default


def test_override_and_disable(tmp_path):
    p = tmp_path / "c.toml"
    p.write_text('[checks."segment.discontinuity"]\nh_j_mol = 50\n\n[checks."cp.nonpositive"]\nenabled = false\n')
    cfg = Config.load(p)
    assert cfg.tol("segment.discontinuity", "h_j_mol") == 50.0
    assert cfg.tol("segment.discontinuity", "s_j_mol_k") == 0.1
    assert "cp.nonpositive" in cfg.disabled


@pytest.mark.parametrize("text,match", [
    ('[checks."no.such"]\nx = 1\n', "unknown check id"),
    ('[checks."segment.discontinuity"]\nh_jmol = 1\n', "one of"),
    ('[checks."segment.discontinuity"]\nh_j_mol = -1\n', "a number ≥ 0"),
    ('[tolerances]\nx = 1\n', "unknown table"),
])
def test_bad_config_is_refused_with_its_key(tmp_path, text, match):
    p = tmp_path / "c.toml"
    p.write_text(text)
    with pytest.raises(ConfigError, match=match) as exc:
        Config.load(p)
    assert str(p) in str(exc.value)


def test_the_written_out_ids_and_tolerances_are_the_registrys():
    """Configuration and waivers files are validated against ``CHECK_TOLERANCES`` so that an
    unchanged re-run need not import the checks; it must list exactly the registry's ids and
    tolerance names (a new check or tolerance goes into both)."""
    from pipeline.checks import registry
    from pipeline.config import CHECK_TOLERANCES

    assert {s.id: tuple(s.tolerances) for s in registry.all_specs()} == CHECK_TOLERANCES
