"""The fold map's enlarged low-frequency region: in the figure, the command and the panel.

Truth: the enlarged axes show exactly 0 to the frequency asked (in the order view the order of
that frequency at the lowest speed, order = Hz x 60 / rpm, definition of an order), hold the
same lines and bands as the full map (its own content, so it holds for any machine), and the
full map is the one it was without the region (axes 0, same limits), the region outlined on it.
"""

import json
import subprocess
import sys
from pathlib import Path

import matplotlib
import pytest

matplotlib.use("Agg")

from workbench.errors import InputError  # noqa: E402
from workbench.machine import read_machine  # noqa: E402
from workbench.plots import plot_fold_map  # noqa: E402
from workbench.sampling import find_collisions, fold_map, read_plan  # noqa: E402

ROOT = Path(__file__).resolve().parents[1]
SAMPLES = ROOT / "sample_runs"


@pytest.fixture(scope="module")
def demo():
    machine = read_machine(SAMPLES / "agitator_drive.toml")
    plan = read_plan(SAMPLES / "runup_plan.toml")
    fmap = fold_map(machine, plan, 2560.0)
    return machine, plan, fmap, find_collisions(machine, plan, 2560.0, fmap=fmap)


def test_inset_enlarges_zero_to_f_beside_an_unchanged_map(demo):
    machine, plan, fmap, table = demo
    plain = plot_fold_map(fmap, plan, collisions=table)
    fig = plot_fold_map(fmap, plan, collisions=table, inset_hz=200.0)
    ax, low = fig.axes[0], fig.axes[1]
    assert ax.get_ylim() == plain.axes[0].get_ylim() and ax.get_xlim() == plain.axes[0].get_xlim()
    assert low.get_ylim() == (0.0, 200.0) and low.get_xlim() == ax.get_xlim()
    assert low.get_legend() is None and not low.texts and "0 to 200 Hz" in low.get_title()
    assert len(low.lines) == len(ax.lines) and len(low.collections) == len(ax.collections)
    outline = [p for p in ax.patches if p.get_gid() == "low-frequency-region"]
    assert len(outline) == 1 and outline[0].get_height() == 200.0
    assert [p.get_gid() for p in plain.axes[0].patches].count("low-frequency-region") == 0


def test_inset_in_orders_and_refused_beyond_nyquist(demo):
    machine, plan, fmap, table = demo
    low = plot_fold_map(fmap, plan, view="order", inset_hz=100.0).axes[1]
    assert low.get_ylim()[1] == pytest.approx(100.0 * 60.0 / fmap.rpm.min())
    with pytest.raises(InputError, match="below Nyquist"):
        plot_fold_map(fmap, plan, inset_hz=fmap.nyquist_hz)
    with pytest.raises(InputError, match="above 0"):
        plot_fold_map(fmap, plan, inset_hz=-5.0)


def test_command_draws_the_inset(tmp_path):
    png = tmp_path / "fold.png"
    cmd = [sys.executable, "-m", "workbench", "foldmap", str(SAMPLES / "agitator_drive.toml"),
           str(SAMPLES / "runup_plan.toml"), "--rate", "2560", "--png", str(png), "--inset-hz", "200", "--json"]
    out = subprocess.run(cmd, capture_output=True, text=True, timeout=120)
    assert out.returncode == 0, out.stderr
    assert json.loads(out.stdout)["rate_hz"] == 2560.0 and png.read_bytes()[:4] == b"\x89PNG"
    from PIL import Image

    assert Image.open(png).size[0] > 1400  # the wider figure with the enlarged region beside
    bad = subprocess.run(cmd[:-3] + ["--inset-hz", "5000", "--force"], capture_output=True, text=True, timeout=120)
    assert bad.returncode == 2 and "below Nyquist (1280 Hz" in bad.stderr


def test_panel_shows_the_inset_only_when_asked():
    pytest.importorskip("ipywidgets")
    from workbench.ui import FoldMapPanel

    panel = FoldMapPanel(SAMPLES / "agitator_drive.toml", SAMPLES / "runup_plan.toml", rate_hz=2560.0)
    assert panel.inset_figure.layout.display == "none"
    panel.inset_hz.value = 200.0
    assert panel.error is None and panel.inset_figure.layout.display == ""
    assert panel.inset_figure.value[:4] == b"\x89PNG"
    first = panel.inset_figure.value
    panel.sources.value = ("motor DE",)
    assert panel.inset_figure.value != first  # the shown sources follow
    panel.inset_hz.value = 5000.0
    assert isinstance(panel.error, InputError) and "below Nyquist" in panel.verdict.value
    panel.inset_hz.value = 0.0
    assert panel.error is None and panel.inset_figure.layout.display == "none"
