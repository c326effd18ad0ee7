"""Bad values through the command line: every refusal names the column and the
file line on stderr, exits non-zero and prints nothing on stdout (so a pipeline
never reads half a JSON document); the options that read such values work; a
closed pipe ends the command quietly.

The messages are our own; the months-since arithmetic is checked against
Python's calendar module (an independent implementation of the Gregorian
calendar), and the fit through a date term against numpy's least squares.
"""
import calendar
import datetime
import json
import subprocess

import numpy as np

from conftest import REPO, plumbline_binary, run_fit, run_raw


def sales_file(tmp_path, last_row, name="s.csv"):
    rows = ["price,area,quality"]
    for i in range(1, 13):
        rows.append(f"{2 + 3 * i - (i % 3) + 0.01 * ((i * 7) % 5)},{i},{i % 3}")
    rows.append(last_row)
    path = tmp_path / name
    path.write_text("\n".join(rows) + "\n")
    return path


def refused(path, *extra):
    result = run_raw("fit", str(path), "--target", "price", "--terms", "area,quality", "--format", "json", *extra)
    assert result.returncode != 0, result.stdout
    assert result.stdout == "", "nothing may reach stdout when the fit is refused"
    assert "panicked" not in result.stderr
    return result.stderr


def test_nan_and_infinity_are_refused_with_column_and_line(tmp_path):
    message = refused(sales_file(tmp_path, "NaN,inf,1"))
    assert "`price`" in message and "file line 14" in message and "--non-finite missing" in message
    message = refused(sales_file(tmp_path, "5,-inf,1"))
    assert "`area`" in message and "file line 14" in message


def test_an_overflowing_literal_is_refused(tmp_path):
    message = refused(sales_file(tmp_path, "9" + "0" * 5000 + ",5,1"))
    assert "`price`" in message and "file line 14" in message and "1.8e308" in message


def test_non_finite_values_read_as_missing_are_counted(tmp_path):
    doc = run_fit(sales_file(tmp_path, "NaN,inf,1"), "--target", "price", "--terms", "area,quality",
                  "--non-finite", "missing")
    assert doc["n_obs"] == 12 and doc["n_dropped"] == 1
    assert doc["non_finite_by_column"] == [["price", 1], ["area", 1]]
    assert doc["aliased"] == []
    text = run_raw("fit", str(sales_file(tmp_path, "NaN,inf,1")), "--target", "price", "--terms", "area,quality",
                   "--non-finite", "missing")
    assert "not finite and read as missing" in text.stdout


def test_spreadsheet_numbers_name_the_option_that_reads_them(tmp_path):
    path = tmp_path / "money.csv"
    path.write_text('price,area\n"$250,000",1200\n"$310,500",1500\n"$199,900",1000\n"$402,000",2100\n')
    result = run_raw("fit", str(path), "--target", "price", "--terms", "area", "--format", "json")
    assert result.returncode != 0 and result.stdout == ""
    assert "`$250,000`" in result.stderr and "file line 2" in result.stderr
    assert "--column-type price=formatted-number" in result.stderr
    doc = run_fit(path, "--target", "price", "--terms", "area", "--column-type", "price=formatted-number")
    slope, intercept = np.polyfit([1200, 1500, 1000, 2100], [250000, 310500, 199900, 402000], 1)
    assert abs(doc["coefficients"][1]["estimate"] - slope) < 1e-9 * abs(slope)
    assert abs(doc["coefficients"][0]["estimate"] - intercept) < 1e-9 * abs(intercept)

    spaced = tmp_path / "spaced.csv"
    spaced.write_text("price,area\n250 000,1200\n310 500,1500\n199 900,1000\n")
    result = run_raw("fit", str(spaced), "--target", "price", "--terms", "area", "--format", "json")
    assert result.stdout == "" and "`250 000`" in result.stderr and "formatted-number" in result.stderr


def test_latin1_is_refused_with_line_and_byte_then_read_with_the_option(tmp_path):
    path = tmp_path / "latin1.csv"
    districts = ["North", "Caf\u00e9 Row"]
    # "Café Row" on data rows 2 and 5 (file lines 3 and 6); "North", the more
    # frequent level, is the reference.
    rows = ["price,area,district"] + [f"{100 + 7 * i + (i % 2)},{10 + i},{districts[i in (1, 4)]}" for i in range(8)]
    path.write_bytes(("\n".join(rows) + "\n").encode("latin-1"))
    result = run_raw("fit", str(path), "--target", "price", "--terms", "area", "--category", "district",
                     "--format", "json")
    assert result.returncode != 0 and result.stdout == ""
    assert "line 3" in result.stderr and "byte 4" in result.stderr and "0xE9" in result.stderr
    doc = run_fit(path, "--target", "price", "--terms", "area", "--category", "district", "--encoding", "latin-1")
    assert [c["term"] for c in doc["coefficients"]] == ["intercept", "area", "district=Caf\u00e9 Row"]


def months_since(reference: datetime.date, day: datetime.date) -> float:
    """Whole calendar months plus the day's fraction of its month (Python's calendar)."""
    def position(d):
        return 12 * d.year + (d.month - 1) + (d.day - 1) / calendar.monthrange(d.year, d.month)[1]
    return position(day) - position(reference)


def test_date_terms_and_custom_date_formats_on_the_command_line(tmp_path):
    rng = np.random.default_rng(7)
    start = datetime.date(2023, 1, 1)
    days = sorted(start + datetime.timedelta(days=int(k)) for k in rng.integers(0, 1000, 40))
    months = np.array([months_since(start, d) for d in days])
    area = rng.uniform(800, 3000, 40)
    log_price = 11 + 0.0003 * area + 0.004 * months + rng.normal(0, 0.01, 40)
    path = tmp_path / "dated.csv"
    path.write_text("sale_date,price,area\n" + "".join(
        f"{d.strftime('%d/%m/%Y')},{float(np.exp(lp))!r},{float(a)!r}\n" for d, lp, a in zip(days, log_price, area)))
    doc = run_fit(path, "--target", "price", "--log-target", "--terms", "area",
                  "--date-term", "months:sale_date:2023-01-01", "--date-format", "sale_date=%d/%m/%Y")
    X = np.column_stack([np.ones(40), area, months])
    expected, *_ = np.linalg.lstsq(X, np.log(np.exp(log_price)), rcond=None)
    names = [c["term"] for c in doc["coefficients"]]
    assert names == ["intercept", "area", "sale_date (months since 2023-01-01)"]
    for got, want in zip(doc["coefficients"], expected):
        assert abs(got["estimate"] - want) < 1e-8 * max(1.0, abs(want)), (got, want)
    # Without the format the dates are not ISO 8601: the message says how to read them.
    result = run_raw("fit", str(path), "--target", "price", "--terms", "area",
                     "--date-term", "months:sale_date:2023-01-01", "--format", "json")
    assert result.returncode != 0 and result.stdout == ""
    assert "sale_date" in result.stderr and "--date-format" in result.stderr


def test_a_closed_pipe_ends_quietly():
    # The influence document of 3,000 sales is far larger than a pipe's buffer,
    # so `head` closes the pipe while plumbline is still writing.
    path = REPO / "notebooks-demo" / "data" / "sales.csv"
    pipeline = subprocess.run(
        f"'{plumbline_binary()}' fit '{path}' --target sale_price --terms living_area,age --format json --influence "
        "| head -c 20",
        shell=True, capture_output=True, text=True, executable="/bin/bash")
    assert len(pipeline.stdout) == 20
    assert "panicked" not in pipeline.stderr and "Broken pipe" not in pipeline.stderr, pipeline.stderr
    status = subprocess.run(
        f"set -o pipefail; '{plumbline_binary()}' fit '{path}' --target sale_price --terms living_area,age "
        "--format json --influence | head -c 1 >/dev/null", shell=True, executable="/bin/bash")
    assert status.returncode == 0
    full = run_raw("fit", str(path), "--target", "sale_price", "--terms", "living_area,age", "--format", "json", "--influence")
    assert len(full.stdout) > 1 << 17, "the document must outgrow the pipe buffer for this test to mean anything"
    json.loads(full.stdout)


def test_a_file_of_many_batches_reads_every_row_in_order_and_hashes_every_byte(tmp_path):
    """The reader splits records on one thread and parses on another, in
    batches of 4,096 records: 10,000 rows cross batch boundaries. Checked
    against hashlib's SHA-256 of the file and numpy's least squares."""
    import hashlib
    rng = np.random.default_rng(11)
    n = 10_000
    x = rng.normal(50, 10, n)
    y = 3 + 0.5 * x + rng.normal(0, 1, n)
    path = tmp_path / "many.csv"
    path.write_text("y,x\n" + "".join(f"{float(a)!r},{float(b)!r}\n" for a, b in zip(y, x)))
    doc = run_fit(path, "--target", "y", "--terms", "x")
    assert doc["n_obs"] == n and doc["data"]["rows"] == n
    assert doc["data"]["sha256"] == hashlib.sha256(path.read_bytes()).hexdigest()
    expected, *_ = np.linalg.lstsq(np.column_stack([np.ones(n), x]), y, rcond=None)
    for got, want in zip(doc["coefficients"], expected):
        assert abs(got["estimate"] - want) < 1e-10 * max(1.0, abs(want))
    # A ragged record past the first batch is still reported at its own line.
    lines = path.read_text().splitlines()
    lines[9000] += ",7"
    path.write_text("\n".join(lines) + "\n")
    result = run_raw("fit", str(path), "--target", "y", "--terms", "x", "--format", "json")
    assert result.returncode != 0 and result.stdout == "" and "line 9001" in result.stderr, result.stderr
