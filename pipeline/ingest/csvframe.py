"""CSV files as frames of text cells, with line numbers, for the column-oriented readers.

The CSV readers (shomate-csv, table-csv, reactions-csv) share one pattern: read the rows
with their line numbers (:func:`csvutil.read_rows`), put aside rows that are not CSV or
have more fields than the header, and convert whole columns at once to numbers, recording
for each row the first cell that is not a number. Rejections are collected per row with
the reason; a row is rejected once, with its first problem.
"""
from __future__ import annotations

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
    early, good = [], []
    for line, fields, raw in rows:
        if is_csv_error(fields):
            early.append((line, raw, f"CSV syntax: {fields[1]} — fix: quote fields that hold "
                                     "commas or quotes"))
        elif len(fields) > len(names):
            early.append((line, raw, f"{len(fields)} fields but the header has {len(names)} — "
                                     "fix: quote keys with commas, e.g. \"C(cr,graphite)\""))
        else:
            cells = [f.strip() for f in fields] + [""] * (len(names) - len(fields))
            good.append([line, raw] + cells)
    cells = pd.DataFrame(good, columns=["_line", "_raw"] + names) if good else \
        pd.DataFrame({c: pd.Series(dtype=object) for c in ["_line", "_raw"] + names})
    return CsvFrame(rel=rel, headers=[h.strip() for h in header], names=names,
                    units={n: u for n, (_, u) in zip(names, split)}, cells=cells,
                    early_rejects=early, n_rows=len(rows))


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
