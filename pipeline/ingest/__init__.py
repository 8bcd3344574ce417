"""Readers, one module per raw format, and the registry that maps a format to its reader.

A reader is ``read(path, source, rel) -> ReadResult`` (see ``base``). Formats not yet
implemented are absent from ``READERS``; the ingest stage refuses them with a clear error.
"""
from __future__ import annotations

from . import nasa7, nasa9, reactions_csv, shomate_csv, species_csv, table_csv

READERS = {
    "nasa7": nasa7.read,
    "nasa9": nasa9.read,
    "shomate-csv": shomate_csv.read,
    "table-csv": table_csv.read,
    "species-csv": species_csv.read,
    "reactions-csv": reactions_csv.read,
}

#: Which staging frame holds a format's accepted records (for the accounting identity).
PRIMARY_FRAME = {
    "nasa7": "records", "nasa9": "records", "shomate-csv": "shomate_rows",
    "table-csv": "table_points", "species-csv": "species_meta", "reactions-csv": "reactions",
}
