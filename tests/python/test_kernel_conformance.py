"""Conformance of the Plumbline kernel with the Jupyter messaging protocol, checked by
the protocol project's own harness (jupyter_kernel_test, from PyPI) and by
jupyter_client's blocking client and nbclient running a notebook.

The kernelspec is installed into a scratch prefix with `plumbline install`; the
engine's build directory is shared with the Rust kernel test ($PLUMBLINE_ENGINE_DIR).
"""
import unittest

import jupyter_kernel_test
import nbformat
from jupyter_client.manager import start_new_kernel
from nbclient import NotebookClient

from conftest import REPO, install_kernelspec

install_kernelspec()
TIMEOUT = 1800  # the first cell of a fresh engine directory compiles plumbline

SVG = '<svg xmlns=\\"http://www.w3.org/2000/svg\\" width=\\"10\\" height=\\"10\\"></svg>'


class PlumblineKernelTests(jupyter_kernel_test.KernelTests):
    kernel_name = "plumbline"
    language_name = "rust"
    file_extension = ".rs"
    timeout = TIMEOUT

    code_hello_world = 'println!("hello, world");'
    code_stderr = 'eprintln!("a note on stderr");'
    code_execute_result = [{"code": "6 * 7", "result": "42"}]
    code_display_data = [
        {"code": 'show(&plumbline::plot::Svg { markup: "' + SVG + '".to_string(), title: "t".to_string() });',
         "mime": "image/svg+xml"},
    ]
    complete_code_samples = ["let x = 1;", "fn f() { 1 }"]
    incomplete_code_samples = ["fn f() {", "let v = vec![1,"]
    invalid_code_samples = ["let x = 1; }"]
    completion_samples = [{"text": "plumbline_session_rea", "matches": {"plumbline_session_ready"}}]
    code_history_pattern = "6 *"
    supported_history_operations = ("tail", "range", "search")
    code_inspect_sample = "load"

    @classmethod
    def setUpClass(cls):
        cls.km, cls.kc = start_new_kernel(kernel_name=cls.kernel_name, startup_timeout=120)
        # Warm the engine before the harness's own timeouts apply.
        cls.kc.execute_interactive("1", timeout=TIMEOUT)

    def test_error_has_cell_coordinates(self):
        reply, output_msgs = self.execute_helper(code='let s: i32 = "text";', timeout=TIMEOUT)
        self.assertEqual(reply["content"]["status"], "error")
        self.assertIn("cell line 1", "\n".join(reply["content"]["traceback"]))


# (case, last data row as bytes, column named, further text the message must hold);
# the messages are our own, so these are behavioural checks.
BAD_VALUE_CASES = [
    ("nan", b"NaN,9", "price", "--non-finite missing"),
    ("infinity", b"30,inf", "area", "not a finite number"),
    ("negative-infinity", b"30,-inf", "area", "not a finite number"),
    ("overflow", b"9" + b"0" * 400 + b",9", "price", "1.8e308"),
    ("currency", b'"$1,200",9', "price", "formatted-number"),
    ("thousands", b"1 200,9", "price", "formatted-number"),
    ("latin-1", b"30,9\xe9", "area", "--encoding windows-1252"),
]


def test_a_fit_cell_sends_an_svg_display(tmp_path):
    km, kc = start_new_kernel(kernel_name="plumbline", startup_timeout=120)
    try:
        data = REPO / "notebooks-demo" / "data" / "sales.csv"
        outputs = []
        code = (
            f'let sales = load("{data}").unwrap();\n'
            'let spec = ModelSpec::new("sale_price").log_target().term(Term::numeric("living_area").log()).numeric("age");\n'
            "let model = fit(&sales, &spec).unwrap();\n"
            "show(&plumbline::plot::residuals_by_value(&model, Default::default()).unwrap());\n"
            "model.report(0.95)"
        )
        reply = kc.execute_interactive(code, timeout=TIMEOUT, output_hook=outputs.append)
        assert reply["content"]["status"] == "ok", reply["content"]
        kinds = {m["msg_type"]: m["content"] for m in outputs}
        assert "image/svg+xml" in kinds["display_data"]["data"]
        result = kinds["execute_result"]["data"]
        assert "text/html" in result and "application/vnd.plumbline.fit+json" in result
        # A `?` that returns an error fails the cell (the engine alone would report success).
        failed = kc.execute_interactive('let missing = load("no-such-file.csv")?;\n1', timeout=TIMEOUT)
        assert failed["content"]["status"] == "error", failed["content"]
        assert "no-such-file.csv" in failed["content"]["evalue"]
        # Every kind of bad value fails the cell with the column and the file
        # line, as in the library and on the command line.
        for case, last_row, column, more in BAD_VALUE_CASES:
            bad = tmp_path / f"{case}.csv"
            rows = "".join(f"{3 * i + 1 + i % 2},{i}\n" for i in range(1, 9))
            bad.write_bytes(b"price,area\n" + rows.encode() + last_row + b"\n")
            failed = kc.execute_interactive(
                f'let bad = load("{bad}")?;\nlet bad_fit = fit(&bad, &ModelSpec::new("price").numeric("area"))?;\n1',
                timeout=TIMEOUT)
            assert failed["content"]["status"] == "error", (case, failed["content"])
            evalue = failed["content"]["evalue"]
            assert f"`{column}`" in evalue and "line 10" in evalue and more in evalue, (case, evalue)
    finally:
        kc.stop_channels()
        km.shutdown_kernel(now=True)


def test_nbclient_runs_a_notebook():
    data = REPO / "notebooks-demo" / "data"
    cells = [
        f'let sales = load("{data / "sales.csv"}").unwrap();\nsales.height()',
        'let spec = ModelSpec::new("sale_price").log_target()\n'
        '    .term(Term::numeric("living_area").log()).numeric("age").category("district");',
        "let model = fit(&sales, &spec).unwrap();\nmodel.report(0.95)",
        "plumbline::plot::diagnostic_sheet(&model, &sales, &plumbline::plot::ReviewOptions::default().ids(\"parcel_id\")).unwrap()",
        f'let subjects = load("{data / "subjects.csv"}").unwrap();\nmodel.predict(&subjects, 0.95).unwrap()',
        "model.explain(0.95)",
    ]
    nb = nbformat.v4.new_notebook()
    nb.cells = [nbformat.v4.new_code_cell(c) for c in cells]
    nb.metadata["kernelspec"] = {"name": "plumbline", "display_name": "Plumbline (Rust)", "language": "rust"}
    client = NotebookClient(nb, kernel_name="plumbline", timeout=TIMEOUT, startup_timeout=120)
    client.execute()
    for cell in nb.cells:
        assert not any(o.get("output_type") == "error" for o in cell.outputs), cell.outputs
    assert any("image/svg+xml" in o.get("data", {}) for o in nb.cells[3].outputs)
