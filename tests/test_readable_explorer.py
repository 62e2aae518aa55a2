"""The order map explorer: zoom, cursor read-out, harmonic and sideband markers.

Truth: the read-out is the map's own cell (nearest row and bin), its frequency is
order x rpm / 60 (definition of an order), harmonics of order k are k, 2k, 3k..., sidebands
of harmonic h with spacing s are h +- j s (gear-mesh sidebands; common practice, no source).
The interactive view is driven by matplotlib mouse events at the pixel the axes transform
gives for a known cell, and by the toolbar's own zoom-to-rectangle, as a mouse would.
"""

import subprocess
import sys

import numpy as np
import pytest

pytest.importorskip("ipywidgets")

from matplotlib.backend_bases import MouseButton, MouseEvent  # noqa: E402

from workbench.angle.spectra import OrderCut, OrderMap, OrderSpectrum, FrequencyMap  # noqa: E402
from workbench.errors import InputError  # noqa: E402
from workbench.ui import interactive as live  # noqa: E402
from workbench.ui.map_explorer import MapExplorer  # noqa: E402

RPM = np.linspace(600.0, 1800.0, 61)      # row 40 is 1400 rpm
ORDER = np.arange(0, 801) / 16.0          # bin 464 is order 29, bin 100 order 6.25


def _map():
    amp = np.full((RPM.size, ORDER.size), 1e-3)
    amp[:, ORDER == 29.0] = 2.0
    amp[40, 100] = 5.0
    return OrderMap(RPM, ORDER, amp, np.full(RPM.size, np.nan), np.ones(RPM.size, dtype=int), 16.0)


@pytest.fixture()
def explorer():
    return MapExplorer(_map(), unit="m/s^2", interactive=False)


@pytest.fixture()
def live_explorer():
    pytest.importorskip("ipympl")
    omap = _map()
    hz = np.arange(0, 513) * 2.5
    famp = np.full((RPM.size, hz.size), 1e-3)
    famp[:, 200] = 3.0  # a fixed 500 Hz line
    cuts = (OrderCut(RPM, omap.amplitude[:, 464], 29.0, 0.25), OrderCut(RPM, omap.amplitude[:, 100], 6.25, 0.25))
    spectrum = OrderSpectrum(ORDER, omap.amplitude.max(axis=0), 16.0, RPM.size)
    return MapExplorer(omap, unit="m/s^2", frequency_map=FrequencyMap(RPM, hz, famp, RPM / 100.0),
                       cuts=cuts, spectrum=spectrum, interactive=True)


def _mouse(view, name, x, y, **kw):
    view.canvas.draw()
    px, py = view.ax.transData.transform((x, y))
    MouseEvent(name, view.canvas, px, py, **kw)._process()


def test_readout_is_the_cell_under_the_cursor(explorer):
    r = explorer.readout_at(1400.0, 6.26)
    assert r["rpm"] == pytest.approx(1400.0) and r["order"] == pytest.approx(6.25)
    assert r["amplitude"] == 5.0 and r["level_db"] == pytest.approx(0.0)
    assert r["hz"] == pytest.approx(6.25 * 1400.0 / 60.0)
    r = explorer.readout_at(1000.0, 29.01)
    assert r["amplitude"] == 2.0 and r["level_db"] == pytest.approx(20 * np.log10(2.0 / 5.0))
    explorer.cursor_rpm.value, explorer.cursor_order.value = 1400.0, 6.25
    assert "order 6.250, 145.8 Hz, 1400 rpm: 5 m/s^2" in explorer.readout.value


def test_zoom_and_markers(explorer):
    explorer.order_range.value = (20.0, 40.0)
    explorer.rpm_range.value = (900.0, 1500.0)
    ax = explorer.figure().axes[0]
    assert ax.get_ylim() == (20.0, 40.0) and ax.get_xlim() == (900.0, 1500.0)
    assert explorer.image.value[:4] == b"\x89PNG"
    assert "shown: rpm 900 to 1500, order 20 to 40" in explorer.limits.value
    explorer.marker_order.value = 14.5
    explorer.harmonics.value = 2
    explorer.sideband_spacing.value = 0.326
    explorer.sidebands.value = 1
    m = explorer.marker_orders()
    assert m["harmonics"] == [14.5, 29.0]
    assert m["sidebands"] == pytest.approx([14.174, 14.826, 28.674, 29.326])


def test_mouse_over_each_figure_reads_the_data_under_it(live_explorer):
    ex = live_explorer
    assert ex.interactive and list(ex.views) == ["order map", "frequency map", "order cuts", "spectrum"]
    _mouse(ex.views["order map"], "motion_notify_event", 1403.0, 6.27)
    assert 'class="foldline-readout' in ex.readout.value
    assert "order 6.250, 145.8 Hz, 1400 rpm: 5 m/s^2 (0.0 dB re the maximum)" in ex.readout.value
    _mouse(ex.views["frequency map"], "motion_notify_event", 1400.0, 501.0)   # 500 Hz at 1400 rpm
    assert f"order {500 * 60 / 1400:.3f}, 500.0 Hz, 1400 rpm: 3 m/s^2" in ex.readout.value
    _mouse(ex.views["order cuts"], "motion_notify_event", 1000.0, 2.1)        # near the order 29 cut
    assert f"order 29.000, {29 * 1000 / 60:.1f} Hz, 1000 rpm: 2 m/s^2" in ex.readout.value
    _mouse(ex.views["spectrum"], "motion_notify_event", 6.24, 1.0)
    assert (f"order 6.250, {6.25 * 600 / 60:.1f} to {6.25 * 1800 / 60:.1f} Hz over 600 to 1800 rpm: 5 m/s^2"
            in ex.readout.value)
    # the canvas footer says the same
    assert ex.views["order map"].ax.format_coord(1400.0, 6.25).startswith("order 6.250, 145.8 Hz")


def test_click_marks_a_line_on_every_figure_and_zoom_is_read_back(live_explorer):
    ex = live_explorer
    ex.sideband_spacing.value = 1.0
    ex.sidebands.value = 1
    omap = ex.views["order map"]
    _mouse(omap, "button_press_event", 1200.0, 29.02, button=1)
    assert ex.marker_order.value == 29.0
    assert ex.marker_orders() == {"harmonics": [29.0, 58.0, 87.0], "sidebands": [28.0, 30.0, 57.0, 59.0, 86.0, 88.0]}
    drawn = [ln for ln in omap.ax.lines if (ln.get_gid() or "").startswith("marker:")]
    assert sorted(ln.get_ydata()[0] for ln in drawn) == [28.0, 29.0, 30.0, 57.0, 58.0, 59.0, 86.0, 87.0, 88.0]
    spec = [ln for ln in ex.views["spectrum"].ax.lines if ln.get_gid() == "marker:harmonics"]
    assert [ln.get_xdata()[0] for ln in spec] == [29.0, 58.0, 87.0]
    ray = next(ln for ln in ex.views["frequency map"].ax.lines if ln.get_gid() == "marker:harmonics")
    assert np.allclose(ray.get_ydata(), 29.0 * np.asarray(ray.get_xdata()) / 60.0)
    assert omap.ax.get_ylim() == (0.0, 50.0)  # markers above the view do not move it
    # the toolbar's zoom to rectangle, dragged from (800 rpm, 10) to (1200 rpm, 35)
    omap.canvas.toolbar.zoom()
    _mouse(omap, "button_press_event", 800.0, 10.0, button=1)
    _mouse(omap, "motion_notify_event", 1200.0, 35.0, buttons={MouseButton.LEFT})
    _mouse(omap, "button_release_event", 1200.0, 35.0, button=1)
    (x0, x1), (y0, y1) = omap.ax.get_xlim(), omap.ax.get_ylim()
    assert (x0, x1) == pytest.approx((800.0, 1200.0), abs=3.0) and (y0, y1) == pytest.approx((10.0, 35.0), abs=0.2)
    assert f"shown: rpm {x0:.4g} to {x1:.4g}, order {y0:.4g} to {y1:.4g}" in ex.limits.value
    assert ex.marker_order.value == 29.0  # a click in zoom mode marks nothing
    assert ex.figure().axes[0].get_xlim() == pytest.approx((x0, x1))   # the PNG follows the zoom
    ex.view_choice.value = "spectrum"
    assert ex.stage.children == (ex.views["spectrum"].canvas,) and "shown: order 0 to 50" in ex.limits.value


def test_without_ipympl_the_slider_view_says_why(monkeypatch):
    monkeypatch.setattr(live, "ipympl_available", lambda: False)
    ex = MapExplorer(_map(), unit="m/s^2")
    assert not ex.interactive and ex.views == {} and ex.image.value[:4] == b"\x89PNG"
    assert "ipympl is not installed" in ex.note.value and "pip install ipympl" in ex.note.value
    with pytest.raises(InputError, match="pip install ipympl"):
        MapExplorer(_map(), interactive=True)
    assert MapExplorer(_map(), interactive=False).note.value == ""


def test_interactive_figures_leave_pyplot_backend_alone():
    pytest.importorskip("ipympl")
    code = ("import matplotlib; matplotlib.use('Agg'); import numpy as np\n"
            "from workbench.plots.common import new_figure\n"
            "from workbench.ui.interactive import interactive_canvas\n"
            "fig = new_figure(); fig.add_subplot(); c = interactive_canvas(fig)\n"
            "import matplotlib.pyplot as plt\n"
            "print(type(c).__name__, matplotlib.get_backend(), type(plt.figure().canvas).__name__)")
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, timeout=120, check=True)
    assert out.stdout.lower().split() == ["canvas", "agg", "figurecanvasagg"]
