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


MUTATION_PIECES = list("0123456789 .-+EeDdXxGLSCHNOAr\t!é") + [
    "", "  ", "nan", "inf", "1000.000", " 0.00", "CL  1", "E  -1", "    1", "  nan   ", " 1.0D+03"]


def mutate_lines(text: str, rng, columns) -> str:
    """A copy of ``text`` with a few random edits: characters put or inserted at random
    places, lines cut short, extra lines (blank, comment, THERMO, default temperatures, END),
    field-sized pieces placed at the given (0-based) columns."""
    lines = text.splitlines()
    for _ in range(rng.randint(1, 6)):
        i = rng.randrange(len(lines))
        line = lines[i]
        op = rng.random()
        if op < 0.6 and line:
            p, w = rng.randrange(len(line)), rng.choice(MUTATION_PIECES)
            line = line[:p] + w + line[p + len(w):] if rng.random() < 0.8 else line[:p] + w + line[p:]
        elif op < 0.7:
            line = line[:rng.randrange(max(len(line), 1))]
        elif op < 0.8:
            lines.insert(i, rng.choice(["", "! comment", "THERMO", "   300.000  1000.000  5000.000", "END"]))
        elif op < 0.9:
            p = rng.choice(columns)
            line = line[:p] + rng.choice([" " * 8, "   ", "1.0D+03 ", "AR  1", "C   2", "    1"]) + line[p + 5:]
        else:
            del lines[i]
            continue
        lines[i] = line
    return "\n".join(lines) + "\n"


def assert_batch_equal(module, path: Path, src) -> None:
    """A reader with ``module.BATCH`` on (numpy reads the plain records) and off (every record
    by the general parser) gives identical frames: values, dtypes, rejected rows, reasons."""
    import pandas as pd

    fast = module.read(path, src, "x")
    module.BATCH = False
    try:
        general = module.read(path, src, "x")
    finally:
        module.BATCH = True
    assert fast.n_read == general.n_read
    assert fast.notes == general.notes
    for name in ("records", "segments", "rejected"):
        pd.testing.assert_frame_equal(getattr(fast, name).reset_index(drop=True),
                                      getattr(general, name).reset_index(drop=True), check_exact=True)
