"""Tracking settings (one frozen object) and the staged analysis (each stage kept)."""

from __future__ import annotations

import math

import numpy as np
import pytest

from workbench.errors import InputError
from workbench.runs import Channel, Run
from workbench.runs.analysis import track_run
from workbench.runs.pipeline import STAGES, TrackingPipeline, first_stage
from workbench.runs.settings import ANALYSER_FACTOR, SettingError, TrackingSettings

RATE = 2048.0


def _run(freq_hz=50.0, amp=3.0, duration_s=16.0, unit="m/s^2"):
    """One acceleration channel holding a sinusoid, with the read entry in its log."""
    t = np.arange(int(duration_s * RATE)) / RATE
    x = amp * np.sin(2 * np.pi * freq_hz * t)
    run = Run(x[None, :].astype(np.float32), RATE, (Channel("acc", unit),), source="tone.npz")
    return run.with_log("read", {"format": "test"})


def test_settings_check_their_fields_by_name():
    with pytest.raises(SettingError, match=r"^samples_per_rev = 3: must be a whole number from 8 "
                                           r"to 65536$"):
        TrackingSettings(samples_per_rev=3)
    with pytest.raises(InputError, match=r"^revs_per_block = -1: must be a positive number"):
        TrackingSettings(revs_per_block=-1)
    with pytest.raises(InputError, match=r"^envelope_hz = \[900, 400\]: must satisfy 0 < LO < HI"):
        TrackingSettings(envelope_hz=(900, 400))
    with pytest.raises(InputError, match=r"^cut_orders = .*every order must be a positive number"):
        TrackingSettings(cut_orders=(1.0, -2.0))
    # The analyser factor: 2.56 x the highest frequency of interest (common practice, no source).
    assert ANALYSER_FACTOR == 2.56
    assert TrackingSettings().top_order == pytest.approx(256 / 2.56)
    assert TrackingSettings(max_order=40.0).top_order == 40.0


def test_default_cut_orders_one_rule():
    class Peaks:
        order = np.array([28.0, 28.675, 29.0, 57.0])

    st = TrackingSettings(samples_per_rev=64)   # top order 25
    # without machine and plan: order 1 and the three strongest peaks below the top order
    assert TrackingSettings().cut_orders_for(peaks=Peaks()) == (1.0, 28.0, 28.675, 29.0)
    assert st.cut_orders_for(peaks=Peaks()) == (1.0,)
    assert TrackingSettings(cut_orders=(2.0, 3.0)).cut_orders_for() == (2.0, 3.0)


def test_first_stage_of_each_change():
    base = TrackingSettings(rpm=600.0)
    assert first_stage(base, base) is None
    assert first_stage(base, TrackingSettings(rpm=700.0)) == "speed"
    assert first_stage(base, TrackingSettings(rpm=600.0, samples_per_rev=128)) == "angle"
    assert first_stage(base, TrackingSettings(rpm=600.0, window="flattop")) == "spectra"
    assert first_stage(base, TrackingSettings(rpm=600.0, cut_orders=(2.0,))) == "cuts"
    assert first_stage(base, TrackingSettings(rpm=600.0, threads=2)) is None
    # a tacho speed's default tolerance moves with the block length: the speed is redone
    assert first_stage(TrackingSettings(), TrackingSettings(revs_per_block=32)) == "speed"


def test_pipeline_reruns_only_the_stages_a_change_affects():
    pipe = TrackingPipeline(_run(), TrackingSettings(rpm=600.0, samples_per_rev=64,
                                                     revs_per_block=8, rf_map=False),
                            keep_signal=True)
    first = pipe.analysis()
    assert dict(pipe.runs) == {s: 1 for s in STAGES}
    assert pipe.update(window="flattop") == "spectra"
    pipe.analysis()
    assert [pipe.runs[s] for s in STAGES] == [1, 1, 2, 2, 2]
    assert pipe.update(cut_orders=(1.0, 5.0)) == "cuts"
    again = pipe.analysis()
    assert [pipe.runs[s] for s in STAGES] == [1, 1, 2, 3, 3]
    assert [c.order for c in again.first.cuts] == [1.0, 5.0]
    assert pipe.update(threads=2) is None
    pipe.analysis()
    assert [pipe.runs[s] for s in STAGES] == [1, 1, 2, 3, 3]
    assert pipe.update(samples_per_rev=128) == "angle"
    pipe.analysis()
    assert [pipe.runs[s] for s in STAGES] == [1, 2, 3, 4, 4]
    # without the kept signal, a spectra setting tracks again
    lean = TrackingPipeline(_run(), TrackingSettings(rpm=600.0, samples_per_rev=64,
                                                     revs_per_block=8, rf_map=False))
    lean.analysis()
    lean.update(window="flattop")
    lean.analysis()
    assert [lean.runs[s] for s in STAGES] == [1, 2, 2, 2, 2]
    # the same spectra either way
    np.testing.assert_allclose(lean.analysis().first.spectrum.amplitude,
                               pipe.analysis().first.spectrum.amplitude if False else
                               TrackingPipeline(_run(), lean.settings, keep_signal=True)
                               .analysis().first.spectrum.amplitude, rtol=1e-12)
    assert first.first.top_order == pytest.approx(64 / 2.56)


def test_analysis_carries_the_runs_log_then_its_stages():
    a = track_run(_run(), rpm=600.0, samples_per_rev=64, revs_per_block=8, rf_map=False)
    actions = [e[1] for e in a.log]
    assert actions[0] == "read" and a.log[0][2] == {"format": "test"}
    assert {"speed", "angle", "cuts"} <= set(actions)
    assert all(len(e) == 3 and isinstance(e[2], dict) for e in a.log)
    assert a.settings.samples_per_rev == 64 and a.settings.cut_orders


def test_keyword_and_settings_callers_agree():
    st = TrackingSettings(rpm=600.0, samples_per_rev=64, revs_per_block=8, rf_map=False)
    a = track_run(_run(), settings=st)
    b = track_run(_run(), rpm=600.0, samples_per_rev=64, revs_per_block=8, rf_map=False)
    np.testing.assert_array_equal(a.spectrum.amplitude, b.spectrum.amplitude)
    with pytest.raises(InputError, match="unknown option 'samples'"):
        track_run(_run(), samples=64)


@pytest.mark.parametrize("to", ["velocity", "displacement"])
def test_integrated_overall_level_of_a_sinusoid(to):
    # A sinusoid of acceleration amplitude A at f has velocity RMS A / (2 pi f) / sqrt 2 and
    # displacement RMS A / (2 pi f)^2 / sqrt 2 (calculus; mm/s and um from m/s^2).
    f, amp = 50.0, 3.0
    a = track_run(_run(f, amp), rpm=600.0, samples_per_rev=64, revs_per_block=8, rf_map=False,
                  integrate=to)
    p, k = (1, 1e3) if to == "velocity" else (2, 1e6)
    expected = k * amp / (2 * math.pi * f) ** p / math.sqrt(2)
    rms = a.overall.rms[np.isfinite(a.overall.rms)]
    assert rms.size and np.all(np.abs(rms / expected - 1) < 0.02)
    assert a.overall.unit == ("mm/s" if to == "velocity" else "um")
    plain = track_run(_run(f, amp), rpm=600.0, samples_per_rev=64, revs_per_block=8, rf_map=False)
    assert np.nanmedian(plain.overall.rms) == pytest.approx(amp / math.sqrt(2), rel=0.02)


def test_core_arguments_are_named_by_field_and_the_command_names_its_option(capsys):
    # A Python call names the argument; the command, through its one field -> option table,
    # names the option the value came from (common practice, no source).
    from workbench.angle.scaling import AmplitudeScaling
    from workbench.cli.main import main

    with pytest.raises(InputError, match=r"^db_ref = -1\.0: "):
        AmplitudeScaling(db_ref=-1.0)
    assert main(["track", "x.wav", "--db", "-1"]) == 2
    err = capsys.readouterr().err
    assert err.startswith("foldline: error: --db -1"), err
