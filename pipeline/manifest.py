"""The manifest ``raw/sources.toml``: database settings and one entry per source file.

Definitions are frozen dataclasses validated in ``__post_init__``; every problem raises
:class:`~pipeline.errors.InputError` naming the manifest, the line and the fix.
"""
from __future__ import annotations

import re
import tomllib
from dataclasses import dataclass
from pathlib import Path

from .constants import P_STD_BAR, T_REF
from .errors import InputError

FORMATS = ("nasa7", "nasa9", "shomate-csv", "table-csv", "species-csv", "reactions-csv")
KINDS = ("measured", "computed", "evaluated", "estimated")
ENERGY_UNIT_FORMATS = ("table-csv", "reactions-csv")
DATA_FORMATS = ("nasa7", "nasa9", "shomate-csv", "table-csv", "reactions-csv")

_SOURCE_KEYS = {"id", "path", "format", "kind", "priority", "citation", "license",
                "reference_pressure_bar", "energy_unit", "nasa7_layout"}
_DATABASE_KEYS = {"name", "reference_pressure_bar", "reference_temperature_k"}
_ID = re.compile(r"^[a-z0-9-]+$")


@dataclass(frozen=True)
class Source:
    """One ``[[source]]`` entry. ``path`` is relative to the manifest's folder."""

    id: str
    path: str
    format: str
    kind: str = "evaluated"
    priority: int = 0
    citation: str | None = None
    license: str | None = None
    reference_pressure_bar: float = P_STD_BAR
    energy_unit: str | None = None
    nasa7_layout: str = "classic"
    line: int = 0          # line of the [[source]] header in the manifest

    def __post_init__(self):
        where = ("sources.toml", self.line or None)

        def bad(found, expected, fix):
            raise InputError(where[0], where[1], found, expected, fix)

        for key in ("id", "path", "format", "kind"):
            if not isinstance(getattr(self, key), str):
                bad(f"{key} = {getattr(self, key)!r}", f"{key} as a quoted string", f'write {key} = "…"')
        for key in ("citation", "license", "energy_unit"):
            if getattr(self, key) is not None and not isinstance(getattr(self, key), str):
                bad(f"{key} = {getattr(self, key)!r}", f"{key} as a quoted string", f'write {key} = "…"')
        if not isinstance(self.nasa7_layout, str):
            bad(f"nasa7_layout = {self.nasa7_layout!r}", "classic or tm4513", 'write nasa7_layout = "classic"')
        if not _ID.match(self.id):
            bad(f"id = {self.id!r}", "an id of lower-case letters, digits and '-'", "rename the source")
        if self.format not in FORMATS:
            bad(f"format = {self.format!r}", "one of " + ", ".join(FORMATS), "correct the format")
        if self.kind not in KINDS:
            bad(f"kind = {self.kind!r}", "one of " + ", ".join(KINDS), "correct the kind")
        if self.energy_unit is not None:
            if self.format not in ENERGY_UNIT_FORMATS:
                bad(f"energy_unit on a {self.format} source", "energy_unit only on table-csv "
                    "or reactions-csv (other formats have fixed units)", "remove energy_unit")
            if self.energy_unit not in ("J", "kJ", "cal", "kcal"):
                bad(f"energy_unit = {self.energy_unit!r}", "J, kJ, cal or kcal", "correct the unit")
        if self.nasa7_layout not in ("classic", "tm4513"):
            bad(f"nasa7_layout = {self.nasa7_layout!r}", "classic or tm4513", "correct the layout")
        if self.nasa7_layout != "classic" and self.format != "nasa7":
            bad(f"nasa7_layout on a {self.format} source", "nasa7_layout only on nasa7 sources",
                "remove nasa7_layout")
        if not (isinstance(self.reference_pressure_bar, (int, float))
                and not isinstance(self.reference_pressure_bar, bool)
                and 0 < self.reference_pressure_bar < 1e4):
            bad(f"reference_pressure_bar = {self.reference_pressure_bar!r}",
                "a positive pressure in bar", "write e.g. 1.0 or 1.01325")
        if not isinstance(self.priority, int) or isinstance(self.priority, bool):
            bad(f"priority = {self.priority!r}", "an integer", "write e.g. priority = 10")


@dataclass(frozen=True)
class Database:
    """The ``[database]`` table."""

    name: str = "unnamed database"
    reference_pressure_bar: float = P_STD_BAR
    reference_temperature_k: float = T_REF

    line: int = 0          # line of the [database] header in the manifest

    def __post_init__(self):
        if not isinstance(self.name, str):
            raise InputError("sources.toml", self.line or None, f"name = {self.name!r}",
                             "the database name as a quoted string", 'write name = "…"')
        if not (isinstance(self.reference_pressure_bar, (int, float))
                and not isinstance(self.reference_pressure_bar, bool)
                and 0 < self.reference_pressure_bar < 1e4):
            raise InputError("sources.toml", self.line or None,
                             f"reference_pressure_bar = {self.reference_pressure_bar!r}",
                             "a positive pressure in bar", "write e.g. 1.0")
        if self.reference_temperature_k != T_REF:
            raise InputError("sources.toml", self.line or None,
                             f"reference_temperature_k = {self.reference_temperature_k!r}",
                             "298.15 (the only reference temperature thermoledger supports)",
                             "set reference_temperature_k = 298.15")


@dataclass(frozen=True)
class Manifest:
    """Parsed manifest: database settings, sources, and the folder they live in."""

    root: Path
    database: Database
    sources: tuple[Source, ...]

    def path_of(self, source: Source) -> Path:
        return self.root / source.path


_SOURCE_HEADER = re.compile(r"^\s*\[\[\s*source\s*\]\]")
_ANY_HEADER = re.compile(r"^\s*\[")


def _header_lines(text: str) -> list[int]:
    return [i + 1 for i, line in enumerate(text.splitlines()) if _SOURCE_HEADER.match(line)]


def _key_line(text: str, start: int, key: str) -> int | None:
    """Line of ``key = …`` in the table that starts on line ``start`` (None if not found)."""
    lines = text.splitlines()
    pat = re.compile(r"^\s*[\"']?" + re.escape(str(key)) + r"[\"']?\s*=")
    for i in range(max(start, 1), len(lines) + 1):
        if i > start and _ANY_HEADER.match(lines[i - 1]):
            break
        if pat.match(lines[i - 1]):
            return i
    return start or None


def _table_line(text: str, name: str) -> int:
    for i, line in enumerate(text.splitlines()):
        if re.match(r"^\s*\[\s*" + name + r"\s*\]", line):
            return i + 1
    return 0


def load_manifest(raw: Path) -> Manifest:
    """Read and validate ``raw/sources.toml``.

    Raises
    ------
    InputError
        Missing manifest, TOML syntax, unknown keys, bad values, duplicate ids, a path
        escaping the folder, a listed file that is missing.
    """
    raw = Path(raw)
    mpath = raw / "sources.toml"
    if not mpath.is_file():
        raise InputError(str(mpath), None, "no manifest", "a sources.toml in the raw folder",
                         "create raw/sources.toml (see docs: the manifest) or pass --raw")
    try:
        text = mpath.read_text(encoding="utf-8")
    except UnicodeDecodeError as exc:
        line = mpath.read_bytes()[:exc.start].count(b"\n") + 1
        raise InputError("sources.toml", line, "bytes that are not UTF-8", "a UTF-8 text file",
                         "save the manifest as UTF-8") from None
    try:
        doc = tomllib.loads(text)
    except tomllib.TOMLDecodeError as exc:
        m = re.search(r"line (\d+)", str(exc))
        raise InputError("sources.toml", int(m.group(1)) if m else None, f"invalid TOML ({exc})",
                         "valid TOML", "correct the syntax at that line") from None
    unknown_top = set(doc) - {"database", "source"}
    if unknown_top:
        raise InputError("sources.toml", None, f"unknown table(s) {sorted(unknown_top)}",
                         "only [database] and [[source]]", "remove or rename them")
    db_doc = doc.get("database", {})
    db_line = _table_line(text, "database")
    if not isinstance(db_doc, dict):
        raise InputError("sources.toml", db_line or None, "database that is not a table",
                         "a [database] table", "write [database] on its own line, then its keys")
    unknown = sorted(set(db_doc) - _DATABASE_KEYS)
    if unknown:
        raise InputError("sources.toml", _key_line(text, db_line, unknown[0]),
                         f"unknown key(s) {unknown} in [database]",
                         "one of " + ", ".join(sorted(_DATABASE_KEYS)), "correct the spelling")
    database = Database(line=db_line, **db_doc)
    lines = _header_lines(text)
    sources: list[Source] = []
    seen: dict[str, int] = {}
    entries = doc.get("source", [])
    if not isinstance(entries, list):
        raise InputError("sources.toml", None, "[source] as a single table", "[[source]] array entries",
                         "write each source as [[source]]")
    for i, entry in enumerate(entries):
        line = lines[i] if i < len(lines) else 0
        if not isinstance(entry, dict):
            raise InputError("sources.toml", line or None, f"source entry {entry!r}",
                             "[[source]] tables", "write each source as a [[source]] table")
        unknown = sorted(set(entry) - _SOURCE_KEYS)
        if unknown:
            raise InputError("sources.toml", _key_line(text, line, unknown[0]),
                             f"unknown key(s) {unknown} in [[source]]",
                             "one of " + ", ".join(sorted(_SOURCE_KEYS)), "correct the spelling or remove the key")
        for req in ("id", "path", "format"):
            if req not in entry:
                raise InputError("sources.toml", line, f"a [[source]] without {req!r}",
                                 "id, path and format in every source", f"add {req} = \"…\"")
        kw = dict(entry)
        kw.setdefault("reference_pressure_bar", database.reference_pressure_bar)
        try:
            src = Source(line=line, **kw)
        except InputError as exc:        # point at the offending key's own line
            key = exc.found.split(" ")[0]
            if key in entry:
                exc.line = _key_line(text, line, key)
            raise
        if src.id in seen:
            raise InputError("sources.toml", _key_line(text, line, "id"),
                             f"duplicate id {src.id!r} (first on line {seen[src.id]})",
                             "unique source ids", "rename one of them")
        seen[src.id] = line
        target = (raw / src.path).resolve()
        pline = _key_line(text, line, "path")
        if Path(src.path).is_absolute() or not target.is_relative_to(raw.resolve()):
            raise InputError("sources.toml", pline, f"path {src.path!r} outside the raw folder",
                             "a path relative to the manifest that stays inside its folder",
                             "move the file into the raw folder and give its relative path")
        if not target.is_file():
            raise InputError("sources.toml", pline, f"path {src.path!r} that does not exist"
                             + (" (a folder)" if target.is_dir() else ""),
                             "an existing file", "correct the path or add the file")
        sources.append(src)
    return Manifest(root=raw, database=database, sources=tuple(sources))


def unlisted_files(manifest: Manifest) -> list[str]:
    """Files under the raw folder that no source lists (the manifest itself and dotfiles aside)."""
    listed = {(manifest.root / s.path).resolve() for s in manifest.sources}
    out = []
    for p in sorted(manifest.root.rglob("*")):
        if p.is_file() and p.name != "sources.toml" and not any(part.startswith(".") for part in p.relative_to(manifest.root).parts):
            if p.resolve() not in listed and not p.name.lower().startswith("readme"):
                out.append(str(p.relative_to(manifest.root)))
    return out
