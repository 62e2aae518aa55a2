"""The order map explorer: zoom, cursor read-out, harmonic and sideband markers.

Truth: the read-out is the map's own cell (nearest row and bin), its frequency is
order x rpm / 60 (definition of an order), harmonics of order k are k, 2k, 3k..., sidebands
of harmonic h with spacing s are h +- j s (gear-mesh sidebands; common practice, no source).
"""

import numpy as np
import pytest

pytest.importorskip("ipywidgets")

from workbench.angle.spectra import OrderMap  # noqa: E402
from workbench.ui.map_explorer import MapExplorer  # noqa: E402


@pytest.fixture()
def explorer():
    rpm = np.linspace(600.0, 1800.0, 61)
    order = np.arange(0, 801) / 16.0
    amp = np.full((rpm.size, order.size), 1e-3)
    amp[:, order == 29.0] = 2.0
    amp[40, 100] = 5.0
    omap = OrderMap(rpm, order, amp, np.full(rpm.size, np.nan), np.ones(rpm.size, dtype=int), 16.0)
    return MapExplorer(omap, unit="m/s^2")


def test_readout_is_the_cell_under_the_cursor(explorer):
    r = explorer.readout_at(1400.0, 6.26)  # row 40 of the grid is 1400 rpm
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
    explorer.marker_order.value = 14.5
    explorer.harmonics.value = 2
    explorer.sideband_spacing.value = 0.326
    explorer.sidebands.value = 1
    m = explorer.marker_orders()
    assert m["harmonics"] == [14.5, 29.0]
    assert m["sidebands"] == pytest.approx([14.174, 14.826, 28.674, 29.326])
