"""Identification of order-map ridges with predicted lines (direct and folded).

Expected apparent orders come from the folding rule |f - rate * round(f / rate)| (common
practice, no source; REFERENCES.md) evaluated by hand below.
"""

import numpy as np
import pandas as pd
import pytest

from workbench.angle.matching import find_ridges, match_lines, predicted_orders
from workbench.errors import InputError

from builders import one_shaft_machine


def _machine():
    return one_shaft_machine({"name": "bearing", "order": 4.9}, {"name": "mesh", "order": 37.0})


def test_predicted_orders_worked_value():
    # Order 37 at 1200 rpm (20 Hz) is 740 Hz; at 1000 S/s it shows at 260 Hz (zone 1),
    # i.e. apparent order 13 (folding rule, by hand).
    m = _machine()
    app, zone, true = predicted_orders(m.lines(), 1000.0, [1200.0])
    i = [ln.name for ln in m.lines()].index("mesh order")
    assert true[i, 0] == pytest.approx(740.0)
    assert app[i, 0] == pytest.approx(13.0)
    assert zone[i, 0] == 1


def test_folded_line_identified_as_alias():
    m = _machine()
    rate = 1000.0
    rpm = np.linspace(900.0, 1500.0, 31)
    f = rpm / 60.0
    # Ridges: the bearing at 4.9 orders (direct), the mesh's alias at |37 f - 1000| / f
    # orders, and one unexplained peak at 17.3 orders.
    alias = np.abs(37.0 * f - 1000.0) / f
    ridges = pd.DataFrame(
        {
            "rpm": np.concatenate([rpm, rpm, rpm[:5]]),
            "order": np.concatenate([np.full(31, 4.9), alias + 0.01, np.full(5, 17.3)]),
            "amplitude": np.concatenate([np.full(31, 0.1), np.full(31, 0.5), np.full(5, 0.2)]),
        }
    )
    ident = match_lines(ridges, m, rate, tolerance_orders=0.05)
    t = ident.table.set_index("line")
    assert bool(t.loc["mesh order", "alias"]) is True and t.loc["mesh order", "zone"] == 1
    assert bool(t.loc["bearing order", "alias"]) is False
    assert t.loc["mesh order", "points"] == 31
    assert list(ident.aliases["line"]) == ["mesh order"]
    # Over 900-1500 rpm the alias runs from 29.7 down to 3.0 orders and crosses 4.9 orders at
    # 1432 rpm (1000 / f - 37 = 4.9), between the grid speeds 1420 and 1440 rpm where it is
    # 5.25 and 4.67 orders, outside the 0.05-order tolerance; so the bearing points stay
    # direct (by hand).
    assert len(ident.unexplained) == 5


def test_find_ridges_picks_peaks_above_floor():
    order = np.arange(0, 20, 0.1)
    rpm = np.array([1000.0, 1100.0])
    amp = np.full((2, order.size), 1e-3)
    amp[:, 49] = 1.0  # order 4.9
    amp[1, 130] = 0.5  # order 13.0 in the second block
    r = find_ridges(rpm, order, amp, floor_db=20.0)
    assert len(r) == 3
    assert set(np.round(r["order"], 6)) == {4.9, 13.0}


def test_bad_inputs():
    m = _machine()
    with pytest.raises(InputError, match="positive"):
        match_lines(pd.DataFrame({"rpm": [1.0], "order": [1.0], "amplitude": [1.0]}), m, 0.0)
    with pytest.raises(InputError, match="shape"):
        find_ridges([1.0], [1.0, 2.0, 3.0], np.ones((2, 3)))
    with pytest.raises(InputError, match="positive"):
        predicted_orders(m.lines(), 1000.0, [0.0])
