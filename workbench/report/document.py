"""The shareable report: one self-contained HTML file for a machine, a plan and optionally a run.

:func:`build_report` turns objects already in memory (machine, plan, optionally a
:class:`~workbench.runs.analysis.RunAnalysis`) into a :class:`Report`; :func:`write_report`
reads the files, tracks the run, builds the report and writes it through a temporary name.

The report holds: a job summary; the machine and its line table; the plan (speed profile,
candidate rates, filter, threshold, bands); the recommended rate and the advisor's reasons;
the collision table of every candidate rate; fold maps (Hz and order views) of the worst
candidate and of the recommended rate; the angle-domain settings; for a machine with
resonances or criticals, the plan's Campbell diagram and the crossings table (with the sweep
check); with a run, its tacho check, order spectrum and peaks, order map and order cuts with
the predicted lines, the identification of measured lines (aliases first), and the run-up views
(Bode, polar, Campbell) with the critical speeds; the safety caution; and the provenance
(foldline version, every input file with its SHA-256, the date and time in UTC).

For a test lead's sign-off the page opens with the test metadata (unit under test, serial
number, test id, operator, date, the sensors' positions, directions and types; from the run's
sidecar and ``--meta``) and the verdict against the plan's acceptance limits (``[[limit]]``:
all passed, or which failed and where), beside the note that the limits come from the user,
the machine maker or the standard and that foldline only compares; the "Acceptance limits"
section tabulates each limit and draws it on the level it judges; the page ends with a
sign-off block (prepared by, checked by, date) left blank to fill in.
"""

from __future__ import annotations

import hashlib
import sys
import warnings
from dataclasses import dataclass, field
from datetime import datetime, timezone
from pathlib import Path

import numpy as np

from workbench import __version__
from workbench.errors import FoldlineWarning, InputError
from workbench.fileio import file_sha256
from workbench.machine.lines import kind_name
from workbench.runs.cut_orders import default_cut_orders
from workbench.sampling import ANALYSER_FACTOR
from workbench.sampling.foldmap import COLLISION_COLUMNS, COLLISION_DECIMALS, COLLISION_HEADINGS
from workbench.report.html import (Column, esc, figure_svg, fixed, general, key_value_html, page,
                                   table_html, yes_no)

__all__ = ["Report", "InputFile", "build_report", "write_report", "SAFETY_TEXT", "SECTION_TITLES",
           "file_sha256"]

#: The caution printed in every report; the same words as the README's Safety section.
SAFETY_TEXT = (
    "Run-up and coast-down tests take machines through resonances and up to their speed limits. "
    "foldline plans acquisition and analysis only; it does not judge whether a test is safe, and "
    "a clean fold map says nothing about the machine's mechanical limits. Follow the machine "
    "maker's limits (speed, acceleration, time at resonance, temperatures), your site's "
    "procedures and local codes, keep guards in place, and have qualified people run the test."
)

#: Section id -> heading, in page order (run sections appear only with a run).
SECTION_TITLES = {
    "summary": "Job summary",
    "limits": "Acceptance limits",
    "machine": "Machine",
    "plan": "Test plan",
    "recommendation": "Recommended rate",
    "collisions": "Collisions by candidate rate",
    "fold-maps": "Fold maps",
    "angle-settings": "Angle-domain settings",
    "crossings": "Resonance crossings",
    "run": "Recorded run",
    "tacho": "Tacho check",
    "order-spectrum": "Order spectrum",
    "order-map": "Order map",
    "order-cuts": "Order cuts",
    "overall-level": "Overall level",
    "frequency-map": "frequency map",
    "identification": "Identified lines and aliases",
    "criticals": "Critical speeds: Bode, polar and Campbell",
    "unmatched": "Measured lines no prediction explains",
    "safety": "Safety",
    "provenance": "Provenance",
    "signoff": "Sign-off",
}



@dataclass(frozen=True)
class InputFile:
    """One input of the report, for the provenance table.

    Attributes
    ----------
    role : str
        What the file is (``"machine"``, ``"plan"``, ``"run"``, ``"run sidecar"``, ...).
    name : str
        File name as given (shown; never opened again by the report).
    sha256 : str
        Hex digest of the file's bytes.
    size_bytes : int
    """

    role: str
    name: str
    sha256: str
    size_bytes: int

    @classmethod
    def of(cls, role: str, path) -> InputFile:
        """Hash ``path`` and describe it."""
        p = Path(path)
        return cls(role, str(path), file_sha256(p), p.stat().st_size)


@dataclass(frozen=True)
class Report:
    """A rendered report.

    Attributes
    ----------
    html : str
        The whole document.
    sections : tuple of str
        Ids of the sections present, in page order (keys of :data:`SECTION_TITLES`).
    collisions_by_rate : dict
        Number of collisions (folded lines inside a band above the threshold) at each rate
        the report tabulates, rate (Hz) -> count.
    recommended_rate_hz : float or None
    fold_map_rates_hz : tuple of float
        Rates whose fold maps are drawn (worst candidate first, then the recommended rate).
    aliases : tuple of str or None
        Lines identified as aliases in the run (None without a run or without identification).
    created_utc : str
        Date and time the report was made, UTC, ISO 8601.
    """

    html: str
    sections: tuple
    collisions_by_rate: dict
    recommended_rate_hz: float | None
    fold_map_rates_hz: tuple
    aliases: tuple | None
    created_utc: str
    inputs: tuple = field(default=())
    limits: tuple = field(default=())
    metadata: object = None

    @property
    def collisions(self) -> int:
        """Collisions listed in the report, all tabulated rates together."""
        return int(sum(self.collisions_by_rate.values()))

    @property
    def sha256(self) -> str:
        """SHA-256 (hex) of the document's UTF-8 bytes (the file written)."""
        return hashlib.sha256(self.html.encode("utf-8")).hexdigest()

    def to_dict(self) -> dict:
        """Summary for ``foldline report --json`` (without the output path)."""
        return {
            "sha256": self.sha256,
            "bytes": len(self.html.encode("utf-8")),
            "sections": list(self.sections),
            "collisions": self.collisions,
            "collisions_by_rate": {f"{r:g}": int(n) for r, n in self.collisions_by_rate.items()},
            "recommended_rate_hz": self.recommended_rate_hz,
            "fold_map_rates_hz": list(self.fold_map_rates_hz),
            "aliases": None if self.aliases is None else list(self.aliases),
            "created_utc": self.created_utc,
            "inputs": [{"role": f.role, "name": f.name, "sha256": f.sha256} for f in self.inputs],
            "limits": [r.to_dict() for r in self.limits],
            "verdict": self.verdict,
            "metadata": None if self.metadata is None else self.metadata.to_dict(),
        }

    @property
    def verdict(self) -> str:
        """``"pass"``, ``"fail"``, ``"not judged"`` (a limit could not be judged, none failed)
        or ``"no limits"``."""
        if not self.limits:
            return "no limits"
        if any(r.passed is False for r in self.limits):
            return "fail"
        if any(r.passed is None for r in self.limits):
            return "not judged"
        return "pass"


# --------------------------------------------------------------------------------------------
# tables


def _order_text(v):
    return f"{float(v):.4f}"


_LINE_COLUMNS = (
    Column("name", "line"),
    Column("entry", "source"),
    Column("kind", "kind", kind_name),
    Column("harmonic", "harmonic", str, numeric=True),
    Column("order", "order", _order_text, numeric=True),
    Column("hz", "fixed Hz", fixed(2), numeric=True),
    Column("level_db", "level (dB)", fixed(1), numeric=True),
)

def _residual_text(v) -> str:
    """A residual in dB; "none" where no folded line enters any band (-inf)."""
    return "none" if float(v) == float("-inf") else fixed(1)(v)


_CANDIDATE_COLUMNS = (
    Column("rate_hz", "rate (Hz)", general(8), numeric=True),
    Column("clean", "clean", yes_no),
    Column("collisions", "collisions", str, numeric=True),
    Column("worst_residual_db", "worst folded residual in a band (dB)", _residual_text, numeric=True),
    Column("captures_max_order", "captures highest order", yes_no),
)

_COLLISION_COLUMNS = tuple(
    Column(key, COLLISION_HEADINGS[key],
           None if key not in COLLISION_DECIMALS else str if key == "zone"
           else fixed(COLLISION_DECIMALS[key]), numeric=key in COLLISION_DECIMALS)
    for key in COLLISION_COLUMNS
)

_BAND_COLUMNS = (
    Column("name", "band"),
    Column("kind", "defined by"),
    Column("definition", "definition"),
    Column("lo_at_min", "limits at lowest speed (Hz)"),
    Column("lo_at_max", "limits at top speed (Hz)"),
)

_PEAK_COLUMNS = (
    Column("order", "order", _order_text, numeric=True),
    Column("amplitude", "amplitude (peak)", general(4), numeric=True),
    Column("nearest", "nearest predicted direct line"),
)

_IDENT_COLUMNS = (
    Column("line", "predicted line"),
    Column("kind", "kind", kind_name),
    Column("zone", "zone", str, numeric=True),
    Column("alias", "alias", yes_no),
    Column("points", "ridge points", str, numeric=True),
    Column("rpm_min", "from (rpm)", fixed(0), numeric=True),
    Column("rpm_max", "to (rpm)", fixed(0), numeric=True),
    Column("order_min", "order from", fixed(3), numeric=True),
    Column("order_max", "order to", fixed(3), numeric=True),
    Column("amplitude_max", "largest amplitude", general(4), numeric=True),
)

_UNMATCHED_COLUMNS = (
    Column("id", "tag"),
    Column("family", "family"),
    Column("moves_with_speed", "moves with speed", lambda v: "?" if v is None else yes_no(v)),
    Column("order", "order", lambda v: "" if v is None or v != v else f"{v:.3f}", numeric=True),
    Column("hz", "Hz", lambda v: "" if v is None or v != v else f"{v:.1f}", numeric=True),
    Column("rpm_min", "from (rpm)", fixed(0), numeric=True),
    Column("rpm_max", "to (rpm)", fixed(0), numeric=True),
    Column("points", "ridge points", str, numeric=True),
    Column("amplitude_max", "largest amplitude", general(4), numeric=True),
)

_DOUBT_COLUMNS = (
    Column("time_s", "time (s)", fixed(4), numeric=True),
    Column("reason", "what was found and done"),
)


def _line_records(lines):
    recs = [
        {
            "name": ln.name, "entry": ln.entry, "kind": ln.kind, "harmonic": int(ln.harmonic),
            "order": ln.order, "hz": ln.hz, "level_db": float(ln.level_db),
        }
        for ln in lines
    ]
    # Order lines by order, then fixed lines by frequency.
    recs.sort(key=lambda r: (r["order"] is None, r["order"] if r["order"] is not None else r["hz"]))
    return recs


def _band_records(plan, lines):
    rpm = np.array([plan.speed.rpm_min, plan.speed.rpm_max], dtype=float)
    recs = []
    for band in plan.bands:
        if band.kind == "hz":
            definition = f"{band.hz[0]:g} to {band.hz[1]:g} Hz"
        elif band.kind == "orders":
            definition = f"orders {band.orders[0]:g} to {band.orders[1]:g}"
        else:
            definition = f"{band.width_pct:g} % around {band.around}"
        lo, hi = band.limits_hz(rpm, lines)
        recs.append({
            "name": band.name, "kind": band.kind, "definition": definition,
            "lo_at_min": f"{lo[0]:.1f} to {hi[0]:.1f}", "lo_at_max": f"{lo[1]:.1f} to {hi[1]:.1f}",
        })
    return recs


def _nearest_direct(order, lines, tolerance):
    best, err = "", tolerance
    for ln in lines:
        if ln.order is None:
            continue
        e = abs(ln.order - order)
        if e <= err:
            best, err = ln.name, e
    return best


# --------------------------------------------------------------------------------------------
# building


def _fold_rates(advice):
    cand = advice.candidates
    rates = []
    if len(cand):
        worst = cand.sort_values(["collisions", "rate_hz"], ascending=[False, True]).iloc[0]
        if int(worst["collisions"]) > 0:
            rates.append(float(worst["rate_hz"]))
    rec = advice.recommended_rate_hz
    if rec is not None and float(rec) not in rates:
        rates.append(float(rec))
    if not rates and len(cand):
        rates.append(float(cand["rate_hz"].max()))
    return rates


def _section(sid, inner, sections):
    sections.append(sid)
    return f'<section id="{esc(sid)}"><h2>{esc(SECTION_TITLES[sid])}</h2>\n{inner}\n</section>'


def _sub(sid, inner, sections):
    sections.append(sid)
    return f'<section id="{esc(sid)}"><h3>{esc(SECTION_TITLES[sid])}</h3>\n{inner}\n</section>'


def build_report(machine, plan, *, analysis=None, inputs=(), track_settings=None,
                 created_utc=None, title=None, progress=None, criticals=None,
                 display=None, metadata=None, limits=None) -> Report:
    """Render the report of a machine under a plan, and of a tracked run when given.

    Parameters
    ----------
    machine : Machine
    plan : Plan
    analysis : RunAnalysis, optional
        A run tracked with :func:`workbench.runs.analysis.track_run` (with the machine, so that
        predicted lines are overlaid and aliases identified).
    inputs : sequence of InputFile
        Input files for the provenance table.
    track_settings : mapping, optional
        Tracking options used, shown with the run.
    created_utc : datetime or str, optional
        Time stamp to print (default: now).  A datetime is converted to UTC.
    title : str, optional
        Page title (default from the machine's name).
    progress : callable, optional
        Called with a short text as each part is built.
    criticals : RunCriticals, optional
        Order tracks and critical speeds of the run
        (:func:`workbench.runs.criticals.run_criticals`): adds the Bode, polar and Campbell
        views and the criticals table to the run's part.
    display : mapping, optional
        How the run's results are shown: ``overlay`` (``"none"`` default, ``"matched"``,
        ``"all"``: predicted lines drawn over the maps and the order spectrum).
    metadata : TestMetadata, optional
        Test metadata shown in the header (unit under test, serial number, test id, operator,
        date, sensors).
    limits : sequence of LimitResult, optional
        The plan's limits judged on the run; default: judged here on ``analysis`` with
        :func:`workbench.runs.limits.evaluate_limits` when the plan has limits.

    Returns
    -------
    Report
    """
    from workbench.plots import plot_fold_map
    from workbench.sampling import advise, find_collisions, fold_map

    say = progress or (lambda _text: None)
    lines = machine.lines()
    plan.check_against(lines)
    stamp = _utc_text(created_utc)
    say("advising on the candidate rates")
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always", FoldlineWarning)
        advice = advise(machine, plan)
    warn_texts = [str(w.message) for w in caught]

    # The collision table of each candidate rate (and of a recommended standard rate), computed
    # exactly as `foldline foldmap` does, so the report and the command agree row for row.
    rates = sorted({float(r) for r in plan.rates_hz} | (
        {float(advice.recommended_rate_hz)} if advice.recommended_rate_hz is not None else set()))
    fmaps, tables = {}, {}
    for rate in rates:
        fmaps[rate] = fold_map(machine, plan, rate)
        tables[rate] = find_collisions(machine, plan, rate, fmap=fmaps[rate])
    shown_rates = _fold_rates(advice)
    coll_count = {r: int((t["kind"] == "collision").sum()) for r, t in tables.items()}

    sections: list[str] = []
    parts: list[str] = []
    rec = advice.recommended_rate_hz
    rs = advice.resampling
    if limits is None and analysis is not None and plan.limits:
        from workbench.runs.limits import evaluate_limits

        limits = [r for a in getattr(analysis, "channels", (analysis,))   # every channel
                  for r in evaluate_limits(a, plan.limits, bands=plan.bands, lines=lines)]
    limits = tuple(limits or ())

    # ---- summary -----------------------------------------------------------------------
    summary_items = [
        f"Machine <b>{esc(machine.name)}</b>, reference shaft <b>{esc(machine.reference)}</b>, "
        f"{len(lines)} lines.",
        f"Test: {esc(plan.speed.kind)} profile {plan.speed.rpm_min:g} to {plan.speed.rpm_max:g} rpm"
        + (f" in {plan.speed.duration_s:g} s" if plan.speed.duration_s else "")
        + f"; filter {esc(plan.filter.describe())}; threshold {plan.threshold_db:g} dB; "
        f"{len(plan.bands)} protected band(s).",
    ]
    if rec is not None:
        summary_items.append(
            f'<span class="verdict good">Recommended rate: {rec:g} S/s</span> '
            f"({coll_count.get(float(rec), 0)} collisions).")
    else:
        summary_items.append('<span class="verdict bad">No rate recommended</span>: no candidate '
                             "or standard rate is both clean (no collision) and captures the "
                             "highest order.")
    worst_rates = [r for r in shown_rates if coll_count.get(r, 0) > 0]
    for r in worst_rates:
        summary_items.append(
            f'<span class="bad">{r:g} S/s: {coll_count[r]} collision(s)</span> '
            "of folded lines with the protected bands.")
    crossings = getattr(advice, "crossings", None)
    if crossings is not None:
        fast = int((~crossings["sweep_ok"]).sum()) if len(crossings) else 0
        summary_items.append(
            f"{len(crossings)} crossing(s) of lines with {len(machine.resonances)} resonance(s) and "
            f"{len(machine.criticals)} critical(s); "
            + (f'<span class="bad">{fast} swept too fast to measure the peak within 1 dB</span>.'
               if fast else "every one swept slowly enough to measure its peak within 1 dB."))
    summary_items.append(
        f"Angle domain: {rs.samples_per_rev} samples/rev, {rs.revs_per_block} revs/block "
        f"(order resolution {rs.order_resolution:g}), highest order {rs.max_order:g}.")
    if analysis is not None:
        idents = [getattr(c, "identification", None)
                  for c in getattr(analysis, "channels", (analysis,))]
        n_alias = None if all(i is None for i in idents) else len(
            {str(n) for i in idents if i is not None for n in i.aliases["line"]})
        summary_items.append(
            f"Run <span class=\"mono\">{esc(Path(str(analysis.source)).name)}</span>: "
            f"{analysis.rate_hz:g} S/s, {analysis.duration_s:.1f} s, "
            f"{analysis.shaft_angle.rpm_min:.0f} to {analysis.shaft_angle.rpm_max:.0f} rpm"
            + (f", {len(analysis.channels)} channels" if hasattr(analysis, "channels") else "")
            + ("" if n_alias is None else f"; {n_alias} folded line(s) identified in the order map")
            + ".")
    if criticals is not None:
        found = ", ".join(f"order {c.order:g} at {c.rpm:.0f} rpm (AF {c.amplification_factor:.1f})"
                          for _, c in criticals.criticals) or "none"
        summary_items.append(f"Critical speeds in the run: {esc(found)}.")
    parts.append(_section("summary", "<ul>" + "".join(f"<li>{s}</li>" for s in summary_items)
                          + "</ul>", sections))
    if plan.limits:
        parts.append(_section("limits", _limits_html(plan, limits, analysis), sections))

    # ---- machine -----------------------------------------------------------------------
    say("machine and plan tables")
    shaft_orders = machine.shaft_orders()
    shaft_rows = [{"shaft": k, "order": float(v)} for k, v in shaft_orders.items()]
    machine_html = key_value_html(
        [("name", machine.name), ("reference shaft", machine.reference),
         ("shafts", len(machine.shafts)), ("sources", len(machine.sources)), ("lines", len(lines))],
        css_class="machine-summary")
    machine_html += table_html(shaft_rows, (Column("shaft", "shaft"),
                                            Column("order", "speed (orders of the reference)",
                                                   _order_text, numeric=True)),
                               css_class="shafts", caption="Shaft speeds")
    machine_html += (f"<details><summary>Line table: {len(lines)} lines</summary>"
                     + table_html(_line_records(lines), _LINE_COLUMNS, css_class="lines",
                                  caption="Lines (order lines by order, then fixed lines)")
                     + "</details>")
    from workbench.machine import DEFAULT_DAMPING_RATIO

    modes = [{"name": m.name, "kind": "resonance", "hz": m.hz, "rpm": None,
              "zeta": m.damping_ratio} for m in machine.resonances]
    modes += [{"name": m.name, "kind": "critical", "hz": m.hz, "rpm": m.rpm,
               "zeta": m.damping_ratio} for m in machine.criticals]
    if modes:
        machine_html += table_html(
            modes, (Column("name", "name"), Column("kind", "kind"),
                    Column("hz", "natural frequency (Hz)", general(4), numeric=True),
                    Column("rpm", "critical speed (rpm)",
                           lambda v: "" if v is None else f"{v:.0f}", numeric=True),
                    Column("zeta", "damping ratio",
                           lambda v: f"{DEFAULT_DAMPING_RATIO:g} (default)" if v is None
                           else f"{v:g}", numeric=True)),
            css_class="modes", caption="Resonances and criticals of the machine file")
    parts.append(_section("machine", machine_html, sections))

    # ---- plan --------------------------------------------------------------------------
    sp = plan.speed
    speed_pairs = [("profile", sp.kind), ("speed range", f"{sp.rpm_min:g} to {sp.rpm_max:g} rpm")]
    if sp.duration_s:
        speed_pairs.append(("duration", f"{sp.duration_s:g} s"))
    speed_pairs.append(("fastest sweep", f"{sp.max_sweep_rate_rpm_per_s:.3g} rpm/s"))
    plan_html = key_value_html(
        speed_pairs + [
            ("candidate rates", ", ".join(f"{r:g}" for r in plan.rates_hz) + " S/s"),
            ("anti-alias filter", plan.filter.describe()),
            ("threshold", f"{plan.threshold_db:g} dB (a folded line above this residual counts)"),
        ], css_class="plan-summary")
    plan_html += table_html(_band_records(plan, lines), _BAND_COLUMNS, css_class="bands",
                            caption="Protected bands", empty="no bands")
    plan_html += table_html(advice.candidates, _CANDIDATE_COLUMNS, css_class="candidates",
                            caption="Candidate rates (by rate)")
    parts.append(_section("plan", plan_html, sections))

    # ---- recommendation ----------------------------------------------------------------
    rec_html = (f'<p class="verdict good">{rec:g} S/s</p>' if rec is not None
                else '<p class="verdict bad">no rate recommended</p>')
    rec_html += '<ul class="notes">' + "".join(f"<li>{esc(n)}</li>" for n in advice.notes) + "</ul>"
    if warn_texts:
        rec_html += '<ul class="notes warnings">' + "".join(
            f"<li>warning: {esc(w)}</li>" for w in warn_texts) + "</ul>"
    parts.append(_section("recommendation", rec_html, sections))

    # ---- collisions --------------------------------------------------------------------
    coll_html = ["<p>Folded lines (zone 1 and above) whose residual after the filter exceeds the "
                 f"threshold ({plan.threshold_db:g} dB) while inside a protected band; one row per "
                 "line, band and rpm interval, highest residual first.</p>"]
    for rate in rates:
        table = tables[rate]
        coll = table[table["kind"] == "collision"]
        over = table[table["kind"] == "overlap"]
        label = f"{rate:g} S/s: {len(coll)} collision(s), {len(over)} overlap(s)"
        if rec is not None and rate == float(rec):
            label += " (recommended)"
        is_open = " open" if (rate in worst_rates or (rec is not None and rate == float(rec))) else ""
        attrs = {"data-rate": repr(float(rate))}
        inner = table_html(coll, _COLLISION_COLUMNS, css_class="collisions", attrs=attrs,
                           caption=f"Collisions at {rate:g} S/s", empty="no collisions")
        inner += (f"<details><summary>{len(over)} overlap(s) at {rate:g} S/s: direct lines "
                  "inside a band (not aliases)</summary>"
                  + table_html(over, _COLLISION_COLUMNS, css_class="overlaps", attrs=attrs,
                               caption=f"Overlaps at {rate:g} S/s", empty="no overlaps")
                  + "</details>")
        coll_html.append(f'<details{is_open} data-rate="{rate!r}"><summary>{esc(label)}</summary>'
                         f"{inner}</details>")
    parts.append(_section("collisions", "\n".join(coll_html), sections))

    # ---- fold maps ---------------------------------------------------------------------
    say("fold maps")
    fm_html = ["<p>True frequencies (thin) and apparent frequencies after sampling (folded lines "
               "dashed) across the speed profile, with the protected bands and the filter's usable "
               "edge; collisions are marked.</p>"]
    for rate in shown_rates:
        why = "recommended rate" if rec is not None and rate == float(rec) else "worst candidate"
        for view in ("hz", "order"):
            fig = plot_fold_map(fmaps[rate], plan, collisions=tables[rate], view=view)
            fm_html.append(figure_svg(
                fig, key=f"foldmap-{rate:g}-{view}",
                caption=f"Fold map at {rate:g} S/s ({why}), {'Hz' if view == 'hz' else 'order'} view, "
                        f"{coll_count[rate]} collision(s).",
                alt=f"fold map at {rate:g} samples per second, {view} view"))
            _close(fig)
    parts.append(_section("fold-maps", "\n".join(fm_html), sections))

    # ---- angle settings ----------------------------------------------------------------
    angle_pairs = [
        ("samples per rev", f"{rs.samples_per_rev} (a power of two, at least "
                            f"{ANALYSER_FACTOR:g} x order {rs.max_order:g})"),
        ("angle-domain Nyquist order", f"{rs.order_nyquist:g}"),
        ("highest order of interest", f"{rs.max_order:g}"),
        ("order resolution", f"{rs.order_resolution:g} orders"),
        ("revs per block", f"{rs.revs_per_block}"),
        ("lowest rate capturing the highest order at top speed",
         f"{rs.min_rate_hz:.0f} S/s (order {rs.max_order:g} at {rs.top_speed_rpm:g} rpm)"),
        ("smearing of a plain time-domain FFT at the fastest sweep",
         f"{rs.smearing_bins:.1f} bins ({rs.smearing_hz:.1f} Hz) per block for order {rs.max_order:g}"),
    ]
    parts.append(_section("angle-settings", key_value_html(angle_pairs, css_class="angle-settings"),
                          sections))

    # ---- crossings of lines with resonances and criticals ------------------------------
    if getattr(advice, "crossings", None) is not None:
        say("resonance crossings")
        parts.append(_crossings_section(machine, plan, advice.crossings, sections))

    # ---- run ---------------------------------------------------------------------------
    aliases = None
    if analysis is not None:
        say("run figures")
        run_html, aliases = _run_sections(analysis, lines, track_settings, sections,
                                          criticals=criticals, plan=plan, display=display)
        parts.append(run_html)

    # ---- safety and provenance ----------------------------------------------------------
    parts.append(_section("safety", f'<p class="safety">{esc(SAFETY_TEXT)}</p>', sections))
    prov = key_value_html(
        [("made by", f"foldline {__version__}"), ("made at (UTC)", stamp),
         ("Python", sys.version.split()[0]), ("numpy", np.__version__)] + _lib_versions(),
        css_class="provenance")
    prov += table_html([{"role": f.role, "name": f.name, "size": f.size_bytes, "sha256": f.sha256}
                        for f in inputs],
                       (Column("role", "input"), Column("name", "file"),
                        Column("size", "bytes", str, numeric=True), Column("sha256", "SHA-256")),
                       css_class="inputs", caption="Input files", empty="no input files recorded")
    parts.append(_section("provenance", prov, sections))
    parts.append(_section("signoff", _SIGNOFF_HTML, sections))

    heading = title or f"foldline report: {machine.name}"
    nav = "<nav><ol>" + "".join(
        f'<li><a href="#{esc(s)}">{esc(SECTION_TITLES[s])}</a></li>'
        for s in sections if s in _TOP_LEVEL) + "</ol></nav>"
    body = (f"<header><h1>{esc(heading)}</h1><p class=\"sub\">Made {esc(stamp)} by foldline "
            f"{esc(__version__)}</p>\n{_metadata_html(metadata, analysis)}\n"
            f"{_verdict_html(plan, limits, analysis)}</header>\n{nav}\n<main>\n" + "\n".join(parts)
            + "\n</main>\n<footer>This file is self-contained: it loads nothing from a network. "
            "Tables sort on a header click.</footer>")
    return Report(
        html=page(title=heading, body=body),
        sections=tuple(sections),
        collisions_by_rate={float(r): n for r, n in coll_count.items()},
        recommended_rate_hz=None if rec is None else float(rec),
        fold_map_rates_hz=tuple(shown_rates),
        aliases=aliases,
        created_utc=stamp,
        inputs=tuple(inputs),
        limits=limits,
        metadata=metadata,
    )


_TOP_LEVEL = {"summary", "limits", "machine", "plan", "recommendation", "collisions", "fold-maps",
              "angle-settings", "run", "safety", "provenance", "signoff"}

#: The sign-off block that ends the report: left blank, to fill in on paper or in a PDF.
_SIGNOFF_HTML = (
    '<p>Filled in by the people who accept the test. Signing confirms the limits applied are '
    "the agreed ones and the test was run as planned.</p>"
    '<table class="signoff"><thead><tr><th>role</th><th>name</th><th>signature</th>'
    "<th>date</th></tr></thead><tbody>"
    + "".join(f'<tr><th scope="row">{role}</th><td class="blank"></td><td class="blank"></td>'
              '<td class="blank"></td></tr>' for role in ("prepared by", "checked by", "approved by"))
    + "</tbody></table>"
)


def _metadata_html(metadata, analysis) -> str:
    """The test's identity at the top of the page: what, which serial, which test, who, when."""
    from workbench.runs.metadata import META_KEYS, META_LABELS

    meta = metadata
    pairs = []
    for key in META_KEYS:
        value = getattr(meta, key, "") if meta is not None else ""
        pairs.append((META_LABELS[key], value or "not given"))
    html = key_value_html(pairs, css_class="test-metadata")
    sensors = [] if meta is None else list(meta.sensors)
    analysed = () if analysis is None else tuple(
        str(a.channel) for a in getattr(analysis, "channels", (analysis,)))
    channel = analysed[0] if analysed else None
    for name in reversed(analysed):
        if all(s is None or s.channel != name for s in sensors):
            sensors.insert(0, meta.sensor(name) if meta is not None else None)
    rows = [{"channel": s.channel if s is not None else channel,
             "analysed": "yes" if (s is not None and s.channel in analysed) or s is None else "",
             "position": (s.position if s is not None else "") or "not given",
             "direction": (s.direction if s is not None else "") or "not given",
             "sensor_type": (s.sensor_type if s is not None else "") or "not given"}
            for s in sensors]
    if rows:
        html += table_html(rows, (Column("channel", "channel"), Column("analysed", "analysed"),
                                  Column("position", "sensor position"),
                                  Column("direction", "direction"),
                                  Column("sensor_type", "sensor type")),
                           css_class="sensors", caption="Sensors")
    return f'<div class="test-header">{html}</div>'


def _verdict_html(plan, limits, analysis) -> str:
    """The verdict against the acceptance limits, with who sets them, at the top of the page."""
    from workbench.runs.limits import LIMITS_NOTE, limits_verdict

    if not plan.limits:
        text, cls = ("No acceptance limits in the plan: the report gives no pass or fail "
                     "(add [[limit]] entries to the plan file)."), "none"
    elif analysis is None:
        text, cls = (f"{len(plan.limits)} acceptance limit(s) in the plan, not judged: the report "
                     "has no recorded run."), "none"
    else:
        text = limits_verdict(limits)
        cls = ("bad" if any(r.passed is False for r in limits)
               else "none" if any(r.passed is None for r in limits) else "good")
    return (f'<div id="verdict" class="verdict-box {cls}"><p class="verdict {cls}">'
            f"Verdict: {esc(text)}</p><p class=\"note\">{esc(LIMITS_NOTE)}</p></div>")


_LIMIT_COLUMNS = (
    Column("name", "limit"),
    Column("what", "judges"),
    Column("max", "max", general(4), numeric=True),
    Column("worst", "worst level", general(4), numeric=True),
    Column("rpm_at_worst", "at (rpm)", fixed(0), numeric=True),
    Column("verdict", "verdict"),
    Column("note", "note"),
)


def _limits_html(plan, limits, analysis) -> str:
    from workbench.runs.limits import LIMITS_NOTE

    if analysis is None:
        rows = [{"name": lim.name, "what": lim.describe(), "max": lim.max, "worst": None,
                 "rpm_at_worst": None, "verdict": "not judged", "note": "no recorded run"}
                for lim in plan.limits]
        return (f"<p>{esc(LIMITS_NOTE)}</p>" + table_html(rows, _LIMIT_COLUMNS, css_class="limits",
                                                          caption="Acceptance limits of the plan"))
    from workbench.plots.limits import plot_limit_checks

    unit = analysis.unit or ""
    rows = [{"name": r.name, "what": r.limit.describe() + (f" ({unit})" if unit else ""),
             "max": r.max, "worst": r.worst, "rpm_at_worst": r.rpm_at_worst,
             "verdict": "not judged" if r.passed is None else ("pass" if r.passed else "FAIL"),
             "note": r.note} for r in limits]
    html = (f"<p>Each limit is judged on channel <b>{esc(analysis.channel)}</b>: the highest level "
            "inside the limit's speed range and the speed where it occurred. A band's level is the "
            "energy sum of the order map's bins inside the band (the batch summary's band level); "
            "an order's level is its order cut over the limit's bandwidth; both are peak "
            "amplitudes (a sinusoid of amplitude A reads A), divided by \u221a2 for a limit given "
            f"as RMS. {esc(LIMITS_NOTE)}</p>")
    html += table_html(rows, _LIMIT_COLUMNS, css_class="limits", caption="Acceptance limits")
    fig = plot_limit_checks(limits)
    html += figure_svg(fig, key="limits", caption="Each limit drawn on the order cut or band "
                       "level it judges (dashed: the maximum over the limit's speed range; dot: "
                       "the worst level).", alt="levels against speed with the acceptance limits")
    _close(fig)
    return html


_CROSSING_COLUMNS = (
    Column("line", "line"),
    Column("resonance", "resonance / critical"),
    Column("kind", "kind", kind_name),
    Column("rpm", "rpm", fixed(0), numeric=True),
    Column("time_s", "time (s)", fixed(1), numeric=True),
    Column("hz", "natural frequency (Hz)", general(4), numeric=True),
    Column("damping_ratio", "damping ratio", general(3), numeric=True),
    Column("sweep_rpm_per_s", "planned sweep (rpm/s)", general(3), numeric=True),
    Column("peak_loss_db", "peak loss (dB)", fixed(2), numeric=True),
    Column("sweep_ok", "sweep ok", yes_no),
    Column("slowest_sweep_rpm_per_s", "fastest sweep for 1 dB (rpm/s)", general(3), numeric=True),
)

_CRITICAL_COLUMNS = (
    Column("channel", "channel"),
    Column("order", "order", _order_text, numeric=True),
    Column("rpm", "critical (rpm)", fixed(0), numeric=True),
    Column("amplitude", "peak amplitude", general(4), numeric=True),
    Column("amplification_factor", "AF (half-power)", fixed(1), numeric=True),
    Column("half_power", "half-power speeds (rpm)"),
    Column("phase_change_deg", "phase change (deg)", fixed(0), numeric=True),
    Column("separation_margin_pct", "separation margin (%)",
           lambda v: "" if v is None else f"{v:.1f}", numeric=True),
    Column("required_margin_pct", "API margin asked (%)",
           lambda v: "" if v is None else f"{v:.1f}", numeric=True),
)

def _crossings_section(machine, plan, table, sections):
    """Plan-side Campbell diagram and the crossings table (with the sweep check)."""
    from workbench.plots import plot_campbell
    from workbench.runs.criticals import SAFETY_NOTE

    sp = plan.speed
    fig = plot_campbell(None, orders=(1.0, 2.0), lines=machine.lines(),
                        resonances=machine.resonances, criticals=machine.criticals,
                        rpm_range=(sp.rpm_min, sp.rpm_max),
                        title="Campbell diagram of the plan: lines that cross a resonance")
    fast = int((~table["sweep_ok"]).sum()) if len(table) else 0
    intro = (f"<p>{len(table)} crossing(s) of machine lines with the machine's resonances and "
             f"criticals inside the speed profile; <b>{fast}</b> swept too fast for the "
             "resonance peak to build up within 1 dB (passage through resonance, F. M. Lewis, "
             "Trans. ASME 54, 1932). Where a sweep is too fast, sweep that part more slowly (at "
             "most the rate given) or dwell, within the machine maker's limits.</p>")
    html = figure_svg(fig, key="campbell-plan", caption="Order lines against speed with the "
                      "resonances (solid) and criticals (dashed) and their half-power bands; "
                      "circles mark crossings.", alt="Campbell diagram of the plan")
    _close(fig)
    html = intro + html + table_html(table, _CROSSING_COLUMNS, css_class="crossings",
                                     caption="Crossings (by time in the run)",
                                     empty="no line crosses a resonance inside the profile")
    html += f'<p class="safety">{esc(SAFETY_NOTE)}</p>'
    return _section("crossings", html, sections)


def _criticals_section(crit, sections):
    """The run-up views (Bode, polar, Campbell) and the criticals table of a RunCriticals."""
    from workbench.plots import run_up_figures
    from workbench.runs.criticals import SAFETY_NOTE

    figs = run_up_figures(crit)
    captions = {
        "bode.png": ("bode", "Bode plot: amplitude and phase lag of the tracked orders against "
                     "speed; criticals marked with their amplification factor (AF, half-power "
                     "method), half-power bands shaded."),
        "polar.png": ("polar", "Polar plot of the first order tracked: amplitude at the phase lag, "
                      "speeds written along the curve."),
        "campbell.png": ("campbell-run", "Campbell diagram: the measured frequency map with "
                         "the order lines, the machine's resonances and criticals; circles mark "
                         "crossings."),
    }
    html = [f"<p>Speed from {esc(crit.speed_source)}; phase <b>{esc(crit.phase_reference)}</b>"
            + ("" if crit.phase_reference == "absolute" else
               " (no once-per-rev reference: phases compare within this run only)")
            + f"; {len(crit.criticals)} critical speed(s) found, {len(crit.rejected)} peak(s) not "
            "taken (a step, a line passing through the order, leakage or noise).</p>"]
    for name, fig in figs.items():
        key, caption = captions[name]
        html.append(figure_svg(fig, key=key, caption=caption, alt=key))
        _close(fig)
    table = crit.criticals_table()
    if len(table):
        table["half_power"] = [f"{a:.0f} - {b:.0f}" for a, b in table["half_power_rpm"]]
    html.append(table_html(table, _CRITICAL_COLUMNS, css_class="criticals",
                           caption="Critical speeds (API 684 half-power amplification factor)",
                           empty="no critical speed found in the tracked orders"))
    html.append(f'<p class="safety">{esc(SAFETY_NOTE)}</p>')
    return _sub("criticals", "\n".join(html), sections)


def _run_sections(analysis, lines, track_settings, sections, *, criticals=None, plan=None,
                  display=None):
    """The run part of the report; returns (html, alias names or None)."""
    from workbench.angle.validity import valid_region
    from workbench.plots import (plot_order_cuts, plot_order_map, plot_order_spectrum,
                                 plot_frequency_map, plot_tacho_check, speed_check_options)

    display = dict(display or {})
    overlay = display.get("overlay", "none")
    scaling = display.get("scaling")
    db = scaling is not None and scaling.db_ref is not None
    # the plan's filter is the acquisition's: it bounds what the run measured faithfully
    valid = valid_region(analysis.rate_hz, None if plan is None else plan.filter)

    def shown_analysis(a):
        """A channel's analysis with the roll-off correction and the scaling asked for."""
        if display.get("correct_rolloff") and plan is not None:
            from workbench.runs.scaled import rolloff_corrected

            a = rolloff_corrected(a, plan.filter)
        if scaling is not None:
            from workbench.runs.scaled import scaled_analysis

            a = scaled_analysis(a, scaling)
        return a

    sa = analysis.shaft_angle
    run_sections: list[str] = []
    sections.append("run")
    pairs = [
        ("file", Path(str(analysis.source)).name),
        ("rate", f"{analysis.rate_hz:g} S/s"),
        ("channel" if not hasattr(analysis, "channels") else "channels",
         ", ".join(f"{c.channel} ({c.unit})" if c.unit else str(c.channel)
                   for c in getattr(analysis, "channels", (analysis,)))),
        ("duration", f"{analysis.duration_s:.2f} s"),
        ("speed range", f"{sa.rpm_min:.1f} to {sa.rpm_max:.1f} rpm"),
        ("revolutions", f"{sa.revolutions:.1f}"),
        ("samples per rev", str(analysis.samples_per_rev)),
        ("revs per block", f"{float(analysis.revs_per_block):g}"),
    ]
    if scaling is not None:
        unit0 = getattr(getattr(analysis, "first", analysis), "unit", "") or ""
        pairs.append(("amplitudes shown as", scaling.label(unit0) + (
            f", integrated from {scaling.min_hz:g} Hz" if scaling.integrate else "")))
    for k, v in (track_settings or {}).items():
        if v is not None and k not in ("samples_per_rev", "revs_per_block", "machine"):
            pairs.append((k.replace("_", " "), v if isinstance(v, str) else repr(v)))
    head = key_value_html(pairs, css_class="run-summary")
    from workbench.runs.run import describe_log_entry

    log = tuple(getattr(getattr(analysis, "first", analysis), "log", ()) or ())
    if log:
        head += "<details><summary>processing log</summary><ul class=\"notes\">" + "".join(
            f"<li>{esc(describe_log_entry(entry))}</li>" for entry in log) + "</ul></details>"

    # tacho check
    t0, t1 = float(sa.pulse_times_s[0]), float(sa.pulse_times_s[-1])
    t = np.linspace(t0, t1, 2000)
    doubted = sa.doubted
    source = getattr(analysis, "speed_source", "tacho")
    fig = plot_tacho_check(t, sa.rpm_at(t), doubted_times_s=doubted.time_s, doubted_reasons=doubted.reason,
                           **speed_check_options(sa, t, estimate=getattr(analysis, "speed_estimate", None),
                                                 source=source))
    tacho_html = figure_svg(fig, key="tacho", caption=f"Reference shaft speed (from the {source}) with its "
                            "uncertainty band (+-2 x RMS), the pulses and any pulse the tacho "
                            "processing doubted.",
                            alt=f"speed against time from the {source}")
    _close(fig)
    tacho_html += table_html(doubted.to_frame(), _DOUBT_COLUMNS, css_class="doubted",
                             caption="Doubted pulses", empty="no doubted pulses")
    run_sections.append(_sub("tacho", tacho_html, sections))

    chans = tuple(analysis.channels) if hasattr(analysis, "channels") else (analysis,)
    aliases: list = []
    any_ident = False

    def channel_parts(analysis, sfx):
        """One channel's spectrum, map, cuts, overall level, frequency map, identification
        and unmatched lines."""
        nonlocal any_ident
        analysis = shown_analysis(analysis)
        unit = analysis.unit or ""
        label = None if scaling is None else scaling.label(analysis.channel_unit or "")
        shown = {"amplitude_label": label}

        def sub(sid, inner):
            if not sfx:
                return _sub(sid, inner, sections)
            if sid not in sections:
                sections.append(sid)
            return (f'<section id="{esc(sid + sfx)}" class="{esc(sid)}"><h4>{esc(SECTION_TITLES[sid])}'
                    f"</h4>\n{inner}\n</section>")

        # order spectrum and peaks
        res = 1.0 / float(analysis.revs_per_block)
        top = analysis.top_order   # the figures' order range: the order kept by the tracking
        peaks = analysis.peaks.copy()
        peaks["nearest"] = [_nearest_direct(o, lines, max(2 * res, 0.02)) for o in peaks["order"]]
        peaks = peaks.sort_values("amplitude", ascending=False)
        ident = getattr(analysis, "identification", None)
        fig = plot_order_spectrum(analysis.spectrum, peaks=analysis.peaks, lines=lines, unit=unit,
                                  overlay=overlay, identification=ident, valid=valid, max_order=top,
                                  rpm_range=(float(sa.rpm_min), float(sa.rpm_max)), log=not db,
                                  **shown)
        spec_html = figure_svg(fig, key="order-spectrum" + sfx, caption="Order spectrum averaged over "
                               "the run (peak amplitudes, window-corrected)" + (
                                   "." if overlay == "none" else " with the predicted direct line "
                                   "orders dotted."), alt="order spectrum")
        _close(fig)
        spec_html += table_html(peaks, _PEAK_COLUMNS, css_class="peaks",
                                caption="Peaks of the order spectrum (largest first)", empty="no peaks")
        env = getattr(analysis, "envelope", None)
        if env is not None:
            epeaks = analysis.envelope_peaks.copy()
            epeaks["nearest"] = [_nearest_direct(o, lines, max(2 * res, 0.02)) for o in epeaks["order"]]
            epeaks = epeaks.sort_values("amplitude", ascending=False)
            fig = plot_order_spectrum(env, peaks=analysis.envelope_peaks, lines=lines, unit=unit,
                                      title="Envelope order spectrum", overlay=overlay,
                                      identification=ident)
            spec_html += figure_svg(fig, key="envelope-spectrum" + sfx, caption="Envelope order spectrum.",
                                    alt="envelope order spectrum")
            _close(fig)
            spec_html += table_html(epeaks, _PEAK_COLUMNS, css_class="envelope-peaks",
                                    caption="Peaks of the envelope order spectrum", empty="no peaks")
        run_sections.append(sub("order-spectrum", spec_html))

        unmatched = getattr(analysis, "unmatched", None)
        fig = plot_order_map(analysis.order_map, lines=lines, rate_hz=analysis.rate_hz,
                             identification=ident, unit=unit, overlay=overlay, unmatched=unmatched,
                             valid=valid, db=db, max_order=top, **shown)
        caption = ("Order map as measured" if overlay == "none" else
                   "Order map with the predicted lines ("
                   + ("those matched to measured ridges" if overlay == "matched" else "all") +
                   "): direct lines solid, folded lines (aliases, moving in order with speed) dashed; "
                   "identified aliases numbered, with the key below the map")
        caption += ("; measured lines no prediction explains are tagged U1, U2, ..."
                    if unmatched is not None and len(unmatched) else "")
        caption += ". Shaded: orders beyond the " + valid.describe() + "."
        run_sections.append(sub("order-map", figure_svg(
            fig, key="order-map" + sfx, caption=caption, alt="order map")))
        _close(fig)

        cuts = tuple(getattr(analysis, "cuts", ()) or ())
        if cuts:
            fig = plot_order_cuts(cuts, unit=unit, valid=valid, log=not db, **shown)
            cut_html = figure_svg(fig, key="order-cuts" + sfx, caption="Amplitude of chosen orders "
                                  "against speed (energy sum over the band of each cut); dotted where "
                                  "the cut's band lies beyond the " + valid.describe() + "; grey "
                                  "above Nyquist, where the order is folded and not measured.",
                                  alt="order cuts")
            shared = tuple(getattr(analysis, "cut_band_lines", ()) or ())
            lasting = [d for d in shared if d["rpm_max"] > d["rpm_min"]]
            if lasting:
                cut_html += ('<p class="warning">Other predicted lines inside a cut\'s band (the cut '
                             "sums them there and beats between them): " + esc("; ".join(
                                 f"order {d['cut_order']:g}: {d['line']} at {d['rpm_min']:.0f}-"
                                 f"{d['rpm_max']:.0f} rpm" for d in lasting)) + ".</p>")
            _close(fig)
            cut_html += table_html(_cut_records(cuts, lines, res), _CUT_COLUMNS, css_class="cuts",
                                   caption="Order cuts and the predicted line at each order")
        else:
            cut_html = '<p class="empty">no order cuts were asked for</p>'
        run_sections.append(sub("order-cuts", cut_html))

        overall = getattr(analysis, "overall", None)
        if overall is not None:
            from workbench.plots import plot_overall_level

            fig = plot_overall_level(overall, unit=analysis.channel_unit or unit,
                                     cuts=None if scaling else cuts)
            band = overall.band_hz
            run_sections.append(sub("overall-level", figure_svg(
                fig, key="overall-level" + sfx, caption="Overall RMS of the channel against speed "
                f"(time domain, blocks of {overall.block_s:.3g} s averaged on mean square in the "
                "order map's speed rows"
                + (f", {band[0]:g}-{band[1]:g} Hz only" if band else ", whole band, DC removed")
                + "), with the order cuts as RMS: where the overall level rises and no order does, "
                "the energy is in something the cuts do not follow.",
                alt="overall level against speed")))
            _close(fig)

        rf = getattr(analysis, "rf_map", None)
        if rf is not None:
            fig = plot_frequency_map(rf, lines=lines, rate_hz=analysis.rate_hz, unit=unit,
                                         overlay=overlay, identification=ident, valid=valid, db=db,
                                         **shown)
            run_sections.append(sub("frequency-map", figure_svg(
                fig, key="frequency-map" + sfx, caption="Time-domain spectra against speed" + (
                    "." if overlay == "none" else " with the apparent frequency of each "
                    + ("identified" if overlay == "matched" else "predicted") + " line."),
                alt="frequency map")))
            _close(fig)

        if ident is not None:
            aliases.extend(str(n) for n in ident.aliases["line"])
            n_unexpl = len(ident.unexplained)
            below = tuple(getattr(ident, "below_resolution", ()) or ())
            intro = ("<p>Ridges of the order map matched to the machine's predicted lines. A line in "
                     "zone 1 or above is an <b>alias</b>: it was above Nyquist when sampled and shows "
                     "at an order that moves with speed, so it is not a fault line at that order. "
                     f"{n_unexpl} ridge point(s) match no predicted line; those that form lines are "
                     "listed in the next table.</p>")
            if below:
                intro += (f"<p>Below two bins of the order map (order {float(ident.min_order):.3g}) "
                          "a line is not resolved from its neighbours and DC, so it is neither matched "
                          f"nor given an amplitude: {esc(', '.join(below))}. A longer block (more "
                          "revolutions per block) resolves them.</p>")
            run_sections.append(sub("identification", intro + table_html(
                ident.table, _IDENT_COLUMNS, css_class="identification",
                caption="Identified lines (aliases first, then by amplitude)",
                empty="no ridge matched a predicted line")))
        any_ident = any_ident or ident is not None
        if unmatched is not None:
            what = ("match no predicted line" if ident is not None else
                    "were measured (no machine file, so nothing was predicted)")
            um_intro = (f"<p>Lines of the order map that {what}: an <b>order</b> line keeps its "
                        "order as the speed changes (its frequency moves with speed); a <b>fixed</b> "
                        "line keeps its frequency (a resonance, an electrical line, a neighbouring "
                        "machine); <b>unclear</b>: seen over less than 10 % of speed. Tags U1, U2, "
                        "... are those of the order map.</p>")
            run_sections.append(sub("unmatched", um_intro + table_html(
                unmatched, _UNMATCHED_COLUMNS, css_class="unmatched",
                caption="Measured lines no prediction explains (strongest first)",
                empty="every measured line is explained by a predicted line")))

    if len(chans) == 1:
        channel_parts(chans[0], "")
    else:
        for k, ch in enumerate(chans, start=1):
            start = len(run_sections)
            channel_parts(ch, f"-ch{k}")
            inner = "\n".join(run_sections[start:])
            del run_sections[start:]
            label = f"{ch.channel} ({ch.unit})" if ch.unit else str(ch.channel)
            run_sections.append(f'<section id="channel-{k}" class="channel"><h3>Channel '
                                f"{esc(label)}</h3>\n{inner}\n</section>")
    if criticals is not None:
        run_sections.append(_criticals_section(criticals, sections))
    aliases = tuple(dict.fromkeys(aliases)) if any_ident else None
    html_run = (f'<section id="run"><h2>{esc(SECTION_TITLES["run"])}</h2>\n{head}\n'
                + "\n".join(run_sections) + "\n</section>")
    return html_run, aliases


_CUT_COLUMNS = (
    Column("order", "order", _order_text, numeric=True),
    Column("bandwidth_orders", "band (orders)", general(3), numeric=True),
    Column("line", "predicted direct line at this order"),
    Column("amplitude_max", "largest amplitude", general(4), numeric=True),
    Column("rpm_at_max", "at (rpm)", fixed(0), numeric=True),
)


def _cut_records(cuts, lines, res):
    recs = []
    for c in cuts:
        amp = np.asarray(c.amplitude, dtype=float)
        ok = np.isfinite(amp)
        k = int(np.argmax(np.where(ok, amp, -np.inf))) if ok.any() else None
        recs.append({
            "order": float(c.order), "bandwidth_orders": float(c.bandwidth_orders),
            "line": _nearest_direct(float(c.order), lines, max(2 * res, 0.02)),
            "amplitude_max": None if k is None else float(amp[k]),
            "rpm_at_max": None if k is None else float(np.asarray(c.rpm)[k]),
        })
    return recs


def _lib_versions():
    out = []
    for name in ("scipy", "pandas", "matplotlib"):
        mod = sys.modules.get(name)
        if mod is not None:
            out.append((name, getattr(mod, "__version__", "?")))
    return out


def _close(fig):
    fig.clear()


def _utc_text(value) -> str:
    if value is None:
        value = datetime.now(timezone.utc)
    if isinstance(value, datetime):
        if value.tzinfo is None:
            raise InputError("created_utc: give a time zone aware datetime (or an ISO 8601 text)")
        return value.astimezone(timezone.utc).replace(microsecond=0).isoformat().replace("+00:00", "Z")
    return str(value)


# --------------------------------------------------------------------------------------------
# files


def _run_criticals(run_path, machine, settings):
    """Order tracks (orders 1 and 2) and criticals of the run, with the run's speed options."""
    from workbench.runs.analysis import SPEED_OPTIONS
    from workbench.runs.criticals import run_criticals

    keep = {k: v for k, v in settings.items() if k in SPEED_OPTIONS or k in ("channel", "rate_hz")}
    if settings.get("channels") is not None:
        keep["channel"] = settings["channels"]
    return run_criticals(run_path, machine=machine, **keep)


def write_report(machine_path, plan_path, run_path=None, *, out, force=False, track_options=None,
                 analysis=None, progress=None, display=None, meta=()) -> Report:
    """Read the inputs, track the run (when given), build the report and write it to ``out``.

    Parameters
    ----------
    machine_path, plan_path : path-like
        Machine file and plan file (TOML).
    run_path : path-like, optional
        A recorded run; tracked with :func:`workbench.runs.analysis.track_run` using the
        plan's angle-domain settings (samples per rev, revs per block) unless
        ``track_options`` gives them, and with order cuts at :func:`default_cut_orders`.
    out : path-like
        Output ``.html`` file; written under a temporary name and renamed into place.
    force : bool
        Replace an existing ``out``.
    track_options : mapping, optional
        Keyword options of ``track_run`` (``channel``, ``tacho``, ``rpm``, ...).
    analysis : RunAnalysis, optional
        The run already tracked (it is then not tracked again; ``track_options`` are only
        shown).
    progress : callable, optional
        Called with a short text as each part is built.
    display : mapping, optional
        How the run's results are shown (see :func:`build_report`).
    meta : sequence of (str, str)
        Test metadata added to or overriding the run sidecar's (``("operator", "A. Test")``,
        ``("vibration.position", "motor DE")``); see :mod:`workbench.runs.metadata`.

    Returns
    -------
    Report

    Raises
    ------
    OutputExistsError
        ``out`` exists and ``force`` is false (checked before any work is done).
    """
    from workbench.machine import read_machine
    from workbench.runs import atomic_output, check_writable
    from workbench.sampling import angle_settings, read_plan

    out = Path(out)
    if out.suffix.lower() not in (".html", ".htm"):
        raise InputError(f"--out {out}: the report is one HTML file; give a name ending in .html")
    check_writable(out, force=force)
    machine = read_machine(machine_path)
    plan = read_plan(plan_path)
    plan.check_against(machine.lines())
    inputs = [InputFile.of("machine", machine_path), InputFile.of("plan", plan_path)]
    from workbench.runs import TestMetadata, run_metadata

    metadata = run_metadata(run_path) if run_path is not None else TestMetadata()
    channels = ()
    if run_path is not None:
        from workbench.runs import read_sidecar, sidecar_path as _side

        if _side(run_path).is_file():
            channels = tuple(c.name for c in read_sidecar(_side(run_path)).channels)
    metadata = metadata.with_overrides(meta, channels=channels)
    settings = None
    crit = None
    if analysis is not None and run_path is None:
        raise InputError("an analysis was given without the run file it was made from")
    if run_path is not None:
        from workbench.runs import sidecar_path
        from workbench.runs.analysis import track_channels

        inputs.append(InputFile.of("run", run_path))
        side = sidecar_path(run_path)
        if side.is_file():
            inputs.append(InputFile.of("run sidecar", side))
        from workbench.runs.settings import TrackingSettings

        options = dict(track_options or {})
        keep = {k: options.pop(k) for k in ("channels", "channel", "rate_hz") if k in options}
        if analysis is not None:
            first = getattr(analysis, "first", analysis)
            st = first.settings if getattr(first, "settings", None) is not None else \
                TrackingSettings.for_plan(machine, plan, **{
                    **options, "samples_per_rev": first.samples_per_rev,
                    "revs_per_block": first.revs_per_block})
        else:
            st = TrackingSettings.for_plan(machine, plan, **options)
            if progress:
                progress(f"tracking {run_path}")
            multi = track_channels(run_path, machine=machine, plan=plan, settings=st,
                                   channels=keep.get("channels", keep.get("channel")),
                                   rate_hz=keep.get("rate_hz"))
            analysis = multi.channels[0] if len(multi) == 1 else multi
            st = multi.channels[0].settings
            from workbench.runs.tacho_checks import warn_tacho

            warn_tacho(run_path, multi.channels[0], {**st.speed_options, **keep}, plan=plan)
        # the settings table: the settings the run was tracked with (cut orders as cut)
        shown = st.to_dict()
        for k in ("aa_filter", "rf_map", "threads") + (() if st.integrate else ("integrate_from_hz",)):
            shown.pop(k, None)
        settings = {**keep, **shown}
        settings["cut_orders"] = tuple(st.cut_orders)
        if progress:
            progress("order tracks with phase and critical speeds")
        crit = _run_criticals(run_path, machine, settings)
    report = build_report(machine, plan, analysis=analysis, inputs=inputs, track_settings=settings,
                          progress=progress, criticals=crit, display=display,
                          metadata=metadata)
    with atomic_output(out, force=force) as tmp:
        Path(tmp).write_text(report.html, encoding="utf-8")
    return report
