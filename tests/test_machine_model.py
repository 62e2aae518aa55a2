"""Tests of the machine model: speed ratios, line expansion, bearing and planetary math.

The modules: workbench.machine.lines, kinematics, entries and machine.
"""

import math
import re
import warnings
from fractions import Fraction

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from workbench.errors import FoldlineWarning, InputError, MachineFileError, TrainError
from workbench.machine import (
    Bearing,
    FixedLine,
    GearStage,
    Line,
    Machine,
    OrderSource,
    PlanetaryStage,
    Rotor,
    Shaft,
    bearing_frequencies,
    planetary_frequencies,
)


def one_shaft(*sources, shaft="input"):
    return Machine("m", shaft, (Shaft(shaft),), sources)


def by_name(machine):
    return {line.name: line for line in machine.lines()}


# ------------------------------------------------------------------------------------------
# Bearings
# ------------------------------------------------------------------------------------------


def test_cwru_drive_end_bearing_published_multiples():
    # Case Western Reserve University Bearing Data Center, drive-end bearing: 9 balls,
    # d = 0.3126 in, D = 1.537 in; published multiples of running speed (rounded on the page).
    lines = by_name(one_shaft(Bearing("DE", "input", 9, 0.3126, 1.537)))
    assert lines["DE bpfi"].order == pytest.approx(5.4152, rel=5e-4)  # CWRU, inner ring
    assert lines["DE bpfo"].order == pytest.approx(3.5848, rel=5e-4)  # CWRU, outer ring
    assert lines["DE ftf"].order == pytest.approx(0.39828, rel=5e-4)  # CWRU, cage
    assert 2 * lines["DE bsf"].order == pytest.approx(4.7135, rel=5e-4)  # CWRU, 2 x BSF


def test_curtin_bearing_published_values():
    # G. Forbes, Curtin University bearing data set, 2012: 9 balls, d = 7.9375 mm, D = 38.50 mm.
    f = bearing_frequencies(1.0, 0.0, rolling_elements=9, element_diameter=7.9375,
                            pitch_diameter=38.50)
    assert f.ftf == pytest.approx(0.3969, rel=5e-4)  # Forbes 2012
    assert f.bpfo == pytest.approx(3.572, rel=5e-4)  # Forbes 2012
    assert f.bpfi == pytest.approx(5.428, rel=5e-4)  # Forbes 2012
    assert f.bsf == pytest.approx(2.32, abs=0.005)  # Forbes 2012, given to 3 figures only


def test_outer_race_rotating_matches_general_formula():
    # Randall & Antoni, MSSP 25(2):485-520, 2011, general case evaluated by hand with f_i = 0,
    # f_o = f: f_c = f (1 + r)/2, BPFO = N f (1 - r)/2, BPFI = N f (1 + r)/2,
    # BSF = D/(2d) f (1 - r^2); here with the CWRU geometry at a shaft turning at order 0.7.
    n, d, big_d, f = 9, 0.3126, 1.537, 0.7
    r = d / big_d
    machine = Machine("m", "in", (Shaft("in"), Shaft("hub")),
                      (GearStage("g", "in", "hub", 7, 10, harmonics=1),
                       Bearing("wheel", "hub", n, d, big_d, rotating_race="outer")))
    lines = by_name(machine)
    assert lines["wheel ftf"].order == pytest.approx(f * (1 + r) / 2, rel=1e-12)
    assert lines["wheel bpfo"].order == pytest.approx(n * f * (1 - r) / 2, rel=1e-12)
    assert lines["wheel bpfi"].order == pytest.approx(n * f * (1 + r) / 2, rel=1e-12)
    assert lines["wheel bsf"].order == pytest.approx(big_d / (2 * d) * f * (1 - r * r), rel=1e-12)
    # Race passes depend only on the relative race speed, so the CWRU multiples still hold
    # (CWRU Bearing Data Center) while the cage turns with the outer race: 1 - 0.39828.
    assert lines["wheel bpfo"].order / f == pytest.approx(3.5848, rel=5e-4)
    assert lines["wheel bpfi"].order / f == pytest.approx(5.4152, rel=5e-4)
    assert lines["wheel ftf"].order / f == pytest.approx(1 - 0.39828, rel=5e-4)


def test_contact_angle_reduces_r():
    # Randall & Antoni 2011: r = (d/D) cos(alpha); at 60 degrees cos = 1/2 exactly, so the
    # bearing behaves as one with half the element diameter in r (BSF keeps its D/(2d) factor).
    tilted = bearing_frequencies(1.0, 0.0, rolling_elements=12, element_diameter=10.0,
                                 pitch_diameter=50.0, contact_angle_deg=60.0)
    r = 0.1
    assert tilted.bpfo == pytest.approx(12 * (1 - r) / 2, rel=1e-12)
    assert tilted.bpfi == pytest.approx(12 * (1 + r) / 2, rel=1e-12)
    assert tilted.bsf == pytest.approx(50 / 20 * (1 - r * r), rel=1e-12)


def test_bearing_frequencies_arrays_broadcast():
    f = bearing_frequencies(np.array([0.0, 1.0, 2.0]), 0.0, rolling_elements=9,
                            element_diameter=7.9375, pitch_diameter=38.5)
    assert f.bpfo.shape == (3,)
    np.testing.assert_allclose(f.bpfo, [0.0, 3.572, 2 * 3.572], rtol=5e-4)  # Forbes 2012


@settings(max_examples=150, deadline=None)
@given(
    n=st.integers(1, 40),
    ratio=st.floats(0.01, 0.99),
    angle=st.floats(0.0, 89.9),
    f_i=st.floats(-100, 100),
    f_o=st.floats(-100, 100),
)
def test_bearing_race_pass_identity(n, ratio, angle, f_i, f_o):
    # Randall & Antoni 2011: the cage speed lies between the race speeds, so
    # BPFO + BPFI = N |f_i - f_o| for any race speeds and geometry.
    f = bearing_frequencies(f_i, f_o, rolling_elements=n, element_diameter=ratio,
                            pitch_diameter=1.0, contact_angle_deg=angle)
    assert f.bpfo + f.bpfi == pytest.approx(n * abs(f_i - f_o), rel=1e-9, abs=1e-9)


@settings(max_examples=100, deadline=None)
@given(
    n=st.integers(1, 40),
    d=st.floats(0.5, 30.0),
    extra=st.floats(0.1, 200.0),
    angle=st.floats(0.0, 89.0),
    f=st.floats(0.01, 50.0),
)
def test_bearing_inner_rotating_closed_forms(n, d, extra, angle, f):
    # Inner race turning at f_r, outer still (REFERENCES.md, Randall & Antoni 2011):
    # FTF = f_r/2 (1 - r), BPFO = N f_r/2 (1 - r), BPFI = N f_r/2 (1 + r),
    # BSF = D/(2d) f_r (1 - r^2).
    big_d = d + extra
    r = d / big_d * math.cos(math.radians(angle))
    lines = by_name(one_shaft(Bearing("brg", "input", n, d, big_d, contact_angle_deg=angle)))
    assert lines["brg ftf"].order == pytest.approx((1 - r) / 2, rel=1e-9)
    assert lines["brg bpfo"].order == pytest.approx(n / 2 * (1 - r), rel=1e-9)
    assert lines["brg bpfi"].order == pytest.approx(n / 2 * (1 + r), rel=1e-9)
    assert lines["brg bsf"].order == pytest.approx(big_d / (2 * d) * (1 - r * r), rel=1e-9)
    freq = bearing_frequencies(f, 0.0, rolling_elements=n, element_diameter=d,
                               pitch_diameter=big_d, contact_angle_deg=angle)
    assert freq.ftf == pytest.approx(f / 2 * (1 - r), rel=1e-9)
    assert freq.bpfo == pytest.approx(n * f / 2 * (1 - r), rel=1e-9)
    assert freq.bpfi == pytest.approx(n * f / 2 * (1 + r), rel=1e-9)
    assert freq.bsf == pytest.approx(big_d / (2 * d) * f * (1 - r * r), rel=1e-9)


@pytest.mark.parametrize(
    "kwargs, match",
    [
        ({"rolling_elements": 0}, r"rolling_elements = 0: must be a positive integer"),
        ({"element_diameter": -1.0}, r"element_diameter = -1.0: must be a positive number"),
        ({"pitch_diameter": 0.2}, r"element_diameter = 0.3 >= pitch_diameter = 0.2"),
        ({"contact_angle_deg": 90.0}, r"contact_angle_deg = 90.0: must be >= 0 and < 90"),
    ],
)
def test_bearing_frequencies_validation(kwargs, match):
    args = dict(rolling_elements=9, element_diameter=0.3, pitch_diameter=1.5)
    args.update(kwargs)
    with pytest.raises(InputError, match=match):
        bearing_frequencies(1.0, 0.0, **args)


# ------------------------------------------------------------------------------------------
# Parallel gear stages
# ------------------------------------------------------------------------------------------


def two_stage(**kw):
    return Machine(
        "m", "input", (Shaft("input"), Shaft("countershaft"), Shaft("output")),
        (GearStage("stage 1", "input", "countershaft", 23, 67, **kw),
         GearStage("stage 2", "countershaft", "output", 19, 71, harmonics=1)),
    )


def test_parallel_mesh_frequency_both_sides():
    # Parallel stage: mesh frequency = Z1 f1 = Z2 f2 (REFERENCES.md, gears, from memory).
    machine = two_stage()
    orders = machine.shaft_orders()
    assert orders["input"] == 1.0
    assert orders["countershaft"] == pytest.approx(23 / 67, rel=1e-12)
    assert orders["output"] == pytest.approx(23 / 67 * 19 / 71, rel=1e-12)
    lines = by_name(machine)
    assert lines["stage 1 mesh"].order == pytest.approx(67 * orders["countershaft"], rel=1e-12)
    assert lines["stage 2 mesh"].order == pytest.approx(71 * orders["output"], rel=1e-12)
    assert lines["stage 2 mesh"].order == pytest.approx(19 * 23 / 67, rel=1e-12)
    assert lines["stage 1 mesh x2"].order == pytest.approx(2 * 23, rel=1e-12)
    assert lines["stage 1 mesh x3"].harmonic == 3
    assert "stage 1 mesh x4" not in lines


def test_sidebands_names_and_orders():
    # Sidebands at mesh +- m f1 and mesh +- m f2 (REFERENCES.md, gears, from memory).
    lines = by_name(two_stage(sidebands=2))
    f2 = 23 / 67
    assert lines["stage 1 sideband -1 input"].order == pytest.approx(22.0, rel=1e-12)
    assert lines["stage 1 sideband +2 input"].order == pytest.approx(25.0, rel=1e-12)
    assert lines["stage 1 sideband -1 countershaft"].order == pytest.approx(23 - f2, rel=1e-12)
    side = lines["stage 1 sideband x2 +2 countershaft"]
    assert side.order == pytest.approx(46 + 2 * f2, rel=1e-12)
    assert (side.kind, side.entry, side.harmonic) == ("sideband", "stage 1", 2)
    # 3 harmonics x (mesh + 2 shafts x 2 sidebands x 2 signs)
    assert sum(1 for line in lines.values() if line.entry == "stage 1") == 3 * (1 + 8)
    assert not any(line.kind == "sideband" for line in lines.values() if line.entry == "stage 2")


def test_sidebands_at_or_below_zero_are_left_out():
    # mesh = 2 x input; sidebands -2 and -3 input would sit at 0 and -1 x input.
    machine = Machine("m", "a", (Shaft("a"), Shaft("b")),
                      (GearStage("g", "a", "b", 2, 2, harmonics=1, sidebands=3),))
    names = {line.name for line in machine.lines() if line.kind == "sideband"}
    assert names == {"g sideband -1 a", "g sideband +1 a", "g sideband +2 a", "g sideband +3 a",
                     "g sideband -1 b", "g sideband +1 b", "g sideband +2 b", "g sideband +3 b"}


def test_walk_from_driven_side_and_consistent_loop():
    # Reference on the output: input turns 67/23 * 71/19 times faster (inverse ratios).
    machine = Machine(
        "m", "output", (Shaft("input"), Shaft("countershaft"), Shaft("output")),
        (GearStage("stage 1", "input", "countershaft", 23, 67),
         GearStage("stage 2", "countershaft", "output", 19, 71),
         # a second, consistent path input -> output: 23*19 / (67*71) = 437 / 4757
         GearStage("bypass", "input", "output", 437, 4757)),
    )
    orders = machine.shaft_orders()
    assert orders["output"] == 1.0
    assert orders["input"] == pytest.approx(67 / 23 * 71 / 19, rel=1e-12)
    assert list(orders) == ["input", "countershaft", "output"]


@settings(max_examples=100, deadline=None)
@given(teeth=st.lists(st.tuples(st.integers(1, 150), st.integers(1, 150)), min_size=1, max_size=5))
def test_chain_mesh_identity(teeth):
    # Each parallel stage: Z_driver f_driver = Z_driven f_driven (REFERENCES.md, from memory).
    shafts = tuple(Shaft(f"s{i}") for i in range(len(teeth) + 1))
    stages = tuple(GearStage(f"g{i}", f"s{i}", f"s{i + 1}", a, b, harmonics=1)
                   for i, (a, b) in enumerate(teeth))
    orders = Machine("m", "s0", shafts, stages).shaft_orders()
    expected = 1.0
    for i, (a, b) in enumerate(teeth):
        assert a * orders[f"s{i}"] == pytest.approx(b * orders[f"s{i + 1}"], rel=1e-12)
        expected *= a / b
    assert orders[f"s{len(teeth)}"] == pytest.approx(expected, rel=1e-12)


# ------------------------------------------------------------------------------------------
# Planetary stages (Willis equation)
# ------------------------------------------------------------------------------------------


def planetary_machine(held, reference, zs=21, zp=33, zr=87, planets=3, harmonics=1):
    members = {"sun": "sun shaft", "carrier": "carrier shaft", "ring": "ring shaft"}
    members[held] = "fixed"
    shafts = tuple(Shaft(v) for v in members.values() if v != "fixed")
    stage = PlanetaryStage("ps", zs, zp, zr, planets, harmonics=harmonics, **members)
    return Machine("m", f"{reference} shaft", shafts, (stage,))


def test_willis_ring_fixed_worked_set():
    # McFadden & Smith, Proc. IMechE C 199(1):65-70, 1985 (from memory, REFERENCES.md):
    # ring fixed f_c = f_s Z_s/(Z_s + Z_r); f_m = Z_s |f_s - f_c|; planet spin f_m/Z_p;
    # planet pass N_p |f_r - f_c|.  Worked by hand with Fractions for Z = 21/33/87, N_p = 3.
    machine = planetary_machine("ring", "sun")
    f_c = Fraction(21, 108)
    f_m = 21 * (1 - f_c)
    assert machine.shaft_orders()["carrier shaft"] == pytest.approx(float(f_c), rel=1e-12)
    lines = by_name(machine)
    assert lines["ps mesh"].order == pytest.approx(float(f_m), rel=1e-12)  # = 1827/108
    assert lines["ps mesh"].order == pytest.approx(float(87 * f_c), rel=1e-12)  # Z_r |0 - f_c|
    assert lines["ps planet_pass"].order == pytest.approx(float(3 * f_c), rel=1e-12)
    assert lines["ps planet_spin"].order == pytest.approx(float(f_m / 33), rel=1e-12)
    assert lines["ps sun_fault"].order == pytest.approx(float(3 * f_m / 21), rel=1e-12)
    assert lines["ps planet_fault"].order == pytest.approx(float(2 * f_m / 33), rel=1e-12)
    assert lines["ps ring_fault"].order == pytest.approx(float(3 * f_m / 87), rel=1e-12)


def test_willis_ring_fixed_reduction_ratio():
    # Common practice, no source: a ring-held planetary reduces by 1 + Z_r/Z_s (12/24/60: 6:1).
    orders = planetary_machine("ring", "sun", 12, 24, 60).shaft_orders()
    assert orders["carrier shaft"] == pytest.approx(1 / 6, rel=1e-12)
    # walked the other way, from the carrier
    orders = planetary_machine("ring", "carrier", 12, 24, 60).shaft_orders()
    assert orders["sun shaft"] == pytest.approx(6.0, rel=1e-12)


def test_willis_sun_fixed_worked_set():
    # Willis equation (McFadden & Smith 1985, from memory) with f_s = 0:
    # -f_c/(f_r - f_c) = -Z_r/Z_s  =>  f_c = f_r Z_r/(Z_s + Z_r); 12/24/60: 5/6.
    machine = planetary_machine("sun", "ring", 12, 24, 60, planets=4)
    assert machine.shaft_orders()["carrier shaft"] == pytest.approx(5 / 6, rel=1e-12)
    lines = by_name(machine)
    assert lines["ps mesh"].order == pytest.approx(60 * (1 - 5 / 6), rel=1e-12)  # Z_r|f_r - f_c|
    assert lines["ps mesh"].order == pytest.approx(12 * 5 / 6, rel=1e-12)  # Z_s|0 - f_c|
    assert lines["ps planet_pass"].order == pytest.approx(4 * (1 - 5 / 6), rel=1e-12)


def test_willis_carrier_fixed_worked_set():
    # Willis equation with f_c = 0: f_s/f_r = -Z_r/Z_s (a star set: the ring turns the other
    # way at Z_s/Z_r of the sun speed; shaft orders are magnitudes). 12/24/60: 0.2.
    machine = planetary_machine("carrier", "sun", 12, 24, 60, planets=5)
    assert machine.shaft_orders()["ring shaft"] == pytest.approx(0.2, rel=1e-12)
    lines = by_name(machine)
    assert lines["ps mesh"].order == pytest.approx(12.0, rel=1e-12)  # Z_s f_s = Z_r |f_r|
    assert lines["ps planet_pass"].order == pytest.approx(5 * 0.2, rel=1e-12)  # N_p |f_r - 0|
    assert lines["ps planet_spin"].order == pytest.approx(12 / 24, rel=1e-12)


@settings(max_examples=150, deadline=None)
@given(
    zs=st.integers(1, 200),
    zp=st.integers(1, 200),
    zr=st.integers(1, 400),
    planets=st.integers(1, 8),
    held=st.sampled_from(["sun", "carrier", "ring"]),
    pick=st.integers(0, 1),
)
def test_planetary_mesh_identity(zs, zp, zr, planets, held, pick):
    # Willis equation solved independently with numpy.linalg.solve (general-purpose reference):
    #   Z_s f_s - (Z_s + Z_r) f_c + Z_r f_r = 0, held member = 0, reference member = 1;
    # then f_m = Z_s |f_s - f_c| = Z_r |f_r - f_c| (McFadden & Smith 1985, from memory).
    turning = [m for m in ("sun", "carrier", "ring") if m != held]
    reference = turning[pick]
    index = {"sun": 0, "carrier": 1, "ring": 2}
    a = np.zeros((3, 3))
    a[0] = [zs, -(zs + zr), zr]
    a[1, index[held]] = 1.0
    a[2, index[reference]] = 1.0
    f_s, f_c, f_r = np.linalg.solve(a, [0.0, 0.0, 1.0])
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", FoldlineWarning)  # arbitrary tooth counts
        machine = planetary_machine(held, reference, zs, zp, zr, planets)
    orders = machine.shaft_orders()
    solved = {"sun": f_s, "carrier": f_c, "ring": f_r}
    for m in turning:
        assert orders[f"{m} shaft"] == pytest.approx(abs(solved[m]), rel=1e-9)
    lines = by_name(machine)
    mesh = lines["ps mesh"].order
    assert mesh == pytest.approx(zs * abs(f_s - f_c), rel=1e-9)
    assert mesh == pytest.approx(zr * abs(f_r - f_c), rel=1e-9)
    assert lines["ps planet_pass"].order == pytest.approx(planets * abs(f_r - f_c), rel=1e-9)
    assert lines["ps planet_fault"].order == pytest.approx(2 * mesh / zp, rel=1e-9)


def test_planetary_frequencies_rejects_speeds_off_willis():
    with pytest.raises(InputError, match="do not satisfy the Willis equation"):
        planetary_frequencies(1.0, 0.5, 0.0, sun_teeth=21, planet_teeth=33, ring_teeth=87,
                              planets=3)


def test_planetary_frequencies_validation():
    with pytest.raises(InputError, match="planets = 0: must be a positive integer"):
        planetary_frequencies(1.0, 0.25, 0.0, sun_teeth=20, planet_teeth=20, ring_teeth=60,
                              planets=0)


def test_ring_teeth_not_standard_warns():
    with pytest.warns(FoldlineWarning, match=r"ring_teeth = 86 is not sun_teeth \+ 2 \* "
                                             r"planet_teeth = 87; kept as given"):
        PlanetaryStage("ps", 21, 33, 86, 3, sun="a", carrier="b", ring="fixed")


def test_ring_teeth_standard_does_not_warn():
    with warnings.catch_warnings():
        warnings.simplefilter("error", FoldlineWarning)
        PlanetaryStage("ps", 21, 33, 87, 3, sun="a", carrier="b", ring="fixed")


@pytest.mark.parametrize(
    "members, match",
    [
        ({"sun": "a", "carrier": "b", "ring": "c"}, r'no member is "fixed"; exactly one'),
        ({"sun": "fixed", "carrier": "b", "ring": "fixed"}, r'2 members are "fixed"'),
        ({"sun": "fixed", "carrier": "fixed", "ring": "fixed"}, r'3 members are "fixed"'),
        ({"sun": "a", "carrier": "a", "ring": "fixed"},
         r"carrier = \"a\": the two turning members must be on different shafts"),
    ],
)
def test_planetary_members_validation(members, match):
    with pytest.raises(MachineFileError, match=match):
        PlanetaryStage("ps", 21, 33, 87, 3, **members)


# ------------------------------------------------------------------------------------------
# Rotors, orders, fixed lines, shafts
# ------------------------------------------------------------------------------------------


def test_rotor_order_and_fixed_lines():
    # Rotor: count x shaft order; order source: order x shaft order (docs/machine-file.md).
    machine = Machine(
        "m", "input", (Shaft("input"), Shaft("output")),
        (GearStage("g", "input", "output", 10, 40, harmonics=1),
         Rotor("fan", "output", 7, harmonics=2, level_db=-3.0),
         OrderSource("slip", "input", 0.5),
         FixedLine("mains", 100.0, harmonics=3, level_db=-20.0)),
    )
    lines = by_name(machine)
    assert lines["fan rotor"].order == pytest.approx(7 * 0.25, rel=1e-12)
    assert lines["fan rotor x2"].order == pytest.approx(2 * 7 * 0.25, rel=1e-12)
    assert lines["fan rotor x2"].level_db == -3.0
    assert lines["slip order"].order == 0.5
    assert lines["mains line x3"].hz == 300.0
    assert lines["mains line x3"].order is None
    assert lines["mains line"].level_db == -20.0
    assert lines["input shaft"].order == 1.0
    assert lines["output shaft"].order == pytest.approx(0.25, rel=1e-12)
    names = [line.name for line in machine.lines()]
    assert names[:2] == ["input shaft", "output shaft"]  # shafts first, then sources in order
    assert names[2:] == ["g mesh", "fan rotor", "fan rotor x2", "slip order", "mains line",
                         "mains line x2", "mains line x3"]


def test_contract_names_of_bearing_harmonics():
    machine = one_shaft(Bearing("output NDE", "input", 9, 7.9375, 38.5, harmonics=2))
    names = [line.name for line in machine.lines()]
    assert names == ["input shaft", "output NDE ftf", "output NDE ftf x2", "output NDE bpfo",
                     "output NDE bpfo x2", "output NDE bpfi", "output NDE bpfi x2",
                     "output NDE bsf", "output NDE bsf x2"]
    lines = by_name(machine)
    assert lines["output NDE bpfo x2"].order == pytest.approx(2 * 3.572, rel=5e-4)  # Forbes 2012


def test_entries_and_line_lookup():
    machine = two_stage()
    assert list(machine.entries) == ["input", "countershaft", "output", "stage 1", "stage 2"]
    assert machine.line("stage 1 mesh x2").order == pytest.approx(46.0)
    with pytest.raises(MachineFileError, match=r"no line named 'stage 1 mesh x4'; did you mean "
                                               r"'stage 1 mesh x3'"):
        machine.line("stage 1 mesh x4")
    with pytest.raises(MachineFileError, match=r"no line named 'zzz' \(the machine has"):
        machine.line("zzz")


# ------------------------------------------------------------------------------------------
# Train errors
# ------------------------------------------------------------------------------------------


def test_unconnected_shaft_names_shaft_and_entries():
    machine = Machine("m", "input", (Shaft("input"), Shaft("idler"), Shaft("pump")),
                      (Bearing("pump DE", "pump", 8, 1.0, 5.0), Rotor("impeller", "pump", 5)))
    with pytest.raises(TrainError, match=r"shafts 'idler', 'pump' are not connected to the "
                                         r"reference shaft 'input'.*\[\[bearing\]\] 'pump DE', "
                                         r"\[\[rotor\]\] 'impeller'"):
        machine.shaft_orders()
    with pytest.raises(TrainError, match="not connected"):
        machine.lines()


def test_conflicting_loop_names_the_entries():
    machine = Machine(
        "m", "input", (Shaft("input"), Shaft("countershaft"), Shaft("output")),
        (GearStage("stage 1", "input", "countershaft", 23, 67),
         GearStage("stage 2", "countershaft", "output", 19, 71),
         GearStage("bypass", "input", "output", 1, 10)),
    )
    with pytest.raises(TrainError, match=r"shaft 'output' turns at order .* the entries "
                                         r"'(stage 1|stage 2|bypass)', '.*', '.*' conflict"):
        machine.shaft_orders()
    with pytest.raises(TrainError, match=r"'bypass'") as info:
        machine.shaft_orders()
    assert all(name in str(info.value) for name in ("'stage 1'", "'stage 2'", "'bypass'"))


def test_loop_within_tolerance_passes_and_beyond_fails():
    # 1e-9 relative tolerance between two routes (the brief's rule); planetary vs parallel path.
    def machine(carrier_teeth):
        return Machine(
            "m", "sun", (Shaft("sun"), Shaft("carrier")),
            (PlanetaryStage("ps", 12, 24, 60, 3, sun="sun", carrier="carrier", ring="fixed"),
             GearStage("bypass", "sun", "carrier", 1, carrier_teeth)),
        )
    assert machine(6).shaft_orders()["carrier"] == pytest.approx(1 / 6)  # 1 + 60/12 = 6
    with pytest.raises(TrainError, match="'ps', 'bypass' conflict|'bypass', 'ps' conflict"):
        machine(7).shaft_orders()


# ------------------------------------------------------------------------------------------
# Machine and entry validation (programmatic construction)
# ------------------------------------------------------------------------------------------


@pytest.mark.parametrize(
    "build, match",
    [
        (lambda: Machine("m", "a", ()), r"no \[\[shaft\]\]"),
        (lambda: Machine("m", "b", (Shaft("a"),)), r"reference = \"b\": is not a shaft"),
        (lambda: Machine("m", "inptu", (Shaft("input"),)), r"did you mean \"input\""),
        (lambda: Machine("m", "a", ("a",)), r"shafts must be Shaft objects"),
        (lambda: Machine("m", "a", (Shaft("a"),), ("x",)), r"sources must be GearStage"),
        (lambda: Machine("", "a", (Shaft("a"),)), r"\[machine\]: name = \"\": must be a non-empty"),
        (lambda: Machine("m", "a", (Shaft("a"), Shaft("a"))),
         r"\[\[shaft\]\] 'a': name = \"a\": also used by \[\[shaft\]\] 'a'"),
        (lambda: Machine("m", "a", (Shaft("a"),), (Rotor("a", "a", 3),)),
         r"\[\[rotor\]\] 'a': name = \"a\": also used by \[\[shaft\]\] 'a'"),
        (lambda: Machine("m", "a", (Shaft("a"),), (Rotor("r", "b", 3),)),
         r"\[\[rotor\]\] 'r': shaft = \"b\": no such \[\[shaft\]\]; shafts are 'a'"),
        (lambda: Machine("m", "a", (Shaft("a"),), (GearStage("g", "a", "c", 3, 4),)),
         r"\[\[gear_stage\]\] 'g': driven = \"c\": no such \[\[shaft\]\]"),
        (lambda: Machine("m", "a", (Shaft("a"),),
                         (PlanetaryStage("p", 12, 24, 60, 3, sun="a", carrier="z", ring="fixed"),)),
         r"\[\[planetary_stage\]\] 'p': carrier = \"z\": no such \[\[shaft\]\]"),
        (lambda: Shaft("fixed"), r"\"fixed\" is reserved"),
        (lambda: Shaft(" a"), r"without leading or trailing spaces"),
        (lambda: Shaft(3), r"name = 3: must be a non-empty string .* \(got an integer\)"),
        (lambda: GearStage("g", "a", "a", 3, 4), r"driven = \"a\": must be a different shaft"),
        (lambda: GearStage("g", "a", "b", 3.0, 4), r"driver_teeth = 3.0: must be a positive "
                                                   r"integer \(got a number\)"),
        (lambda: GearStage("g", "a", "b", True, 4), r"driver_teeth = true: .*got a boolean"),
        (lambda: GearStage("g", "a", "b", 3, 4, sidebands=-1), r"sidebands = -1: must be an "
                                                               r"integer >= 0"),
        (lambda: Rotor("r", "a", 3, harmonics=0), r"harmonics = 0: must be a positive integer"),
        (lambda: Rotor("r", "a", 3, level_db=math.nan), r"level_db = nan: must be a finite"),
        (lambda: OrderSource("o", "a", 0.0), r"order = 0.0: must be a positive number"),
        (lambda: FixedLine("l", -50.0), r"hz = -50.0: must be a positive number"),
        (lambda: Bearing("b", "a", 9, 2.0, 1.0), r"element_diameter = 2.0: must be smaller than "
                                                 r"pitch_diameter = 1.0"),
        (lambda: Bearing("b", "a", 9, 0.3, 1.5, rotating_race="both"),
         r"rotating_race = \"both\": must be \"inner\""),
        (lambda: Bearing("b", "a", 9, 0.3, 1.5, contact_angle_deg=-1),
         r"contact_angle_deg = -1: must be >= 0 and < 90"),
    ],
)
def test_construction_validation(build, match):
    with pytest.raises(MachineFileError, match=match):
        build()


def test_line_name_collision_is_reported():
    # A sideband name ends with a shaft name, so an odd entry name can repeat it.
    machine = Machine(
        "m", "a", (Shaft("a"), Shaft("b line")),
        (GearStage("s", "a", "b line", 2, 3, harmonics=1, sidebands=1),
         FixedLine("s sideband -1 b", 50.0)),
    )
    with pytest.raises(MachineFileError, match=re.escape(
            "[[line]] 's sideband -1 b': line name 's sideband -1 b line' is also a line of "
            "[[gear_stage]] 's'")):
        machine.lines()


def test_values_are_normalised_and_inputs_kept():
    stage = GearStage("g", "a", "b", np.int64(3), 4, level_db=np.int32(-2))
    assert type(stage.driver_teeth) is int and stage.level_db == -2.0
    assert type(stage.level_db) is float
    shafts = [Shaft("a"), Shaft("b")]
    machine = Machine("m", "a", shafts, [stage])
    assert machine.shafts == tuple(shafts) and isinstance(machine.sources, tuple)
    assert hash(machine) == hash(Machine("m", "a", tuple(shafts), (stage,)))


# ------------------------------------------------------------------------------------------
# Line
# ------------------------------------------------------------------------------------------


def test_line_hz_at_order_and_fixed():
    order_line = Line("x", "x", "order", 1, order=2.5)
    assert order_line.moves_with_speed
    # 2.5 x 1200 rpm / 60 = 50 Hz (common practice: Hz = order x rpm / 60)
    np.testing.assert_allclose(order_line.hz_at([600.0, 1200.0]), [25.0, 50.0])
    assert order_line.hz_at(1200.0).shape == ()
    fixed = Line("mains", "mains", "line", 1, hz=50.0)
    assert not fixed.moves_with_speed
    out = fixed.hz_at(np.zeros((2, 3)))
    assert out.shape == (2, 3) and np.all(out == 50.0)
    np.testing.assert_allclose(fixed.order_at([1500.0, 3000.0]), [2.0, 1.0])
    np.testing.assert_allclose(order_line.order_at([1.0, 2.0]), [2.5, 2.5])
    assert np.isinf(fixed.order_at(0.0))


@pytest.mark.parametrize(
    "kwargs, match",
    [
        ({"order": 1.0, "hz": 2.0}, r"give exactly one of order .* or hz"),
        ({}, r"give exactly one of order"),
        ({"order": -1.0}, r"order = -1.0: must be a positive number"),
        ({"hz": math.inf}, r"hz = inf: must be a positive number \(not inf or nan\)"),
        ({"order": 1.0, "kind": "blade"}, r'kind = "blade": must be one of shaft, mesh'),
        ({"order": 1.0, "harmonic": 0}, r"harmonic = 0: must be a positive integer"),
        ({"order": 1.0, "level_db": "3"}, r"level_db = \"3\": must be a finite number"),
        ({"order": 1.0, "name": ""}, r'line name = "": must be a non-empty string'),
    ],
)
def test_line_validation(kwargs, match):
    args = {"name": "x", "entry": "x", "kind": "order", "harmonic": 1}
    args.update(kwargs)
    with pytest.raises(InputError, match=match):
        Line(**args)
