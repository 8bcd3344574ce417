"""Run configuration: tolerance overrides per check, validated against the registry.

The configuration file is TOML::

    [checks."segment.discontinuity"]
    cp_rel = 0.01          # override one default tolerance of that check

    [checks."cp.gas-ceiling"]
    enabled = false        # switch a check off

Unknown check ids and unknown tolerance names are errors (a typo must not pass silently).
They are judged against :data:`CHECK_TOLERANCES`, the registry's ids written out, so that
reading a configuration (or waivers) file does not import the checks: an unchanged re-run
decides to reuse the release before it imports them (``pipeline/cache.py``).
"""
from __future__ import annotations

import tomllib
from dataclasses import dataclass, field
from pathlib import Path
from types import MappingProxyType

from .errors import ConfigError

#: Every id of the check registry (``pipeline/checks``, declared ``schema.*`` ids included)
#: with the names of its tolerances, in registration order. Written out so that configuration
#: and waivers files are validated without importing the checks (pandas, scipy). A new check
#: or tolerance is added here too: ``tests/test_config.py`` fails while the two differ.
CHECK_TOLERANCES: dict[str, tuple[str, ...]] = {
    "schema.rejected": (),
    "schema.unlisted-file": (),
    "schema.citation": (),
    "schema.species-key": (),
    "schema.standard-state": (),
    "waiver.expired": (),
    "waiver.stale": (),
    "export.fit-quality": ("cp_rel", "h_j_mol", "s_j_mol_k", "error_factor"),
    "cp.nonpositive": (),
    "cp.gas-floor": ("margin_r",),
    "cp.gas-ceiling": ("molecule_warning_factor", "molecule_error_factor", "atom_warning_factor",
                       "atom_error_factor"),
    "segment.discontinuity": ("cp_rel", "h_j_mol", "s_j_mol_k", "g_j_mol", "warning_fraction"),
    "segment.kink": ("slope_rel", "slope_abs_j_mol_k2"),
    "range.extrapolation": ("low_fraction", "low_min_k", "high_factor"),
    "formation.reference-element": ("warning_j_mol", "error_j_mol"),
    "formation.stated-vs-polynomial": ("error_j_mol",),
    "thirdlaw.zero-point": ("j_mol_k",),
    "thirdlaw.calorimetric-entropy": ("j_mol_k", "t0_max_k"),
    "thirdlaw.gas-entropy-floor": ("j_mol_k",),
    "composition.molar-mass": ("base_g_mol", "per_interval_atom_g_mol"),
    "table.enthalpy-integral": ("h_j_mol", "h_rel"),
    "table.entropy-integral": ("s_j_mol_k",),
    "table.gibbs-identity": ("gef_j_mol_k",),
    "table.logk-identity": ("log_k",),
    "table.formation-identity": ("dfg_j_mol",),
    "duplicate.disagreement": ("cp_rel", "s_j_mol_k", "h_j_mol", "g_j_mol", "error_factor", "ratio_rel",
                               "cp_equal_rel", "atm_s_j_mol_k", "offset_h_j_mol", "offset_s_j_mol_k",
                               "constant_rel", "grid_k"),
    "phase.reference-not-stable": ("g_j_mol",),
    "phase.metastable": (),
    "phase.transition-mismatch": ("t_warning_k", "t_error_k", "z_warning", "z_error", "match_k"),
    "reaction.residual": ("z_warning", "z_error"),
    "cycle.closure": ("z_error", "same_t_k", "max_component_reactions"),
    "network.worst-offender": ("z_max", "chi2_alpha", "t_window_k"),
    "equilibrium.law-disagreement": ("k_combined",),
    "equilibrium.third-law-drift": ("k_se",),
}


@dataclass(frozen=True)
class Config:
    """Frozen per-check overrides: ``{check_id: {name: value}}``."""

    overrides: MappingProxyType = field(default_factory=lambda: MappingProxyType({}))
    disabled: frozenset = frozenset()
    file: str = "(defaults)"

    @classmethod
    def load(cls, path: Path | None) -> "Config":
        if path is None:
            return cls()
        path = Path(path)
        try:
            doc = tomllib.loads(path.read_text(encoding="utf-8"))
        except FileNotFoundError:
            raise ConfigError(str(path), "--config", "a missing file", "an existing TOML file") from None
        except tomllib.TOMLDecodeError as exc:
            raise ConfigError(str(path), "(syntax)", str(exc), "valid TOML") from None
        unknown_top = set(doc) - {"checks"}
        if unknown_top:
            raise ConfigError(str(path), ", ".join(sorted(unknown_top)), "unknown table", "[checks.\"<id>\"] tables only")
        overrides, disabled = {}, set()
        for check_id, values in doc.get("checks", {}).items():
            names = CHECK_TOLERANCES.get(check_id)
            if names is None:
                raise ConfigError(str(path), f"checks.{check_id}", "an unknown check id",
                                  "an id listed by `thermoledger checks`")
            vals = dict(values)
            if vals.pop("enabled", True) is False:
                disabled.add(check_id)
            for name, v in vals.items():
                if name not in names:
                    raise ConfigError(str(path), f"checks.{check_id}.{name}", repr(v),
                                      "one of " + ", ".join(sorted(names)))
                if not isinstance(v, (int, float)) or isinstance(v, bool) or v < 0:
                    raise ConfigError(str(path), f"checks.{check_id}.{name}", repr(v), "a number ≥ 0")
            overrides[check_id] = MappingProxyType({k: float(v) for k, v in vals.items()})
        return cls(MappingProxyType(overrides), frozenset(disabled), str(path))

    def tol(self, check_id: str, name: str) -> float:
        """The tolerance ``name`` of ``check_id``: the override, else the registry default."""
        from .checks import registry

        o = self.overrides.get(check_id, {})
        if name in o:
            return o[name]
        return registry.spec_for(check_id).tolerances[name]
