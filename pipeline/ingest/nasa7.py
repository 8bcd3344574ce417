"""Reader for NASA 7-term polynomial files (four 80-column lines per species).

Format: McBride, Gordon & Reno, *Coefficients for Calculating Thermodynamic and Transport
Properties of Individual Species*, NASA TM-4513 (1993), and the older "classic" layout of
its predecessors. See ``shared/spec/inputs.md`` for the column map. Two layouts:

``classic``  line 1 cols 66–78 hold T_common (read tolerantly up to column 78; blank → the
             file's default from the line after ``THERMO``), optional fifth element 74–78.
``tm4513``   T_common is 1000 K, line 1 cols 66–78 hold the molar mass [g/mol] and line 4
             cols 61–75 hold ΔfH°(298.15)/R [K].

A record with a bad line is rejected whole; the reader resynchronises on the next line 1.
"""
from __future__ import annotations

import json
import re
from pathlib import Path

import numpy as np

from ..constants import R
from ..errors import RecordError
from ..manifest import Source
from ..thermo import COEF_COLUMNS, from_nasa7
from .base import RECORD_COLUMNS, REJECTED_COLUMNS, SEGMENT_COLUMNS, ReadResult, frame, rejected_row
from .fortran import element_pairs, field, number, numbers

PHASES = {"G": "g", "L": "l", "S": "cr", "C": "cr"}
#: the five 15-column coefficient fields of lines 2-4
_SPANS = tuple((1 + 15 * i, 15 + 15 * i) for i in range(5))
_DEFAULT_T = re.compile(r"^\s*([-+0-9.EeDd]+)\s+([-+0-9.EeDd]+)\s+([-+0-9.EeDd]+)")


def _line_number(line: str) -> str:
    if len(line) >= 80:
        return line[79]
    stripped = line.rstrip()
    return stripped[-1] if stripped else ""


def _parse_record(lines: list[str], default_tmid: float | None, layout: str) -> dict:
    l1, l2, l3, l4 = lines
    name_field = field(l1, 1, 18).strip()
    if not name_field:
        raise RecordError("line 1: blank species name in columns 1-18")
    name = name_field.split()[0]
    date_code = field(l1, 19, 24).strip()
    elements = element_pairs(field(l1, 25, 44).ljust(20), 2, 3, 4)
    phase_letter = field(l1, 45, 45).strip().upper()
    if phase_letter not in PHASES:
        raise RecordError(f"line 1: phase {phase_letter or 'blank'!r} in column 45; expected G, L or S")
    t_low = number(l1, 46, 55, "T_low")
    t_high = number(l1, 56, 65, "T_high")
    molar_mass = np.nan
    if layout == "tm4513":
        t_mid = 1000.0
        molar_mass = number(l1, 66, 78, "molar mass", blank=np.nan)
    else:
        tmid_text = field(l1, 66, 78)
        fifth = field(l1, 74, 78)
        # T_common is F8.x in 66-73, often F10.3 in 66-75; a fifth element lives in 74-78.
        if fifth.strip() and fifth[:2].strip().isalpha():
            tmid_text = field(l1, 66, 73)
            elements.update(element_pairs(fifth.ljust(5), 2, 3, 1))
        t_mid = (float(tmid_text.strip().replace("D", "E")) if _is_number(tmid_text)
                 else default_tmid)
        if t_mid is None:
            raise RecordError(f"line 1: T_common {tmid_text.strip()!r} in columns 66-78 is "
                              "not a number and the file gives no default")
    if not elements:
        raise RecordError("line 1: no elements in the formula field (columns 25-44)")
    if not (0 < t_low < t_mid < t_high):
        raise RecordError(f"line 1: temperatures T_low={t_low:g}, T_common={t_mid:g}, "
                          f"T_high={t_high:g} K are not ascending and positive")
    up = numbers(l2, _SPANS[:5], [f"line 2 coefficient {i + 1}" for i in range(5)])
    l3_values = numbers(l3, _SPANS[:5], [f"line 3 coefficient {i + 1}" for i in range(5)])
    up += l3_values[:2]
    lo = l3_values[2:]
    lo += numbers(l4, _SPANS[:4], [f"line 4 coefficient {i + 1}" for i in range(4)])
    dfh = np.nan
    if layout == "tm4513":
        dfh_r = number(l4, 61, 75, "ΔfH°/R", blank=np.nan)
        dfh = dfh_r * R
    charge = -int(round(elements.pop("E", 0.0)))
    return dict(name=name, date_code=date_code, elements=elements, charge=charge,
                state=PHASES[phase_letter], t_low=t_low, t_mid=t_mid, t_high=t_high,
                upper=up, lower=lo, molar_mass=molar_mass, dfh=dfh)


def _is_number(text: str) -> bool:
    try:
        float(text.strip().replace("D", "E"))
        return True
    except ValueError:
        return False


def read(path: Path, source: Source, rel: str) -> ReadResult:
    """Read one nasa7 file. ``rel`` is the path as reported (relative to raw/)."""
    text = path.read_bytes().decode("utf-8", errors="replace")
    lines = text.splitlines()
    records, segments, rejected = [], [], []
    default_tmid: float | None = None
    seen: dict[str, int] = {}
    n_read = 0
    i = 0
    n = len(lines)
    while i < n:
        line = lines[i]
        stripped = line.strip()
        upper = stripped.upper()
        if not stripped or stripped.startswith("!"):
            i += 1
            continue
        if upper.startswith("THERMO"):
            # Optional default-temperature line right after THERMO.
            if i + 1 < n and (m := _DEFAULT_T.match(lines[i + 1])) and _line_number(lines[i + 1]) != "1":
                try:
                    default_tmid = float(m.group(2).replace("D", "E"))
                    i += 1
                except ValueError:
                    pass
            i += 1
            continue
        if upper.startswith("END"):
            i += 1
            continue
        if _line_number(line) != "1":
            n_read += 1
            rejected.append(rejected_row(source.id, rel, i + 1, line,
                                         f"line {i + 1}: expected line 1 of a record (a '1' in "
                                         f"column 80), found {_line_number(line)!r}; the line is "
                                         "outside any record — fix: restore the record's 4 lines "
                                         "or comment the line with '!'"))
            i += 1
            continue
        # Gather the four lines of one record.
        start = i
        n_read += 1
        block = [line]
        problem = None
        for k in (2, 3, 4):
            if i + k - 1 >= n:
                problem = f"record ends after line {k - 1} (file truncated); expected 4 lines"
                break
            nxt = lines[i + k - 1]
            if _line_number(nxt) != str(k):
                problem = (f"line {start + k} should be line {k} of the record (a '{k}' in "
                           f"column 80), found {_line_number(nxt)!r}")
                break
            block.append(nxt)
        if problem is None:
            try:
                rec = _parse_record(block, default_tmid, source.nasa7_layout)
            except RecordError as exc:
                problem = str(exc)
        if problem is not None:
            rejected.append(rejected_row(source.id, rel, start + 1, "\n".join(block),
                                         f"{rel}:{start + 1}: nasa7 record: {problem} — fix: "
                                         "correct the record (columns per NASA TM-4513)"))
            i += len(block)
            continue
        i += 4
        rid = f"{source.id}/{rec['name']}"
        seen[rid] = seen.get(rid, 0) + 1
        if seen[rid] > 1:
            rid += f"#{seen[rid]}"
        records.append(dict(record_id=rid, source_id=source.id, name=rec["name"],
                            species_hint=None, state=rec["state"], label=None,
                            elements_json=json.dumps(rec["elements"], sort_keys=True),
                            charge=rec["charge"], kind="polynomial", form="nasa7", file=rel,
                            line=start + 1, t_low_k=rec["t_low"], t_high_k=rec["t_high"],
                            stated_dfh_j_mol=rec["dfh"], stated_molar_mass_g_mol=rec["molar_mass"],
                            date_code=rec["date_code"]))
        for seg, (lo_t, hi_t, c) in enumerate(((rec["t_low"], rec["t_mid"], rec["lower"]),
                                               (rec["t_mid"], rec["t_high"], rec["upper"]))):
            coef = from_nasa7(np.array(c))
            segments.append(dict(record_id=rid, segment=seg, t_low_k=lo_t, t_high_k=hi_t,
                                 **dict(zip(COEF_COLUMNS, coef)), line=start + 1))
    return ReadResult(n_read=n_read, records=frame(records, RECORD_COLUMNS),
                      segments=frame(segments, SEGMENT_COLUMNS),
                      rejected=frame(rejected, REJECTED_COLUMNS))
