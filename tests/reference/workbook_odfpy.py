"""Writes tests/data/sheets/odfpy.ods: an OpenDocument spreadsheet made by
another program (odfpy, a general-purpose Python library), read by
provisio in tests/cli_sheets.rs. The product and numbers are invented
test data.

    /tmp/venv-sheets/bin/pip install odfpy
    /tmp/venv-sheets/bin/python tests/reference/workbook_odfpy.py

Sheet "Consumption", header in row 1: product | month | consumed | reporting_rate
  rows 2-4  "Cotrimoxazole 480 mg", months as date cells 2024-01-10,
            2024-02-10, 2024-03-10; consumed 200, 210, 190 as float cells;
            reporting rate as percentage cells 0.8 (80%)
  rows 5-7  the same product, months as text "2024-04".."2024-06";
            consumed 205.5, 220, 215 as float cells; rate as the text "100%"
  row 8     2024-07 as text, consumed the boolean true (refused)
"""

import pathlib

from odf.opendocument import OpenDocumentSpreadsheet
from odf.table import Table, TableCell, TableRow
from odf.text import P

OUT = pathlib.Path(__file__).resolve().parents[1] / "data" / "sheets" / "odfpy.ods"


def text(s):
    c = TableCell(valuetype="string")
    c.addElement(P(text=s))
    return c


def number(x):
    c = TableCell(valuetype="float", value=x)
    c.addElement(P(text=str(x)))
    return c


def date(iso):
    c = TableCell(valuetype="date", datevalue=iso)
    c.addElement(P(text=iso))
    return c


def percent(x):
    c = TableCell(valuetype="percentage", value=x)
    c.addElement(P(text=f"{x * 100:.0f}%"))
    return c


def boolean(b):
    c = TableCell(valuetype="boolean", booleanvalue="true" if b else "false")
    c.addElement(P(text="TRUE" if b else "FALSE"))
    return c


def row(table, cells):
    r = TableRow()
    for c in cells:
        r.addElement(c)
    table.addElement(r)


def main():
    doc = OpenDocumentSpreadsheet()
    t = Table(name="Consumption")
    row(t, [text("product"), text("month"), text("consumed"), text("reporting_rate")])
    name = "Cotrimoxazole 480 mg"
    for d, q in [("2024-01-10", 200), ("2024-02-10", 210), ("2024-03-10", 190)]:
        row(t, [text(name), date(d), number(q), percent(0.8)])
    for m, q in [("2024-04", 205.5), ("2024-05", 220), ("2024-06", 215)]:
        row(t, [text(name), text(m), number(q), text("100%")])
    row(t, [text(name), text("2024-07"), boolean(True), text("100%")])
    doc.spreadsheet.addElement(t)
    OUT.parent.mkdir(parents=True, exist_ok=True)
    doc.save(str(OUT))
    print(f"wrote {OUT}")


if __name__ == "__main__":
    main()
