"""Fixtures for the report tests: a finished release of the tiny raw folder, and a real
headless browser (Debian's chromium + chromium-driver, installed by .ci/run).

A missing browser is a failure, not a skip: CI installs it, so its absence means the
environment is broken and the report would go untested.
"""
from __future__ import annotations

import shutil
import tempfile
from pathlib import Path

import pytest

from .rawdata import run_cli, write_raw

CHROMIUM = "/usr/bin/chromium"
CHROMEDRIVER = "/usr/bin/chromedriver"


@pytest.fixture(scope="module")
def release(tmp_path_factory):
    """(raw, out, completed process) of one pipeline run on the tiny raw folder."""
    base = tmp_path_factory.mktemp("release")
    raw = write_raw(base / "raw")
    out = base / "curated"
    proc = run_cli("run", "--raw", str(raw), "--out", str(out))
    assert proc.returncode in (0, 1), proc.stderr
    return raw, out, proc


@pytest.fixture(scope="module")
def browser():
    """A headless chromium driven by selenium, logging console messages and network events."""
    for exe in (CHROMIUM, CHROMEDRIVER):
        if not Path(exe).exists():
            pytest.fail(f"{exe} is missing: install Debian's chromium and chromium-driver "
                        "(apt-get install -y chromium chromium-driver; .ci/run does this)")
    from selenium import webdriver
    from selenium.webdriver.chrome.service import Service

    profile = tempfile.mkdtemp(prefix="tl-chromium-")
    opts = webdriver.ChromeOptions()
    opts.binary_location = CHROMIUM
    for flag in ("--headless", "--no-sandbox", "--disable-gpu", "--disable-quic", "--no-first-run",
                 "--disable-background-networking", "--disable-component-update", "--disable-sync",
                 "--disable-dev-shm-usage", f"--user-data-dir={profile}", "--window-size=1280,1000"):
        opts.add_argument(flag)
    opts.set_capability("goog:loggingPrefs", {"browser": "ALL", "performance": "ALL"})
    driver = webdriver.Chrome(service=Service(CHROMEDRIVER), options=opts)
    try:
        yield driver
    finally:
        driver.quit()
        shutil.rmtree(profile, ignore_errors=True)
