"""The example study end to end (``twofold example --quick``) and its report in a real browser."""

from __future__ import annotations

import json
import os
import shutil
from pathlib import Path

import pytest
from twofold.experiments.cli import main

ARTIFACTS = Path(__file__).resolve().parent.parent / "test-artifacts"
CHROMIUM = shutil.which("chromium") or shutil.which("chromium-browser")
SECTIONS = (
    "verdict",
    "summary",
    "audit",
    "agreement",
    "participants",
    "irt",
    "errors",
    "consistency",
    "robustness",
    "factors",
    "effort",
    "methods",
    "references",
    "software",
    "cautions",
)


@pytest.fixture(scope="module")
def example(tmp_path_factory):
    out = tmp_path_factory.mktemp("ex") / "study"
    assert main(["example", "--quick", "--out", str(out), "--workers", "1"]) == 0
    return out


def test_example_writes_every_stage(example):
    assert (example / "bank" / "items.jsonl").exists()
    assert (example / "results" / "audit.json").exists()
    assert len(list((example / "forms").glob("F*.json"))) == 4
    humans = list((example / "logs" / "simulated").glob("S*.csv"))
    machines = list((example / "logs" / "machine").glob("*.csv"))
    assert len(humans) == 16
    assert {p.stem.rsplit("-s", 1)[0] for p in machines} == {"thorough", "hasty", "uneven"}
    summary = json.loads((example / "results" / "summary.json").read_text())
    assert summary["synthetic_respondents"] == 16
    failed = {p: v for p, v in summary["parts"].items() if v["status"] != "ok"}
    assert set(failed) <= {"factors"}, failed  # factor effects need more items than --quick has
    assert summary["verdict"], "the verdict is in summary.json for scripts"
    for name in ("verdict", "agreement", "irt", "errors", "consistency", "robustness", "effort"):
        for ext in ("svg", "pdf", "png"):
            assert (example / "report" / "figures" / f"{name}.{ext}").exists(), (name, ext)


def test_example_refuses_a_non_empty_folder(example, capsys):
    assert main(["example", "--quick", "--out", str(example)]) == 2
    err = capsys.readouterr().err
    assert "folder exists and is not empty" in err
    assert "Traceback" not in err


def test_report_is_self_contained_and_marks_synthetic_data(example):
    page = (example / "report" / "report.html").read_text("utf-8")
    assert "http://" not in page.replace("http://www.w3.org", "")
    assert "https://" not in page
    assert 'id="synthetic-banner"' in page
    for sec in SECTIONS:
        assert f'data-section="{sec}"' in page


@pytest.mark.browser
def test_report_renders_in_a_headless_browser(example):
    if CHROMIUM is None:
        if os.environ.get("CI"):
            pytest.fail("chromium is not installed (CI installs it in .ci/run)")
        pytest.skip("chromium not installed: apt-get install chromium")
    from playwright.sync_api import sync_playwright

    ARTIFACTS.mkdir(exist_ok=True)
    with sync_playwright() as pw:
        browser = pw.chromium.launch(
            executable_path=CHROMIUM,
            args=[
                "--no-sandbox",
                "--disable-gpu",
                "--disable-background-networking",
                "--disable-component-update",
                "--disable-sync",
                "--no-first-run",
            ],
        )
        try:
            page = browser.new_page(viewport={"width": 1280, "height": 900})
            messages: list[str] = []
            page.on(
                "console",
                lambda m: (
                    messages.append(f"{m.type}: {m.text}")
                    if m.type in ("error", "warning")
                    else None
                ),
            )
            page.on("pageerror", lambda e: messages.append(f"pageerror: {e}"))
            failed: list[str] = []
            page.on("requestfailed", lambda r: failed.append(r.url[:80]))
            page.goto((example / "report" / "report.html").as_uri(), wait_until="load")
            widths = page.evaluate(
                "Array.from(document.images).map(i => [i.complete, i.naturalWidth])"
            )
            found = page.evaluate(
                "Array.from(document.querySelectorAll('section[data-section]'))"
                ".map(s => s.dataset.section)"
            )
            banner = page.is_visible("#synthetic-banner")
            page.set_viewport_size({"width": 1280, "height": 900})
            overflow = page.evaluate("[document.scrollingElement.scrollWidth, window.innerWidth]")
            wide_tables = page.evaluate(
                "Array.from(document.querySelectorAll('.tablewrap'))"
                ".filter(e => e.scrollWidth > e.clientWidth + 1)"
                ".map(e => e.parentElement.dataset.table)"
            )
            first = page.evaluate(
                "document.querySelector('main section[data-section]').dataset.section"
            )
            page.screenshot(path=str(ARTIFACTS / "report-1280.png"), full_page=True)
        finally:
            browser.close()
    assert messages == []
    assert failed == []
    assert len(widths) >= 7
    assert all(done and w > 0 for done, w in widths), widths
    assert set(SECTIONS) <= set(found)
    assert banner
    assert first == "verdict"
    assert overflow[0] <= overflow[1], overflow  # no horizontal scrolling at 1280 px
    assert wide_tables == []  # every table wraps inside its box


def test_report_shows_notes_beside_tables_and_links_full_csvs(example):
    page = (example / "report" / "report.html").read_text("utf-8")
    notes = (example / "results" / "notes.csv").read_text("utf-8")
    import csv
    import io

    tables = {row["table"] for row in csv.DictReader(io.StringIO(notes))}
    assert tables  # --quick's small families always leave doubts (few errors, small groups)
    for table in tables:  # each table's doubts are shown beside it
        assert f'aria-label="notes on {table}"' in page, table
    assert "Showing 12 of" in page and "irt_items.csv" in page
    assert "reference levels: group: human" in page
    assert 'id="references"' in page and "Bock, R. D., &amp; Aitkin, M. (1981)" in page
    assert "n_boot = 200" in page  # --quick runs 200 resamples
