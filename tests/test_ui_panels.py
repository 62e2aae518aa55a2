"""Notebook panels driven from code: set controls as a person would, then check that the
picture, the tables and the verdict show what the computation layers say for the same inputs.

Expected values: the sampling layer's own functions called directly on independently built
inputs (the panel must pass them through unchanged), plus hand-derived folding figures where
noted (folding rule: a line at f in zone 1 shows at rate - f; common practice, no source).
"""

from __future__ import annotations

import dataclasses
import warnings
from html.parser import HTMLParser

import numpy as np
import pandas as pd
import pytest

pytest.importorskip("ipywidgets")

from workbench.errors import FoldlineWarning, InputError  # noqa: E402
from workbench.machine import machine_from_dict, machine_to_dict  # noqa: E402
from workbench.sampling import advise, find_collisions, plan_from_dict, plan_to_dict  # noqa: E402
from workbench.angle import (detect_pulses, find_order_peaks, order_cut, order_map,  # noqa: E402
                             order_spectrum, resample_to_angle, tacho_angle)
from workbench.angle.matching import find_ridges, match_lines  # noqa: E402
from workbench.runs import read_run, simulate_run  # noqa: E402
from workbench.ui import AngleDomainPanel, FoldMapPanel, SourceEditorPanel  # noqa: E402
from workbench.ui.foldmap_panel import narrowed_speed  # noqa: E402

from builders import DEMO_MACHINE as MACHINE, DEMO_PLAN as PLAN, DEMO_RUN as RUN


class _Tables(HTMLParser):
    """Cell texts of every table of a page, keyed by the table's classes."""

    def __init__(self):
        super().__init__()
        self.tables, self._rows, self._cell = {}, None, None

    def handle_starttag(self, tag, attrs):
        attrs = dict(attrs)
        if tag == "table":
            self._rows = []
            for cls in (attrs.get("class") or "").split():
                self.tables[cls] = self._rows
        elif tag == "tr" and self._rows is not None:
            self._rows.append([])
        elif tag in ("td", "th") and self._rows is not None:
            self._cell = []

    def handle_endtag(self, tag):
        if tag in ("td", "th") and self._cell is not None:
            self._rows[-1].append("".join(self._cell).strip())
            self._cell = None
        elif tag == "table":
            self._rows = None

    def handle_data(self, data):
        if self._cell is not None:
            self._cell.append(data)


def table_rows(page: str, css_class: str) -> list:
    """Body rows (lists of cell texts) of the table with class ``css_class``; [] if absent."""
    parser = _Tables()
    parser.feed(page)
    rows = parser.tables.get(css_class, [])
    return rows[1:]


@pytest.fixture(scope="module")
def machine(demo_machine):
    return demo_machine


@pytest.fixture(scope="module")
def plan(demo_plan):
    return demo_plan


@pytest.fixture(scope="module")
def advice(machine, plan):
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", FoldlineWarning)
        return advise(machine, plan)


@pytest.fixture(scope="module")
def shared_panel(machine, plan):
    return FoldMapPanel(machine, plan)


@pytest.fixture()
def panel(shared_panel):
    """One panel for the module (its caches make the tests fast), reset before each test."""
    shared_panel.reset()
    return shared_panel


def _plan_with(plan, **changes):
    """The plan rebuilt from its dictionary with [section] keys changed (independent of the panel)."""
    d = plan_to_dict(plan)
    for section, values in changes.items():
        d[section] = {**d[section], **values}
    return plan_from_dict(d)


def _expected_rows(machine, plan, rate_hz):
    table = find_collisions(machine, plan, rate_hz)
    coll = table[table["kind"] == "collision"]
    return [(r.line, r.band, f"{r.rpm_min:.0f}", f"{r.rpm_max:.0f}", f"{r.residual_db:.1f}")
            for r in coll.itertuples()]


def _shown_rows(panel):
    return [(r[0], r[1], r[2], r[3], r[9]) for r in table_rows(panel.table.value, "foldline-collisions")]


# -- FoldMapPanel ----------------------------------------------------------------------------
def test_fold_map_panel_opens_on_the_advisors_rate(panel, advice):
    # Expected: the advisor called directly on the same machine and plan.
    assert panel.rate_hz.value == advice.recommended_rate_hz
    assert panel.rate_choice.value == advice.recommended_rate_hz
    assert panel.figure.value[:8] == b"\x89PNG\r\n\x1a\n"
    assert f"recommended rate: {advice.recommended_rate_hz:g} Hz" in panel.verdict.value
    assert f"{advice.resampling.samples_per_rev} samples per rev" in panel.verdict.value
    assert table_rows(panel.table.value, "foldline-collisions") == []
    assert 'class="foldline-ok"' in panel.verdict.value


def test_reset_restores_the_opening_state(panel, advice):
    png, table, verdict = panel.figure.value, panel.table.value, panel.verdict.value
    panel.rate_choice.value = 2560.0
    panel.view.value = "order"
    panel.filter_kind.value = "bessel"
    panel.reset()
    assert panel.rate_hz.value == advice.recommended_rate_hz and panel.view.value == "hz"
    assert (panel.figure.value, panel.table.value, panel.verdict.value) == (png, table, verdict)


def test_rate_change_updates_figure_table_and_verdict_together(panel, machine, plan):
    before = panel.figure.value
    panel.rate_choice.value = 2560.0
    assert panel.rate_hz.value == 2560.0
    assert panel.figure.value != before
    expected = _expected_rows(machine, plan, 2560.0)
    assert len(expected) > 0
    assert _shown_rows(panel) == expected
    assert "2560 Hz is not clean" in panel.verdict.value
    assert f"{len(expected)} collision(s)" in panel.verdict.value
    # Hand check: stage 1 mesh x3 is order 3 x 29 = 87; in zone 1 it shows at 2560 - f, inside
    # the housing resonance band 640..760 Hz for f in 1800..1920 Hz, i.e. 1241.4..1324.1 rpm.
    row = next(r for r in _shown_rows(panel) if r[:2] == ("stage 1 mesh x3", "housing resonance"))
    assert row[2:4] == ("1241", "1324")


def test_free_rate_clears_the_plan_choice(panel, machine, plan):
    panel.rate_hz.value = 3000.0
    assert panel.rate_choice.value is None
    assert _shown_rows(panel) == _expected_rows(machine, plan, 3000.0)
    assert "3000 Hz" in panel.header.value


def test_filter_change_matches_a_plan_with_that_filter(panel, machine, plan):
    panel.rate_choice.value = 2560.0
    before_png, before_verdict = panel.figure.value, panel.verdict.value
    with panel.hold():  # three controls, one update
        panel.filter_kind.value = "elliptic"
        panel.filter_order.value = 6
        panel.cutoff.value = 0.36
    expected_plan = _plan_with(plan, acquisition={"filter": "elliptic", "filter_order": 6, "cutoff": 0.36})
    assert panel.current_filter() == expected_plan.filter
    assert _shown_rows(panel) == _expected_rows(machine, expected_plan, 2560.0)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", FoldlineWarning)
        rec = advise(machine, expected_plan).recommended_rate_hz
    assert f"recommended rate: {rec:g} Hz" in panel.verdict.value
    assert panel.figure.value != before_png and panel.verdict.value != before_verdict
    assert "elliptic" in panel.header.value
    assert panel.filter_order.disabled is False
    panel.filter_kind.value = "none"
    assert panel.filter_order.disabled and panel.cutoff.disabled


def test_threshold_change_matches_the_collision_search(panel, machine, plan):
    panel.rate_choice.value = 2560.0
    n_before = len(_shown_rows(panel))
    panel.threshold_db.value = -40.0
    expected = _expected_rows(machine, _plan_with(plan, acquisition={"threshold_db": -40.0}), 2560.0)
    assert _shown_rows(panel) == expected
    assert 0 < len(expected) < n_before


def test_speed_range_limits_the_map(panel, machine, plan):
    panel.rate_choice.value = 2560.0
    panel.speed_range.value = (300.0, 1200.0)
    # A linear 300..1200 rpm profile: the collisions found on that speed range.
    narrow = _plan_with(plan, speed={"profile": "linear", "start_rpm": 300.0, "end_rpm": 1200.0,
                                     "duration_s": 36.0})
    assert _shown_rows(panel) == _expected_rows(machine, narrow, 2560.0)
    assert panel.current_plan().speed.max_sweep_rate_rpm_per_s == pytest.approx(25.0)  # 1500 rpm / 60 s
    assert "300-1200 rpm" in panel.header.value


def test_hiding_a_source_redraws_lines_and_filters_the_table(panel, machine):
    panel.rate_choice.value = 2560.0
    full_png, verdict = panel.figure.value, panel.verdict.value
    n = len(_shown_rows(panel))
    assert all(r[0].startswith("stage 1 ") for r in _shown_rows(panel))
    panel.sources.value = tuple(v for v in panel.sources.value if v != "stage 1")
    assert panel.figure.value != full_png
    assert _shown_rows(panel) == []
    assert f"{n} more in hidden sources or bands" in panel.table.value
    assert panel.verdict.value == verdict  # the verdict is about the whole machine
    panel.sources.value = tuple(v for _, v in panel.sources.options)
    assert panel.figure.value == full_png


def test_hiding_a_band_drops_its_rows(panel):
    panel.rate_choice.value = 2560.0
    before = panel.figure.value
    panel.bands.value = tuple(b for b in panel.bands.value if b != "housing resonance")
    rows = _shown_rows(panel)
    assert rows and all(r[1] != "housing resonance" for r in rows)
    assert panel.figure.value != before


def test_view_switch_changes_only_the_picture(panel):
    panel.rate_choice.value = 2560.0
    png, table, verdict = panel.figure.value, panel.table.value, panel.verdict.value
    panel.view.value = "order"
    assert panel.figure.value != png
    assert (panel.table.value, panel.verdict.value) == (table, verdict)
    panel.view.value = "hz"
    assert panel.figure.value == png


def test_bad_values_show_an_error_and_keep_the_picture(panel):
    png = panel.figure.value
    panel.speed_range.value = (500.0, 500.0)
    assert 'class="foldline-error"' in panel.verdict.value and "speed range" in panel.verdict.value
    assert panel.figure.value == png
    panel.speed_range.value = (300.0, 1800.0)
    assert 'class="foldline-error"' not in panel.verdict.value
    panel.rate_hz.value = -5.0
    assert "rate_hz = -5.0: must be a positive, finite sample rate (Hz)" in panel.verdict.value


def test_adjusted_filter_values_are_reported(panel):
    panel.cutoff.value = 0.6  # above Nyquist: refused, the panel says why (issue 15)
    assert 'class="foldline-error"' in panel.verdict.value
    assert "at or above Nyquist" in panel.verdict.value


def test_panel_accepts_paths_and_exposes_its_widget(machine):
    panel = FoldMapPanel(str(MACHINE), str(PLAN), rate_hz=5120.0)
    assert panel.machine == machine
    assert panel.rate_choice.value == 5120.0
    assert "foldline-foldmap-panel" in panel.widget._dom_classes
    assert panel.sources.value == tuple(dict.fromkeys(ln.entry for ln in machine.lines()))


# -- SourceEditorPanel -----------------------------------------------------------------------
def _machine_with(machine, table, name, **changes):
    """The machine rebuilt from its dictionary with one entry's keys changed (independent of
    the panel's own editing)."""
    d = machine_to_dict(machine)
    for entry in d[table]:
        if entry["name"] == name:
            entry.update(changes)
    return machine_from_dict(d)


def _collision_count(machine, plan, rate_hz):
    table = find_collisions(machine, plan, rate_hz)
    return int((table["kind"] == "collision").sum())


@pytest.fixture(scope="module")
def shared_editor(machine, plan):
    return SourceEditorPanel(machine, plan, entry="stage 1", rate_hz=2560.0)


@pytest.fixture()
def editor(shared_editor):
    """One editor for the module (its caches make the tests fast), back to its opening state."""
    shared_editor.entry.value = "stage 1"
    shared_editor.rate.value = 2560.0
    shared_editor.reset()
    return shared_editor


def test_editor_opens_with_no_edit(editor, machine, plan):
    n = _collision_count(machine, plan, 2560.0)
    assert editor.result["collisions"] == (n, n)
    assert list(editor.fields) == ["driver_teeth", "driven_teeth"]
    assert editor.fields["driver_teeth"].value == 29
    assert "no edits yet" in editor.header.value
    assert editor.figure.value[:4] == b"\x89PNG"


def test_smaller_pinion_moves_lines_and_collisions(editor, machine, plan):
    png = editor.figure.value
    editor.fields["driver_teeth"].value = 23
    edited = _machine_with(machine, "gear_stage", "stage 1", driver_teeth=23)
    assert editor.machine == edited
    n0, n1 = _collision_count(machine, plan, 2560.0), _collision_count(edited, plan, 2560.0)
    assert editor.result["collisions"] == (n0, n1) and n1 != n0
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", FoldlineWarning)
        assert editor.result["recommended_rate_hz"][1] == advise(edited, plan).recommended_rate_hz
    compare = table_rows(editor.summary.value, "foldline-compare")
    assert compare[0] == ["collisions at 2560 Hz", str(n0), str(n1)]
    # A pinion on the reference shaft meshes at (teeth) x shaft speed: order 23, and at
    # 1800 rpm (30 Hz) 690 Hz (common practice, no source).
    lines = {r[0]: r for r in table_rows(editor.lines_table.value, "foldline-source-lines")}
    assert lines["stage 1 mesh"][2:] == ["29.0000", "23.0000", "870.0", "690.0"]
    assert editor.figure.value != png
    rows = table_rows(editor.collisions.value, "foldline-collisions")
    assert len(rows) == n1


def test_bearing_geometry_moves_its_defect_orders(editor):
    editor.entry.value = "motor DE"
    assert list(editor.fields) == ["rolling_elements", "element_diameter", "pitch_diameter",
                                   "contact_angle_deg"]
    editor.fields["rolling_elements"].value = 9
    # BPFO = n/2 (1 - d/D cos(a)) orders of the shaft (T. A. Harris, Rolling Bearing Analysis,
    # 4th ed., Wiley 2001, ch. 8): 9/2 (1 - 17.462/72.5) = 3.416152.
    lines = {r[0]: r for r in table_rows(editor.lines_table.value, "foldline-source-lines")}
    assert lines["motor DE bpfo"][3] == "3.4162"
    assert "motor DE rolling elements 8 -&gt; 9" in editor.header.value


def test_refused_edit_keeps_the_last_valid_machine(editor):
    editor.fields["driver_teeth"].value = 23
    good, result = editor.machine, dict(editor.result)
    editor.fields["driver_teeth"].value = 0
    assert "driver_teeth = 0: must be a positive integer" in editor.message.value
    assert editor.machine == good and editor.result == result
    editor.fields["driver_teeth"].value = 25
    assert editor.message.value == ""


def test_reset_and_rate_change(editor, machine, plan):
    editor.fields["driver_teeth"].value = 23
    editor.reset_button.click()
    assert editor.machine == machine and editor.fields["driver_teeth"].value == 29
    editor.rate.value = 5120.0
    n = _collision_count(machine, plan, 5120.0)
    assert editor.result["collisions"] == (n, n)


# -- AngleDomainPanel ------------------------------------------------------------------------
@pytest.fixture(scope="module")
def run_path(machine, plan, tmp_path_factory):
    """The bundled demo run, or the same run simulated when the bundle lacks it."""
    if RUN.exists():
        return RUN
    from workbench.runs import simulate_to_wav

    path = tmp_path_factory.mktemp("run") / "agitator_runup.wav"
    simulate_to_wav(machine, plan, 2560.0, path, seed=7, machine_file=MACHINE)
    return path


@pytest.fixture(scope="module")
def shared_angle(run_path):
    return AngleDomainPanel(run_path, plan=PLAN)


@pytest.fixture()
def angle_panel(shared_angle):
    """One panel for the module, back to its opening values; the tacho tab (drawn once) on show
    so that resetting draws nothing: tests open the tab they look at."""
    shared_angle.tabs.selected_index = 0
    shared_angle.reset()
    return shared_angle


@pytest.fixture(scope="module")
def direct(run_path, machine):
    """The same analysis by direct calls of the angle layer (256 samples per rev, 20 revs)."""
    run = read_run(run_path)
    pulses = detect_pulses(run.channel(run.tacho), run.rate_hz)
    angle = tacho_angle(pulses, pulses_per_rev=run.pulses_per_rev, missing_pulses=run.missing_pulses,
                        sample_rate_hz=run.rate_hz)
    sig = resample_to_angle(run.channel("vibration"), run.rate_hz, angle, samples_per_rev=256)
    omap = order_map(sig, revs_per_block=20, max_order=100.0)
    # The identification settings of the command-line tracking (track_run): 20 dB floor, 60
    # ridge points per block, 1.5 bins of tolerance.
    ridges = find_ridges(omap.rpm, omap.order, omap.amplitude, floor_db=20.0, max_per_block=60)
    ident = match_lines(ridges, machine, run.rate_hz, tolerance_orders=1.5 / 20)
    return run, sig, omap, ident


def test_angle_panel_tracks_the_run_and_identifies_aliases(angle_panel, direct):
    run, sig, omap, ident = direct
    assert (angle_panel.samples_per_rev.value, angle_panel.revs_per_block.value) == (256, 20)  # advisor's
    assert angle_panel.progress.value == angle_panel.progress.max == run.n_samples
    assert angle_panel.map_figure.value[:4] == b"\x89PNG"
    rows = table_rows(angle_panel.aliases.value, "foldline-identified")
    shown_aliases = {r[0] for r in rows if r[3] == "yes"}
    assert shown_aliases == set(ident.aliases["line"]) and shown_aliases
    # Hand check of one alias: stage 1 mesh x2 (order 58) in zone 1 shows at 2560 - 58 f_rot Hz,
    # i.e. at order 2560 x 60 / rpm - 58; at the lowest speed of the ridge this is its top order.
    row = next(r for r in rows if r[0] == "stage 1 mesh x2" and r[3] == "yes")
    assert float(row[8]) == pytest.approx(2560 * 60 / float(row[5]) - 58, abs=0.5)
    assert f"{sig.revolutions:.0f} revolutions" in angle_panel.header.value


def test_window_change_redoes_spectra_not_tracking(angle_panel, direct):
    run, sig, _, _ = direct
    png = angle_panel.map_figure.value
    tracked = angle_panel.track()
    angle_panel.window.value = "flattop"
    assert angle_panel.track() is tracked
    angle_panel.tabs.selected_index = 1
    assert angle_panel.map_figure.value != png
    peaks = find_order_peaks(order_spectrum(sig, revs_per_block=20, window="flattop", max_order=100.0), n=10)
    shown = [float(r[0]) for r in table_rows(angle_panel.peaks.value, "foldline-peaks")]
    assert shown == pytest.approx(np.round(peaks.order, 3), abs=1e-9)


def test_samples_per_rev_change_retracks_with_progress(angle_panel):
    angle_panel.samples_per_rev.value = 128
    assert angle_panel.track().samples_per_rev == 128
    assert angle_panel.progress.value == angle_panel.progress.max
    assert "128 samples per rev" in angle_panel.header.value
    angle_panel.protect.value = False
    assert any("alias protection: off" in line for line in angle_panel.track().log)


def test_figures_are_drawn_when_their_tab_opens(angle_panel):
    shown = angle_panel.cuts_figure.value
    angle_panel.cut_orders.value = "1, 58"
    assert angle_panel.cuts_figure.value == shown  # its tab is not on show: not drawn yet
    angle_panel.tabs.selected_index = 1  # the results: map, cuts and spectrum together
    assert angle_panel.cuts_figure.value != shown and angle_panel.cuts_figure.value[:4] == b"\x89PNG"
    assert angle_panel.tacho_figure.value[:4] == b"\x89PNG"  # drawn when its tab was opened
    assert "pulses, 0 doubted" in angle_panel.tacho_info.value


def test_order_cuts_match_direct_cuts(angle_panel, direct):
    _, _, omap, _ = direct
    angle_panel.cut_orders.value = "1, 58"
    cuts = angle_panel.tables()["order_cuts"]
    assert list(cuts.columns) == ["rpm", "order 1", "order 58"]
    np.testing.assert_allclose(cuts["order 58"], order_cut(omap, 58.0).amplitude, rtol=1e-12)
    angle_panel.cut_orders.value = "1, x"
    assert "orders to cut" in angle_panel.status.value and angle_panel.error is not None


def test_export_writes_tables_and_figures(angle_panel, tmp_path):
    tables = angle_panel.export("tables", tmp_path)
    assert {p.name for p in tables} == {"speed.csv", "doubted_pulses.csv", "order_spectrum.csv",
                                        "order_peaks.csv", "order_cuts.csv", "identified_lines.csv",
                                        "unmatched_lines.csv"}
    spectrum = pd.read_csv(tmp_path / "order_spectrum.csv")
    np.testing.assert_allclose(spectrum["amplitude"], angle_panel.tables()["order_spectrum"]["amplitude"],
                               rtol=1e-12)
    angle_panel.folder.value = str(tmp_path / "figs")
    angle_panel.export_figures.click()
    assert sorted(p.name for p in (tmp_path / "figs").iterdir()) == [
        "order_cuts.png", "order_map.png", "order_spectrum.png", "tacho_check.png"]
    assert angle_panel.export("figures", tmp_path / "figs") == []
    assert ("tacho_check.png, order_map.png, order_cuts.png, order_spectrum.png exist(s) already; "
            "nothing written") in angle_panel.status.value
    angle_panel.overwrite.value = True
    assert len(angle_panel.export("tables", tmp_path)) == 7
    angle_panel.overwrite.value = False


def test_a_changed_control_reruns_only_the_stages_it_affects(machine, plan):
    # A short simulated run (tacho + vibration); the panel counts each stage's runs.
    run = simulate_run(machine, plan, 2560.0, duration_s=16.0, seed=3)   # 300 -> 700 rpm
    panel = AngleDomainPanel(run, machine=machine)
    assert panel.error is None
    assert dict(panel.runs) == {s: 1 for s in ("speed", "angle", "spectra", "cuts", "identify")}
    first = panel.cuts()[0].amplitude
    panel.cut_bandwidth.value = 1.0          # cuts (and the identification after them) only
    assert panel.error is None
    assert [panel.runs[s] for s in ("speed", "angle", "spectra", "cuts", "identify")] == [1, 1, 1, 2, 2]
    # a wider band sums more bins: the cut of order 1 can only grow (power sum)
    assert np.all(panel.cuts()[0].amplitude >= first * (1 - 1e-9))
    panel.revs_per_block.value = 8           # the spectra and after; the tracked signal is kept
    assert [panel.runs[s] for s in ("speed", "angle", "spectra", "cuts", "identify")] == [1, 1, 2, 3, 3]
    panel.speed_range.value = "250, 800"
    panel.speed_source.value = "vibration"   # another speed source: everything from the speed
    assert panel.error is None and "speed from the vibration" in panel.tacho_info.value
    assert panel.runs["speed"] == 2 and panel.runs["angle"] == 2
    panel.speed_source.value = "tacho"
    assert panel.error is None and panel.runs["speed"] == 3 and panel.runs["angle"] == 3


def test_run_without_tacho_is_reported(machine, plan):
    run = simulate_run(machine, plan, 2560.0, duration_s=2.0, tacho_channel=False)
    panel = AngleDomainPanel(run, machine=machine)
    assert "no tacho channel" in panel.status.value


# -- validation ------------------------------------------------------------------------------
def test_panels_refuse_what_they_cannot_open(machine, plan):
    with pytest.raises(InputError, match="give a Machine or the path of a machine file"):
        FoldMapPanel(42, plan)
    with pytest.raises(InputError, match="give a Plan or the path of a plan file"):
        FoldMapPanel(machine, 42)
    with pytest.raises(InputError, match="not an editable source .* choose one of 'stage 1'"):
        SourceEditorPanel(machine, plan, entry="motor")
    shafts_only = machine_from_dict({"machine": {"name": "bare", "reference": "input"},
                                     "shaft": [{"name": "input"}]})
    bare_plan = _plan_with(plan, acquisition={})
    bare_plan = dataclasses.replace(bare_plan, bands=(), limits=())
    with pytest.raises(InputError, match="has no gear stage, planetary stage, bearing or rotor"):
        SourceEditorPanel(shafts_only, bare_plan)


def test_narrowed_speed_checks_the_range(plan):
    with pytest.raises(InputError, match="choose 0 <= low < high"):
        narrowed_speed(plan.speed, 900.0, 900.0)
    with pytest.raises(InputError, match="choose 0 <= low < high"):
        narrowed_speed(plan.speed, -10.0, 900.0)
    assert narrowed_speed(plan.speed, 300.0, 1800.0) is plan.speed
    # A coast-down stays a coast-down; 1500 rpm in 60 s is 25 rpm/s, so 600 rpm take 24 s.
    coast = dataclasses.replace(plan.speed, start_rpm=1800.0, end_rpm=300.0)
    part = narrowed_speed(coast, 600.0, 1200.0)
    assert (part.start_rpm, part.end_rpm, part.duration_s) == (1200.0, 600.0, pytest.approx(24.0))


def test_angle_panel_names_what_it_can_export_and_draw(angle_panel, tmp_path):
    assert angle_panel.export("movies", tmp_path) == []
    assert "choose &#x27;tables&#x27; or &#x27;figures&#x27;" in angle_panel.status.value
    with pytest.raises(InputError, match="choose one of tacho, map, cuts, spectrum"):
        angle_panel.figure("campbell")


# -- AngleDomainPanel: order extraction tab (Vold-Kalman filter) ------------------------------
def test_extraction_tab_matches_the_direct_extraction_plays_and_exports(angle_panel, direct, tmp_path):
    from workbench.angle import extract_orders
    from workbench.runs import read_wav

    run = direct[0]
    angle_panel.extract_orders.value = "1, 29"
    angle_panel.extract_bandwidth.value = 2.0
    assert angle_panel.tabs.get_title(2) == "order extraction"
    angle_panel.tabs.selected_index = 2
    assert angle_panel.extract_figure.value[:4] == b"\x89PNG"
    # The same extraction by a direct call of the angle layer with the run's tacho angle.
    angle = tacho_angle(detect_pulses(run.channel(run.tacho), run.rate_hz),
                        pulses_per_rev=run.pulses_per_rev, missing_pulses=run.missing_pulses,
                        sample_rate_hz=run.rate_hz)
    ref = extract_orders(run.channel("vibration"), run.rate_hz, angle, (1.0, 29.0), bandwidth_hz=2.0)
    ex = angle_panel.extraction()
    np.testing.assert_allclose(ex.envelope, ref.envelope, rtol=0, atol=1e-12 * np.abs(ref.envelope).max())
    assert "-3 dB bandwidth 2 Hz" in angle_panel.extract_info.value
    # The player holds order 1's waveform as a WAV (RIFF) file; choosing order 29 replaces it.
    first = bytes(angle_panel.extract_audio.value)
    assert first[:4] == b"RIFF"
    angle_panel.extract_play.value = 29.0
    assert bytes(angle_panel.extract_audio.value) != first
    # Export: float32 WAV at the run's rate and length, equal to the rebuilt waveform.
    written = angle_panel.export_waveforms(tmp_path)
    assert sorted(p.name for p in written) == ["order_1.csv", "order_1.wav", "order_29.csv", "order_29.wav"]
    data, info = read_wav(tmp_path / "order_29.wav")
    assert info.sample_format == "float32" and info.rate_hz == run.rate_hz and info.n_frames == run.n_samples
    np.testing.assert_allclose(np.asarray(data).ravel(), ex.waveform(29.0).astype(np.float32), rtol=0, atol=0)
    assert angle_panel.export_waveforms(tmp_path) == []
    assert "exist(s) already; nothing written" in angle_panel.status.value
    # Percentage bandwidth: 2 % of order 29 follows the speed (2 % x 29 x rpm / 60).
    angle_panel.extract_unit.value = "pct"
    ex = angle_panel.extraction()
    np.testing.assert_allclose(ex.bandwidth_hz[1], 0.02 * 29 * ex.rpm / 60, rtol=1e-9)
    angle_panel.extract_orders.value = "1, x"
    assert "orders to extract" in angle_panel.status.value and angle_panel.error is not None
    angle_panel.extract_unit.value = "hz"
    angle_panel.extract_orders.value = "1, 29"
def test_angle_panel_offers_the_three_speed_sources():
    # A run-up without a tacho, 1200 -> 2400 rpm in 10 s (truth: the closed-form profile):
    # orders 1 and 2 in the vibration, and a drive's speed output at 600 rpm per volt.
    from workbench.runs import Run

    rate = 2048.0
    t = np.arange(int(10 * rate)) / rate
    revs = (1200.0 * t + 60.0 * t * t) / 60.0
    vib = np.cos(2 * np.pi * revs) + 0.5 * np.cos(4 * np.pi * revs)
    run = Run(np.vstack([vib, (1200.0 + 120.0 * t) / 600.0]), rate, ("vibration", "drive"))
    panel = AngleDomainPanel(run, channel="vibration")
    assert "no tacho channel" in panel.status.value          # the tacho is the default source
    panel.speed_range.value = "1000, 2600"
    panel.speed_source.value = "vibration"
    assert panel.error is None and "speed from the vibration" in panel.tacho_info.value
    _, angle = panel.tacho()
    assert angle.rpm_at(5.0) == pytest.approx(1800.0, rel=2e-3)
    panel.speed_channel.value = "drive"
    panel.speed_scale.value = 600.0
    panel.speed_source.value = "channel"
    assert panel.error is None and "speed from the channel" in panel.tacho_info.value
    _, angle = panel.tacho()
    assert angle.rpm_at(5.0) == pytest.approx(1800.0, rel=1e-4)
    assert panel.track().revolutions == pytest.approx(angle.revolutions, rel=0.05)
