"""Plan file: read, validate and write the TOML description of a test plan.

Plan file (TOML)
----------------
::

    [speed]
    profile = "linear"          # "linear", "exponential" or "table"
    start_rpm = 600
    end_rpm = 3600
    duration_s = 60
    # table = "speed.csv"       # "table" profile only: CSV with columns time_s,rpm

    [acquisition]
    rates_hz = [12800, 25600]   # candidate sample rates
    filter = "butterworth"      # none, ideal, butterworth, bessel, chebyshev1, elliptic,
                                # digital, table (default "none")
    filter_order = 8            # analog kinds
    cutoff = 0.39               # fraction of the rate: analog kinds and "ideal"
    # passband_ripple_db = 0.1  # chebyshev1, elliptic
    # stopband_db = 100         # digital, elliptic
    # passband_edge = 0.45      # digital
    # stopband_edge = 0.55      # digital
    # table = "filter.csv"      # "table" filter: CSV with columns hz,db or fraction,db
    threshold_db = -60          # default -60

    [[band]]
    name = "outer race"
    around = "output NDE bpfo"  # a line of the machine ...
    width_pct = 10              # ... and the band's total width, percent of its frequency
    [[band]]
    name = "envelope band"
    hz = [2000, 5000]           # or orders = [lo, hi]

    [resampling]
    max_order = 50
    order_resolution = 0.05

    [[limit]]                   # acceptance limits, from the user, maker or standard
    name = "outer race band"
    band = "outer race"         # the level of a [[band]] of this plan ...
    max = 2.0                   # ... may not exceed this, in the channel's unit (peak)
    [[limit]]
    name = "mesh order"
    order = 29                  # or one order, summed over a band of
    bandwidth = 0.5             # this many orders (total width)
    max = 0.5
    amplitude = "rms"           # max is RMS (default "peak")
    rpm = [600, 1800]           # only judged between these speeds (default: whole run)

CSV tables are named relative to the plan file's folder and must lie inside it.  Where a plan
comes from a dictionary, ``table`` may also be given inline, as a table of columns
(``{time_s = [...], rpm = [...]}``, ``{hz = [...], db = [...]}``); :func:`plan_to_dict` writes
them that way and :func:`write_plan` writes them to CSV files beside the plan.

Every key is checked: unknown keys, keys that do not apply to the chosen profile or filter,
and values out of range raise :class:`~workbench.errors.PlanFileError` naming the file, the
table or entry, the key, the bad value and what is allowed.
"""

from __future__ import annotations

import json
import math
import tomllib
from pathlib import Path

import numpy as np

from workbench.errors import InputError, OutputExistsError, PlanFileError, where
from workbench.fileio import write_text
from workbench.machine.filekind import wrong_file_hint
from workbench.checks import NO_VALUE, FieldError, describe, is_number, real, real_vector, show
from workbench.sampling._tables import read_numeric_csv
from workbench.sampling.filters import ANALOG_KINDS, FILTER_KINDS, AntiAliasFilter
from workbench.sampling.plan import DEFAULT_THRESHOLD_DB, Band, Limit, Plan, _close
from workbench.sampling.profiles import PROFILE_KINDS, SpeedProfile, read_speed_table

__all__ = ["read_plan", "plan_from_dict", "plan_to_dict", "write_plan"]


# ------------------------------------------------------------------------------------------
# Reading
# ------------------------------------------------------------------------------------------
_SECTIONS = ("speed", "acquisition", "band", "resampling", "limit")
_SPEED_KEYS = ("profile", "start_rpm", "end_rpm", "duration_s", "table")
_ACQ_KEYS = ("rates_hz", "filter", "filter_order", "cutoff", "passband_ripple_db",
             "stopband_db", "passband_edge", "stopband_edge", "table", "threshold_db")
_BAND_KEYS = ("name", "hz", "orders", "around", "width_pct")
_RESAMPLING_KEYS = ("max_order", "order_resolution")
_LIMIT_KEYS = ("name", "band", "order", "bandwidth", "max", "amplitude", "rpm")

# Plan-file key -> AntiAliasFilter field, and which filter kinds use the key.
_FILTER_FIELDS = {"filter_order": "order", "cutoff": "cutoff",
                  "passband_ripple_db": "passband_ripple_db", "stopband_db": "stopband_db",
                  "passband_edge": "passband_edge", "stopband_edge": "stopband_edge"}
_FILTER_USES = {"filter_order": ANALOG_KINDS, "cutoff": ANALOG_KINDS + ("ideal",),
                "passband_ripple_db": ("chebyshev1", "elliptic"),
                "stopband_db": ("digital", "elliptic"), "passband_edge": ("digital",),
                "stopband_edge": ("digital",), "table": ("table",)}
# Object field -> plan-file key, for messages.
_KEY_OF = {"SpeedProfile": {"kind": "profile", "table_time_s": "table", "table_rpm": "table"},
           "AntiAliasFilter": {"kind": "filter", "order": "filter_order",
                               "table_hz_or_fraction": "table", "table_db": "table",
                               "table_units": "table"}}


# Plan field -> its table in the file, for messages.
_PLAN_ENTRY = {"rates_hz": "[acquisition]", "threshold_db": "[acquisition]",
               "max_order": "[resampling]", "order_resolution": "[resampling]"}


class _Reader:
    """Turns one plan dictionary into a Plan, raising PlanFileError with locations."""

    def __init__(self, source: str, base_dir: Path):
        self.source = source
        self.base_dir = base_dir

    def fail(self, entry, key, problem, value=NO_VALUE):
        """Raise ``file: entry: key = value: problem`` (no ``= value`` when none is given)."""
        if key is None:
            raise PlanFileError(f"{where(self.source, entry)}: {problem}")
        raise PlanFileError(f"{where(self.source, entry)}: {describe(str(key), value, problem)}")

    def from_field_error(self, exc: FieldError, entry, prefix=""):
        key = _KEY_OF.get(exc.owner, {}).get(exc.field, exc.field)
        # A table's columns are not written under their own keys: no value to show.
        value = NO_VALUE if key == "table" else exc.value
        self.fail(entry, key, prefix + exc.problem, value)

    def table(self, d, name, required):
        if name not in d:
            if required:
                self.fail(None, f"[{name}]", "this table is required")
            return {}
        value = d[name]
        if not isinstance(value, dict):
            self.fail(None, f"[{name}]", "must be a table of keys", value)
        return value

    def unknown_keys(self, d, allowed, entry):
        for key in d:
            if key not in allowed:
                self.fail(entry, key, f"unknown key{_close(key, allowed)}; allowed keys are "
                          f"{', '.join(allowed)}")

    def number(self, d, key, entry, default=None, **limits):
        if key not in d:
            return default
        try:
            return real("", key, d[key], **limits)
        except FieldError as exc:
            self.fail(entry, key, exc.problem, exc.value)

    def text(self, d, key, entry, default=None):
        if key not in d:
            return default
        value = d[key]
        if not isinstance(value, str):
            self.fail(entry, key, "must be a text in quotes", value)
        return value

    def csv_path(self, value, entry) -> Path:
        if not isinstance(value, str) or not value.strip():
            self.fail(entry, "table", "must name a CSV file (a path relative to the plan's "
                      "folder) or give the columns inline", value)
        base = self.base_dir.resolve()
        path = (base / value).resolve()
        if not path.is_relative_to(base):
            self.fail(entry, "table", f"lies outside the plan's folder {str(base)!r}; put the "
                      "CSV file in that folder (or below it) and name it relative to it", value)
        return path

    def inline_columns(self, value, layouts, entry):
        """Columns given inline as {name = [...], ...}; same layouts as the CSV."""
        keys = tuple(value)
        layout = next((lay for lay in layouts if sorted(lay) == sorted(keys)), None)
        if layout is None:
            expected = " or ".join("{" + ", ".join(lay) + "}" for lay in layouts)
            self.fail(entry, "table", f"inline columns must be {expected}, got "
                      f"{{{', '.join(str(k) for k in keys)}}}")
        try:
            columns = {k: np.asarray(real_vector("", k, value[k], min_len=2)) for k in layout}
        except FieldError as exc:
            self.fail(entry, f"table.{exc.field}", exc.problem, exc.value)
        lengths = {len(c) for c in columns.values()}
        if len(lengths) != 1:
            self.fail(entry, "table", "inline columns must have the same length, got "
                      + ", ".join(f"{k}: {len(c)}" for k, c in columns.items()))
        return layout, columns

    # -- sections -------------------------------------------------------------------------
    def speed(self, d) -> SpeedProfile:
        entry = "[speed]"
        sec = self.table(d, "speed", required=True)
        self.unknown_keys(sec, _SPEED_KEYS, entry)
        if "profile" not in sec:
            self.fail(entry, "profile", f"is required: one of {', '.join(PROFILE_KINDS)}")
        kind = sec["profile"]
        if not isinstance(kind, str) or kind not in PROFILE_KINDS:
            hint = _close(kind, PROFILE_KINDS) if isinstance(kind, str) else ""
            self.fail(entry, "profile", f"must be one of {', '.join(PROFILE_KINDS)}{hint}", kind)
        prefix = ""
        if kind == "table":
            for key in ("start_rpm", "end_rpm", "duration_s"):
                if key in sec:
                    self.fail(entry, key, "is given by the speed table of a 'table' profile "
                              "(remove it)")
            if "table" not in sec:
                self.fail(entry, "table", "is required by profile 'table' (a CSV file with "
                          "columns time_s,rpm)")
            value = sec["table"]
            if isinstance(value, dict):
                _, cols = self.inline_columns(value, (("time_s", "rpm"),), entry)
                time, rpm = cols["time_s"], cols["rpm"]
            else:
                path = self.csv_path(value, entry)
                prefix = f"{value}: "
                try:
                    time, rpm = read_speed_table(path)
                except InputError as exc:
                    self.fail(entry, "table", str(exc))
            args = dict(kind=kind, table_time_s=time, table_rpm=rpm)
        else:
            if "table" in sec:
                self.fail(entry, "table", f"is only used by profile 'table', not {kind!r} "
                          "(remove it)")
            for key in ("start_rpm", "end_rpm", "duration_s"):
                if key not in sec:
                    self.fail(entry, key, f"is required by profile {kind!r}")
            args = dict(kind=kind, start_rpm=sec["start_rpm"], end_rpm=sec["end_rpm"],
                        duration_s=sec["duration_s"])
        try:
            return SpeedProfile(**args)
        except FieldError as exc:
            self.from_field_error(exc, entry, prefix)

    def acquisition(self, d) -> tuple[list, AntiAliasFilter, float]:
        entry = "[acquisition]"
        sec = self.table(d, "acquisition", required=True)
        self.unknown_keys(sec, _ACQ_KEYS, entry)
        if "rates_hz" not in sec:
            self.fail(entry, "rates_hz", "is required: a list of candidate sample rates in Hz, "
                      "e.g. [12800, 25600]")
        rates = sec["rates_hz"]
        if not isinstance(rates, list):
            self.fail(entry, "rates_hz", "must be a list of sample rates in Hz, e.g. "
                      "[12800, 25600]", rates)

        kind = self.text(sec, "filter", entry, default="none")
        if kind not in FILTER_KINDS:
            self.fail(entry, "filter", f"must be one of {', '.join(FILTER_KINDS)}"
                      f"{_close(kind, FILTER_KINDS)}", kind)
        for key, kinds in _FILTER_USES.items():
            if key in sec and kind not in kinds:
                self.fail(entry, key, f"is not used by filter {kind!r} (it applies to "
                          f"{', '.join(kinds)}); remove it or change the filter")
        args = {"kind": kind}
        for key, name in _FILTER_FIELDS.items():
            if key in sec:
                args[name] = sec[key]
        prefix = ""
        if kind == "table":
            if "table" not in sec:
                self.fail(entry, "table", "is required by filter 'table' (a CSV file with "
                          "columns hz,db or fraction,db)")
            value = sec["table"]
            layouts = (("hz", "db"), ("fraction", "db"))
            if isinstance(value, dict):
                layout, cols = self.inline_columns(value, layouts, entry)
            else:
                path = self.csv_path(value, entry)
                prefix = f"{value}: "
                try:
                    layout, cols = read_numeric_csv(path, layouts, "filter table")
                except InputError as exc:
                    self.fail(entry, "table", str(exc))
            units = layout[0]
            args.update(table_hz_or_fraction=cols[units], table_db=cols["db"],
                        table_units=units)
        try:
            filt = AntiAliasFilter(**args)
        except FieldError as exc:
            self.from_field_error(exc, entry, prefix)
        threshold = self.number(sec, "threshold_db", entry, default=DEFAULT_THRESHOLD_DB)
        return rates, filt, threshold

    def named_entries(self, d, table, keys):
        """Each ``[[table]]`` entry as (location, keys): an array of tables, each with a
        unique non-empty name and only the allowed keys."""
        if table not in d:
            return
        entries = d[table]
        if not isinstance(entries, list):
            self.fail(None, f"[{table}]", f"{table}s are an array of tables: write each as "
                      f"[[{table}]] (two brackets)")
        seen = {}
        for i, sec in enumerate(entries):
            entry = f"[[{table}]] #{i + 1}"
            if not isinstance(sec, dict):
                self.fail(None, entry, f"must be a table of keys, got {show(sec)}")
            name = sec.get("name")
            if isinstance(name, str) and name.strip():
                entry = f"[[{table}]] {name!r}"
            self.unknown_keys(sec, keys, entry)
            if "name" not in sec:
                self.fail(entry, "name", "is required")
            if not isinstance(name, str) or not name.strip():
                self.fail(entry, "name", "must be a non-empty text", name)
            if name in seen:
                self.fail(entry, "name", f"is used by {table} #{seen[name]} already; {table} "
                          "names must be unique")
            seen[name] = i + 1
            yield entry, sec

    def bands(self, d) -> tuple[Band, ...]:
        bands = []
        for entry, sec in self.named_entries(d, "band", _BAND_KEYS):
            for key in ("hz", "orders"):
                if key in sec and not isinstance(sec[key], list):
                    self.fail(entry, key, "must be a list of two numbers [lo, hi]", sec[key])
            try:
                bands.append(Band(**sec))
            except FieldError as exc:
                self.fail(entry, exc.field, exc.problem, exc.value)
        return tuple(bands)

    def limits(self, d, bands) -> tuple[Limit, ...]:
        band_names = [b.name for b in bands]
        limits = []
        for entry, sec in self.named_entries(d, "limit", _LIMIT_KEYS):
            if "max" not in sec:
                self.fail(entry, "max", "is required: the highest allowed level in the "
                          "channel's unit, from the user, the machine maker or the standard")
            if "rpm" in sec and not isinstance(sec["rpm"], list):
                self.fail(entry, "rpm", "must be a list of two speeds [lo, hi] in rpm",
                          sec["rpm"])
            band = sec.get("band")
            if isinstance(band, str) and band not in band_names:
                self.fail(entry, "band", f"the plan has no [[band]] of this name"
                          f"{_close(band, band_names)}; known bands: "
                          f"{', '.join(band_names) or 'none'}", band)
            try:
                limits.append(Limit(**sec))
            except FieldError as exc:
                self.fail(entry, exc.field, exc.problem, exc.value)
        return tuple(limits)

    def resampling(self, d) -> tuple[float | None, float | None]:
        entry = "[resampling]"
        sec = self.table(d, "resampling", required=False)
        self.unknown_keys(sec, _RESAMPLING_KEYS, entry)
        max_order = self.number(sec, "max_order", entry, low=0.0, low_open=True)
        resolution = self.number(sec, "order_resolution", entry, low=0.0, low_open=True)
        return max_order, resolution

    def plan(self, d) -> Plan:
        if not isinstance(d, dict):
            self.fail(None, None, f"a plan must be a table of sections, got {show(d)}")
        for key in d:
            if key not in _SECTIONS:
                self.fail(None, f"[{key}]" if isinstance(d[key], dict) else key,
                          f"unknown table or key{_close(key, _SECTIONS)}; a plan has "
                          "[speed], [acquisition], [[band]], [resampling] and [[limit]]")
        speed = self.speed(d)
        rates, filt, threshold = self.acquisition(d)
        bands = self.bands(d)
        max_order, resolution = self.resampling(d)
        limits = self.limits(d, bands)
        try:
            return Plan(speed=speed, rates_hz=rates, filter=filt, threshold_db=threshold,
                        bands=bands, max_order=max_order, order_resolution=resolution,
                        source=self.source, limits=limits)
        except FieldError as exc:  # checks that live on Plan itself (rates_hz)
            self.fail(_PLAN_ENTRY.get(exc.field), exc.field, exc.problem, exc.value)


def plan_from_dict(d: dict, source: str = "<dict>", *, base_dir=None) -> Plan:
    """Build and validate a :class:`Plan` from a dictionary shaped like the plan file.

    Parameters
    ----------
    d : dict
        Sections ``speed``, ``acquisition`` (required), ``band`` (a list), ``resampling``, ``limit`` (a list).
        Not modified.
    source : str
        Name used in error messages (the file name when read from a file).
    base_dir : str or path-like, optional
        Folder that CSV tables are named relative to and must lie inside; default the
        current directory.

    Raises
    ------
    PlanFileError
        Anything missing, unknown, misplaced or out of range; the message names the source,
        the table or entry, the key, the bad value and what is allowed.
    """
    base = Path.cwd() if base_dir is None else Path(base_dir)
    return _Reader(source, base).plan(d)


def read_plan(path) -> Plan:
    """Read and validate a plan file (TOML; see the module notes for its layout).

    Parameters
    ----------
    path : str or path-like
        The plan file.  CSV tables it names are looked up relative to its folder.

    Raises
    ------
    PlanFileError
        The file cannot be read, is not valid TOML, or holds an invalid plan.
    """
    path = Path(path)
    name = str(path)
    try:
        text = path.read_bytes().decode("utf-8")
    except FileNotFoundError:
        raise PlanFileError(f"{name}: plan file not found") from None
    except OSError as exc:
        raise PlanFileError(f"{name}: cannot read the plan file: {exc.strerror or exc}") from None
    except UnicodeDecodeError:
        hint = wrong_file_hint(path, "plan")
        raise PlanFileError(f"{name}: {hint}" if hint else
                            f"{name}: not a text file in UTF-8; a plan file is TOML") from None
    try:
        d = tomllib.loads(text)
    except tomllib.TOMLDecodeError as exc:
        hint = wrong_file_hint(path, "plan")
        raise PlanFileError(f"{name}: {hint}" if hint else f"{name}: not valid TOML: {exc}") from None
    hint = wrong_file_hint(path, "plan", tables=d.keys())
    if hint:
        raise PlanFileError(f"{name}: {hint}")
    return plan_from_dict(d, source=name, base_dir=path.parent)


# ------------------------------------------------------------------------------------------
# Writing
# ------------------------------------------------------------------------------------------
def _filter_dict(f: AntiAliasFilter) -> dict:
    out = {"filter": f.kind}
    for key, name in _FILTER_FIELDS.items():
        if f.kind in _FILTER_USES[key]:
            out[key] = getattr(f, name)
    if f.kind == "table":
        out["table"] = {f.table_units: list(f.table_hz_or_fraction), "db": list(f.table_db)}
    return out


def plan_to_dict(plan: Plan) -> dict:
    """The dictionary :func:`plan_from_dict` reads back into an equal plan.

    Tables (a ``"table"`` speed profile or filter) are written inline as columns.  Keys that do
    not apply to the chosen profile or filter are left out.
    """
    s = plan.speed
    if s.kind == "table":
        speed = {"profile": "table",
                 "table": {"time_s": list(s.table_time_s), "rpm": list(s.table_rpm)}}
    else:
        speed = {"profile": s.kind, "start_rpm": s.start_rpm, "end_rpm": s.end_rpm,
                 "duration_s": s.duration_s}
    acquisition = {"rates_hz": list(plan.rates_hz)}
    acquisition.update(_filter_dict(plan.filter))
    acquisition["threshold_db"] = plan.threshold_db
    out = {"speed": speed, "acquisition": acquisition}
    if plan.bands:
        bands = []
        for b in plan.bands:
            entry = {"name": b.name}
            if b.around is not None:
                entry.update(around=b.around, width_pct=b.width_pct)
            else:
                entry[b.kind] = list(getattr(b, b.kind))
            bands.append(entry)
        out["band"] = bands
    resampling = {k: getattr(plan, k) for k in _RESAMPLING_KEYS if getattr(plan, k) is not None}
    if resampling:
        out["resampling"] = resampling
    if plan.limits:
        limits = []
        for lim in plan.limits:
            entry = {"name": lim.name}
            if lim.band is not None:
                entry["band"] = lim.band
            else:
                entry.update(order=lim.order, bandwidth=lim.bandwidth)
            entry["max"] = lim.max
            if lim.amplitude != "peak":
                entry["amplitude"] = lim.amplitude
            if lim.rpm is not None:
                entry["rpm"] = list(lim.rpm)
            limits.append(entry)
        out["limit"] = limits
    return out


def _toml_value(value) -> str:
    if isinstance(value, bool):
        return "true" if value else "false"
    if isinstance(value, str):
        return json.dumps(value, ensure_ascii=False).replace("\x7f", "\\u007f")
    if isinstance(value, int):
        return str(value)
    if is_number(value):
        x = float(value)
        if math.isnan(x):
            return "nan"
        if math.isinf(x):
            return "inf" if x > 0 else "-inf"
        if x.is_integer() and abs(x) < 2**53:
            return str(int(x))  # read back as the same number
        return repr(x)
    if isinstance(value, (list, tuple)):
        return "[" + ", ".join(_toml_value(v) for v in value) + "]"
    if isinstance(value, dict):
        return "{" + ", ".join(f"{k} = {_toml_value(v)}" for k, v in value.items()) + "}"
    raise TypeError(f"cannot write {type(value).__name__} to TOML")


def _toml(d: dict) -> str:
    lines = []
    for section, body in d.items():
        tables = body if isinstance(body, list) else [body]
        header = f"[[{section}]]" if isinstance(body, list) else f"[{section}]"
        for table in tables:
            if lines:
                lines.append("")
            lines.append(header)
            lines.extend(f"{k} = {_toml_value(v)}" for k, v in table.items())
    return "\n".join(lines) + "\n"


def _csv(columns: dict) -> str:
    names = list(columns)
    rows = zip(*(columns[n] for n in names))
    return ",".join(names) + "\n" + "".join(",".join(repr(float(v)) for v in row) + "\n"
                                            for row in rows)


def write_plan(plan: Plan, path, *, force: bool = False) -> Path:
    """Write `plan` as a plan file that :func:`read_plan` reads back into an equal plan.

    Parameters
    ----------
    plan : Plan
        The plan.
    path : str or path-like
        The TOML file to write.  A ``"table"`` speed profile is written to
        ``<stem>_speed.csv`` and a ``"table"`` filter to ``<stem>_filter.csv`` beside it.
    force : bool, optional
        Overwrite existing files; without it an existing file raises OutputExistsError.

    Returns
    -------
    path : Path
        The plan file written.  Each file is written under a temporary name and renamed into
        place, so no partial file is left behind.
    """
    path = Path(path)
    d = plan_to_dict(plan)
    files = {}
    if plan.speed.kind == "table":
        csv_path = path.with_name(f"{path.stem}_speed.csv")
        files[csv_path] = _csv(d["speed"]["table"])
        d["speed"]["table"] = csv_path.name
    if plan.filter.kind == "table":
        csv_path = path.with_name(f"{path.stem}_filter.csv")
        files[csv_path] = _csv(d["acquisition"]["table"])
        d["acquisition"]["table"] = csv_path.name
    files[path] = _toml(d)
    if not force:
        for target in files:
            if target.exists():
                raise OutputExistsError(f"{target}: exists already; pass --force to replace it, or "
                                        "choose another name")
    for target, text in files.items():
        write_text(target, text, force=True)
    return path
