"""The report in a real browser: headless Chromium opens it from the folder, every image loads, the
console stays clean and the study's key numbers are on the page."""

from __future__ import annotations

import shutil
import time

import pandas as pd
import pytest
from report_browser import Browser, available

pytestmark = pytest.mark.browser


@pytest.mark.skipif(not available(), reason="chromium and chromedriver are not installed")
def test_report_opens_in_headless_chromium(built, tmp_path):
    root, result = built
    browser = Browser()
    try:
        browser.open(result.index.as_uri())
        deadline = time.time() + 20
        while browser.script("return document.readyState;") != "complete" and time.time() < deadline:
            time.sleep(0.1)
        images = browser.script(
            "return Array.from(document.images).map(i => ({src: i.src.slice(0, 40), complete: i.complete,"
            " w: i.naturalWidth, h: i.naturalHeight}));")
        text = browser.script("return document.body.innerText;")
        shot = tmp_path / "report.png"
        browser.screenshot(shot)
        console = browser.console()
        # the same checks see a broken page: a missing picture and a console error
        bad = tmp_path / "bad.html"
        bad.write_text('<html><body><img src="missing.png"><script>console.error("boom")</script></body></html>')
        browser.open(bad.as_uri())
        broken = browser.script("return Array.from(document.images).map(i => i.naturalWidth);")
        bad_console = browser.console()
    finally:
        browser.close()
    assert len(images) == len(result.figures) >= 9
    assert all(i["complete"] and i["w"] > 0 and i["h"] > 0 for i in images), images
    errors = [m for m in console if m.get("level") == "SEVERE"]
    assert errors == []
    assert broken == [0] and any("boom" in m.get("message", "") for m in bad_console)
    assert shot.read_bytes()[:8] == b"\x89PNG\r\n\x1a\n" and shot.stat().st_size > 20_000
    shutil.copy(shot, result.index.parent / "browser-check.png")  # kept beside the report for a person to look at
    unc = pd.read_csv(root / "results" / "uncertainty.csv")
    dp = unc[unc.quantity == "dp"]
    for row in dp.itertuples():
        # the numbers as the analysis table holds them, printed to 4 significant digits
        assert f"{row.order:.4g}" in text and f"{row.extrapolated:.4g}" in text and f"{row.U:.4g}" in text
    assert "Verification is not validation" in text
