"""The angle-domain panel in a real browser at the window widths analysts use (1280 and 1920
pixels): no control label is clipped, and an export that cannot be done says why in the panel.

JupyterLab serves a copy of notebook 03 (with the demo run), headless Chromium runs all cells;
the server recipe is the one of ``tests/test_browser.py`` (imported from there).  A label is
clipped when its text needs more room than its box shows (``scrollWidth > clientWidth``, the
DOM's own measure of overflow; W3C CSSOM View Module, "scrollWidth").
"""

from __future__ import annotations

import re

import pytest

from test_browser import CHROMIUM, FIRST_WAIT_MS, FLAGS, WAIT_MS, open_and_run_all, start_lab

pytestmark = pytest.mark.browser

NOTEBOOK = "03_angle_domain_resampling.ipynb"

CLIPPED_LABELS = """
root => Array.from(root.querySelectorAll(
        '.widget-label, .widget-label-basic, .widget-checkbox label, .widget-button, label, '
        + '.lm-TabBar-tabLabel, .p-TabBar-tabLabel'))
    .filter(e => e.offsetParent !== null && e.textContent.trim())
    .filter(e => e.scrollWidth > e.clientWidth + 1)
    .map(e => e.textContent.trim())
"""


@pytest.fixture()
def lab03(tmp_path):
    """JupyterLab serving notebook 03 with the demo run (see tests/test_browser.py)."""
    yield from start_lab(tmp_path, NOTEBOOK, with_runs=True)


def _open_panel(pw, url, width, notebook=NOTEBOOK, panel=".foldline-angle-panel"):
    browser = pw.chromium.launch(executable_path=str(CHROMIUM), headless=True, args=FLAGS)
    page = open_and_run_all(browser, url, notebook, width=width, height=1000)
    page.wait_for_function(
        """sel => Array.from(document.querySelectorAll(sel + ' img.foldline-figure'))
                 .some(i => i.src && i.complete && i.naturalWidth > 0)""",
        arg=panel, timeout=FIRST_WAIT_MS)
    return browser, page


def test_angle_panel_labels_fit_and_a_failed_export_says_why(lab03, tmp_path):
    from playwright.sync_api import sync_playwright

    with sync_playwright() as pw:
        for width in (1280, 1920):
            browser, page = _open_panel(pw, lab03, width)
            try:
                panel = page.locator(".foldline-angle-panel")
                panel.scroll_into_view_if_needed()
                page.screenshot(path=str(tmp_path / f"angle_{width}.png"))
                clipped = panel.evaluate(CLIPPED_LABELS)
                assert clipped == [], f"clipped at {width} px: {clipped}"
                # An invalid "orders to cut", then "export tables": the reason is shown.
                box = panel.locator(".foldline-cut-orders input")
                box.fill("1, abc")
                box.press("Enter")
                panel.locator("button", has_text="export tables").click()
                status = panel.locator(".foldline-status-box")
                status.get_by_text(re.compile(r"tables not exported \(nothing written\)")).wait_for(
                    timeout=WAIT_MS)
                assert "orders to cut" in status.inner_text()
                page.screenshot(path=str(tmp_path / f"angle_{width}_export.png"))
            finally:
                browser.close()


NOTEBOOK_02 = "02_gear_mesh_vs_fault_band.ipynb"


@pytest.fixture()
def lab02(tmp_path):
    """JupyterLab serving notebook 02 (fold map panel and source editor)."""
    yield from start_lab(tmp_path, NOTEBOOK_02)


def test_fold_map_panel_and_source_editor_labels_fit(lab02, tmp_path):
    from playwright.sync_api import sync_playwright

    with sync_playwright() as pw:
        for width in (1280, 1920):
            browser, page = _open_panel(pw, lab02, width, NOTEBOOK_02, ".foldline-foldmap-panel")
            try:
                page.wait_for_function(
                    """() => Array.from(document.querySelectorAll('.foldline-source-editor img'))
                             .some(i => i.src && i.complete && i.naturalWidth > 0)""",
                    timeout=FIRST_WAIT_MS)
                # The bearing's fields have the longest labels ("pitch diameter (same unit)").
                editor = page.locator(".foldline-source-editor")
                editor.locator("select").first.select_option(label="motor DE (bearing)")
                editor.get_by_text("pitch diameter (same unit)").wait_for(timeout=WAIT_MS)
                page.screenshot(path=str(tmp_path / f"foldmap_{width}.png"))
                for sel in (".foldline-foldmap-panel", ".foldline-source-editor"):
                    panels = page.locator(sel)
                    assert panels.count() >= 1, sel
                    for i in range(panels.count()):
                        panels.nth(i).scroll_into_view_if_needed()
                        clipped = panels.nth(i).evaluate(CLIPPED_LABELS)
                        assert clipped == [], f"{sel} clipped at {width} px: {clipped}"
            finally:
                browser.close()
