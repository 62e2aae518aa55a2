"""Batches of runs: band levels, serial and Dask runs giving the same results, bad runs listed
with their error, resuming.

Expected values: band levels against a Hann-windowed numpy FFT of sinusoids of known amplitude
(numpy as the reference library; Hann window equivalent noise bandwidth 1.5 bins from Harris,
Proc. IEEE 66(1), 1978, Table 1); the batch results against the serial run of the same
function (the cluster must not change a number) and against ``foldline track --json``.
"""

from __future__ import annotations

import json
import math
import shutil
import warnings
from pathlib import Path
from types import SimpleNamespace

import numpy as np
import pandas as pd
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from workbench.batch import (LEVEL_PREFIX, BatchSettings, band_level_series, band_levels,
                             read_summary, run_batch)
from workbench.cli.verbs.batch import TextProgress
from workbench.cli.main import main
from workbench.errors import FoldlineWarning, InputError
from workbench.machine import read_machine
from workbench.runs import simulate_to_wav
from workbench.sampling import Band, plan_from_dict, plan_to_dict, read_plan, write_plan

from builders import DEMO_MACHINE as MACHINE, DEMO_PLAN as PLAN
RATE = 2560.0
REVS_PER_BLOCK = 8
SPR = 128


# --------------------------------------------------------------------------------------------
# band levels


def _hann_map(tones, *, revs_per_block, spr, rpm):
    """Order map of one block per speed, each block holding the given (order, amplitude) tones,
    by a Hann-windowed numpy FFT amplitude-corrected with the window's coherent gain."""
    n = revs_per_block * spr
    theta = np.arange(n) / spr                     # revolutions
    w = np.hanning(n + 1)[:-1]                      # periodic Hann
    rows = []
    for _ in rpm:
        x = sum(a * np.cos(2 * np.pi * o * theta + 0.3) for o, a in tones)
        rows.append(np.abs(np.fft.rfft(x * w)) * 2.0 / w.sum())
    order = np.arange(n // 2 + 1) / revs_per_block
    return SimpleNamespace(rpm=np.asarray(rpm, float), order=order, amplitude=np.array(rows), enbw_bins=1.5)


def test_band_level_of_a_tone_is_its_amplitude():
    # A tone of amplitude 0.7 at order 5.3 (between bins), band 4..7 orders: the energy sum
    # over the band, corrected by ENBW, gives the amplitude back (Parseval).
    omap = _hann_map([(5.3, 0.7)], revs_per_block=8, spr=64, rpm=[600.0, 1200.0])
    level = band_level_series(omap, Band("b", orders=(4.0, 7.0)))
    np.testing.assert_allclose(level, 0.7, rtol=2e-3)


def test_band_fixed_in_hz_moves_in_orders_with_speed():
    # Band 40..60 Hz: orders 4..6 at 600 rpm (holds the tone at order 5.3), orders 2..3 at
    # 1200 rpm (does not): level 0.7, then only leakage (Hann sidelobes, far below 1e-3).
    omap = _hann_map([(5.3, 0.7)], revs_per_block=8, spr=64, rpm=[600.0, 1200.0])
    level = band_level_series(omap, Band("b", hz=(40.0, 60.0)))
    assert level[0] == pytest.approx(0.7, rel=2e-3)
    assert level[1] < 1e-3
    assert band_levels(omap, [Band("b", hz=(40.0, 60.0))])["b"] == pytest.approx(0.7, rel=2e-3)


def test_band_around_a_line_follows_the_line():
    machine = read_machine(MACHINE)
    lines = machine.lines()
    bpfi = next(ln for ln in lines if ln.name == "motor DE bpfi")
    omap = _hann_map([(bpfi.order, 0.25), (1.0, 3.0)], revs_per_block=16, spr=64, rpm=[900.0])
    level = band_levels(omap, [Band("inner", around="motor DE bpfi", width_pct=20.0)], lines)
    assert level["inner"] == pytest.approx(0.25, rel=3e-3)


@settings(max_examples=25, deadline=None)
@given(a1=st.floats(0.01, 10.0), a2=st.floats(0.01, 10.0), frac=st.floats(0.0, 0.99))
def test_band_level_adds_on_power(a1, a2, frac):
    # Two tones well apart inside one band: levels add as sqrt(a1^2 + a2^2) (Parseval).
    omap = _hann_map([(10.0 + frac / 8, a1), (20.0 + frac / 8, a2)], revs_per_block=8, spr=64, rpm=[1000.0])
    level = band_level_series(omap, Band("b", orders=(7.0, 23.0)))[0]
    assert level == pytest.approx(math.hypot(a1, a2), rel=3e-3)


def test_band_level_edge_cases():
    omap = _hann_map([(5.0, 1.0)], revs_per_block=8, spr=64, rpm=[0.0, 600.0])
    level = band_level_series(omap, Band("b", orders=(4.0, 6.0)))
    assert math.isnan(level[0]) and level[1] == pytest.approx(1.0, rel=2e-3)
    # A band narrower than a bin between two bins holds no bin: NaN, not 0.
    assert math.isnan(band_levels(omap, [Band("thin", orders=(5.01, 5.05))])["thin"])
    with pytest.raises(InputError, match="expected"):
        band_level_series(SimpleNamespace(rpm=np.ones(2), order=np.ones(3), amplitude=np.ones((3, 2))),
                          Band("b", orders=(1, 2)))
    with pytest.raises(InputError, match="enbw_bins"):
        band_level_series(SimpleNamespace(rpm=np.ones(1), order=np.ones(3), amplitude=np.ones((1, 3)),
                                          enbw_bins=0.0), Band("b", orders=(1, 2)))


# --------------------------------------------------------------------------------------------
# batches of short simulated runs


@pytest.fixture(scope="module")
def scenario(tmp_path_factory):
    """Three short simulated runs of the demo machine (4 s at 2560 S/s), one corrupt run, and
    a short plan file with the demo's bands."""
    base = tmp_path_factory.mktemp("batch")
    runs = base / "runs"
    runs.mkdir()
    d = plan_to_dict(read_plan(PLAN))
    d["speed"] = {"profile": "linear", "start_rpm": 600.0, "end_rpm": 1500.0, "duration_s": 4.0}
    plan = plan_from_dict(d)
    plan_path = write_plan(plan, base / "short_plan.toml")
    machine = read_machine(MACHINE)
    paths = []
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", FoldlineWarning)
        for seed in (1, 2, 3):
            paths.append(simulate_to_wav(machine, plan, RATE, runs / f"run{seed}.wav", seed=seed,
                                         noise_db=-50.0))
    bad = runs / "broken.wav"
    bad.write_bytes(b"RIFF\x10\x00\x00\x00WAVEjunk")
    paths.insert(2, bad)
    return SimpleNamespace(base=base, runs=paths, plan=plan_path, bad=bad)


def _settings(sc):
    return BatchSettings.make(track={"samples_per_rev": SPR, "revs_per_block": REVS_PER_BLOCK},
                              machine_path=str(MACHINE), plan_path=str(sc.plan),
                              cut_orders=(1.0, 29.0))


def _comparable(table):
    return table.drop(columns=["seconds"]).reset_index(drop=True)


@pytest.fixture(scope="module")
def serial(scenario):
    out = scenario.base / "serial"
    return out, run_batch(scenario.runs, out, settings=_settings(scenario), workers=0)


def test_serial_batch_summarises_every_run(serial, scenario):
    out, result = serial
    table = result.summary
    assert list(table["file"]) == [str(p) for p in scenario.runs]
    ok = table[table["status"] == "ok"]
    assert len(ok) == 3 and len(result.done) == 3
    bad = table[table["status"] == "error"].iloc[0]
    assert bad["file"] == str(scenario.bad) and "broken.wav" in bad["error"]
    assert result.failed == ((str(scenario.bad), bad["error"]),)
    for c in [f"{LEVEL_PREFIX}{b.name}" for b in read_plan(scenario.plan).bands]:
        assert c in table.columns and np.isfinite(ok[c]).all() and (ok[c] > 0).all()
    # Speeds from the tacho of a 600 -> 1500 rpm run-up.
    assert ok["rpm_min"].between(590, 700).all() and ok["rpm_max"].between(1400, 1510).all()
    for row in ok.itertuples():
        assert (out / row.spectrum_csv).is_file() and (out / row.cuts_csv).is_file()
        assert row.spectrum_csv == f"{Path(row.file).stem}_{row.sha256[:8]}_spectrum.csv"
        tops = row.top_orders.split(";")
        assert len(tops) == 5 and all(len(t.split(":")) == 2 for t in tops)
        n_alias = 0 if not row.alias_lines else len(row.alias_lines.split("; "))
        assert row.aliases == n_alias
    # Parquet and CSV hold the same table.
    pq = pd.read_parquet(out / "summary.parquet")
    csv = pd.read_csv(out / "summary.csv", keep_default_na=False)
    assert list(pq.columns) == list(table.columns) == list(csv.columns)
    pd.testing.assert_frame_equal(_comparable(read_summary(out)), _comparable(table))


def test_spectrum_file_matches_track_json(serial, scenario, capsys):
    out, result = serial
    row = result.summary[result.summary["status"] == "ok"].iloc[0]
    capsys.readouterr()
    assert main(["track", row["file"], "--samples-per-rev", str(SPR), "--revs-per-block",
                 str(REVS_PER_BLOCK), "--json"]) == 0
    ref = json.loads(capsys.readouterr().out)
    spec = pd.read_csv(out / row["spectrum_csv"])
    np.testing.assert_array_equal(spec["order"].to_numpy(), ref["order_spectrum"]["order"])
    np.testing.assert_array_equal(spec["amplitude"].to_numpy(), ref["order_spectrum"]["amplitude"])
    assert row["rpm_min"] == ref["rpm_min"] and row["rpm_max"] == ref["rpm_max"]
    top = sorted(ref["peaks"], key=lambda p: -p["amplitude"])[:5]
    assert row["top_orders"] == ";".join(f"{p['order']:.2f}:{p['amplitude']:.3g}" for p in top)


def test_batch_writes_what_track_writes_and_the_overall_maximum(serial, scenario):
    from workbench.runs import read_run
    from workbench.runs.analysis import track_run
    from workbench.runs.mapdata import read_map_data

    out, result = serial
    ok = result.summary[result.summary["status"] == "ok"]
    for row in ok.head(2).itertuples():
        tag = f"{Path(row.file).stem}_{row.sha256[:8]}"
        for name in ("unmatched.csv", "overall_level.csv", "order_map.npz", "order_map.parquet"):
            assert (out / f"{tag}_{name}").is_file(), name
        # the batch does not compute the frequency map (a second pass): no file for it
        assert not (out / f"{tag}_frequency_map.npz").exists()
        # the same run tracked directly with the batch's settings
        direct = track_run(row.file, machine=MACHINE, samples_per_rev=SPR,
                           revs_per_block=REVS_PER_BLOCK, cut_orders=(1.0, 29.0), rf_map=False)
        level, rpm = direct.overall.maximum()
        assert row.overall_max == pytest.approx(level, rel=1e-12)
        assert row.overall_max_rpm == pytest.approx(rpm, rel=1e-12)
        table = pd.read_csv(out / f"{tag}_overall_level.csv")
        assert list(table.columns) == ["rpm", "rms", "blocks"]
        assert table["rms"].max() == pytest.approx(row.overall_max, rel=1e-12)
        # Parseval (common practice, no source): the whole record's mean square is the
        # blocks' mean squares averaged, so it cannot exceed the highest row (2 % for the
        # record's ends outside full blocks)
        x = read_run(row.file).channel(row.channel)
        assert float(np.std(x)) <= row.overall_max * 1.02
        omap = read_map_data(out / f"{tag}_order_map.npz")
        np.testing.assert_array_equal(omap.amplitude, direct.order_map.amplitude)
        assert len(pd.read_csv(out / f"{tag}_unmatched.csv")) == len(direct.unmatched)


def test_two_worker_cluster_gives_the_serial_results(serial, scenario):
    pytest.importorskip("distributed")
    out_serial, ref = serial
    out = scenario.base / "cluster"
    result = run_batch(scenario.runs, out, settings=_settings(scenario), workers=2)
    assert result.workers == 2 and result.scheduler.startswith(("tcp://", "inproc://"))
    pd.testing.assert_frame_equal(_comparable(result.summary), _comparable(ref.summary))
    for row in ref.summary[ref.summary["status"] == "ok"].itertuples():
        for name in (row.spectrum_csv, row.cuts_csv):
            assert (out / name).read_bytes() == (out_serial / name).read_bytes()


def test_existing_scheduler_is_used(serial, scenario, tmp_path):
    distributed = pytest.importorskip("distributed")
    _, ref = serial
    with distributed.LocalCluster(n_workers=1, threads_per_worker=1, processes=False,
                                  dashboard_address=None) as cluster:
        result = run_batch(scenario.runs[:2], tmp_path / "o", settings=_settings(scenario),
                           scheduler=cluster.scheduler_address)
        assert result.scheduler == cluster.scheduler_address and result.workers == 1
        again = run_batch(scenario.runs[:2], tmp_path / "o", settings=_settings(scenario),
                          scheduler=cluster.scheduler_address)
        assert again.skipped == tuple(map(str, scenario.runs[:2])) and again.done == ()
    pd.testing.assert_frame_equal(_comparable(result.summary), _comparable(ref.summary.iloc[:2]))


def test_resume_skips_finished_runs_and_retries_failed_ones(serial, scenario):
    src, _ = serial
    out = scenario.base / "resume"
    shutil.copytree(src, out)
    # The CSV alone is enough to resume from (the Parquet file lost, say).
    (out / "summary.parquet").unlink()
    pd.testing.assert_frame_equal(read_summary(out), read_summary(src))
    seen = []
    result = run_batch(scenario.runs, out, settings=_settings(scenario), workers=0,
                       progress=lambda *a: seen.append(a))
    good = [str(p) for p in scenario.runs if p != scenario.bad]
    assert list(result.skipped) == good and result.done == ()
    assert [f for f, _ in result.failed] == [str(scenario.bad)]
    assert len(result.summary) == 4
    assert seen[0] == (0, 4, 0, 0) and seen[-1] == (4, 4, 3, 1)
    # A changed run (same name, new content) or changed settings are tracked again.
    changed = _settings(scenario)
    other = BatchSettings.make(track=changed.track_options, machine_path=str(MACHINE),
                               plan_path=str(scenario.plan), cut_orders=(1.0,))
    again = run_batch(scenario.runs[:1], out, settings=other, workers=0)
    assert again.skipped == () and again.done == (str(scenario.runs[0]),)
    assert len(again.summary) == 5           # earlier rows are kept, the new one added


def test_cli_batch_json_and_progress_on_stderr(scenario, capsys, tmp_path):
    capsys.readouterr()
    args = ["batch", *map(str, scenario.runs[:2]), "--out", str(tmp_path / "b"), "--workers", "serial",
            "--samples-per-rev", str(SPR), "--revs-per-block", str(REVS_PER_BLOCK), "--json"]
    assert main(args) == 0
    cap = capsys.readouterr()
    got = json.loads(cap.out)
    assert got["runs"] == 2 and len(got["done"]) == 2 and got["workers"] == 0
    assert got["summary_parquet"] == str(tmp_path / "b" / "summary.parquet")
    assert "2/2 runs" in cap.err
    assert main(args) == 0
    assert json.loads(capsys.readouterr().out)["skipped"] == [str(p) for p in scenario.runs[:2]]


def test_text_progress_bar():
    import io

    buf = io.StringIO()
    bar = TextProgress(buf, width=10)
    bar(0, 4, 0, 0)
    bar(3, 4, 1, 1)
    bar.close()
    text = buf.getvalue()
    assert text.startswith("\rbatch [----------] 0/4 runs")
    assert "\rbatch [########--] 3/4 runs (1 skipped, 1 failed)" in text and text.endswith("\n")


def test_validation_errors(scenario, tmp_path, capsys):
    s = _settings(scenario)
    with pytest.raises(InputError, match="no runs given"):
        run_batch([], tmp_path / "o", settings=s, workers=0)
    with pytest.raises(InputError, match="0 \\(serial, no Dask\\) or a positive number"):
        run_batch(scenario.runs, tmp_path / "o", settings=s, workers=-1)
    (tmp_path / "file").write_text("x")
    with pytest.raises(InputError, match="is not a folder"):
        run_batch(scenario.runs, tmp_path / "file", settings=s, workers=0)
    with pytest.raises(InputError, match="--machine .*: no such file"):
        BatchSettings.make(machine_path=str(tmp_path / "missing.toml"))
    with pytest.raises(InputError, match="--speed-table .*: no such file"):
        BatchSettings.make(track={"speed_table": str(tmp_path / "none.csv")})
    with pytest.raises(InputError, match=r"--top 0: must be at least 1"):
        BatchSettings.make(n_top=0)
    with pytest.raises(InputError, match="give it as a batch setting"):
        BatchSettings.make(track={"machine": "m.toml"})
    with pytest.raises(InputError, match="follows a machine line; give --machine"):
        BatchSettings.make(plan_path=str(scenario.plan))
    broken = tmp_path / "old"
    broken.mkdir()
    (broken / "summary.parquet").write_bytes(b"not parquet")
    with pytest.raises(InputError, match="cannot be read"):
        read_summary(broken)
    with pytest.raises(InputError, match="no Dask scheduler answers"):
        run_batch(scenario.runs[:1], tmp_path / "o2", settings=s, scheduler="tcp://127.0.0.1:9",
                  timeout_s=2)
    for bad in ("-1", "two"):
        assert main(["batch", str(scenario.runs[0]), "--out", str(tmp_path / "o3"), "--workers", bad]) == 2
        assert "--workers" in capsys.readouterr().err
    # A run that does not exist is listed with its error; the batch goes on.
    res = run_batch([tmp_path / "nope.wav", scenario.runs[0]], tmp_path / "o4", settings=s, workers=0)
    assert res.failed[0][0] == str(tmp_path / "nope.wav") and "No such file" in res.failed[0][1]
    assert res.done == (str(scenario.runs[0]),)
