"""Fuzzing: whatever the input, only foldline's own errors may escape.

Two kinds of fuzzing, both reproducible:

* property tests (hypothesis, derandomised) that build random machine and plan dictionaries
  (valid entries mixed with wrong types, out-of-range numbers, NaN, inf, unknown keys) and
  random numbers for the math (folding, filters, speed profiles, fold map, collisions, advice);
* mutation fuzzing of run files: valid WAV, CSV, NPZ and MAT files (and JSON sidecars) altered by
  byte flips, truncation, header field corruption, inserted garbage and swapped chunks, each
  fed to :func:`read_run`, and for a share of them read fully; and mutated machine and plan
  files fed to :func:`read_machine` and :func:`read_plan`.

The rule in every case: the call returns, or raises a :class:`FoldlineError` subclass.  Any
other exception (ValueError, struct.error, IndexError, MemoryError, ...) is a bug.
"""

from __future__ import annotations

import io
import json
import math
import struct
import warnings

import numpy as np
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from workbench.errors import FoldlineError, RunFileError
from workbench.machine import machine_from_dict
from workbench.runs import read_run, read_sidecar
from workbench.sampling import (AntiAliasFilter, SpeedProfile, advise, apparent_frequency,
                                find_collisions, fold_map, nyquist_zone, plan_from_dict)

from builders import RIG_MACHINE, RIG_PLAN

FUZZ = settings(max_examples=150, deadline=None, derandomize=True,
                suppress_health_check=[HealthCheck.too_slow, HealthCheck.data_too_large])


def only_foldline_errors(fn, *args, **kwargs):
    """Call ``fn``; a FoldlineError is fine, anything else fails the test (re-raised)."""
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        try:
            return fn(*args, **kwargs)
        except FoldlineError:
            return None


# ------------------------------------------------------------------------------------------
# Strategies: values of every kind a TOML file can hold, biased to the edges
# ------------------------------------------------------------------------------------------
edge_floats = st.sampled_from([0.0, -0.0, -1.0, 1e-300, 5e-324, 1e300, 1e308, math.inf,
                               -math.inf, math.nan, 89.999999, 90.0, 0.5, 2.0])
any_number = st.one_of(st.integers(-10, 10_000), st.integers(-2**70, 2**70),
                       st.floats(allow_nan=True, allow_infinity=True), edge_floats)
toml_scalar = st.one_of(any_number, st.booleans(), st.text(max_size=8),
                        st.sampled_from(["fixed", "input", "output", "", " input", "inner"]))
toml_value = st.one_of(toml_scalar, st.lists(toml_scalar, max_size=3),
                       st.dictionaries(st.text(max_size=4), toml_scalar, max_size=2))

SHAFTS = ["input", "output", "mid"]
VALID_ENTRIES = {
    "gear_stage": {"name": "g", "driver": "input", "driven": "output", "driver_teeth": 20,
                   "driven_teeth": 40, "harmonics": 2, "sidebands": 1},
    "planetary_stage": {"name": "p", "sun_teeth": 21, "planet_teeth": 30, "ring_teeth": 81,
                        "planets": 3, "sun": "output", "carrier": "mid", "ring": "fixed"},
    "bearing": {"name": "b", "shaft": "output", "rolling_elements": 9,
                "element_diameter": 7.9, "pitch_diameter": 39.0, "contact_angle_deg": 15.0},
    "rotor": {"name": "r", "shaft": "input", "count": 7},
    "order": {"name": "o", "shaft": "mid", "order": 0.42},
    "line": {"name": "l", "hz": 50.0, "harmonics": 3},
}


@st.composite
def mutated_entry(draw, table):
    entry = dict(VALID_ENTRIES[table])
    for _ in range(draw(st.integers(0, 3))):
        action = draw(st.sampled_from(["set", "drop", "add"]))
        key = draw(st.sampled_from(sorted(entry) or ["name"]))
        if action == "set":
            entry[key] = draw(toml_value)
        elif action == "drop":
            entry.pop(key, None)
        else:
            entry[draw(st.sampled_from(["harmonics", "level_db", "sidebands", "colour", key]))] \
                = draw(toml_value)
    return entry


@st.composite
def machine_dicts(draw):
    d = {"machine": {"name": "fuzz", "reference": draw(st.sampled_from(SHAFTS + ["nope"]))},
         "shaft": [{"name": s} for s in SHAFTS[: draw(st.integers(0, 3))]]}
    for table in draw(st.lists(st.sampled_from(sorted(VALID_ENTRIES)), max_size=4)):
        d.setdefault(table, []).append(draw(mutated_entry(table)))
    if draw(st.integers(0, 9)) == 0:
        d[draw(st.sampled_from(["machine", "shaft", "gear_stage", "extra"]))] = draw(toml_value)
    return d


VALID_PLAN = {
    "speed": {"profile": "linear", "start_rpm": 600.0, "end_rpm": 3000.0, "duration_s": 10.0},
    "acquisition": {"rates_hz": [2560.0, 5120.0], "filter": "butterworth", "filter_order": 6,
                    "cutoff": 0.39, "threshold_db": -60.0},
    "band": [{"name": "a", "hz": [800.0, 1200.0]}, {"name": "b", "orders": [2.0, 4.0]},
             {"name": "c", "around": "g mesh", "width_pct": 10.0}],
    "resampling": {"max_order": 50.0, "order_resolution": 0.05},
}
FILTER_KINDS = ["none", "ideal", "butterworth", "bessel", "chebyshev1", "elliptic", "digital",
                "table", "sinc"]


@st.composite
def plan_dicts(draw):
    d = json.loads(json.dumps(VALID_PLAN))
    d["acquisition"]["filter"] = draw(st.sampled_from(FILTER_KINDS))
    if d["acquisition"]["filter"] not in ("butterworth", "bessel", "chebyshev1", "elliptic"):
        d["acquisition"].pop("filter_order")
        if d["acquisition"]["filter"] != "ideal":
            d["acquisition"].pop("cutoff")
    if d["acquisition"]["filter"] == "table":
        d["acquisition"]["table"] = {"fraction": [0.0, 0.4, 0.6], "db": [0.0, 3.0, 80.0]}
    d["speed"]["profile"] = draw(st.sampled_from(["linear", "exponential", "table", "step"]))
    if d["speed"]["profile"] == "table":
        d["speed"] = {"profile": "table", "table": {"time_s": [0.0, 5.0, 10.0],
                                                    "rpm": [600.0, 900.0, 3000.0]}}
    sections = ["speed", "acquisition", "resampling"]
    for _ in range(draw(st.integers(0, 4))):
        sec = draw(st.sampled_from(sections + ["band"]))
        if sec == "band":
            if d["band"]:
                i = draw(st.integers(0, len(d["band"]) - 1))
                key = draw(st.sampled_from(["name", "hz", "orders", "around", "width_pct"]))
                d["band"][i][key] = draw(toml_value)
            continue
        key = draw(st.sampled_from(sorted(d[sec]) + ["unknown"]))
        if draw(st.booleans()):
            d[sec][key] = draw(toml_value)
        else:
            d[sec].pop(key, None)
    if draw(st.integers(0, 9)) == 0:
        d[draw(st.sampled_from(["speed", "acquisition", "band", "extra"]))] = draw(toml_value)
    return d


# ------------------------------------------------------------------------------------------
# Property tests: files as dictionaries
# ------------------------------------------------------------------------------------------
@FUZZ
@given(machine_dicts())
def test_machine_dicts_raise_only_foldline_errors(d):
    m = only_foldline_errors(machine_from_dict, d, source="fuzz.toml")
    if m is not None:  # a machine that loads has finite, positive line frequencies
        for line in m.lines():
            value = line.order if line.order is not None else line.hz
            assert math.isfinite(value) and value > 0


@FUZZ
@given(plan_dicts())
def test_plan_dicts_raise_only_foldline_errors(d):
    snapshot = json.dumps(d, sort_keys=True, default=repr)
    only_foldline_errors(plan_from_dict, d, source="fuzz.toml")
    assert json.dumps(d, sort_keys=True, default=repr) == snapshot  # input not modified


# ------------------------------------------------------------------------------------------
# Property tests: the math
# ------------------------------------------------------------------------------------------
@FUZZ
@given(st.lists(any_number, min_size=0, max_size=5), any_number)
def test_folding_any_numbers(freqs, rate):
    f = np.array(freqs, dtype=float) if freqs else np.array([], dtype=float)
    before = f.copy()
    for fn in (apparent_frequency, nyquist_zone):
        out = only_foldline_errors(fn, f, rate)
        if out is not None and f.size:
            assert np.all(np.isfinite(np.asarray(out, dtype=float)))
    np.testing.assert_array_equal(f, before)


@FUZZ
@given(st.sampled_from(FILTER_KINDS), st.dictionaries(
    st.sampled_from(["order", "cutoff", "passband_edge", "stopband_edge", "stopband_db",
                     "passband_ripple_db"]), any_number, max_size=4),
    st.lists(any_number, max_size=4), any_number)
def test_filters_any_parameters(kind, params, freqs, rate):
    filt = only_foldline_errors(AntiAliasFilter, kind, **params)
    if filt is not None:
        att = only_foldline_errors(filt.attenuation_db, np.array(freqs, dtype=float), rate)
        if att is not None:
            assert not np.any(np.isnan(np.asarray(att, dtype=float)))
        only_foldline_errors(filt.usable_edge_hz, rate)


@FUZZ
@given(st.sampled_from(["linear", "exponential", "table", "constant"]),
       any_number, any_number, any_number,
       st.lists(any_number, max_size=4), st.lists(any_number, max_size=4),
       st.lists(any_number, max_size=3))
def test_speed_profiles_any_numbers(kind, start, end, duration, times, rpms, queries):
    prof = only_foldline_errors(SpeedProfile, kind, start_rpm=start, end_rpm=end,
                                duration_s=duration, table_time_s=times or None,
                                table_rpm=rpms or None)
    if prof is None:
        prof = only_foldline_errors(SpeedProfile, kind, start_rpm=start, end_rpm=end,
                                    duration_s=duration)
    if prof is not None:
        q = np.array(queries, dtype=float)
        only_foldline_errors(prof.rpm_at, q)
        only_foldline_errors(prof.time_at, q)
        only_foldline_errors(prof.sweep_rate_rpm_per_s, q)


SMALL_FUZZ = settings(max_examples=30, deadline=None, derandomize=True,
                      suppress_health_check=[HealthCheck.too_slow])


@SMALL_FUZZ
@given(machine_dicts(), plan_dicts(), any_number)
def test_fold_map_collisions_and_advice_any_inputs(md, pd_, rate):
    machine = only_foldline_errors(machine_from_dict, md, source="m.toml")
    plan = only_foldline_errors(plan_from_dict, pd_, source="p.toml")
    if machine is None or plan is None:
        return
    fmap = only_foldline_errors(fold_map, machine, plan, rate, n_speeds=50)
    if fmap is not None:
        only_foldline_errors(find_collisions, machine, plan, rate, fmap=fmap, n_speeds=50)
    only_foldline_errors(advise, machine, plan, n_speeds=50)


# ------------------------------------------------------------------------------------------
# Mutation fuzzing of run files
# ------------------------------------------------------------------------------------------
RATE = 1000
FRAMES = 96


def _base_signals(rng) -> np.ndarray:
    t = np.arange(FRAMES) / RATE
    return np.vstack([np.sin(2 * np.pi * 50 * t) + 0.01 * rng.standard_normal(FRAMES),
                      np.where((20 * t) % 1 < 0.5, 5.0, 0.0)])


def base_wav(rng, fmt: str) -> bytes:
    """A valid WAV (PCM 16/24/32, float 32/64, plain or extensible header) with a LIST chunk."""
    x = _base_signals(rng) / 8.0
    ch = x.shape[0]
    if fmt == "float32":
        tag, bits, payload = 3, 32, np.ascontiguousarray(x.T, "<f4").tobytes()
    elif fmt == "float64":
        tag, bits, payload = 3, 64, np.ascontiguousarray(x.T, "<f8").tobytes()
    elif fmt == "int16":
        tag, bits, payload = 1, 16, np.ascontiguousarray(x.T * 32767, "<i2").tobytes()
    elif fmt == "int32":
        tag, bits, payload = 1, 32, np.ascontiguousarray(x.T * 2**31, "<i4").tobytes()
    else:  # int24
        codes = np.ascontiguousarray(np.round(x.T * 2**23), "<i4")
        tag, bits, payload = 1, 24, codes.view(np.uint8).reshape(-1, 4)[:, :3].tobytes()
    block = ch * bits // 8
    extensible = rng.integers(2) == 1
    if extensible:
        guid = struct.pack("<H", tag) + b"\x00\x00\x00\x00\x10\x00\x80\x00\x00\xaa\x00\x38\x9b\x71"
        fmt_body = struct.pack("<HHIIHHHHI", 0xFFFE, ch, RATE, RATE * block, block, bits, 22,
                               bits, 0) + guid
    else:
        fmt_body = struct.pack("<HHIIHH", tag, ch, RATE, RATE * block, block, bits)
    chunks = [b"fmt " + struct.pack("<I", len(fmt_body)) + fmt_body,
              b"LIST" + struct.pack("<I", 4) + b"INFO",
              b"data" + struct.pack("<I", len(payload)) + payload]
    body = b"WAVE" + b"".join(chunks)
    return b"RIFF" + struct.pack("<I", len(body)) + body


def base_csv(rng) -> bytes:
    x = _base_signals(rng)
    rows = ["time_s,vibration,tacho"]
    if rng.integers(2):
        rows.append("s,m/s^2,V")
    rows += [f"{i / RATE:.6f},{x[0, i]:.6f},{x[1, i]:.1f}" for i in range(FRAMES)]
    return ("\n".join(rows) + "\n").encode()


NPZ_ODD_VALUES = [
    np.array([]), np.zeros((0, 5)), np.zeros((2, 3, 4)), np.array(np.nan), np.array(-1.0),
    np.array(0), np.array([1.0, 2.0]), np.array("fast"), np.array([b"a", b"b"]),
    np.array([1 + 2j]), np.array([True, False]), np.array(1e308), np.array(np.inf),
    np.zeros((1, 1)), np.zeros(7, dtype=np.int8), np.array(["x", "x"]), np.array([""]),
    np.array(["a", "b", "c"]), np.zeros((3, 2), dtype=np.uint64), np.array([[np.nan, 1.0]]),
    np.array(["vibration"]), np.array(2**62, dtype=np.int64),
]


def base_npz(rng) -> bytes:
    x = _base_signals(rng)
    arrays = {"data": x if rng.integers(2) else x.T.copy(), "rate_hz": np.float64(RATE)}
    if rng.integers(2):
        arrays["channel_names"] = np.array(["vibration", "tacho"])
    # Half the archives get odd contents (valid zip, wrong arrays): the reader's own checks.
    for _ in range(int(rng.integers(0, 3))):
        key = str(rng.choice(["data", "rate_hz", "channel_names", "extra"]))
        if rng.integers(4) == 0:
            arrays.pop(key, None)
        else:
            arrays[key] = NPZ_ODD_VALUES[int(rng.integers(len(NPZ_ODD_VALUES)))]
    buf = io.BytesIO()
    np.savez(buf, **arrays)
    return buf.getvalue()


def base_mat(rng) -> bytes:
    import scipy.io

    x = _base_signals(rng)
    variables = {"vibration": x[0], "tacho": x[1], "rpm": np.float64(1200.0)}
    if rng.integers(2):
        variables["odd"] = NPZ_ODD_VALUES[int(rng.integers(len(NPZ_ODD_VALUES)))]
    buf = io.BytesIO()
    scipy.io.savemat(buf, variables)
    return buf.getvalue()


def _riff_chunks(b: bytes) -> list[tuple[int, int]]:
    """(start, end) of each top-level chunk after the 12-byte RIFF header, as far as parsable."""
    out, pos = [], 12
    while pos + 8 <= len(b):
        size = struct.unpack_from("<I", b, pos + 4)[0]
        end = min(len(b), pos + 8 + size + (size & 1))
        out.append((pos, end))
        pos = end
    return out


# Header fields of a plain WAV (offsets from the file start; the 'fmt ' chunk comes first).
WAV_FIELDS = {"riff_size": (4, "<I"), "fmt_size": (16, "<I"), "format_tag": (20, "<H"),
              "channels": (22, "<H"), "rate": (24, "<I"), "byte_rate": (28, "<I"),
              "block_align": (32, "<H"), "bits": (34, "<H")}
FIELD_VALUES = [0, 1, 2, 3, 7, 8, 24, 255, 0xFFFE, 0xFFFF, 0x7FFFFFFF, 0xFFFFFFFF, 2**31]


CSV_TOKENS = ["", "nan", "inf", "-inf", "1e999", "x", "0x10", "1,5", " ", '"1"', "NaN", "-",
              "1e-320", "9" * 400, "time_s", ";", "\t"]


def mutate_lines(rng, b: bytes) -> bytes:
    """Line-level mutations of a CSV: drop, repeat or swap rows, replace a cell."""
    lines = b.decode("utf-8").split("\n")
    for _ in range(int(rng.integers(1, 3))):
        i = int(rng.integers(len(lines)))
        op = rng.choice(["drop", "repeat", "swap", "cell", "column"])
        if op == "drop":
            del lines[i]
        elif op == "repeat":
            lines.insert(i, lines[i])
        elif op == "swap":
            j = int(rng.integers(len(lines)))
            lines[i], lines[j] = lines[j], lines[i]
        elif op == "cell":
            cells = lines[i].split(",")
            cells[int(rng.integers(len(cells)))] = str(rng.choice(CSV_TOKENS))
            lines[i] = ",".join(cells)
        else:
            lines[i] += "," + str(rng.choice(CSV_TOKENS))
        if not lines:
            break
    return "\n".join(lines).encode("utf-8")


def mutate(rng, b: bytes, kind: str) -> bytes:
    """One to three mutations of ``b``; for WAV also header fields and chunk swaps."""
    if kind == "csv" and rng.integers(2):
        return mutate_lines(rng, b)
    if kind == "npz" and rng.integers(2):
        return b  # the odd contents of base_npz alone
    b = bytearray(b)
    for _ in range(int(rng.integers(1, 4))):
        op = rng.choice(["flip", "truncate", "insert", "delete", "field", "swap", "data_size",
                         "dup"])
        if len(b) == 0:
            b += bytes(rng.integers(0, 256, int(rng.integers(1, 16)), dtype=np.uint8))
            continue
        if op == "flip":
            for _ in range(int(rng.integers(1, 9))):
                i = int(rng.integers(len(b)))
                b[i] ^= 1 << int(rng.integers(8))
        elif op == "truncate":
            del b[int(rng.integers(0, len(b))):]
        elif op == "insert":
            i = int(rng.integers(0, len(b) + 1))
            junk = bytes(rng.integers(0, 256, int(rng.integers(1, 64)), dtype=np.uint8))
            if rng.integers(3) == 0:
                junk = rng.choice([b"nan", b"inf", b"-inf", b",,", b"\n", b"\x00", b"1e999",
                                   b'"', b";", b"\r\n", b"\xff\xfe"])
            b[i:i] = junk
        elif op == "delete":
            i = int(rng.integers(0, len(b)))
            del b[i:i + int(rng.integers(1, 64))]
        elif op == "dup":
            i = int(rng.integers(0, len(b)))
            j = min(len(b), i + int(rng.integers(1, 200)))
            b[j:j] = b[i:j]
        elif kind == "wav" and op == "field" and len(b) >= 36:
            name = rng.choice(sorted(WAV_FIELDS))
            off, f = WAV_FIELDS[name]
            value = int(rng.choice(FIELD_VALUES))
            struct.pack_into(f, b, off, value & (0xFFFF if f == "<H" else 0xFFFFFFFF))
        elif kind == "wav" and op == "data_size":
            i = bytes(b).find(b"data")
            if i >= 0 and i + 8 <= len(b):
                struct.pack_into("<I", b, i + 4, int(rng.choice(FIELD_VALUES)))
        elif kind == "wav" and op == "swap":
            chunks = _riff_chunks(bytes(b))
            if len(chunks) >= 2:
                i, j = sorted(rng.choice(len(chunks), 2, replace=False))
                (a0, a1), (b0, b1) = chunks[i], chunks[j]
                b = b[:a0] + b[b0:b1] + b[a1:b0] + b[a0:a1] + b[b1:]
        else:  # fall back to a byte flip for the text and zip formats
            i = int(rng.integers(len(b)))
            b[i] = int(rng.integers(256))
    return bytes(b)


def _exercise(run) -> None:
    """Read every sample of every channel, whole and in chunks."""
    for i in range(run.n_channels):
        x = run.channel(i + 1)
        assert x.shape == (run.n_samples,)
        total = sum(len(c) for c in run.iter_chunks(i + 1, 37, 5))
        assert total >= run.n_samples
    assert run.duration_s > 0 and math.isfinite(run.rate_hz)


# MAT files are read in a child process (about 0.4 s each): fewer of them, the first
# 12 of seed 15 include one (#10) that crashed the MAT reader before the isolation.
FORMATS = {"wav": 1500, "csv": 700, "npz": 800, "mat": 12}


@pytest.mark.parametrize("kind", sorted(FORMATS))
def test_mutated_run_files_raise_only_foldline_errors(kind, tmp_path):
    rng = np.random.default_rng({"wav": 11, "csv": 12, "npz": 13, "mat": 15}[kind])
    wav_formats = ["int16", "int24", "int32", "float32", "float64"]
    outcomes = {"read": 0, "refused": 0}
    for n in range(FORMATS[kind]):
        if kind == "wav":
            base = base_wav(rng, wav_formats[n % len(wav_formats)])
        elif kind == "csv":
            base = base_csv(rng)
        elif kind == "npz":
            base = base_npz(rng)
        else:
            base = base_mat(rng)
        data = mutate(rng, base, kind)
        path = tmp_path / f"m{n:04d}.{kind}"
        path.write_bytes(data)
        try:
            with warnings.catch_warnings():
                warnings.simplefilter("ignore")
                given = kind == "mat" or (kind == "csv" and n % 2)
                run = read_run(path, rate_hz=RATE if given else None)
                if n % 5 == 0:
                    _exercise(run)
            outcomes["read"] += 1
        except FoldlineError:
            outcomes["refused"] += 1
        except Exception as exc:  # pragma: no cover - a failure names the file to replay
            pytest.fail(f"mutated {kind} #{n} raised {type(exc).__name__}: {exc} "
                        f"(first bytes {data[:48]!r})")
        finally:
            run = None
    # Both branches exercised: some mutations leave a readable file, most break it.
    print(kind, outcomes)
    assert outcomes["read"] > 0 and outcomes["refused"] > 0, outcomes


def test_mutated_sidecars_raise_only_foldline_errors(tmp_path):
    rng = np.random.default_rng(14)
    base = json.dumps({"rate_hz": 1000, "channels": [
        {"name": "vibration", "unit": "g", "sensitivity": 0.01},
        {"name": "tacho", "unit": "V", "sensitivity": 1.0}], "tacho_channel": "tacho",
        "pulses_per_rev": 60, "missing_pulses": 2, "machine_file": "m.toml",
        "notes": {"a": [1, 2]}}, indent=1).encode()
    refused = 0
    for n in range(300):
        path = tmp_path / f"s{n:03d}.json"
        path.write_bytes(mutate(rng, base, "json"))
        try:
            read_sidecar(path)
        except FoldlineError:
            refused += 1
        except Exception as exc:  # pragma: no cover
            pytest.fail(f"mutated sidecar #{n} raised {type(exc).__name__}: {exc}")
    assert 0 < refused < 300


def test_mat_file_that_crashes_the_mat_reader_is_refused(tmp_path):
    # Mutation #10 of seed 15 makes scipy's compiled MAT 5 reader (scipy 1.17) crash the
    # interpreter with a segmentation fault; read_run loads MAT files in a child process, so
    # it becomes a RunFileError naming the file.
    rng = np.random.default_rng(15)
    for _ in range(11):
        data = mutate(rng, base_mat(rng), "mat")
    path = tmp_path / "damaged.mat"
    path.write_bytes(data)
    with pytest.raises(RunFileError, match=r"damaged\.mat: cannot be read as a MATLAB \.mat "
                                           r"file \((the MAT reader stopped with status|\w+Error)"):
        read_run(path, rate_hz=RATE)  # the status (-11) while scipy crashes; its error once fixed


@pytest.mark.parametrize("kind", ["machine", "plan"])
def test_mutated_machine_and_plan_files_raise_only_foldline_errors(kind, tmp_path):
    from workbench.machine import read_machine
    from workbench.sampling import read_plan

    rng = np.random.default_rng({"machine": 16, "plan": 17}[kind])
    base = (RIG_MACHINE if kind == "machine" else RIG_PLAN).read_bytes()
    read = read_machine if kind == "machine" else read_plan
    loaded = 0
    for n in range(400):
        path = tmp_path / f"{kind}{n:03d}.toml"
        path.write_bytes(mutate(rng, base, "toml"))
        try:
            with warnings.catch_warnings():
                warnings.simplefilter("ignore")
                read(path)
            loaded += 1
        except FoldlineError:
            pass
        except Exception as exc:  # pragma: no cover
            pytest.fail(f"mutated {kind} file #{n} raised {type(exc).__name__}: {exc}")
    assert 0 < loaded < 400
