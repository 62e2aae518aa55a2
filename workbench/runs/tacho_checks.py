"""Plausibility of the tacho wheel a run is analysed with: warnings, never refusals.

A wrong ``pulses_per_rev`` does not stop the tracking: it scales the speed (2 given for a
1-pulse-per-rev tape halves it) and moves every line to the wrong order.  Three things can
show it, and each gives a one-line warning:

* **the pulse spacing**: the teeth of a real wheel are never exactly evenly spaced, so the
  intervals between pulses repeat with the wheel's period (every N pulses for N teeth).  When
  the intervals clearly repeat every P pulses and P is not the given pulses per rev, the wheel
  is probably not what was given (a 2-tooth wheel given as 1 shows the every-other-pulse
  pattern).  A speed fluctuation locked to the shaft can make the same pattern; the warning
  says so.
* **the sidecar**: an option that overrides the sidecar's ``pulses_per_rev`` with a different
  value.
* **the plan**: a tracked speed range that is about 1/k or k times the plan's (k = 2, 3, 4...).

The check of the spacing needs the raw pulse times, so it detects them again
(:class:`~workbench.angle.PulseDetector`, streamed) rather than using the smoothed ones.
"""

from __future__ import annotations


import numpy as np

from workbench.angle import PulseDetector

__all__ = ["pulse_spacing_period", "tacho_warnings", "wheel_warnings", "warn_tacho"]

#: A pattern counts when the intervals, compared P pulses apart, differ by at most this
#: fraction of what unrelated intervals differ by (ratio of mean squared differences).
PATTERN_RATIO = 0.25


def pulse_spacing_period(pulse_times_s, *, max_period: int = 16) -> int | None:
    """The number of pulses after which the pulse spacing repeats, or None when it does not.

    Parameters
    ----------
    pulse_times_s : array_like, shape (n,)
        Raw pulse times, s, increasing.
    max_period : int
        Longest period looked for, pulses.

    Returns
    -------
    int or None
        The smallest period P >= 2 for which the interval deviations ``d_i`` (each interval
        relative to a running median over several periods, minus 1) satisfy
        ``mean((d_i - d_(i-P))^2) <= PATTERN_RATIO x 2 var(d)``; None when no period does or
        the record is too short (fewer than 8 periods).

    Notes
    -----
    With timing jitter only, ``d_i`` are uncorrelated and the ratio is about 1 for every P;
    a wheel with N teeth spaced unevenly repeats exactly every N pulses (common practice, no
    source: the tooth-to-tooth spacing error of a toothed wheel is a fixed pattern per
    revolution).
    """
    t = np.asarray(pulse_times_s, dtype=float)
    dt = np.diff(t)
    if dt.size < 16 or not np.all(dt > 0):
        return None
    w = 4 * max_period + 1
    if dt.size < 2 * w:
        w = max(5, (dt.size // 2) | 1)
    pad = np.pad(dt, w // 2, mode="edge")
    # Running median of the intervals: follows the run-up, ignores the pattern.
    windows = np.lib.stride_tricks.sliding_window_view(pad, w)
    ref = np.median(windows, axis=1)
    d = dt / ref - 1.0
    var = float(np.var(d))
    if not var > 0:
        return None
    for p in range(2, max_period + 1):
        if d.size < 8 * p:
            break
        msd = float(np.mean((d[p:] - d[:-p]) ** 2))
        if msd <= PATTERN_RATIO * 2.0 * var:
            return p
    return None


def wheel_warnings(pulse_times_s, pulses_per_rev: int, missing_pulses: int = 0) -> tuple:
    """Warnings when the pulse spacing contradicts the given wheel (see the module notes)."""
    n = int(pulses_per_rev)
    if missing_pulses:  # a missing-tooth wheel is checked by the tacho stage itself
        return ()
    period = pulse_spacing_period(pulse_times_s, max_period=max(4, min(2 * n + 2, 32)))
    if period is None or period == n:
        return ()
    return (f"the tacho's pulse spacing repeats every {period} pulses, but pulses per rev is "
            f"{n}: if the wheel has {period} pulses per revolution, the speed is "
            f"{'too high' if period > n else 'too low'} by {max(period, n) / min(period, n):g} x "
            f"and every order is scaled with it; check --pulses-per-rev (a speed fluctuation "
            f"locked to the shaft can also make such a pattern)",)


def tacho_warnings(run, analysis, *, pulses_per_rev=None, missing_pulses=None, tacho=None,
                   plan=None) -> tuple:
    """All tacho plausibility warnings for a tracked run (empty when all is consistent).

    Parameters
    ----------
    run : Run
        The run (its sidecar values: ``pulses_per_rev``, ``tacho``).
    analysis : RunAnalysis
        The tracked run (speed source and speed range).
    pulses_per_rev, missing_pulses, tacho : optional
        The options the run was tracked with (None: the sidecar's).
    plan : Plan, optional
        The test plan, whose speed range the tracked speed is compared with.

    Returns
    -------
    tuple of str
    """
    if getattr(analysis, "speed_source", "tacho") != "tacho":
        return ()
    out = []
    ppr = run.pulses_per_rev if pulses_per_rev is None else int(pulses_per_rev)
    miss = run.missing_pulses if missing_pulses is None else int(missing_pulses)
    if pulses_per_rev is not None and run.source and int(pulses_per_rev) != run.pulses_per_rev:
        from workbench.runs.sidecar import sidecar_path

        if sidecar_path(run.source).is_file():
            out.append(f"--pulses-per-rev {int(pulses_per_rev)} differs from the sidecar's "
                       f"pulses_per_rev {run.pulses_per_rev}: the speed is scaled by "
                       f"{run.pulses_per_rev / int(pulses_per_rev):g} against the sidecar's "
                       "wheel; check which is right")
    name = tacho if tacho is not None else run.tacho
    if name is not None:
        try:
            det = PulseDetector(run.rate_hz)
            chunk = max(4096, int(8.0 * run.rate_hz))
            for piece in run.iter_chunks(run.channels[run.channel_index(name)].name, chunk):
                det.feed(piece)
            out.extend(wheel_warnings(det.finish(), ppr, miss))
        except Exception:  # the tracking already used this channel; nothing more to say here
            pass
    if plan is not None:
        top, want = float(analysis.rpm_max), float(plan.speed.rpm_max)
        if top > 0 and want > 0:
            ratio = top / want
            for k in (2, 3, 4, 6, 8):
                for r, word in ((1.0 / k, "1/"), (float(k), "")):
                    if abs(ratio / r - 1.0) < 0.08:
                        out.append(f"the tacho gives a top speed of {top:.0f} rpm, about {word}{k} "
                                   f"x the plan's {want:g} rpm: check --pulses-per-rev "
                                   f"(now {ppr}) and the tacho channel")
    return tuple(out)


def warn_tacho(run_path, analysis, options, *, plan=None) -> None:
    """Issue :func:`tacho_warnings` as :class:`~workbench.errors.FoldlineWarning` s.

    Parameters
    ----------
    run_path : path-like
        The run file tracked.
    analysis : RunAnalysis
    options : mapping
        The ``track_run`` options used (``pulses_per_rev``, ``missing_pulses``, ``tacho``,
        ``rate_hz``; others ignored).
    plan : Plan, optional
    """
    import warnings

    from workbench.errors import FoldlineWarning
    from workbench.runs.files import read_run

    run = read_run(run_path, rate_hz=options.get("rate_hz"))
    for text in tacho_warnings(run, analysis, pulses_per_rev=options.get("pulses_per_rev"),
                               missing_pulses=options.get("missing_pulses"),
                               tacho=options.get("tacho"), plan=plan):
        warnings.warn(text, FoldlineWarning, stacklevel=2)
