"""CSV files as frames of text cells, with line numbers, for the column-oriented readers.

The CSV readers (shomate-csv, table-csv, reactions-csv) share one pattern: read the rows
with their line numbers (:func:`csvutil.read_rows`), put aside rows that are not CSV or
have more fields than the header, and convert whole columns at once to numbers, recording
for each row the first cell that is not a number. Rejections are collected per row with
the reason; a row is rejected once, with its first problem.
"""
from __future__ import annotations

import re
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np
import pandas as pd

from ..errors import InputError
from ..units import split_header
from .csvutil import is_csv_error, read_rows


@dataclass
class CsvFrame:
    """Text cells of one CSV file (one column per header name, lower-cased, stripped).

    ``cells`` holds the rows that have the header's shape, indexed 0..n-1, with columns
    ``_line`` (file line) and ``_raw`` (the line as written). ``reasons`` maps a row's
    index to the reason it is rejected (first problem wins).
    """

    rel: str
    headers: list[str]                 # as written
    names: list[str]                   # lower-cased, units stripped
    units: dict[str, str | None]       # name → bracket unit (None when absent)
    cells: pd.DataFrame
    early_rejects: list[tuple[int, str, str]] = field(default_factory=list)  # (line, raw, reason)
    reasons: dict[int, str] = field(default_factory=dict)
    n_rows: int = 0

    def reject(self, mask, reason) -> None:
        """Reject rows where ``mask`` is true (unless already rejected). ``reason`` is a
        string or a Series of strings aligned with ``cells``."""
        mask = np.asarray(mask, dtype=bool)
        for i in np.flatnonzero(mask):
            idx = self.cells.index[i]
            if idx not in self.reasons:
                self.reasons[idx] = reason if isinstance(reason, str) else str(reason.iloc[i])

    @property
    def ok(self) -> np.ndarray:
        """Rows not rejected so far."""
        return ~self.cells.index.isin(list(self.reasons))

    def has(self, name: str) -> bool:
        return name in self.names

    def text(self, name: str) -> pd.Series:
        """Stripped text of a column ('' when the column is absent or the cell empty)."""
        if name not in self.cells:
            return pd.Series("", index=self.cells.index, dtype=object)
        return self.cells[name]

    def numbers(self, name: str, what: str, *, required: bool, fix: str) -> pd.Series:
        """Column ``name`` as float (NaN when empty); rejects rows whose cell is not a
        finite number, and rows with an empty cell when ``required``."""
        txt = self.text(name)
        val = pd.to_numeric(txt.where(txt != "", None), errors="coerce").astype(float)
        bad = (txt != "") & ~np.isfinite(val.to_numpy())
        if bad.any():
            reason = ("column " + self.header_of(name) + " = " + txt.map(repr)
                      + f": not a finite number ({what}) — fix: {fix}")
            self.reject(bad.to_numpy(), reason)
        if required:
            self.reject((txt == "").to_numpy(), f"column {self.header_of(name)} is empty but "
                        f"required ({what}) — fix: {fix}")
        return val.where(~bad)

    def header_of(self, name: str) -> str:
        return repr(self.headers[self.names.index(name)]) if name in self.names else repr(name)

    def rejected_rows(self, source_id: str) -> list[dict]:
        """Rejected rows (early ones and per-row reasons) as ``rejected`` dicts."""
        from .base import rejected_row

        out = [rejected_row(source_id, self.rel, line, raw, reason)
               for line, raw, reason in self.early_rejects]
        for idx, reason in self.reasons.items():
            out.append(rejected_row(source_id, self.rel, int(self.cells.at[idx, "_line"]),
                                    str(self.cells.at[idx, "_raw"]), reason))
        return out


def load(path: Path, rel: str, *, fmt: str, allowed: tuple[str, ...], required: tuple[str, ...],
         example_header: str) -> CsvFrame:
    """Read a CSV file into a :class:`CsvFrame`, checking its header.

    Raises
    ------
    InputError
        No header, a duplicate, unknown or missing required column (line 1, with the fix).
    """
    plain = _read_plain(path)
    header, rows = plain[0], None
    if plain[0] is None:
        header, rows = read_rows(path)
    if not header:
        raise InputError(rel, 1, "no header line", f"a {fmt} header", f"start the file with {example_header}")
    split = [split_header(h) for h in header]
    names = [n.lower() for n, _ in split]
    dup = sorted({n for n in names if names.count(n) > 1})
    if dup:
        raise InputError(rel, 1, f"column(s) {dup} more than once", "each column once",
                         "remove the duplicate column")
    unknown = [h for h, n in zip(header, names) if n not in allowed]
    if unknown:
        raise InputError(rel, 1, f"unknown column(s) {unknown}",
                         f"{fmt} columns among: " + ", ".join(allowed),
                         "correct the spelling or remove the column (typos must not pass silently)")
    missing = [c for c in required if c not in names]
    if missing:
        raise InputError(rel, 1, f"header without column(s) {missing}",
                         f"the required {fmt} columns " + ", ".join(required),
                         f"add them, e.g. {example_header}")
    width = len(names)
    if rows is None:
        cells, early, n_rows = _plain_cells(plain[1], plain[2], names)
        return CsvFrame(rel=rel, headers=[h.strip() for h in header], names=names,
                        units={n: u for n, (_, u) in zip(names, split)}, cells=cells,
                        early_rejects=early, n_rows=n_rows)
    early, good = [], []
    for row in rows:
        fields = row[1]
        if len(fields) == width and not is_csv_error(fields):
            good.append(row)
        elif is_csv_error(fields):
            early.append((row[0], row[2], f"CSV syntax: {fields[1]} — fix: quote fields that hold "
                                          "commas or quotes"))
        elif len(fields) > width:
            early.append((row[0], row[2], f"{len(fields)} fields but the header has {width} — "
                                          "fix: quote keys with commas, e.g. \"C(cr,graphite)\""))
        else:
            good.append((row[0], fields + [""] * (width - len(fields)), row[2]))
    if good:
        # column by column: strip every cell (str.strip, as written), then one frame
        lines, fields, raws = zip(*good)
        columns = {"_line": list(lines), "_raw": list(raws)}
        for name, col in zip(names, zip(*fields)):
            columns[name] = list(map(str.strip, col))
        cells = pd.DataFrame(columns)
    else:
        cells = pd.DataFrame({c: pd.Series(dtype=object) for c in ["_line", "_raw"] + names})
    return CsvFrame(rel=rel, headers=[h.strip() for h in header], names=names,
                    units={n: u for n, (_, u) in zip(names, split)}, cells=cells,
                    early_rejects=early, n_rows=len(rows))


#: Characters that make a file take the general (csv module) path: quotes and NUL change
#: how fields split; the others are line breaks for str.splitlines but not for csv.
_NOT_PLAIN = re.compile('["\x00\x0b\x0c\x1c-\x1f\x7f]|\r(?!\n)')


def _read_plain(path: Path):
    """(header, data lines, their line numbers) of a *plain* CSV file — ASCII, no quote,
    no NUL, no exotic line break — read with Arrow string kernels; (None, None, None)
    otherwise. For such a file, splitting each line at every comma is exactly what the csv
    module does, so the result equals :func:`csvutil.read_rows`: blank lines (every field
    empty or spaces) and lines whose first field starts with '#' are skipped, the first
    remaining line is the header."""
    import pyarrow as pa
    import pyarrow.compute as pc

    text = path.read_bytes().decode("utf-8-sig", errors="replace")
    if not text.isascii() or _NOT_PLAIN.search(text):
        return None, None, None
    lines = pa.array(text.splitlines(), pa.string())
    if not len(lines):
        return None, None, None
    blank = pc.equal(pc.ascii_trim_whitespace(pc.replace_substring(lines, ",", "")), "")
    first = pc.list_element(pc.split_pattern(lines, ",", max_splits=1), 0)
    comment = pc.starts_with(pc.ascii_ltrim_whitespace(first), "#")
    keep = np.flatnonzero(~(blank.to_numpy(zero_copy_only=False) | comment.to_numpy(zero_copy_only=False)))
    if not len(keep):
        return None, None, None
    header = [f.strip() for f in lines[int(keep[0])].as_py().split(",")]
    data = keep[1:]
    return header, lines.take(pa.array(data, pa.int64())), data + 1


def _plain_cells(lines, line_no: np.ndarray, names: list[str]):
    """Cells frame, early rejects and row count of a plain file (see :func:`_read_plain`);
    the same frame ``load`` builds from ``read_rows``."""
    import pyarrow as pa
    import pyarrow.compute as pc

    width = len(names)
    n_fields = pc.add(pc.count_substring(lines, ","), 1).to_numpy(zero_copy_only=False)
    over = n_fields > width
    early = [(int(ln), raw, f"{k} fields but the header has {width} — fix: quote keys with commas, "
                            "e.g. \"C(cr,graphite)\"")
             for ln, raw, k in zip(line_no[over], lines.filter(pa.array(over)).to_pylist(), n_fields[over])]
    ok = ~over
    good = lines.filter(pa.array(ok))
    short = width - n_fields[ok]
    if (short > 0).any():       # pad missing trailing fields with empty ones
        pad = pa.array(["," * int(k) for k in short], pa.string())
        good = pc.binary_join_element_wise(good, pad, "")
    lst = pc.split_pattern(good, ",")
    columns = {"_line": line_no[ok].astype(np.int64), "_raw": pd.array(lines.filter(pa.array(ok)), dtype="str")}
    for j, name in enumerate(names):
        columns[name] = pd.array(pc.ascii_trim_whitespace(pc.list_element(lst, j)), dtype="str")
    return pd.DataFrame(columns), early, len(line_no)


def species_keys(cf: CsvFrame, column: str = "species") -> pd.DataFrame:
    """Parse the species-key column once per distinct key.

    Returns a frame aligned with ``cf.cells``: ``key`` (normalised), ``state``, ``label``,
    ``elements_json`` (electrons excluded) and ``charge``; rows whose key cannot be parsed
    (no state, unknown state or element) are rejected with the reason.
    """
    import json

    from ..formula import FormulaError, parse_formula, parse_key

    txt = cf.text(column)
    info: dict[str, tuple] = {}
    for key in pd.unique(txt):
        try:
            sk = parse_key(key)
            f = parse_formula(sk.formula)
            info[key] = (sk.key, sk.state, sk.label,
                         json.dumps({k: v for k, v in f.elements.items() if k != "e"}, sort_keys=True),
                         f.charge, None)
        except FormulaError as exc:
            info[key] = (None, None, None, None, None, f"species key {exc}" if key else
                         f"column {cf.header_of(column)} is empty — fix: write the species key, "
                         "e.g. H2O(g)")
    out = pd.DataFrame([info[k] for k in txt], index=cf.cells.index,
                       columns=["key", "state", "label", "elements_json", "charge", "error"])
    bad = out["error"].notna()
    if bad.any():
        cf.reject(bad.to_numpy(), out["error"].fillna(""))
    return out
