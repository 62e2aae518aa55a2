"""The bundled demo files: valid, and the recorded run regenerates byte for byte."""

import hashlib
import subprocess
import sys
from pathlib import Path

from workbench.runs import read_run
from workbench.sampling import advise

from builders import DEMO_RUN, ROOT, SAMPLE


def _sha(p):
    return hashlib.sha256(Path(p).read_bytes()).hexdigest()


def test_demo_run_regenerates_byte_identically(tmp_path):
    subprocess.run([sys.executable, str(ROOT / "tools" / "make_demo_run.py"), str(tmp_path)], check=True,
                   capture_output=True)
    assert _sha(tmp_path / "agitator_runup.wav") == _sha(SAMPLE / "agitator_runup.wav")
    assert _sha(tmp_path / "agitator_runup.json") == _sha(SAMPLE / "agitator_runup.json")


def test_demo_run_is_small_and_readable():
    wav = DEMO_RUN
    assert wav.stat().st_size <= 10 * 1024 * 1024
    run = read_run(wav)
    assert run.rate_hz == 2560.0 and run.tacho == "tacho"
    assert run.duration_s == 60.0


def test_demo_plan_has_a_collision_and_a_clean_higher_rate(demo_machine, demo_plan):
    # The demo must show the job: a candidate rate where a folded stage-1 mesh harmonic falls
    # into a bearing band, and a higher clean rate that is recommended.
    advice = advise(demo_machine, demo_plan)
    low = advice.collisions[2560.0]
    bearing = low[(low["kind"] == "collision") & low["band"].str.contains("motor DE inner race")]
    assert any(name.startswith("stage 1 mesh") for name in bearing["line"])
    assert advice.recommended_rate_hz is not None and advice.recommended_rate_hz > 2560.0
    assert not len(advice.collisions[advice.recommended_rate_hz].query("kind == 'collision'"))
