"""Findings: the long-format result of every check, with a fixed column order."""
from __future__ import annotations

import hashlib

import numpy as np
import pandas as pd

SEVERITIES = ("error", "warning", "info")
SUBJECT_KINDS = ("species", "reaction", "cycle", "series", "source", "database")

#: Columns a check produces, in order.
CHECK_COLUMNS = ("check_id", "severity", "subject", "subject_kind", "source_id", "t_k",
                 "observed", "expected", "tolerance", "unit", "message", "hint")
#: Columns added by the runner (waivers, fingerprints, history).
FINDING_COLUMNS = CHECK_COLUMNS + ("waived", "waiver_reason", "fingerprint", "first_seen_run")

_FLOATS = ("t_k", "observed", "expected", "tolerance")


def make_findings(n: int | None = None, **cols) -> pd.DataFrame:
    """Build a findings frame from scalars and equal-length arrays.

    Every column of :data:`CHECK_COLUMNS` may be given; missing ones are null. Scalars are
    broadcast to the length of the arrays (or to ``n``). Numeric columns become float64.
    """
    unknown = set(cols) - set(CHECK_COLUMNS)
    if unknown:
        raise TypeError(f"unknown finding columns {sorted(unknown)}")
    lengths = {len(v) for v in cols.values() if isinstance(v, (list, tuple, np.ndarray, pd.Series, pd.Index))}
    if n is None:
        if len(lengths) > 1:
            raise ValueError(f"finding columns of different lengths {sorted(lengths)}")
        n = lengths.pop() if lengths else 1
    data = {}
    for c in CHECK_COLUMNS:
        v = cols.get(c)
        if isinstance(v, (pd.Series, pd.Index)):
            v = v.to_numpy()
        if isinstance(v, (list, tuple, np.ndarray)):
            arr = np.asarray(v, dtype=object if c not in _FLOATS else float)
        else:
            arr = np.full(n, v, dtype=object if c not in _FLOATS else float) if v is not None or c in _FLOATS \
                else np.full(n, None, dtype=object)
        data[c] = arr
    df = pd.DataFrame(data, columns=list(CHECK_COLUMNS))
    bad = set(df["severity"].dropna()) - set(SEVERITIES)
    if bad:
        raise ValueError(f"unknown severities {bad}")
    return df


def empty_findings() -> pd.DataFrame:
    return make_findings(n=0)


def fingerprint(df: pd.DataFrame) -> pd.Series:
    """Stable identity of a finding: check, subject, source (not values, not order).

    Stable across reruns and re-ordering of input files, so ``first_seen_run`` and
    "new since the previous run" survive them.
    """
    keys = (df["check_id"].astype(str) + "|" + df["subject"].astype(str) + "|"
            + df["source_id"].fillna("").astype(str))
    return keys.map(lambda k: hashlib.sha256(k.encode()).hexdigest()[:16])
