"""The fold map panel in a real browser: JupyterLab serves a copy of notebook 01, headless
Chromium runs all cells, picks another rate in the panel's dropdown as a person would, and the
rendered picture (the img's src) and the collision table must change.

Needs the system Chromium at /usr/bin/chromium and the Python playwright package (no browser
download).  Without them the test is skipped on a developer machine and fails when ``CI`` is
set.  Recipe and its reasons: JupyterLab on 127.0.0.1 in a temporary folder with its own
runtime, config, data, settings and workspaces folders, no token, no port retries; every
request that does not go to 127.0.0.1 is aborted; the server is stopped with SIGTERM, then its
process group (and any kernel it left) is killed.
"""

from __future__ import annotations

import json
import os
import re
import shutil
import signal
import socket
import subprocess
import sys
import time
from pathlib import Path
from urllib.parse import urlparse

import pytest

pytestmark = pytest.mark.browser

from builders import ROOT
NOTEBOOK = "01_plan_runup_test.ipynb"
CHROMIUM = Path("/usr/bin/chromium")
FLAGS = ["--headless", "--no-sandbox", "--disable-gpu", "--disable-quic", "--no-first-run",
         "--disable-background-networking", "--disable-component-update", "--disable-sync"]
FIRST_WAIT_MS = 90_000   # kernel start and the notebook's cells on a loaded 2-core machine
WAIT_MS = 30_000


def _unavailable(reason: str):
    if os.environ.get("CI"):
        pytest.fail(f"{reason}; the browser test must run when CI is set")
    pytest.skip(reason)


def _free_port() -> int:
    with socket.socket() as s:
        s.bind(("127.0.0.1", 0))
        return s.getsockname()[1]


def _wait_for_port(port: int, proc, log: Path, timeout_s: float = 60.0) -> None:
    end = time.monotonic() + timeout_s
    while time.monotonic() < end:
        if proc.poll() is not None:
            raise AssertionError(f"JupyterLab exited ({proc.returncode}):\n{log.read_text()[-3000:]}")
        with socket.socket() as s:
            s.settimeout(0.5)
            if s.connect_ex(("127.0.0.1", port)) == 0:
                return
        time.sleep(0.2)
    raise AssertionError(f"JupyterLab did not open port {port} in {timeout_s:g} s:\n{log.read_text()[-3000:]}")


def _stop(proc) -> None:
    """SIGTERM the server; kill its process group, and kernels it left, after 20 s."""
    import psutil

    try:
        children = psutil.Process(proc.pid).children(recursive=True)
    except psutil.NoSuchProcess:
        children = []
    if proc.poll() is None:
        proc.send_signal(signal.SIGTERM)
        try:
            proc.wait(timeout=20)
        except subprocess.TimeoutExpired:
            os.killpg(proc.pid, signal.SIGKILL)
            proc.wait(timeout=10)
    for child in children:  # kernels run in sessions of their own
        try:
            child.terminate()
            child.wait(timeout=5)
        except psutil.TimeoutExpired:
            child.kill()
        except psutil.NoSuchProcess:
            pass


@pytest.fixture()
def lab(tmp_path):
    """A JupyterLab server on a copy of the notebooks folder; yields its base URL."""
    yield from start_lab(tmp_path, NOTEBOOK)


def start_lab(tmp_path, notebook, *, with_runs=False):
    """Start JupyterLab on a copy of ``notebook`` (a name in notebooks/, or the path of a
    notebook elsewhere) and the demo files (the recorded run too with ``with_runs``); yield its
    base URL, stop it afterwards."""
    if not CHROMIUM.exists():
        _unavailable(f"no Chromium at {CHROMIUM} (install the system package: apt-get install -y chromium)")
    try:
        import playwright.sync_api  # noqa: F401
    except ImportError:
        _unavailable("the playwright package is not installed (pip install -e '.[test]')")
    root = tmp_path / "root"
    (root / "notebooks").mkdir(parents=True)
    source = Path(notebook) if Path(notebook).is_absolute() else ROOT / "notebooks" / notebook
    shutil.copy(source, root / "notebooks" / source.name)
    shutil.copytree(ROOT / "sample_runs", root / "sample_runs",
                    ignore=None if with_runs else shutil.ignore_patterns("*.wav", "*.json"))
    settings = tmp_path / "lab-settings"
    notification = settings / "@jupyterlab" / "apputils-extension" / "notification.jupyterlab-settings"
    notification.parent.mkdir(parents=True)
    notification.write_text(json.dumps({"fetchNews": "false", "checkForUpdates": False}))
    env = dict(os.environ)
    for var, name in (("JUPYTER_RUNTIME_DIR", "runtime"), ("JUPYTER_CONFIG_DIR", "config"),
                      ("JUPYTER_DATA_DIR", "data"), ("IPYTHONDIR", "ipython")):
        env[var] = str(tmp_path / name)
    port = _free_port()
    cmd = [sys.executable, "-m", "jupyterlab", "--no-browser", f"--port={port}",
           "--ServerApp.ip=127.0.0.1", "--ServerApp.port_retries=0", "--IdentityProvider.token=",
           "--ServerApp.allow_root=True", f"--ServerApp.root_dir={root}",
           f"--LabApp.user_settings_dir={settings}", f"--LabApp.workspaces_dir={tmp_path / 'workspaces'}"]
    log = tmp_path / "jupyterlab.log"
    with open(log, "wb") as out:
        proc = subprocess.Popen(cmd, cwd=root, env=env, stdout=out, stderr=subprocess.STDOUT,
                                start_new_session=True)
    try:
        _wait_for_port(port, proc, log)
        yield f"http://127.0.0.1:{port}"
    finally:
        _stop(proc)


def _local_only(route):
    if urlparse(route.request.url).hostname == "127.0.0.1":
        route.continue_()
    else:
        route.abort()


def open_and_run_all(browser, lab, notebook, *, width, height):
    """A page of ``width`` x ``height`` px on ``notebook`` (only 127.0.0.1 reachable), all of
    whose cells were started with Run All Cells once the kernel was idle."""
    context = browser.new_context(viewport={"width": width, "height": height})
    context.route("**/*", _local_only)
    page = context.new_page()
    page.goto(f"{lab}/lab/tree/notebooks/{notebook}")
    # Run All only once the kernel is really idle (an early "idle" runs nothing).
    page.get_by_text("Python 3 (ipykernel) | Idle", exact=True).wait_for(timeout=FIRST_WAIT_MS)
    page.locator(".lm-MenuBar-itemLabel", has_text=re.compile(r"^Run$")).click()
    page.locator(".lm-Menu-itemLabel", has_text=re.compile(r"^Run All Cells$")).click()
    return page


def _src(page) -> str:
    return page.locator("img.foldline-figure").first.get_attribute("src") or ""


def _wait_new_src(page, old: str) -> None:
    page.wait_for_function(
        """old => { const i = document.querySelector('img.foldline-figure');
                    return i && i.src && i.src !== old && i.complete && i.naturalWidth > 0; }""",
        arg=old, timeout=WAIT_MS)


def test_rate_dropdown_changes_picture_and_table_in_jupyterlab(lab, tmp_path):
    from playwright.sync_api import sync_playwright

    with sync_playwright() as pw:
        browser = pw.chromium.launch(executable_path=str(CHROMIUM), headless=True, args=FLAGS)
        try:
            page = open_and_run_all(browser, lab, NOTEBOOK, width=1600, height=1100)
            page.wait_for_function(
                """() => { const i = document.querySelector('img.foldline-figure');
                           return i && i.src && i.complete && i.naturalWidth > 0; }""",
                timeout=FIRST_WAIT_MS)
            panel = page.locator(".foldline-foldmap-panel")
            panel.scroll_into_view_if_needed()
            verdict = page.locator(".foldline-verdict-box")
            table = page.locator(".foldline-table-box")
            verdict.get_by_text("10240 Hz is clean").wait_for(timeout=WAIT_MS)
            before_src, before_table = _src(page), table.inner_text()
            assert "0 shown" in before_table
            page.screenshot(path=str(tmp_path / "01_opened.png"))

            # A person picks 2560 Hz from the plan's rates.
            page.locator(".foldline-rate-choice select").select_option(label="2560 Hz")
            _wait_new_src(page, before_src)
            verdict.get_by_text("2560 Hz is not clean").wait_for(timeout=WAIT_MS)
            after_table = table.inner_text()
            assert after_table != before_table
            assert "stage 1 mesh x3" in after_table and "housing resonance" in after_table
            assert "24 shown" in after_table
            page.screenshot(path=str(tmp_path / "02_rate_2560.png"))

            # And switches the vertical axis to orders: only the picture changes.
            src = _src(page)
            page.locator(".widget-toggle-buttons button", has_text=re.compile(r"^\s*orders\s*$")).click()
            _wait_new_src(page, src)
            assert table.inner_text() == after_table
            page.screenshot(path=str(tmp_path / "03_orders_view.png"))
            errors = page.locator("[data-mime-type='application/vnd.jupyter.stderr']").all_inner_texts()
            assert not [e for e in errors if "Traceback" in e or "Error" in e], errors
        finally:
            browser.close()
