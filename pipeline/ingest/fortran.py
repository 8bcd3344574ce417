"""Helpers for fixed-column Fortran-style records (NASA 7- and 9-term files)."""
from __future__ import annotations

import math

import numpy as np

from ..errors import RecordError


def field(line: str, start: int, stop: int) -> str:
    """Columns ``start``..``stop`` (1-based, inclusive) of ``line``, padded if short."""
    return line[start - 1:stop] if len(line) >= start else ""


def number(line: str, start: int, stop: int, what: str, *, blank=None) -> float:
    """A Fortran real in columns start..stop; ``D`` exponents accepted.

    Raises RecordError naming the columns and the text when it is not a finite number.
    A blank field returns ``blank`` if given, else raises.
    """
    raw = line[start - 1:stop] if len(line) >= start else ""
    try:                       # the common case: a plain real (float() ignores the padding)
        value = float(raw)
    except ValueError:
        pass
    else:
        if math.isfinite(value):
            return value
    text = raw.strip()
    if not text:
        if blank is not None:
            return blank
        raise RecordError(f"blank {what} in columns {start}-{stop}; expected a number")
    try:
        value = float(text.replace("D", "E").replace("d", "e"))
    except ValueError:
        raise RecordError(f"unparsable {what} {text!r} in columns {start}-{stop}; "
                          "expected a Fortran real such as 1.2345E+03") from None
    if not math.isfinite(value):
        raise RecordError(f"non-finite {what} {text!r} in columns {start}-{stop}")
    return value


def numbers(line: str, spans, what) -> list[float]:
    """Several Fortran reals of one line: ``spans`` are (start, stop) column pairs (1-based,
    inclusive), ``what`` names each (a sequence of the same length).

    All fields are read at once when every one is a finite real (``D`` exponents included);
    otherwise each goes through :func:`number`, which raises the exact error.
    """
    text = line.replace("D", "E").replace("d", "e")
    try:
        values = [float(text[a - 1:b]) for a, b in spans]
    except ValueError:
        values = None
    if values is not None and all(math.isfinite(v) for v in values):
        return values
    return [number(line, a, b, w) for (a, b), w in zip(spans, what)]


def element_pairs(text: str, width_sym: int, width_num: int, n: int, what="formula") -> dict:
    """Parse up to ``n`` symbol+count pairs from fixed columns into {symbol: count}.

    Symbols are read case-insensitively (``CL`` → ``Cl``); ``E`` is the electron
    (count = −charge). A blank pair, a zero count, or a blank symbol with a zero count
    (how NASA-9 files fill unused pairs) is skipped.
    """
    out: dict[str, float] = {}
    step = width_sym + width_num
    for i in range(n):
        chunk = text[i * step:(i + 1) * step]
        sym = chunk[:width_sym].strip()
        num = chunk[width_sym:].strip()
        if not sym and not num:
            continue
        if not sym:
            # unused pairs are often written as a blank symbol with a zero count ("    0.00")
            try:
                if float(num.replace("D", "E").replace("d", "e")) == 0.0:
                    continue
            except ValueError:
                pass
            raise RecordError(f"{what}: count {num!r} without an element symbol")
        try:
            count = float(num.replace("D", "E")) if num else 0.0
        except ValueError:
            raise RecordError(f"{what}: unparsable count {num!r} for element {sym!r}") from None
        if count == 0:
            continue
        s = sym[0].upper() + sym[1:].lower()
        out[s] = out.get(s, 0.0) + count
    return out


def reals_of(fields: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Fixed-width byte fields (a numpy bytes array) → (values, ok): ``float()`` of each field
    (padding ignored), all at once where every field reads; ``ok`` is False where ``float()``
    raises or gives a non-finite number (the batch readers of nasa7 and nasa9)."""
    try:
        values = fields.astype(float)
    except ValueError:
        values = np.full(len(fields), np.nan)
        for k, f in enumerate(fields.tolist()):
            try:
                values[k] = float(f)
            except ValueError:
                pass
    return values, np.isfinite(values)
