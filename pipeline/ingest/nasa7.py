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
import pandas as pd

from ..constants import R
from ..errors import RecordError
from ..manifest import Source
from ..thermo import COEF_COLUMNS, from_nasa7
from .base import RECORD_COLUMNS, REJECTED_COLUMNS, SEGMENT_COLUMNS, ReadResult, frame, rejected_row
from .fortran import element_pairs, field, number, numbers, reals_of

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


#: Read plain records with :func:`_parse_blocks` (False: every record by :func:`_parse_record`;
#: the tests compare the two).
BATCH = True


def _no_columns(n: int) -> dict:
    """The columns of :func:`_parse_blocks` for ``n`` records, none read yet."""
    return {"ok": np.zeros(n, bool), "name": np.empty(n, object), "date_code": np.empty(n, object),
            "state": np.empty(n, object), "elements_json": np.empty(n, object), "charge": np.zeros(n, np.int64),
            "t_low": np.full(n, np.nan), "t_mid": np.full(n, np.nan), "t_high": np.full(n, np.nan),
            "molar_mass": np.full(n, np.nan), "dfh": np.full(n, np.nan),
            "lower": np.full((n, 7), np.nan), "upper": np.full((n, 7), np.nan)}


def _parse_blocks(blocks: list, defaults: list, layout: str) -> dict:
    """:func:`_parse_record` of many records at once, with numpy on the bytes of their lines.

    Returns columns (``name``, ``date_code``, ``state``, ``elements_json``, ``charge``,
    ``t_low``, ``t_mid``, ``t_high``, ``molar_mass``, ``dfh``, ``lower``, ``upper``) and
    ``ok``. Only records whose every field reads plainly are taken here — ASCII, plain reals,
    letters for element symbols, nothing that :func:`_parse_record` would refuse or read by
    a special rule (``D`` exponents in line 1 or in element counts, a fifth element that
    repeats one of the first four). Every other record has ``ok = False`` and is left to
    :func:`_parse_record`, which gives its exact values or the reason to reject it.
    """
    n = len(blocks)
    cols = _no_columns(n)
    if not n or not BATCH:
        return cols
    text = "".join(line[:80].ljust(80) for block in blocks for line in block)
    if not (text.isascii() and text.isprintable()):
        return cols                                  # the general parser reads such files
    raw = np.frombuffer(text.encode("ascii"), np.uint8).reshape(n, 4, 80)

    def field(k: int, start: int, stop: int, source=raw) -> np.ndarray:
        """Columns start..stop (1-based) of line k (0-based) of every record, as bytes."""
        return np.ascontiguousarray(source[:, k, start - 1:stop]).view(f"S{stop - start + 1}").ravel()

    ok = np.ones(n, bool)
    l1_name = [f.decode() for f in field(0, 1, 18).tolist()]
    name = [t.split()[0] if t.strip() else "" for t in l1_name]
    ok &= np.array([bool(t) for t in name], bool)
    phase = np.array([f.decode().strip().upper() for f in field(0, 45, 45).tolist()], dtype=object)
    ok &= np.isin(phase, list(PHASES))
    # line 1 reals: no D exponents here (number() and _is_number() read those by other rules)
    has_d = lambda f: np.char.count(f, b"D") + np.char.count(f, b"d") > 0   # noqa: E731
    t_low, good = reals_of(field(0, 46, 55))
    ok &= good & ~has_d(field(0, 46, 55))
    t_high, good = reals_of(field(0, 56, 65))
    ok &= good & ~has_d(field(0, 56, 65))
    # element pairs: symbol (2) + count (3), four in 25-44, a fifth in 74-78 (classic layout)
    pair_fields = [(field(0, 25 + 5 * p, 26 + 5 * p), field(0, 27 + 5 * p, 29 + 5 * p)) for p in range(4)]
    molar_mass = np.full(n, np.nan)
    if layout == "tm4513":
        t_mid = np.full(n, 1000.0)
        mm_f = field(0, 66, 78)
        blank = np.char.strip(mm_f) == b""
        mm, good = reals_of(mm_f)
        molar_mass = np.where(blank, np.nan, mm)
        ok &= (good | blank) & ~has_d(mm_f)
    else:
        fifth = field(0, 74, 78)
        with_fifth = (np.char.strip(fifth) != b"") & np.char.isalpha(np.char.strip(field(0, 74, 75)))
        tmid_f = np.where(with_fifth, field(0, 66, 73).astype("S13"), field(0, 66, 78))
        tm, good = reals_of(tmid_f)
        blank = np.char.strip(tmid_f) == b""
        default = np.array([np.nan if d is None else d for d in defaults])
        t_mid = np.where(good, tm, default)
        # here: a finite real, or blank with a default; anything else (a D exponent, text that
        # is not a number, nan) follows _parse_record's own rules
        ok &= (good | blank) & ~has_d(tmid_f) & np.isfinite(t_mid)
        pair_fields.append((field(0, 74, 75), field(0, 76, 78)))
    # symbols and counts of every pair
    k_pairs = len(pair_fields)
    sym_txt = np.stack([np.char.strip(s_) for s_, _ in pair_fields], axis=1)          # (n, k) bytes
    num_txt = np.stack([np.char.strip(c_) for _, c_ in pair_fields], axis=1)
    if layout != "tm4513":
        present = np.ones((n, k_pairs), bool)
        present[:, -1] = with_fifth
        sym_txt = np.where(present, sym_txt, b"")
        num_txt = np.where(present, num_txt, b"")
    counts, good = reals_of(np.where(num_txt == b"", b"0", num_txt).ravel())
    counts, good = counts.reshape(n, k_pairs), good.reshape(n, k_pairs)
    no_sym = sym_txt == b""
    ok &= ~(np.char.count(num_txt, b"D") + np.char.count(num_txt, b"d") > 0).any(axis=1)
    ok &= good.all(axis=1)
    ok &= ~(no_sym & (counts != 0)).any(axis=1)        # a count without a symbol
    ok &= (np.char.isalpha(sym_txt) | no_sym).all(axis=1)
    used = ~no_sym & (counts != 0)
    ok &= used.any(axis=1)                             # "no elements in the formula field"
    symbols = np.empty((n, k_pairs), object)
    uniq = np.unique(sym_txt)
    norm = {u: (u.decode()[:1].upper() + u.decode()[1:].lower()) for u in uniq.tolist()}
    for u, v in norm.items():
        symbols[sym_txt == u] = v
    if layout != "tm4513":
        # the fifth element replaces (dict.update) a repeat of the first four: general parser
        repeat = np.zeros(n, bool)
        for p in range(4):
            repeat |= used[:, p] & used[:, -1] & (symbols[:, p] == symbols[:, -1])
        ok &= ~repeat
    ok &= (0 < t_low) & (t_low < t_mid) & (t_mid < t_high)
    # coefficients: lines 2-4, D/d exponents read as E/e (as numbers() does)
    coef_bytes = raw[:, 1:4, :75].copy()
    coef_bytes[coef_bytes == ord("D")] = ord("E")
    coef_bytes[coef_bytes == ord("d")] = ord("e")
    vals = []
    for k, count in ((1, 5), (2, 5), (3, 4)):
        for f in range(count):
            v, good = reals_of(field(k - 1, 1 + 15 * f, 15 + 15 * f, source=coef_bytes))
            ok &= good
            vals.append(v)
    vals = np.stack(vals, axis=1)                      # 14 values: line 2 (5), line 3 (5), line 4 (4)
    dfh = np.full(n, np.nan)
    if layout == "tm4513":
        dfh_f = field(2, 61, 75, source=coef_bytes)
        blank = np.char.strip(dfh_f) == b""
        dfh_r, good = reals_of(dfh_f)
        ok &= good | blank
        dfh = np.where(blank, np.nan, dfh_r) * R
    # element counts → {symbol: count} summed in pair order; the electron gives the charge
    idx = np.flatnonzero(ok)
    ej = cols["elements_json"]
    charge = cols["charge"]
    for j in idx.tolist():
        els: dict = {}
        for p in range(k_pairs):
            if used[j, p]:
                sym = symbols[j, p]
                els[sym] = els.get(sym, 0.0) + counts[j, p]
        charge[j] = -int(round(els.pop("E", 0.0)))
        ej[j] = json.dumps(els, sort_keys=True)
    cols["ok"] = ok
    cols["name"][idx] = np.array(name, dtype=object)[idx]
    cols["date_code"][idx] = [f.decode().strip() for f in field(0, 19, 24)[idx].tolist()]
    cols["state"][idx] = [PHASES[p] for p in phase[idx].tolist()]
    cols["t_low"][idx], cols["t_mid"][idx], cols["t_high"][idx] = t_low[idx], t_mid[idx], t_high[idx]
    cols["molar_mass"][idx], cols["dfh"][idx] = molar_mass[idx], dfh[idx]
    cols["upper"][idx] = vals[idx][:, 0:7]
    cols["lower"][idx] = vals[idx][:, 7:14]
    return cols


def read(path: Path, source: Source, rel: str) -> ReadResult:
    """Read one nasa7 file. ``rel`` is the path as reported (relative to raw/)."""
    text = path.read_bytes().decode("utf-8", errors="replace")
    lines = text.splitlines()
    rejected = []
    blocks: list = []          # (first line index, the four lines, default T_common then)
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
        if problem is not None:
            rejected.append(rejected_row(source.id, rel, start + 1, "\n".join(block),
                                         f"{rel}:{start + 1}: nasa7 record: {problem} — fix: "
                                         "correct the record (columns per NASA TM-4513)"))
            i += len(block)
            continue
        i += 4
        blocks.append((start, block, default_tmid))
    cols = _parse_blocks([b for _, b, _ in blocks], [d for _, _, d in blocks], source.nasa7_layout)
    keep = np.ones(len(blocks), bool)
    for j in np.flatnonzero(~cols["ok"]).tolist():      # the general parser: exact values or reason
        start, block, tmid_default = blocks[j]
        try:
            rec = _parse_record(block, tmid_default, source.nasa7_layout)
        except RecordError as exc:
            keep[j] = False
            rejected.append(rejected_row(source.id, rel, start + 1, "\n".join(block),
                                         f"{rel}:{start + 1}: nasa7 record: {exc} — fix: "
                                         "correct the record (columns per NASA TM-4513)"))
            continue
        rec["elements_json"] = json.dumps(rec["elements"], sort_keys=True)
        for c in ("name", "date_code", "state", "elements_json", "charge", "t_low", "t_mid", "t_high",
                  "molar_mass", "dfh"):
            cols[c][j] = rec[c]
        cols["lower"][j], cols["upper"][j] = rec["lower"], rec["upper"]
    rejected.sort(key=lambda row: row["line"])
    kept = np.flatnonzero(keep)
    if not len(kept):
        return ReadResult(n_read=n_read, rejected=frame(rejected, REJECTED_COLUMNS))
    names = cols["name"][kept].tolist()
    rids = []
    for name in names:                      # a repeated name gets "#k" (k-th time in the file)
        rid = f"{source.id}/{name}"
        seen[rid] = seen.get(rid, 0) + 1
        rids.append(rid if seen[rid] == 1 else f"{rid}#{seen[rid]}")
    line = np.array([blocks[j][0] + 1 for j in kept.tolist()], np.int64)
    n_rec = len(kept)
    t_low, t_mid, t_high = (cols[c][kept].astype(float) for c in ("t_low", "t_mid", "t_high"))
    obj = lambda v: np.array([v] * n_rec, dtype=object)     # noqa: E731
    records = pd.DataFrame({
        "record_id": np.array(rids, dtype=object), "source_id": obj(source.id), "name": np.array(names, dtype=object),
        "species_hint": obj(None), "state": cols["state"][kept], "label": obj(None),
        "elements_json": cols["elements_json"][kept], "charge": cols["charge"][kept].astype(np.int64),
        "kind": obj("polynomial"), "form": obj("nasa7"), "file": obj(rel), "line": line,
        "t_low_k": t_low, "t_high_k": t_high, "stated_dfh_j_mol": cols["dfh"][kept].astype(float),
        "stated_molar_mass_g_mol": cols["molar_mass"][kept].astype(float),
        "date_code": cols["date_code"][kept]}, columns=list(RECORD_COLUMNS))
    # two segments per record, lower range first: canonical form (thermo.from_nasa7)
    coef = from_nasa7(np.stack([cols["lower"][kept], cols["upper"][kept]], axis=1).reshape(2 * n_rec, 7))
    seg = {"record_id": np.repeat(np.array(rids, dtype=object), 2), "segment": np.tile(np.arange(2, dtype=np.int64), n_rec),
           "t_low_k": np.stack([t_low, t_mid], axis=1).ravel(), "t_high_k": np.stack([t_mid, t_high], axis=1).ravel()}
    seg.update({c: coef[:, k] for k, c in enumerate(COEF_COLUMNS)})
    seg["line"] = np.repeat(line, 2)
    return ReadResult(n_read=n_read, records=records, segments=pd.DataFrame(seg, columns=list(SEGMENT_COLUMNS)),
                      rejected=frame(rejected, REJECTED_COLUMNS))
