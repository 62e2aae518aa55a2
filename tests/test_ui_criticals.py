"""CriticalsPanel: Bode and polar plots and the criticals of a run, driven through its controls.

Truth: a simulated slow run-up of a rotor with one critical (1500 rpm, zeta 0.05), whose
unbalance response peaks at 1500 / sqrt(1 - 2 zeta^2) = 1503.8 rpm with a half-power AF of 9.9
(S. S. Rao, Mechanical Vibrations, 5th ed., 2011, section 3.7).
"""

import pytest

pytest.importorskip("ipywidgets")

from workbench.machine import machine_from_dict  # noqa: E402
from workbench.runs import simulate_run  # noqa: E402
from workbench.sampling import plan_from_dict  # noqa: E402
from workbench.ui import CriticalsPanel  # noqa: E402

PNG = b"\x89PNG\r\n\x1a\n"


@pytest.fixture(scope="module")
def panel():
    machine = machine_from_dict({
        "machine": {"name": "rig", "reference": "rotor"}, "shaft": [{"name": "rotor"}],
        "critical": [{"name": "first", "rpm": 1500.0, "damping_ratio": 0.05}]})
    plan = plan_from_dict({"speed": {"profile": "linear", "start_rpm": 300.0, "end_rpm": 3000.0,
                                     "duration_s": 60.0},
                           "acquisition": {"rates_hz": [2048.0], "filter": "none"}})
    run = simulate_run(machine, plan, 2048.0, seed=3, noise_db=-80.0)
    return CriticalsPanel(run, operating_rpm=(2000.0, 2800.0))


def test_panel_tracks_and_draws(panel):
    assert panel.bode.value[:8] == PNG and panel.polar.value[:8] == PNG
    crit = [c for _, c in panel.result.criticals]
    assert len(crit) == 1 and crit[0].rpm == pytest.approx(1503.8, rel=0.01)
    assert crit[0].amplification_factor == pytest.approx(9.9, rel=0.1)
    assert "foldline-criticals" in panel.table.value
    assert "phase absolute" in panel.message.value
    assert "hazardous" in panel.widget.children[3].value


def test_panel_controls(panel):
    panel.orders.value = "1,3"
    panel.track.click()
    assert [tr.order for _, tr in panel.result.tracks] == [1.0, 3.0]
    panel.polar_order.value = 1
    assert panel.polar.value[:8] == PNG
    panel.orders.value = "0"
    panel.track.click()
    assert "foldline-error" in panel.message.value          # shown, not raised
    panel.orders.value = "1,2"
    panel.track.click()
    assert "foldline-error" not in panel.message.value
