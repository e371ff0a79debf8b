"""The three story notebooks run from top to bottom, draw their figures with wkbfit.plots, say that their
data are invented, and are what notebooks/build_stories.py writes."""
import importlib.util
import os

import pytest

ROOT = os.path.dirname(os.path.dirname(os.path.abspath(__file__)))
NOTEBOOKS = os.path.join(ROOT, "notebooks")

nbformat = pytest.importorskip("nbformat", reason="nbformat is needed to read the notebooks (pip install nbformat)")
nbclient = pytest.importorskip("nbclient", reason="nbclient is needed to run the notebooks (pip install nbclient)")


def _builder():
    spec = importlib.util.spec_from_file_location("build_stories", os.path.join(NOTEBOOKS, "build_stories.py"))
    module = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(module)
    return module


BUILDER = _builder()


def _python_kernel_available():
    try:
        from jupyter_client.kernelspec import KernelSpecManager
        return "python3" in KernelSpecManager().find_kernel_specs()
    except Exception:  # no jupyter_client or no kernel spec: nothing to run the notebooks with
        return False


@pytest.mark.skipif(not _python_kernel_available(), reason="no Jupyter 'python3' kernel (pip install ipykernel)")
@pytest.mark.parametrize("name", sorted(BUILDER.NOTEBOOKS))
def test_story_notebook_runs(monkeypatch, name):
    pkg = os.path.join(ROOT, "pkg")
    monkeypatch.setenv("PYTHONPATH", os.pathsep.join(p for p in (pkg, os.environ.get("PYTHONPATH")) if p))
    monkeypatch.setenv("MPLBACKEND", "Agg")
    nb = nbformat.read(os.path.join(NOTEBOOKS, name), as_version=4)
    client = nbclient.NotebookClient(nb, kernel_name="python3", timeout=300,
                                     resources={"metadata": {"path": NOTEBOOKS}})
    client.execute()  # raises CellExecutionError on the first failing cell
    outputs = [o for cell in nb.cells if cell.cell_type == "code" for o in cell.get("outputs", [])]
    assert not [o for o in outputs if o.output_type == "error"]
    assert "INVENTED DATA" in nb.cells[0].source
    images = [o for o in outputs if "image/png" in o.get("data", {})]
    assert images, "the notebook draws its figures"
    code = "\n".join(c.source for c in nb.cells if c.cell_type == "code")
    assert "plots." in code or ".plot(" in code  # the figures come from the API
    assert "plt.plot(" not in code and "ax.plot(" not in code  # not drawn by hand
    html = [o for o in outputs if "text/html" in o.get("data", {})]
    assert html, "the notebook shows at least one result object's HTML view"


@pytest.mark.parametrize("name", sorted(BUILDER.NOTEBOOKS))
def test_notebook_matches_its_builder(name):
    shipped = nbformat.read(os.path.join(NOTEBOOKS, name), as_version=4)
    assert [c.source for c in shipped.cells] == [src for _, src in BUILDER.NOTEBOOKS[name]]
    assert all(not c.get("outputs") for c in shipped.cells if c.cell_type == "code")
