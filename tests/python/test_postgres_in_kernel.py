"""A notebook cell reads sales from a real PostgreSQL server and fits them.

The server is the throwaway one `install/test.sh` starts on loopback
(`PLUMBLINE_TEST_POSTGRES_URL`); the table is written here with the server's
own client (`psql`'s \\copy of the demo CSV). The check is against something
outside the kernel: the fit the command line makes from the same CSV file.
"""
import json
import os
import subprocess

from jupyter_client.manager import start_new_kernel

from conftest import REPO, install_kernelspec, run_fit

install_kernelspec()
TIMEOUT = 1800  # the first cell of a fresh engine directory compiles plumbline

SALES = REPO / "notebooks-demo" / "data" / "sales.csv"
COLUMNS = (
    "parcel_id text, sale_date date, sale_price bigint, living_area bigint, lot_size bigint, year_built bigint, "
    "age bigint, quality bigint, bathrooms double precision, district text, x double precision, y double precision, "
    "sale_type text"
)


def server_url():
    url = os.environ.get("PLUMBLINE_TEST_POSTGRES_URL")
    assert url, ("PLUMBLINE_TEST_POSTGRES_URL is not set: the database tests need the PostgreSQL server "
                 "that install/test.sh starts (by hand: `source install/lib.sh && start_test_postgres`).")
    return url


def psql(url, *commands):
    program = os.environ.get("PLUMBLINE_TEST_POSTGRES_PSQL", "psql")
    args = [program, url, "-q", "-v", "ON_ERROR_STOP=1"]
    for command in commands:
        args += ["-c", command]
    subprocess.run(args, check=True, capture_output=True, text=True)


def test_a_cell_loads_from_postgresql_and_fits_as_the_csv_does():
    url = server_url()
    header = SALES.read_text().splitlines()[0]
    assert header == ",".join(c.split()[0] for c in COLUMNS.split(", ")), header
    psql(url, "DROP TABLE IF EXISTS kernel_sales",
         f"CREATE TABLE kernel_sales (seq serial PRIMARY KEY, {COLUMNS})",
         f"\\copy kernel_sales ({header}) FROM '{SALES}' WITH (FORMAT csv, HEADER true)")
    reference = run_fit(SALES, "--target", "sale_price", "--log-target", "--log", "living_area",
                        "--terms", "age,quality", "--category", "district")

    km, kc = start_new_kernel(kernel_name="plumbline", startup_timeout=120)
    try:
        outputs = []
        code = (
            'let url = std::env::var("PLUMBLINE_TEST_POSTGRES_URL")?;\n'
            f'let sales = plumbline::data::load_postgres(&url, "SELECT {header} FROM kernel_sales ORDER BY seq", &[])?;\n'
            # The command line's term order: --terms, then --log, then --category.
            'let spec = ModelSpec::new("sale_price").log_target().numeric("age").numeric("quality")'
            '.term(Term::numeric("living_area").log()).category("district");\n'
            "let model = fit(&sales, &spec)?;\n"
            "model.report(0.95)"
        )
        reply = kc.execute_interactive(code, timeout=TIMEOUT, output_hook=outputs.append)
        assert reply["content"]["status"] == "ok", reply["content"]
        result = next(m["content"]["data"] for m in outputs if m["msg_type"] == "execute_result")
        document = result["application/vnd.plumbline.fit+json"]
        document = json.loads(document) if isinstance(document, str) else document
        assert document["data"]["source"]["kind"] == "postgresql"
        assert document["data"]["source"]["database"] == "wrenmoor"
        assert "password" not in json.dumps(document["data"])
        got = {c["term"]: (c["estimate"], c["std_error"]) for c in document["coefficients"]}
        want = {c["term"]: (c["estimate"], c["std_error"]) for c in reference["coefficients"]}
        # Same rows in the same order: the same numbers to the last bit.
        assert got == want

        # A query error fails the cell with the server's own message.
        failed = kc.execute_interactive(
            'let nothing = plumbline::data::load_postgres(&url, "SELECT * FROM no_such_sales", &[])?;\n1',
            timeout=TIMEOUT)
        assert failed["content"]["status"] == "error", failed["content"]
        assert "no_such_sales" in failed["content"]["evalue"]
    finally:
        kc.stop_channels()
        km.shutdown_kernel(now=True)
