"""Fixtures shared by the test modules (the demo machine, plan and fold map), and how the tests
are shared out between parallel workers.

Paths and builders live in ``builders.py`` beside this file; the fixtures here hold results
that cost time to compute, made once per session (frozen objects, so sharing them is safe).

``make test`` runs the suite on every core (pytest-xdist, ``-n auto --dist loadgroup``). Each
test module goes to one worker whole, so a module-scoped fixture (a simulated run, a tracked
result, a written report) is made once, not once per worker; the modules that drive a browser
or a Jupyter server (marked ``browser``) all go to the same worker, one after another, so that
two of them never compete for the cores within their time limits.
"""

from __future__ import annotations

import functools
from pathlib import Path

import pytest

from builders import DEMO_MACHINE, DEMO_PLAN, DEMO_RATE_HZ


@functools.cache
def _drives_a_browser(module: Path) -> bool:
    """Whether a test module has tests marked ``browser`` (Chromium or a Jupyter server)."""
    return "mark.browser" in module.read_text(encoding="utf-8")


@pytest.hookimpl(optionalhook=True, tryfirst=True)
def pytest_xdist_make_scheduler(config, log):
    """With ``--dist loadgroup``: one work unit per test module, and one for every module that
    drives a browser.

    pytest-xdist's own ``xdist_group`` marks suffix the test ids through an attribute that
    pytest 9 no longer reads, so the grouping is made here, on the ids themselves.
    """
    if config.getvalue("dist") != "loadgroup":
        return None
    from xdist.scheduler import LoadScopeScheduling

    class ByModule(LoadScopeScheduling):
        def _split_scope(self, nodeid):
            module = nodeid.split("::", 1)[0]
            return "browser" if _drives_a_browser(config.rootpath / module) else module

    return ByModule(config, log)


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
