"""Tests of workbench.sampling.plan and planfile: bands, plans, plan files."""

import copy
import shutil
import warnings

import numpy as np
import pytest

from workbench.errors import InputError, OutputExistsError, PlanFileError
from workbench.sampling import (AntiAliasFilter, Band, Plan, SpeedProfile, plan_from_dict,
                                plan_to_dict, read_plan, write_plan)

from builders import DATA


class StandInLine:
    """Tiny stand-in for a machine line: a name and hz_at(rpm) (duck typing)."""

    def __init__(self, name, order=None, hz=None):
        self.name, self.order, self.hz = name, order, hz

    def hz_at(self, rpm):
        rpm = np.asarray(rpm, dtype=float)
        if self.order is not None:
            return self.order * rpm / 60.0
        return np.full(rpm.shape, self.hz)


LINES = (StandInLine("input shaft", order=1.0), StandInLine("output NDE bpfo", order=3.5848),
         StandInLine("mains", hz=50.0))


def _base():
    return {
        "speed": {"profile": "linear", "start_rpm": 600, "end_rpm": 3600, "duration_s": 60},
        "acquisition": {"rates_hz": [12800], "filter": "butterworth", "filter_order": 8,
                        "cutoff": 0.39},
        "band": [{"name": "env", "hz": [2000, 5000]}],
    }


# -- Band ----------------------------------------------------------------------------------
def test_band_limits_hz_orders_around():
    rpm = np.array([600.0, 1200.0, 3600.0])
    lo, hi = Band("fixed", hz=(100, 200)).limits_hz(rpm)
    np.testing.assert_array_equal(lo, [100, 100, 100])
    np.testing.assert_array_equal(hi, [200, 200, 200])
    lo, hi = Band("gear", orders=(20, 40)).limits_hz(rpm, LINES)
    np.testing.assert_allclose(lo, [200, 400, 1200])
    np.testing.assert_allclose(hi, [400, 800, 2400])
    # width_pct is the total width: 10 % -> 0.95 .. 1.05 times the line.
    lo, hi = Band("race", around="output NDE bpfo", width_pct=10).limits_hz(rpm, LINES)
    f = 3.5848 * rpm / 60
    np.testing.assert_allclose(lo, 0.95 * f)
    np.testing.assert_allclose(hi, 1.05 * f)
    lo, hi = Band("hum", around="mains", width_pct=4).limits_hz(rpm, LINES)
    np.testing.assert_allclose(lo, [49, 49, 49])
    assert Band("x", hz=[1, 2]).limits_hz(1000.0)[0].shape == ()
    assert Band("x", orders=[1, 2]).kind == "orders"


def test_band_limits_with_machine_lines():
    # The machine layer's Line objects work the same way as the stand-in.
    machine = pytest.importorskip("workbench.machine")
    line = machine.Line("output NDE bpfo", "output NDE", "bpfo", 1, order=3.5848)
    lo, hi = Band("race", around="output NDE bpfo", width_pct=20).limits_hz([600.0], [line])
    np.testing.assert_allclose([lo[0], hi[0]], [0.9 * 35.848, 1.1 * 35.848])
    plan = plan_from_dict({**_base(), "band": [{"name": "race", "around": "output NDE bpfo",
                                                "width_pct": 20}]})
    plan.check_against([line])


def test_band_limits_errors():
    band = Band("race", around="output NDE bfpo", width_pct=10)
    with pytest.raises(InputError, match="band 'race': around = \"output NDE bfpo\": the machine has no "
                                         "line of this name.*did you mean 'output NDE bpfo'"):
        band.limits_hz([1000.0], LINES)
    with pytest.raises(InputError, match="rpm = -?[0-9.a-z]+: speeds must be finite and not negative"):
        Band("x", hz=[1, 2]).limits_hz([-5.0])
    with pytest.raises(InputError, match='rpm = "fast": must be numbers'):
        Band("x", hz=[1, 2]).limits_hz("fast")


@pytest.mark.parametrize(
    "kwargs, message",
    [
        ({"name": ""}, 'Band: name = "": must be a non-empty text'),
        ({"name": 3, "hz": [1, 2]}, "Band: name = 3: must be a non-empty text"),
        ({"name": "b"}, "give exactly one of hz = \\[lo, hi\\], orders = \\[lo, hi\\] or around"),
        ({"name": "b", "hz": [1, 2], "orders": [1, 2]}, "exactly one of .*; got hz, orders"),
        ({"name": "b", "around": ""}, 'around = "": must be a line name'),
        ({"name": "b", "around": "x"}, "width_pct: is required with around"),
        ({"name": "b", "around": "x", "width_pct": 0}, "width_pct = 0: must be above 0 and below 200"),
        ({"name": "b", "around": "x", "width_pct": 200}, "width_pct = 200: must be above 0 and below 200"),
        ({"name": "b", "hz": [1, 2], "width_pct": 5}, "width_pct = 5: is only used with around"),
        ({"name": "b", "hz": [1, 2, 3]}, "hz = \\[1, 2, 3\\]: must be two numbers \\[lo, hi\\]"),
        ({"name": "b", "hz": [1]}, "hz = \\[1\\]: must hold at least 2 values"),
        ({"name": "b", "orders": [-1, 2]}, "orders = \\[-1, 2\\]: lower limit must not be negative"),
        ({"name": "b", "orders": [2, 2]}, "orders = \\[2, 2\\]: lower limit must be below the upper one"),
        ({"name": "b", "hz": [1, "2"]}, 'hz = \\[1, "2"\\]: item 2 must be a finite number'),
    ],
)
def test_band_validation(kwargs, message):
    with pytest.raises(InputError, match=message):
        Band(**kwargs)


# -- Plan object -----------------------------------------------------------------------------
def test_plan_defaults_and_checks():
    speed = SpeedProfile("linear", 600.0, 3600.0, 60.0)
    plan = Plan(speed, (12800, 25600))
    assert plan.rates_hz == (12800.0, 25600.0)
    assert plan.filter == AntiAliasFilter()
    assert plan.threshold_db == -60.0 and plan.bands == () and plan.max_order is None
    with pytest.raises(InputError, match="Plan: rates_hz = \\[\\]: must hold at least one value"):
        Plan(speed, ())
    with pytest.raises(InputError, match=r"Plan: rates_hz = \[0\.0\]: item 1 must be a positive, finite "
                                         r"sample rate \(Hz\)"):
        Plan(speed, (0.0,))
    with pytest.raises(InputError, match=r"Plan: rates_hz = \[12800, 12800\.0\]: lists 12800 more "
                                         r"than once"):
        Plan(speed, (12800, 12800.0))
    with pytest.raises(InputError, match="Plan: speed: must be a SpeedProfile"):
        Plan({"profile": "linear"}, (12800,))
    with pytest.raises(InputError, match="Plan: filter: must be an AntiAliasFilter"):
        Plan(speed, (12800,), filter="butterworth")
    with pytest.raises(InputError, match="Plan: threshold_db = nan: must be a finite number"):
        Plan(speed, (12800,), threshold_db=np.nan)
    with pytest.raises(InputError, match="Plan: bands: band name 'a' is used twice"):
        Plan(speed, (12800,), bands=(Band("a", hz=(1, 2)), Band("a", orders=(1, 2))))
    with pytest.raises(InputError, match="Plan: bands: must hold Band objects"):
        Plan(speed, (12800,), bands=({"name": "a"},))
    with pytest.raises(InputError, match="Plan: bands: must be a sequence of Band"):
        Plan(speed, (12800,), bands=Band("a", hz=(1, 2)))
    with pytest.raises(InputError, match="Plan: max_order = 0: must be above 0"):
        Plan(speed, (12800,), max_order=0)
    with pytest.raises(InputError, match='Plan: order_resolution = "fine": must be a finite number'):
        Plan(speed, (12800,), order_resolution="fine")


def test_plan_band_lookup_and_check_against():
    plan = plan_from_dict({**_base(), "band": [
        {"name": "race", "around": "output NDE bpfo", "width_pct": 8},
        {"name": "hum", "around": "main", "width_pct": 8}]}, source="p.toml")
    assert plan.band("race").width_pct == 8.0
    with pytest.raises(InputError, match="p.toml: no band named 'rac'.*did you mean 'race'"):
        plan.band("rac")
    with pytest.raises(PlanFileError, match="p.toml: \\[\\[band\\]\\] 'hum': around: the machine "
                                            "has no line named 'main' \\(did you mean 'mains'"):
        plan.check_against(LINES)
    plan_from_dict(_base()).check_against(LINES)  # no around band: nothing to check


# -- example files -----------------------------------------------------------------------------
def test_read_runup_butterworth():
    plan = read_plan(DATA / "plan_runup_butterworth.toml")
    assert plan.source.endswith("plan_runup_butterworth.toml")
    assert plan.speed == SpeedProfile("linear", 600.0, 3600.0, 60.0)
    assert plan.rates_hz == (12800.0, 25600.0, 51200.0)
    assert plan.filter == AntiAliasFilter("butterworth", order=8, cutoff=0.39)
    assert plan.threshold_db == -50.0
    assert [b.kind for b in plan.bands] == ["around", "hz", "orders"]
    assert plan.bands[0] == Band("outer race", around="output NDE bpfo", width_pct=10.0)
    assert (plan.max_order, plan.order_resolution) == (60.0, 0.05)
    plan.check_against(LINES)


def test_read_coastdown_digital_defaults():
    plan = read_plan(DATA / "plan_coastdown_digital.toml")
    assert plan.speed.kind == "exponential" and plan.speed.rpm_max == 1480.0
    assert plan.filter == AntiAliasFilter("digital", passband_edge=0.4535, stopband_edge=0.5465,
                                          stopband_db=96.0)
    # threshold_db defaults to -60; no bands; resampling left to the advisor.
    assert plan.threshold_db == -60.0 and plan.bands == ()
    assert plan.max_order is None and plan.order_resolution is None


def test_read_tables_relative_to_plan_folder():
    plan = read_plan(DATA / "plan_table_speed.toml")
    assert plan.speed.table_time_s == (0.0, 5.0, 12.0, 20.0)
    assert plan.speed.table_rpm == (300.0, 1200.0, 1200.0, 2400.5)
    assert plan.filter.kind == "table" and plan.filter.table_units == "fraction"
    assert plan.filter.table_hz_or_fraction == (0.1, 0.4, 0.5, 0.6, 1.0)
    assert plan.filter.table_db == (0.0, 0.5, 12.0, 45.0, 90.0)


# -- round trips -------------------------------------------------------------------------------
@pytest.mark.parametrize("name", ["plan_runup_butterworth.toml", "plan_coastdown_digital.toml",
                                  "plan_table_speed.toml"])
def test_round_trip_dict_and_file(tmp_path, name):
    plan = read_plan(DATA / name)
    d = plan_to_dict(plan)
    snapshot = copy.deepcopy(d)
    assert plan_from_dict(d) == plan
    assert d == snapshot  # the reader does not modify its input
    out = write_plan(plan, tmp_path / "again.toml")
    assert read_plan(out) == plan
    if plan.speed.kind == "table":
        assert (tmp_path / "again_speed.csv").exists()
        assert (tmp_path / "again_filter.csv").exists()
    assert not list(tmp_path.glob(".*tmp"))  # no temporary files left behind


@pytest.mark.parametrize("filt", [
    AntiAliasFilter(),
    AntiAliasFilter("ideal", cutoff=0.45),
    AntiAliasFilter("bessel", order=4, cutoff=0.3),
    AntiAliasFilter("chebyshev1", order=5, cutoff=0.35, passband_ripple_db=0.25),
    AntiAliasFilter("elliptic", order=7, cutoff=0.41, passband_ripple_db=0.05, stopband_db=90.0),
    AntiAliasFilter("table", table_hz_or_fraction=[10.0, 1e4], table_db=[0.0, 1.0 / 3.0]),
])
def test_round_trip_every_filter(tmp_path, filt):
    speed = SpeedProfile("exponential", 3000.0, 100.0 / 3.0, 12.5)
    plan = Plan(speed, (1.0 / 3.0 * 1e5, 48000.0), filter=filt, threshold_db=-72.5,
                bands=(Band("π band \"quoted\"", orders=(0.1, 0.7)),), max_order=12.0)
    assert read_plan(write_plan(plan, tmp_path / "p.toml")) == plan


def test_write_plan_refuses_existing(tmp_path):
    plan = read_plan(DATA / "plan_table_speed.toml")
    target = tmp_path / "p.toml"
    (tmp_path / "p_filter.csv").write_text("keep me")
    with pytest.raises(OutputExistsError, match="p_filter.csv: exists already"):
        write_plan(plan, target)
    assert not target.exists()  # nothing written when one of the files is refused
    assert (tmp_path / "p_filter.csv").read_text() == "keep me"
    write_plan(plan, target, force=True)
    assert read_plan(target) == plan


# -- validation of plan dictionaries and files ---------------------------------------------------
def _edit(path, value):
    """A copy of the base dict with the key at `path` set to `value` (or removed if None)."""
    d = _base()
    node = d
    for key in path[:-1]:
        node = node[key]
    if value is None:
        del node[path[-1]]
    else:
        node[path[-1]] = value
    return d


@pytest.mark.parametrize(
    "path, value, message",
    [
        (("acquisiton",), {}, "<dict>: \\[acquisiton\\]: unknown table or key \\(did you mean "
                              "'acquisition'\\?\\)"),
        (("speed",), None, "<dict>: \\[speed\\]: this table is required"),
        (("speed",), 5, "\\[speed\\] = 5: must be a table of keys"),
        (("acquisition",), None, "\\[acquisition\\]: this table is required"),
        (("speed", "start_rmp"), 5, "\\[speed\\]: start_rmp: unknown key \\(did you mean "
                                    "'start_rpm'\\?\\)"),
        (("speed", "profile"), None, "\\[speed\\]: profile: is required"),
        (("speed", "profile"), "lineal", "\\[speed\\]: profile = \"lineal\": must be one of "
                                         "linear, exponential, table \\(did you mean"),
        (("speed", "profile"), 3, "profile = 3: must be one of"),
        (("speed", "start_rpm"), None, "\\[speed\\]: start_rpm: is required by profile 'linear'"),
        (("speed", "start_rpm"), -5, "\\[speed\\]: start_rpm = -5: must be at least 0"),
        (("speed", "duration_s"), "long", "\\[speed\\]: duration_s = \"long\": must be a finite number"),
        (("speed", "table"), "speed.csv", "\\[speed\\]: table: is only used by profile 'table'"),
        (("acquisition", "rates_hz"), None, "\\[acquisition\\]: rates_hz: is required"),
        (("acquisition", "rates_hz"), 12800, "rates_hz = 12800: must be a list of sample rates"),
        (("acquisition", "rates_hz"), [], "rates_hz = \\[\\]: must hold at least one value"),
        (("acquisition", "rates_hz"), [12800, -1], "rates_hz = \\[12800, -1\\]: item 2 must be a positive, finite sample rate"),
        (("acquisition", "rates_hz"), [12800, "fast"], "rates_hz = \\[12800, \"fast\"\\]: item 2 must be a finite"),
        (("acquisition", "rates_hz"), [12800, 12800], "rates_hz = \\[12800, 12800\\]: lists 12800 more than once"),
        (("acquisition", "filter"), "buterworth", "\\[acquisition\\]: filter = \"buterworth\": must "
                                                  "be one of none, .*did you mean 'butterworth'"),
        (("acquisition", "filter"), 8, "filter = 8: must be a text in quotes"),
        (("acquisition", "filter_order"), None, "\\[acquisition\\]: filter_order: is required "
                                                "by filter kind 'butterworth'"),
        (("acquisition", "filter_order"), 0, "\\[acquisition\\]: filter_order = 0: must be a positive integer"),
        (("acquisition", "cutoff"), 1.5, "\\[acquisition\\]: cutoff = 1.5: must be above 0 and below 1"),
        (("acquisition", "stopband_db"), 80, "\\[acquisition\\]: stopband_db: is not used by "
                                             "filter 'butterworth' \\(it applies to digital, "
                                             "elliptic\\)"),
        (("acquisition", "table"), "f.csv", "table: is not used by filter 'butterworth'"),
        (("acquisition", "threshold_db"), "loud", "\\[acquisition\\]: threshold_db = \"loud\": must be a "
                                                  "finite number"),
        (("acquisition", "threshold"), -60, "threshold: unknown key \\(did you mean "
                                            "'threshold_db'\\?\\)"),
        (("band",), {"name": "x", "hz": [1, 2]}, "\\[band\\]: bands are an array of tables: "
                                                 "write each as \\[\\[band\\]\\]"),
        (("band", 0), "env", "\\[\\[band\\]\\] #1: must be a table of keys"),
        (("band", 0, "name"), None, "\\[\\[band\\]\\] #1: name: is required"),
        (("band", 0, "name"), " ", "\\[\\[band\\]\\] #1: name = \" \": must be a non-empty text"),
        (("band", 0, "hz"), "2000-5000", "\\[\\[band\\]\\] 'env': hz = \"2000-5000\": must be a list of two"),
        (("band", 0, "hz"), [5000, 2000], "'env': hz = \\[5000, 2000\\]: lower limit must be below the upper"),
        (("band", 0, "orders"), [1, 2], "'env': hz/orders/around: give exactly one of"),
        (("band", 0, "width_pct"), 5, "'env': width_pct = 5: is only used with around"),
        (("band", 0, "with_pct"), 5, "'env': with_pct: unknown key \\(did you mean "
                                     "'width_pct'\\?\\)"),
        (("band", 0), {"name": "env", "around": "mains"}, "'env': width_pct: is required with "
                                                          "around"),
        (("band", 0), {"name": "env", "around": "mains", "width_pct": 250},
         "'env': width_pct = 250: must be above 0 and below 200"),
        (("resampling",), {"max_order": 0}, "\\[resampling\\]: max_order = 0: must be above 0"),
        (("resampling",), {"order_resolution": "fine"}, "\\[resampling\\]: order_resolution "
                                                        "= \"fine\": must be a finite number"),
        (("resampling",), {"max_orders": 50}, "\\[resampling\\]: max_orders: unknown key "
                                              "\\(did you mean 'max_order'\\?\\)"),
        (("resampling",), [1], "\\[resampling\\] = \\[1\\]: must be a table of keys"),
    ],
)
def test_plan_dict_validation(path, value, message):
    with pytest.raises(PlanFileError, match=message):
        plan_from_dict(_edit(path, value))


def test_duplicate_band_names():
    d = _base()
    d["band"].append({"name": "env", "orders": [1, 2]})
    with pytest.raises(PlanFileError, match="\\[\\[band\\]\\] 'env': name: is used by band #1 "
                                            "already"):
        plan_from_dict(d)


def test_not_a_dict_and_unknown_top_level_key():
    with pytest.raises(PlanFileError, match="a plan must be a table of sections"):
        plan_from_dict([1, 2])
    with pytest.raises(PlanFileError, match="<dict>: title: unknown table or key"):
        plan_from_dict({**_base(), "title": "x"})


@pytest.mark.parametrize(
    "speed, message",
    [
        ({"profile": "table"}, "\\[speed\\]: table: is required by profile 'table'"),
        ({"profile": "table", "table": "s.csv", "end_rpm": 5}, "\\[speed\\]: end_rpm: is given "
                                                               "by the speed table"),
        ({"profile": "table", "table": "../s.csv"}, "\\[speed\\]: table = \"../s.csv\": lies outside "
                                                    "the plan's folder"),
        ({"profile": "table", "table": "/etc/hosts"}, "table = \"/etc/hosts\": lies outside"),
        ({"profile": "table", "table": ""}, "\\[speed\\]: table = \"\": must name a CSV file"),
        ({"profile": "table", "table": "missing.csv"}, "\\[speed\\]: table: .*missing.csv: "
                                                       "speed table not found"),
        ({"profile": "table", "table": "bad.csv"}, "\\[speed\\]: table: .*bad.csv: line 3: rpm = "
                                                   "\"x\": must be a finite number"),
        ({"profile": "table", "table": "late.csv"}, "\\[speed\\]: table: late.csv: the first "
                                                    "time must be 0 s"),
        ({"profile": "table", "table": {"time_s": [0, 1]}}, "\\[speed\\]: table: inline columns "
                                                            "must be \\{time_s, rpm\\}"),
        ({"profile": "table", "table": {"time_s": [0, 1], "rpm": [1]}},
         "\\[speed\\]: table.rpm = \\[1\\]: must hold at least 2 values"),
        ({"profile": "table", "table": {"time_s": [0, 1, 2], "rpm": [1, 2]}},
         "\\[speed\\]: table: inline columns must have the same length"),
        ({"profile": "table", "table": {"time_s": [0, 1], "rpm": [1, -2]}},
         "\\[speed\\]: table: row 2: speeds must not be negative"),
    ],
)
def test_speed_table_errors(tmp_path, speed, message):
    (tmp_path / "bad.csv").write_text("time_s,rpm\n0,100\n1,x\n")
    (tmp_path / "late.csv").write_text("time_s,rpm\n1,100\n2,200\n")
    d = {**_base(), "speed": speed}
    with pytest.raises(PlanFileError, match=message):
        plan_from_dict(d, source="p.toml", base_dir=tmp_path)


@pytest.mark.parametrize(
    "acq, message",
    [
        ({"filter": "table"}, "\\[acquisition\\]: table: is required by filter 'table'"),
        ({"filter": "table", "table": "hdr.csv"}, "table: .*hdr.csv: header: unknown column "
                                                  "'khz'; a filter table has the columns hz,db "
                                                  "or fraction,db"),
        ({"filter": "table", "table": "order.csv"}, "\\[acquisition\\]: table: order.csv: point 2:"
                                                    " frequencies must increase strictly"),
        ({"filter": "table", "table": "../x.csv"}, "table = \"../x.csv\": lies outside"),
        ({"filter": "table", "table": {"hz": [1, 2], "gain": [0, 1]}},
         "inline columns must be \\{hz, db\\} or \\{fraction, db\\}"),
        ({"filter": "table", "table": {"hz": [1, 2], "db": [0, -10]}},
         "\\[acquisition\\]: table: point 2: attenuation is positive dB"),
        ({"filter": "digital", "passband_edge": 0.6}, "\\[acquisition\\]: stopband_edge = 0.55: must be "
                                                      "above passband_edge"),
        ({"filter": "elliptic", "filter_order": 4, "cutoff": 0.4, "passband_ripple_db": 120},
         "\\[acquisition\\]: passband_ripple_db = 120.0: must be below stopband_db"),
        ({"filter": "ideal", "filter_order": 4, "cutoff": 0.4}, "filter_order: is not used by "
                                                                "filter 'ideal'"),
        ({"filter": "none", "cutoff": 0.4}, "cutoff: is not used by filter 'none'"),
    ],
)
def test_filter_table_and_filter_errors(tmp_path, acq, message):
    (tmp_path / "hdr.csv").write_text("khz,db\n1,0\n2,3\n")
    (tmp_path / "order.csv").write_text("hz,db\n100,0\n50,3\n")
    d = {**_base(), "acquisition": {"rates_hz": [12800], **acq}}
    with pytest.raises(PlanFileError, match=message):
        plan_from_dict(d, base_dir=tmp_path)


def test_inline_tables_and_subfolder(tmp_path):
    (tmp_path / "tables").mkdir()
    (tmp_path / "tables" / "s.csv").write_text("time_s,rpm\n0,100\n4,900\n")
    d = {"speed": {"profile": "table", "table": "tables/s.csv"},
         "acquisition": {"rates_hz": [1000], "filter": "table",
                         "table": {"fraction": [0.2, 0.6], "db": [0, 60]}}}
    plan = plan_from_dict(d, base_dir=tmp_path)
    assert plan.speed.rpm_at(2.0) == 500.0
    assert plan.filter.table_units == "fraction"
    assert plan.filter.attenuation_db(0.6 * 1000, 1000) == 60.0


def test_cutoff_at_or_above_nyquist_is_refused():
    # A filter passing Nyquist lets everything up to its cutoff fold unattenuated (issue 15).
    d = _edit(("acquisition", "cutoff"), 0.7)
    with pytest.raises(PlanFileError, match=r"\[acquisition\]: cutoff = 0\.7: lies at or "
                                            r"above Nyquist"):
        plan_from_dict(d)


# -- plan files on disk ------------------------------------------------------------------------
def test_read_plan_file_errors(tmp_path):
    with pytest.raises(PlanFileError, match="nothing.toml: plan file not found"):
        read_plan(tmp_path / "nothing.toml")
    with pytest.raises(PlanFileError, match="cannot read the plan file"):
        read_plan(tmp_path)
    bad = tmp_path / "bad.toml"
    bad.write_text("[speed]\nprofile = linear\n")
    with pytest.raises(PlanFileError, match="bad.toml: not valid TOML: .*line 2"):
        read_plan(bad)
    binary = tmp_path / "bin.toml"
    binary.write_bytes(b"\xff\xfe[speed]")
    with pytest.raises(PlanFileError, match="bin.toml: not a text file in UTF-8"):
        read_plan(binary)


def test_read_plan_names_the_file_in_errors(tmp_path):
    shutil.copy(DATA / "plan_runup_butterworth.toml", tmp_path / "p.toml")
    text = (tmp_path / "p.toml").read_text().replace("width_pct = 10", "width_pct = -10")
    (tmp_path / "p.toml").write_text(text)
    with pytest.raises(PlanFileError, match="p.toml: \\[\\[band\\]\\] 'outer race': width_pct = "
                                            "-10: must be above 0 and below 200"):
        read_plan(tmp_path / "p.toml")


def test_plan_file_error_is_value_error():
    # DEVELOPERS.md, "Errors": FoldlineError subclasses also inherit the built-in a user
    # would expect.
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        with pytest.raises(ValueError):
            plan_from_dict({})
