"""CSV reading that keeps line numbers and never loses a row."""
from __future__ import annotations

import csv
import io
from pathlib import Path


def read_rows(path: Path) -> tuple[list[str], list[tuple[int, list[str], str]]]:
    """Header and rows of a CSV file.

    Returns ``(header, rows)`` where each row is ``(line_number, fields, raw_text)``;
    blank lines and lines starting with ``#`` are skipped. Undecodable bytes are replaced
    (the row is then usually rejected by its reader with the reason), never fatal.
    """
    text = path.read_bytes().decode("utf-8-sig", errors="replace")
    raw_lines = text.splitlines()
    reader = csv.reader(io.StringIO(text))
    header: list[str] | None = None
    rows: list[tuple[int, list[str], str]] = []
    while True:
        try:
            fields = next(reader)
        except StopIteration:
            break
        except csv.Error as exc:
            line = reader.line_num
            rows.append((line, ["\x00csv-error", str(exc)], raw_lines[line - 1] if 0 < line <= len(raw_lines) else ""))
            continue
        line = reader.line_num
        # blank (every field empty or spaces) or a comment: skipped
        if not fields or not "".join(fields).strip() or fields[0].lstrip().startswith("#"):
            continue
        raw = raw_lines[line - 1] if 0 < line <= len(raw_lines) else ",".join(fields)
        if header is None:
            header = [f.strip() for f in fields]
            continue
        rows.append((line, fields, raw))
    return header or [], rows


def is_csv_error(fields: list[str]) -> bool:
    return bool(fields) and fields[0] == "\x00csv-error"
