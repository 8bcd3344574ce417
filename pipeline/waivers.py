"""Waivers: findings a reviewer has accepted, with a reason, a name and an expiry date.

The waivers file is TOML that the user keeps under version control beside ``raw/``::

    [[waiver]]
    check = "segment.discontinuity"      # a check id (``thermoledger checks`` lists them)
    subject = "CH4(g)"                   # species key, reaction id, cycle:… or series:…
    source = "legacy-2009"               # optional: only this source's finding
    reason = "upper fit replaced in the next release; jump is 0.6 %"
    by = "A. Curator"
    expires = 2027-06-30                 # a TOML date; the waiver stops working after it

A waiver accepts the findings of one check on one subject (of one source when ``source``
is given). A waived finding stays in the tables and the report, marked ``waived`` with the
waiver's reason; it no longer counts towards the exit code. A waiver whose date has passed
waives nothing and is reported (``waiver.expired``); a waiver that matches no finding any
more is reported too (``waiver.stale``), so the file does not silently rot.
"""
from __future__ import annotations

import datetime as dt
import re
import tomllib
from dataclasses import dataclass
from pathlib import Path
from typing import TYPE_CHECKING

from .errors import InputError

if TYPE_CHECKING:
    import pandas as pd

_KEYS = {"check", "subject", "source", "reason", "by", "expires"}
_REQUIRED = ("check", "subject", "reason", "by", "expires")
#: Ids the waiver machinery emits itself; they cannot be waived (a waiver of a waiver).
WAIVER_IDS = ("waiver.expired", "waiver.stale")


@dataclass(frozen=True)
class Waiver:
    """One ``[[waiver]]`` entry, validated on construction.

    ``file`` and ``line`` locate the entry for error messages and findings.
    """

    check: str
    subject: str
    reason: str
    by: str
    expires: dt.date
    source: str | None = None
    file: str = "waivers.toml"
    line: int | None = None

    def __post_init__(self):
        def bad(found, expected, fix):
            raise InputError(self.file, self.line, found, expected, fix)

        for key in ("check", "subject", "reason", "by"):
            v = getattr(self, key)
            if not isinstance(v, str) or not v.strip():
                bad(f"{key} = {v!r}", f"a non-empty string for {key}",
                    f"write {key} = \"…\" in this [[waiver]]")
        if self.source is not None and (not isinstance(self.source, str) or not self.source.strip()):
            bad(f"source = {self.source!r}", "a source id from sources.toml", "correct or remove source")
        # a TOML datetime is a date too (subclass): insist on a plain date
        if not isinstance(self.expires, dt.date) or isinstance(self.expires, dt.datetime):
            bad(f"expires = {self.expires!r}", "a TOML date such as 2027-06-30 (no quotes, no time)",
                "write expires = YYYY-MM-DD")
        from .config import CHECK_TOLERANCES   # the registry's ids, without importing the checks

        if self.check not in CHECK_TOLERANCES:
            bad(f"check = {self.check!r}", "a check id listed by `thermoledger checks`",
                "correct the id, or remove the waiver if the check no longer exists")
        if self.check in WAIVER_IDS:
            bad(f"check = {self.check!r}", "the id of a finding about the data",
                "fix or remove the offending waiver instead of waiving its finding")

    def expired(self, today: dt.date) -> bool:
        """True when the expiry date has passed (a waiver is valid on its expiry day)."""
        return self.expires < today

    @property
    def where(self) -> str:
        return f"{self.file}:{self.line}" if self.line else self.file


def _entry_lines(text: str) -> list[int]:
    return [i + 1 for i, line in enumerate(text.splitlines()) if line.strip().startswith("[[waiver]]")]


def load_waivers(path: Path | str | None) -> tuple[Waiver, ...]:
    """Read and validate a waivers file; ``None`` gives no waivers.

    Raises
    ------
    InputError
        Missing file, TOML syntax, unknown keys, a missing or empty field, a date that is not
        a TOML date, an unknown check id, or the same waiver twice — each naming file and line.
    """
    if path is None:
        return ()
    path = Path(path)
    name = str(path)
    if not path.is_file():
        raise InputError(name, None, "no such file", "a TOML file of [[waiver]] entries",
                         "correct --waivers or create the file")
    text = path.read_text(encoding="utf-8")
    try:
        doc = tomllib.loads(text)
    except tomllib.TOMLDecodeError as exc:
        m = re.search(r"line (\d+)", str(exc))
        raise InputError(name, int(m.group(1)) if m else None, f"invalid TOML ({exc})", "valid TOML",
                         "correct the syntax at that line") from None
    unknown_top = set(doc) - {"waiver"}
    if unknown_top:
        raise InputError(name, None, f"unknown table(s) {sorted(unknown_top)}", "only [[waiver]] entries",
                         "remove or rename them")
    entries = doc.get("waiver", [])
    if not isinstance(entries, list):
        raise InputError(name, None, "[waiver] as a single table", "[[waiver]] array entries",
                         "write each waiver as [[waiver]]")
    lines = _entry_lines(text)
    out: list[Waiver] = []
    seen: dict[tuple, int | None] = {}
    for i, entry in enumerate(entries):
        line = lines[i] if i < len(lines) else None
        unknown = set(entry) - _KEYS
        if unknown:
            raise InputError(name, line, f"unknown key(s) {sorted(unknown)}",
                             "one of " + ", ".join(sorted(_KEYS)), "correct the spelling or remove the key")
        missing = [k for k in _REQUIRED if k not in entry]
        if missing:
            raise InputError(name, line, f"a [[waiver]] without {', '.join(missing)}",
                             "check, subject, reason, by and expires in every waiver",
                             f"add {missing[0]} = … (a reviewer must be able to see who accepted "
                             "what, why, and until when)")
        w = Waiver(file=name, line=line, **entry)
        key = (w.check, w.subject, w.source)
        if key in seen:
            raise InputError(name, line, f"a second waiver of {w.check} on {w.subject}"
                             + (f" [{w.source}]" if w.source else "") + f" (first on line {seen[key]})",
                             "one waiver per check, subject and source", "merge the two entries")
        seen[key] = line
        out.append(w)
    return tuple(out)


def apply_waivers(findings: pd.DataFrame, waivers: tuple[Waiver, ...],
                  today: dt.date | None = None) -> pd.DataFrame:
    """Mark the findings the waivers accept, and add findings about the waivers themselves.

    Parameters
    ----------
    findings : frame with at least ``check_id, subject, source_id`` (CHECK_COLUMNS).
    waivers : from :func:`load_waivers`.
    today : the date expiry is judged against (default: today's local date).

    Returns
    -------
    The findings with ``waived`` (bool) and ``waiver_reason`` set, followed by one
    ``waiver.expired`` finding per expired waiver and one ``waiver.stale`` finding per valid
    waiver that matched nothing. An expired waiver waives nothing.
    """
    import numpy as np
    import pandas as pd

    from .findings import make_findings

    today = today or dt.date.today()
    df = findings.copy()
    df["waived"] = np.zeros(len(df), dtype=bool)
    df["waiver_reason"] = np.full(len(df), None, dtype=object)
    if not waivers:
        return df
    check = df["check_id"].astype(str).to_numpy()
    subject = df["subject"].astype(str).to_numpy()
    source = df["source_id"].fillna("").astype(str).to_numpy()
    waivable = ~np.isin(check, WAIVER_IDS)
    waived = np.zeros(len(df), dtype=bool)
    reasons = np.full(len(df), None, dtype=object)
    extra = []
    for w in waivers:  # one vectorised mask per waiver (a file holds tens, not millions)
        match = waivable & (check == w.check) & (subject == w.subject)
        if w.source is not None:
            match &= source == w.source
        label = f"{w.check} on {w.subject}" + (f" [{w.source}]" if w.source else "")
        if w.expired(today):
            extra.append(dict(
                check_id="waiver.expired", severity="warning",
                subject=f"waiver:{w.check}:{w.subject}", subject_kind="source", source_id=w.source,
                message=(f"the waiver of {label} ({w.where}, by {w.by}) expired on "
                         f"{w.expires.isoformat()}; it waives nothing"
                         + (f" — {int(match.sum())} finding(s) count again" if match.any()
                            else " and matches no finding any more")),
                hint="review the finding again: renew the date with a fresh reason, or remove the waiver"))
            continue
        if not match.any():
            extra.append(dict(
                check_id="waiver.stale", severity="warning",
                subject=f"waiver:{w.check}:{w.subject}", subject_kind="source", source_id=w.source,
                message=f"the waiver of {label} ({w.where}, by {w.by}) matches no finding",
                hint="the problem was fixed or the subject renamed: remove the waiver"))
            continue
        new = match & ~waived
        waived |= match
        reasons[new] = f"{w.reason} ({w.by}, until {w.expires.isoformat()})"
    df["waived"] = waived
    df["waiver_reason"] = reasons
    if extra:
        cols = {k: [e[k] for e in extra] for k in extra[0]}
        more = make_findings(**cols)
        more["waived"] = False
        more["waiver_reason"] = None
        df = pd.concat([df, more[df.columns.intersection(more.columns)]], ignore_index=True)
    return df
