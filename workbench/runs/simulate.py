"""Virtual acquisition: what a digitiser records from a machine following a test plan.

The model follows the hardware chain, line by line:

1. **Source.**  Every line of :meth:`Machine.lines` is a sinusoid of peak amplitude
   ``10**(level_db / 20)`` m/s^2 (0 dB = 1 m/s^2 peak).  An order line's phase is
   ``2 pi order theta(t) + phi`` with ``theta(t)`` the reference shaft angle in revolutions
   (:meth:`SpeedProfile.shaft_angle_rev`); a fixed line's is ``2 pi hz t + phi``.  The start
   phases ``phi`` are drawn uniformly from the seed.
2. **Structure.**  The amplitude is multiplied by :func:`resonance_gain` at the line's *true*
   frequency (one structural resonance on top of a flat transmission path).  The resonance is
   a property of the structure, never of the sample rate: ``resonance_hz`` when given, else
   :data:`DEFAULT_RESONANCE_HZ`, so runs simulated at two candidate rates show the same
   structure and their band levels compare like with like.  A machine with
   ``[[resonance]]`` entries is shaped by them instead of the default resonance (an explicit
   ``resonance_hz`` still applies): each line is multiplied by the complex gain
   :func:`mode_gain` at its true frequency, ``G = 1 + sum_i (Q_i - 1) 2 zeta_i r_i H(r_i)``,
   a flat path plus each single-degree-of-freedom mode (magnitude and phase lag
   ``atan2(2 zeta r, 1 - r^2)``), with ``Q = 1 / (2 zeta)`` and the machine file's default
   damping ratio 0.05 where an entry gives none.  ``[[critical]]`` entries shape every order-1
   line by the unbalance response of the rotor, :func:`unbalance_gain`, so a simulated run-up
   shows the critical (amplitude and phase).
3. **Anti-alias filter.**  The amplitude is multiplied by ``10**(-A/20)`` with ``A =
   plan.filter.attenuation_db(f_true, rate_hz)``, again at the *true* frequency.  Amplitudes
   follow the speed: they are evaluated every millisecond of the run and interpolated
   linearly in between.
4. **Sampling.**  The sum is evaluated at the sample instants ``n / rate_hz`` only.  A line
   above Nyquist therefore lands at its apparent frequency by itself: nothing is folded by
   hand.
5. **Noise.**  Gaussian white noise of RMS ``10**(noise_db / 20)`` m/s^2 is added after the
   filter (the converter's own noise floor), so it is not shaped by it.

The tacho channel is a 5 V, 50 % duty square wave from the same shaft angle: ``pulses_per_rev``
tooth positions of which the last ``missing_pulses`` are absent (a 60-2 wheel has 58 teeth and a
gap); the first tooth after the gap rises at shaft angle 0 (mod 1 rev).  It bypasses the
anti-alias filter (tacho inputs are usually digital or unfiltered).  An optional rise time
turns the steps into ramps.

Everything is computed in chunks of ``chunk_s`` seconds, one line at a time, so memory does
not grow with the number of lines, and :func:`simulate_to_wav` does not grow with the duration.
The result does not depend on ``chunk_s``: phases, amplitude grid and noise are all anchored
to absolute sample numbers.
"""

from __future__ import annotations

import math
import os
import warnings
from collections.abc import Iterator
from dataclasses import dataclass
from pathlib import Path
from typing import Any

import numpy as np

from workbench.checks import FieldError, positive, positive_int, rate_hz as check_rate, real
from workbench.errors import FoldlineWarning, InputError
from workbench.runs.files import sidecar_for_run
from workbench.fileio import atomic_output, check_writable
from workbench.runs.run import Channel, Run
from workbench.runs.sidecar import Sidecar, sidecar_path, write_sidecar
from workbench.runs.formats.wav import WavWriter

__all__ = ["resonance_gain", "mode_gain", "unbalance_gain", "simulate_run", "simulate_to_wav",
           "VIBRATION_UNIT", "TACHO_HIGH_V", "DEFAULT_RESONANCE_HZ"]

#: Unit of the simulated vibration channel (levels are dB re 1 m/s^2 peak).
VIBRATION_UNIT = "m/s^2"
#: High level of the simulated tacho, in V.
TACHO_HIGH_V = 5.0
_ENVELOPE_S = 1e-3
#: Structural resonance of the simulated machine when none is given, Hz.  Fixed (not a
#: fraction of the rate) so that simulations at different rates model the same structure.
#: Housing and bearing-pedestal modes of gearboxes, motors and pumps commonly lie between a
#: few hundred Hz and a few kHz (common practice, no source); 700 Hz lies inside the usable band
#: of every standard rate from 2560 S/s up.
DEFAULT_RESONANCE_HZ = 700.0


def resonance_gain(f_hz, resonance_hz: float, q: float, gain_db: float) -> np.ndarray:
    """Magnitude of the structural path from a source to the sensor.

    A flat path plus one resonance::

        G(f) = 1 + (g - 1) B(f),   g = 10**(gain_db / 20),
        B(f) = 1 / sqrt(1 + Q**2 (f / fn - fn / f)**2)

    ``B`` is the mobility (velocity per force) of a single-degree-of-freedom oscillator with
    natural frequency ``fn`` and damping ratio ``1 / (2 Q)``, normalised to 1 at ``fn``
    ([1]_, ch. 2); its -3 dB bandwidth is ``fn / Q``.  So ``G`` is 0 dB at DC and far from
    the resonance, and exactly ``gain_db`` at ``fn``.  A pure oscillator would fix the peak at
    about ``20 log10 Q`` and roll off above ``fn``, which would hide the very lines whose folding
    the plan is about; keeping the path flat away from ``fn`` makes a line's simulated level
    equal its machine-file level minus the filter's attenuation, as the fold map predicts.

    Parameters
    ----------
    f_hz : array_like
        True frequencies in Hz, >= 0.
    resonance_hz : float
        Natural frequency ``fn`` in Hz, > 0.
    q : float
        Quality factor, > 0.
    gain_db : float
        Gain at ``fn`` in dB; 0 disables the resonance.

    Returns
    -------
    ndarray
        Linear magnitude, same shape as ``f_hz``.

    References
    ----------
    .. [1] D. J. Ewins, *Modal Testing: Theory, Practice and Application*, 2nd ed., Research
       Studies Press, 2000.
    """
    f = np.asarray(f_hz, dtype=np.float64)
    g = 10.0 ** (gain_db / 20.0)
    r = f / resonance_hz
    with np.errstate(divide="ignore", invalid="ignore"):
        b = 1.0 / np.sqrt(1.0 + (q * (r - 1.0 / r)) ** 2)
    b = np.where(r > 0, b, 0.0)
    return 1.0 + (g - 1.0) * b


def mode_gain(f_hz, resonances) -> np.ndarray:
    """Complex gain of a flat path plus single-degree-of-freedom modes at true frequencies.

    ``G(f) = 1 + sum_i (Q_i - 1) 2 zeta_i r_i H(r_i)``, ``r_i = f / fn_i``,
    ``H(r) = 1 / (1 - r^2 + 2 i zeta r)``, ``Q_i = 1 / (2 zeta_i)``.  Each mode term has
    magnitude ``2 zeta r |H|`` (the mobility of :func:`resonance_gain`, 1 at ``fn``) and the
    single-degree-of-freedom phase lag ``atan2(2 zeta r, 1 - r^2)`` (0 well below ``fn``, 90
    degrees at it, 180 well above); so ``|G(fn)| = sqrt(1 + (Q - 1)^2)``, about Q, and G is 1
    (0 dB, no phase) far from every mode.  A line ``a cos(v)`` becomes ``Re(a G exp(i v))``.

    Parameters
    ----------
    f_hz : array_like
        True frequencies, Hz.
    resonances : sequence of Resonance
        ``hz`` and ``zeta`` (the damping ratio, or the machine file's default) of each mode.

    References
    ----------
    .. [1] S. S. Rao, "Mechanical Vibrations", 5th ed., Prentice Hall, 2011, section 3.4
       (harmonically excited damped single-degree-of-freedom system).
    """
    f = np.asarray(f_hz, dtype=np.float64)
    g = np.ones(f.shape, dtype=np.complex128)
    for m in resonances:
        z = float(m.zeta)
        r = f / float(m.hz)
        g += (1.0 / (2 * z) - 1.0) * 2 * z * r / (1 - r * r + 2j * z * r)
    return g


def unbalance_gain(rpm, criticals) -> np.ndarray:
    """Complex unbalance response of a rotor with critical speeds, 1 well above all of them.

    ``U = (1 / n) sum_i r_i^2 H(r_i)``, ``r_i = rpm / rpm_i``, ``H(r) = 1 / (1 - r^2 + 2 i zeta
    r)``: the response of each mode to a rotating unbalance (amplitude ``r^2 |H|``, phase lag
    ``atan2(2 zeta r, 1 - r^2)``), equal participation, so an order-1 line keeps its machine-file
    level far above the criticals and falls as ``r^2`` below them.

    References
    ----------
    .. [1] S. S. Rao, "Mechanical Vibrations", 5th ed., Prentice Hall, 2011, section 3.7
       (rotating unbalance).
    """
    n = np.asarray(rpm, dtype=np.float64)
    u = np.zeros(n.shape, dtype=np.complex128)
    for c in criticals:
        z = float(c.zeta)
        r = n / float(c.rpm)
        u += r * r / (1 - r * r + 2j * z * r)
    return u / max(1, len(criticals))


@dataclass(frozen=True)
class _Settings:
    rate_hz: float
    n_samples: int
    chunk: int
    seed: int
    noise_rms: float
    resonance_hz: float
    resonance_q: float
    resonance_gain_db: float
    pulses_per_rev: int
    missing_pulses: int
    tacho: bool
    tacho_rise_s: float


def _settings(plan: Any, rate_hz: float, seed: int, duration_s: float | None, noise_db: float,
              resonance_hz: float | None, resonance_q: float, resonance_gain_db: float,
              pulses_per_rev: int, missing_pulses: int, tacho_channel: bool, chunk_s: float,
              tacho_rise_s: float) -> _Settings:
    rate = check_rate(None, "rate_hz", rate_hz)
    seed = positive_int(None, "seed", seed, low=0, whole_float=False)
    total = plan.speed.duration_s
    if duration_s is None:
        duration = total
    else:
        duration = positive(None, "duration_s", duration_s, unit="s")
        if duration > total * (1 + 1e-12):
            raise FieldError(None, "duration_s", f"is longer than the plan's speed profile; "
                                                 f"allowed: up to {total:g} s", duration_s)
    n = int(round(duration * rate))
    if n < 1:
        raise FieldError(None, "duration_s", f"gives no sample at {rate:g} Hz; allowed: at "
                                             f"least 1 / rate = {1 / rate:g} s", duration_s)
    noise = -math.inf if noise_db == -math.inf else real(None, "noise_db", noise_db, unit="dB; "
                                                         "-inf for none")
    fn = None if resonance_hz is None else positive(None, "resonance_hz", resonance_hz,
                                                    unit="Hz, or None")
    q = positive(None, "resonance_q", resonance_q)
    gain = real(None, "resonance_gain_db", resonance_gain_db, unit="dB")
    chunk = positive(None, "chunk_s", chunk_s, unit="s")
    # Default: edges that take 4 samples, as a real tacho edge does at usual rates; ideal steps
    # (0) time the pulses only to the nearest sample.
    rise = 4.0 / rate if tacho_rise_s is None else real(None, "tacho_rise_s", tacho_rise_s,
                                                        low=0.0, unit="s")
    pulses_per_rev = positive_int(None, "pulses_per_rev", pulses_per_rev, whole_float=False,
                                  what="tooth positions per revolution, missing ones included")
    missing_pulses = positive_int(None, "missing_pulses", missing_pulses, low=0,
                                  high=pulses_per_rev - 1, whole_float=False,
                                  what="pulses_per_rev - 1 at most")
    if not isinstance(tacho_channel, bool):
        raise FieldError(None, "tacho_channel", "must be true or false", tacho_channel)
    return _Settings(rate, n, max(1, int(round(chunk * rate))), int(seed),
                     0.0 if noise == -math.inf else 10.0 ** (noise / 20.0),
                     DEFAULT_RESONANCE_HZ if fn is None else fn, q, gain, int(pulses_per_rev),
                     int(missing_pulses), tacho_channel, rise)


class _Lines:
    """Per-line constants: orders or fixed frequencies, levels and start phases."""

    def __init__(self, machine: Any, seed: int) -> None:
        lines = tuple(machine.lines())
        self.names = [ln.name for ln in lines]
        self.is_order = np.array([ln.order is not None for ln in lines], dtype=bool)
        self.value = np.array([ln.order if ln.order is not None else ln.hz for ln in lines],
                              dtype=np.float64)
        self.amplitude = 10.0 ** (np.array([ln.level_db for ln in lines], dtype=np.float64)
                                  / 20.0)
        self.resonances = tuple(getattr(machine, "resonances", ()))
        self.criticals = tuple(getattr(machine, "criticals", ()))
        self.is_one = np.array([ln.order is not None and abs(ln.order - 1.0) < 1e-9
                                for ln in lines], dtype=bool)
        phase_seed, noise_seed = np.random.SeedSequence(seed).spawn(2)
        self.phase = np.random.default_rng(phase_seed).uniform(0.0, 2 * np.pi, len(lines))
        self.noise_seed = noise_seed

    def __len__(self) -> int:
        return len(self.names)


def _envelopes(lines: _Lines, plan: Any, s: _Settings, rpm: np.ndarray) -> np.ndarray:
    """Line amplitudes (n_lines, n_grid) at speeds ``rpm`` (n_grid,)."""
    f_true = np.where(lines.is_order[:, None], lines.value[:, None] * rpm[None, :] / 60.0,
                      lines.value[:, None])
    att = np.asarray(plan.filter.attenuation_db(f_true, s.rate_hz), dtype=np.float64)
    gain = resonance_gain(f_true, s.resonance_hz, s.resonance_q, s.resonance_gain_db)
    env = lines.amplitude[:, None] * gain * 10.0 ** (-att / 20.0)
    if lines.resonances or lines.criticals:
        env = env * mode_gain(f_true, lines.resonances)
        if lines.criticals and lines.is_one.any():
            env[lines.is_one] *= unbalance_gain(rpm, lines.criticals)[None, :]
    return env


def _tacho(theta_rev: np.ndarray, rpm: np.ndarray, s: _Settings) -> np.ndarray:
    u = theta_rev * s.pulses_per_rev
    tooth_pos = np.floor(u)
    frac = u - tooth_pos
    present = np.mod(tooth_pos, s.pulses_per_rev) < s.pulses_per_rev - s.missing_pulses
    if s.tacho_rise_s == 0:
        level = (frac < 0.5).astype(np.float64)
    else:
        teeth_per_s = s.pulses_per_rev * rpm / 60.0
        with np.errstate(divide="ignore", invalid="ignore"):
            since_rise = frac / teeth_per_s
            since_fall = (frac - 0.5) / teeth_per_s
        rising = np.clip(since_rise / s.tacho_rise_s, 0.0, 1.0)
        falling = 1.0 - np.clip(since_fall / s.tacho_rise_s, 0.0, 1.0)
        level = np.where(frac < 0.5, rising, falling)
        level = np.where(teeth_per_s > 0, level, (frac < 0.5).astype(np.float64))
    return TACHO_HIGH_V * np.where(present, level, 0.0)


def _generate(machine: Any, plan: Any, s: _Settings) -> Iterator[np.ndarray]:
    """Chunks (n_channels, n) of physical values, in order."""
    lines = _Lines(machine, s.seed)
    noise_rng = np.random.default_rng(lines.noise_seed)
    step = max(1, int(round(_ENVELOPE_S * s.rate_hz)))
    speed = plan.speed
    t_end = speed.duration_s
    for n0 in range(0, s.n_samples, s.chunk):
        n1 = min(n0 + s.chunk, s.n_samples)
        idx = np.arange(n0, n1, dtype=np.int64)
        t = idx / s.rate_hz
        theta = np.asarray(speed.shaft_angle_rev(np.minimum(t, t_end)), dtype=np.float64)
        # amplitude grid anchored at absolute multiples of `step` samples
        g_idx = np.arange((n0 // step) * step, -(-(n1 - 1) // step) * step + 1, step,
                          dtype=np.int64)
        rpm_grid = np.asarray(speed.rpm_at(np.minimum(g_idx / s.rate_hz, t_end)),
                              dtype=np.float64).reshape(-1)
        env = _envelopes(lines, plan, s, rpm_grid) if len(lines) else np.zeros((0, 1))
        # linear interpolation weights between grid points, shared by every line
        j = (idx - g_idx[0]) // step
        w = ((idx - g_idx[0]) - j * step) / step
        j1 = np.minimum(j + 1, g_idx.size - 1)
        x = np.zeros(n1 - n0)
        floor = np.empty(n1 - n0)
        for k in range(len(lines)):
            amp_k = env[k]
            if not np.any(amp_k):
                continue
            if lines.is_order[k]:
                v = lines.value[k] * theta
            else:
                v = idx * (lines.value[k] / s.rate_hz)
            np.floor(v, out=floor)
            v -= floor  # cycles mod 1: keeps the phase exact however long the run
            v *= 2.0 * np.pi
            v += lines.phase[k]
            if np.iscomplexobj(amp_k):
                # Re(E exp(i (v - pi/2))) = E_re sin v + E_im cos v, E interpolated linearly
                lo = amp_k[j]
                e = lo + (amp_k[j1] - lo) * w
                x += e.real * np.sin(v) + e.imag * np.cos(v)
                continue
            np.sin(v, out=v)
            if amp_k.min() == amp_k.max():
                v *= amp_k[0]
            else:
                lo = amp_k[j]
                v *= lo + (amp_k[j1] - lo) * w
            x += v
        if s.noise_rms > 0:
            x += s.noise_rms * noise_rng.standard_normal(n1 - n0)
        if s.tacho:
            rpm = np.asarray(speed.rpm_at(np.minimum(t, t_end)), dtype=np.float64) \
                if s.tacho_rise_s > 0 else None
            yield np.vstack([x, _tacho(theta, rpm, s)])
        else:
            yield x.reshape(1, -1)


def _machine_modes(machine: Any, s: _Settings, resonance_hz) -> _Settings:
    """Without an explicit ``resonance_hz``, a machine's [[resonance]] entries replace the
    default structural resonance (DEFAULT_RESONANCE_HZ)."""
    if resonance_hz is None and tuple(getattr(machine, "resonances", ())):
        from dataclasses import replace

        return replace(s, resonance_gain_db=0.0)
    return s


def _peak_gain(machine: Any, s: _Settings) -> float:
    """Upper bound of the structural gain of any line (for the integer formats' full scale)."""
    gain = max(1.0, 10.0 ** (s.resonance_gain_db / 20.0))
    res = tuple(getattr(machine, "resonances", ()))
    gain *= 1.0 + sum(1.0 / (2 * m.zeta) for m in res)
    crit = tuple(getattr(machine, "criticals", ()))
    if crit:
        gain *= max(1.0, max(1.0 / (2 * c.zeta * math.sqrt(1 - c.zeta ** 2)) for c in crit))
    return gain


def _check_tacho_resolution(plan: Any, s: _Settings) -> None:
    if not s.tacho:
        return
    tooth_hz = s.pulses_per_rev * plan.speed.rpm_max / 60.0
    if tooth_hz > 0 and s.rate_hz / tooth_hz < 4:
        warnings.warn(f"tacho: {s.pulses_per_rev} pulses per rev at {plan.speed.rpm_max:g} rpm "
                      f"is {tooth_hz:g} pulses/s, leaving {s.rate_hz / tooth_hz:.2g} samples per "
                      "pulse at the top speed (fewer than 4); pulses will be distorted or "
                      "missed: raise the rate or lower pulses_per_rev", FoldlineWarning,
                      stacklevel=3)


def _notes(machine: Any, plan: Any, s: _Settings, noise_db: float) -> dict[str, Any]:
    sp = plan.speed
    speed = {"profile": sp.kind, "start_rpm": sp.start_rpm, "end_rpm": sp.end_rpm,
             "duration_s": sp.duration_s}
    if sp.kind == "table":
        speed["table"] = {"time_s": list(sp.table_time_s), "rpm": list(sp.table_rpm)}
    return {"simulation": {
        "seed": s.seed,
        "rate_hz": s.rate_hz,
        "duration_s": s.n_samples / s.rate_hz,
        "machine": machine.name,
        "lines": len(tuple(machine.lines())),
        "speed": speed,
        "filter": plan.filter.describe(),
        "noise_db": float(noise_db) if math.isfinite(noise_db) else None,
        "resonance_hz": s.resonance_hz,
        "resonance_q": s.resonance_q,
        "resonance_gain_db": s.resonance_gain_db,
        "vibration_unit": VIBRATION_UNIT,
        "tacho_rise_s": s.tacho_rise_s,
    }}


def _channels(s: _Settings, vib_sensitivity: float = 1.0, tacho_sensitivity: float = 1.0
              ) -> tuple[Channel, ...]:
    vib = Channel("vibration", VIBRATION_UNIT, vib_sensitivity)
    return (vib, Channel("tacho", "V", tacho_sensitivity)) if s.tacho else (vib,)


def simulate_run(machine: Any, plan: Any, rate_hz: float, *, seed: int = 0,
                 duration_s: float | None = None, noise_db: float = -60.0,
                 resonance_hz: float | None = None, resonance_q: float = 8.0,
                 resonance_gain_db: float = 12.0, pulses_per_rev: int = 1,
                 missing_pulses: int = 0, tacho_channel: bool = True, chunk_s: float = 10.0,
                 tacho_rise_s: float | None = None, machine_file: str | os.PathLike | None = None
                 ) -> Run:
    """Simulate an acquisition in memory (see the module notes for the model).

    Parameters
    ----------
    machine : Machine
        The drive train; every line of ``machine.lines()`` is simulated.
    plan : Plan
        Gives the speed profile (``plan.speed``) and the anti-alias filter (``plan.filter``).
    rate_hz : float
        Sample rate in Hz.
    seed : int, optional
        Seeds the start phases and the noise; the same inputs give the same samples.
    duration_s : float, optional
        Length in s, at most the profile's duration (the default).  ``round(duration_s *
        rate_hz)`` samples at ``n / rate_hz``.
    noise_db : float, optional
        Broadband noise RMS in dB re 1 m/s^2; ``-inf`` for none.  Default -60.
    resonance_hz : float, optional
        Structural resonance in Hz; default :data:`DEFAULT_RESONANCE_HZ` (700 Hz), the same
        at every rate.  For a machine with ``[[resonance]]`` entries the default is none: its
        own resonances shape the lines.
    resonance_q : float, optional
        Quality factor of the resonance (bandwidth ``resonance_hz / Q``).  Default 8.
    resonance_gain_db : float, optional
        Gain at the resonance in dB; 0 disables it.  Default 12.
    pulses_per_rev : int, optional
        Tooth positions of the tacho wheel, missing ones included.  Default 1.
    missing_pulses : int, optional
        Consecutive missing teeth (the gap).  Default 0.
    tacho_channel : bool, optional
        Add the tacho channel.  Default True.
    chunk_s : float, optional
        Length of a computation chunk in s (memory only; the result does not depend on it).
    tacho_rise_s : float, optional
        Rise and fall time of the tacho edges in s (linear ramps); default 4 samples.  0 gives
        ideal steps, whose pulse times can only be found to the nearest sample.
    machine_file : path-like, optional
        Machine file to record in the run.

    Returns
    -------
    Run
        Channels ``"vibration"`` (m/s^2) and, with ``tacho_channel``, ``"tacho"`` (V, the tacho
        of the run); float64 data.

    Raises
    ------
    InputError
        A parameter out of range (the message names it and what is allowed).

    Warns
    -----
    FoldlineWarning
        Fewer than 4 samples per tacho pulse at the top speed.
    """
    s = _settings(plan, rate_hz, seed, duration_s, noise_db, resonance_hz, resonance_q,
                  resonance_gain_db, pulses_per_rev, missing_pulses, tacho_channel, chunk_s,
                  tacho_rise_s)
    s = _machine_modes(machine, s, resonance_hz)
    _check_tacho_resolution(plan, s)
    data = np.empty((2 if s.tacho else 1, s.n_samples), dtype=np.float64)
    pos = 0
    for block in _generate(machine, plan, s):
        data[:, pos:pos + block.shape[1]] = block
        pos += block.shape[1]
    run = Run(data, s.rate_hz, _channels(s), tacho="tacho" if s.tacho else None,
              pulses_per_rev=s.pulses_per_rev, missing_pulses=s.missing_pulses,
              machine_file=None if machine_file is None else str(machine_file))
    return run.with_log("simulate", _notes(machine, plan, s, noise_db)["simulation"])


def simulate_to_wav(machine: Any, plan: Any, rate_hz: float, path: str | os.PathLike, *,
                    seed: int = 0, duration_s: float | None = None, noise_db: float = -60.0,
                    resonance_hz: float | None = None, resonance_q: float = 8.0,
                    resonance_gain_db: float = 12.0, pulses_per_rev: int = 1,
                    missing_pulses: int = 0, tacho_channel: bool = True, chunk_s: float = 10.0,
                    tacho_rise_s: float | None = None, machine_file: str | os.PathLike | None = None,
                    sample_format: str = "float32", force: bool = False) -> Path:
    """Simulate an acquisition straight into a WAV file and its sidecar, chunk by chunk.

    Memory does not depend on the duration: each chunk of ``chunk_s`` seconds is written as
    soon as it is computed.  Parameters as :func:`simulate_run`, plus:

    Parameters
    ----------
    path : path-like
        Output ``.wav`` file; the sidecar goes beside it (``.json``).  Written under temporary
        names and renamed into place only when complete.
    machine_file : path-like, optional
        Machine file; recorded in the sidecar by name only when it lies in the output folder
        (sidecar paths stay inside their folder), otherwise left out with a warning.
    sample_format : {"float32", "int16", "int24", "int32"}, optional
        WAV sample format.  float32 stores m/s^2 and V directly (sensitivity 1).  For integer
        formats the vibration's sensitivity is set so that the sum of the line amplitudes (at
        the resonance peak, plus 3 dB for filter ripple) plus 8 noise RMS stays below full
        scale, and the tacho's to 0.1 per V (5 V at half scale).
    force : bool, optional
        Overwrite existing files.

    Returns
    -------
    Path
        The WAV file.

    Raises
    ------
    OutputExistsError
        The WAV file or its sidecar exists and ``force`` is false.
    InputError
        A parameter out of range, or a rate that is not a whole number of Hz.
    """
    path = Path(path)
    if path.suffix.lower() != ".wav":
        raise InputError(f"{path}: simulate_to_wav writes a .wav file; got extension "
                         f"{path.suffix or '(none)'!r}")
    s = _settings(plan, rate_hz, seed, duration_s, noise_db, resonance_hz, resonance_q,
                  resonance_gain_db, pulses_per_rev, missing_pulses, tacho_channel, chunk_s,
                  tacho_rise_s)
    s = _machine_modes(machine, s, resonance_hz)
    side = sidecar_path(path)
    check_writable(path, force=force)
    check_writable(side, force=force)
    _check_tacho_resolution(plan, s)
    if sample_format == "float32":
        vib_sens, tacho_sens = 1.0, 1.0
    else:
        peak_gain = _peak_gain(machine, s) * math.sqrt(2.0)
        amplitudes = _Lines(machine, s.seed).amplitude
        bound = float(np.sum(amplitudes)) * peak_gain + 8.0 * s.noise_rms
        vib_sens = 1.0 / bound if bound > 0 else 1.0
        tacho_sens = 0.1
    channels = _channels(s, vib_sens, tacho_sens)
    scale = np.array([[c.sensitivity] for c in channels])
    template = Run(np.empty((len(channels), 0)), s.rate_hz, channels,
                   tacho="tacho" if s.tacho else None, pulses_per_rev=s.pulses_per_rev,
                   missing_pulses=s.missing_pulses,
                   machine_file=None if machine_file is None else str(machine_file))
    meta: Sidecar = sidecar_for_run(template, path, notes=_notes(machine, plan, s, noise_db))
    with atomic_output(side, force=force) as side_tmp:
        write_sidecar(meta, side_tmp, force=True)
        with WavWriter(path, s.rate_hz, len(channels), sample_format=sample_format,
                       force=force, channel_names=tuple(c.name for c in channels)) as w:
            for block in _generate(machine, plan, s):
                w.write(block * scale)
    return path
