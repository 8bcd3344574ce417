"""Unit conversion through one pint registry.

``cal`` is always the thermochemical calorie, 4.184 J exactly (pint's ``cal``; the
international-table calorie ``cal_it`` = 4.1868 J is never assumed). Whole columns are
converted at once (``Quantity.m_as`` on a numpy array).
"""
from __future__ import annotations

import re
from functools import lru_cache

import numpy as np
import pint

from .errors import UnitError

UREG = pint.UnitRegistry()

#: SI target of each quantity kind that appears in raw files.
SI_ENERGY = "J/mol"
SI_ENTROPY = "J/(mol*K)"

#: Manifest ``energy_unit`` values → pint energy units.
ENERGY_UNITS = {"J": "J", "kJ": "kJ", "cal": "cal", "kcal": "kcal"}

_DIM_ENERGY = UREG.Quantity(1, "J/mol").dimensionality
_DIM_ENTROPY = UREG.Quantity(1, "J/mol/K").dimensionality


def _normalise(text: str) -> str:
    t = text.strip()
    t = t.replace("·", "*").replace("⋅", "*").replace("−", "-")
    return t


@lru_cache(maxsize=256)
def _unit(text: str) -> pint.Unit:
    try:
        return UREG.Unit(_normalise(text))
    except Exception as exc:  # pint raises several unrelated types
        raise UnitError(text, "a unit pint understands, e.g. kJ/mol or cal/(mol*K)") from exc


def factor_to_si(unit_text: str, kind: str) -> float:
    """Multiplier that converts a value in ``unit_text`` to SI for ``kind``.

    Parameters
    ----------
    unit_text : str
        Unit as written (``kJ/mol``, ``cal/(mol*K)``, ``kcal/mol``).
    kind : {"energy", "entropy"}
        ``energy`` → J/mol, ``entropy`` (also heat capacity, gef) → J/(mol*K).

    Raises
    ------
    UnitError
        If the unit is unknown or has the wrong dimension.
    """
    target, dim = (SI_ENERGY, _DIM_ENERGY) if kind == "energy" else (SI_ENTROPY, _DIM_ENTROPY)
    u = _unit(unit_text)
    q = UREG.Quantity(1.0, u)
    if q.dimensionality != dim:
        raise UnitError(unit_text, f"a unit of {target}")
    return float(q.m_as(target))


def to_si(values: np.ndarray, unit_text: str, kind: str) -> np.ndarray:
    """Convert a whole column from ``unit_text`` to SI (see :func:`factor_to_si`)."""
    return np.asarray(values, dtype=float) * factor_to_si(unit_text, kind)


def energy_unit_for(manifest_unit: str, kind: str) -> str:
    """Per-mol unit string from a manifest ``energy_unit`` (``kJ`` → ``kJ/mol``)."""
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
