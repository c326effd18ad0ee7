"""The drift report between two runs of the demo study (a check of the workflow on
invented data whose truth is known: the generator raises prices in the new quarter,
so the monthly sale-date trend must move beyond its old interval, and the data must show 300
more sales). Also reads fit bundles out of executed notebooks (nbformat 4)."""
import json

import nbformat

from conftest import REPO, run_raw

DATA = REPO / "notebooks-demo" / "data"
FLAGS = ["--target", "sale_price", "--log-target", "--log", "living_area", "--log", "lot_size",
         "--terms", "age,quality,bathrooms", "--category", "district",
         "--date-term", "months:sale_date:2023-01-01",
         "--reference", "district=Wickerholm", "--format", "json"]


def fit_json(path, out):
    r = run_raw("fit", str(path), *FLAGS)
    assert r.returncode == 0, r.stderr
    out.write_text(r.stdout)
    return json.loads(r.stdout)


def test_diff_reports_the_known_market_move(tmp_path):
    fit_json(DATA / "sales.csv", tmp_path / "q1.json")
    fit_json(DATA / "sales-next-quarter.csv", tmp_path / "q2.json")
    r = run_raw("diff", str(tmp_path / "q1.json"), str(tmp_path / "q2.json"), "--format", "json")
    assert r.returncode == 0, r.stderr
    fit = json.loads(r.stdout)["fits"][0]
    assert fit["data_changed"] and fit["data_old"][2] == 3000 and fit["data_new"][2] == 3300
    moved = {c["term"] for c in fit["coefficients"] if c["moved"]}
    assert "sale_date (months since 2023-01-01)" in moved
    text = run_raw("diff", str(tmp_path / "q1.json"), str(tmp_path / "q2.json")).stdout
    assert "sale_date (months since 2023-01-01)" in text and "3,000 records → 3,300 records" in text
    # Statistics are named in words, not by their JSON keys.
    assert "adjusted R²" in text and "typical miss" in text
    assert "adj_r_squared" not in text and "n_obs" not in text


def test_diff_reads_a_schema_1_run_against_a_current_run(tmp_path):
    """Runs saved before schema version 2 (README, "JSON output") still compare with current ones:
    the old document is rebuilt from a new one with the version-1 names."""
    new = fit_json(DATA / "sales-next-quarter.csv", tmp_path / "q2.json")
    assert new["schema_version"] == 4 and "model_df" in new and "df_model" not in new
    old = fit_json(DATA / "sales.csv", tmp_path / "q1.json")
    old["schema_version"] = 1
    old["df_model"], old["df_resid"] = old.pop("model_df"), old.pop("residual_df")
    (tmp_path / "q1.json").write_text(json.dumps(old))
    r = run_raw("diff", str(tmp_path / "q1.json"), str(tmp_path / "q2.json"), "--format", "json")
    assert r.returncode == 0, r.stderr
    fit = json.loads(r.stdout)["fits"][0]
    assert "sale_date (months since 2023-01-01)" in {c["term"] for c in fit["coefficients"] if c["moved"]}


def test_diff_reads_fit_bundles_from_notebooks(tmp_path):
    docs = [fit_json(DATA / name, tmp_path / f"{name}.json") for name in ("sales.csv", "sales-next-quarter.csv")]
    paths = []
    for i, doc in enumerate(docs):
        nb = nbformat.v4.new_notebook()
        cell = nbformat.v4.new_code_cell("model.report(0.95)")
        cell.outputs = [nbformat.v4.new_output("execute_result", data={
            "text/plain": "fit", "application/vnd.plumbline.fit+json": doc}, execution_count=1)]
        nb.cells = [cell]
        path = tmp_path / f"run{i}.ipynb"
        nbformat.write(nb, str(path))
        paths.append(path)
    r = run_raw("diff", str(paths[0]), str(paths[1]), "--format", "json")
    assert r.returncode == 0, r.stderr
    assert any(c["moved"] for c in json.loads(r.stdout)["fits"][0]["coefficients"])


def test_a_file_without_fits_is_explained(tmp_path):
    empty = tmp_path / "empty.json"
    empty.write_text("{}")
    r = run_raw("diff", str(empty), str(empty))
    assert r.returncode != 0 and "holds no Plumbline fit results" in r.stderr
