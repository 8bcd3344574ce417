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

        if not _ID.match(self.id or ""):
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

    def __post_init__(self):
        if not (isinstance(self.reference_pressure_bar, (int, float)) and self.reference_pressure_bar > 0):
            raise InputError("sources.toml", None, f"reference_pressure_bar = {self.reference_pressure_bar!r}",
                             "a positive pressure in bar", "write e.g. 1.0")
        if self.reference_temperature_k != T_REF:
            raise InputError("sources.toml", None,
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


def _header_lines(text: str) -> list[int]:
    return [i + 1 for i, line in enumerate(text.splitlines()) if line.strip().startswith("[[source]]")]


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
    text = mpath.read_text(encoding="utf-8")
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
    unknown = set(db_doc) - _DATABASE_KEYS
    if unknown:
        raise InputError("sources.toml", None, f"unknown key(s) {sorted(unknown)} in [database]",
                         "one of " + ", ".join(sorted(_DATABASE_KEYS)), "correct the spelling")
    database = Database(**db_doc)
    lines = _header_lines(text)
    sources: list[Source] = []
    seen: dict[str, int] = {}
    entries = doc.get("source", [])
    if not isinstance(entries, list):
        raise InputError("sources.toml", None, "[source] as a single table", "[[source]] array entries",
                         "write each source as [[source]]")
    for i, entry in enumerate(entries):
        line = lines[i] if i < len(lines) else 0
        unknown = set(entry) - _SOURCE_KEYS
        if unknown:
            raise InputError("sources.toml", line, f"unknown key(s) {sorted(unknown)}",
                             "one of " + ", ".join(sorted(_SOURCE_KEYS)), "correct the spelling or remove the key")
        for req in ("id", "path", "format"):
            if req not in entry:
                raise InputError("sources.toml", line, f"a [[source]] without {req!r}",
                                 "id, path and format in every source", f"add {req} = \"…\"")
        kw = dict(entry)
        kw.setdefault("reference_pressure_bar", database.reference_pressure_bar)
        src = Source(line=line, **kw)
        if src.id in seen:
            raise InputError("sources.toml", line, f"duplicate id {src.id!r} (first on line {seen[src.id]})",
                             "unique source ids", "rename one of them")
        seen[src.id] = line
        target = (raw / src.path).resolve()
        if not target.is_relative_to(raw.resolve()):
            raise InputError("sources.toml", line, f"path {src.path!r} outside the raw folder",
                             "a path inside the manifest's folder", "move the file into raw/")
        if not target.is_file():
            raise InputError("sources.toml", line, f"path {src.path!r} that does not exist",
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
