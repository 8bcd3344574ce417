"""One exception root for thermoledger.

Each error stores its fields and builds its message in ``__str__`` in the form
"found X in FILE:LINE, expected Y — fix Z". Errors are raised, never returned.
"""
from __future__ import annotations

from dataclasses import dataclass


class ThermoledgerError(Exception):
    """Root of every error thermoledger raises on purpose."""


@dataclass
class InputError(ThermoledgerError, ValueError):
    """Unusable input: the command exits with code 2.

    Parameters
    ----------
    file : str
        Path of the offending file (as the user wrote it, relative to raw/ where possible).
    line : int | None
        1-based line number, or None when the whole file is at fault.
    found : str
        What was found.
    expected : str
        What was expected instead.
    fix : str
        What the user should do.
    """

    file: str
    line: int | None
    found: str
    expected: str
    fix: str

    def __str__(self) -> str:
        where = f"{self.file}:{self.line}" if self.line else self.file
        return f"found {self.found} in {where}, expected {self.expected} — fix: {self.fix}"


@dataclass
class RecordError(ThermoledgerError, ValueError):
    """One input record cannot be read; the reader puts it in ``rejected`` and goes on.

    ``reason`` is the text a curator reads in the rejected table.
    """

    reason: str
    line: int | None = None

    def __str__(self) -> str:
        return self.reason if self.line is None else f"line {self.line}: {self.reason}"


@dataclass
class UnitError(ThermoledgerError, ValueError):
    """A unit is missing, unknown, or of the wrong dimension."""

    unit: str
    expected: str

    def __str__(self) -> str:
        return f"found unit {self.unit!r}, expected {self.expected}"


@dataclass
class ConfigError(ThermoledgerError, ValueError):
    """A configuration or waiver value is invalid."""

    file: str
    key: str
    found: str
    expected: str

    def __str__(self) -> str:
        return (f"found {self.key} = {self.found} in {self.file}, expected {self.expected} — "
                f"fix: correct or remove the key")
