"""The HTML report in a real browser: Debian's Chromium, headless, driven by Selenium through
Debian's chromedriver (installed by .ci/run).  A screenshot is written to the test's folder
and its path printed."""

from __future__ import annotations

import re
import shutil
from pathlib import Path

import pytest

from tests.conftest import SAMPLES, run_cli

CHROMIUM = shutil.which("chromium") or shutil.which("chromium-browser")
CHROMEDRIVER = shutil.which("chromedriver")


def _report(tmp_path: Path, *args: str) -> Path:
    out = tmp_path / "report.html"
    result = run_cli("scan", str(SAMPLES / "two_stage_amp.sp"), "--probe", "out", "--format", "html", "-o", str(out), *args)
    assert result.returncode == 0, result.stderr
    return out


def test_report_is_self_contained(tmp_path):
    text = _report(tmp_path).read_text()
    # nothing fetched: no external script, style, image or font (SVG namespaces are names, not fetches)
    assert not re.search(r"""(src|href)\s*=\s*["']https?:""", text)
    assert "<link" not in text and "@import" not in text and not re.search(r"url\(\s*['\"]?https?:", text)
    assert "<svg" in text and "<script>" in text and "never replace full simulation" in text


def test_netlist_text_is_escaped(tmp_path):
    path = tmp_path / "evil.sp"
    path.write_text("<script>alert(1)</script> title\nV1 a 0 dc 0 ac 1\nR1 a b 1k\nC<b> b 0 1p\n")
    out = tmp_path / "evil.html"
    result = run_cli("scan", str(path), "--format", "html", "-o", str(out))
    assert result.returncode == 0, result.stderr
    text = out.read_text()
    assert "<script>alert(1)</script>" not in text and "&lt;script&gt;alert(1)&lt;/script&gt;" in text
    assert "c&lt;b&gt;" in text


@pytest.fixture(scope="module")
def browser():
    if not (CHROMIUM and CHROMEDRIVER):
        pytest.fail("Debian's chromium and chromium-driver are needed (apt-get install -y chromium chromium-driver; "
                    ".ci/run installs them)")
    from selenium import webdriver
    from selenium.webdriver.chrome.service import Service

    options = webdriver.ChromeOptions()
    options.binary_location = CHROMIUM
    for flag in ("--headless=new", "--no-sandbox", "--disable-gpu", "--window-size=1300,2200"):
        options.add_argument(flag)
    driver = webdriver.Chrome(service=Service(CHROMEDRIVER), options=options)
    yield driver
    driver.quit()


def _column(driver, table_id: str, key: str) -> list[str]:
    from selenium.webdriver.common.by import By

    table = driver.find_element(By.ID, table_id)
    headers = [th.get_attribute("data-key") for th in table.find_elements(By.CSS_SELECTOR, "thead th")]
    j = headers.index(key)
    return [row.find_elements(By.TAG_NAME, "td")[j].get_attribute("data-v") or row.find_elements(By.TAG_NAME, "td")[j].text
            for row in table.find_elements(By.CSS_SELECTOR, "tbody tr")]


def test_report_in_a_headless_browser(tmp_path, browser):
    from selenium.webdriver.common.by import By

    report = _report(tmp_path)
    browser.get(report.as_uri())
    assert browser.find_element(By.TAG_NAME, "body").get_attribute("data-ready") == "yes"  # the script ran
    assert browser.find_elements(By.CSS_SELECTOR, "figure svg")  # the plot, inline
    # sorting: a click on the C header sorts ascending by the value, a second click descending
    header = next(th for th in browser.find_elements(By.CSS_SELECTOR, "#caps-1 thead th")
                  if th.get_attribute("data-key") == "c")
    header.click()
    values = [float(v) for v in _column(browser, "caps-1", "c")]
    assert values == sorted(values) and len(values) > 3
    header.click()
    values = [float(v) for v in _column(browser, "caps-1", "c")]
    assert values == sorted(values, reverse=True)
    # the names follow their rows: the capacitor column is a permutation of the unsorted one
    browser.get(report.as_uri() + "#sort=caps-1:-tau")
    browser.refresh()
    taus = [float(v) for v in _column(browser, "caps-1", "tau")]
    assert taus == sorted(taus, reverse=True)
    shot = tmp_path / "report.png"
    browser.save_screenshot(str(shot))
    assert shot.read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"
    print(f"screenshot of the HTML report: {shot}")


def test_findings_link_to_file_and_line(tmp_path, browser):
    from selenium.webdriver.common.by import By

    netlist = tmp_path / "miller.sp"  # an inverting gain of 100 bridged by 1 pF: a miller-node finding
    netlist.write_text("miller (our own)\nvin in 0 dc 0 ac 1\nrs in g 10k\ncg g 0 10f\ne1 x 0 g 0 -100\n"
                       "ro x out 1k\ncm g out 1p\ncl out 0 10f\n")
    out = tmp_path / "check.html"
    result = run_cli("check", str(netlist), "--format", "html", "-o", str(out))
    assert result.returncode == 1, result.stderr
    browser.get(out.as_uri())
    links = browser.find_elements(By.CSS_SELECTOR, "section li a")
    assert [a.text for a in links] == [f"{netlist}:7"]  # the line of cm, the Miller capacitor
    for a in links:
        href = a.get_attribute("href")
        assert href.startswith("file://") and re.search(r"#L\d+$", href)
        assert re.search(r":\d+$", a.text)
