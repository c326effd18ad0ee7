#!/usr/bin/env python3
"""Writes the starting corpus of every fuzz target under fuzz/corpus/TARGET/.

Run once from the repository root (`target/python/bin/python fuzz/seed_corpus.py`,
with pyarrow and xlsxwriter installed); the fuzzer grows the corpora from these
seeds and `fuzz/run` minimises them before they are committed. Every seed is
made from the demo town's invented data (notebooks-demo/) or written here.
"""
import hashlib
import io
import json
import pathlib

ROOT = pathlib.Path(__file__).resolve().parent.parent
CORPUS = ROOT / "fuzz" / "corpus"
DEMO = ROOT / "notebooks-demo"


def put(target, data):
    folder = CORPUS / target
    folder.mkdir(parents=True, exist_ok=True)
    if isinstance(data, str):
        data = data.encode("utf-8")
    (folder / ("seed-" + hashlib.sha1(data).hexdigest()[:16])).write_bytes(data)


def head(path, lines):
    with open(path, encoding="utf-8") as f:
        return "".join(next(f) for _ in range(lines))


def csv_seeds():
    # Byte 0: delimiter (bits 0-1: , ; tab |), no header (bit 2), encoding
    # (bits 3-4: 2 Latin-1, 3 Windows-1252), marker NA (bit 5), non-finite as
    # missing (bit 6). Byte 1: forced types of the first two columns, 3 bits
    # each (0 number, 1 integer, 2 text, 3 date, 4 formatted number, 5 and 6
    # day-first and month-first dates, 7 none).
    none = 0b111111
    sales = head(DEMO / "data" / "sales.csv", 8)
    put("csv_table", bytes([0, none]) + sales.encode())
    put("csv_table", bytes([2, none]) + sales.replace(",", "\t").encode())
    put("csv_table", bytes([1 | 0b100000, 0b100_111 ^ 0b111000]) +
        b"price;sold\n\"$1,234.50\";03/04/2024\nNA;12/11/2023\n\"$987\";01/01/2025\n")
    put("csv_table", bytes([3 << 3, none]) + "district,area\nCaf\xe9 Row,12\nNorth,13\n".encode("cp1252"))
    put("csv_table", bytes([0b100, 0b001_000]) + b"1,2.5\n3,4.5\n5,nan\n")
    put("csv_table", bytes([0b1000000, none]) + b"a,b\n1,inf\n2,3\n3,1e400\n")
    put("csv_table", bytes([0, 0b111_100]) + b"value,label\n\"12%\",x\n\"(1,200)\",\"a \"\"quoted\"\" b\"\n")
    put("csv_table", bytes([0, none]) + b"a,b,c\n1,2\n")


def workbook_seeds():
    import xlsxwriter  # noqa: PLC0415 (a tool of this script only)
    import datetime

    for variant in range(3):
        buffer = io.BytesIO()
        book = xlsxwriter.Workbook(buffer, {"in_memory": True})
        sheet = book.add_worksheet("Sales")
        dates = book.add_format({"num_format": "yyyy-mm-dd"})
        sheet.write_row(0, 0, ["parcel_id", "sale_price", "living_area", "sale_date", "district"])
        for r in range(1, 6):
            sheet.write(r, 0, f"WM-10{r:04d}")
            sheet.write_number(r, 1, 300000 + 1000 * r)
            sheet.write_number(r, 2, 1500 + 37 * r) if variant != 1 else sheet.write(r, 2, "n/a" if r == 3 else 1500 + 37 * r)
            sheet.write_datetime(r, 3, datetime.datetime(2024, r, 10), dates)
            sheet.write(r, 4, ["Wickerholm", "Corvel Heights"][r % 2])
        if variant == 2:
            sheet.write_formula(6, 1, "=1/0", None, "#DIV/0!")
            book.add_worksheet("Notes").write(0, 0, "prepared for the Wrenmoor study")
        book.close()
        put("workbook", buffer.getvalue())


def columnar_seeds():
    import pyarrow as pa  # noqa: PLC0415
    import pyarrow.feather as feather  # noqa: PLC0415
    import pyarrow.parquet as pq  # noqa: PLC0415
    import datetime

    table = pa.table({
        "sale_price": pa.array([402600.0, 520800.0, None, 311000.0]),
        "living_area": pa.array([2022, 2819, 1710, 1405], type=pa.int64()),
        "quality": pa.array([3, 3, 2, 4], type=pa.int8()),
        "district": pa.array(["Wickerholm", "Corvel Heights", "Wickerholm", None]),
        "sale_date": pa.array([datetime.date(2024, 4, 21), datetime.date(2025, 8, 27), None, datetime.date(2023, 1, 2)]),
        "arms_length": pa.array([True, False, True, True]),
    })
    for compression in ("none", "snappy"):
        buffer = io.BytesIO()
        pq.write_table(table, buffer, compression=compression)
        put("columnar", b"\x00" + buffer.getvalue())
    buffer = io.BytesIO()
    feather.write_feather(table, buffer, compression="uncompressed")
    put("columnar", b"\x01" + buffer.getvalue())


def documents_and_notebook_seeds():
    for name in ("quarterly-rerun", "reading-a-fit", "market-areas", "valuation-study"):
        notebook = json.loads((DEMO / f"{name}.ipynb").read_text(encoding="utf-8"))
        for cell in notebook["cells"]:
            for output in cell.get("outputs", []):
                for mime, document in output.get("data", {}).items():
                    if mime.startswith("application/vnd.plumbline."):
                        text = json.dumps(document, separators=(",", ":"))
                        if len(text) < 40_000:
                            put("documents", text)
        # The notebook without outputs, cut to its first cells, keeping the
        # inputs cell and the run record in the metadata.
        small = dict(notebook)
        small["cells"] = []
        for cell in notebook["cells"][:8]:
            cell = dict(cell)
            if cell.get("cell_type") == "code":
                cell["outputs"] = []
                cell["execution_count"] = None
            small["cells"].append(cell)
        put("notebook", json.dumps(small, indent=1))
    put("notebook", json.dumps({"nbformat": 4, "nbformat_minor": 5, "metadata": {}, "cells": [
        {"cell_type": "markdown", "metadata": {}, "source": ["# Study\n", "<script>alert(1)</script>"]},
        {"cell_type": "code", "metadata": {}, "execution_count": None, "outputs": [],
         "source": "// plumbline: study inputs\nlet sales_file = \"data/sales.csv\";\nlet level: f64 = 0.95;\n"}]}))


def term_seeds():
    # The columns of the fixed sales table in contracts/src/terms.rs.
    for text in [
        "log:area, age, cat:district=Brackenfold, log:area*cat:district",
        "area, pow:lot:0.5, center:age, std:area, poly:age:3, orth:age:2",
        "cat:district, months:sale_date:2023-01-01, days:sale_date:2024-01-01",
        "year:sale_date, quarter:sale_date=2024 Q1, month:sale_date",
        "dist:x:y:4.2:3.1:Lantern Green, logdist:x:y:1:1:Old Mill",
        "geodist:lon:lat:-93.63:42.03:Old Mill, loggeodist:lon:lat:-93.6:42:Ferry",
        "log:area*cat:district, age*lot",
    ]:
        put("term_syntax", text)


def wire_seeds():
    # contracts/src/wire.rs: a flag byte (1: re-sign with the session key), then
    # frames, each a 16-bit little-endian length and its bytes.
    def header(msg_type):
        return json.dumps({"msg_id": "a1", "session": "s1", "username": "analyst",
                           "date": "2026-01-01T00:00:00Z", "msg_type": msg_type, "version": "5.3"}).encode()

    def framed(flag, frames):
        return bytes([flag]) + b"".join(len(f).to_bytes(2, "little") + f for f in frames)

    for msg_type, content in [("execute_request", {"code": "let x = 1;", "silent": False}),
                              ("kernel_info_request", {}),
                              ("complete_request", {"code": "sales.he", "cursor_pos": 8})]:
        frames = [b"shell-peer", b"<IDS|MSG>", b"", header(msg_type), b"{}", b"{}", json.dumps(content).encode()]
        put("wire_frames", framed(1, frames))
        put("wire_frames", framed(0, frames))


def state_seeds():
    # The byte forms of analysis/src/state_bytes.rs: a four-byte tag, form
    # version 1, then little-endian counts (u64) and numbers (f64 bits).
    import struct

    def count(n):
        return struct.pack("<Q", n)

    def number(x):
        return struct.pack("<d", x)

    def text(t):
        return count(len(t.encode())) + t.encode()

    def factor_double(width, rows, seed):
        body = b"PLF1\x01" + count(0) + count(width) + count(width) + count(rows)
        for i in range(width):
            for j in range(i, width):
                body += number((seed + i * 3 + j) * (1.0 if i == j else 0.25))
        return body + count(rows) + number(rows) + number(0.0) + number(seed * 10.0) + number(0.0) + number(0.0)

    def factor_extended(width, rows):
        body = b"PLF1\x01" + count(1) + count(width) + count(width) + count(rows)
        for i in range(width):
            for j in range(i, width):
                body += number(2.0 + i + j) + number(1e-17)
        return body + count(rows) + number(rows) + number(0.0) + number(5.0) + number(0.0) + number(0.0)

    def residuals(k, middle):
        body = b"PLR2\x01" + count(k)
        for i in range(k):
            body += number(1e-9 * (i + 1)) + number(0.0)
        body += number(12.5) + number(0.0) + number(40.0) + number(0.0) + number(k + 0.5)
        if middle:
            body += count(1) + count(k * k) + b"".join(number(0.5 + i) for i in range(k * k))
        else:
            body += count(0)
        return body

    def coding():
        body = b"PLC0\x01" + count(1) + text("district") + count(2)
        body += text("Alder Rise") + count(7) + text("Cinder Row") + count(4)
        body += count(2) + text("age") + number(1.0) + number(60.0) + text("area") + number(640.0) + number(3900.0)
        body += count(2) + count(1) + text("age") + count(2) + count(1) + text("area") + count(1)
        return body + count(11)

    def pair(kind, first, second):
        return bytes([kind]) + struct.pack("<H", len(first)) + first + second

    put("round_states", pair(0, factor_double(3, 10, 1), factor_double(3, 20, 2)))
    put("round_states", pair(0, factor_double(3, 10, 1), factor_double(2, 4, 3)))
    put("round_states", pair(0, factor_extended(2, 5), factor_extended(2, 9)))
    put("round_states", pair(0, factor_extended(2, 5), factor_double(2, 4, 1)))
    put("round_states", pair(1, residuals(2, True), residuals(2, True)))
    put("round_states", pair(1, residuals(2, False), residuals(2, True)))
    put("round_states", pair(1, residuals(3, False), residuals(2, False)))
    put("round_states", pair(2, coding(), coding()))


if __name__ == "__main__":
    wire_seeds()
    csv_seeds()
    workbook_seeds()
    columnar_seeds()
    documents_and_notebook_seeds()
    term_seeds()
    state_seeds()
