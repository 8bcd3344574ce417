"""Unit conversion through one pint registry.

``cal`` is always the thermochemical calorie, 4.184 J exactly (pint's ``cal``, also named
``thermochemical_calorie``; NIST SP 811, 2008, B.8). The international-table calorie
``cal_it`` = 4.1868 J is never assumed. Whole columns are converted at once (one factor
per column, applied to a numpy array).

Units in raw files come from three places, in this order of precedence: a per-row
``unit`` column (reactions-csv), a ``[unit]`` bracket in the column header, the manifest's
``energy_unit``. A numeric column with a dimension and no unit from any of them is an
error, never a guess (:func:`column_factor`).
"""
from __future__ import annotations

import re
from functools import lru_cache

import numpy as np

from .errors import InputError, UnitError


@lru_cache(maxsize=1)
def registry():
    """The one pint registry, built on first use (building it takes a noticeable fraction of a
    second, which a run that reuses its previous release never needs).
    ``registry().Quantity(1, "cal").m_as("J") == 4.184`` (thermochemical calorie)."""
    import pint

    return pint.UnitRegistry()


def __getattr__(name: str):
    """``UREG``: the registry, as a module attribute (built on first access)."""
    if name == "UREG":
        return registry()
    raise AttributeError(f"module {__name__!r} has no attribute {name!r}")

#: SI target of each quantity kind that appears in raw files.
SI_ENERGY = "J/mol"
SI_ENTROPY = "J/(mol*K)"
SI_UNIT = {"energy": SI_ENERGY, "entropy": SI_ENTROPY, "temperature": "K", "dimensionless": "1"}

#: Manifest ``energy_unit`` values → pint energy units (``cal`` = 4.184 J, thermochemical).
ENERGY_UNITS = {"J": "J", "kJ": "kJ", "cal": "cal", "kcal": "kcal"}

#: Texts that mean "no unit" for a dimensionless column (log K).
DIMENSIONLESS_TEXTS = frozenset({"", "1", "-", "dimensionless", "none"})



@lru_cache(maxsize=None)
def _dimensionality(kind: str):
    return registry().Quantity(1, {"energy": "J/mol", "entropy": "J/mol/K"}[kind]).dimensionality


_SUPERSCRIPTS = str.maketrans("⁰¹²³⁴⁵⁶⁷⁸⁹⁻", "0123456789-")
_BARE_EXPONENT = re.compile(r"(?<=[A-Za-z])(-?\d+)(?![\d.])")


def _normalise(text: str) -> str:
    """``J·mol⁻¹·K⁻¹`` / ``J mol-1 K-1`` → ``J*mol^-1*K^-1`` (pint syntax)."""
    t = text.strip().replace("·", "*").replace("⋅", "*").replace("−", "-")
    t = t.translate(_SUPERSCRIPTS)
    t = _BARE_EXPONENT.sub(r"^\1", t)
    return t


@lru_cache(maxsize=256)
def parse_unit(text: str):
    """A pint unit from text as written in a header or a ``unit`` cell.

    Raises
    ------
    UnitError
        If pint does not know the unit.
    """
    try:
        return registry().Unit(_normalise(text))
    except Exception as exc:  # pint raises several unrelated types (and TypeError)
        raise UnitError(text, "a unit such as kJ/mol, kcal/mol, J/(mol*K) or cal/(mol*K)") from exc


def factor_to_si(unit_text: str, kind: str) -> float:
    """Multiplier that converts a value in ``unit_text`` to SI for ``kind``.

    Parameters
    ----------
    unit_text : str
        Unit as written (``kJ/mol``, ``cal/(mol*K)``, ``kcal/mol``). ``cal`` is the
        thermochemical calorie (4.184 J).
    kind : {"energy", "entropy"}
        ``energy`` → J/mol; ``entropy`` (also heat capacity and gef) → J/(mol*K).

    Raises
    ------
    UnitError
        If the unit is unknown or has the wrong dimension.
    """
    u = parse_unit(unit_text)
    q = registry().Quantity(1.0, u)
    if q.dimensionality != _dimensionality(kind):
        raise UnitError(unit_text, f"a unit of {SI_UNIT[kind]} (e.g. "
                        + ("kJ/mol, kcal/mol)" if kind == "energy" else "J/(mol*K), cal/(mol*K))"))
    return float(q.m_as(SI_UNIT[kind]))


def to_si(values: np.ndarray, unit_text: str, kind: str) -> np.ndarray:
    """Convert a whole column from ``unit_text`` to SI (see :func:`factor_to_si`)."""
    return np.asarray(values, dtype=float) * factor_to_si(unit_text, kind)


def is_kelvin(unit_text: str) -> bool:
    """True when ``unit_text`` is the kelvin (temperatures must be absolute, in K)."""
    try:
        return parse_unit(unit_text) == registry().kelvin
    except UnitError:
        return False


def is_dimensionless(unit_text: str | None) -> bool:
    """True for a blank, ``1``, ``-`` or ``dimensionless`` unit."""
    return unit_text is None or unit_text.strip().lower() in DIMENSIONLESS_TEXTS


def energy_unit_for(manifest_unit: str, kind: str) -> str:
    """Per-mol unit string from a manifest ``energy_unit`` (``kJ`` → ``kJ/mol``;
    ``kind="entropy"``: ``kJ`` → ``kJ/(mol*K)``)."""
    base = ENERGY_UNITS[manifest_unit]
    return f"{base}/mol" if kind == "energy" else f"{base}/(mol*K)"


_HEADER = re.compile(r"^\s*([^\[\]]*?)\s*(?:\[([^\]]*)\])?\s*$")


def split_header(header: str) -> tuple[str, str | None]:
    """``'cp [cal/(mol*K)]'`` → ``('cp', 'cal/(mol*K)')``; no bracket → unit None."""
    m = _HEADER.match(header)
    if not m:
        return header.strip(), None
    unit = m.group(2)
    return m.group(1).strip(), (unit.strip() if unit is not None else None)


def column_factor(file: str, header: str, bracket: str | None, manifest_unit: str | None,
                  kind: str, source_id: str) -> float:
    """SI factor of one CSV column, from its header bracket, else the manifest.

    Parameters
    ----------
    file : str
        File as reported (relative to raw/), for the error message.
    header : str
        The column header as written.
    bracket : str | None
        Unit from the header's ``[...]`` (None when absent).
    manifest_unit : str | None
        The source's ``energy_unit`` (J, kJ, cal, kcal) or None.
    kind : {"energy", "entropy", "temperature", "dimensionless"}
        What the column holds.
    source_id : str
        The source's id, named in the fix.

    Raises
    ------
    InputError
        (exit 2) naming the file, line 1 and the fix when an energy or entropy column has
        no unit from either place, the unit is unknown or has the wrong dimension, a
        temperature is not in kelvin, or a dimensionless column carries a unit.
    """
    if kind == "temperature":
        if bracket is None or is_kelvin(bracket):
            return 1.0
        raise InputError(file, 1, f"temperature column {header!r} in {bracket!r}",
                         "temperatures in kelvin", f"convert the column to K and write "
                         f"'{split_header(header)[0]} [K]' (or no bracket)")
    if kind == "dimensionless":
        if is_dimensionless(bracket):
            return 1.0
        raise InputError(file, 1, f"unit {bracket!r} on dimensionless column {header!r}",
                         "no unit (a decimal logarithm is dimensionless)", "remove the bracket")
    example = "kJ/mol" if kind == "energy" else "J/(mol*K)"
    if bracket is None:
        if manifest_unit is None:
            raise InputError(file, 1, f"column {header!r} without a unit",
                             "the unit in square brackets in the header or energy_unit in "
                             "the manifest (units are never guessed)",
                             f"write e.g. '{header.strip()} [{example}]' or add "
                             f"energy_unit = \"kJ\" to source {source_id!r} in sources.toml")
        unit = energy_unit_for(manifest_unit, kind)
    else:
        unit = bracket
    try:
        return factor_to_si(unit, kind)
    except UnitError as exc:
        raise InputError(file, 1, f"unit {unit!r} in column {header!r}", exc.expected,
                         f"write a unit of {SI_UNIT[kind]} in the bracket, e.g. [{example}]") from None
