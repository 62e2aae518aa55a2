"""Benchmark: peak memory of ``foldline track`` on a 1 GiB recording.

Scenario (issue "every bad input gets a clear error, nothing is lost, long recordings stay
within memory"): a 2-channel float32 WAV of exactly 1 GiB of samples (134,217,728 frames at
51.2 kHz, 2621 s), a linear run-up from 600 to 3000 rpm with a once-per-rev 0/5 V tacho (ideal steps) on
channel 2 and orders 1, 10 and 33 on channel 1.  The file is written on the fly, chunk by
chunk, with :class:`workbench.runs.WavWriter` (so this process never holds the record), then
tracked by ``foldline track RUN --json`` in a subprocess whose resident memory is sampled from
``/proc/<pid>/status`` every 50 ms (VmRSS, split into anonymous and file-backed pages) and
read once more at the end as the kernel's high-water mark (``ru_maxrss`` of the child).

Target: peak resident memory of the tracking process under 600 MB.

The file goes into a temporary folder beside the project (on the same disk as the work tree,
not a RAM-backed /tmp) and is deleted afterwards; the benchmark is skipped with a message
when that disk has less than 3 GB free.

Run: ``python bench/bench_memory.py`` (or from ``bench/run_all.py``).
"""

from __future__ import annotations

import json
import os
import shutil
import subprocess
import sys
import tempfile
import threading
import time
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]
sys.path.insert(0, str(ROOT))

import numpy as np  # noqa: E402

RATE = 51_200
DATA_BYTES = 1 << 30  # 1 GiB of samples
N_CHANNELS = 2
FRAMES = DATA_BYTES // (4 * N_CHANNELS)
DURATION_S = FRAMES / RATE
RPM_START, RPM_END = 600.0, 3000.0
ORDERS = {1.0: 1.0, 10.0: 0.5, 33.0: 0.2}
CHUNK = 1 << 20
TARGET_MB = 600.0
MIN_FREE = 3e9


def revs_at(t_s: np.ndarray) -> np.ndarray:
    """Shaft angle in revolutions of the linear run-up (analytic: integral of rpm / 60)."""
    slope = (RPM_END - RPM_START) / DURATION_S
    return (RPM_START * t_s + 0.5 * slope * t_s**2) / 60.0


#: Rise and fall time of the tacho edges: a fifth of a sample, i.e. ideal steps timed only to
#: the sample, the hardest edge a bench records (the tacho stage bounds their timing error by
#: half a sample and smooths accordingly).
TACHO_RISE_S = 0.2 / RATE


def tacho_volts(t_s: np.ndarray, revs: np.ndarray) -> np.ndarray:
    """0/5 V once-per-rev tacho with linear edges of TACHO_RISE_S."""
    f_rot = (RPM_START + (RPM_END - RPM_START) * t_s / DURATION_S) / 60.0
    frac = np.mod(revs, 1.0)
    since_rise = frac / f_rot
    since_fall = (frac - 0.5) / f_rot
    up = np.clip(since_rise / TACHO_RISE_S, 0.0, 1.0)
    down = 1.0 - np.clip(since_fall / TACHO_RISE_S, 0.0, 1.0)
    return 5.0 * np.where(frac < 0.5, up, down)


def write_run(path: Path) -> float:
    """Stream the 1 GiB WAV and its sidecar; return the seconds it took."""
    from workbench.runs import WavWriter

    t0 = time.perf_counter()
    with WavWriter(path, RATE, N_CHANNELS, sample_format="float32") as w:
        for a in range(0, FRAMES, CHUNK):
            b = min(a + CHUNK, FRAMES)
            t = np.arange(a, b, dtype=np.float64) / RATE
            revs = revs_at(t)
            vib = np.zeros(b - a)
            for order, amp in ORDERS.items():
                vib += amp * np.sin(2 * np.pi * order * revs)
            tacho = tacho_volts(t, revs)
            w.write(np.vstack([vib, tacho]).astype(np.float32))
    path.with_suffix(".json").write_text(json.dumps({
        "channels": [{"name": "vibration", "unit": "m/s^2", "sensitivity": 1.0},
                     {"name": "tacho", "unit": "V", "sensitivity": 1.0}],
        "tacho_channel": "tacho", "pulses_per_rev": 1, "missing_pulses": 0}))
    return time.perf_counter() - t0


def _status_kb(pid: int) -> dict:
    out = {}
    try:
        with open(f"/proc/{pid}/status") as f:
            for line in f:
                key, _, rest = line.partition(":")
                if key in ("VmRSS", "RssAnon", "RssFile", "VmHWM"):
                    out[key] = int(rest.split()[0])
    except OSError:
        pass
    return out


def track(path: Path, out_json: Path) -> dict:
    """Run ``foldline track`` on ``path``; sample its memory; return the figures."""
    exe = Path(sys.executable).with_name("foldline")
    cmd = [str(exe), "track", str(path), "--json"] if exe.exists() else [
        sys.executable, "-m", "workbench", "track", str(path), "--json"]
    peaks = {"VmRSS": 0, "RssAnon": 0, "RssFile": 0, "VmHWM": 0}
    t0 = time.perf_counter()
    with open(out_json, "w") as fout, open(out_json.with_suffix(".err"), "w") as ferr:
        proc = subprocess.Popen(cmd, stdout=fout, stderr=ferr, cwd=path.parent)
        done = threading.Event()

        def sample():
            while not done.is_set():
                for k, v in _status_kb(proc.pid).items():
                    peaks[k] = max(peaks[k], v)
                time.sleep(0.05)

        sampler = threading.Thread(target=sample, daemon=True)
        sampler.start()
        _, status, usage = os.wait4(proc.pid, 0)
        proc.returncode = os.waitstatus_to_exitcode(status)
        done.set()
        sampler.join()
    seconds = time.perf_counter() - t0
    err = out_json.with_suffix(".err").read_text()
    result = {}
    if proc.returncode == 0:
        result = json.loads(out_json.read_text())
    return {
        "returncode": proc.returncode,
        "stderr": err.strip()[-500:],
        "track_s": seconds,
        "peak_rss_mb": usage.ru_maxrss / 1024.0,  # Linux: kilobytes
        "sampled_peak_rss_mb": peaks["VmRSS"] / 1024.0,
        "sampled_peak_anon_mb": peaks["RssAnon"] / 1024.0,
        "sampled_peak_file_mb": peaks["RssFile"] / 1024.0,
        "rpm_min": result.get("rpm_min"),
        "rpm_max": result.get("rpm_max"),
        "revolutions": result.get("revolutions"),
    }


def main() -> dict:
    """Write the 1 GiB run, track it in a subprocess, print and return the memory figures."""
    base = ROOT.parent if os.access(ROOT.parent, os.W_OK) else ROOT
    free = shutil.disk_usage(base).free
    if free < MIN_FREE:
        res = {"skipped": f"only {free / 1e9:.1f} GB free on {base}; the benchmark needs 3 GB"}
        print(f"bench_memory: skipped: {res['skipped']}")
        return res
    folder = Path(tempfile.mkdtemp(prefix="foldline_bench_memory_", dir=base))
    try:
        path = folder / "long_runup.wav"
        write_s = write_run(path)
        size = path.stat().st_size
        res = {"file_bytes": size, "frames": FRAMES, "rate_hz": RATE, "duration_s": DURATION_S,
               "write_s": write_s}
        res.update(track(path, folder / "track.json"))
    finally:
        shutil.rmtree(folder, ignore_errors=True)
    truth_revs = float(revs_at(np.array(DURATION_S)))
    res["truth_revolutions"] = truth_revs
    res["target_mb"] = TARGET_MB
    res["within_target"] = res["returncode"] == 0 and res["peak_rss_mb"] < TARGET_MB
    print(f"1 GiB float32 WAV ({FRAMES} frames x {N_CHANNELS} channels, {DURATION_S:.0f} s at "
          f"{RATE} Hz) written in {write_s:.1f} s")
    if res["returncode"] != 0:
        print(f"foldline track failed (exit {res['returncode']}): {res['stderr']}")
    else:
        print(f"foldline track: {res['track_s']:.1f} s, {res['revolutions']:.0f} rev tracked "
              f"(truth {truth_revs:.0f}), {res['rpm_min']:.1f}-{res['rpm_max']:.1f} rpm")
    print(f"peak resident memory: {res['peak_rss_mb']:.0f} MB (kernel high-water mark); "
          f"sampled peaks: {res['sampled_peak_rss_mb']:.0f} MB total, "
          f"{res['sampled_peak_anon_mb']:.0f} MB anonymous, "
          f"{res['sampled_peak_file_mb']:.0f} MB file-backed (memory-mapped WAV pages)")
    print(f"target: under {TARGET_MB:.0f} MB -> {'met' if res['within_target'] else 'NOT met'}")
    return res


if __name__ == "__main__":
    main()
