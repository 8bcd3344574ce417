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
        val = _floats(txt)
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


#: A plain decimal number (what both Arrow's cast and ``float`` read, to the same double)
_DECIMAL = r"^[+-]?(?:[0-9]+(?:[.][0-9]*)?|[.][0-9]+)(?:[eE][+-]?[0-9]+)?$"


def _floats(txt: pd.Series) -> pd.Series:
    """``pd.to_numeric(txt.where(txt != "", None), errors="coerce").astype(float)``, with the
    plain decimal texts read by Arrow's cast (correctly rounded, as pandas and ``float``
    are) and only the others by pandas. A column of integers alone is left to pandas, which
    reads it as int64 first (so ``-0`` is 0.0 there, not -0.0)."""
    import pyarrow as pa
    import pyarrow.compute as pc

    arr = pa.array(txt.array) if isinstance(txt.dtype, pd.StringDtype) and txt.dtype.storage == "pyarrow" \
        else pa.array([t if isinstance(t, str) else None for t in txt], pa.string())
    if isinstance(arr, pa.ChunkedArray):
        arr = arr.combine_chunks()
    plain = pc.fill_null(pc.match_substring_regex(arr, _DECIMAL), False)
    if not len(arr) or pc.all(pc.fill_null(pc.match_substring_regex(arr, "^[+-]?[0-9]+$"), False)).as_py():
        return pd.to_numeric(txt.where(txt != "", None), errors="coerce").astype(float)
    mask = plain.to_numpy(zero_copy_only=False)
    out = np.full(len(arr), np.nan)
    out[mask] = pc.cast(arr.filter(plain), pa.float64()).to_numpy(zero_copy_only=False)
    rest = ~mask & (txt != "").to_numpy(dtype=bool)
    if rest.any():
        out[rest] = pd.to_numeric(txt[rest], errors="coerce").astype(float).to_numpy()
    return pd.Series(out, index=txt.index, name=txt.name)


def load(path: Path, rel: str, *, fmt: str, allowed: tuple[str, ...], required: tuple[str, ...],
         example_header: str) -> CsvFrame:
    """Read a CSV file into a :class:`CsvFrame`, checking its header.

    Raises
    ------
    InputError
        No header, a duplicate, unknown or missing required column (line 1, with the fix).
    """
    plain = _read_plain(path)
    if plain is not None:
        header, rows = plain[0], None
    else:
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
        cells, early, n_rows = _plain_cells(plain, names)
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


#: Characters that make a file take the general (csv module) path: NUL changes how
#: fields split; the others are line breaks for str.splitlines but not for csv (as is a
#: carriage return not followed by a line feed).
_NOT_PLAIN = ("\x00", "\x0b", "\x0c", "\x1c", "\x1d", "\x1e", "\x1f", "\x7f")


#: ASCII whitespace (what ``str.strip`` removes from ASCII text, less the separators that
#: :data:`_NOT_PLAIN` keeps out), as a regular-expression class
_BLANK = r"[ \t\n\v\f\r]"


def _lines_of(text: str):
    """The lines of plain ASCII ``text`` (``str.splitlines``: line breaks ``\n`` or ``\r\n``
    only, see :func:`_read_plain`) as an Arrow string array, split by Arrow."""
    import pyarrow as pa
    import pyarrow.compute as pc

    lines = pc.list_flatten(pc.split_pattern(pa.array([text], pa.string()), "\n"))
    if text.endswith("\n"):
        lines = lines.slice(0, len(lines) - 1)      # splitlines has no empty last line
    if "\r" in text:                                # every '\r' ends a line ('\r\n')
        lines = pc.replace_substring_regex(lines, "\r$", "")
    return lines


def _take(arr, at: np.ndarray):
    """``arr.take(at)``; a slice (no copy) when ``at`` is a run of consecutive indices."""
    import pyarrow as pa

    if len(at) and at[-1] - at[0] == len(at) - 1:
        return arr.slice(int(at[0]), len(at))
    return arr.take(pa.array(at, pa.int64()))


def _quoted_fields(data, width: int):
    """Fields of CSV lines with quotes, or None when one is not plain (see :func:`_read_plain`).

    A line with one quoted field (two quotes, the commonest case) is split around its
    quotes: the text before must be empty or end with a comma, the text after empty or
    start with one, and the line must have ``width`` fields; lines whose quoted field is
    the ``p``-th are read together (the fields before it from the text before, those after
    from the text after). Any other line must match a regular expression of exactly
    ``width`` fields, each quoted or without commas. Returns the untrimmed fields, one Arrow
    string array per column."""
    import pyarrow as pa
    import pyarrow.compute as pc

    pieces = pc.split_pattern(data, '"')
    one = pc.list_value_length(pieces).to_numpy(zero_copy_only=False) == 3
    one_at = np.flatnonzero(one)
    pieces = _take(pieces, one_at)
    before, inside, after = (pc.list_element(pieces, k) for k in range(3))
    at = pc.count_substring(before, ",")
    shaped = pc.and_(pc.and_(pc.or_(pc.equal(before, ""), pc.ends_with(before, ",")),
                             pc.or_(pc.equal(after, ""), pc.starts_with(after, ","))),
                     pc.equal(pc.add(at, pc.count_substring(after, ",")), width - 1))
    at = np.where(shaped.to_numpy(zero_copy_only=False), at.to_numpy(zero_copy_only=False), -1)
    parts, rows = [], []
    for p in np.unique(at[at >= 0]).tolist():
        sel = np.flatnonzero(at == p)
        b, q, a = (_take(x, sel) for x in (before, inside, after))
        b_fields, a_fields = pc.split_pattern(b, ","), pc.split_pattern(a, ",")
        parts.append([pc.list_element(b_fields, j) for j in range(p)] + [q]
                     + [pc.list_element(a_fields, j - p) for j in range(p + 1, width)])
        rows.append(one_at[sel])
    other_at = np.sort(np.r_[np.flatnonzero(~one), one_at[at < 0]]).astype(np.int64)
    if len(other_at):
        field = '(?:"(?P<q{0}>[^"]*)"|(?P<u{0}>[^,"]*))'
        ext = pc.extract_regex(data.take(pa.array(other_at, pa.int64())),
                               "^" + ",".join(field.format(j) for j in range(width)) + "$")
        if ext.null_count:
            return None
        parts.append([pc.binary_join_element_wise(pc.struct_field(ext, f"q{j}"), pc.struct_field(ext, f"u{j}"), "")
                      for j in range(width)])
        rows.append(other_at)
    if len(parts) == 1 and len(rows[0]) == len(data):      # one kind of line, in order
        return [c.cast(pa.string()) for c in parts[0]]
    back = pa.array(np.argsort(np.concatenate(rows), kind="stable"), pa.int64())
    return [pa.concat_arrays([part[j].cast(pa.string()) for part in parts]).take(back) for j in range(width)]


def _read_plain(path: Path):
    """A fast, exact reading of *plain* CSV files with Arrow string kernels, or None.

    Plain: ASCII, no NUL or exotic line break, the header line without quotes, and quotes
    (if any) only around whole fields that hold no quote themselves (``"C(cr,graphite)"``).
    For such a file the csv module splits every line at its commas outside the quotes and
    removes the quotes; this reproduces that (``split_pattern`` without quotes; around the
    quotes of a line with one quoted field; a regular expression of exactly one field per
    header column for the others) and the rules of :func:`csvutil.read_rows`: blank lines
    (every field empty or spaces) and lines whose first field starts with '#' are skipped,
    the first remaining line is the header. A file with any other line (a quote inside a
    field, more or fewer fields than the header in a quoted file) or without any data line
    returns None and is read by the csv module.

    Returns ``(header, columns, line_numbers, raw_lines, n_fields)``: ``columns`` the
    stripped cells per header column (Arrow), ``n_fields`` of each data line.
    """
    import pyarrow as pa
    import pyarrow.compute as pc

    text = path.read_bytes().decode("utf-8-sig", errors="replace")
    if (not text.isascii() or any(ch in text for ch in _NOT_PLAIN)
            or text.count("\r") != text.count("\r\n") or not text or len(text) >= 1 << 31):
        return None
    lines = _lines_of(text)
    quoted = '"' in text
    # blank: only commas and blanks; comment: the first field starts with '#' after blanks
    raw_blank = pc.match_substring_regex(lines, "^(?:" + _BLANK + "|,)*$").to_numpy(zero_copy_only=False)
    raw_comment = pc.match_substring_regex(lines, "^" + _BLANK + "*#").to_numpy(zero_copy_only=False)
    kept = np.flatnonzero(~(raw_blank | raw_comment))
    if not len(kept):
        return None
    h = int(kept[0])
    if pc.any(pc.match_substring(lines.slice(0, h + 1), '"')).as_py():
        return None
    header = [f.strip() for f in lines[h].as_py().split(",")]
    width = len(header)
    idx = np.arange(h + 1, len(lines))
    if quoted:
        idx = idx[~raw_blank[idx]]
        data = _take(lines, idx)
        # lines without a quote split at every comma; the others around their quotes
        has_q = pc.match_substring(data, '"').to_numpy(zero_copy_only=False)
        q_at, u_at = np.flatnonzero(has_q), np.flatnonzero(~has_q)
        plain_lines = _take(data, u_at)
        if (pc.count_substring(plain_lines, ",").to_numpy(zero_copy_only=False) != width - 1).any():
            return None
        lst = pc.split_pattern(plain_lines, ",")
        plain_cols = [pc.list_element(lst, j) for j in range(width)]
        quoted_cols = _quoted_fields(_take(data, q_at), width)
        if quoted_cols is None:
            return None
        if not len(u_at):
            untrimmed = quoted_cols
        else:
            back = pa.array(np.argsort(np.concatenate([u_at, q_at]), kind="stable"), pa.int64())
            untrimmed = [pa.concat_arrays([u.cast(pa.string()), q.cast(pa.string())]).take(back)
                         for u, q in zip(plain_cols, quoted_cols)]
        cols = [pc.ascii_trim_whitespace(c) for c in untrimmed]
        # blank (every field empty) or comment (first field starts with '#'), as csv sees them
        empty = np.ones(len(idx), bool)
        for c in cols:
            empty &= pc.equal(c, "").to_numpy(zero_copy_only=False)
        comment = pc.starts_with(pc.ascii_ltrim_whitespace(untrimmed[0]), "#").to_numpy(zero_copy_only=False)
        keep = ~(empty | comment)
        mask = pa.array(keep)
        cols = [c.filter(mask) for c in cols]
        idx = idx[keep]
        if not len(idx):
            return None         # no data line: the csv module's (empty, object) frame
        return header, cols, idx + 1, data.filter(mask), np.full(len(idx), width)
    idx = idx[~(raw_blank[idx] | raw_comment[idx])]
    if not len(idx):
        return None
    data = _take(lines, idx)
    n_fields = pc.add(pc.count_substring(data, ","), 1).to_numpy(zero_copy_only=False)
    short = np.maximum(width - n_fields, 0)
    padded = data
    if (short > 0).any():       # missing trailing fields are empty ones
        padded = pc.binary_join_element_wise(data, pa.array(["," * int(k) for k in short], pa.string()), "")
    lst = pc.split_pattern(padded, ",")
    cols = [pc.ascii_trim_whitespace(pc.list_element(lst, j)) for j in range(width)]
    return header, cols, idx + 1, data, n_fields


def _plain_cells(plain, names: list[str]):
    """Cells frame, early rejects and row count of a plain file (see :func:`_read_plain`);
    the same frame ``load`` builds from ``read_rows``."""
    import pyarrow as pa

    _, cols, line_no, raw, n_fields = plain
    width = len(names)
    over = n_fields > width
    early = [(int(ln), r, f"{k} fields but the header has {width} — fix: quote keys with commas, "
                          "e.g. \"C(cr,graphite)\"")
             for ln, r, k in zip(line_no[over], raw.filter(pa.array(over)).to_pylist(), n_fields[over])]
    if over.all():              # no row left: the frame load builds for no rows
        cells = pd.DataFrame({c: pd.Series(dtype=object) for c in ["_line", "_raw"] + names})
        return cells, early, len(line_no)
    ok = pa.array(~over)
    columns = {"_line": line_no[~over].astype(np.int64), "_raw": pd.array(raw.filter(ok), dtype="str")}
    for name, col in zip(names, cols):
        columns[name] = pd.array(col.filter(ok), dtype="str")
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
    code, distinct = pd.factorize(txt.to_numpy(object))
    info: dict[str, tuple] = {}
    for key in distinct.tolist():
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
    # one row per distinct key, then taken for every row (a frame of row tuples is slow)
    per_key = list(zip(*(info[k] for k in distinct.tolist()))) if len(distinct) else [()] * 6
    names = ["key", "state", "label", "elements_json", "charge", "error"]
    out = pd.DataFrame({c: np.array(list(v) + [None], dtype=object)[code] for c, v in zip(names, per_key)},
                       index=cf.cells.index)
    out["charge"] = out["charge"].infer_objects()
    bad = out["error"].notna()
    if bad.any():
        cf.reject(bad.to_numpy(), out["error"].fillna(""))
    return out
