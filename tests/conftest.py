"""Fixtures shared by the test modules: the demo machine, plan and run, and the test rig's files.

Paths and builders live in ``builders.py`` beside this file; the fixtures here hold results
that cost time to compute, made once per session (frozen objects, so sharing them is safe) or
written into each test's own folder.
"""

from __future__ import annotations

import shutil

import pytest

from builders import DEMO_MACHINE, DEMO_PLAN, DEMO_RATE_HZ, RIG_MACHINE, RIG_PLAN


@pytest.fixture(scope="session")
def demo_machine():
    """The demo machine (sample_runs/agitator_drive.toml)."""
    from workbench.machine import read_machine

    return read_machine(DEMO_MACHINE)


@pytest.fixture(scope="session")
def demo_plan():
    """The demo run-up plan (sample_runs/runup_plan.toml)."""
    from workbench.sampling import read_plan

    return read_plan(DEMO_PLAN)


@pytest.fixture(scope="session")
def demo_fold(demo_machine, demo_plan):
    """(machine, plan, fold map, collision table) of the demo files at the demo run's rate."""
    from workbench.sampling import find_collisions, fold_map

    fmap = fold_map(demo_machine, demo_plan, DEMO_RATE_HZ)
    return demo_machine, demo_plan, fmap, find_collisions(demo_machine, demo_plan, DEMO_RATE_HZ,
                                                          fmap=fmap)


@pytest.fixture()
def rig_files(tmp_path):
    """The test rig's machine and plan files copied into the test's folder as m.toml, p.toml."""
    machine, plan = tmp_path / "m.toml", tmp_path / "p.toml"
    shutil.copyfile(RIG_MACHINE, machine)
    shutil.copyfile(RIG_PLAN, plan)
    return machine, plan
