"""Run against run: order cuts, order spectra and overall levels of several tracked runs of the
same machine, aligned on speed.

Runs of one machine (a run-up against its coast-down, before against after a repair) are
recorded at different times and speeds; what is compared is the level at the same shaft speed.
Each run's cuts and overall level are interpolated (linearly in amplitude) onto one rpm grid
spanning the speeds all runs cover; outside a run's own speed range its values are NaN, never
extrapolated.  Order spectra are compared on the first run's order axis.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from pathlib import Path

import numpy as np
import pandas as pd

from workbench.errors import InputError
from workbench.checks import FieldError

__all__ = ["RunComparison", "compare_runs", "run_direction"]


def run_direction(analysis) -> str:
    """``"run-up"``, ``"coast-down"`` or ``"steady"`` from the speed at the record's ends."""
    sa = analysis.shaft_angle
    t0, t1 = float(sa.t_start_s), float(sa.t_end_s)
    r0, r1 = (float(v) for v in sa.rpm_at(np.array([t0 + 1e-6 * (t1 - t0), t1 - 1e-6 * (t1 - t0)])))
    if abs(r1 - r0) < 0.02 * max(abs(r0), abs(r1), 1e-9):
        return "steady"
    return "run-up" if r1 > r0 else "coast-down"


def _on_grid(rpm, values, grid):
    rpm = np.asarray(rpm, dtype=float)
    values = np.asarray(values, dtype=float)
    ok = np.isfinite(rpm) & np.isfinite(values)
    if ok.sum() < 2:
        return np.full(grid.shape, np.nan)
    k = np.argsort(rpm[ok])
    r, v = rpm[ok][k], values[ok][k]
    out = np.interp(grid, r, v)
    out[(grid < r[0]) | (grid > r[-1])] = np.nan
    return out


@dataclass(frozen=True, eq=False)
class RunComparison:
    """Several runs aligned on speed.

    Attributes
    ----------
    labels : tuple of str
        One per run.
    runs : pandas.DataFrame
        ``label, file, direction, rpm_min, rpm_max, unit``.
    rpm : ndarray, shape (G,)
        Common speed grid, rpm.
    cuts : dict
        order -> array (n_runs, G) of cut amplitudes (NaN outside a run's speeds).
    overall : ndarray, shape (n_runs, G) or None
        Overall RMS on the grid.
    order : ndarray, shape (K,)
        Order axis of the spectra (the first run's).
    spectra : ndarray, shape (n_runs, K)
    unit : str
    """

    labels: tuple
    runs: pd.DataFrame
    rpm: np.ndarray
    cuts: dict
    overall: np.ndarray | None
    order: np.ndarray
    spectra: np.ndarray
    unit: str = ""
    notes: tuple = field(default_factory=tuple)

    def changes(self) -> pd.DataFrame:
        """Largest change of each cut against the first run, dB: ``order, label, change_db, at_rpm``."""
        rows = []
        for order, a in self.cuts.items():
            ref = a[0]
            for i in range(1, len(self.labels)):
                with np.errstate(divide="ignore", invalid="ignore"):
                    d = 20 * np.log10(a[i] / ref)
                if not np.isfinite(d).any():
                    continue
                k = int(np.nanargmax(np.abs(d)))
                rows.append({"order": float(order), "label": self.labels[i], "change_db": float(d[k]),
                             "at_rpm": float(self.rpm[k])})
        return pd.DataFrame(rows, columns=["order", "label", "change_db", "at_rpm"])

    def to_dict(self) -> dict:
        """JSON form (NaN as None)."""
        def arr(v):
            return [None if not np.isfinite(x) else float(x) for x in np.asarray(v, dtype=float)]

        out = {
            "runs": [{k: (v if not isinstance(v, float) else float(v)) for k, v in r.items()}
                     for r in self.runs.to_dict("records")],
            "unit": self.unit,
            "rpm": arr(self.rpm),
            "cuts": [{"order": float(o), "amplitude": {lab: arr(a[i]) for i, lab in enumerate(self.labels)}}
                     for o, a in self.cuts.items()],
            "order_spectra": {"order": arr(self.order),
                              "amplitude": {lab: arr(self.spectra[i]) for i, lab in enumerate(self.labels)}},
            "changes": self.changes().to_dict("records"),
        }
        if self.overall is not None:
            out["overall"] = {lab: arr(self.overall[i]) for i, lab in enumerate(self.labels)}
        if self.notes:
            out["notes"] = list(self.notes)
        return out


def compare_runs(analyses, *, labels=None, n_grid=400) -> RunComparison:
    """Align tracked runs on speed.

    Parameters
    ----------
    analyses : sequence of RunAnalysis
        Two or more runs tracked with the same settings (same cut orders).
    labels : sequence of str, optional
        One per run (default: the file names).
    n_grid : int
        Points of the common rpm grid.

    Returns
    -------
    RunComparison
        The grid spans the speeds every run covers when they overlap, else all their speeds
        (a note says so).
    """
    analyses = list(analyses)
    if len(analyses) < 2:
        raise InputError("compare: give at least two runs")
    if labels is None:
        labels = [Path(str(a.source)).name for a in analyses]
        if len(set(labels)) < len(labels):
            labels = [f"{i + 1}: {lab}" for i, lab in enumerate(labels)]
    labels = tuple(str(v) for v in labels)
    if len(labels) != len(analyses) or len(set(labels)) != len(labels):
        raise FieldError(None, "labels", f"give {len(analyses)} different labels, one per run",
                         value=list(labels))
    units = {a.unit for a in analyses}
    notes = []
    if len(units) > 1:
        notes.append(f"the runs have different units ({', '.join(sorted(units))}); levels are not comparable")
    lo = max(a.rpm_min for a in analyses)
    hi = min(a.rpm_max for a in analyses)
    if not lo < hi:
        lo, hi = min(a.rpm_min for a in analyses), max(a.rpm_max for a in analyses)
        notes.append("the runs share no speed range; each is shown over its own speeds")
    grid = np.linspace(lo, hi, int(n_grid))
    orders = [float(c.order) for c in analyses[0].cuts]
    cuts = {}
    for o in orders:
        rows = []
        for a in analyses:
            match = [c for c in a.cuts if abs(float(c.order) - o) < 1e-9]
            rows.append(_on_grid(match[0].rpm, match[0].amplitude, grid) if match else np.full(grid.shape, np.nan))
        cuts[o] = np.vstack(rows)
    overall = None
    if all(getattr(a, "overall", None) is not None for a in analyses):
        overall = np.vstack([_on_grid(a.overall.rpm, a.overall.rms, grid) for a in analyses])
    order = np.asarray(analyses[0].spectrum.order, dtype=float)
    spectra = np.vstack([np.interp(order, np.asarray(a.spectrum.order, dtype=float),
                                   np.asarray(a.spectrum.amplitude, dtype=float), right=np.nan)
                         for a in analyses])
    runs = pd.DataFrame([{"label": lab, "file": str(a.source), "direction": run_direction(a),
                          "rpm_min": float(a.rpm_min), "rpm_max": float(a.rpm_max), "unit": a.unit}
                         for lab, a in zip(labels, analyses)])
    return RunComparison(labels, runs, grid, cuts, overall, order, spectra, analyses[0].unit, tuple(notes))
