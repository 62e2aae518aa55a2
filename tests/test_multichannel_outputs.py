"""Many channels in the outputs that draw figures: per-channel folders of ``foldline track
--out``, the report's channel sections, the notebook panel's "track together" list.

The run is the analytic 8-channel run-up of ``test_multichannel.py`` (orders 2 and 7, each
channel with its own amplitudes).
"""

import json

import numpy as np
import pytest

from test_multichannel import DURATION, RATE, RPM0, RPM1, _run
from workbench.angle.tracking import resample_to_angle
from workbench.cli.main import main
from workbench.runs import write_run


@pytest.fixture(scope="module")
def run_file(tmp_path_factory):
    path = tmp_path_factory.mktemp("mco") / "bench8.npz"
    write_run(_run(n_vib=3), path)
    return path


def test_cli_out_writes_one_folder_per_channel(run_file, tmp_path, capsys):
    out = tmp_path / "tracked"
    assert main(["track", str(run_file), "--channel", "1,2", "--samples-per-rev", "32",
                 "--revs-per-block", "8", "--out", str(out), "--json"]) == 0
    d = json.loads(capsys.readouterr().out)
    for name in ("acc_1", "acc_2"):
        assert (out / name / "order_spectrum.csv").is_file()
        assert (out / name / "frequency_map.png").is_file()   # written, so computed
    assert all(str(out) in f for f in d["files"])
    # Again without --force: refused before any work, one line.
    assert main(["track", str(run_file), "--channel", "1,2", "--out", str(out), "--json"]) == 2
    assert "exists" in capsys.readouterr().err


def test_report_shows_each_channel(run_file, tmp_path):
    from workbench.machine import machine_from_dict
    from workbench.report import write_report
    from workbench.sampling import plan_from_dict

    m = tmp_path / "m.toml"
    p = tmp_path / "p.toml"
    from workbench.machine import write_machine
    from workbench.sampling import write_plan

    write_machine(machine_from_dict({"machine": {"name": "rig", "reference": "in"},
                                     "shaft": [{"name": "in"}],
                                     "order": [{"name": "two", "shaft": "in", "order": 2.0}]}), m)
    write_plan(plan_from_dict({"speed": {"profile": "linear", "start_rpm": RPM0, "end_rpm": RPM1,
                                         "duration_s": DURATION},
                               "acquisition": {"rates_hz": [RATE], "filter": "none"}}), p)
    rep = write_report(m, p, run_file, out=tmp_path / "r.html",
                       track_options={"channels": (2, 3), "samples_per_rev": 32,
                                      "revs_per_block": 8, "rf_map": False})
    html = (tmp_path / "r.html").read_text()
    assert 'id="channel-1"' in html and 'id="channel-2"' in html
    assert "Channel acc 2 (m/s^2)" in html and "Channel acc 3 (m/s^2)" in html
    assert html.count('data-figure="order-spectrum-ch') == 2
    assert "order-spectrum" in rep.sections and "tacho" in rep.sections


def test_angle_panel_tracks_ticked_channels_together(tmp_path):
    pytest.importorskip("ipywidgets")
    from workbench.ui.angle_panel import AngleDomainPanel

    run = _run(n_vib=3)
    panel = AngleDomainPanel(run, export_folder=tmp_path)
    panel.channels.value = ("acc 1", "acc 3")
    panel.samples_per_rev.value = 32        # acc 1 shown; acc 3 tracked in the same pass
    assert panel.pipeline.channel_names == ("acc 1", "acc 3") and panel.error is None
    tracked = panel.runs["angle"]
    panel.channel.value = "acc 3"           # tracked already: nothing tracked again
    assert panel.runs["angle"] == tracked
    alone = resample_to_angle(run.channel("acc 3"), RATE, panel.tacho()[1], samples_per_rev=32)
    assert np.array_equal(panel.track().data, alone.data)
