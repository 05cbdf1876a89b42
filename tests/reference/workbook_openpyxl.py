"""Writes tests/data/sheets/openpyxl.xlsx: a workbook made by another
program (openpyxl, a general-purpose Python library), read by provisio in
tests/cli_sheets.rs. The products and numbers are invented test data.

    python3 -m venv /tmp/venv-sheets
    /tmp/venv-sheets/bin/pip install openpyxl
    /tmp/venv-sheets/bin/python tests/reference/workbook_openpyxl.py

What it holds (the Rust test states the values it expects beside each check):

sheet "Data" (the first sheet)
  row 1   a title, row 2 blank, row 3 the header:
          Product | Month | Consumed | Stockout days | Reporting rate | Note
  rows 4-9    "Amoxicillin 250 mg": months as real date cells (the 1st,
              15th, ... of Jan-Jun 2024), quantities as whole numbers,
              reporting rate as number cells formatted as percentages
  rows 10-15  "ORS sachet": months as text "2024-01".."2024-06", quantities
              as decimal numbers, reporting rate as text "95%"
  row 16  "Zinc 20 mg", 2024-01, consumed as the text "1,250" (refused
          unless --numbers grouped)
  row 17  "Zinc 20 mg", 2024-02, consumed as the formula =C16*2, which
          openpyxl saves without a calculated value (refused)
  row 18  "Zinc 20 mg", 2024-03, consumed as the error value #N/A (refused)
  row 19  "Zinc 20 mg", 2024-04, consumed as the boolean TRUE (refused)
  row 20  blank
  row 21  "Zinc 20 mg", 2024-05, consumed 300 as a number, month as a date
          with a time of day (2024-05-31 18:30)

sheet "Other" (the second sheet)
  header in row 1: product | month | consumed
  "Paracetamol 500 mg", 2023-01 .. 2023-12 as date cells, consumed
  100, 110, ..., 210 (number cells)
"""

import datetime
import pathlib

import openpyxl

OUT = pathlib.Path(__file__).resolve().parents[1] / "data" / "sheets" / "openpyxl.xlsx"


def main():
    wb = openpyxl.Workbook()
    ws = wb.active
    ws.title = "Data"
    ws["A1"] = "Monthly consumption, invented test data"
    ws.append([])
    ws.append(["Product", "Month", "Consumed", "Stockout days", "Reporting rate", "Note"])
    amox = [120, 135, 128, 0, 150, 142]
    for i, q in enumerate(amox):
        day = [1, 15, 31, 1, 20, 30][i]
        row = ["Amoxicillin 250 mg", datetime.datetime(2024, i + 1, day), q, 0, 0.9 + 0.01 * i, None]
        ws.append(row)
        r = ws.max_row
        ws.cell(r, 2).number_format = "yyyy-mm-dd"
        ws.cell(r, 5).number_format = "0%"
    ors = [40.5, 38.25, 41.0, 39.5, 44.75, 43.0]
    for i, q in enumerate(ors):
        ws.append(["ORS sachet", f"2024-{i + 1:02d}", q, 2, "95%", "text month"])
    ws.append(["Zinc 20 mg", "2024-01", "1,250", 0, 1, "thousands separator"])
    ws.append(["Zinc 20 mg", "2024-02", "=C16*2", 0, 1, "formula, no saved value"])
    ws.append(["Zinc 20 mg", "2024-03", "#N/A", 0, 1, "error value"])
    ws.append(["Zinc 20 mg", "2024-04", True, 0, 1, "boolean"])
    ws.append([])
    ws.append(["Zinc 20 mg", datetime.datetime(2024, 5, 31, 18, 30), 300, 0, 1, "date and time"])
    ws.cell(ws.max_row, 2).number_format = "yyyy-mm-dd hh:mm"

    other = wb.create_sheet("Other")
    other.append(["product", "month", "consumed"])
    for m in range(12):
        other.append(["Paracetamol 500 mg", datetime.date(2023, m + 1, 1), 100 + 10 * m])
        other.cell(other.max_row, 2).number_format = "mmm yyyy"

    OUT.parent.mkdir(parents=True, exist_ok=True)
    wb.save(OUT)
    print(f"wrote {OUT} with openpyxl {openpyxl.__version__}")


if __name__ == "__main__":
    main()
