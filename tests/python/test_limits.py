"""Limits a user can hit end in a message, never in a process killed without a word.

A file larger than the memory one load may take (`PLUMBLINE_MEMORY_LIMIT`, by
default 80 % of the memory available) is refused before it is read whole: by the
command line, and inside a notebook cell, where the kernel and every variable
in it survive. The budget is set small here so that a small file stands for a
file larger than the machine's memory. (Behavioural checks of our own
messages; the category of 10⁵ levels and the model with more columns than rows
are in tests/analysis/errors.rs.)
"""
import os
import subprocess

import numpy as np
from jupyter_client.manager import start_new_kernel

from conftest import install_kernelspec, plumbline_binary, run_raw, write_csv
from kernel_messages import TIMEOUT, run

SALES = os.path.join(os.path.dirname(__file__), "..", "..", "notebooks-demo", "data")


def big_sales(tmp_path, rows=200_000):
    rng = np.random.default_rng(20261205)
    area = rng.uniform(700, 3500, rows)
    price = 50_000 + 120 * area + rng.normal(0, 20_000, rows)
    return write_csv(tmp_path / "big.csv", {"price": price, "area": area})


def limited(value):
    return dict(os.environ, PLUMBLINE_MEMORY_LIMIT=value)


def test_a_csv_file_beyond_the_budget_is_refused_with_the_way_out(tmp_path):
    path = big_sales(tmp_path)  # about 8 MB of text
    refused = subprocess.run([str(plumbline_binary()), "fit", str(path), "--target", "price", "--terms", "area"],
                             capture_output=True, text=True, env=limited("2M"))
    assert refused.returncode != 0
    message = refused.stderr
    assert "big.csv" in message and "would need about" in message, message
    assert "2 MB" in message and "set by PLUMBLINE_MEMORY_LIMIT" in message, message
    assert "row batches" in message, message
    # The same fit within the default budget works.
    fitted = run_raw("fit", str(path), "--target", "price", "--terms", "area")
    assert fitted.returncode == 0, fitted.stderr


def test_a_parquet_file_beyond_the_budget_is_refused(tmp_path):
    sales = os.path.join(SALES, "sales.csv")
    parcels = os.path.join(SALES, "parcels.csv")
    values = tmp_path / "values.parquet"
    written = run_raw("value", sales, "--target", "sale_price", "--log-target", "--terms", "living_area,age",
                      "--parcels", parcels, "--out", str(values))
    assert written.returncode == 0, written.stderr
    refused = subprocess.run([str(plumbline_binary()), "fit", str(values), "--target", "estimate",
                              "--terms", "se_fit"], capture_output=True, text=True, env=limited("16K"))
    assert refused.returncode != 0
    assert "values.parquet" in refused.stderr and "would need about" in refused.stderr, refused.stderr


def test_a_bad_budget_setting_is_named(tmp_path):
    path = write_csv(tmp_path / "s.csv", {"price": [1.0, 2.0, 4.0], "area": [1.0, 3.0, 2.0]})
    refused = subprocess.run([str(plumbline_binary()), "fit", str(path), "--target", "price", "--terms", "area"],
                             capture_output=True, text=True, env=limited("plenty"))
    assert refused.returncode != 0
    assert "PLUMBLINE_MEMORY_LIMIT" in refused.stderr and "plenty" in refused.stderr, refused.stderr


def test_a_notebook_cell_loading_a_file_beyond_the_budget_gets_a_message_and_the_kernel_lives_on(tmp_path):
    path = big_sales(tmp_path)
    install_kernelspec()
    km, kc = start_new_kernel(kernel_name="plumbline", startup_timeout=120, env=limited("2M"))
    try:
        reply, _ = run(kc, "let kept = 41;", timeout=TIMEOUT)
        assert reply["content"]["status"] == "ok", reply["content"]
        reply, messages = run(kc, f'let big = load("{path}")?;\nbig.height()', timeout=TIMEOUT)
        assert reply["content"]["status"] == "error"
        shown = reply["content"]["evalue"] + "".join(
            m["content"].get("evalue", "") for m in messages if m["msg_type"] == "error")
        assert "would need about" in shown and "big.csv" in shown, shown
        reply, messages = run(kc, "kept + 1")
        assert reply["content"]["status"] == "ok", reply["content"]
        values = [m["content"]["data"]["text/plain"] for m in messages if m["msg_type"] == "execute_result"]
        assert values == ["42"]
    finally:
        kc.stop_channels()
        km.shutdown_kernel(now=True)
