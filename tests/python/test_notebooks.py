"""The demo notebook through nbclient with the installed kernel, and `partita run`'s output
validated by nbformat."""
import subprocess

import nbformat
from nbclient import NotebookClient

from conftest import BINARY, OUT, ROOT

TOUR = ROOT / "notebooks" / "tour.ipynb"


def test_tour_executes_in_jupyter_without_error():
    nb = nbformat.read(TOUR, as_version=4)
    client = NotebookClient(nb, kernel_name="partita", timeout=120,
                            resources={"metadata": {"path": str(TOUR.parent)}})
    client.execute()
    codes = [c for c in nb.cells if c.cell_type == "code"]
    assert codes and all(c.outputs for c in codes)
    assert not any(o.output_type == "error" for c in codes for o in c.outputs)
    kinds = {k for c in codes for o in c.outputs for k in o.get("data", {})}
    assert {"text/html", "image/svg+xml", "text/markdown", "application/vnd.partita.result+json"} <= kinds
    # The arriving-batch section: the second export is summarised and the ANOVA rerun on it
    # shows was → now; both F values against scipy.stats.f_oneway on the files themselves.
    import csv
    from scipy import stats

    def f_of(name):
        groups = {}
        for r in csv.DictReader(open(TOUR.parent / "data" / name)):
            groups.setdefault(r["solution"], []).append(float(r["fvfm"]))
        return stats.f_oneway(*groups.values()).statistic

    bundles = [o["data"]["application/vnd.partita.result+json"] for c in codes for o in c.outputs
               if "application/vnd.partita.result+json" in o.get("data", {})]
    plates = [b for b in bundles if b.get("provenance", {}).get("dataset") == "plates"]
    reads = [b for b in plates if b["command"] == "read"]
    assert "rows: 24 → 48 (24 added, 0 removed or changed)" in reads[1]["notes"][0]
    fits = [b for b in plates if b["command"] == "anova"]
    assert [round(b["tables"]["anova"][0]["f"], 9) for b in fits] == [round(f_of(n), 9) for n in ("plates_run1.csv", "plates_run2.csv")]
    assert fits[1]["notes"][0].startswith("was solution: F(2, 21) = 7.38") and "now solution: F(2, 45) = 16.94" in fits[1]["notes"][0]


def test_partita_run_writes_a_valid_notebook_and_report():
    out_nb = OUT / "tour.out.ipynb"
    out_html = OUT / "tour.html"
    r = subprocess.run([str(BINARY), "run", str(TOUR), "--output", str(out_nb), "--html", str(out_html)],
                       capture_output=True, text=True, timeout=120)
    assert r.returncode == 0, r.stderr
    nb = nbformat.read(out_nb, as_version=4)
    nbformat.validate(nb)
    html = out_html.read_text()
    assert html.startswith("<!DOCTYPE html>")
    assert "<svg" in html and "F(2, 31)" in html
    assert "invented" in html


def test_partita_run_stops_at_a_failing_cell_and_names_it(tmp_path):
    nb = nbformat.v4.new_notebook()
    nb.cells = [nbformat.v4.new_markdown_cell("x"), nbformat.v4.new_code_cell("help"),
                nbformat.v4.new_code_cell("anova y across g"), nbformat.v4.new_code_cell("help")]
    p = tmp_path / "bad.ipynb"
    nbformat.write(nb, p)
    r = subprocess.run([str(BINARY), "run", str(p), "--output", str(tmp_path / "o.ipynb")],
                       capture_output=True, text=True, timeout=60)
    assert r.returncode != 0
    assert "cell 3 failed" in r.stderr
    out = nbformat.read(tmp_path / "o.ipynb", as_version=4)
    nbformat.validate(out)
    assert out.cells[2].outputs[0].output_type == "error"
    assert out.cells[3].outputs == []
    r = subprocess.run([str(BINARY), "run", str(p), "--keep-going", "--output", str(tmp_path / "k.ipynb")],
                       capture_output=True, text=True, timeout=60)
    assert r.returncode == 0
    assert nbformat.read(tmp_path / "k.ipynb", as_version=4).cells[3].outputs


def test_checked_in_kernelspec_installs_with_jupyter(tmp_path):
    import json
    import shutil
    exe = shutil.which("jupyter-kernelspec")
    assert exe, "jupyter-kernelspec (from jupyter_client) is not on PATH"
    r = subprocess.run([exe, "install", "--prefix", str(tmp_path), str(ROOT / "kernelspec" / "partita")],
                       capture_output=True, text=True, timeout=60)
    assert r.returncode == 0, r.stderr
    spec = json.loads((tmp_path / "share/jupyter/kernels/partita/kernel.json").read_text())
    assert spec["argv"][:2] == ["partita", "kernel"]
    assert spec["interrupt_mode"] == "message"
    for logo in ["logo-32x32.png", "logo-64x64.png", "logo-svg.svg"]:
        assert (tmp_path / "share/jupyter/kernels/partita" / logo).exists()


def test_partita_install_prefix_writes_absolute_argv(tmp_path):
    import json
    r = subprocess.run([str(BINARY), "install", "--prefix", str(tmp_path)], capture_output=True, text=True)
    assert r.returncode == 0, r.stderr
    spec = json.loads((tmp_path / "share/jupyter/kernels/partita/kernel.json").read_text())
    assert spec["argv"][0] == str(BINARY.resolve())
    assert spec["argv"][1:] == ["kernel", "--connection-file", "{connection_file}"]
    png = (tmp_path / "share/jupyter/kernels/partita/logo-64x64.png").read_bytes()
    assert png[:8] == b"\x89PNG\r\n\x1a\n"
