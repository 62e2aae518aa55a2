"""Track many runs with the same settings, serially or on a Dask cluster.

Each run is one task: the worker gets the run's *path* (never its samples), reads it, tracks
its channels (one or several, against one speed) with
:func:`workbench.runs.analysis.track_channels`, writes each channel's order spectrum, order
cuts, unmatched lines and overall level as CSV files and its maps as data into the output
folder, and returns one summary row per channel.  The client collects the rows
into ``summary.parquet`` and ``summary.csv`` (written under temporary names and renamed into
place, again every few seconds while the batch runs, so an interrupted batch keeps what it
finished).

Resuming: a run whose file content (SHA-256), sidecar content and settings are already in the
summary with status ``ok`` (and whose spectrum file is still there) is skipped.  A run that
fails is listed with status ``error`` and its message; it does not stop the batch.

Serial mode (``workers=0``) runs the very same per-run function in this process, without Dask.
"""

from __future__ import annotations

import hashlib
import json
import math
import os
import time
import uuid
import warnings
from dataclasses import dataclass, field
from functools import lru_cache
from pathlib import Path

import numpy as np
import pandas as pd

from workbench.errors import FoldlineError, FoldlineWarning, InputError
from workbench.fileio import file_sha256

__all__ = [
    "BatchSettings",
    "BatchResult",
    "process_run",
    "run_batch",
    "read_summary",
    "file_sha256",
    "SUMMARY_NAME",
    "BASE_COLUMNS",
    "TAIL_COLUMNS",
    "LEVEL_PREFIX",
    "PASS_PREFIX",
    "WORST_PREFIX",
    "META_COLUMNS",
]

SUMMARY_NAME = "summary"
#: Column-name prefix of the per-band levels: ``"level: <band name>"``.
LEVEL_PREFIX = "level: "
#: Summary columns before the band levels, then :data:`TAIL_COLUMNS` after them.
BASE_COLUMNS = ("file", "channel", "sha256", "sidecar_sha256", "settings", "status", "error",
                "rpm_min", "rpm_max", "duration_s", "revolutions")
#: Column-name prefixes of the acceptance limits (plan ``[[limit]]``): ``"pass: <limit>"``
#: (True, False, or empty when the limit could not be judged) and ``"worst: <limit>"`` (the
#: worst level inside the limit's speed range, in the limit's measure).
PASS_PREFIX = "pass: "
WORST_PREFIX = "worst: "
#: Test metadata from each run's sidecar (the analysed channel's sensor for the last three).
META_COLUMNS = ("unit_under_test", "serial_number", "test_id", "operator", "date",
                "sensor_position", "sensor_direction", "sensor_type")
TAIL_COLUMNS = ("overall_max", "overall_max_rpm", "top_orders", "aliases", "alias_lines", "warnings", "spectrum_csv", "cuts_csv",
                "seconds")
_WRITE_EVERY_S = 5.0


def _sidecar_sha(path: Path) -> str:
    from workbench.runs import sidecar_path

    side = sidecar_path(path)
    return file_sha256(side) if side.is_file() else ""


@dataclass(frozen=True)
class BatchSettings:
    """What to do with every run of a batch.

    Attributes
    ----------
    track : tuple of (str, value)
        Keyword options of :func:`~workbench.runs.analysis.track_channels` (``channels``:
        one or several channels or ``"all"``; ``tacho``, ``rpm``, ``samples_per_rev``,
        ``threads`` (default 1 per worker), ...), as sorted pairs so the settings are
        hashable.  The frequency map is not computed (``rf_map=False``) unless asked for
        here.
    machine_path, plan_path : str or None
        Machine file (predicted lines, alias identification) and plan file (bands whose level
        is reported).  Read by each worker; must be readable there.
    cut_orders : tuple of float
        Orders whose cuts are written per run.
    n_top : int
        Peaks listed in ``top_orders``.
    """

    track: tuple = ()
    machine_path: str | None = None
    plan_path: str | None = None
    cut_orders: tuple = ()
    n_top: int = 5
    _file_hashes: tuple = field(default=(), repr=False)

    @classmethod
    def make(cls, *, track=None, machine_path=None, plan_path=None, cut_orders=(), n_top=5):
        """Build settings from a mapping of ``track_run`` options; checks the files exist."""
        opts = dict(track or {})
        if "channel" in opts:               # one channel, as track_run names it
            one = opts.pop("channel")
            opts.setdefault("channels", None if one is None else (one,))
        for bad in ("machine", "cut_orders", "progress"):
            if bad in opts:
                raise InputError(f"track option {bad!r}: give it as a batch setting, not a "
                                 "track option")
        hashes = []
        for role, p in (("machine", machine_path), ("plan", plan_path)):
            if p is not None:
                if not Path(p).is_file():
                    raise InputError(f"--{role} {p}: no such file")
                hashes.append((role, file_sha256(p)))
        if opts.get("speed_table") is not None:
            table = Path(opts["speed_table"])
            if not table.is_file():
                raise InputError(f"--speed-table {table}: no such file")
            hashes.append(("speed table", file_sha256(table)))
        if plan_path is not None:
            # Read both here, once, so that a bad file stops the batch before any run starts.
            plan = _plan(str(plan_path), dict(hashes)["plan"])
            if machine_path is not None:
                plan.check_against(_machine(str(machine_path), dict(hashes)["machine"]).lines())
            else:
                moving = [b.name for b in plan.bands if b.kind == "around"]
                if moving:
                    raise InputError(f"--plan {plan_path}: band {moving[0]!r} follows a machine "
                                     "line; give --machine so that its frequency is known")
        n_top = int(n_top)
        if n_top < 1:
            raise InputError(f"--top {n_top}: must be at least 1 (peaks listed per run)")
        return cls(
            track=tuple(sorted((str(k), _freeze(v)) for k, v in opts.items() if v is not None)),
            machine_path=None if machine_path is None else str(machine_path),
            plan_path=None if plan_path is None else str(plan_path),
            cut_orders=tuple(float(o) for o in cut_orders),
            n_top=n_top,
            _file_hashes=tuple(hashes),
        )

    @property
    def track_options(self) -> dict:
        """The ``track_channels`` options as a dict (``threads`` not included: it does not
        change a result, see :attr:`threads`)."""
        return {k: v for k, v in self.track if k != "threads"}

    @property
    def threads(self) -> int:
        """Threads each run is tracked with (default 1: the workers already share the cores)."""
        return int(dict(self.track).get("threads") or 1)

    @property
    def fingerprint(self) -> str:
        """Short hash of everything that changes a run's results (options and input files)."""
        doc = {
            "track": [[k, v] for k, v in self.track if k != "threads"],
            "cut_orders": list(self.cut_orders),
            "n_top": self.n_top,
            "files": [list(h) for h in self._file_hashes],
        }
        text = json.dumps(doc, sort_keys=True, default=str)
        return hashlib.sha256(text.encode("utf-8")).hexdigest()[:16]


def _freeze(v):
    if isinstance(v, list):
        return tuple(_freeze(x) for x in v)
    if isinstance(v, Path):
        return str(v)
    return v


@lru_cache(maxsize=8)
def _machine(path: str, sha: str):
    from workbench.machine import read_machine

    return read_machine(path)


@lru_cache(maxsize=8)
def _plan(path: str, sha: str):
    from workbench.sampling import read_plan

    return read_plan(path)


def _file_tag(path: Path, sha256: str, channel: str | None = None) -> str:
    """``<stem>_<sha8>`` (and ``_<channel>`` with several channels): the start of each file
    name a run writes."""
    import re

    tag = f"{path.stem}_{sha256[:8]}"
    if channel is not None:   # several channels per run: the channel's name in each file's name
        tag += "_" + (re.sub(r"[^A-Za-z0-9._-]", "_", channel) or "channel")
    return tag


def _output_names(path: Path, sha256: str, out_dir: Path, channel: str | None = None
                  ) -> tuple[Path, Path]:
    tag = _file_tag(path, sha256, channel)
    return out_dir / f"{tag}_spectrum.csv", out_dir / f"{tag}_cuts.csv"


def _top_orders(peaks, n: int) -> str:
    if peaks is None or not len(peaks):
        return ""
    top = peaks.sort_values("amplitude", ascending=False).head(n)
    return ";".join(f"{float(o):.2f}:{float(a):.3g}" for o, a in zip(top["order"], top["amplitude"]))


def _write_csv(frame: pd.DataFrame, path: Path) -> None:
    from workbench.runs import atomic_output

    with atomic_output(path, force=True) as tmp:
        frame.to_csv(tmp, index=False)


def process_run(path, settings: BatchSettings, out_dir, *, skip=frozenset()) -> list:
    """Track one run (every channel the settings ask for) and write each channel's spectrum
    and cuts; return the summary rows, one per channel.

    This is the function each Dask task runs (and the serial mode calls).  It hashes the run
    first (on the worker, so hashing is spread over the cluster too) and returns at once when
    the run is among ``skip``.  It never raises for a bad run: the (single) row then has
    status ``"error"`` and the message.

    Parameters
    ----------
    path : str or Path
        The run file (readable where this runs).
    settings : BatchSettings
    out_dir : str or Path
        Folder for ``<stem>_<sha8>_spectrum.csv`` (columns ``order, amplitude``),
        ``<stem>_<sha8>_cuts.csv`` (columns ``order, bandwidth_orders, rpm, amplitude``),
        ``..._unmatched.csv``, ``..._overall_level.csv`` (when the run is long enough) and the
        maps as data (``..._order_map.npz`` and, when computed, ``..._frequency_map.npz``; the
        ``.parquet`` of each with pyarrow), as ``foldline track --out`` writes them
        (``docs/outputs.md``); with several channels ``<stem>_<sha8>_<channel>_...``.
    skip : set of (str, str, str)
        Keys ``(sha256, sidecar_sha256, settings fingerprint)`` of runs already done; such a
        run gets one row with status ``"skipped"`` and is not tracked.

    Returns
    -------
    list of dict
        Summary rows: :data:`BASE_COLUMNS`, ``level: <band>`` per plan band,
        :data:`TAIL_COLUMNS`; one per channel tracked.
    """
    t0 = time.perf_counter()
    path = Path(path)
    out_dir = Path(out_dir)
    row = {"file": str(path), "channel": "", "sha256": "", "sidecar_sha256": "",
           "settings": settings.fingerprint, "status": "error", "error": ""}
    caught = []
    rows = [row]
    try:
        try:
            row["sha256"] = file_sha256(path)
        except OSError as exc:
            raise InputError(f"{path}: {exc.strerror or type(exc).__name__}") from None
        row["sidecar_sha256"] = _sidecar_sha(path)
        if _key(row) in skip:
            row["status"] = "skipped"
            return rows
        hashes = dict(settings._file_hashes)
        machine = None if settings.machine_path is None else _machine(settings.machine_path, hashes["machine"])
        plan = None if settings.plan_path is None else _plan(settings.plan_path, hashes["plan"])
        lines = () if machine is None else machine.lines()
        from workbench.runs.analysis import track_channels

        with warnings.catch_warnings(record=True) as caught:
            warnings.simplefilter("always", FoldlineWarning)
            options = {"rf_map": False, **settings.track_options}
            multi = track_channels(path, machine=machine, cut_orders=settings.cut_orders,
                                   threads=settings.threads, **options)
        rows = [_channel_row(dict(row), analysis, path, out_dir, settings, plan, lines,
                             tagged=len(multi) > 1)
                for analysis in multi.channels]
    except Exception as exc:  # one bad run must not stop the batch: report it in its row
        rows = [row]
        row["status"] = "error"
        row["error"] = str(exc) if isinstance(exc, FoldlineError) else f"{type(exc).__name__}: {exc}"
    warned = " | ".join(dict.fromkeys(str(w.message) for w in caught))
    seconds = time.perf_counter() - t0
    for r in rows:
        r["warnings"] = warned
        r["seconds"] = seconds / len(rows)
    return rows


def _channel_row(row, analysis, path, out_dir, settings, plan, lines, *, tagged) -> dict:
    """Write one channel's spectrum and cuts; its summary row."""
    row["channel"] = str(analysis.channel)
    spec_path, cuts_path = _output_names(path, row["sha256"], out_dir,
                                         analysis.channel if tagged else None)
    spectrum = pd.DataFrame({"order": np.asarray(analysis.spectrum.order, dtype=float),
                             "amplitude": np.asarray(analysis.spectrum.amplitude, dtype=float)})
    _write_csv(spectrum, spec_path)
    cut_frames = [
        pd.DataFrame({"order": float(c.order), "bandwidth_orders": float(c.bandwidth_orders),
                      "rpm": np.asarray(c.rpm, dtype=float),
                      "amplitude": np.asarray(c.amplitude, dtype=float)})
        for c in analysis.cuts
    ]
    cuts = (pd.concat(cut_frames, ignore_index=True) if cut_frames else
            pd.DataFrame(columns=["order", "bandwidth_orders", "rpm", "amplitude"]))
    _write_csv(cuts, cuts_path)
    # what `foldline track --out` writes besides: the unmatched lines, the overall level and
    # the maps as data (the same writers, so the files read the same)
    from workbench.runs.mapdata import write_map_files

    tag = _file_tag(path, row["sha256"], analysis.channel if tagged else None)
    if analysis.unmatched is not None:
        _write_csv(analysis.unmatched, out_dir / f"{tag}_unmatched.csv")
    if analysis.overall is not None:
        _write_csv(analysis.overall.to_frame(), out_dir / f"{tag}_overall_level.csv")
        row["overall_max"], row["overall_max_rpm"] = analysis.overall.maximum()
    write_map_files(analysis, out_dir, prefix=f"{tag}_", force=True)
    sa = analysis.shaft_angle
    row.update({"status": "ok", "rpm_min": float(sa.rpm_min), "rpm_max": float(sa.rpm_max),
                "duration_s": float(analysis.duration_s), "revolutions": float(sa.revolutions)})
    if plan is not None:
        from workbench.runs.levels import band_levels

        for name, level in band_levels(analysis.order_map, plan.bands, lines).items():
            row[LEVEL_PREFIX + name] = level
        row.update(_limit_cells(analysis, plan, lines))
    row.update(_meta_cells(path, analysis.channel))
    row["top_orders"] = _top_orders(analysis.peaks, settings.n_top)
    ident = analysis.identification
    if ident is not None:
        names = list(dict.fromkeys(str(n) for n in ident.aliases["line"]))
        row["aliases"] = len(names)
        row["alias_lines"] = "; ".join(names)
    row["spectrum_csv"] = spec_path.name
    row["cuts_csv"] = cuts_path.name
    return row


def _limit_cells(analysis, plan, lines) -> dict:
    """``pass: <limit>`` and ``worst: <limit>`` of every plan limit judged on the run."""
    from workbench.runs.limits import evaluate_limits

    cells = {}
    for r in evaluate_limits(analysis, plan.limits, bands=plan.bands, lines=lines):
        cells[WORST_PREFIX + r.name] = r.worst
        cells[PASS_PREFIX + r.name] = r.passed
    return cells


def _meta_cells(path: Path, channel) -> dict:
    """The run's test metadata (sidecar) and the analysed channel's sensor."""
    from workbench.runs import run_metadata

    meta = run_metadata(path)
    sensor = meta.sensor(str(channel))
    cells = {k: getattr(meta, k) for k in META_COLUMNS[:5]}
    cells.update(sensor_position=sensor.position, sensor_direction=sensor.direction,
                 sensor_type=sensor.sensor_type)
    return cells


# --------------------------------------------------------------------------------------------
# the summary table


def _order_columns(columns) -> list:
    levels = [c for c in columns if str(c).startswith(LEVEL_PREFIX)]
    limits = [c for c in columns if str(c).startswith((PASS_PREFIX, WORST_PREFIX))]
    meta = [c for c in META_COLUMNS if c in columns]
    known = set(BASE_COLUMNS) | set(TAIL_COLUMNS) | set(levels) | set(limits) | set(meta)
    rest = [c for c in columns if c not in known]
    return list(BASE_COLUMNS) + meta + levels + limits + list(TAIL_COLUMNS) + rest


def _frame(rows) -> pd.DataFrame:
    table = pd.DataFrame(list(rows))
    for c in BASE_COLUMNS + TAIL_COLUMNS:
        if c not in table.columns:
            table[c] = pd.Series([None] * len(table), dtype=object)
    table = table[_order_columns(table.columns)]
    for c in ("rpm_min", "rpm_max", "duration_s", "revolutions", "overall_max", "overall_max_rpm",
              "seconds"):
        table[c] = pd.to_numeric(table[c], errors="coerce").astype(float)
    for c in table.columns:
        if str(c).startswith((LEVEL_PREFIX, WORST_PREFIX)):
            table[c] = pd.to_numeric(table[c], errors="coerce").astype(float)
        elif str(c).startswith(PASS_PREFIX):
            table[c] = table[c].map(_as_pass).astype("boolean")
        elif c in META_COLUMNS:
            table[c] = table[c].astype(object).where(table[c].notna(), "").astype(str)
    table["aliases"] = pd.to_numeric(table["aliases"], errors="coerce").astype("Int64")
    for c in ("file", "channel", "sha256", "sidecar_sha256", "settings", "status", "error", "top_orders",
              "alias_lines", "warnings", "spectrum_csv", "cuts_csv"):
        table[c] = table[c].astype(object).where(table[c].notna(), "").astype(str)
    return table.reset_index(drop=True)


def _as_pass(value):
    """A pass cell read back from Parquet or CSV: True, False or missing (not judged)."""
    if isinstance(value, (bool, np.bool_)):
        return bool(value)
    if isinstance(value, str) and value.strip().lower() in ("true", "false"):
        return value.strip().lower() == "true"
    return pd.NA


def read_summary(out_dir) -> pd.DataFrame | None:
    """The summary table in ``out_dir`` (Parquet, else CSV), or None when there is none.

    Raises
    ------
    InputError
        A summary file exists but cannot be read.
    """
    out_dir = Path(out_dir)
    pq = out_dir / f"{SUMMARY_NAME}.parquet"
    csv = out_dir / f"{SUMMARY_NAME}.csv"
    try:
        if pq.is_file():
            return _frame(pd.read_parquet(pq).to_dict("records"))
        if csv.is_file():
            return _frame(pd.read_csv(csv, keep_default_na=False,
                                      dtype={"sha256": str, "sidecar_sha256": str,
                                             "settings": str, "channel": str}).to_dict("records"))
    except Exception as exc:
        raise InputError(f"{pq if pq.is_file() else csv}: the summary of an earlier batch cannot "
                         f"be read ({type(exc).__name__}: {exc}); move it away or choose another "
                         "--out folder") from None
    return None


def _write_summary(table: pd.DataFrame, out_dir: Path) -> tuple[Path, Path]:
    from workbench.runs import atomic_output

    pq = out_dir / f"{SUMMARY_NAME}.parquet"
    csv = out_dir / f"{SUMMARY_NAME}.csv"
    with atomic_output(pq, force=True) as tmp:
        table.to_parquet(tmp, index=False, engine="pyarrow")
    with atomic_output(csv, force=True) as tmp:
        table.to_csv(tmp, index=False)
    return pq, csv


# --------------------------------------------------------------------------------------------
# the batch


@dataclass(frozen=True)
class BatchResult:
    """What a batch did.

    Attributes
    ----------
    summary : pandas.DataFrame
        The whole summary table as written (earlier rows kept, new rows after them): one row
        per run and channel.
    done : tuple of str
        Runs tracked now with status ok.
    skipped : tuple of str
        Runs skipped because the summary already had them (same content and settings, ok).
    failed : tuple of (str, str)
        Runs that failed now, with the message.
    seconds : float
        Wall time of the batch, cluster start included.
    workers : int
        Workers of the cluster used (0: serial in this process, or nothing left to do).
    scheduler : str or None
        Address of the scheduler used (None: serial).
    summary_parquet, summary_csv : Path
    """

    summary: pd.DataFrame
    done: tuple
    skipped: tuple
    failed: tuple
    seconds: float
    workers: int
    scheduler: str | None
    summary_parquet: Path
    summary_csv: Path

    @property
    def runs_per_minute(self) -> float:
        """Runs tracked now (ok or failed) per minute of wall time."""
        n = len(self.done) + len(self.failed)
        return 60.0 * n / self.seconds if self.seconds > 0 else math.nan

    def to_dict(self) -> dict:
        """The JSON of ``foldline batch``."""
        return {
            "summary_parquet": str(self.summary_parquet),
            "summary_csv": str(self.summary_csv),
            "runs": len(self.done) + len(self.skipped) + len(self.failed),
            "done": list(self.done),
            "skipped": list(self.skipped),
            "failed": [{"file": f, "error": e} for f, e in self.failed],
            "seconds": self.seconds,
            "runs_per_minute": self.runs_per_minute,
            "workers": self.workers,
            "scheduler": self.scheduler,
        }


def _key(row) -> tuple:
    return (str(row["sha256"]), str(row["sidecar_sha256"]), str(row["settings"]))


def run_batch(paths, out_dir, *, settings: BatchSettings, workers: int = 2, scheduler=None,
              progress=None, timeout_s: float = 20.0) -> BatchResult:
    """Track every run in ``paths`` with the same settings and write the summary.

    Parameters
    ----------
    paths : sequence of path-like
        Run files.  With a cluster they must be readable, under the same path, on every worker.
    out_dir : path-like
        Output folder (created when missing); holds the per-run CSV files and the summary.
    settings : BatchSettings
    workers : int
        Worker processes of a local Dask cluster (``LocalCluster(n_workers=workers,
        threads_per_worker=1, processes=True)``); 0 runs serially in this process, without
        Dask.  Ignored when ``scheduler`` is given.
    scheduler : str, optional
        Address of a running Dask scheduler (e.g. ``"tcp://host:8786"``) to use instead of a
        local cluster.
    progress : callable, optional
        Called as ``progress(finished, total, skipped, failed)`` at the start and after each run.
    timeout_s : float
        How long to wait for ``scheduler`` to answer, s.

    Returns
    -------
    BatchResult

    Notes
    -----
    Each task hashes its run and skips it when the summary already holds the same file
    content, sidecar content and settings with status ``ok`` (and its spectrum file is still
    there); the rows of earlier batches are kept, new rows follow them in the order given.
    """
    t0 = time.perf_counter()
    paths = [Path(p) for p in paths]
    if not paths:
        raise InputError("no runs given: name one or more run files")
    workers = int(workers)
    if workers < 0:
        raise InputError(f"--workers {workers}: give 0 (serial, no Dask) or a positive number")
    out_dir = Path(out_dir)
    if out_dir.exists() and not out_dir.is_dir():
        raise InputError(f"--out {out_dir}: exists and is not a folder")
    out_dir.mkdir(parents=True, exist_ok=True)
    earlier = read_summary(out_dir)
    earlier_rows = [] if earlier is None else earlier.to_dict("records")
    skip = frozenset(
        _key(r) for r in earlier_rows
        if r["status"] == "ok" and r["spectrum_csv"] and (out_dir / r["spectrum_csv"]).is_file()
    )
    jobs, seen = [], set()
    for i, p in enumerate(paths):
        if os.path.abspath(p) not in seen:
            seen.add(os.path.abspath(p))
            jobs.append((i, p))
    total = len(jobs)
    new_rows, skipped = {}, {}
    count = {"finished": 0, "failed": 0}
    say = progress or (lambda *a: None)
    say(0, total, 0, 0)
    last_write = [time.monotonic()]

    def table_now():
        redo = {_key(r) for rs in new_rows.values() for r in rs}
        rows = [r for r in earlier_rows if _key(r) not in redo]
        rows += [r for i in sorted(new_rows) for r in new_rows[i]]
        return _frame(rows)

    def finished_one(i, rows):
        count["finished"] += 1
        row = rows[0]
        if row["status"] == "skipped":
            skipped[i] = row["file"]
        else:
            new_rows[i] = rows
            if row["status"] != "ok":
                count["failed"] += 1
        say(count["finished"], total, len(skipped), count["failed"])
        if row["status"] != "skipped" and time.monotonic() - last_write[0] > _WRITE_EVERY_S:
            _write_summary(table_now(), out_dir)
            last_write[0] = time.monotonic()

    if scheduler is None and workers == 0:
        address, n_workers = None, 0
        for i, p in jobs:
            finished_one(i, process_run(p, settings, out_dir, skip=skip))
    else:
        address, n_workers = _run_on_dask(jobs, settings, out_dir, skip, workers, scheduler,
                                          finished_one, timeout_s)
    table = table_now()
    pq, csv = _write_summary(table, out_dir)
    return BatchResult(
        summary=table,
        done=tuple(rs[0]["file"] for i, rs in sorted(new_rows.items()) if rs[0]["status"] == "ok"),
        skipped=tuple(f for i, f in sorted(skipped.items())),
        failed=tuple((rs[0]["file"], rs[0]["error"]) for i, rs in sorted(new_rows.items())
                     if rs[0]["status"] != "ok"),
        seconds=time.perf_counter() - t0,
        workers=n_workers,
        scheduler=address,
        summary_parquet=pq,
        summary_csv=csv,
    )


def _run_on_dask(jobs, settings, out_dir, skip, workers, scheduler, finished_one, timeout_s):
    """Submit one task per run (paths only) and collect the rows as they finish."""
    import logging

    from distributed import Client, LocalCluster, as_completed

    cluster = None
    if scheduler is not None:
        try:
            client = Client(scheduler, timeout=f"{float(timeout_s)}s")
        except (OSError, TimeoutError) as exc:
            raise InputError(f"--scheduler {scheduler}: no Dask scheduler answers there ({exc}); "
                             "start one with 'dask scheduler' and workers with "
                             "'dask worker ADDRESS'") from None
    else:
        if workers < 1:
            raise InputError(f"--workers {workers}: a local cluster needs at least 1 worker")
        cluster = LocalCluster(n_workers=workers, threads_per_worker=1, processes=True,
                               dashboard_address=None, silence_logs=logging.ERROR)
        client = Client(cluster)
    try:
        address = client.scheduler.address
        n_workers = len(client.scheduler_info().get("workers", {}))
        # The set of finished runs goes to each worker once, not with every task.
        skip_on_workers = client.scatter([skip], broadcast=True)[0] if skip else frozenset()
        futures = {}
        for i, p in jobs:
            fut = client.submit(process_run, str(p), settings, str(out_dir), skip=skip_on_workers,
                                pure=False, key=f"foldline-track-{i}-{uuid.uuid4().hex[:12]}")
            futures[fut] = (i, p)
        for fut in as_completed(futures):
            i, p = futures[fut]
            try:
                rows = fut.result()
            except Exception as exc:  # the worker died or the task could not run
                rows = [_frame([{"file": str(p), "settings": settings.fingerprint, "status": "error",
                                 "error": f"{type(exc).__name__}: {exc}"}]).iloc[0].to_dict()]
            finished_one(i, rows)
        return address, n_workers
    finally:
        client.close()
        if cluster is not None:
            cluster.close()
