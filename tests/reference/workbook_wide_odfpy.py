"""Writes tests/data/sheets/wide_odfpy.ods: a wide (pivot) table as an
OpenDocument spreadsheet made by another program (odfpy, a general-purpose
Python library), read by provisio in tests/cli_wide.rs. The products and
numbers are invented test data.

    /tmp/venv-sheets/bin/pip install odfpy
    /tmp/venv-sheets/bin/python tests/reference/workbook_wide_odfpy.py

Sheet "Consumption": row 1 a title, row 2 blank, header in row 3:
  product | site | 2024-01-01 | 2024-02-01 | 2024-03-01 | 2024-04-01
  (the months as date cells)
  row 4  ORS, North: 300, 310, empty, 320 (float cells)
  row 5  ORS, South: 100, 0, 120, the text "n/a" (refused)
  row 6  Zinc, North: 40, 42, 44, 46
Sheet "Stockout days", header in row 1 (months as text "Jan 2024" ..):
  product | site | Jan 2024 | Feb 2024 | Mar 2024 | Apr 2024
  row 2  ORS, North: 0, 0, 0, 10
  row 3  ORS, South: 0, 0, 0, 0
  (Zinc has no row: its months are read with no stockout days)
"""

import pathlib

from odf.opendocument import OpenDocumentSpreadsheet
from odf.table import Table, TableCell, TableRow
from odf.text import P

OUT = pathlib.Path(__file__).resolve().parents[1] / "data" / "sheets" / "wide_odfpy.ods"


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


def empty():
    return TableCell()


def row(table, cells):
    r = TableRow()
    for c in cells:
        r.addElement(c)
    table.addElement(r)


def main():
    doc = OpenDocumentSpreadsheet()
    t = Table(name="Consumption")
    row(t, [text("Monthly consumption (invented test data)")])
    row(t, [empty()])
    months = ["2024-01-01", "2024-02-01", "2024-03-01", "2024-04-01"]
    row(t, [text("product"), text("site")] + [date(m) for m in months])
    row(t, [text("ORS"), text("North"), number(300), number(310), empty(), number(320)])
    row(t, [text("ORS"), text("South"), number(100), number(0), number(120), text("n/a")])
    row(t, [text("Zinc"), text("North"), number(40), number(42), number(44), number(46)])
    doc.spreadsheet.addElement(t)
    s = Table(name="Stockout days")
    row(s, [text(h) for h in ["product", "site", "Jan 2024", "Feb 2024", "Mar 2024", "Apr 2024"]])
    row(s, [text("ORS"), text("North"), number(0), number(0), number(0), number(10)])
    row(s, [text("ORS"), text("South"), number(0), number(0), number(0), number(0)])
    doc.spreadsheet.addElement(s)
    OUT.parent.mkdir(parents=True, exist_ok=True)
    doc.save(str(OUT))
    print(f"wrote {OUT}")


if __name__ == "__main__":
    main()
