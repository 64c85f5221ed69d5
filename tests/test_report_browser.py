"""The demo's HTML report in a real browser: headless Chromium (the system's own, never downloaded).

Checks that the page loads with no request other than the file itself (the Content Security
Policy Level 3 ``default-src 'none'`` is the page's own guard; here the browser's network events
are the oracle), that every variable's table row and chart mark is present and visible, and
saves a full-page screenshot to ``test-output/report.png``; at 420 px width the agreement table's
key columns stay on screen (``test-output/report-narrow.png``).
"""

from __future__ import annotations

import json
import shutil
from pathlib import Path

import pytest
from playwright.sync_api import sync_playwright
from typer.testing import CliRunner

from coderel.cli import app

ROOT = Path(__file__).resolve().parents[1]
CB = ROOT / "sample_codebooks" / "wildlife_encounters.yaml"
OUTPUT = ROOT / "test-output"
#: The demo's decisions, shipped beside the sample codebook.
DECISIONS = ROOT / "sample_decisions" / "wildlife_encounters.xlsx"
#: A phone's width in CSS pixels.
NARROW = 420


def _chromium() -> str | None:
    for name in ("chromium", "chromium-browser", "google-chrome"):
        found = shutil.which(name)
        if found:
            return found
    return "/usr/bin/chromium" if Path("/usr/bin/chromium").exists() else None


def test_demo_report_in_headless_chromium(tmp_path):
    executable = _chromium()
    if executable is None:
        pytest.skip("no Chromium executable found (make browser installs the system package)")

    page_path = tmp_path / "report.html"
    # The page as `coderel report` writes it (with the decisions, so every section is present).
    result = CliRunner().invoke(
        app,
        [
            "report",
            "--codebook",
            str(CB),
            str(ROOT / "demo" / "sheets"),
            "--decisions",
            str(DECISIONS),
            "--replicates",
            "200",
            "--date",
            "2026-12-02",
            "--json",
            "-o",
            str(page_path),
        ],
    )
    assert result.exit_code == 0, result.stderr
    content = json.loads(result.stdout)
    page_url = page_path.resolve().as_uri()

    requests: list[str] = []
    errors: list[str] = []
    with sync_playwright() as p:
        browser = p.chromium.launch(executable_path=executable, args=["--no-sandbox"])
        try:
            page = browser.new_page(viewport={"width": 1280, "height": 900})
            page.on("request", lambda r: requests.append(r.url))
            page.on("pageerror", lambda e: errors.append(str(e)))
            page.goto(page_url, wait_until="load")
            assert len(content["table"]) == 11  # ten variables and one applicability row
            for row in content["table"]:
                assert page.locator(f"#{row['id']}").is_visible(), row["variable"]
                mark = page.locator(f"#{row['chart_id']}")
                assert mark.count() == 1, row["variable"]
                assert mark.is_visible(), row["variable"]
            for panel in content["categories"]:
                if panel["matrix"] is not None:
                    heat = page.locator(f"#{panel['heatmap_id']}")
                    assert heat.is_visible(), panel["variable"]
            for key in ("summary", "agreement", "intervals", "coders", "adjudication", "methods"):
                assert page.locator(f"section#{key}").is_visible(), key
            # The page is no wider than the window: tables scroll inside their own box.
            width = page.evaluate("document.documentElement.scrollWidth")
            assert width <= 1280
            OUTPUT.mkdir(exist_ok=True)
            page.screenshot(path=str(OUTPUT / "report.png"), full_page=True)
            # On a 420 px wide screen the agreement table's key columns (variable, alpha,
            # interval, verdict) stay within the window without scrolling (issue 9, item 16).
            page.set_viewport_size({"width": NARROW, "height": 900})
            for row in content["table"]:
                cells = {
                    "variable": page.locator(f"#{row['id']} th"),
                    "alpha": page.locator(f"#{row['id']} td.key-alpha"),
                    "interval": page.locator(f"#{row['id']} td.key-interval"),
                    "verdict": page.locator(f"#{row['id']} td.key-verdict"),
                }
                for name, cell in cells.items():
                    assert cell.is_visible(), (row["variable"], name)
                    box = cell.bounding_box()
                    assert box is not None, (row["variable"], name)
                    assert box["x"] >= 0, (row["variable"], name, box)
                    assert box["x"] + box["width"] <= NARROW, (row["variable"], name, box)
            page.screenshot(path=str(OUTPUT / "report-narrow.png"))
        finally:
            browser.close()

    others = [u for u in requests if u != page_url and not u.startswith("data:")]
    assert others == []
    assert errors == []
    assert (OUTPUT / "report.png").stat().st_size > 10_000
