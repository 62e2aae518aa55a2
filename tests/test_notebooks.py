"""Every notebook runs top to bottom on the bundled demo files in a real kernel, unedited.

The notebooks are executed headless with nbclient in their own folder (they find the demo
files at ``../sample_runs``), in memory: nothing is written back.  A first cell added to the
in-memory copy records the kernel's interpreter, which must be this virtual environment's.
The three run at once, each in its own kernel (kernel start-up is mostly waiting).
"""

from __future__ import annotations

import asyncio
import sys
from pathlib import Path

import pytest

nbformat = pytest.importorskip("nbformat")
nbclient = pytest.importorskip("nbclient")

NOTEBOOKS = Path(__file__).resolve().parents[1] / "notebooks"
NAMES = ["01_plan_runup_test.ipynb", "02_gear_mesh_vs_fault_band.ipynb",
         "03_angle_domain_resampling.ipynb"]


def test_notebooks_are_the_three_named_ones():
    assert sorted(p.name for p in NOTEBOOKS.glob("*.ipynb")) == NAMES


@pytest.mark.parametrize("name", NAMES)
def test_notebook_is_saved_without_outputs(name):
    book = nbformat.read(NOTEBOOKS / name, as_version=4)
    nbformat.validate(book)
    code = [c for c in book.cells if c.cell_type == "code"]
    assert code and all(c.outputs == [] and c.execution_count is None for c in code)
    text = " ".join(c.source for c in book.cells if c.cell_type == "markdown")
    assert "**Safety.**" in text and "machine maker's limits" in text
    assert book.metadata.kernelspec.name == "python3"


async def _execute(name):
    book = nbformat.read(NOTEBOOKS / name, as_version=4)
    probe = nbformat.v4.new_code_cell("import sys; print(sys.executable)")
    book.cells.insert(0, probe)
    client = nbclient.NotebookClient(book, kernel_name="python3", timeout=120,
                                     resources={"metadata": {"path": str(NOTEBOOKS)}})
    await client.async_execute()  # raises CellExecutionError on the first failing cell
    return book


@pytest.fixture(scope="module")
def executed():
    """Each notebook executed (or the exception its execution raised), by name."""

    async def all_of_them():
        return await asyncio.gather(*(_execute(n) for n in NAMES), return_exceptions=True)

    return dict(zip(NAMES, asyncio.run(all_of_them())))


@pytest.mark.parametrize("name", NAMES)
def test_notebook_runs_in_a_real_kernel(name, executed):
    book = executed[name]
    if isinstance(book, BaseException):
        raise book
    printed = "".join(o.get("text", "") for o in book.cells[0].outputs).strip()
    assert Path(printed).resolve() == Path(sys.executable).resolve()
    for cell in book.cells:
        for out in cell.get("outputs", []):
            assert out.output_type != "error", out
            if out.output_type == "stream" and out.name == "stderr":
                assert "Traceback" not in out.text and "Warning" not in out.text, out.text
    # The panels were displayed as widgets.
    shown = [o for c in book.cells for o in c.get("outputs", [])
             if "application/vnd.jupyter.widget-view+json" in o.get("data", {})]
    assert shown
