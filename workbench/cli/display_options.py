"""Command-line options that say how the results of a tracked run are shown (``track``, ``report``).

They change figures and tables only, never the tracking itself, so a run tracked once can be
shown many ways.
"""

from __future__ import annotations

__all__ = ["add_display_options", "display_options_from_args", "analysis_options_from_args",
           "scaling_from_args", "report_display_from_args"]


def add_display_options(p) -> None:
    """``--overlay`` (and the other display options) on a verb's parser."""
    from workbench.choices import OVERLAYS

    g = p.add_argument_group("display")
    g.add_argument("--overlay", choices=OVERLAYS, default="none",
                   help="predicted lines drawn over the order map, the frequency map and the order "
                        "spectrum: none (default: the measurement alone), matched (the lines matched "
                        "to measured ridges), all")
    g.add_argument("--amplitude", choices=("peak", "rms"), default="peak",
                   help="amplitudes as peak (default) or RMS (peak / sqrt 2) in spectra, cuts, maps and tables")
    g.add_argument("--db", type=float, metavar="REF",
                   help="amplitudes in dB re REF (in the shown unit, e.g. 1e-6 for dB re 1 um/s^2)")
    g.add_argument("--integrate", choices=("velocity", "displacement"),
                   help="show an acceleration channel as velocity (mm/s) or displacement (um), "
                        "integrated in the frequency domain bin by bin")
    g.add_argument("--integrate-from", type=float, metavar="HZ",
                   help="lowest frequency integrated, Hz (default 2): below it bins are left out")
    g.add_argument("--correct-rolloff", action="store_true",
                   help="take the anti-alias filter's known roll-off out of the order results inside its "
                        "usable band (track: needs --plan; report: the plan's filter)")
    g.add_argument("--overall-band", metavar="LO,HI",
                   help="overall level (RMS against rpm) of this band only, Hz (default: the whole band)")


def display_options_from_args(args) -> dict:
    """Keyword options of the figure writers from the parsed display options."""
    return {"overlay": getattr(args, "overlay", "none") or "none"}


def report_display_from_args(args) -> dict:
    """The report's ``display`` mapping: overlay and amplitude scaling."""
    return {**display_options_from_args(args), "scaling": scaling_from_args(args),
            "correct_rolloff": bool(getattr(args, "correct_rolloff", False))}


def scaling_from_args(args):
    """The :class:`~workbench.angle.scaling.AmplitudeScaling` the options ask for (None: peak)."""
    from workbench.angle.scaling import DEFAULT_MIN_HZ, AmplitudeScaling

    amplitude = getattr(args, "amplitude", "peak") or "peak"
    db = getattr(args, "db", None)
    integrate = getattr(args, "integrate", None)
    low = getattr(args, "integrate_from", None)
    if low is not None and integrate is None:
        from workbench.errors import InputError

        raise InputError(f"--integrate-from {low:g}: it applies with --integrate velocity|displacement")
    scaling = AmplitudeScaling(amplitude=amplitude, db_ref=db, integrate=integrate,
                               min_hz=DEFAULT_MIN_HZ if low is None else float(low))
    return None if scaling.is_identity else scaling


def analysis_options_from_args(args) -> dict:
    """Tracking settings that come from the display group (None left out): the overall level's
    band, and its integration (``--integrate``, ``--integrate-from``)."""
    from workbench.cli.options import _band

    out = {}
    band = getattr(args, "overall_band", None)
    if band is not None:
        out["overall_band_hz"] = _band(band, "--overall-band")
    scaling = scaling_from_args(args)
    if scaling is not None and scaling.integrate:   # the overall level integrated as well
        out.update(integrate=scaling.integrate, integrate_from_hz=scaling.min_hz)
    return out
