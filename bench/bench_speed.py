"""Benchmark: the speed of a 10-minute 51.2 kHz record, from the vibration and from a 60-2 tacho.

Scenario (issue 9): 600 s at 51.2 kHz (30.72 M samples), linear run-up 600 -> 6000 rpm.

* From the vibration (no tacho): one channel holding orders 1, 2, 3 (amplitudes 1, 0.5, 0.3),
  order 10 (0.4), a fixed 50 Hz line of amplitude 2 that the order-1 ridge crosses at 3000 rpm,
  and white noise (RMS 0.5); ``speed_from_vibration(order=1, rpm_range=(500, 6500))``.
  Target: under 10 s.  The RMS and worst relative error against the true speed are printed.
* From a 60-2 tacho: a square wave (ideal steps timed to the sample) from a 60-position wheel
  with 2 teeth missing; ``detect_pulses`` + ``tacho_angle`` (the tacho stage).  Target: under
  1 s (reported only: the tacho stage is benchmarked on its own).

Each estimation runs in a fresh subprocess pinned to one thread, reading the channel from a
float32 .npy file memory-mapped (as a long recording is read); the time to generate the input
is not counted.

Run: ``python bench/bench_speed.py`` (or from ``bench/run_all.py``).
"""

from __future__ import annotations

import json
import os
import subprocess
import sys
import tempfile
import time
from pathlib import Path

import numpy as np

ROOT = Path(__file__).resolve().parents[1]

RATE = 51_200.0
DURATION = 600.0
RPM0, RPM1 = 600.0, 6000.0
ORDERS = {1: 1.0, 2: 0.5, 3: 0.3, 10: 0.4}
FIXED_HZ, FIXED_AMP = 50.0, 2.0
NOISE = 0.5
CHUNK = 1 << 20


def revs_at(t):
    """Shaft angle (revolutions) of the linear run-up at times ``t`` (s)."""
    return (RPM0 * t + 0.5 * (RPM1 - RPM0) * t * t / DURATION) / 60.0


def rpm_at(t):
    return RPM0 + (RPM1 - RPM0) * np.asarray(t) / DURATION


def make_inputs(folder: Path, duration=DURATION) -> tuple[Path, Path]:
    """vibration.npy and tacho.npy (float32), written chunk by chunk."""
    n = int(duration * RATE)
    rng = np.random.default_rng(9)
    vib = np.lib.format.open_memmap(folder / "vibration.npy", mode="w+", dtype=np.float32,
                                    shape=(n,))
    tac = np.lib.format.open_memmap(folder / "tacho.npy", mode="w+", dtype=np.float32,
                                    shape=(n,))
    for i in range(0, n, CHUNK):
        t = np.arange(i, min(n, i + CHUNK)) / RATE
        r = revs_at(t)
        x = FIXED_AMP * np.cos(2 * np.pi * FIXED_HZ * t) + NOISE * rng.standard_normal(len(t))
        for k, a in ORDERS.items():
            x += a * np.cos(2 * np.pi * np.mod(k * r, 1.0))
        vib[i:i + len(t)] = x
        pos = np.mod(r * 60.0, 60.0)                       # tooth positions, 60 per rev
        tooth = np.floor(pos)
        high = (pos - tooth < 0.5) & (tooth < 58)          # 60-2: positions 58, 59 missing
        tac[i:i + len(t)] = np.where(high, 5.0, 0.0)
    vib.flush()
    tac.flush()
    return folder / "vibration.npy", folder / "tacho.npy"


_CHILD = r"""
import json, sys, time, warnings
import numpy as np
from workbench.angle import detect_pulses, speed_from_vibration, tacho_angle
which, path, rate = sys.argv[1], sys.argv[2], float(sys.argv[3])
x = np.load(path, mmap_mode="r")
t0 = time.perf_counter()
extra = {}
try:
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        if which == "vibration":
            est = speed_from_vibration(x, rate, order=1, rpm_range=(500.0, 6500.0))
            angle, extra = est.angle, {"uncertainty_pct": 100 * est.speed_uncertainty}
        else:
            pulses = detect_pulses(x, rate)
            extra = {"pulses": int(len(pulses)), "detect_s": time.perf_counter() - t0}
            angle = tacho_angle(pulses, pulses_per_rev=60, missing_pulses=2)
except Exception as exc:  # report the time it took to refuse, and why
    print(json.dumps({"seconds": time.perf_counter() - t0, "error": f"{type(exc).__name__}: "
                      f"{str(exc)[:300]}", **extra}))
    sys.exit(0)
seconds = time.perf_counter() - t0
tt = np.linspace(angle.t_start_s, angle.t_end_s, 20001)
print(json.dumps({"seconds": seconds, "t": tt.tolist(), "rpm": angle.rpm_at(tt).tolist(),
                  "warnings": [str(w.message) for w in caught], **extra}))
"""


def _child(which: str, path: Path) -> dict:
    env = dict(os.environ, OMP_NUM_THREADS="1", OPENBLAS_NUM_THREADS="1", MKL_NUM_THREADS="1",
               PYTHONPATH=str(ROOT))
    out = subprocess.run([sys.executable, "-c", _CHILD, which, str(path), repr(RATE)],
                         capture_output=True, text=True, env=env, check=False)
    if out.returncode:
        return {"error": out.stderr.strip().splitlines()[-1] if out.stderr else "failed"}
    res = json.loads(out.stdout)
    if "error" in res:
        return res
    t = np.asarray(res.pop("t"))
    rpm = np.asarray(res.pop("rpm"))
    err = rpm / rpm_at(t) - 1.0
    res["rms_pct"] = 100 * float(np.sqrt(np.mean(err ** 2)))
    res["worst_pct"] = 100 * float(np.max(np.abs(err)))
    res["span_s"] = (float(t[0]), float(t[-1]))
    return res


def main(duration=DURATION) -> dict:
    results = {}
    with tempfile.TemporaryDirectory() as tmp:
        t0 = time.perf_counter()
        vib, tac = make_inputs(Path(tmp), duration)
        print(f"input: {duration:g} s at {RATE:g} Hz ({int(duration * RATE) / 1e6:.2f} M "
              f"samples per channel), made in {time.perf_counter() - t0:.1f} s")
        for which, path, target in (("vibration", vib, 10.0), ("tacho 60-2", tac, 1.0)):
            res = _child(which.split()[0], path)
            results[which] = res
            if "error" in res:
                took = f" after {res['seconds']:.2f} s" if "seconds" in res else ""
                detect = (f" (pulse detection of {res['pulses']} pulses: {res['detect_s']:.2f} s)"
                          if "detect_s" in res else "")
                print(f"{which}: FAILED{took}{detect}: {res['error']}")
                continue
            ok = "meets" if res["seconds"] < target * duration / DURATION else "MISSES"
            extra = (f", stated uncertainty {res['uncertainty_pct']:.3g} % RMS"
                     if "uncertainty_pct" in res else "")
            if "detect_s" in res:
                extra += f"; pulse detection {res['detect_s']:.2f} s of it"
            print(f"{which}: {res['seconds']:.2f} s ({ok} the target of {target:g} s); speed "
                  f"error against the truth {res['rms_pct']:.3g} % RMS, worst "
                  f"{res['worst_pct']:.3g} %{extra}; span {res['span_s'][0]:.2f}-"
                  f"{res['span_s'][1]:.2f} s")
            for w in res["warnings"]:
                print(f"  warning: {w}")
    return results


if __name__ == "__main__":
    main(float(sys.argv[1]) if len(sys.argv) > 1 else DURATION)
