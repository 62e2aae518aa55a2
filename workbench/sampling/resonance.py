"""Crossings of machine lines with resonances, and the sweep rate each one allows.

A **crossing** is where a line's true frequency meets a resonance (a ``[[resonance]]`` of the
machine file, Hz) or a rotor critical (``[[critical]]``, its natural frequency ``rpm / 60``)
inside the plan's speed profile.  An order line ``k`` meets a natural frequency ``fn`` at
``rpm = 60 fn / k``; fixed lines never move, so they cross nothing.

Passage through resonance
-------------------------
Swept through a resonance, a lightly damped mode has no time to build up its steady-state
response: the measured peak comes out low (and late).  Near resonance the oscillator
``x'' + 2 zeta w x' + w^2 x = w^2 cos(phi(t))`` with a linear sweep ``phi'' = alpha`` has a
slowly varying complex envelope ``u`` (``x = Re(u exp(i phi))``) obeying

    u' = -(zeta w + i (Omega(t) - w)) u + w / (2 i),    Omega(t) - w = alpha t,

the first-order equation of the classic passage-through-resonance analysis (Lewis 1932, who
solved it with Fresnel-type integrals; from memory).  In units of the decay time
``1 / (zeta w)`` it depends on one number, the sweep parameter

    kappa = alpha / (zeta w)^2 = eta / zeta^2,     eta = alpha / w^2 = df/dt / (2 pi fn^2),

(df/dt the sweep rate of the exciting line, Hz/s) and its solution from rest far below
resonance is, with ``beta = 1 + i kappa T``, ``p = -i kappa / 2`` (T time in units 1 / (zeta w)):

    u(T) / u_steady_peak = (sqrt(pi) / (2 sqrt(p))) w_F(i beta / (2 sqrt(p))),

``w_F`` the Faddeeva function (``scipy.special.wofz``; the integral
``int_0^inf exp(-beta s + i kappa s^2 / 2) ds`` in closed form).  Its largest magnitude over
T is the ratio of the swept peak to the steady-state peak, :func:`passage_peak_ratio`; the
peak loss is ``-20 log10`` of it.  ``tests/test_sampling_resonance.py`` checks it against a
direct integration of the oscillator (``scipy.integrate.solve_ivp``): within 0.2 dB for
zeta <= 0.05 at losses up to 3 dB.

A crossing's sweep is **ok** when the loss stays within :data:`PEAK_LOSS_LIMIT_DB` (1 dB):
``kappa <= KAPPA_1DB`` (about 1.1), i.e. a line of order k may sweep the reference shaft at
most ``2 pi KAPPA zeta^2 fn^2 x 60 / k`` rpm/s through a mode of ``fn`` Hz.

References
----------
.. [1] F. M. Lewis, "Vibration during acceleration through a critical speed", Transactions of
   the ASME 54:253-261, 1932 (from memory).
.. [2] R. Markert and M. Seidler, "Analytically based estimation of the maximum amplitude
   during passage through resonance", International Journal of Solids and Structures
   38(10-13):1975-1992, 2001 (the same problem; their closed-form approximations are not used
   here because they could not be checked against the paper).
.. [3] W. Gautschi, "Efficient computation of the complex error function", SIAM Journal on
   Numerical Analysis 7(1):187-198, 1970 (the Faddeeva function).
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
import pandas as pd

from workbench.checks import positive, real_array

__all__ = ["PEAK_LOSS_LIMIT_DB", "Crossing", "CROSSING_COLUMNS", "passage_peak_ratio",
           "passage_loss_db", "sweep_parameter", "max_sweep_kappa", "fastest_sweep_rpm_per_s",
           "find_crossings"]

#: Largest loss of a resonance peak to the sweep that still counts as measured, dB.
PEAK_LOSS_LIMIT_DB = 1.0

#: Columns of :func:`find_crossings`'s table.
CROSSING_COLUMNS = ("line", "resonance", "kind", "order", "hz", "rpm", "time_s",
                    "damping_ratio", "sweep_rpm_per_s", "peak_loss_db", "sweep_ok",
                    "slowest_sweep_rpm_per_s", "level_db")


def _peak_ratios(kappa: np.ndarray) -> np.ndarray:
    """Swept over steady peak for each kappa (1-D array, >= 0), on a grid refined by a parabola."""
    from scipy.special import wofz

    k = np.asarray(kappa, dtype=np.float64).reshape(-1)
    out = np.ones(k.shape)
    pos = k > 0
    if not pos.any():
        return out
    kp = k[pos][:, None]
    sp = np.sqrt(-0.5j * kp)
    front = 0.5 * math.sqrt(math.pi) / sp
    # detuning (Omega - w) in half-bandwidths zeta w: the peak lies after resonance, later
    # (about sqrt(kappa) further) the faster the sweep
    u = np.linspace(0.0, 1.0, 1601)[None, :]
    lo, hi = -3.0, 3.0 + 6.0 * np.sqrt(kp) + kp
    d = lo + (hi - lo) * u
    mag = np.abs(front * wofz(1j * (1.0 + 1j * d) / (2.0 * sp)))
    i = np.clip(np.argmax(mag, axis=1), 1, mag.shape[1] - 2)
    rows = np.arange(len(i))
    a, b, c = mag[rows, i - 1], mag[rows, i], mag[rows, i + 1]
    den = a - 2 * b + c
    with np.errstate(divide="ignore", invalid="ignore"):
        peak = np.where(den < 0, b - 0.125 * (a - c) ** 2 / den, b)
    out[pos] = np.minimum(1.0, peak)
    return out


def _peak_ratio_one(kappa: float) -> float:
    return float(_peak_ratios(np.array([kappa]))[0])


def passage_peak_ratio(kappa):
    """Swept peak over steady-state peak of a mode crossed at sweep parameter `kappa`.

    Parameters
    ----------
    kappa : array_like
        ``eta / zeta^2`` (see the module notes), >= 0.

    Returns
    -------
    ndarray or float
        Between 0 and 1 (1 for a sweep infinitely slow).

    References
    ----------
    .. [1] F. M. Lewis, "Vibration during acceleration through a critical speed",
       Transactions of the ASME 54:253-261, 1932 (from memory).

    Examples
    --------
    >>> round(float(passage_peak_ratio(0.0)), 6)
    1.0
    >>> 0.89 < float(passage_peak_ratio(1.0)) < 0.92
    True
    """
    k = real_array(kappa, "kappa", "sweep parameters")
    out = _peak_ratios(k).reshape(k.shape)
    return out[()] if out.ndim == 0 else out


def sweep_parameter(natural_hz, damping_ratio, sweep_hz_per_s):
    """``kappa = (df/dt) / (2 pi fn^2 zeta^2)``: how fast a line sweeps a mode.

    Parameters
    ----------
    natural_hz : float
        Natural frequency of the mode, Hz.
    damping_ratio : float
        zeta of the mode.
    sweep_hz_per_s : float
        Rate of change of the exciting line's frequency, Hz/s (sign ignored).
    """
    fn = np.asarray(natural_hz, dtype=np.float64)
    z = np.asarray(damping_ratio, dtype=np.float64)
    return np.abs(np.asarray(sweep_hz_per_s, dtype=np.float64)) / (2 * np.pi * fn * fn * z * z)


def passage_loss_db(natural_hz, damping_ratio, sweep_hz_per_s):
    """Loss of a resonance peak to the sweep (dB, >= 0): ``-20 log10 passage_peak_ratio``."""
    kappa = sweep_parameter(natural_hz, damping_ratio, sweep_hz_per_s)
    return -20.0 * np.log10(passage_peak_ratio(kappa))


_KAPPA_CACHE: dict[float, float] = {}


def max_sweep_kappa(loss_db: float = PEAK_LOSS_LIMIT_DB) -> float:
    """Largest sweep parameter whose peak loss stays within `loss_db` (> 0).

    Examples
    --------
    >>> 1.0 < max_sweep_kappa(1.0) < 1.3
    True
    """
    from scipy.optimize import brentq

    loss_db = positive(None, "loss_db", loss_db, unit="dB")
    if loss_db not in _KAPPA_CACHE:
        target = 10.0 ** (-loss_db / 20.0)
        hi = 1.0
        while _peak_ratio_one(hi) > target:
            hi *= 2.0
        _KAPPA_CACHE[loss_db] = brentq(lambda k: _peak_ratio_one(k) - target, 0.0, hi,
                                       xtol=1e-6)
    return _KAPPA_CACHE[loss_db]


def fastest_sweep_rpm_per_s(natural_hz, damping_ratio, order, *,
                            loss_db: float = PEAK_LOSS_LIMIT_DB):
    """Fastest reference-shaft sweep (rpm/s) that lets order `order` cross a mode within `loss_db`.

    ``d(rpm)/dt <= 60 x 2 pi KAPPA zeta^2 fn^2 / order`` (the line's frequency moves at
    ``order x d(rpm)/dt / 60`` Hz/s).

    Examples
    --------
    >>> v = fastest_sweep_rpm_per_s(20.0, 0.02, 1.0)       # 20 Hz mode, zeta 0.02, order 1
    >>> 60 < float(v) < 75
    True
    """
    kappa = max_sweep_kappa(loss_db)
    fn = np.asarray(natural_hz, dtype=np.float64)
    z = np.asarray(damping_ratio, dtype=np.float64)
    return 60.0 * 2 * np.pi * kappa * z * z * fn * fn / np.asarray(order, dtype=np.float64)


@dataclass(frozen=True)
class Crossing:
    """One line meeting one resonance or critical inside the speed profile.

    Attributes
    ----------
    line : str
        Line name.
    resonance : str
        The ``[[resonance]]`` or ``[[critical]]`` entry's name.
    kind : {"resonance", "critical"}
    order : float
        The line's order.
    hz : float
        The mode's natural frequency, Hz.
    rpm : float
        Reference speed of the crossing, rpm.
    time_s : float
        Time in the profile (s).
    damping_ratio : float
        The mode's damping ratio (the machine-file default where none is given).
    sweep_rpm_per_s : float
        The profile's sweep rate there, rpm/s (magnitude).
    peak_loss_db : float
        Loss of the mode's peak to that sweep, dB.
    sweep_ok : bool
        ``peak_loss_db <= 1 dB``.
    slowest_sweep_rpm_per_s : float
        The sweep rate the crossing allows (rpm/s): sweeping the reference shaft at most this
        fast lets the peak reach its steady-state value within 1 dB.
    level_db : float
        The line's level.
    """

    line: str
    resonance: str
    kind: str
    order: float
    hz: float
    rpm: float
    time_s: float
    damping_ratio: float
    sweep_rpm_per_s: float
    peak_loss_db: float
    sweep_ok: bool
    slowest_sweep_rpm_per_s: float
    level_db: float = 0.0

    def to_dict(self) -> dict:
        """The ``crossings`` entry of ``foldline plan --json`` (and the extra fields)."""
        return {"line": self.line, "resonance": self.resonance, "rpm": self.rpm,
                "time_s": self.time_s, "sweep_ok": self.sweep_ok,
                "slowest_sweep_rpm_per_s": self.slowest_sweep_rpm_per_s, "kind": self.kind,
                "order": self.order, "hz": self.hz, "sweep_rpm_per_s": self.sweep_rpm_per_s,
                "peak_loss_db": self.peak_loss_db}


def _times_at(profile, rpm: float) -> list[float]:
    """Every time the profile passes `rpm` (s)."""
    lo, hi = profile.rpm_min, profile.rpm_max
    if not lo <= rpm <= hi or lo == hi:
        return []
    if profile.is_monotonic:
        return [float(profile.time_at(rpm))]
    t = np.asarray(profile.table_time_s, dtype=np.float64)
    r = np.asarray(profile.table_rpm, dtype=np.float64)
    out = []
    for i in range(len(t) - 1):
        a, b = r[i], r[i + 1]
        if a == b:
            continue
        if min(a, b) <= rpm <= max(a, b):
            ti = float(t[i] + (rpm - a) / (b - a) * (t[i + 1] - t[i]))
            if not out or abs(ti - out[-1]) > 1e-9:
                out.append(ti)
    return out


def find_crossings(lines, profile, *, resonances=(), criticals=(),
                   loss_db: float = PEAK_LOSS_LIMIT_DB) -> pd.DataFrame:
    """Every crossing of an order line with a resonance or critical inside a speed profile.

    Parameters
    ----------
    lines : sequence of Line
        The machine's lines (fixed lines are skipped: they do not move).
    profile : SpeedProfile
        The plan's speed profile.
    resonances, criticals : sequences of Resonance / Critical
        The machine's modes (``machine.resonances``, ``machine.criticals``).
    loss_db : float
        Peak loss allowed (default 1 dB).

    Returns
    -------
    pandas.DataFrame
        Columns :data:`CROSSING_COLUMNS`, one row per crossing (a profile that passes a speed
        twice gives two rows), sorted by time.

    References
    ----------
    .. [1] F. M. Lewis, "Vibration during acceleration through a critical speed",
       Transactions of the ASME 54:253-261, 1932 (from memory).
    """
    modes = [(m, "resonance", float(m.hz)) for m in resonances] + \
            [(m, "critical", float(m.rpm) / 60.0) for m in criticals]
    rows = []
    kappa_max = max_sweep_kappa(loss_db) if modes else None
    for ln in lines:
        if ln.order is None or not ln.order > 0:
            continue
        for mode, kind, fn in modes:
            rpm = 60.0 * fn / ln.order
            for t in _times_at(profile, rpm):
                sweep = abs(float(profile.sweep_rate_rpm_per_s(t)))
                zeta = float(mode.zeta)
                fastest = 60.0 * 2 * math.pi * kappa_max * zeta * zeta * fn * fn / ln.order
                rows.append({"line": ln.name, "resonance": mode.name, "kind": kind,
                             "order": float(ln.order), "hz": fn, "rpm": rpm, "time_s": t,
                             "damping_ratio": zeta, "sweep_rpm_per_s": sweep,
                             "peak_loss_db": np.nan, "sweep_ok": True,
                             "slowest_sweep_rpm_per_s": fastest,
                             "level_db": float(getattr(ln, "level_db", 0.0))})
    table = pd.DataFrame(rows, columns=list(CROSSING_COLUMNS))
    if len(table):
        kappa = sweep_parameter(table["hz"].to_numpy(), table["damping_ratio"].to_numpy(),
                                table["order"].to_numpy() * table["sweep_rpm_per_s"].to_numpy()
                                / 60.0)
        loss = -20.0 * np.log10(_peak_ratios(kappa))
        table["peak_loss_db"] = loss
        table["sweep_ok"] = loss <= loss_db + 1e-12
    return table.sort_values(["time_s", "line"], kind="stable").reset_index(drop=True)
