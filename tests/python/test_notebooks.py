"""The valuation study end to end, as a user runs it.

* The README's main-job command (`install/demo.sh`) runs the study notebook
  headlessly with `plumbline run`; nbformat's own validator (the format's
  reference implementation, from PyPI) must accept the executed notebook, and
  the HTML report must render in headless Chromium.
* A rerun on the next quarter's sales, compared with `plumbline diff`, must
  report the market move the generator put in (a workflow check on invented
  data whose truth is known — see notebooks-demo/generator/src/main.rs).
* The study's chosen model must recover the generator's true coefficients
  within their 95 % intervals (most of them: about 1 in 20 may miss by chance).
* nbclient (the Jupyter project's notebook executor) runs every demo notebook
  with our kernel; every cell must succeed.
"""
import json
import os
import pathlib
import shutil
import subprocess

import nbformat
import pytest
from nbclient import NotebookClient
from PIL import Image

from conftest import REPO, install_kernelspec, plumbline_binary, run_raw
from test_html_in_browser import screenshot

DEMO = REPO / "notebooks-demo"
STUDY = DEMO / "valuation-study.ipynb"
NOTEBOOKS = ["valuation-study.ipynb", "reading-a-fit.ipynb", "quarterly-rerun.ipynb", "market-areas.ipynb"]
TIMEOUT = 1800  # a fresh engine directory compiles plumbline in the first cell


def fit_bundles(notebook):
    """Every fit document in the notebook's outputs, in order."""
    docs = []
    for cell in notebook.cells:
        for output in cell.get("outputs", []):
            doc = output.get("data", {}).get("application/vnd.plumbline.fit+json")
            if doc is not None:
                docs.append(json.loads(doc) if isinstance(doc, str) else doc)
    return docs


@pytest.fixture(scope="module")
def study_run(tmp_path_factory):
    """The study, run by the README's main-job command into a scratch folder."""
    out = tmp_path_factory.mktemp("study")
    # The test command's own build stands in for the demo's optimised one
    # (CI would otherwise compile every dependency a second time).
    env = dict(os.environ, PLUMBLINE_STUDY_OUT=str(out), PLUMBLINE_BIN=str(plumbline_binary()))
    result = subprocess.run(["bash", str(REPO / "install" / "demo.sh")], env=env, capture_output=True,
                            text=True, timeout=TIMEOUT)
    assert result.returncode == 0, result.stdout[-3000:] + result.stderr[-3000:]
    return out / "valuation-study.ipynb", out / "valuation-study.html", result


def test_main_job_command_writes_a_valid_notebook_and_report(study_run):
    notebook_path, report_path, result = study_run
    notebook = nbformat.read(str(notebook_path), as_version=4)
    nbformat.validate(notebook)  # raises on any schema violation
    code = [c for c in notebook.cells if c.cell_type == "code"]
    assert all(c.execution_count for c in code)
    assert not any(o.get("output_type") == "error" for c in code for o in c.outputs)
    assert notebook.metadata["plumbline"]["run"]["status"] == "complete"
    # Progress lines name each cell as it starts.
    assert f"[{len(code)}/{len(code)}" in result.stderr
    html = report_path.read_text()
    assert "<script" not in html.lower()
    assert "not appraisals" in html and "<svg" in html and "Ratio study" in html


def test_report_renders_in_a_browser(study_run, tmp_path):
    _, report_path, _ = study_run
    png = tmp_path / "study.png"
    screenshot(report_path, png, tmp_path / "profile")
    pixels = list(Image.open(png).convert("L").tobytes())  # one byte per pixel in mode L
    dark = sum(1 for p in pixels if p < 128) / len(pixels)
    assert 0.003 < dark < 0.5, dark
    assert len(set(pixels)) > 20
    if os.environ.get("PLUMBLINE_SAVE_SCREENSHOT") == "1":
        shutil.copy(png, DEMO / "study-report.png")


def test_chosen_model_recovers_the_true_coefficients(study_run):
    """Check of the workflow against the generator's truth (notebooks-demo/data/truth.json,
    written by the generator from the constants of its model)."""
    notebook = nbformat.read(str(study_run[0]), as_version=4)
    chosen = [d for d in fit_bundles(notebook) if d["covariance"].startswith("HC3")]
    assert chosen, "the study shows no HC3 fit"
    truth = json.loads((DEMO / "data" / "truth.json").read_text())["coefficients"]
    rows = {c["term"]: c for c in chosen[0]["coefficients"]}
    assert set(rows) == set(truth), (set(rows) ^ set(truth))
    covered = [name for name, value in truth.items() if rows[name]["ci_low"] <= value <= rows[name]["ci_high"]]
    # 13 coefficients at 95 % (the distance from Lantern Green among them): ≥ 10 covered has
    # probability > 0.99 under correct coverage.
    assert len(covered) >= 10, f"covered only {covered}"
    for name, value in truth.items():
        assert abs(rows[name]["estimate"] - value) < 4 * rows[name]["std_error"], name


def test_rerun_on_next_quarter_reports_the_market_move(tmp_path):
    rerun = tmp_path / "rerun.ipynb"
    result = subprocess.run([str(plumbline_binary()), "run", str(STUDY), "-o", str(rerun), "--quiet",
                             "--set", "sales_file=data/sales-next-quarter.csv", "--set", "valuation_date=2026-04-01"],
                            capture_output=True, text=True, timeout=TIMEOUT)
    assert result.returncode == 0, result.stderr[-3000:]
    inputs = nbformat.read(str(rerun), as_version=4).metadata["plumbline"]["run"]["inputs_set"]
    assert {i["name"]: i["new"] for i in inputs} == {"sales_file": '"data/sales-next-quarter.csv"',
                                                     "valuation_date": '"2026-04-01"'}
    report = run_raw("diff", str(STUDY), str(rerun), "--format", "json")
    assert report.returncode == 0, report.stderr
    drift = json.loads(report.stdout)
    chosen = [f for f in drift["fits"] if f["data_changed"]]
    assert chosen, "no fit saw the refreshed data"
    moved = {c["term"] for f in drift["fits"] for c in f["coefficients"] if c["moved"]}
    # The generator raised prices by a further 3 % in the new quarter: the trend steepens.
    assert "sale_date (months since 2023-01-01)" in moved
    assert drift["ratio_studies"], "the ratio study was not compared"
    # Both runs value the whole roll; the 300 parcels sold in the new quarter were valued by the
    # model like every other parcel (the generator chases nothing), so the check finds no sign.
    chasing = drift["sales_chasing"]
    assert chasing["sold"]["count"] == 300 and chasing["unsold"]["count"] == 3040, chasing
    assert chasing["rank_sum"]["p_value"] > 0.001
    text = run_raw("diff", str(STUDY), str(rerun)).stdout
    assert "Ratio study 1" in text and "sale_date (months since 2023-01-01)" in text
    assert "No sign of sales chasing" in text


def test_a_failing_cell_stops_the_run_and_keeps_the_outputs(tmp_path):
    nb = nbformat.v4.new_notebook()
    nb.cells = [nbformat.v4.new_code_cell('println!("before");'),
                nbformat.v4.new_code_cell('let sales = load("no-such-file.csv")?;'),
                nbformat.v4.new_code_cell('println!("after");')]
    source = tmp_path / "broken.ipynb"
    nbformat.write(nb, str(source))
    before = source.read_bytes()
    out = tmp_path / "broken.run.ipynb"
    result = run_raw("run", str(source), "--quiet")
    assert result.returncode != 0
    assert "cell 2" in result.stderr and "no-such-file.csv" in result.stderr
    assert source.read_bytes() == before, "the input notebook must not change"
    ran = nbformat.read(str(out), as_version=4)
    nbformat.validate(ran)
    assert ran.cells[0].outputs[0]["text"] == "before\n"
    assert ran.cells[1].outputs[-1]["output_type"] == "error"
    assert ran.cells[2].outputs == [] and ran.cells[2].execution_count is None


def test_unknown_inputs_are_refused_before_anything_runs(tmp_path):
    result = run_raw("run", str(STUDY), "-o", str(tmp_path / "x.ipynb"), "--set", "sale_file=x.csv")
    assert result.returncode != 0
    assert "declares no input `sale_file`" in result.stderr and "sales_file" in result.stderr
    assert not (tmp_path / "x.ipynb").exists()
    same = run_raw("run", str(STUDY), "-o", str(STUDY))
    assert same.returncode != 0 and "--in-place" in same.stderr


@pytest.mark.parametrize("name", NOTEBOOKS)
def test_nbclient_executes_every_demo_notebook(name):
    install_kernelspec()
    notebook = nbformat.read(str(DEMO / name), as_version=4)
    client = NotebookClient(notebook, kernel_name="plumbline", timeout=TIMEOUT, startup_timeout=120,
                            resources={"metadata": {"path": str(DEMO)}})
    client.execute()  # raises CellExecutionError on the first failing cell
    for cell in notebook.cells:
        if cell.cell_type == "code":
            assert not any(o.get("output_type") == "error" for o in cell.outputs), cell.source
    nbformat.validate(notebook)
    if name == "market-areas.ipynb":
        check_market_areas(notebook)


def check_market_areas(notebook):
    """The market-areas notebook against the generator's documented truth (notebooks-demo/generator:
    every district shares the slopes and has a level of its own): the districts' levels differ, so one
    model for all is rejected; their slopes are equal, so the common-slopes test does not reject at 1 %."""
    sets = [output["data"]["application/vnd.plumbline.stratified-fit+json"]
            for cell in notebook.cells for output in cell.get("outputs", [])
            if "application/vnd.plumbline.stratified-fit+json" in output.get("data", {})]
    assert len(sets) == 1, len(sets)
    document = json.loads(sets[0]) if isinstance(sets[0], str) else sets[0]
    assert [s["group"] for s in document["strata"]] == [
        "Brambleknot", "Corvel Heights", "Mossgrieve", "Pellowick", "Tidewright Quay", "Wickerholm"]
    tests = {t["hypothesis"]: t for t in document["tests"]}
    assert tests["all_coefficients"]["p_value"] < 1e-6
    assert tests["slopes_given_levels"]["p_value"] > 0.01
    rolls = [output["data"]["application/vnd.plumbline.value-roll+json"]
             for cell in notebook.cells for output in cell.get("outputs", [])
             if "application/vnd.plumbline.value-roll+json" in output.get("data", {})]
    roll = json.loads(rolls[0]) if isinstance(rolls[0], str) else rolls[0]
    assert "within each district" in roll["model"] and all(p["value"] for p in roll["parcels"])
