"""Guard rails against plausible mistakes (issue 15): one-line warnings for implausible rates and
tacho wheels, the advice on filter "none", one meaning for "clean", files recognised when
given in the wrong place, no Python argument names in messages, exports that say why they
wrote nothing.

Truths: a rate typed in kHz (10.24 for 10240 S/s) is below every machine line; the folding rule
(a line above the rate is folded; common practice, no source); analytic tacho pulse trains
whose wheel is known (a 2-tooth wheel with its teeth 0.46 rev apart repeats its spacing every
2 pulses; a 1-pulse tape has no pattern, only jitter).
"""

from __future__ import annotations

import json
import re
import warnings

import numpy as np
import pytest

from workbench.cli.main import main
from workbench.errors import FoldlineWarning, MachineFileError, PlanFileError, RunFileError
from workbench.machine import read_machine
from workbench.runs.tacho_checks import pulse_spacing_period, wheel_warnings
from workbench.sampling import advise, fold_map, plan_from_dict, plan_to_dict, read_plan
from workbench.sampling.guards import NO_FILTER_NOTE, rate_warnings

from builders import DEMO_MACHINE as MACHINE, DEMO_PLAN as PLAN, DEMO_RUN as RUN, ROOT

PACKAGE = ROOT / "workbench"


def _stderr_lines(capsys):
    return [line for line in capsys.readouterr().err.splitlines() if line]


# --------------------------------------------------------------------------------------------
# rates


def test_rate_in_khz_warns_in_the_command_with_the_likely_meaning(capsys):
    code = main(["foldmap", str(MACHINE), str(PLAN), "--rate", "10.24", "--json"])
    assert code == 0
    captured = capsys.readouterr()
    json.loads(captured.out)  # still exactly one JSON object on stdout
    lines = captured.err.splitlines()
    hits = [ln for ln in lines if "did you mean 10.24 kHz (10240 Hz)?" in ln]
    assert len(hits) == 1 and hits[0].startswith("foldline: warning: "), lines
    code = main(["alias", "5000", "--rate", "12.8", "--json"])
    assert code == 0
    assert any("did you mean 12.8 kHz (12800 Hz)?" in ln for ln in _stderr_lines(capsys))


def test_rate_below_the_slowest_line_at_top_speed_warns_and_a_sound_rate_does_not():
    from workbench.machine import machine_from_dict

    # A fast fan: its slowest line is the shaft's order 1, 200 Hz at 12000 rpm.  At 150 S/s
    # every line lies above the rate (folded), though 150 is above the 100 Hz floor.
    machine = machine_from_dict({"machine": {"name": "fan", "reference": "in"},
                                 "shaft": [{"name": "in"}],
                                 "rotor": [{"name": "blades", "shaft": "in", "count": 6,
                                            "harmonics": 2}]})
    lines = machine.lines()
    texts = rate_warnings(150.0, lines=lines, top_rpm=12000.0)
    assert len(texts) == 1, texts
    assert "below the machine's slowest line at top speed (in shaft, 200.0 Hz at 12000 rpm)" in texts[0]
    assert rate_warnings(2560.0, lines=lines, top_rpm=12000.0) == ()
    with warnings.catch_warnings():
        warnings.simplefilter("error", FoldlineWarning)
        fold_map(read_machine(MACHINE), read_plan(PLAN), 2560.0)  # plausible: no warning


def test_candidate_rates_are_checked_by_the_advisor():
    machine = read_machine(MACHINE)
    d = plan_to_dict(read_plan(PLAN))
    d["acquisition"]["rates_hz"] = [10.24, 5120.0]
    plan = plan_from_dict(d)
    with pytest.warns(FoldlineWarning, match=r"candidate rate 10\.24 Hz .*did you mean 10\.24 kHz"):
        advise(machine, plan)


# --------------------------------------------------------------------------------------------
# filters


def test_cutoff_at_or_above_nyquist_is_refused_by_the_command(tmp_path, capsys):
    text = PLAN.read_text().replace("cutoff = 0.39", "cutoff = 0.6")
    (tmp_path / "p.toml").write_text(text)
    code = main(["foldmap", str(MACHINE), str(tmp_path / "p.toml"), "--rate", "5120"])
    err = capsys.readouterr().err
    assert code == 2 and err.count("\n") == 1
    assert "[acquisition]: cutoff = 0.6: lies at or above Nyquist (0.5 x rate)" in err


def test_cutoff_above_nyquist_is_refused_by_the_fold_map_panel():
    pytest.importorskip("ipywidgets")
    from workbench.ui import FoldMapPanel

    panel = FoldMapPanel(MACHINE, PLAN, rate_hz=5120.0)
    png = panel.figure.value
    panel.cutoff.value = 0.6
    assert 'class="foldline-error"' in panel.verdict.value
    assert "at or above Nyquist" in panel.verdict.value
    assert panel.figure.value == png  # nothing recomputed from the refused filter


def test_no_filter_advice_says_what_folds_unseen():
    d = plan_to_dict(read_plan(PLAN))
    d["acquisition"] = {"rates_hz": [5120.0], "filter": "none"}
    advice = advise(read_machine(MACHINE), plan_from_dict(d))
    assert NO_FILTER_NOTE in advice.notes
    assert "broadband noise and anything unmodelled" in NO_FILTER_NOTE


# --------------------------------------------------------------------------------------------
# "clean": no collision, everywhere; capturing the highest order said apart


def test_clean_means_no_collision_in_panel_command_and_report():
    pytest.importorskip("ipywidgets")
    from workbench.ui import FoldMapPanel

    machine, plan = read_machine(MACHINE), read_plan(PLAN)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", FoldlineWarning)
        advice = advise(machine, plan)
    cand = advice.candidates.set_index("rate_hz")
    # A rate that is clean but misses the highest order exists in the demo (5120 Hz).
    clean_not_capturing = [r for r in cand.index if cand.loc[r, "clean"]
                           and not cand.loc[r, "captures_max_order"]]
    assert clean_not_capturing, cand
    rate = clean_not_capturing[0]
    panel = FoldMapPanel(MACHINE, PLAN, rate_hz=float(rate))
    text = re.sub(r"<[^>]+>", "", panel.verdict.value)
    assert f"{rate:g} Hz is clean (no collision)" in text
    assert "does not capture the highest order" in text
    # A rate with collisions is "not clean" everywhere.
    dirty = [r for r in cand.index if not cand.loc[r, "clean"]][0]
    panel.rate_hz.value = float(dirty)
    assert f"{dirty:g} Hz is not clean" in re.sub(r"<[^>]+>", "", panel.verdict.value)


# --------------------------------------------------------------------------------------------
# tacho wheels


def _pulses(positions, *, revs=400, jitter_s=2e-5, seed=0):
    # Linear run-up 600 -> 1800 rpm; pulse k of rev n at angle n + positions[k] (revolutions).
    rng = np.random.default_rng(seed)
    duration = 20.0
    t = np.linspace(0.0, duration, 400_001)
    r = (600.0 * t + 0.5 * 1200.0 * t * t / duration) / 60.0
    angles = np.array([n + p for n in range(int(r[-1]) - 1) for p in positions][: revs * len(positions)])
    return np.interp(angles, r, t) + rng.normal(0.0, jitter_s, angles.size)


def test_pulse_spacing_pattern_finds_the_wheels_period():
    assert pulse_spacing_period(_pulses([0.0])) is None                  # 1 pulse per rev: jitter only
    assert pulse_spacing_period(_pulses([0.0, 0.46])) == 2               # 2 uneven teeth
    assert pulse_spacing_period(_pulses([0.0, 0.26, 0.5, 0.74])) == 4   # 4 uneven teeth


def test_wheel_contradicting_the_given_pulses_per_rev_warns():
    two_teeth = _pulses([0.0, 0.46])
    texts = wheel_warnings(two_teeth, pulses_per_rev=1)
    assert len(texts) == 1 and "repeats every 2 pulses, but pulses per rev is 1" in texts[0]
    assert "--pulses-per-rev" in texts[0]
    assert wheel_warnings(two_teeth, pulses_per_rev=2) == ()
    assert wheel_warnings(_pulses([0.0]), pulses_per_rev=1) == ()


def test_track_warns_when_pulses_per_rev_contradicts_sidecar_and_plan(capsys):
    # The demo run's tacho gives 1 pulse per rev (its sidecar) and the plan runs to 1800 rpm.
    code = main(["track", str(RUN), "--pulses-per-rev", "2", "--plan", str(PLAN),
                 "--samples-per-rev", "64", "--json"])
    assert code == 0
    captured = capsys.readouterr()
    assert json.loads(captured.out)["rpm_max"] < 1000  # the halved speed, as the warning says
    lines = captured.err.splitlines()
    assert any("--pulses-per-rev 2 differs from the sidecar's pulses_per_rev 1" in ln for ln in lines), lines
    assert any(re.search(r"top speed of 9\d\d rpm, about 1/2 x the plan's 1800 rpm", ln) for ln in lines), lines
    assert all(ln.startswith("foldline: warning: ") for ln in lines), lines


# --------------------------------------------------------------------------------------------
# files in the wrong place


def test_files_in_the_wrong_place_are_named_for_what_they_are(tmp_path):
    with pytest.raises(MachineFileError, match="looks like a run file .*not the machine file"):
        read_machine(RUN)
    with pytest.raises(MachineFileError, match="looks like a plan file .*machine file comes first"):
        read_machine(PLAN)
    with pytest.raises(PlanFileError, match="looks like a machine file .*machine file comes first"):
        read_plan(MACHINE)
    with pytest.raises(PlanFileError, match="looks like a run file"):
        read_plan(RUN)
    from workbench.runs import read_run

    with pytest.raises(RunFileError, match="looks like a plan file .*give the recorded run here"):
        read_run(PLAN)
    with pytest.raises(RunFileError, match="looks like a run's JSON sidecar"):
        read_run(RUN.with_suffix(".json"))
    # A genuinely broken machine file still gets the parser's message.
    (tmp_path / "m.toml").write_text("[machine\nname = 'x'\n")
    with pytest.raises(MachineFileError, match="not valid TOML"):
        read_machine(tmp_path / "m.toml")


# --------------------------------------------------------------------------------------------
# messages


def test_no_python_argument_names_in_messages():
    # Messages users read name command options or file keys, not Python keyword arguments
    # such as "(force=True)" or "(n_top)" inside a message text.
    leaks = []
    for path in PACKAGE.rglob("*.py"):
        for number, line in enumerate(path.read_text().splitlines(), 1):
            if re.search(r"""["'][^"']*\((?:force|n_top)(?:=True|=False)?\)""", line):
                leaks.append(f"{path.relative_to(ROOT)}:{number}: {line.strip()}")
    assert not leaks, leaks
    from workbench.runs import check_writable
    from workbench.errors import OutputExistsError

    with pytest.raises(OutputExistsError) as err:
        check_writable(PLAN, force=False)
    assert "force=" not in str(err.value) and "--force" in str(err.value)


def test_failed_export_in_the_angle_panel_says_why_and_writes_nothing(tmp_path):
    pytest.importorskip("ipywidgets")
    from workbench.ui import AngleDomainPanel

    with warnings.catch_warnings():
        warnings.simplefilter("ignore", FoldlineWarning)
        panel = AngleDomainPanel(RUN, machine=MACHINE)
        panel.cut_orders.value = "1, abc"
        for what in ("tables", "figures"):
            folder = tmp_path / what
            assert panel.export(what, folder) == []
            status = re.sub(r"<[^>]+>", " ", panel.status.value)
            assert f"{what} not exported (nothing written)" in status
            assert "orders to cut" in status
            assert not folder.exists() or not any(folder.iterdir())
