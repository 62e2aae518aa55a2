"""Fold maps a reader can use: a colour key by source, bands named above thin lines, numbered
collisions whose labels never overlap, overlaps marked, and a legend of only what is drawn.

The demo files are the inputs; what is checked is the figure's own content (artists, colours,
label boxes), so the checks hold for any machine.
"""

import matplotlib

matplotlib.use("Agg")

from matplotlib.colors import to_hex  # noqa: E402

from workbench.plots import plot_fold_map  # noqa: E402
from workbench.plots.common import source_colours  # noqa: E402


def _legend_texts(fig):
    return [t.get_text() for t in fig.axes[0].get_legend().get_texts()]


def test_lines_coloured_by_source_and_keyed(demo_fold):
    machine, plan, fmap, table = demo_fold
    fig = plot_fold_map(fmap, plan, collisions=table)
    colours = source_colours(machine.lines())
    texts = _legend_texts(fig)
    for entry in dict.fromkeys(ln.entry for ln in machine.lines()):
        assert f"source: {entry}" in texts
    # every direct-line segment carries its source's colour
    names = {to_hex(c) for c in colours.values()}
    drawn = {to_hex(ln.get_color()) for ln in fig.axes[0].lines if ln.get_linewidth() == 0.8}
    assert drawn and drawn <= names


def test_legend_lists_only_what_is_drawn(demo_fold):
    machine, plan, fmap, table = demo_fold
    texts = _legend_texts(plot_fold_map(fmap, plan))  # no collision table: none drawn
    assert not any(t.startswith("collision") or t.startswith("overlap") for t in texts)
    texts = _legend_texts(plot_fold_map(fmap, plan, collisions=table))
    assert any(t.startswith("collision") for t in texts)
    assert any(t.startswith("overlap") for t in texts) == bool((table["kind"] == "overlap").any())
    # the hidden sources are not keyed
    keep = {ln.name for ln in machine.lines() if ln.entry == "stage 2"}
    texts = _legend_texts(plot_fold_map(fmap, plan, lines=keep))
    assert [t for t in texts if t.startswith("source:")] == ["source: stage 2"]


def test_labels_never_overlap_and_collisions_are_numbered(demo_fold):
    machine, plan, fmap, table = demo_fold
    for kw in ({}, {"log_frequency": True}, {"view": "order"}):
        fig = plot_fold_map(fmap, plan, collisions=table, **kw)
        fig.canvas.draw()
        ax = fig.axes[0]
        boxes = [t.get_window_extent() for t in ax.texts]
        assert len(boxes) >= 2
        for i in range(len(boxes)):
            for j in range(i):
                assert not boxes[i].overlaps(boxes[j]), (kw, ax.texts[i].get_text(), ax.texts[j].get_text())
        numbers = [t.get_text() for t in ax.texts if t.get_gid() and t.get_gid().startswith("line:")]
        assert numbers == [str(k) for k in range(1, len(numbers) + 1)]
        bands = {t.get_text() for t in ax.texts if t.get_gid() == "band-name"}
        assert bands and bands <= {b.name for b in plan.bands}
    assert ax.get_yscale() == "linear"
    assert plot_fold_map(fmap, plan, log_frequency=True).axes[0].get_yscale() == "log"
