"""The check registry: every check id, its function, default tolerances and docstring.

A check is a plain function ``f(ctx: CheckContext) -> pandas.DataFrame`` (findings, see
:func:`pipeline.findings.make_findings`), vectorised over all records at once, registered
under its dotted id with :func:`check`. Registering an id twice fails at import. The
function's docstring is the report text: summary, relation, tolerance and source.

Ids produced by pipeline stages rather than by a check function (``schema.*``) are
declared with :func:`declare` so that reports, waivers and configuration know them.
"""
from __future__ import annotations

import inspect
from dataclasses import dataclass, field
from types import MappingProxyType
from typing import Callable

import pandas as pd


@dataclass(frozen=True)
class CheckSpec:
    """One registered id."""

    id: str
    func: Callable[..., pd.DataFrame] | None
    tolerances: MappingProxyType = field(default_factory=lambda: MappingProxyType({}))
    doc: str = ""
    module: str = ""
    #: "record" (runs in the check stage) or "network" (runs after reconciliation inputs exist)
    stage: str = "check"

    def __post_init__(self):
        if not self.id or "." not in self.id or self.id != self.id.strip():
            raise ValueError(f"check id {self.id!r} must be a dotted name such as cp.nonpositive")
        if not self.doc.strip():
            raise ValueError(f"check {self.id} has no docstring: the docstring is its report text")

    @property
    def summary(self) -> str:
        return self.doc.strip().splitlines()[0]


_REGISTRY: dict[str, CheckSpec] = {}


def check(check_id: str, *, tolerances: dict | None = None, stage: str = "check"):
    """Register ``func`` under ``check_id`` with its default tolerances (units in the names)."""

    def deco(func):
        if check_id in _REGISTRY:
            raise ValueError(f"check id {check_id!r} registered twice "
                             f"({_REGISTRY[check_id].module} and {func.__module__})")
        _REGISTRY[check_id] = CheckSpec(check_id, func, MappingProxyType(dict(tolerances or {})),
                                        inspect.getdoc(func) or "", func.__module__, stage)
        func.check_id = check_id
        return func

    return deco


def declare(check_id: str, doc: str, *, tolerances: dict | None = None, module: str = "") -> None:
    """Declare an id emitted by a pipeline stage (no check function)."""
    if check_id in _REGISTRY:
        raise ValueError(f"check id {check_id!r} declared twice")
    _REGISTRY[check_id] = CheckSpec(check_id, None, MappingProxyType(dict(tolerances or {})),
                                    inspect.cleandoc(doc), module, "stage")


def spec_for(check_id: str) -> CheckSpec | None:
    return _REGISTRY.get(check_id)


def all_specs() -> list[CheckSpec]:
    """Every registered id, in registration order (the order checks run in)."""
    return list(_REGISTRY.values())


def runnable(stage: str = "check") -> list[CheckSpec]:
    return [s for s in _REGISTRY.values() if s.func is not None and s.stage == stage]
