"""The explorer's live figure in a real browser: hover read-out and a zoom with the mouse.

JupyterLab (recipe of ``tests/test_browser.py``) serves a notebook written here: a synthetic
order map with a known line (order 29 +- 0.5 at every speed, amplitude 2; the map's maximum 5
elsewhere) shown by ``MapExplorer`` as an ipympl figure.  The kernel prints where the axes lie on
the figure (pixels) and the limits shown; from those the test computes the pixel of a chosen
(rpm, order), moves the mouse there and reads the read-out label, then drags the toolbar's zoom
rectangle between two such pixels and reads the limits back from the limits label.

Truth: the read-out must name the map's own cell under the mouse (order within half a bin and
1.5 px of the line's centre, speed within half a row and 1.5 px), Hz = order x rpm / 60 (definition
of an order), level 20 log10(2 / 5) = -8.0 dB re the maximum; after the zoom the limits are
those of the rectangle dragged, within 2 px of the axes' scale.
"""

from __future__ import annotations

import json
import re

import pytest

from test_browser import CHROMIUM, FIRST_WAIT_MS, FLAGS, WAIT_MS, open_and_run_all, start_lab

pytestmark = pytest.mark.browser

NAME = "explore_synthetic.ipynb"
SETUP = '''%matplotlib widget
import json
import numpy as np
from workbench.angle.spectra import OrderMap
from workbench.ui import MapExplorer

rpm = np.linspace(600.0, 1800.0, 61)      # rows 20 rpm apart
order = np.arange(0, 801) / 16.0          # bins 1/16 order apart, up to 50
amp = np.full((rpm.size, order.size), 1e-3)
amp[:, np.abs(order - 29.0) <= 0.5] = 2.0
amp[10, 100] = 5.0
omap = OrderMap(rpm, order, amp, np.full(rpm.size, np.nan), np.ones(rpm.size, dtype=int), 16.0)
explorer = MapExplorer(omap, unit="m/s^2", interactive=True)
explorer'''
GEOMETRY = '''view = explorer.views["order map"]
view.figure.draw_without_rendering()   # lays the axes out as the canvas will
fig_w, fig_h = view.figure.bbox.width, view.figure.bbox.height
x0, y0, w, h = view.ax.bbox.bounds
print("GEOMETRY" + json.dumps({"fig": [fig_w, fig_h], "axes": [x0, fig_h - y0 - h, w, h],
                               "xlim": view.ax.get_xlim(), "ylim": view.ax.get_ylim()}))'''


@pytest.fixture()
def lab_explorer(tmp_path):
    nbformat = pytest.importorskip("nbformat")
    pytest.importorskip("ipympl")
    book = nbformat.v4.new_notebook()
    book.cells = [nbformat.v4.new_code_cell(SETUP), nbformat.v4.new_code_cell(GEOMETRY)]
    book.metadata["kernelspec"] = {"name": "python3", "display_name": "Python 3 (ipykernel)", "language": "python"}
    path = tmp_path / "source" / NAME
    path.parent.mkdir()
    nbformat.write(book, path)
    yield from start_lab(tmp_path, path)


def _pixel(geo, box, rpm, order):
    """Page pixel of (rpm, order) on the canvas element ``box`` (its CSS size may scale the figure)."""
    ax_x, ax_y, ax_w, ax_h = geo["axes"]
    (r0, r1), (o0, o1) = geo["xlim"], geo["ylim"]
    fx = ax_x + (rpm - r0) / (r1 - r0) * ax_w
    fy = ax_y + (1.0 - (order - o0) / (o1 - o0)) * ax_h
    sx, sy = box["width"] / geo["fig"][0], box["height"] / geo["fig"][1]
    return box["x"] + fx * sx, box["y"] + fy * sy


def _numbers(text):
    return [float(v) for v in re.findall(r"-?\d+(?:\.\d+)?(?:e-?\d+)?", text)]


def test_hover_readout_and_toolbar_zoom_on_the_live_order_map(lab_explorer, tmp_path):
    from playwright.sync_api import sync_playwright

    with sync_playwright() as pw:
        browser = pw.chromium.launch(executable_path=str(CHROMIUM), headless=True, args=FLAGS)
        try:
            page = open_and_run_all(browser, lab_explorer, NAME, width=1600, height=1200)
            printed = page.get_by_text(re.compile(r"^GEOMETRY")).first
            printed.wait_for(timeout=FIRST_WAIT_MS)
            geo = json.loads(printed.inner_text().strip()[len("GEOMETRY"):])
            # The figure's canvas is sized once the kernel has answered the view's first message.
            figure = page.locator(".foldline-live-figure .jupyter-matplotlib-canvas-div canvas").first
            page.wait_for_function(
                "() => { const c = document.querySelector("
                "'.foldline-live-figure .jupyter-matplotlib-canvas-div canvas');"
                "        return c && c.getBoundingClientRect().width > 100; }", timeout=FIRST_WAIT_MS)
            figure.scroll_into_view_if_needed()
            box = figure.bounding_box()
            readout = page.locator(".foldline-readout")
            page.screenshot(path=str(tmp_path / "explorer_opened.png"))

            # Hover over the known line at 1400 rpm: one move, so one read-out to wait for.
            px_rpm = (1800.0 - 600.0) / geo["axes"][2]   # data per pixel of the axes
            px_order = 50.0 / geo["axes"][3]
            x, y = _pixel(geo, box, 1400.0, 29.0)
            page.mouse.move(x, y)
            readout.get_by_text(re.compile(r"order \d+\.\d+, ")).wait_for(timeout=WAIT_MS)
            text = readout.inner_text()
            page.screenshot(path=str(tmp_path / "explorer_hover.png"))
            got = re.search(r"order ([\d.]+), ([\d.]+) Hz, ([\d.]+) rpm: ([\d.e+-]+) m/s\^2 \((-?[\d.]+) dB", text)
            assert got, text
            order, hz, rpm, amplitude, level = (float(v) for v in got.groups())
            # the cell under the pixel: within 1.5 px of the aim, plus half a bin or a row
            assert abs(order - 29.0) <= 1.5 * px_order + 0.5 / 16, text
            assert abs(rpm - 1400.0) <= 1.5 * px_rpm + 10.0, text
            assert hz == pytest.approx(order * rpm / 60.0, abs=0.06), text
            assert amplitude == 2.0 and level == pytest.approx(-8.0, abs=0.05), text

            # Zoom: the toolbar's rectangle from (800 rpm, order 10) to (1200 rpm, order 35).
            page.locator(".foldline-live-figure button[title^='Zoom to rectangle']").click()
            limits = page.locator(".foldline-view-limits")
            assert "shown: rpm 600 to 1800, order 0 to 50" in limits.inner_text()
            x0, y0 = _pixel(geo, box, 800.0, 10.0)
            x1, y1 = _pixel(geo, box, 1200.0, 35.0)
            page.mouse.move(x0, y0)
            page.mouse.down()
            page.mouse.move(x1, y1, steps=8)
            page.mouse.up()
            limits.get_by_text(re.compile(r"shown: rpm (?!600 to 1800)")).wait_for(timeout=WAIT_MS)
            page.screenshot(path=str(tmp_path / "explorer_zoomed.png"))
            r_lo, r_hi, o_lo, o_hi = _numbers(limits.inner_text())
            assert r_lo == pytest.approx(800.0, abs=2 * px_rpm) and r_hi == pytest.approx(1200.0, abs=2 * px_rpm)
            assert o_lo == pytest.approx(10.0, abs=2 * px_order) and o_hi == pytest.approx(35.0, abs=2 * px_order)
            errors = page.locator("[data-mime-type='application/vnd.jupyter.stderr']").all_inner_texts()
            assert not [e for e in errors if "Traceback" in e or "Error" in e], errors
        finally:
            browser.close()
