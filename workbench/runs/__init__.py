"""Runs layer: run files (WAV/CSV/NPZ/MAT + JSON sidecar), the Run object, safe output writing
and the virtual acquisition (simulator).

Typical use::

    from workbench.runs import read_run
    run = read_run("runup.wav")            # sidecar runup.json read when present
    x = run.channel("vibration")           # physical units (raw / sensitivity)
    for chunk in run.iter_chunks("vibration", 65536):
        ...
"""

from workbench.runs.files import (RUN_EXTENSIONS, check_finite, read_run, sidecar_for_run,
                                  write_run)
from workbench.fileio import atomic_output, check_writable
from workbench.runs.cut_orders import default_cut_orders
from workbench.runs.run import Channel, LogEntry, Run, full_scale
from workbench.runs.metadata import SensorInfo, TestMetadata
from workbench.runs.sidecar import (Sidecar, read_sidecar, resolve_inside, run_metadata,
                                    sidecar_from_dict, sidecar_path, write_sidecar)
from workbench.runs.simulate import (TACHO_HIGH_V, VIBRATION_UNIT, resonance_gain, simulate_run,
                                     simulate_to_wav)
from workbench.runs.wav import SAMPLE_FORMATS, WavInfo, WavWriter, read_wav, read_wav_info

__all__ = [
    "Channel",
    "LogEntry",
    "Run",
    "full_scale",
    "RUN_EXTENSIONS",
    "read_run",
    "write_run",
    "check_finite",
    "sidecar_for_run",
    "atomic_output",
    "check_writable",
    "default_cut_orders",
    "Sidecar",
    "read_sidecar",
    "write_sidecar",
    "sidecar_from_dict",
    "sidecar_path",
    "resolve_inside",
    "run_metadata",
    "TestMetadata",
    "SensorInfo",
    "SAMPLE_FORMATS",
    "WavInfo",
    "WavWriter",
    "read_wav",
    "read_wav_info",
    "simulate_run",
    "simulate_to_wav",
    "resonance_gain",
    "VIBRATION_UNIT",
    "TACHO_HIGH_V",
]
