"""The HTML report in a real headless browser: it loads with no console error and no
network request, it fits the window without sideways scrolling, its filters hide and show
the right rows, and it carries the plots, the new-since-last-run list and the caution."""
from __future__ import annotations

import json
import re
import shutil

import pytest

from pipeline.report import CAUTION

from .rawdata import findings_json


@pytest.fixture(scope="module")
def page(release, browser):
    raw, out, _ = release
    index = out / "report" / "index.html"
    browser.get("about:blank")
    browser.get_log("browser")  # drop anything logged before this page (the new-tab page)
    browser.get_log("performance")
    browser.get(index.as_uri())
    return browser, findings_json(out), index


def visible_rows(driver, table="findings-table"):
    return driver.execute_script(
        f"return Array.from(document.querySelectorAll('#{table} tbody tr'))"
        ".filter(r => !r.hidden).map(r => r.textContent);")


def choose(driver, select_id, value):
    driver.execute_script(
        "var e = document.getElementById(arguments[0]); e.value = arguments[1];"
        "e.dispatchEvent(new Event('change'));", select_id, value)


def type_text(driver, text):
    driver.execute_script(
        "var e = document.getElementById('f-text'); e.value = arguments[0];"
        "e.dispatchEvent(new Event('input'));", text)


def reset(driver):
    driver.find_element("id", "f-reset").click()


def test_no_console_errors_and_no_network(page):
    driver, _, index = page
    logs = driver.get_log("browser")
    assert [e for e in logs if e["level"] in ("SEVERE", "WARNING")] == []
    urls = []
    for entry in driver.get_log("performance"):
        msg = json.loads(entry["message"])["message"]
        if msg["method"] == "Network.requestWillBeSent":
            urls.append(msg["params"]["request"]["url"])
    assert urls, "the performance log recorded no request at all: the log is not working"
    assert all(u.startswith(("file:", "data:")) for u in urls), urls
    resources = driver.execute_script("return performance.getEntriesByType('resource').map(e => e.name);")
    assert all(u.startswith(("file:", "data:")) for u in resources), resources


def test_file_is_self_contained(page):
    _, _, index = page
    html = index.read_text(encoding="utf-8")
    assert "<link" not in html and "<img" not in html and "@import" not in html
    assert not re.search(r"<script[^>]*\bsrc=", html)
    refs = re.findall(r'\b(?:src|href|xlink:href)="([^"]*)"', html)
    assert all(r.startswith("#") or r.startswith("data:") for r in refs), refs


def test_fits_the_window_without_sideways_scrolling(page):
    driver, _, _ = page
    for width in (1280, 900):
        driver.set_window_size(width, 1000)
        inner, scroll = driver.execute_script(
            "return [window.innerWidth, document.documentElement.scrollWidth];")
        assert scroll <= inner, f"page is {scroll} px wide in a {inner} px window"
    driver.set_window_size(1280, 1000)


def test_filters_hide_and_show_rows(page):
    driver, findings, _ = page
    reset(driver)
    assert len(visible_rows(driver)) == len(findings)
    n_err = sum(f["severity"] == "error" for f in findings)
    assert 0 < n_err < len(findings), "the test data must hold errors and other severities"
    choose(driver, "f-sev", "error")
    rows = driver.execute_script("return Array.from(document.querySelectorAll('#findings-table tbody tr'))"
                                 ".filter(r => !r.hidden).map(r => r.dataset.sev);")
    assert rows == ["error"] * n_err
    count = driver.find_element("id", "f-count").text
    assert count == f"{n_err} of {len(findings)} findings shown"

    reset(driver)
    choose(driver, "f-check", "cp.nonpositive")
    assert len(visible_rows(driver)) == sum(f["check_id"] == "cp.nonpositive" for f in findings) == 1

    reset(driver)
    choose(driver, "f-source", "beta")
    n_beta = sum(f["source_id"] == "beta" for f in findings)
    assert len(visible_rows(driver)) == n_beta
    assert 0 < n_beta < len(findings), "the test data must hold findings of two sources"

    reset(driver)
    type_text(driver, "o2(G)")  # free text is case-insensitive
    shown = visible_rows(driver)
    expected = [f for f in findings if "o2(g)" in " ".join(str(f[k]) for k in ("subject", "message", "hint")).lower()]
    assert len(shown) == len(expected) > 0
    assert all("O2(g)" in r for r in shown)

    type_text(driver, "no finding says this")
    assert visible_rows(driver) == []
    reset(driver)
    assert len(visible_rows(driver)) == len(findings)


def test_summary_link_filters_the_table(page):
    driver, findings, _ = page
    reset(driver)
    link = driver.find_element("css selector", 'a[data-check="segment.discontinuity"][data-sev="error"]')
    link.click()
    n = sum(f["check_id"] == "segment.discontinuity" and f["severity"] == "error" for f in findings)
    assert len(visible_rows(driver)) == n == int(link.text)
    reset(driver)


def test_plots_new_list_and_caution(page, tmp_path):
    driver, findings, _ = page
    species_with_findings = {f["subject"] for f in findings if f["subject_kind"] == "species"}
    titles = driver.execute_script(
        "return Array.from(document.querySelectorAll('section.species h3')).map(h => h.textContent);")
    assert set(titles) == species_with_findings and {"O2(g)", "CO(g)"} <= set(titles)
    n_svg = driver.execute_script("return document.querySelectorAll('section.species svg.plot').length;")
    assert n_svg == len(titles)
    # each plot draws four panels with a line per record of the species (CO: one source)
    labels = driver.execute_script("return document.querySelector('section.species svg').textContent;")
    for panel in ("Cp", "H − H(298.15 K)", "S  [", "G − G(preferred record)"):
        assert panel in labels
    body = driver.find_element("tag name", "body").text
    assert "No previous release" in body  # a first run: nothing to compare with
    assert len(visible_rows(driver, "new-table")) == len(findings)
    assert " ".join(CAUTION.split()[1:6]) in " ".join(body.split())

    height = driver.execute_script("return document.documentElement.scrollHeight;")
    driver.set_window_size(1280, min(height, 7000))
    driver.execute_script("window.scrollTo(0, 0);")
    shot = tmp_path / "report.png"
    assert driver.save_screenshot(str(shot))
    shutil.copy(shot, "/tmp/report-screenshot.png")
    driver.set_window_size(1280, 1000)
