"""Shared helpers for the reader tests."""
from __future__ import annotations

from pathlib import Path

import pytest

from pipeline.ingest import PRIMARY_FRAME
from pipeline.manifest import Source

DATA = Path(__file__).resolve().parents[1] / "data" / "ingest"


def source(fmt: str, sid: str = "s", **kw) -> Source:
    return Source(id=sid, path="x", format=fmt, **kw)


def accepted(result, fmt: str) -> int:
    """Accepted input records in the format's primary frame (segments for shomate)."""
    primary = PRIMARY_FRAME[fmt]
    return len(result.segments if primary == "shomate_rows" else getattr(result, primary))


def assert_accounted(result, fmt: str) -> None:
    """Nothing lost: records read = accepted + rejected."""
    assert result.n_read == accepted(result, fmt) + len(result.rejected), \
        (result.n_read, accepted(result, fmt), len(result.rejected))


@pytest.fixture
def data_dir() -> Path:
    return DATA
