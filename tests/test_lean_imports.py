"""A lean command: each verb imports only what it needs (structural, not timed).

Checked in a fresh interpreter through ``sys.modules``: registering every verb (what
``foldline --help`` does) loads no numerical library; ``alias`` loads numpy only; tracking
never loads scipy.signal (a second to import), scipy.stats (pulled in by scipy.signal's peak
finder), scipy.ndimage or matplotlib unless asked (an envelope band needs scipy.signal's
filters; ``--out`` draws figures), and the MDF4 and HDF5 libraries (asammdf, h5py) only when such
a file is read.
"""

import json
import os
import subprocess
import sys

import pytest

from builders import DEMO_RUN as RUN, ROOT

WATCH = ("numpy", "pandas", "scipy", "scipy.signal", "scipy.stats", "scipy.ndimage", "matplotlib",
         "ipywidgets", "dask", "pyarrow", "asammdf", "h5py")


def _loaded(code: str) -> set:
    env = dict(os.environ, PYTHONPATH=str(ROOT) + os.pathsep + os.environ.get("PYTHONPATH", ""))
    probe = (f"import sys, json\n{code}\n"
             f"sys.stdout.flush()\nsys.stderr.write('\\nLOADED ' + json.dumps("
             f"[m for m in {WATCH!r} if m in sys.modules]) + '\\n')")
    proc = subprocess.run([sys.executable, "-c", probe], env=env, capture_output=True, text=True,
                          cwd=str(ROOT), timeout=300)
    assert proc.returncode == 0, proc.stderr
    line = [ln for ln in proc.stderr.splitlines() if ln.startswith("LOADED ")][-1]
    return set(json.loads(line[len("LOADED "):]))


def test_help_loads_no_numerical_library():
    loaded = _loaded("import importlib\n"
                     "importlib.import_module('workbench.cli.main').build_parser()")
    assert loaded == set()


def test_alias_loads_numpy_only():
    loaded = _loaded("from workbench.cli import main\n"
                     "main(['alias', '5000', '9000', '--rate', '12800', '--json'])\n"
                     "main(['alias', '5000', '--rate', '12800'])")
    assert loaded == {"numpy"}


def test_tracking_path_does_not_load_scipy_signal_stats_or_plots():
    loaded = _loaded(f"from workbench.cli import main\n"
                     f"assert main(['track', {str(RUN)!r}, '--samples-per-rev', '64', '--json']) == 0")
    assert not loaded & {"scipy.signal", "scipy.stats", "scipy.ndimage", "matplotlib", "ipywidgets",
                         "dask", "asammdf", "h5py"}


def test_an_envelope_band_loads_scipy_signal_when_asked():
    loaded = _loaded(f"from workbench.cli import main\n"
                     f"assert main(['track', {str(RUN)!r}, '--samples-per-rev', '64', "
                     f"'--envelope', '300,1000', '--json']) == 0")
    assert "scipy.signal" in loaded and "matplotlib" not in loaded


def test_a_format_library_loads_only_when_its_file_is_read(tmp_path):
    h5py = pytest.importorskip("h5py")
    path = tmp_path / "r.h5"
    with h5py.File(path, "w") as f:
        f.create_dataset("x", data=[0.0, 1.0, 0.0]).attrs["rate_hz"] = 10.0
    loaded = _loaded(f"from workbench.runs import read_run\n"
                     f"assert read_run({str(path)!r}).channel_names == ('x',)")
    assert "h5py" in loaded and "asammdf" not in loaded
