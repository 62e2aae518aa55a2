"""Default order cuts: order 1 and the order of every line a plan band follows."""

import tomllib

import pytest

from workbench.machine import machine_from_dict
from workbench.runs.cut_orders import default_cut_orders
from workbench.sampling import plan_from_dict

from builders import RIG_MACHINE

MACHINE = RIG_MACHINE.read_text()   # the small test rig (tests/data)

PLAN = """
[speed]
profile = "linear"
start_rpm = 600.0
end_rpm = 3000.0
duration_s = 10.0

[acquisition]
rates_hz = [5120.0]

[[band]]
name = "outer race"
around = "output NDE bpfo"
width_pct = 10.0

[[band]]
name = "mesh"
around = "stage 1 mesh"
width_pct = 5.0

[[band]]
name = "resonance"
hz = [800.0, 1200.0]
"""


@pytest.fixture
def machine_and_plan():
    return (machine_from_dict(tomllib.loads(MACHINE)), plan_from_dict(tomllib.loads(PLAN)))


def test_order_one_and_the_followed_lines(machine_and_plan):
    machine, plan = machine_and_plan
    # Output shaft at order 20/40 = 0.5. BPFO = n/2 (1 - d/D cos a) x shaft order
    # = 4.5 (1 - 7.94/39.04) x 0.5 = 1.79240 (Harris, Rolling Bearing Analysis, 4th ed., 2001,
    # ch. 25); the mesh of stage 1 is 20 teeth on the reference shaft: order 20 (common
    # practice, no source). The band in Hz follows no line and adds nothing.
    got = default_cut_orders(machine, plan)
    assert got == pytest.approx((1.0, 4.5 * (1 - 7.94 / 39.04) * 0.5, 20.0), abs=1e-6)


def test_orders_above_the_limit_are_left_out(machine_and_plan):
    machine, plan = machine_and_plan
    bpfo = 4.5 * (1 - 7.94 / 39.04) * 0.5   # as above
    assert default_cut_orders(machine, plan, max_order=10.0) == pytest.approx((1.0, bpfo), abs=1e-6)
    assert default_cut_orders(machine, plan, max_order=1.5) == (1.0,)
