"""Run configuration: tolerance overrides per check, validated against the registry.

The configuration file is TOML::

    [checks."segment.discontinuity"]
    cp_rel = 0.01          # override one default tolerance of that check

    [checks."cp.gas-ceiling"]
    enabled = false        # switch a check off

Unknown check ids and unknown tolerance names are errors (a typo must not pass silently).
"""
from __future__ import annotations

import tomllib
from dataclasses import dataclass, field
from pathlib import Path
from types import MappingProxyType

from .errors import ConfigError


@dataclass(frozen=True)
class Config:
    """Frozen per-check overrides: ``{check_id: {name: value}}``."""

    overrides: MappingProxyType = field(default_factory=lambda: MappingProxyType({}))
    disabled: frozenset = frozenset()
    file: str = "(defaults)"

    @classmethod
    def load(cls, path: Path | None) -> "Config":
        from .checks import registry  # the registry knows every id and default

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
            spec = registry.spec_for(check_id)
            if spec is None:
                raise ConfigError(str(path), f"checks.{check_id}", "an unknown check id",
                                  "an id listed by `thermoledger checks`")
            vals = dict(values)
            if vals.pop("enabled", True) is False:
                disabled.add(check_id)
            for name, v in vals.items():
                if name not in spec.tolerances:
                    raise ConfigError(str(path), f"checks.{check_id}.{name}", repr(v),
                                      "one of " + ", ".join(sorted(spec.tolerances)))
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
