"""The one message style of validation errors (workbench/checks.py) and the one sample-rate rule.

Every refusal reads ``name = value: rule``; a bad sample rate is worded the same wherever it is
given (the fold map, the filter, folding, a run, the simulator, the angle layer).
"""

from pathlib import Path

import numpy as np
import pytest

from workbench import checks
from workbench.errors import InputError

DATA = Path(__file__).parent / "data"
RATE_MESSAGE = "rate_hz = -1.0: must be a positive, finite sample rate (Hz)"


def _machine_and_plan():
    from workbench.machine import read_machine
    from workbench.sampling import read_plan

    return (read_machine(DATA / "machine_gearbox.toml"),
            read_plan(DATA / "plan_runup_butterworth.toml"))


def _refusals():
    from workbench.angle import ShaftAngle
    from workbench.angle.overall import overall_level
    from workbench.runs import Run
    from workbench.runs.simulate import simulate_run
    from workbench.sampling import AntiAliasFilter, apparent_frequency, find_collisions, fold_map

    machine, plan = _machine_and_plan()
    angle = ShaftAngle.from_rpm(600.0, 1.0)
    return {
        "fold_map": lambda: fold_map(machine, plan, -1.0),
        "find_collisions": lambda: find_collisions(machine, plan, -1.0),
        "apparent_frequency": lambda: apparent_frequency(100.0, -1.0),
        "AntiAliasFilter.attenuation_db": lambda: AntiAliasFilter().attenuation_db(100.0, -1.0),
        "Run": lambda: Run(np.zeros((1, 10)), -1.0, ("a",)),
        "simulate_run": lambda: simulate_run(machine, plan, -1.0),
        "overall_level": lambda: overall_level(np.zeros(100), -1.0, angle),
    }


@pytest.mark.parametrize("where", sorted(_refusals()))
def test_a_bad_sample_rate_is_worded_once(where):
    with pytest.raises(InputError) as err:
        _refusals()[where]()
    assert str(err.value) == RATE_MESSAGE


def test_show_writes_values_as_a_toml_file_does():
    assert checks.show(True) == "true"
    assert checks.show("a\"b") == '"a\\"b"'
    assert checks.show(np.float64(2.5)) == "2.5"
    assert checks.show([1, "x", False]) == '[1, "x", false]'
    assert checks.show(np.zeros((2, 3))) == "array of shape (2, 3)"
    assert checks.show("x" * 100).endswith("...") and len(checks.show("x" * 100)) == 60


def test_field_error_keeps_field_value_and_rule():
    with pytest.raises(checks.FieldError) as err:
        checks.real("AntiAliasFilter", "cutoff", 1.5, low=0.0, high=1.0, low_open=True,
                    high_open=True)
    exc = err.value
    assert (exc.owner, exc.field, exc.value) == ("AntiAliasFilter", "cutoff", 1.5)
    assert str(exc) == "AntiAliasFilter: cutoff = 1.5: must be above 0 and below 1"
    assert str(checks.FieldError(None, "table", "is required")) == "table: is required"


@pytest.mark.parametrize("call, message", [
    (lambda: checks.positive_int(None, "n", 0), "n = 0: must be a positive integer"),
    (lambda: checks.positive_int(None, "n", "3"), 'n = "3": must be a positive integer '
                                                  "(got a string)"),
    (lambda: checks.positive_int(None, "n", 9, low=0, high=4), "n = 9: must be an integer from "
                                                               "0 to 4"),
    (lambda: checks.positive(None, "q", float("nan")), "q = nan: must be a positive number "
                                                       "(not inf or nan)"),
    (lambda: checks.positive(None, "q", 0, unit="s"), "q = 0: must be a positive number (s; > 0)"),
    (lambda: checks.choice(None, "kind", "besel", ("bessel", "none")),
     'kind = "besel": must be one of "bessel", "none" (did you mean "bessel"?)'),
    (lambda: checks.real_array([1.0, -2.0], "f_hz", "frequencies", "Hz"),
     "f_hz = -2.0: frequencies must be finite and not negative (Hz)"),
])
def test_rules_read_name_value_rule(call, message):
    with pytest.raises(checks.FieldError) as err:
        call()
    assert str(err.value) == message
