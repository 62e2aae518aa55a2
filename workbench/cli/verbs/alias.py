"""``foldline alias``: apparent frequency and Nyquist zone of frequencies sampled at a rate."""

from __future__ import annotations

import math

from workbench.cli.output import finish, rate_option
from workbench.cli.verbs import add_verb
from workbench.errors import InputError

__all__ = ["register", "cmd_alias"]


def cmd_alias(args) -> int:
    """Where each frequency shows up when sampled at ``--rate`` (and how much the plan's
    filter takes off it)."""
    import numpy as np

    from workbench.sampling.folding import apparent_frequency, nyquist_zone
    from workbench.sampling.guards import warn_implausible_rate

    rate = rate_option(args.rate)
    warn_implausible_rate(rate, name="--rate")
    freqs = np.array(args.frequencies, dtype=float)
    if not np.all(np.isfinite(freqs)) or np.any(freqs < 0):
        bad = [f for f in args.frequencies if not (math.isfinite(f) and f >= 0)]
        raise InputError(f"frequency {bad[0]!r}: frequencies must be finite and >= 0 Hz")
    if args.plan:
        from workbench.sampling.planfile import read_plan

        plan = read_plan(args.plan)
        att = np.asarray(plan.filter.attenuation_db(freqs, rate), dtype=float)
        label = plan.filter.describe()
    else:
        att = np.zeros_like(freqs)
        label = "none"
    app = apparent_frequency(freqs, rate)
    zone = nyquist_zone(freqs, rate)
    out = {
        "rate_hz": rate,
        "nyquist_hz": rate / 2.0,
        "filter": label,
        "lines": [
            {"hz": float(f), "apparent_hz": float(a), "zone": int(z), "attenuation_db": float(d)}
            for f, a, z, d in zip(freqs, app, zone, att)
        ],
    }

    def show():
        print(f"rate {rate:g} Hz, Nyquist {rate / 2:g} Hz, filter: {label}")
        head = ("hz", "apparent_hz", "zone", "attenuation_db", "folded")
        rows = [(f"{r['hz']:.2f}", f"{r['apparent_hz']:.2f}", str(r["zone"]),
                 f"{r['attenuation_db']:.2f}", str(r["zone"] >= 1)) for r in out["lines"]]
        width = [max(len(h), *(len(r[i]) for r in rows)) for i, h in enumerate(head)]
        print(" ".join(h.rjust(w) for h, w in zip(head, width)))
        for r in rows:
            print(" ".join(v.rjust(w) for v, w in zip(r, width)))

    return finish(args, out, show)


def register(subparsers) -> None:
    """Add ``foldline alias`` to the command."""
    p = add_verb(subparsers, "alias", "apparent frequency and Nyquist zone of frequencies sampled at a rate")
    p.add_argument("frequencies", nargs="+", type=float, metavar="F", help="true frequencies, Hz")
    p.add_argument("--rate", required=True, type=float, metavar="HZ", help="sample rate, Hz")
    p.add_argument("--plan", metavar="PLAN", help="plan file whose anti-alias filter gives the attenuation")
    p.set_defaults(func=cmd_alias)
