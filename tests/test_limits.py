"""Acceptance limits of a plan judged on a run: worst level, where it occurred, pass or fail.

Truth from an analytic signal: a run-up whose order 5 has a known peak amplitude envelope
(largest, 1.0, at 1200 rpm), tracked with the tacho.  The level a band or an order cut reads
for a sinusoid of peak amplitude A is A (Hann window, equivalent noise bandwidth 1.5 bins:
F. J. Harris, Proc. IEEE 66(1), 1978, Table 1); the RMS of a sinusoid is A / sqrt(2)
(definition of RMS).
"""

from __future__ import annotations

import json
import math

import numpy as np
import pytest

from workbench.errors import PlanFileError
from workbench.runs import Channel, Run, write_run
from workbench.runs.analysis import track_run
from workbench.runs.limits import LIMITS_NOTE, evaluate_limits, limits_verdict
from workbench.sampling import Limit, plan_from_dict, plan_to_dict, read_plan, write_plan

RATE = 2560.0
START, END, DURATION = 600.0, 1800.0, 24.0
PEAK_RPM = 1200.0


def _amplitude(rpm):
    # Order 5's peak amplitude against speed: 1.0 at 1200 rpm, 0.3 far from it.
    return 0.3 + 0.7 * np.exp(-(((rpm - PEAK_RPM) / 150.0) ** 2))


def _run() -> Run:
    t = np.arange(int(DURATION * RATE)) / RATE
    rpm = START + (END - START) * t / DURATION
    revs = (START * t + 0.5 * (END - START) * t * t / DURATION) / 60.0
    vib = _amplitude(rpm) * np.cos(2 * np.pi * 5.0 * revs)
    vib += 0.2 * np.cos(2 * np.pi * 1.0 * revs)             # order 1, well outside the band
    tacho = np.where(np.mod(revs, 1.0) < 0.5, 5.0, 0.0)     # 1 pulse per rev
    return Run(np.vstack([vib, tacho]).astype(np.float64), RATE,
               (Channel("vibration", "mm/s"), Channel("tacho", "V")), tacho="tacho")


PLAN = {
    "speed": {"profile": "linear", "start_rpm": START, "end_rpm": END, "duration_s": DURATION},
    "acquisition": {"rates_hz": [RATE]},
    "band": [{"name": "order 5 band", "orders": [4.5, 5.5]}],
    "limit": [
        {"name": "order 5 tight", "order": 5, "bandwidth": 0.5, "max": 0.8},
        {"name": "order 5 loose", "order": 5, "bandwidth": 0.5, "max": 1.5},
        {"name": "band tight", "band": "order 5 band", "max": 0.8},
        {"name": "band rms", "band": "order 5 band", "max": 0.8, "amplitude": "rms"},
        {"name": "low speeds only", "order": 5, "bandwidth": 0.5, "max": 0.8, "rpm": [600, 900]},
        {"name": "never reached", "order": 5, "bandwidth": 0.5, "max": 0.8, "rpm": [3000, 4000]},
    ],
}


@pytest.fixture(scope="module")
def analysis():
    return track_run(_run(), samples_per_rev=64, revs_per_block=8, rf_map=False)


@pytest.fixture(scope="module")
def results(analysis):
    plan = plan_from_dict(PLAN)
    return {r.name: r for r in evaluate_limits(analysis, plan.limits, bands=plan.bands)}


def test_order_limit_fails_at_the_rpm_of_the_worst_and_passes_above_it(results):
    tight, loose = results["order 5 tight"], results["order 5 loose"]
    # Analytic truth: the order's amplitude peaks at 1.0 at 1200 rpm.  The map's blocks are
    # 8 revolutions (about 0.4 s, 20 rpm at this sweep) long, so the block average of the
    # Gaussian envelope (150 rpm wide) is within 2 % of its peak and its centre within 25 rpm.
    assert tight.worst == pytest.approx(1.0, rel=0.03)
    assert tight.rpm_at_worst == pytest.approx(PEAK_RPM, abs=25.0)
    assert tight.passed is False
    assert loose.passed is True
    assert loose.worst == pytest.approx(tight.worst)
    assert tight.unit == "mm/s"


def test_band_limit_reads_the_band_level_of_the_batch_and_rms_divides_by_sqrt2(results, analysis):
    from workbench.batch import band_levels  # the batch summary's number: one definition

    band = results["band tight"]
    plan = plan_from_dict(PLAN)
    assert band.worst == pytest.approx(band_levels(analysis.order_map, plan.bands)["order 5 band"])
    assert band.worst == pytest.approx(1.0, rel=0.03)
    assert band.passed is False
    rms = results["band rms"]
    # RMS of a sinusoid of peak A is A / sqrt(2): 0.707 against a max of 0.8 rms passes.
    assert rms.worst == pytest.approx(band.worst / math.sqrt(2.0))
    assert rms.passed is True


def test_rpm_range_judges_only_the_blocks_inside_it(results):
    low = results["low speeds only"]
    # Between 600 and 900 rpm the envelope is largest at 900 rpm: 0.3 + 0.7 exp(-4) = 0.313.
    assert low.rpm_at_worst == pytest.approx(900.0, abs=25.0)
    assert low.worst == pytest.approx(0.3 + 0.7 * math.exp(-4.0), rel=0.05)
    assert low.passed is True
    never = results["never reached"]
    assert never.passed is None and math.isnan(never.worst)
    assert "never reached" in never.note


def test_verdict_names_the_failed_limits_and_where(results):
    text = limits_verdict(results.values())
    assert text.startswith("FAILED: 2 of 6")
    assert "order 5 tight reached" in text and "rpm (max 0.8)" in text
    assert "Not judged: never reached" in text
    passing = [results["order 5 loose"], results["band rms"]]
    assert limits_verdict(passing) == "PASSED: all 2 limit(s) passed."
    assert "does not set acceptance criteria" in LIMITS_NOTE


def test_json_entry_has_the_contract_keys(results):
    d = results["order 5 tight"].to_dict()
    assert {"name", "max", "worst", "rpm_at_worst", "pass"} <= set(d)
    assert d["pass"] is False and d["max"] == 0.8
    json.dumps(d, allow_nan=False)
    assert json.loads(json.dumps(results["never reached"].to_dict()))["worst"] is None


def test_plan_file_limits_round_trip_and_errors_name_file_entry_field(tmp_path):
    plan = plan_from_dict(PLAN)
    path = write_plan(plan, tmp_path / "plan.toml")
    assert read_plan(path).limits == plan.limits
    assert plan_from_dict(plan_to_dict(plan)) == plan
    bad = [
        ({"name": "x", "band": "nope", "max": 1}, "[[limit]] 'x': band = \"nope\": the plan has no [[band]] of this name"),
        ({"name": "x", "order": 5, "max": 1}, "[[limit]] 'x': bandwidth: is required"),
        ({"name": "x", "max": 1}, "[[limit]] 'x': band/order: give exactly one"),
        ({"name": "x", "band": "order 5 band", "order": 5, "bandwidth": 1, "max": 1}, "got both"),
        ({"name": "x", "order": 5, "bandwidth": 1, "max": 0}, "[[limit]] 'x': max = 0: must be above 0"),
        ({"name": "x", "order": 5, "bandwidth": 1}, "[[limit]] 'x': max: is required"),
        ({"name": "x", "order": 5, "bandwidth": 1, "max": 1, "amplitude": "RMS"}, "amplitude = \"RMS\": must be one of peak, rms"),
        ({"name": "x", "order": 5, "bandwidth": 1, "max": 1, "rpm": [900, 600]}, "rpm = [900, 600]: must satisfy"),
        ({"name": "x", "order": 5, "bandwidth": 1, "max": 1, "maximum": 2}, "maximum: unknown key"),
    ]
    for entry, words in bad:
        d = dict(PLAN, limit=[entry])
        with pytest.raises(PlanFileError) as err:
            plan_from_dict(d, "plan.toml")
        assert str(err.value).startswith("plan.toml: ") and words in str(err.value), str(err.value)
    with pytest.raises(PlanFileError, match="used by limit #1 already"):
        plan_from_dict(dict(PLAN, limit=[PLAN["limit"][0], PLAN["limit"][0]]), "plan.toml")
    with pytest.raises(ValueError):
        Limit("y", 1.0, order=-1, bandwidth=1)


def test_track_and_report_commands_evaluate_the_plans_limits(tmp_path, capsys):
    from workbench.cli.main import main

    run_path = write_run(_run(), tmp_path / "run.wav")
    plan = plan_from_dict(PLAN)
    plan_path = write_plan(plan, tmp_path / "plan.toml")
    code = main(["track", str(run_path), "--plan", str(plan_path), "--samples-per-rev", "64",
                 "--revs-per-block", "8", "--json"])
    out = json.loads(capsys.readouterr().out)
    assert code == 0
    limits = {d["name"]: d for d in out["limits"]}
    assert limits["order 5 tight"]["pass"] is False
    assert limits["order 5 tight"]["rpm_at_worst"] == pytest.approx(PEAK_RPM, abs=25.0)
    assert limits["order 5 loose"]["pass"] is True


# --------------------------------------------------------------------------------------------
# the report and the batch summary carry the verdict, the metadata and the sign-off block


MACHINE_TOML = ('[machine]\nname = "limit rig"\nreference = "in"\n[[shaft]]\nname = "in"\n'
                '[[order]]\nname = "five"\nshaft = "in"\norder = 5.0\n')
META = {"unit_under_test": "test gearbox TG-1", "serial_number": "TG1-0042", "test_id": "FAT-17",
        "operator": "R. Okafor", "date": "2026-11-30"}
SENSOR = {"position": "input DE bearing housing", "direction": "radial vertical",
          "sensor_type": "accelerometer 100 mV/g"}


def _files(folder):
    from dataclasses import replace

    from workbench.runs import SensorInfo, TestMetadata, read_sidecar, write_sidecar

    run_path = write_run(_run(), folder / "run.wav")
    side = run_path.with_suffix(".json")
    meta = TestMetadata(**META, sensors=(SensorInfo("vibration", **SENSOR),))
    write_sidecar(replace(read_sidecar(side), metadata=meta, source=None), side, force=True)
    (folder / "m.toml").write_text(MACHINE_TOML)
    plan_path = write_plan(plan_from_dict(PLAN), folder / "plan.toml")
    return folder / "m.toml", plan_path, run_path


def test_report_opens_with_verdict_and_metadata_and_ends_with_sign_off(tmp_path, capsys):
    import html as html_lib
    import re

    from workbench.cli.main import main

    machine, plan, run = _files(tmp_path)
    out = tmp_path / "report.html"
    code = main(["report", str(machine), str(plan), str(run), "--out", str(out),
                 "--samples-per-rev", "64", "--revs-per-block", "8",
                 "--meta", "operator=K. Lindqvist", "--meta", "vibration.direction=axial",
                 "--json"])
    got = json.loads(capsys.readouterr().out)
    assert code == 0
    assert got["verdict"] == "fail"
    assert got["sections"][:2] == ["summary", "limits"] and got["sections"][-1] == "signoff"
    limits = {d["name"]: d for d in got["limits"]}
    assert limits["order 5 tight"]["pass"] is False and limits["order 5 loose"]["pass"] is True
    assert limits["order 5 tight"]["rpm_at_worst"] == pytest.approx(PEAK_RPM, abs=25.0)
    # Metadata: the sidecar's, with --meta overriding the operator and the sensor direction.
    assert got["metadata"]["operator"] == "K. Lindqvist"
    assert got["metadata"]["serial_number"] == "TG1-0042"
    assert got["metadata"]["sensors"][0]["direction"] == "axial"
    assert got["metadata"]["sensors"][0]["position"] == SENSOR["position"]
    text = out.read_text(encoding="utf-8")
    header = text[text.index("<header>"):text.index("</header>")]
    plain = html_lib.unescape(re.sub(r"<[^>]+>", " ", header))
    for value in ("test gearbox TG-1", "TG1-0042", "FAT-17", "K. Lindqvist", "2026-11-30",
                  SENSOR["position"], "axial", SENSOR["sensor_type"]):
        assert value in plain, value
    # The verdict names the failed limits and where; beside it, who sets the limits.
    assert "Verdict: FAILED: 2 of 6" in plain and "order 5 tight reached" in plain
    assert LIMITS_NOTE in plain
    # The limits are drawn (a figure in the limits section) and the page ends with sign-off.
    limits_html = text[text.index('<section id="limits">'):text.index('<section id="machine">')]
    assert 'data-figure="limits"' in limits_html
    signoff = text[text.index('<section id="signoff">'):]
    for role in ("prepared by", "checked by"):
        assert role in signoff
    assert signoff.count('class="blank"') >= 6
    assert text.index('id="verdict"') < text.index('<section id="summary">')


def test_report_meta_option_errors_are_one_line_and_name_the_key(tmp_path, capsys):
    from workbench.cli.main import main

    machine, plan, run = _files(tmp_path)
    for meta, words in (("operater=x", "unknown key (did you mean 'operator'?)"),
                        ("noequals", "give KEY=VALUE"),
                        ("date=30/11/2026", "is not a date"),
                        ("shaker.position=DE", "no channel named 'shaker'")):
        code = main(["report", str(machine), str(plan), str(run), "--out", str(tmp_path / "r.html"),
                     "--meta", meta])
        err = capsys.readouterr().err
        assert code == 2 and words in err, err
        assert err.count("\n") == 1 and err.startswith("foldline: error: ")


def test_batch_summary_has_metadata_and_a_pass_column_per_limit(tmp_path):
    from workbench.batch import PASS_PREFIX, WORST_PREFIX, BatchSettings, read_summary, run_batch

    machine, plan, run = _files(tmp_path)
    settings = BatchSettings.make(track={"samples_per_rev": 64, "revs_per_block": 8},
                                  machine_path=str(machine), plan_path=str(plan), cut_orders=(5.0,))
    run_batch([run], tmp_path / "batch", settings=settings, workers=0)
    for table in (read_summary(tmp_path / "batch"),
                  read_summary_csv(tmp_path / "batch" / "summary.csv")):
        row = table.iloc[0]
        assert row["status"] == "ok", row["error"]
        for key, value in META.items():
            assert row[key] == value
        assert row["sensor_position"] == SENSOR["position"]
        assert row["sensor_type"] == SENSOR["sensor_type"]
        assert bool(row[PASS_PREFIX + "order 5 tight"]) is False
        assert bool(row[PASS_PREFIX + "order 5 loose"]) is True
        assert row[PASS_PREFIX + "never reached"] is None or str(row[PASS_PREFIX + "never reached"]) in ("<NA>", "", "nan")
        assert row[WORST_PREFIX + "order 5 tight"] == pytest.approx(1.0, rel=0.03)


def read_summary_csv(path):
    import pandas as pd

    return pd.read_csv(path, keep_default_na=True).astype(object).where(lambda t: t.notna(), None)
