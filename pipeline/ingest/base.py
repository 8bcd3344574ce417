"""What every reader returns, and the column contracts of the staging frames.

A reader turns one raw file into a :class:`ReadResult`: long-format pandas frames in SI
units, one row per accepted item, plus ``rejected`` rows for everything it could not read.
Species keys are *not* resolved by readers (aliases may come from another file): readers
give each record its ``name`` as written, the ``state``/``label`` the record implies, and,
where the format states them, its element counts. :mod:`pipeline.ingest.resolve` then
assigns keys.

Accounting: ``n_read`` counts the file's input records (a nasa7 or nasa9 record is one
species' block of lines, a CSV record is one row — so a Shomate species with three ranges
is three input records, one per segment); ``n_read == accepted + len(rejected)`` must hold
for every reader, with "accepted" counted in the format's primary frame
(``pipeline.ingest.PRIMARY_FRAME``).
"""
from __future__ import annotations

from dataclasses import dataclass, field

import pandas as pd

from ..thermo import COEF_COLUMNS

RECORD_COLUMNS = (
    "record_id",            # f"{source_id}/{name}" + "#k" for a repeat inside one source
    "source_id", "name", "species_hint", "state", "label", "elements_json", "charge",
    "kind",                 # polynomial | table
    "form",                 # nasa7 | nasa9 | shomate | table
    "file", "line",
    "t_low_k", "t_high_k",
    "stated_dfh_j_mol",     # ΔfH°(298.15) stated beside a polynomial (NaN if none)
    "stated_molar_mass_g_mol",
    "date_code",
)
#: ``line``: the segment's first line in the raw file (a Shomate row is its own input
#: record, so a rejected Shomate record is accounted for row by row).
SEGMENT_COLUMNS = ("record_id", "segment", "t_low_k", "t_high_k") + COEF_COLUMNS + ("line",)
TABLE_QUANTITIES = ("cp", "s", "gef", "h_minus_href", "dfh", "dfg", "log_kf")
#: SI column name of each table quantity.
TABLE_SI = {
    "cp": "cp_j_mol_k", "s": "s_j_mol_k", "gef": "gef_j_mol_k",
    "h_minus_href": "h_minus_href_j_mol", "dfh": "dfh_j_mol", "dfg": "dfg_j_mol",
    "log_kf": "log_kf",
}
TABLE_POINT_COLUMNS = (("record_id", "source_id", "line", "t_k")
                       + tuple(TABLE_SI.values())
                       + tuple(f"uncertainty_{v}" for v in TABLE_SI.values()))
SPECIES_META_COLUMNS = ("species", "aliases", "stated_molar_mass_g_mol", "reference_element",
                        "geometry", "cas", "source_id", "file", "line")
REACTION_COLUMNS = ("reaction_id", "source_id", "file", "line", "equation", "stoich_json",
                    "quantity", "t_k", "value", "uncertainty", "unit", "series", "method")
REJECTED_COLUMNS = ("source_id", "file", "line", "raw_text", "reason")


def empty(columns) -> pd.DataFrame:
    return pd.DataFrame({c: pd.Series(dtype="object") for c in columns})


def frame(rows: list[dict], columns) -> pd.DataFrame:
    """Rows → frame with exactly ``columns`` in that order (missing keys → NA)."""
    if not rows:
        return empty(columns)
    df = pd.DataFrame.from_records(rows)
    for c in columns:
        if c not in df:
            df[c] = None
    return df[list(columns)]


@dataclass
class ReadResult:
    """Frames produced from one raw file; any may be empty."""

    n_read: int = 0
    records: pd.DataFrame = field(default_factory=lambda: empty(RECORD_COLUMNS))
    segments: pd.DataFrame = field(default_factory=lambda: empty(SEGMENT_COLUMNS))
    table_points: pd.DataFrame = field(default_factory=lambda: empty(TABLE_POINT_COLUMNS))
    species_meta: pd.DataFrame = field(default_factory=lambda: empty(SPECIES_META_COLUMNS))
    reactions: pd.DataFrame = field(default_factory=lambda: empty(REACTION_COLUMNS))
    rejected: pd.DataFrame = field(default_factory=lambda: empty(REJECTED_COLUMNS))
    #: Notes for the run log / findings (e.g. standard-state conversions applied).
    notes: list[str] = field(default_factory=list)

    @property
    def n_accepted(self) -> int:
        return self.n_read - len(self.rejected)


def rejected_row(source_id: str, file: str, line: int | None, raw_text: str, reason: str) -> dict:
    return {"source_id": source_id, "file": file, "line": line,
            "raw_text": raw_text[:2000], "reason": reason}


def record_lines(form: str, n_segments: int) -> int:
    """Lines one input record of ``form`` occupies in its raw file (for reading it back)."""
    return {"nasa7": 4, "nasa9": 2 + 3 * max(n_segments, 0)}.get(form, 1)


def read_back(root, file: str, line, n_lines: int, cache: dict) -> str:
    """The verbatim text of lines ``line`` .. ``line + n_lines − 1`` of ``root/file``
    (``cache`` maps a path to its lines, so each file is read once); '' if unreadable."""
    from pathlib import Path

    path = Path(root) / str(file)
    if path not in cache:
        try:
            cache[path] = path.read_bytes().decode("utf-8", errors="replace").splitlines()
        except OSError:
            cache[path] = []
    try:
        start = int(line) - 1
    except (TypeError, ValueError):
        return ""
    return "\n".join(cache[path][max(start, 0):start + n_lines])
