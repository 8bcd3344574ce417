"""Reader for NASA 9-coefficient polynomial files.

Format: McBride, Zehe & Gordon, *NASA Glenn Coefficients for Calculating Thermodynamic
Properties of Individual Species*, NASA/TP-2002-211556 (2002), Appendix A. Per species::

    name line        name (cols 1-18), comments after
    line 2           intervals (1-2), reference code (4-9), formula as five symbol(A2) +
                     count(F6.2) pairs (11-50), phase flag (51-52, 0 = gas), molar mass
                     [g/mol] (53-65), ΔfH°(298.15) [J/mol] (66-80)
    per interval     T line: T_low, T_high (2F11.3, 1-22), number of coefficients (23,
                     always 7), eight exponents (8F5.1, 24-63), H(298.15)-H(0) [J/mol] (66-80)
                     a1-a5 (5D16.9); a6, a7 (1-32), blank (33-48), b1, b2 (49-80)

The published equations are exactly the canonical segment of :mod:`pipeline.thermo`, so the
coefficients map one to one; only the standard exponent set −2 −1 0 1 2 3 4 (and 0 for the
unused eighth term) is accepted, any other set is rejected with that reason.

State (inputs.md, "Species identity"): phase flag 0 → ``g``; otherwise from a suffix of the
name: ``(L)``/``(l)`` → ``l``; ``(cr)``/``(s)`` → ``cr``; any other suffix (``(a)``, ``(b)``,
``(I)``, ``(gr)``) → ``cr`` labelled with it; no suffix → ``cr``. The electron pseudo-element
``E`` (count = −charge) gives the charge.

Tolerated: a ``thermo`` first line and the default-temperature line after it, comment
lines starting with ``!`` or ``#``, blank lines, ``END PRODUCTS`` / ``END REACTANTS`` /
``END``. A record with a bad line is rejected whole (with every line up to the next
recognisable record start), and reading goes on; a record with zero intervals (a reactant
with an assigned enthalpy at one temperature) holds no polynomial and is rejected with
that reason.
"""
from __future__ import annotations

import json
import math
import re
from pathlib import Path

import numpy as np

from ..errors import RecordError
from ..manifest import Source
from .base import RECORD_COLUMNS, REJECTED_COLUMNS, SEGMENT_COLUMNS, ReadResult, frame, rejected_row
from .fortran import element_pairs, field, number, numbers, reals_of

#: The published exponent set of the nine-term form (NASA/TP-2002-211556, eq. 1).
STANDARD_EXPONENTS = (-2.0, -1.0, 0.0, 1.0, 2.0, 3.0, 4.0, 0.0)
#: columns 24-63 of an interval line holding the standard exponents as 8F5.1 (a fast path)
_STANDARD_EXPONENT_TEXT = "".join(f"{e:5.1f}" for e in STANDARD_EXPONENTS)
#: coefficient columns: a1-a5 on the first line; a6, a7, b1, b2 on the second
_SPANS_1 = tuple((1 + 16 * i, 16 + 16 * i) for i in range(5))
_SPANS_2 = ((1, 16), (17, 32), (49, 64), (65, 80))
_SUFFIX = re.compile(r"\((?P<suffix>[^()]*)\)\s*$")
_NUMBERS = re.compile(r"^\s*[-+]?\d*\.?\d+(?:[EeDd][-+]?\d+)?\s+[-+]?\d*\.?\d+")
#: Gaps and overlaps between intervals smaller than this are rounding of the T fields [K].
JOIN_TOL_K = 1e-3


def _is_int(text: str) -> bool:
    t = text.strip()
    return bool(t) and t.lstrip("+-").isdigit()


def _looks_like_line2(line: str) -> bool:
    """True when ``line`` has the shape of a record's second line (see module doc):
    an integer in cols 1-2, col 3 blank, an integer phase flag in 51-52 and a number in
    53-65. Coefficient lines fail on col 3 (a digit or '.'), T lines on cols 1-2."""
    if len(line) < 53 or not _is_int(field(line, 1, 2)) or field(line, 3, 3).strip():
        return False
    if not _is_int(field(line, 51, 52)):
        return False
    try:
        float(field(line, 53, 65).strip().replace("D", "E").replace("d", "e"))
    except ValueError:
        return False
    return True


def _is_marker(line: str) -> bool:
    """Blank, comment, ``thermo`` or ``END ...`` lines (outside records)."""
    s = line.strip()
    u = s.upper()
    return (not s or s[0] in "!#" or u.startswith("THERMO") or u == "END"
            or u.startswith("END PRODUCTS") or u.startswith("END REACTANTS"))


def state_of(name: str, phase_flag: int) -> tuple[str, str | None]:
    """(state, label) from the phase flag and the name's suffix (module doc)."""
    if phase_flag == 0:
        return "g", None
    m = _SUFFIX.search(name)
    if not m:
        return "cr", None
    suffix = m.group("suffix").strip()
    word = suffix.lower()
    if word == "l":
        return "l", None
    if word in ("cr", "s", ""):
        return "cr", None
    if word == "g":
        raise RecordError(f"name {name!r} says gas but the phase flag is {phase_flag} "
                          "(condensed)")
    return "cr", suffix


def _parse_head(name_line: str, line2: str) -> dict:
    name_field = field(name_line, 1, 18).strip()
    if not name_field:
        raise RecordError("blank species name in columns 1-18 of the name line")
    name = name_field.split()[0]
    n_int = int(field(line2, 1, 2))
    ref_code = field(line2, 4, 9).strip()
    elements = element_pairs(field(line2, 11, 50).ljust(40), 2, 6, 5)
    phase = int(field(line2, 51, 52))
    molar_mass = number(line2, 53, 65, "molar mass")
    dfh = number(line2, 66, 80, "ΔfH°(298.15)", blank=math.nan)
    charge_f = -elements.pop("E", 0.0)
    if abs(charge_f - round(charge_f)) > 1e-9:
        raise RecordError(f"electron count {-charge_f:g} (element E) is not a whole number")
    if not elements and charge_f == 0:
        raise RecordError("no elements in the formula field (columns 11-50)")
    state, label = state_of(name, phase)
    return dict(name=name, n_int=n_int, ref_code=ref_code, elements=elements,
                charge=int(round(charge_f)), state=state, label=label,
                molar_mass=molar_mass, dfh=dfh)


def _parse_interval(tline: str, c1: str, c2: str, k: int) -> tuple[float, float, list[float]]:
    where = f"interval {k + 1}"
    t_lo = number(tline, 1, 11, f"{where} T_low")
    t_hi = number(tline, 12, 22, f"{where} T_high")
    ncoef = field(tline, 23, 23).strip()
    if ncoef != "7":
        raise RecordError(f"{where}: number of coefficients {ncoef or 'blank'!r} in column 23; "
                          "expected 7")
    if tline[23:63] == _STANDARD_EXPONENT_TEXT:
        exps = STANDARD_EXPONENTS
    else:
        exps = tuple(number(tline, 24 + 5 * i, 28 + 5 * i, f"{where} exponent {i + 1}", blank=0.0)
                     for i in range(8))
    if exps != STANDARD_EXPONENTS:
        raise RecordError(f"{where}: non-standard exponents {' '.join(f'{e:g}' for e in exps)} "
                          "(columns 24-63); only -2 -1 0 1 2 3 4 0 is the published nine-term "
                          "form")
    a = numbers(c1, _SPANS_1, [f"{where} coefficient a{i + 1}" for i in range(5)])
    a += numbers(c2, _SPANS_2[:2], [f"{where} coefficient a{i + 6}" for i in range(2)])
    if field(c2, 33, 48).strip():
        raise RecordError(f"{where}: columns 33-48 of the second coefficient line should be "
                          f"blank, found {field(c2, 33, 48).strip()!r}")
    b = numbers(c2, _SPANS_2[2:], [f"{where} b1", f"{where} b2"])
    if not (0 < t_lo < t_hi):
        raise RecordError(f"{where}: T_low={t_lo:g} K, T_high={t_hi:g} K are not ascending and positive")
    return t_lo, t_hi, a + b


#: Read plain intervals with :func:`_plain_intervals` (False: every interval by
#: :func:`_parse_interval`; the tests compare the two).
BATCH = True


def _plain_intervals(lines: list[str]) -> tuple[np.ndarray, np.ndarray]:
    """Every line read as the T line of an interval, with numpy on the bytes of all lines:
    ``(ok, values)``; ``values[j]`` = (T_low, T_high, a1..a7, b1, b2) of the interval whose T
    line is ``lines[j]`` where ``ok[j]``.

    ``ok`` only where :func:`_parse_interval` would return without error and read every
    field plainly: printable ASCII, a plain real in every field (``D`` exponents of the
    coefficients read as ``E``, as :func:`~pipeline.ingest.fortran.numbers` does), ``7`` in
    column 23, the standard exponent text, blank columns 33-48, ascending positive
    temperatures. Every other interval goes through :func:`_parse_interval`.
    """
    n = len(lines)
    ok = np.zeros(n, bool)
    values = np.full((n, 11), np.nan)
    if n < 3 or not BATCH:
        return ok, values
    text = "".join(line[:80].ljust(80) for line in lines)
    raw = np.frombuffer(text.encode("ascii", errors="replace"), np.uint8).reshape(n, 80)

    def field(src: np.ndarray, start: int, stop: int) -> np.ndarray:
        return np.ascontiguousarray(src[:, start - 1:stop]).view(f"S{stop - start + 1}").ravel()

    # T lines: '7' in column 23 and the standard exponent text, then two more lines
    cand = np.flatnonzero((field(raw, 23, 23) == b"7")
                          & (field(raw, 24, 63) == _STANDARD_EXPONENT_TEXT.encode()))
    cand = cand[cand < n - 2]
    cand = cand[[all(lines[j + k].isascii() and lines[j + k].isprintable() for k in range(3))
                 for j in cand.tolist()]]
    if not len(cand):
        return ok, values
    t_rows = raw[cand]
    coef = raw[np.concatenate([cand + 1, cand + 2])]
    coef[coef == ord("D")] = ord("E")
    coef[coef == ord("d")] = ord("e")
    c1_rows, c2_rows = coef[:len(cand)], coef[len(cand):]

    def reals(src: np.ndarray, start: int, stop: int) -> tuple[np.ndarray, np.ndarray]:
        return reals_of(field(src, start, stop))

    t_lo, ok_lo = reals(t_rows, 1, 11)
    t_hi, ok_hi = reals(t_rows, 12, 22)
    c1 = [reals(c1_rows, a, b) for a, b in _SPANS_1]
    c2 = [reals(c2_rows, a, b) for a, b in _SPANS_2]
    good = (ok_lo & ok_hi & (0 < t_lo) & (t_lo < t_hi)
            & np.logical_and.reduce([g for _, g in c1 + c2])
            & (np.char.strip(field(c2_rows, 33, 48)) == b""))
    ok[cand] = good
    values[cand] = np.stack([t_lo, t_hi] + [v for v, _ in c1 + c2], axis=1)
    return ok, values


def read(path: Path, source: Source, rel: str) -> ReadResult:
    """Read one nasa9 file. ``rel`` is the path as reported (relative to raw/)."""
    text = path.read_bytes().decode("utf-8", errors="replace")
    lines = text.splitlines()
    n = len(lines)
    plain_ok, plain_values = _plain_intervals(lines)
    at = np.flatnonzero(plain_ok)
    plain = dict(zip(at.tolist(), plain_values[at].tolist()))       # T-line index → its values
    records, segments, rejected, notes = [], [], [], []
    seen: dict[str, int] = {}
    n_read = 0
    i = 0
    after_thermo = False

    def is_start(j: int) -> bool:
        return j + 1 < n and not _is_marker(lines[j]) and _looks_like_line2(lines[j + 1])

    def resync(j: int) -> int:
        """First index ≥ j that starts a record or is a marker line (or n)."""
        while j < n and not (is_start(j) or _is_marker(lines[j])):
            j += 1
        return j

    while i < n:
        line = lines[i]
        if _is_marker(line):
            after_thermo = line.strip().upper().startswith("THERMO")
            i += 1
            if after_thermo and i < n and _NUMBERS.match(lines[i]) and not is_start(i):
                i += 1          # the default-temperature line after 'thermo'
            continue
        start = i
        n_read += 1
        problem, end = None, None
        if not is_start(i):
            problem = ("expected a species name line followed by the record's second line "
                       "(intervals in columns 1-2, phase flag in 51-52, molar mass in 53-65)")
            end = resync(i + 1)
        else:
            try:
                head = _parse_head(lines[i], lines[i + 1])
            except (RecordError, ValueError) as exc:
                problem, end = f"line {i + 2}: {exc}", resync(i + 2)
            else:
                if head["n_int"] == 0:
                    # one line with the assigned temperature follows
                    end = min(i + 3, n)
                    problem = ("0 temperature intervals: an enthalpy assigned at one "
                               "temperature, not a polynomial; nothing to load — fix: give "
                               "the species temperature intervals, or keep such reactant "
                               "records out of the database's raw files")
                else:
                    segs, j = [], i + 2
                    for k in range(head["n_int"]):
                        if j + 2 >= n:
                            problem = (f"file ends inside interval {k + 1} of {head['n_int']} "
                                       "(truncated record)")
                            end = n
                            break
                        try:
                            if j in plain:
                                v = plain[j]
                                segs.append((v[0], v[1], v[2:]))
                            else:
                                segs.append(_parse_interval(lines[j], lines[j + 1], lines[j + 2], k))
                        except RecordError as exc:
                            problem = (f"declares {head['n_int']} intervals but the next record "
                                       f"starts at line {j + 1} after {k}" if is_start(j)
                                       else f"line {j + 1}: {exc}")
                            # fewer intervals than declared: the next record starts at j;
                            # otherwise skip to the next recognisable record start
                            end = j if is_start(j) else resync(j + 1)
                            break
                        j += 3
                    if problem is None:
                        end = j
                        for k in range(1, len(segs)):
                            gap = segs[k][0] - segs[k - 1][1]
                            if gap < -JOIN_TOL_K:
                                problem = (f"interval {k + 1} starts at {segs[k][0]:g} K, before "
                                           f"interval {k} ends at {segs[k - 1][1]:g} K; intervals "
                                           "must ascend")
                                break
                            if gap > JOIN_TOL_K:
                                notes.append(f"{rel}:{start + 1}: {head['name']} has a gap "
                                             f"{segs[k - 1][1]:g}-{segs[k][0]:g} K between intervals")
        if problem is not None:
            end = max(end if end is not None else i + 1, start + 1)
            block = "\n".join(lines[start:end])
            fix = ("" if " — fix: " in problem else " — fix: correct the record (columns per "
                   "NASA/TP-2002-211556, Appendix A)")
            rejected.append(rejected_row(source.id, rel, start + 1, block,
                                         f"nasa9 record at line {start + 1}: {problem}{fix}"))
            i = end
            continue
        i = end
        rid = f"{source.id}/{head['name']}"
        seen[rid] = seen.get(rid, 0) + 1
        if seen[rid] > 1:
            rid += f"#{seen[rid]}"
        records.append((rid, head["name"], head["state"], head["label"], _elements_json(head["elements"]),
                        head["charge"], start + 1, segs[0][0], segs[-1][1], head["dfh"], head["molar_mass"],
                        head["ref_code"]))
        for k, (lo, hi, coef) in enumerate(segs):
            segments.append((rid, k, lo, hi, *coef, start + 3 + 3 * k))
    return ReadResult(n_read=n_read, records=_record_frame(records, source.id, rel),
                      segments=_segment_frame(segments),
                      rejected=frame(rejected, REJECTED_COLUMNS), notes=notes)


def _elements_json(elements: dict) -> str:
    """``json.dumps(elements, sort_keys=True)``, written directly when there is nothing to
    escape (symbols of ASCII letters and digits, finite float counts)."""
    items = sorted(elements.items())
    if all(k.isascii() and k.isalnum() and isinstance(v, float) and math.isfinite(v) for k, v in items):
        return "{" + ", ".join(f'"{k}": {v!r}' for k, v in items) + "}"
    return json.dumps(elements, sort_keys=True)


def _record_frame(rows: list[tuple], source_id: str, rel: str):
    """The records frame from row tuples (record_id, name, state, label, elements_json,
    charge, line, T_low, T_high, ΔfH°, molar mass, reference code), built column by column
    (as :func:`~pipeline.ingest.base.frame` builds it from dicts: the same columns and dtypes)."""
    import pandas as pd

    if not rows:
        return frame([], RECORD_COLUMNS)
    cols = list(zip(*rows))
    n = len(rows)
    data = {"record_id": list(cols[0]), "source_id": [source_id] * n, "name": list(cols[1]),
            "species_hint": [None] * n, "state": list(cols[2]), "label": list(cols[3]),
            "elements_json": list(cols[4]), "charge": list(cols[5]), "kind": ["polynomial"] * n,
            "form": ["nasa9"] * n, "file": [rel] * n, "line": list(cols[6]), "t_low_k": list(cols[7]),
            "t_high_k": list(cols[8]), "stated_dfh_j_mol": list(cols[9]),
            "stated_molar_mass_g_mol": list(cols[10]), "date_code": list(cols[11])}
    return _select(pd.DataFrame(data), RECORD_COLUMNS)


def _select(df, columns):
    """``df`` with exactly ``columns`` in that order (missing ones None, as in ``frame``)."""
    for c in columns:
        if c not in df:
            df[c] = None
    return df[list(columns)]


def _segment_frame(rows: list[tuple]):
    """The segments frame from row tuples (record_id, segment, T_low, T_high, a1..a7, b1, b2,
    line), built column by column (as :func:`~pipeline.ingest.base.frame` builds it from
    dicts: the same columns and dtypes)."""
    import pandas as pd

    if not rows:
        return frame([], SEGMENT_COLUMNS)
    cols = list(zip(*rows))
    data = {"record_id": list(cols[0]), "segment": np.array(cols[1], np.int64)}
    for name, values in zip(SEGMENT_COLUMNS[2:-1], cols[2:-1]):
        data[name] = np.array(values, float)
    data["line"] = np.array(cols[-1], np.int64)
    return pd.DataFrame(data)[list(SEGMENT_COLUMNS)]
