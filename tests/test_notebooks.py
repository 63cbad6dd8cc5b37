"""Every notebook executes top to bottom in a real kernel, on the invented demo data.

The notebooks are stored as jupytext py:percent files (diff-friendly, no
outputs). Each is read with jupytext and run with nbclient in a fresh kernel
of this very interpreter (a kernel spec written for the test, so a fresh
virtualenv needs no ``ipykernel install`` and no other installed kernel can be
picked up instead).
"""

from __future__ import annotations

import ast
import json
import sys
from pathlib import Path

import pytest

NOTEBOOKS = Path(__file__).resolve().parent.parent / "notebooks"
NAMES = ("chemist_isotherms", "formulator_comparison", "engineer_export_predict")
KERNEL = "python3"


def _kernel_manager(folder: Path):
    """A kernel manager for a kernel of exactly this interpreter (no installed kernel
    spec needed, none outside the test can get in the way)."""
    from jupyter_client import KernelManager
    from jupyter_client.kernelspec import KernelSpecManager

    spec = folder / "kernels" / KERNEL
    spec.mkdir(parents=True)
    (spec / "kernel.json").write_text(json.dumps({
        "argv": [sys.executable, "-m", "ipykernel_launcher", "-f", "{connection_file}"],
        "display_name": "Python 3 (crystkin tests)", "language": "python"}), encoding="utf-8")
    ksm = KernelSpecManager(kernel_dirs=[str(folder / "kernels")], ensure_native_kernel=False)
    return KernelManager(kernel_name=KERNEL, kernel_spec_manager=ksm)


def _code(path: Path) -> str:
    import jupytext

    nb = jupytext.read(path)
    return "\n".join(c.source for c in nb.cells if c.cell_type == "code")


@pytest.mark.parametrize("name", NAMES)
def test_notebook_runs_top_to_bottom(name, tmp_path):
    jupytext = pytest.importorskip("jupytext")
    nbclient = pytest.importorskip("nbclient")
    nb = jupytext.read(NOTEBOOKS / f"{name}.py")
    pytest.importorskip("ipykernel")
    work = tmp_path / "work"
    work.mkdir()
    client = nbclient.NotebookClient(nb, km=_kernel_manager(tmp_path), timeout=300,
                                     kernel_name=KERNEL,
                                     resources={"metadata": {"path": str(work)}})
    client.execute()
    errors = [o for c in nb.cells if c.cell_type == "code" for o in c.get("outputs", [])
              if o.get("output_type") == "error"]
    assert not errors
    images = [o for c in nb.cells if c.cell_type == "code" for o in c.get("outputs", [])
              if "image/png" in o.get("data", {})]
    assert images, "the notebook shows no figure"


@pytest.mark.parametrize("name", NAMES)
def test_notebook_says_its_data_are_invented(name):
    import jupytext

    nb = jupytext.read(NOTEBOOKS / f"{name}.py")
    first = nb.cells[0]
    assert first.cell_type == "markdown"
    assert "invented" in first.source.lower()


@pytest.mark.parametrize("name", NAMES)
def test_notebook_only_calls_the_library(name):
    """No analysis code in a notebook: no function or class definitions, no numpy or
    scipy of its own, no loops over data; imports come from kinetics or the standard
    library."""
    tree = ast.parse(_code(NOTEBOOKS / f"{name}.py").replace("%matplotlib inline", ""))
    allowed = {"kinetics", "pathlib", "tempfile", "warnings"}
    for node in ast.walk(tree):
        assert not isinstance(node, (ast.FunctionDef, ast.ClassDef, ast.Lambda, ast.While)), \
            f"{name}: defines {type(node).__name__}"
        if isinstance(node, ast.Import):
            for a in node.names:
                assert a.name.split(".")[0] in allowed, f"{name}: imports {a.name}"
        if isinstance(node, ast.ImportFrom):
            assert node.module.split(".")[0] in allowed, f"{name}: imports {node.module}"
