"""Run against run: ``foldline compare`` aligns runs on speed.

Truth from analytic signals: the simulator writes each line at peak amplitude
10**(level_db / 20) (workbench.runs.simulate); a line doubled in amplitude reads +6.02 dB
(20 log10 2), an unchanged one 0 dB, whatever direction the speed swept.
"""

import json

import numpy as np
import pytest

from workbench.cli.main import main
from workbench.machine import write_machine
from workbench.runs import simulate_to_wav

from builders import linear_plan, one_shaft_machine

RATE = 1000.0


def _machine(level_db):
    return one_shaft_machine({"name": "mesh", "order": 7.0, "level_db": level_db}, shaft="motor")


def _plan(start, end):
    return linear_plan(start, end, 8.0, RATE, filter="butterworth", filter_order=4, cutoff=0.45,
                       threshold_db=-60.0)


@pytest.fixture(scope="module")
def runs(tmp_path_factory):
    base = tmp_path_factory.mktemp("compare")
    kw = dict(tacho_rise_s=2e-3, resonance_gain_db=0.0, noise_db=-80.0)
    up = simulate_to_wav(_machine(0.0), _plan(700.0, 1400.0), RATE, base / "up.wav", seed=1, **kw)
    down = simulate_to_wav(_machine(0.0), _plan(1400.0, 700.0), RATE, base / "down.wav", seed=2, **kw)
    after = simulate_to_wav(_machine(20 * np.log10(2.0)), _plan(700.0, 1400.0), RATE, base / "after.wav", seed=3, **kw)
    write_machine(_machine(0.0), base / "m.toml")
    return base, up, down, after


def _compare(argv, capsys):
    capsys.readouterr()
    assert main(["compare", *argv, "--samples-per-rev", "64", "--cut-orders", "1,7", "--json"]) == 0
    return json.loads(capsys.readouterr().out)


def test_run_up_against_coast_down_reads_the_same(runs, capsys):
    base, up, down, _ = runs
    got = _compare([str(up), str(down), "--labels", "up,down", "--out", str(base / "out")], capsys)
    assert [r["direction"] for r in got["runs"]] == ["run-up", "coast-down"]
    rpm = np.array(got["rpm"])
    assert rpm[0] >= 700 and rpm[-1] <= 1400 and len(rpm) == 400
    cut7 = [c for c in got["cuts"] if c["order"] == 7.0][0]["amplitude"]
    a, b = (np.array([np.nan if v is None else v for v in cut7[k]]) for k in ("up", "down"))
    ok = np.isfinite(a) & np.isfinite(b)
    assert ok.sum() > 300
    np.testing.assert_allclose(a[ok], 1.0, rtol=0.03)  # 0 dB = 1.0 peak
    np.testing.assert_allclose(b[ok], 1.0, rtol=0.03)
    change = [c for c in got["changes"] if c["order"] == 7.0][0]
    assert abs(change["change_db"]) < 0.3
    assert len(got["overall"]["up"]) == len(rpm)
    for name in ("compare_cuts.csv", "compare_cuts.png", "compare_overall.png", "compare_spectra.csv"):
        assert (base / "out" / name).is_file()


def test_before_against_after_shows_the_doubled_order(runs, capsys):
    base, up, _, after = runs
    got = _compare([str(up), str(after)], capsys)
    change = [c for c in got["changes"] if c["order"] == 7.0][0]
    assert change["label"] == "after.wav"
    assert change["change_db"] == pytest.approx(20 * np.log10(2.0), abs=0.3)  # +6.02 dB
    one = [c for c in got["changes"] if c["order"] == 1.0][0]
    assert abs(one["change_db"]) < 0.5  # the shaft line did not change


def test_compare_refuses_one_run_and_wrong_labels(runs, capsys):
    base, up, down, _ = runs
    assert main(["compare", str(up)]) == 2
    assert "at least two runs" in capsys.readouterr().err
    assert main(["compare", str(up), str(down), "--labels", "a"]) == 2
    assert "--labels 'a': give 2 labels" in capsys.readouterr().err


def test_compare_panel_shows_the_same_changes(runs):
    pytest.importorskip("ipywidgets")
    from workbench.ui.compare_panel import ComparePanel

    base, up, _, after = runs
    panel = ComparePanel([up, after], labels=["before", "after"], samples_per_rev=64, cut_orders=(1.0, 7.0))
    ch = panel.comparison.changes().set_index("order")
    assert ch.loc[7.0, "change_db"] == pytest.approx(20 * np.log10(2.0), abs=0.3)  # +6.02 dB
    assert "+6.0" in panel.changes.value and "run-up" in panel.changes.value
    for img in (panel.cuts_figure, panel.overall_figure, panel.spectra_figure):
        assert img.value[:4] == b"\x89PNG"
