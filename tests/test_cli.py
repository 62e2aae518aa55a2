"""JSON contracts of the foldline verbs, through ``workbench.cli.main(argv)`` (the function the
console script calls); the alias values and ``python -m workbench`` through a real process."""

import json
import subprocess
import sys
from pathlib import Path

import pandas as pd
import pytest

from builders import DEMO_MACHINE, DEMO_PLAN, ROOT

MACHINE, PLAN = str(DEMO_MACHINE), str(DEMO_PLAN)
FOLDLINE = str(Path(sys.executable).with_name("foldline"))


def script(*argv):
    """``foldline <argv>`` through the installed console script in a subprocess."""
    return subprocess.run([FOLDLINE, *argv], capture_output=True, text=True, timeout=300)


@pytest.fixture
def run(capsys):
    """``foldline <argv>`` in this process: (exit status, stdout, stderr)."""
    from workbench.cli import main

    def call(*argv):
        capsys.readouterr()
        code = main(list(argv))
        out = capsys.readouterr()
        return code, out.out, out.err

    return call


@pytest.fixture
def run_json(run):
    def call(*argv):
        code, out, err = run(*argv, "--json")
        assert code == 0, err
        return json.loads(out)  # exactly one JSON object: json.loads fails on anything else

    return call


def test_alias_worked_values_through_the_console_script():
    # At 12,800 S/s: 5 kHz -> 5 kHz zone 0, 9 kHz -> 3.8 kHz zone 1, 14 kHz -> 1.2 kHz zone 2,
    # 12.8 kHz -> 0 Hz (REFERENCES.md worked values; common practice, no source).
    p = script("alias", "5000", "9000", "14000", "12800", "--rate", "12800", "--json")
    assert p.returncode == 0 and p.stderr == "", p.stderr
    d = json.loads(p.stdout)
    assert d["rate_hz"] == 12800 and d["nyquist_hz"] == 6400
    got = [(x["hz"], x["apparent_hz"], x["zone"], x["attenuation_db"]) for x in d["lines"]]
    assert got == [(5000, 5000, 0, 0), (9000, 3800, 1, 0), (14000, 1200, 2, 0), (12800, 0, 2, 0)]


def test_alias_with_plan_filter(run_json):
    # 6th-order Butterworth, -3 dB at 0.39 x 2560 = 998.4 Hz: at 2 x fc the attenuation is
    # 10 log10(1 + 2^12) = 36.12 dB (Butterworth magnitude, REFERENCES.md).
    d = run_json("alias", "1996.8", "--rate", "2560", "--plan", PLAN)
    assert d["lines"][0]["attenuation_db"] == pytest.approx(36.124, abs=1e-3)


def test_python_dash_m_is_the_same_command():
    p = subprocess.run([sys.executable, "-m", "workbench", "alias", "9000", "--rate", "12800", "--json"],
                       capture_output=True, text=True)
    assert p.returncode == 0 and json.loads(p.stdout)["lines"][0]["apparent_hz"] == 3800


def test_orders_contract(run_json):
    d = run_json("orders", MACHINE)
    assert d["reference"] == "motor"
    by_name = {s["name"]: s for s in d["sources"]}
    assert set(by_name["stage 1 mesh x2"]) == {"name", "entry", "kind", "harmonic", "order", "hz"}
    # Mesh order of stage 1 = pinion teeth on the reference shaft (Z1 f1, REFERENCES.md).
    assert by_name["stage 1 mesh"]["order"] == 29 and by_name["stage 1 mesh x2"]["harmonic"] == 2
    assert by_name["mains line"]["order"] is None and by_name["mains line"]["hz"] == 100
    kinds = {s["kind"] for s in d["sources"]}
    assert kinds <= {"shaft", "mesh", "sideband", "ftf", "bpfo", "bpfi", "bsf", "rotor", "order", "line",
                     "planet_pass", "planet_spin", "sun_fault", "planet_fault", "ring_fault"}


def test_foldmap_contract_and_png(run, run_json, tmp_path):
    png = tmp_path / "fold.png"
    d = run_json("foldmap", MACHINE, PLAN, "--rate", "2560", "--png", str(png))
    assert set(d) >= {"rate_hz", "filter", "threshold_db", "collisions", "overlaps"}
    keys = {"line", "band", "rpm_min", "rpm_max", "zone", "apparent_hz_min", "apparent_hz_max", "residual_db"}
    assert d["collisions"] and all(set(c) == keys for c in d["collisions"])
    assert all(c["zone"] >= 1 for c in d["collisions"]) and all(c["zone"] == 0 for c in d["overlaps"])
    assert png.read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"
    # The same file again without --force is refused and left as it was.
    before = png.read_bytes()
    code, _, err = run("foldmap", MACHINE, PLAN, "--rate", "2560", "--png", str(png))
    assert code == 2 and "--force" in err and png.read_bytes() == before


def test_plan_contract(run_json):
    d = run_json("plan", MACHINE, PLAN)
    assert set(d) >= {"candidates", "recommended_rate_hz", "resampling"}
    assert set(d["resampling"]) >= {"samples_per_rev", "max_order", "order_resolution", "revs_per_block", "min_rate_hz"}
    # samples per rev: a power of two >= 2.56 x max order 90 = 230.4 -> 256 (common practice).
    assert d["resampling"]["samples_per_rev"] == 256 and d["resampling"]["revs_per_block"] == 20
    low = d["candidates"][0]
    assert low["rate_hz"] == 2560 and low["clean"] is False and low["collisions"] > 0
    assert d["recommended_rate_hz"] == 10240


def test_simulate_then_track(run_json, tmp_path):
    out = tmp_path / "sim.wav"
    d = run_json("simulate", MACHINE, PLAN, "--rate", "2560", "--out", str(out), "--seed", "4", "--duration", "20")
    assert out.exists() and out.with_suffix(".json").exists() and d["rate_hz"] == 2560
    t = run_json("track", str(out), "--samples-per-rev", "128", "--envelope", "300,900", "--out", str(tmp_path / "t"))
    assert set(t) >= {"rpm_min", "rpm_max", "revolutions", "samples_per_rev", "order_spectrum", "peaks", "envelope_peaks"}
    assert len(t["order_spectrum"]["order"]) == len(t["order_spectrum"]["amplitude"])
    # Linear 300 -> 1800 rpm over 60 s: after 20 s the speed is 800 rpm (plan, by hand).
    assert t["rpm_max"] == pytest.approx(800.0, rel=2e-3)
    assert (tmp_path / "t" / "order_map.png").exists()


def test_demo_writes_outputs(run_json, tmp_path, monkeypatch):
    monkeypatch.chdir(ROOT)
    d = run_json("demo", "--out", str(tmp_path / "demo"))
    files = [Path(f) for f in d["files"]]
    assert files and all(f.exists() for f in files)
    assert d["advice"]["recommended_rate_hz"] == 10240
    assert any(x["alias"] for x in d["run"]["identified"])
    # The figures and the report agree on every setting: the report's settings table states
    # the orders cut in run/order_cuts.csv (order 1 and the orders of the two bearing lines the
    # demo plan's bands follow) and the highest order the figures show.
    import html as _html
    import re

    page = (tmp_path / "demo" / "report.html").read_text(encoding="utf-8")
    table = dict(re.findall(r"<dt>([^<]*)</dt><dd>([^<]*)</dd>",
                            page.split('class="kv run-summary"', 1)[1].split("</dl>", 1)[0]))
    stated = tuple(float(v) for v in re.findall(r"[0-9.]+", _html.unescape(table["cut orders"])))
    cut = pd.read_csv(tmp_path / "demo" / "run" / "order_cuts.csv")
    assert stated == tuple(sorted(cut["order"].unique()))
    assert stated[0] == 1.0 and len(stated) == 3
    assert float(table["max order"]) == pytest.approx(d["run"]["max_order"])
    assert d["run"]["max_order"] == pytest.approx(d["run"]["samples_per_rev"] / 2.56)
