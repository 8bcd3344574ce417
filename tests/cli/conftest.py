import pytest

from tests.curate.rawdata import build_release, standard_raw


@pytest.fixture(scope="package")
def release(tmp_path_factory):
    """One curated release of the standard test database: (run, out folder)."""
    base = tmp_path_factory.mktemp("cli-release")
    run = build_release(standard_raw(base / "raw"), base / "curated")
    return run, base / "curated"
