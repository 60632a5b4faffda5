"""The notebooks in notebooks/ run from top to bottom without errors or warnings."""

from pathlib import Path

import pytest

nbformat = pytest.importorskip("nbformat")
nbclient = pytest.importorskip("nbclient")

NOTEBOOKS = sorted((Path(__file__).resolve().parents[2] / "notebooks").glob("*.ipynb"))

# Executed with the non-interactive Agg backend and every warning turned into an error
# (except those of the kernel's own machinery, which is not notebook code).
PRELUDE = (
    "import matplotlib, warnings\n"
    "matplotlib.use('Agg')\n"
    "warnings.simplefilter('error')\n"
    "warnings.filterwarnings('ignore', module='ipykernel')\n"
)


@pytest.mark.slow
@pytest.mark.parametrize("path", NOTEBOOKS, ids=[p.stem for p in NOTEBOOKS])
def test_notebook_runs(path, tmp_path):
    notebook = nbformat.read(path, as_version=4)
    assert not any(cell.get("outputs") for cell in notebook.cells if cell.cell_type == "code"), (
        f"{path.name} is stored with outputs; clear them before committing"
    )
    notebook.cells.insert(0, nbformat.v4.new_code_cell(PRELUDE))
    client = nbclient.NotebookClient(
        notebook,
        timeout=600,
        kernel_name="python3",
        resources={"metadata": {"path": str(tmp_path)}},
    )
    client.execute()
    for cell in notebook.cells:
        for output in cell.get("outputs", []):
            assert output.get("output_type") != "error", output
            if output.get("output_type") == "stream":
                assert output.get("name") != "stderr", output.get("text")
