"""The fast-redraw fold map picture: hiding lines by redrawing only the line artists must give
the same pixels as drawing the figure from scratch with those lines left out.

Expected values: a full draw by matplotlib (the general-purpose reference) of the same fold map.
"""

from __future__ import annotations

import io

import numpy as np
import pytest

pytest.importorskip("matplotlib")

from PIL import Image  # noqa: E402

from workbench.ui.scene import FoldScene, legend_html  # noqa: E402


def _pixels(png: bytes) -> np.ndarray:
    return np.asarray(Image.open(io.BytesIO(png)).convert("RGB"), dtype=int)


@pytest.mark.parametrize("view", ["hz", "order"])
def test_hidden_lines_match_a_fresh_draw_without_them(demo_fold, view):
    machine, plan, fmap, table = demo_fold
    keep = frozenset(ln.name for ln in machine.lines() if ln.entry != "stage 1")
    scene = FoldScene(fmap, plan, table, view=view, labels=False)
    scene.png()  # the plain first draw, before any line is hidden
    blitted = _pixels(scene.png(keep))
    # A hidden line takes its collision highlights with it: the fresh draw gets only the
    # collisions of the lines kept.
    kept_table = table[table["line"].isin(keep)]
    fresh = _pixels(FoldScene(fmap, plan, kept_table, view=view, lines=set(keep), labels=False).png())
    assert blitted.shape == fresh.shape
    assert np.array_equal(blitted, fresh)
    assert not np.array_equal(blitted, _pixels(scene.png()))


def test_every_drawn_line_is_owned_by_its_name(demo_fold):
    machine, plan, fmap, table = demo_fold
    scene = FoldScene(fmap, plan, table)
    # Every line of the machine is drawn (each has at least one segment on the grid).
    assert scene.line_names == frozenset(ln.name for ln in machine.lines())
    # Numbered collision labels belong to their collision's line (named in the label's gid);
    # band names belong to no line.
    texts = [t for t in scene.ax.texts if t.get_gid() != "band-name"]
    assert texts and all(scene._owners[t] == frozenset([t.get_gid()[5:]]) for t in texts)
    assert all(t.get_text().isdigit() for t in texts)
    names = [t for t in scene.ax.texts if t.get_gid() == "band-name"]
    assert names and all(not scene._owners[t] for t in names)


def test_showing_everything_again_gives_the_first_picture(demo_fold):
    machine, plan, fmap, table = demo_fold
    scene = FoldScene(fmap, plan, table, labels=False)
    first = scene.png()
    scene.png(frozenset(["motor shaft"]))
    assert scene.png(frozenset(ln.name for ln in machine.lines())) == first


def test_legend_moves_to_html(demo_fold):
    machine, plan, fmap, table = demo_fold
    scene = FoldScene(fmap, plan, table)
    assert scene.ax.get_legend() is None
    for text in ("direct line (zone 0)", "Nyquist (1280 Hz)", "band: housing resonance", "source: stage 1"):
        assert text in scene.legend_html
    assert legend_html(None) == '<div class="foldline-legend foldline-note"></div>'
