"""Anti-alias filter models: attenuation at any frequency, usable band, short description.

All attenuations are positive dB (40 means 40 dB down).  Frequencies of analog and digital
filters scale with the sample rate: ``cutoff``, ``passband_edge`` and ``stopband_edge`` are
fractions of the rate (0.4 means 0.4 x rate, i.e. 0.8 x Nyquist), as in the plan file.

Kinds
-----
``"none"``
    No filter: 0 dB everywhere.
``"ideal"``
    Brick wall: 0 dB up to and including ``cutoff x rate``, ``inf`` dB above.  Residuals of
    lines above the cutoff are therefore ``-inf`` dB, which compares below every threshold.
``"butterworth"``, ``"bessel"``
    Analog low-pass of order ``order`` with -3.01 dB at ``cutoff x rate`` (Bessel normalised
    for magnitude, scipy's ``norm='mag'``; scipy's default ``norm='phase'`` would not put -3 dB
    at the cutoff).
``"chebyshev1"``
    Analog Chebyshev type I: equiripple passband of ``passband_ripple_db`` (default 0.1 dB) up
    to ``cutoff x rate``, where the attenuation equals the ripple (scipy's ``Wn``).  Even orders
    have ``passband_ripple_db`` of attenuation at DC.
``"elliptic"``
    Analog elliptic (Cauer): ``passband_ripple_db`` ripple up to ``cutoff x rate`` (scipy's
    ``Wn``) and at least ``stopband_db`` (default 100 dB) in the stopband.
``"digital"``
    Decimation filter of a delta-sigma front end, given by its datasheet figures: flat up to
    ``passband_edge x rate`` (default 0.45), at least ``stopband_db`` (default 100 dB) from
    ``stopband_edge x rate`` (default 0.55) on.  See :class:`AntiAliasFilter` for the model.
``"table"``
    Measured or datasheet attenuation at listed frequencies (Hz, or fractions of the rate),
    interpolated linearly in log frequency, constant beyond the first and last point.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from functools import cached_property

import numpy as np

from workbench.checks import (FieldError, choice, freq_array, positive_int, rate_array, real,
                              real_vector)

__all__ = ["FILTER_KINDS", "ANALOG_KINDS", "TABLE_UNITS", "MAX_ANALOG_ORDER", "AntiAliasFilter"]

FILTER_KINDS = ("none", "ideal", "butterworth", "bessel", "chebyshev1", "elliptic", "digital",
                "table")
ANALOG_KINDS = ("butterworth", "bessel", "chebyshev1", "elliptic")
TABLE_UNITS = ("hz", "fraction")
MAX_ANALOG_ORDER = 32

# Most negative table value accepted: a little gain peaking is real, more looks like gain
# written where attenuation was meant.
_TABLE_MIN_DB = -3.0
# Roots whose squared distances are multiplied before one logarithm (see _analog_db).
_ROOTS_PER_LOG = 6

# Grid of the usable-edge search, from DC to Nyquist.
_EDGE_GRID = 4097
# Points of the tabulated transition band of the digital model.
_DIGITAL_GRID = 2049

_OWNER = "AntiAliasFilter"
_NAMES = {"butterworth": "Butterworth", "bessel": "Bessel", "chebyshev1": "Chebyshev type I",
          "elliptic": "elliptic"}


def _ordinal(n: int) -> str:
    if 10 <= n % 100 <= 20:
        suffix = "th"
    else:
        suffix = {1: "st", 2: "nd", 3: "rd"}.get(n % 10, "th")
    return f"{n}{suffix}"


@dataclass(frozen=True)
class AntiAliasFilter:
    """Magnitude model of the anti-alias filter in front of (or inside) the digitiser.

    Parameters
    ----------
    kind : str
        One of :data:`FILTER_KINDS`.
    order : int, optional
        Filter order, 1 to :data:`MAX_ANALOG_ORDER`; required by the analog kinds, not allowed
        otherwise.
    cutoff : float, optional
        Fraction of the sample rate, in (0, 1); required by the analog kinds and ``"ideal"``,
        not allowed otherwise.  -3.01 dB point of Butterworth and Bessel, passband edge (where
        the attenuation equals the ripple) of Chebyshev type I and elliptic, brick-wall edge of
        ``"ideal"``.  Values above 0.5 (beyond Nyquist) are legal but draw a warning.
    passband_edge, stopband_edge : float
        Fractions of the sample rate, ``0 < passband_edge < stopband_edge < 1``; used by
        ``"digital"``.  Defaults 0.45 and 0.55 (common practice for delta-sigma front ends).
    stopband_db : float
        Minimum stopband attenuation in dB, positive; used by ``"digital"`` and ``"elliptic"``.
        Default 100 dB.
    passband_ripple_db : float
        Passband ripple in dB, positive; used by ``"chebyshev1"`` and ``"elliptic"``.  Default
        0.1 dB.  Must be below `stopband_db`.
    table_hz_or_fraction : sequence of float, optional
        Frequencies of a ``"table"`` filter, strictly increasing and positive, in the units
        given by `table_units`; at least two points.
    table_db : sequence of float, optional
        Attenuations (positive dB = down) at those frequencies; same length.  Values below
        -3 dB are refused (they look like gain written as negative numbers).
    table_units : {"hz", "fraction"}
        Units of `table_hz_or_fraction`: Hz, or fractions of the sample rate.

    Notes
    -----
    Analog kinds are evaluated from their zero-pole-gain prototype (designed once per instance
    by ``scipy.signal.butter``/``bessel``/``cheby1``/``ellip`` with ``analog=True``) on the
    imaginary axis, summing ``20 log10 |j w - z|`` over zeros and poles, so very high frequencies
    neither overflow nor underflow.

    The ``"digital"`` model is meant for a line's *true* frequency before the final decimation
    (the filter runs at a higher internal rate, so its periodic images lie far above the band
    of interest and are removed by the analog stage in front; they are not modelled).  It is

    * 0 dB up to `passband_edge`,
    * `stopband_db` from `stopband_edge` on (the datasheet's guaranteed minimum, not the
      deeper nulls between sidelobes, so residuals are never understated),
    * in between, the attenuation of a Kaiser-window FIR low-pass designed for the same
      edges and stopband (``scipy.signal.kaiserord`` + ``firwin`` at twice the output rate,
      cutoff midway between the edges), made non-decreasing and limited to `stopband_db`.
      Such a filter is about 6 dB down midway between the edges.

    References
    ----------
    .. [1] S. Butterworth, "On the theory of filter amplifiers", Experimental Wireless and the
       Wireless Engineer 7:536-541, 1930.
    .. [2] W. E. Thomson, "Delay networks having maximally flat frequency characteristics",
       Proceedings of the IEE, Part III, 96(44):487-490, 1949.
    .. [3] A. I. Zverev, *Handbook of Filter Synthesis*, Wiley, 1967 (Chebyshev and elliptic
       prototypes).
    .. [4] J. F. Kaiser, "Nonrecursive digital filter design using the I0-sinh window
       function", Proceedings of the IEEE International Symposium on Circuits and Systems,
       pp. 20-23, 1974.

    Examples
    --------
    >>> from workbench.sampling import AntiAliasFilter
    >>> f = AntiAliasFilter("butterworth", order=8, cutoff=0.39)
    >>> f.describe()
    '8th-order Butterworth, -3 dB at 0.39 x rate'
    >>> round(float(f.attenuation_db(2 * 0.39 * 12800.0, 12800.0)), 2)
    48.16
    """

    kind: str = "none"
    order: int | None = None
    cutoff: float | None = None
    passband_edge: float = 0.45
    stopband_edge: float = 0.55
    stopband_db: float = 100.0
    passband_ripple_db: float = 0.1
    table_hz_or_fraction: tuple[float, ...] | None = None
    table_db: tuple[float, ...] | None = None
    table_units: str = "hz"

    def __post_init__(self):
        kind = choice(_OWNER, "kind", self.kind, FILTER_KINDS)
        analog = kind in ANALOG_KINDS
        self._set("table_units", choice(_OWNER, "table_units", self.table_units, TABLE_UNITS))

        if analog:
            if self.order is None:
                raise FieldError(_OWNER, "order", f"is required by filter kind {kind!r}")
            self._set("order", positive_int(_OWNER, "order", self.order,
                                            high=MAX_ANALOG_ORDER))
        elif self.order is not None:
            raise FieldError(_OWNER, "order", f"is not used by filter kind {kind!r} (remove it)",
                             self.order)

        if analog or kind == "ideal":
            if self.cutoff is None:
                raise FieldError(_OWNER, "cutoff", f"is required by filter kind {kind!r} "
                                 "(a fraction of the sample rate, e.g. 0.4)")
            cutoff = real(_OWNER, "cutoff", self.cutoff, low=0.0, high=1.0, low_open=True,
                          high_open=True)
            if cutoff >= 0.5:
                # An anti-alias filter passing Nyquist lets everything between Nyquist and
                # its cutoff fold unattenuated: it protects nothing (common practice, no
                # source: the cutoff sits well below Nyquist, about 0.4 x rate).
                raise FieldError(_OWNER, "cutoff", "lies at or above Nyquist (0.5 x rate), where "
                                 "the filter protects nothing; allowed: a cutoff below 0.5 "
                                 "(about 0.4 is usual), or filter \"none\" for no filter", cutoff)
            self._set("cutoff", cutoff)
        elif self.cutoff is not None:
            raise FieldError(_OWNER, "cutoff", f"is not used by filter kind {kind!r} (remove it)",
                             self.cutoff)

        pb = real(_OWNER, "passband_edge", self.passband_edge, low=0.0, high=1.0,
                  low_open=True, high_open=True)
        sb = real(_OWNER, "stopband_edge", self.stopband_edge, low=0.0, high=1.0,
                  low_open=True, high_open=True)
        if not pb < sb:
            raise FieldError(_OWNER, "stopband_edge", f"must be above passband_edge ({pb:g})",
                             sb)
        self._set("passband_edge", pb)
        self._set("stopband_edge", sb)
        stop = real(_OWNER, "stopband_db", self.stopband_db, low=0.0, low_open=True)
        self._set("stopband_db", stop)
        ripple = real(_OWNER, "passband_ripple_db", self.passband_ripple_db, low=0.0,
                      low_open=True)
        if kind == "elliptic" and not ripple < stop:
            raise FieldError(_OWNER, "passband_ripple_db", f"must be below stopband_db "
                             f"({stop:g} dB)", ripple)
        self._set("passband_ripple_db", ripple)

        if kind == "table":
            self._check_table()
        else:
            for field in ("table_hz_or_fraction", "table_db"):
                if getattr(self, field) is not None:
                    raise FieldError(_OWNER, field, f"is only used by filter kind 'table', "
                                     f"not {kind!r} (remove it)", getattr(self, field))

    def _set(self, name, value):
        object.__setattr__(self, name, value)

    def _check_table(self):
        for field in ("table_hz_or_fraction", "table_db"):
            if getattr(self, field) is None:
                raise FieldError(_OWNER, field, "is required by filter kind 'table'")
        freq = real_vector(_OWNER, "table_hz_or_fraction", self.table_hz_or_fraction,
                           min_len=2)
        db = real_vector(_OWNER, "table_db", self.table_db, min_len=2)
        if len(freq) != len(db):
            raise FieldError(_OWNER, "table_db", f"must have one value per frequency "
                             f"({len(freq)}), got {len(db)}", db)
        for i, f in enumerate(freq):
            if f <= 0:
                raise FieldError(_OWNER, "table_hz_or_fraction", f"point {i + 1}: frequencies "
                                 "must be positive (the table is interpolated in log "
                                 "frequency)", freq)
            if i and not f > freq[i - 1]:
                raise FieldError(_OWNER, "table_hz_or_fraction", f"point {i + 1}: frequencies "
                                 "must increase strictly", freq)
        for i, d in enumerate(db):
            if d < _TABLE_MIN_DB:
                raise FieldError(_OWNER, "table_db", f"point {i + 1}: attenuation is "
                                 "positive dB (40 means 40 dB down); if the table gives gain, "
                                 "change the signs", db)
        self._set("table_hz_or_fraction", freq)
        self._set("table_db", db)

    # -- cached designs -------------------------------------------------------------------
    @cached_property
    def _zpk(self):
        """Analog prototype (zeros, poles, gain) with the cutoff at `cutoff` rad/s."""
        import scipy.signal  # imported here: it takes a second, and only filter responses need it

        n, wn, rp, rs = self.order, self.cutoff, self.passband_ripple_db, self.stopband_db
        if self.kind == "butterworth":
            return scipy.signal.butter(n, wn, analog=True, output="zpk")
        if self.kind == "bessel":
            return scipy.signal.bessel(n, wn, analog=True, output="zpk", norm="mag")
        if self.kind == "chebyshev1":
            return scipy.signal.cheby1(n, rp, wn, analog=True, output="zpk")
        return scipy.signal.ellip(n, rp, rs, wn, analog=True, output="zpk")

    @cached_property
    def _digital_transition(self):
        """(fractions of rate, attenuation dB) across the digital model's transition band."""
        import scipy.signal

        pb, sb, stop = self.passband_edge, self.stopband_edge, self.stopband_db
        numtaps, beta = scipy.signal.kaiserord(stop, sb - pb)  # width relative to Nyquist = 1
        taps = scipy.signal.firwin(numtaps, (pb + sb) / 2.0, window=("kaiser", beta), fs=2.0)
        grid = np.linspace(pb, sb, _DIGITAL_GRID)
        _, h = scipy.signal.freqz(taps, 1.0, worN=grid, fs=2.0)
        with np.errstate(divide="ignore"):
            att = -20.0 * np.log10(np.abs(h))
        att = np.clip(np.maximum.accumulate(att), 0.0, stop)
        att[-1] = stop
        return grid, att

    # -- responses ------------------------------------------------------------------------
    def _analog_db(self, x: np.ndarray) -> np.ndarray:
        if self.kind == "butterworth":
            # Closed form 10 log10(1 + (x / x_c)^(2n)) (Butterworth, Wireless Engineer 7, 1930),
            # written with logaddexp so it neither overflows nor loses precision; equal to the
            # general zpk evaluation below to rounding, and several times faster.
            with np.errstate(divide="ignore"):
                u = (2.0 * self.order) * np.log(np.asarray(x, dtype=float) / self.cutoff)
            return (10.0 / math.log(10.0)) * np.logaddexp(0.0, u)
        z, p, k = self._zpk
        # |H(jx)|^2 = k^2 prod |jx - z|^2 / prod |jx - p|^2.  Squared distances are multiplied
        # in groups of a few roots, then one log10 per group: far fewer logarithms than one per
        # root, and no overflow (each group stays well inside the float64 range for |x| < 1e30).
        x = np.asarray(x, dtype=float)
        gain_db = np.full(x.shape, 20.0 * math.log10(abs(k)))
        with np.errstate(divide="ignore", over="ignore", under="ignore"):
            for roots, sign in ((z, 10.0), (p, -10.0)):
                for start in range(0, len(roots), _ROOTS_PER_LOG):
                    acc = None
                    for r in roots[start:start + _ROOTS_PER_LOG]:
                        d = x - r.imag
                        sq = r.real * r.real + d * d
                        acc = sq if acc is None else acc * sq
                    gain_db += sign * np.log10(acc)
        return 0.0 - gain_db

    def _digital_db(self, x: np.ndarray) -> np.ndarray:
        grid, att = self._digital_transition
        out = np.interp(x, grid, att)
        out = np.where(x <= self.passband_edge, 0.0, out)
        return np.where(x >= self.stopband_edge, self.stopband_db, out)

    def _table_db(self, f: np.ndarray, rate: np.ndarray) -> np.ndarray:
        q = f / rate if self.table_units == "fraction" else f
        freq = np.asarray(self.table_hz_or_fraction)
        q = np.maximum(q, freq[0])
        return np.interp(np.log(q), np.log(freq), np.asarray(self.table_db))

    def attenuation_db(self, f_hz, rate_hz):
        """Attenuation of the filter at true frequencies `f_hz` when sampling at `rate_hz`.

        Parameters
        ----------
        f_hz : array_like
            Frequencies in Hz, finite and not negative.
        rate_hz : array_like
            Sample rates in Hz, positive and finite; broadcast against `f_hz`.

        Returns
        -------
        attenuation_db : ndarray or float
            Positive dB (40 means 40 dB down), broadcast shape of the inputs; ``inf`` above the
            cutoff of an ``"ideal"`` filter and at the transmission zeros of an elliptic one.
            0 dB at DC except for even-order Chebyshev type I and elliptic filters (their
            passband ripple) and tables that say otherwise.

        Raises
        ------
        InputError
            A frequency is negative or not finite, or a rate is not positive and finite.
        """
        return self._db(freq_array(f_hz), rate_array(rate_hz))

    def _db(self, f, rate):
        """:meth:`attenuation_db` of checked float arrays (callers inside the layer)."""
        f, rate = np.broadcast_arrays(f, rate)
        x = f / rate
        kind = self.kind
        if kind == "none":
            out = np.zeros(x.shape)
        elif kind == "ideal":
            out = np.where(x <= self.cutoff, 0.0, np.inf)
        elif kind in ANALOG_KINDS:
            out = self._analog_db(x)
        elif kind == "digital":
            out = self._digital_db(x)
        else:
            out = self._table_db(f, rate)
        return out[()]

    def usable_edge_hz(self, rate_hz, *, tolerance_db: float = 1.0) -> float:
        """Upper end of the band the filter leaves flat, in Hz, never above Nyquist.

        Parameters
        ----------
        rate_hz : float
            Sample rate in Hz, positive and finite.
        tolerance_db : float, optional
            Attenuation still counted as flat, positive dB; default 1 dB.

        Returns
        -------
        edge_hz : float
            * ``"none"``: Nyquist, ``rate / 2``;
            * ``"ideal"``: ``cutoff x rate``;
            * ``"digital"``: ``passband_edge x rate`` (where the datasheet guarantees
              flatness);
            * analog kinds and ``"table"``: the lowest frequency at which the attenuation
              rises above `tolerance_db` (for Chebyshev type I and elliptic filters, above
              ``max(tolerance_db, passband_ripple_db)``: their whole passband counts as flat).
              0 Hz if a table starts above the tolerance.

            Each capped at Nyquist.  An analyst usually expects this near 0.4 x rate (80 % of
            Nyquist; common practice).
        """
        rate = rate_array(rate_hz)
        if rate.ndim != 0:
            raise FieldError(None, "rate_hz", "usable_edge_hz takes one sample rate", rate_hz)
        rate = float(rate)
        tol = real(None, "tolerance_db", tolerance_db, low=0.0, low_open=True)
        nyquist = rate / 2.0
        if self.kind == "none":
            return nyquist
        if self.kind == "ideal":
            return min(self.cutoff, 0.5) * rate
        if self.kind == "digital":
            return min(self.passband_edge, 0.5) * rate
        if self.kind in ("chebyshev1", "elliptic"):
            tol = max(tol, self.passband_ripple_db)
        level = tol + 1e-9  # ripple peaks equal the ripple to rounding; do not stop on them

        def excess(x):
            return float(self._db(np.asarray(x * rate), np.asarray(rate))) - level

        grid = np.linspace(0.0, 0.5, _EDGE_GRID)
        above = np.nonzero(np.asarray(self._db(grid * rate, np.asarray(rate))) > level)[0]
        if above.size == 0:
            return nyquist
        i = int(above[0])
        if i == 0:
            return 0.0
        import scipy.optimize

        x = scipy.optimize.brentq(excess, grid[i - 1], grid[i], xtol=1e-14, rtol=1e-13)
        return float(x * rate)

    def describe(self) -> str:
        """Short human label, e.g. ``'8th-order Butterworth, -3 dB at 0.39 x rate'``."""
        kind = self.kind
        if kind == "none":
            return "no anti-alias filter"
        if kind == "ideal":
            return f"ideal low-pass, cutoff {self.cutoff:.3g} x rate"
        if kind in ("butterworth", "bessel"):
            return (f"{_ordinal(self.order)}-order {_NAMES[kind]}, -3 dB at "
                    f"{self.cutoff:.3g} x rate")
        if kind == "chebyshev1":
            return (f"{_ordinal(self.order)}-order {_NAMES[kind]}, "
                    f"{self.passband_ripple_db:.3g} dB ripple to {self.cutoff:.3g} x rate")
        if kind == "elliptic":
            return (f"{_ordinal(self.order)}-order {_NAMES[kind]}, "
                    f"{self.passband_ripple_db:.3g} dB ripple to {self.cutoff:.3g} x rate, "
                    f"{self.stopband_db:.3g} dB stopband")
        if kind == "digital":
            return (f"digital decimation filter, flat to {self.passband_edge:.3g} x rate, "
                    f"{self.stopband_db:.3g} dB from {self.stopband_edge:.3g} x rate")
        freq = self.table_hz_or_fraction
        if self.table_units == "hz":
            span = f"{freq[0]:.6g} Hz to {freq[-1]:.6g} Hz"
        else:
            span = f"{freq[0]:.3g} to {freq[-1]:.3g} x rate"
        return f"tabulated filter, {len(freq)} points from {span}"
