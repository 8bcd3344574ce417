"""Fuzzing every reader: mutated lines, random bytes, truncated files.

A reader may refuse a whole file with InputError (exit 2, e.g. a broken CSV header); any
other exception is a bug. Whatever it reads, nothing is lost: read = accepted + rejected,
and every rejected row names its file, line and reason.
"""
from __future__ import annotations

import tempfile
from pathlib import Path

import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from pipeline.errors import InputError
from pipeline.ingest import READERS

from .conftest import DATA, accepted, source

SPECIES_CSV = (b'species,aliases,molar_mass_g_mol,reference_element,geometry,cas\n'
               b'N2(g),NITROGEN,28.014,true,linear,7727-37-9\n"C(cr,graphite)",C(gr),12.011,true,,\n'
               b'H2O(g),WATER,18.015,false,nonlinear,\n')
BASES = {
    "nasa7": ((DATA / "mixed.nasa7").read_bytes(), {}),
    "nasa9": ((DATA / "small.nasa9").read_bytes(), {}),
    "shomate-csv": ((DATA / "shomate.csv").read_bytes(), {}),
    "table-csv": ((DATA / "table_cal.csv").read_bytes(), {"energy_unit": "cal"}),
    "reactions-csv": ((DATA / "reactions.csv").read_bytes(), {}),
    "species-csv": (SPECIES_CSV, {}),
}
FUZZ = settings(max_examples=30, deadline=None, derandomize=True,
                suppress_health_check=[HealthCheck.too_slow, HealthCheck.function_scoped_fixture])

_CHUNK = st.one_of(st.binary(max_size=40),
                   st.text(alphabet=" 0123456789.+-EeDd,\"()=/[]abcHOCNgl#!\t", max_size=40).map(str.encode))


@st.composite
def mutated(draw, base: bytes) -> bytes:
    lines = base.split(b"\n")
    for _ in range(draw(st.integers(1, 4))):
        op = draw(st.sampled_from(["replace", "delete", "insert", "flip", "truncate", "duplicate"]))
        i = draw(st.integers(0, max(len(lines) - 1, 0)))
        if not lines:
            lines = [b""]
        if op == "replace":
            lines[i] = draw(_CHUNK)
        elif op == "delete" and len(lines) > 1:
            del lines[i]
        elif op == "insert":
            lines.insert(i, draw(_CHUNK))
        elif op == "flip" and lines[i]:
            k = draw(st.integers(0, len(lines[i]) - 1))
            lines[i] = lines[i][:k] + draw(st.binary(min_size=1, max_size=1)) + lines[i][k + 1:]
        elif op == "truncate":
            text = b"\n".join(lines)
            lines = text[:draw(st.integers(0, len(text)))].split(b"\n")
        elif op == "duplicate":
            lines.insert(i, lines[i])
    return b"\n".join(lines)


def _check(fmt: str, data: bytes, kw: dict) -> None:
    with tempfile.TemporaryDirectory() as d:
        p = Path(d) / "f"
        p.write_bytes(data)
        try:
            r = READERS[fmt](p, source(fmt, **kw), "fuzz/f")
        except InputError as exc:
            assert exc.file == "fuzz/f" and exc.fix
            return
    assert r.n_read == accepted(r, fmt) + len(r.rejected)
    if len(r.rejected):
        assert r.rejected["reason"].map(lambda s: isinstance(s, str) and len(s) > 10).all()
        assert (r.rejected["file"] == "fuzz/f").all()
        assert r.rejected["line"].map(lambda x: int(x) >= 1).all()


@pytest.mark.parametrize("fmt", sorted(BASES))
def test_unmutated_bases_are_accounted(fmt):
    _check(fmt, *BASES[fmt])


@pytest.mark.parametrize("fmt", sorted(BASES))
@FUZZ
@given(data=st.data())
def test_mutated_files(fmt, data):
    base, kw = BASES[fmt]
    _check(fmt, data.draw(mutated(base)), kw)


@pytest.mark.parametrize("fmt", sorted(BASES))
@settings(max_examples=15, deadline=None, derandomize=True)
@given(blob=st.binary(max_size=600))
def test_random_bytes(fmt, blob):
    _check(fmt, blob, BASES[fmt][1])


MANIFEST = "\n".join(
    f'[[source]]\nid = "{fmt}"\npath = "{fmt}.dat"\nformat = "{fmt}"\ncitation = "fuzz"\n'
    + (f'energy_unit = "{kw["energy_unit"]}"\n' if kw else "") for fmt, (_, kw) in sorted(BASES.items()))


@settings(max_examples=12, deadline=None, derandomize=True,
          suppress_health_check=[HealthCheck.too_slow])
@given(data=st.data())
def test_ingest_and_validate_stages_account_for_every_record(data):
    """Through key resolution, the species table, conversion and the schemas: read =
    accepted + rejected per source, and no stage crashes on a damaged file."""
    from pipeline.stages import Run, stage_ingest, stage_validate

    with tempfile.TemporaryDirectory() as d:
        raw = Path(d) / "raw"
        raw.mkdir()
        (raw / "sources.toml").write_text('[database]\nname = "fuzz"\n' + MANIFEST)
        victim = data.draw(st.sampled_from(sorted(BASES)))
        for fmt, (base, _) in BASES.items():
            (raw / f"{fmt}.dat").write_bytes(data.draw(mutated(base)) if fmt == victim else base)
        run = Run(raw=raw, out=Path(d) / "out")
        try:
            stage_ingest(run)
        except InputError:
            return
        stage_validate(run)
    for s in run.source_stats:
        assert s["rows_read"] == s["rows_accepted"] + s["rows_rejected"], s
