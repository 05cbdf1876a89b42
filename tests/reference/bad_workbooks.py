"""Writes the hostile workbooks of tests/data/bad/ (catalogued in its
README, checked by tests/cli_hostile.rs). Plain Python: the .xlsx and .ods
parts are written by hand with zipfile, so each file holds exactly the
problem it is named for. The products and numbers are invented test data.

    python3 tests/reference/bad_workbooks.py

Files:
  far_cell.xlsx         the contract in A1:C4 and one stray cell at
                        XFD1048576 (the last column and row); the sheet's
                        dimension claims A1:XFD1048576
  far_formula.xlsx      the same with a formula in the stray cell and an
                        empty consumed cell (so formulas are read)
  unpacks_large.xlsx    ~6 MiB of repetitive sheet XML compressed to 30 KB
                        (refused with PROVISIO_MAX_UNPACKED_MIB=4; read by default)
  many_cells.xlsx       60,000 cells in 20,000 rows (refused with
                        PROVISIO_MAX_SHEET_CELLS=1000; read by default)
  hidden_first_sheet.xlsx  sheet 1 "Old" is hidden and holds other data;
                        sheet 2 "Data" is visible and active
  far_cell.ods          the contract in A1:C4, then 1,048,570 empty rows
                        repeated, then one cell at column 16384
  loose_tags.ods        far_cell.ods with its repeated rows written as an
                        empty element followed by a stray end tag, which
                        calamine reads past (a stricter count stopped there)
  zip_after_text.xlsx   far_cell.ods after 600 bytes of text: zip readers
                        find an archive that does not start the file
  xlsb_named_xlsx.xlsx  a binary workbook (.xlsb: BIFF12 records, MS-XLSB)
                        saved under an .xlsx name: the contract in A1:C4, one
                        stray cell at XFD1048576 and a formula's saved value
                        beside it; the sheet's dimension claims A1:XFD1048576
"""

import pathlib
import struct
import zipfile

OUT = pathlib.Path(__file__).resolve().parents[1] / "data" / "bad"

CT = """<?xml version="1.0" encoding="UTF-8" standalone="yes"?>
<Types xmlns="http://schemas.openxmlformats.org/package/2006/content-types">
<Default Extension="rels" ContentType="application/vnd.openxmlformats-package.relationships+xml"/>
<Default Extension="xml" ContentType="application/xml"/>
<Override PartName="/xl/workbook.xml" ContentType="application/vnd.openxmlformats-officedocument.spreadsheetml.sheet.main+xml"/>
{sheets}
</Types>"""
RELS = """<?xml version="1.0" encoding="UTF-8" standalone="yes"?>
<Relationships xmlns="http://schemas.openxmlformats.org/package/2006/relationships">
<Relationship Id="rId1" Type="http://schemas.openxmlformats.org/officeDocument/2006/relationships/officeDocument" Target="xl/workbook.xml"/>
</Relationships>"""
NS = 'xmlns="http://schemas.openxmlformats.org/spreadsheetml/2006/main" xmlns:r="http://schemas.openxmlformats.org/officeDocument/2006/relationships"'


def col(n):
    s = ""
    n += 1
    while n:
        n, r = divmod(n - 1, 26)
        s = chr(65 + r) + s
    return s


def cell(r, c, v):
    ref = f"{col(c)}{r + 1}"
    if isinstance(v, str) and v.startswith("="):
        return f'<c r="{ref}"><f>{v[1:]}</f></c>'
    if isinstance(v, str):
        return f'<c r="{ref}" t="inlineStr"><is><t>{v}</t></is></c>'
    return f'<c r="{ref}"><v>{v}</v></c>'


def sheet_xml(rows, dimension):
    """rows: list of (row index, [(col index, value)])."""
    body = "".join(
        f'<row r="{r + 1}">' + "".join(cell(r, c, v) for c, v in cells) + "</row>"
        for r, cells in rows
    )
    return f'<?xml version="1.0" encoding="UTF-8" standalone="yes"?>\n<worksheet {NS}><dimension ref="{dimension}"/><sheetData>{body}</sheetData></worksheet>'


def xlsx(name, sheets, active=0):
    """sheets: list of (sheet name, state, sheet xml)."""
    wb_sheets = "".join(
        f'<sheet name="{n}" sheetId="{i + 1}" state="{st}" r:id="rId{i + 1}"/>'
        for i, (n, st, _) in enumerate(sheets)
    )
    wb = f'<?xml version="1.0" encoding="UTF-8" standalone="yes"?>\n<workbook {NS}><bookViews><workbookView activeTab="{active}"/></bookViews><sheets>{wb_sheets}</sheets></workbook>'
    wb_rels = (
        '<?xml version="1.0" encoding="UTF-8" standalone="yes"?>\n<Relationships xmlns="http://schemas.openxmlformats.org/package/2006/relationships">'
        + "".join(
            f'<Relationship Id="rId{i + 1}" Type="http://schemas.openxmlformats.org/officeDocument/2006/relationships/worksheet" Target="worksheets/sheet{i + 1}.xml"/>'
            for i in range(len(sheets))
        )
        + "</Relationships>"
    )
    ct = CT.format(
        sheets="\n".join(
            f'<Override PartName="/xl/worksheets/sheet{i + 1}.xml" ContentType="application/vnd.openxmlformats-officedocument.spreadsheetml.worksheet+xml"/>'
            for i in range(len(sheets))
        )
    )
    with zipfile.ZipFile(OUT / name, "w", zipfile.ZIP_DEFLATED, compresslevel=9) as z:
        for part, text in [
            ("[Content_Types].xml", ct),
            ("_rels/.rels", RELS),
            ("xl/workbook.xml", wb),
            ("xl/_rels/workbook.xml.rels", wb_rels),
        ] + [(f"xl/worksheets/sheet{i + 1}.xml", x) for i, (_, _, x) in enumerate(sheets)]:
            info = zipfile.ZipInfo(part, date_time=(2024, 1, 1, 0, 0, 0))
            info.compress_type = zipfile.ZIP_DEFLATED
            z.writestr(info, text)


CONTRACT = [
    (0, [(0, "product"), (1, "month"), (2, "consumed")]),
    (1, [(0, "ORS"), (1, "2024-01"), (2, 5)]),
    (2, [(0, "ORS"), (1, "2024-02"), (2, 7)]),
    (3, [(0, "ORS"), (1, "2024-03"), (2, 6)]),
]


def main():
    xlsx(
        "far_cell.xlsx",
        [("Data", "visible", sheet_xml(CONTRACT + [(1048575, [(16383, "x")])], "A1:XFD1048576"))],
    )
    rows = [r for r in CONTRACT]
    rows[3] = (3, [(0, "ORS"), (1, "2024-03")])
    xlsx(
        "far_formula.xlsx",
        [("Data", "visible", sheet_xml(rows + [(1048575, [(16383, "=1+1")])], "A1:XFD1048576"))],
    )
    big = [(0, [(0, "product"), (1, "month"), (2, "consumed")])]
    n = 1
    for p in range(1, 201):
        for m in range(1, 13):
            # A long note in column Z of every row: big text, little information.
            big.append((n, [(0, f"P{p:04d}"), (1, f"2023-{m:02d}"), (2, 10 + m), (25, "x" * 2500)]))
            n += 1
    xlsx("unpacks_large.xlsx", [("Data", "visible", sheet_xml(big, f"A1:Z{n}"))])
    many = [(0, [(0, "product"), (1, "month"), (2, "consumed")])]
    n = 1
    for p in range(1, 1668):
        for m in range(1, 13):
            many.append((n, [(0, f"P{p:04d}"), (1, f"2023-{m:02d}"), (2, 10 + m)]))
            n += 1
    xlsx("many_cells.xlsx", [("Data", "visible", sheet_xml(many, f"A1:C{n}"))])
    old = [
        (0, [(0, "product"), (1, "month"), (2, "consumed")]),
        (1, [(0, "OLD"), (1, "2020-01"), (2, 1)]),
    ]
    xlsx(
        "hidden_first_sheet.xlsx",
        [
            ("Old", "hidden", sheet_xml(old, "A1:C2")),
            ("Data", "visible", sheet_xml(CONTRACT, "A1:C4")),
        ],
        active=1,
    )
    ods_far()
    ods_far(
        "loose_tags.ods",
        '<table:table-row table:number-rows-repeated="1048570"/></table:table-row>',
    )
    xlsb_far()


def record(typ, payload=b""):
    """One BIFF12 record (MS-XLSB 2.1.4): type and size as variable-length
    integers of 7 bits a byte, then the payload."""
    out = bytearray()
    if typ < 0x80:
        out.append(typ)
    else:
        out += bytes([(typ & 0x7F) | 0x80, typ >> 7])
    n = len(payload)
    while True:
        b, n = n & 0x7F, n >> 7
        out.append(b | (0x80 if n else 0))
        if not n:
            break
    return bytes(out) + payload


def wide(s):
    """XLWideString (MS-XLSB 2.5.168): a character count, then UTF-16LE."""
    return struct.pack("<I", len(s)) + s.encode("utf-16-le")


def xlsb_far():
    # BrtBundleSh (0x009C): visible, tab 1, relationship rId1, name Data;
    # BrtEndBundleShs (0x0090); BrtCalcProp (0x009D) ends the names.
    workbook = (
        record(0x0083)
        + record(0x008F)
        + record(0x009C, struct.pack("<II", 0, 1) + wide("rId1") + wide("Data"))
        + record(0x0090)
        + record(0x009D, b"\0" * 8)
        + record(0x0084)
    )
    cells = b""
    for r, row in CONTRACT + [(1048575, [(16383, "x")])]:
        cells += record(0x0000, struct.pack("<I", r) + b"\0" * 13)  # BrtRowHdr
        for c, v in row:
            if isinstance(v, str):
                cells += record(0x0006, struct.pack("<II", c, 0) + wide(v))  # BrtCellSt
            else:
                cells += record(0x0005, struct.pack("<IId", c, 0, float(v)))  # BrtCellReal
    # A formula's saved number (BrtFmlaNum, 0x0009) at XFD1048575, with an
    # empty formula, so the reader's formula pass meets a far cell too.
    cells += record(0x0000, struct.pack("<I", 1048574) + b"\0" * 13)
    cells += record(0x0009, struct.pack("<IIdH", 16383, 0, 2.0, 0) + struct.pack("<I", 0))
    sheet = (
        record(0x0081)  # BrtBeginSheet
        + record(0x0094, struct.pack("<IIII", 0, 1048575, 0, 16383))  # BrtWsDim
        + record(0x0091)  # BrtBeginSheetData
        + cells
        + record(0x0092)  # BrtEndSheetData
        + record(0x0082)  # BrtEndSheet
    )
    ct = """<?xml version="1.0" encoding="UTF-8" standalone="yes"?>
<Types xmlns="http://schemas.openxmlformats.org/package/2006/content-types">
<Default Extension="rels" ContentType="application/vnd.openxmlformats-package.relationships+xml"/>
<Default Extension="bin" ContentType="application/vnd.ms-excel.sheet.binary.macroEnabled.main"/>
<Override PartName="/xl/worksheets/sheet1.bin" ContentType="application/vnd.ms-excel.worksheet"/>
</Types>"""
    rels = RELS.replace("xl/workbook.xml", "xl/workbook.bin")
    wb_rels = (
        '<?xml version="1.0" encoding="UTF-8" standalone="yes"?>\n<Relationships xmlns="http://schemas.openxmlformats.org/package/2006/relationships">'
        '<Relationship Id="rId1" Type="http://schemas.openxmlformats.org/officeDocument/2006/relationships/worksheet" Target="worksheets/sheet1.bin"/>'
        "</Relationships>"
    )
    with zipfile.ZipFile(OUT / "xlsb_named_xlsx.xlsx", "w") as z:
        for part, data in [
            ("[Content_Types].xml", ct.encode()),
            ("_rels/.rels", rels.encode()),
            ("xl/workbook.bin", workbook),
            ("xl/_rels/workbook.bin.rels", wb_rels.encode()),
            ("xl/worksheets/sheet1.bin", sheet),
        ]:
            info = zipfile.ZipInfo(part, date_time=(2024, 1, 1, 0, 0, 0))
            info.compress_type = zipfile.ZIP_DEFLATED
            z.writestr(info, data)


def ods_far(name="far_cell.ods", repeated=None):
    rows = []
    for r, cells in CONTRACT:
        tds = ""
        for _, v in cells:
            if isinstance(v, str):
                tds += f'<table:table-cell office:value-type="string"><text:p>{v}</text:p></table:table-cell>'
            else:
                tds += f'<table:table-cell office:value-type="float" office:value="{v}"><text:p>{v}</text:p></table:table-cell>'
        rows.append(f"<table:table-row>{tds}</table:table-row>")
    rows.append(
        repeated
        or '<table:table-row table:number-rows-repeated="1048570"><table:table-cell table:number-columns-repeated="3"/></table:table-row>'
    )
    rows.append(
        '<table:table-row><table:table-cell table:number-columns-repeated="16383"/><table:table-cell office:value-type="string"><text:p>x</text:p></table:table-cell></table:table-row>'
    )
    content = (
        '<?xml version="1.0" encoding="UTF-8"?>\n<office:document-content xmlns:office="urn:oasis:names:tc:opendocument:xmlns:office:1.0" '
        'xmlns:table="urn:oasis:names:tc:opendocument:xmlns:table:1.0" xmlns:text="urn:oasis:names:tc:opendocument:xmlns:text:1.0" office:version="1.2">'
        '<office:body><office:spreadsheet><table:table table:name="Data">'
        + "".join(rows)
        + "</table:table></office:spreadsheet></office:body></office:document-content>"
    )
    manifest = (
        '<?xml version="1.0" encoding="UTF-8"?>\n<manifest:manifest xmlns:manifest="urn:oasis:names:tc:opendocument:xmlns:manifest:1.0" manifest:version="1.2">'
        '<manifest:file-entry manifest:full-path="/" manifest:media-type="application/vnd.oasis.opendocument.spreadsheet"/>'
        '<manifest:file-entry manifest:full-path="content.xml" manifest:media-type="text/xml"/></manifest:manifest>'
    )
    with zipfile.ZipFile(OUT / name, "w") as z:
        info = zipfile.ZipInfo("mimetype", date_time=(2024, 1, 1, 0, 0, 0))
        z.writestr(info, "application/vnd.oasis.opendocument.spreadsheet")
        for part, text in [("content.xml", content), ("META-INF/manifest.xml", manifest)]:
            info = zipfile.ZipInfo(part, date_time=(2024, 1, 1, 0, 0, 0))
            info.compress_type = zipfile.ZIP_DEFLATED
            z.writestr(info, text)
    if name != "far_cell.ods":
        return
    # The same archive after some text, as a file damaged in transfer or
    # built to pass a check of the first bytes.
    prefix = ("not a workbook: " * 40)[:600].encode()
    (OUT / "zip_after_text.xlsx").write_bytes(prefix + (OUT / "far_cell.ods").read_bytes())


if __name__ == "__main__":
    main()
