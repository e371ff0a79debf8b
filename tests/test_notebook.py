"""The demo notebook (notebooks/demo_fit.ipynb) runs from top to bottom without errors."""
import os

import pytest

ROOT = os.path.dirname(os.path.dirname(os.path.abspath(__file__)))
NOTEBOOK = os.path.join(ROOT, "notebooks", "demo_fit.ipynb")

nbformat = pytest.importorskip("nbformat", reason="nbformat is needed to read the notebook (pip install nbformat)")
nbclient = pytest.importorskip("nbclient", reason="nbclient is needed to run the notebook (pip install nbclient)")


def _python_kernel_available():
    try:
        from jupyter_client.kernelspec import KernelSpecManager
        return "python3" in KernelSpecManager().find_kernel_specs()
    except Exception:  # no jupyter_client or no kernel spec: nothing to run the notebook with
        return False


@pytest.mark.skipif(not _python_kernel_available(),
                    reason="no Jupyter 'python3' kernel is installed (pip install ipykernel)")
def test_demo_notebook_runs(monkeypatch):
    # the kernel imports wkbfit from this work tree, as the tests do
    pkg = os.path.join(ROOT, "pkg")
    monkeypatch.setenv("PYTHONPATH", os.pathsep.join(p for p in (pkg, os.environ.get("PYTHONPATH")) if p))
    nb = nbformat.read(NOTEBOOK, as_version=4)
    client = nbclient.NotebookClient(nb, kernel_name="python3", timeout=300,
                                     resources={"metadata": {"path": os.path.dirname(NOTEBOOK)}})
    client.execute()  # raises CellExecutionError on the first failing cell
    outputs = [o for cell in nb.cells if cell.cell_type == "code" for o in cell.get("outputs", [])]
    assert not [o for o in outputs if o.output_type == "error"]
    text = "".join(o.get("text", "") for o in outputs if o.output_type == "stream")
    assert "INVENTED DEMO DATA" in text
    assert "Status: converged" in text                     # the fit report
    assert "Predicted levels of MLR" in text               # predictions near dissociation
    assert "Near-dissociation fits" in text and "Method error against the data" in text
    images = [o for o in outputs if "image/png" in o.get("data", {})]
    assert images, "the notebook draws the potential with its levels and the normalised residuals"


def test_notebook_matches_its_builder(tmp_path):
    """notebooks/demo_fit.ipynb is what notebooks/build_demo_fit.py writes (edit the builder, then rebuild)."""
    import importlib.util
    spec = importlib.util.spec_from_file_location("build_demo_fit", os.path.join(ROOT, "notebooks",
                                                                                "build_demo_fit.py"))
    builder = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(builder)
    shipped = nbformat.read(NOTEBOOK, as_version=4)
    assert [c.source for c in shipped.cells] == [src for _, src in builder.CELLS]
    assert all(not c.get("outputs") for c in shipped.cells if c.cell_type == "code")
