"""Manifest hygiene: every problem is an InputError naming sources.toml, the line and the fix."""
from __future__ import annotations

from pathlib import Path

import pytest

from pipeline.errors import InputError
from pipeline.manifest import load_manifest, unlisted_files


def _raw(tmp_path: Path, manifest: str, files=("a.nasa7",)) -> Path:
    raw = tmp_path / "raw"
    raw.mkdir()
    for f in files:
        (raw / f).parent.mkdir(parents=True, exist_ok=True)
        (raw / f).write_text("")
    (raw / "sources.toml").write_text(manifest)
    return raw


GOOD = """[database]
name = "test"

[[source]]
id = "a"
path = "a.nasa7"
format = "nasa7"
"""


def test_defaults(tmp_path):
    m = load_manifest(_raw(tmp_path, GOOD))
    (s,) = m.sources
    assert (s.kind, s.priority, s.reference_pressure_bar, s.energy_unit, s.nasa7_layout, s.line) == \
        ("evaluated", 0, 1.0, None, "classic", 4)
    assert m.database.name == "test" and m.database.reference_pressure_bar == 1.0


def test_source_pressure_defaults_to_the_database(tmp_path):
    m = load_manifest(_raw(tmp_path, GOOD.replace('name = "test"', 'name = "t"\nreference_pressure_bar = 1.01325')))
    assert m.sources[0].reference_pressure_bar == 1.01325


def test_unknown_source_key_names_its_line(tmp_path):
    raw = _raw(tmp_path, GOOD + 'citaton = "typo"\n')
    with pytest.raises(InputError) as e:
        load_manifest(raw)
    assert e.value.line == 8
    assert str(e.value) == ("found unknown key(s) ['citaton'] in [[source]] in sources.toml:8, expected one of "
                            "citation, energy_unit, format, id, kind, license, nasa7_layout, path, priority, "
                            "reference_pressure_bar — fix: correct the spelling or remove the key")


def test_unknown_database_key(tmp_path):
    raw = _raw(tmp_path, GOOD.replace('name = "test"', 'name = "test"\nreference_presure_bar = 1'))
    with pytest.raises(InputError) as e:
        load_manifest(raw)
    assert e.value.line == 3 and "reference_presure_bar" in str(e.value)


def test_duplicate_ids(tmp_path):
    raw = _raw(tmp_path, GOOD + '\n[[source]]\nid = "a"\npath = "b.csv"\nformat = "table-csv"\n',
               files=("a.nasa7", "b.csv"))
    with pytest.raises(InputError) as e:
        load_manifest(raw)
    assert e.value.line == 10
    assert "duplicate id 'a' (first on line 4)" in str(e.value)
    assert "fix: rename one of them" in str(e.value)


@pytest.mark.parametrize("path", ["../outside.nasa7", "/etc/hostname", "sub/../../outside.nasa7"])
def test_path_escaping_raw_is_an_error(tmp_path, path):
    (tmp_path / "outside.nasa7").write_text("")
    raw = _raw(tmp_path, GOOD.replace('"a.nasa7"', f'"{path}"'))
    with pytest.raises(InputError) as e:
        load_manifest(raw)
    assert e.value.line == 6
    assert "outside the raw folder" in str(e.value)


def test_missing_listed_file(tmp_path):
    raw = _raw(tmp_path, GOOD, files=())
    with pytest.raises(InputError) as e:
        load_manifest(raw)
    assert str(e.value) == ("found path 'a.nasa7' that does not exist in sources.toml:6, expected an "
                            "existing file — fix: correct the path or add the file")


def test_energy_unit_on_fixed_unit_format(tmp_path):
    raw = _raw(tmp_path, GOOD + 'energy_unit = "kJ"\n')
    with pytest.raises(InputError) as e:
        load_manifest(raw)
    assert e.value.line == 8 and "energy_unit only on table-csv or reactions-csv" in str(e.value)


@pytest.mark.parametrize("line,needle", [
    ('format = "nasa8"', "format = 'nasa8'"),
    ('kind = "guessed"', "kind = 'guessed'"),
    ("priority = 1.5", "priority = 1.5"),
    ("reference_pressure_bar = -1", "reference_pressure_bar = -1"),
    ('energy_unit = "eV"', "energy_unit"),
])
def test_bad_values(tmp_path, line, needle):
    key = line.split(" ")[0]
    text = GOOD.replace('format = "nasa7"', 'format = "table-csv"') if key == "energy_unit" else GOOD
    if key == "format":
        text = text.replace('format = "nasa7"', line)
    else:
        text += line + "\n"
    with pytest.raises(InputError) as e:
        load_manifest(_raw(tmp_path, text))
    assert needle in str(e.value)
    assert e.value.line in (7, 8)


def test_wrong_types_are_input_errors_not_crashes(tmp_path):
    with pytest.raises(InputError) as e:
        load_manifest(_raw(tmp_path, GOOD.replace('id = "a"', "id = 5")))
    assert e.value.line == 5 and "id as a quoted string" in str(e.value)


def test_missing_required_key(tmp_path):
    with pytest.raises(InputError) as e:
        load_manifest(_raw(tmp_path, GOOD.replace('format = "nasa7"\n', "")))
    assert "without 'format'" in str(e.value) and e.value.line == 4


def test_toml_syntax_error_names_the_line(tmp_path):
    with pytest.raises(InputError) as e:
        load_manifest(_raw(tmp_path, GOOD + "id = = 3\n"))
    assert e.value.line == 8 and "invalid TOML" in str(e.value)


def test_missing_manifest(tmp_path):
    with pytest.raises(InputError, match="no manifest"):
        load_manifest(tmp_path)


def test_not_utf8(tmp_path):
    raw = _raw(tmp_path, GOOD)
    (raw / "sources.toml").write_bytes(GOOD.encode() + b'citation = "caf\xe9"\n')
    with pytest.raises(InputError) as e:
        load_manifest(raw)
    assert e.value.line == 8


def test_unlisted_files(tmp_path):
    raw = _raw(tmp_path, GOOD, files=("a.nasa7", "stray.csv", "sub/other.nasa9", ".hidden", "README.md"))
    assert unlisted_files(load_manifest(raw)) == ["stray.csv", "sub/other.nasa9"]
