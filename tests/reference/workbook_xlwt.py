"""Writes tests/data/sheets/xlwt.xls: an old-style Excel 97-2003 workbook
made by another program (xlwt, a general-purpose Python library), read by
provisio in tests/cli_sheets.rs. The product and numbers are invented test
data.

    /tmp/venv-sheets/bin/pip install xlwt==1.3.0
    /tmp/venv-sheets/bin/python tests/reference/workbook_xlwt.py

Sheet "Stock", header in row 1: product | month | consumed | stockout_days
  rows 2-4  "Ferrous sulfate 200 mg", months as date cells 2024-01-05,
            2024-02-05, 2024-03-05; consumed 500, 520, 480 as numbers;
            stockout_days 0
  rows 5-6  months as text "2024-04", "2024-05"; consumed 510.5, 530;
            stockout_days 0 and 15 (May has 31 days: scaled by 31/16)
  row 7     2024-06 as text, consumed the text "n/a" (refused)
"""

import datetime
import pathlib

import xlwt

OUT = pathlib.Path(__file__).resolve().parents[1] / "data" / "sheets" / "xlwt.xls"


def main():
    book = xlwt.Workbook()
    ws = book.add_sheet("Stock")
    date = xlwt.easyxf(num_format_str="yyyy-mm-dd")
    for c, h in enumerate(["product", "month", "consumed", "stockout_days"]):
        ws.write(0, c, h)
    name = "Ferrous sulfate 200 mg"
    rows = [
        (datetime.date(2024, 1, 5), 500, 0),
        (datetime.date(2024, 2, 5), 520, 0),
        (datetime.date(2024, 3, 5), 480, 0),
        ("2024-04", 510.5, 0),
        ("2024-05", 530, 15),
        ("2024-06", "n/a", 0),
    ]
    for r, (month, q, so) in enumerate(rows, start=1):
        ws.write(r, 0, name)
        if isinstance(month, datetime.date):
            ws.write(r, 1, month, date)
        else:
            ws.write(r, 1, month)
        ws.write(r, 2, q)
        ws.write(r, 3, so)
    OUT.parent.mkdir(parents=True, exist_ok=True)
    book.save(str(OUT))
    print(f"wrote {OUT} with xlwt {xlwt.__VERSION__}")


if __name__ == "__main__":
    main()
