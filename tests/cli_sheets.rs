//! Workbooks in and out: input read from .xlsx sheets (made by
//! rust_xlsxwriter here, and by openpyxl in the committed reference
//! script), the demo's round trip, formula text in names, and bad
//! workbooks.

mod common;

use std::path::Path;

use calamine::{Data, Reader};
use rust_xlsxwriter::{ExcelDateTime, Format, Formula, Workbook};

use common::{accounting, read_csv_file, repo, run_in, text};

/// Writes a CSV in the input contract to an .xlsx sheet: names as text,
/// months as date cells, every quantity as a number cell, empty values as
/// empty cells.
fn csv_to_xlsx(csv_path: &Path, xlsx: &Path, sheet: &str) {
    let mut r = csv::Reader::from_path(csv_path).unwrap();
    let header: Vec<String> = r.headers().unwrap().iter().map(str::to_string).collect();
    let mut book = Workbook::new();
    let ws = book.add_worksheet();
    ws.set_name(sheet).unwrap();
    let date = Format::new().set_num_format("yyyy-mm");
    for (c, h) in header.iter().enumerate() {
        ws.write_string(0, c as u16, h).unwrap();
    }
    for (i, rec) in r.records().enumerate() {
        let rec = rec.unwrap();
        let row = i as u32 + 1;
        for (c, v) in rec.iter().enumerate() {
            let col = c as u16;
            match header[c].as_str() {
                _ if v.is_empty() => {}
                "product" | "site" => {
                    ws.write_string(row, col, v).unwrap();
                }
                "month" => {
                    let y: u16 = v[..4].parse().unwrap();
                    let m: u8 = v[5..7].parse().unwrap();
                    let d = ExcelDateTime::from_ymd(y, m, 1).unwrap();
                    ws.write_datetime_with_format(row, col, &d, &date).unwrap();
                }
                // The demo writes reporting rates with their % sign; a
                // sheet holds 90% as the number 0.9.
                _ if v.ends_with('%') => {
                    let pct: f64 = v.trim_end_matches('%').parse().unwrap();
                    ws.write_number(row, col, pct / 100.0).unwrap();
                }
                _ => {
                    ws.write_number(row, col, v.parse::<f64>().unwrap())
                        .unwrap();
                }
            }
        }
    }
    book.save(xlsx).unwrap();
}

#[test]
fn demo_as_a_workbook_gives_the_same_forecasts_as_the_csv() {
    let dir = tempfile::tempdir().unwrap();
    let csv_path = repo("datasets/demo/consumption.csv");
    let xlsx = dir.path().join("demo.xlsx");
    csv_to_xlsx(&csv_path, &xlsx, "Consumption");
    // A short backtest keeps the test fast; both runs use the same settings.
    let settings = [
        "--origins",
        "3",
        "--backtest-horizon",
        "6",
        "--horizon",
        "12",
        "--no-report",
    ];
    let mut outs = Vec::new();
    for (input, out) in [
        (csv_path.to_str().unwrap(), "from-csv"),
        ("demo.xlsx", "from-xlsx"),
    ] {
        let mut args = vec!["forecast", input, "--out", out];
        args.extend(settings);
        let o = run_in(dir.path(), &args);
        assert!(o.status.success(), "{}", text(&o));
        outs.push(text(&o));
    }
    assert_eq!(accounting(&outs[0]), accounting(&outs[1]));
    for f in [
        "forecast.csv",
        "forecast_wide.csv",
        "selection.csv",
        "cleaned.csv",
        "adjustments.csv",
        "quality.csv",
    ] {
        let a = std::fs::read_to_string(dir.path().join("from-csv").join(f)).unwrap();
        let b = std::fs::read_to_string(dir.path().join("from-xlsx").join(f)).unwrap();
        assert!(a.lines().count() > 1, "{f} is empty");
        assert!(a == b, "{f} differs between the CSV and the workbook input");
    }
    let m: serde_json::Value =
        serde_json::from_slice(&std::fs::read(dir.path().join("from-xlsx/manifest.json")).unwrap())
            .unwrap();
    assert_eq!(m["sheet"], "Consumption");
    // The hash is of the workbook's bytes.
    let bytes = std::fs::read(&xlsx).unwrap();
    assert_eq!(m["input_sha256"], provisio::output::sha256_hex(&bytes));
    let c: serde_json::Value =
        serde_json::from_slice(&std::fs::read(dir.path().join("from-csv/manifest.json")).unwrap())
            .unwrap();
    assert!(c["sheet"].is_null());

    // `report --workbook-only` rebuilds forecast.xlsx and nothing else.
    let xlsx_out = dir.path().join("from-xlsx/forecast.xlsx");
    std::fs::remove_file(&xlsx_out).unwrap();
    let o = run_in(dir.path(), &["report", "from-xlsx", "--workbook-only"]);
    assert!(o.status.success(), "{}", text(&o));
    assert!(xlsx_out.exists());
    assert!(!dir.path().join("from-xlsx/report.html").exists());

    // `generate --demo --out FILE.xlsx` writes the same data as the demo CSV.
    let o = run_in(dir.path(), &["generate", "--demo", "--out", "gen.xlsx"]);
    assert!(o.status.success(), "{}", text(&o));
    let o = run_in(dir.path(), &["clean", "gen.xlsx", "--out", "gen"]);
    assert!(o.status.success(), "{}", text(&o));
    for f in ["cleaned.csv", "adjustments.csv"] {
        let a = std::fs::read_to_string(dir.path().join("from-csv").join(f)).unwrap();
        let b = std::fs::read_to_string(dir.path().join("gen").join(f)).unwrap();
        assert!(
            a == b,
            "{f} differs between the demo CSV and the generated workbook"
        );
    }
}

/// The workbook made by openpyxl 3.1.5 (tests/reference/workbook_openpyxl.py).
fn openpyxl_book() -> String {
    repo("tests/data/sheets/openpyxl.xlsx")
        .display()
        .to_string()
}

#[test]
fn workbook_made_by_openpyxl_is_read_by_the_contract() {
    let dir = tempfile::tempdir().unwrap();
    let book = openpyxl_book();
    let o = run_in(dir.path(), &["clean", &book, "--out", "out"]);
    let out = text(&o);
    assert!(o.status.success(), "{out}");
    // Source: tests/reference/workbook_openpyxl.py. Sheet "Data": 6
    // Amoxicillin rows, 6 ORS rows, 5 Zinc rows (one blank row is not a
    // row); 4 Zinc rows are refused (rows 16-19).
    let [read_n, used, adjusted, rejected] = accounting(&out);
    assert_eq!((read_n, rejected), (17, 4), "{out}");
    assert_eq!(used + adjusted + rejected, read_n);
    assert!(
        out.contains("sheet 'Data': row(s) 1 above the header row 3 were not read"),
        "{out}"
    );
    assert!(
        out.contains(&format!(
            "rejected: {book}: sheet 'Data', row 16, column C (consumed): \"1,250\" has a comma"
        )),
        "{out}"
    );

    let (h, rej) = read_csv_file(&dir.path().join("out/rejected.csv"));
    assert_eq!(
        h,
        ["file", "line", "column", "value", "reason", "row", "sheet", "cell"]
    );
    let col = |n: &str| h.iter().position(|x| x == n).unwrap();
    let cells: Vec<&str> = rej.iter().map(|r| &r[col("cell")]).collect();
    assert_eq!(cells, ["C16", "C17", "C18", "C19"]);
    assert!(rej.iter().all(|r| &r[col("sheet")] == "Data"));
    assert!(rej[0][col("reason")].contains("--numbers grouped"));
    // openpyxl saves a formula without a calculated value.
    assert!(
        rej[1][col("reason")].contains("with no saved value"),
        "{:?}",
        rej[1]
    );
    assert!(rej[1][col("value")].contains("C16*2"), "{:?}", rej[1]);
    assert_eq!(&rej[2][col("value")], "#N/A");
    assert!(rej[2][col("reason")].contains("spreadsheet error #N/A"));
    assert_eq!(&rej[3][col("value")], "TRUE");
    assert!(rej[3][col("reason")].contains("true/false"));
    assert!(rej[3][col("row")].starts_with("Zinc 20 mg\t2024-04\tTRUE"));

    let (h, cleaned) = read_csv_file(&dir.path().join("out/cleaned.csv"));
    let col = |n: &str| h.iter().position(|x| x == n).unwrap();
    let reported = |p: &str, m: &str| -> String {
        cleaned
            .iter()
            .find(|r| &r[0] == p && &r[col("month")] == m)
            .map(|r| r[col("reported")].to_string())
            .unwrap_or_else(|| panic!("{p} {m} not in cleaned.csv"))
    };
    // Date cells (1st, 15th, 31st ... of the month) give their month;
    // whole numbers stay whole.
    for (m, q) in [
        ("2024-01", "120"),
        ("2024-02", "135"),
        ("2024-03", "128"),
        ("2024-04", "0"),
        ("2024-05", "150"),
        ("2024-06", "142"),
    ] {
        assert_eq!(reported("Amoxicillin 250 mg", m), q, "{m}");
    }
    // Text months and decimal number cells.
    for (m, q) in [("2024-01", "40.5"), ("2024-02", "38.25"), ("2024-06", "43")] {
        assert_eq!(reported("ORS sachet", m), q, "{m}");
    }
    // A date cell with a time of day (2024-05-31 18:30) is May.
    assert_eq!(reported("Zinc 20 mg", "2024-05"), "300");

    let (h, log) = read_csv_file(&dir.path().join("out/adjustments.csv"));
    let col = |n: &str| h.iter().position(|x| x == n).unwrap();
    // ORS: 2 stockout days in 31-day January: 40.5 × 31 / 29, then ÷ 0.95
    // for the text rate "95%" (the cleaning rules of the README).
    let ors_jan: Vec<&csv::StringRecord> = log
        .iter()
        .filter(|r| &r[0] == "ORS sachet" && &r[col("month")] == "2024-01")
        .collect();
    assert!(
        ors_jan.iter().any(|r| &r[col("rule")] == "stockout-scaled"
            && (r[col("after")].parse::<f64>().unwrap() - 40.5 * 31.0 / 29.0).abs() < 1e-3),
        "{ors_jan:?}"
    );
    // Amoxicillin: a percentage-formatted number cell 0.9 is a rate of 90%.
    let amox_jan = log
        .iter()
        .find(|r| {
            &r[0] == "Amoxicillin 250 mg"
                && &r[col("month")] == "2024-01"
                && &r[col("rule")] == "reporting-scaled"
        })
        .unwrap();
    assert!((amox_jan[col("after")].parse::<f64>().unwrap() - 120.0 / 0.9).abs() < 1e-3);
    // The adjustment log names the sheet row as the line.
    assert_eq!(&amox_jan[col("line")], "4");

    // With --numbers grouped, the text "1,250" is read as 1250.
    let o = run_in(
        dir.path(),
        &["clean", &book, "--out", "grouped", "--numbers", "grouped"],
    );
    assert!(o.status.success(), "{}", text(&o));
    assert_eq!(accounting(&text(&o))[3], 3);
    let (_, cleaned) = read_csv_file(&dir.path().join("grouped/cleaned.csv"));
    assert!(cleaned
        .iter()
        .any(|r| &r[0] == "Zinc 20 mg" && &r[1] == "2024-01" && &r[2] == "1250"));
}

#[test]
fn a_named_sheet_is_read_and_an_unknown_one_refused() {
    let dir = tempfile::tempdir().unwrap();
    let book = openpyxl_book();
    let o = run_in(dir.path(), &["inspect", &book, "--sheet", "Other"]);
    let out = text(&o);
    assert!(o.status.success(), "{out}");
    // Source: tests/reference/workbook_openpyxl.py, sheet "Other": 12 months
    // of one product.
    assert_eq!(accounting(&out), [12, 12, 0, 0], "{out}");
    assert!(out.contains("Paracetamol 500 mg"), "{out}");

    let o = run_in(dir.path(), &["inspect", &book, "--sheet", "Nope"]);
    let out = text(&o);
    assert_eq!(o.status.code(), Some(1), "{out}");
    assert!(
        out.contains("the workbook has no sheet named 'Nope'; its sheets are 'Data', 'Other'"),
        "{out}"
    );
    // A sheet name in other letter case is the same sheet, as in spreadsheets.
    let o = run_in(dir.path(), &["inspect", &book, "--sheet", "other"]);
    assert!(o.status.success(), "{}", text(&o));

    // --sheet is refused for a CSV.
    let data = repo("datasets/demo/consumption.csv");
    let o = run_in(
        dir.path(),
        &["inspect", data.to_str().unwrap(), "--sheet", "Data"],
    );
    assert_eq!(o.status.code(), Some(1));
    assert!(
        text(&o).contains("sheet Data (--sheet, or sheet in the [input] section of a --config file) applies to workbooks"),
        "{}",
        text(&o)
    );
}

/// A product's 30 months, 2022-01 to 2024-06, rising slowly.
fn series(product: &str) -> String {
    (0..30)
        .map(|k| {
            format!(
                "\"{}\",{}-{:02},{}\n",
                product.replace('"', "\"\""),
                2022 + k / 12,
                k % 12 + 1,
                100 + 3 * k
            )
        })
        .collect()
}

#[test]
fn names_that_look_like_formulas_stay_text_everywhere() {
    let dir = tempfile::tempdir().unwrap();
    let names = ["=SUM(A1)", "+1", "-2", "@x", "Plain name"];
    let mut csv_text = String::from("product,month,consumed\n");
    for n in names {
        csv_text.push_str(&series(n));
    }
    std::fs::write(dir.path().join("data.csv"), &csv_text).unwrap();
    let o = run_in(
        dir.path(),
        &[
            "forecast",
            "data.csv",
            "--out",
            "past",
            "--until",
            "2023-12",
            "--origins",
            "2",
            "--backtest-horizon",
            "3",
            "--horizon",
            "6",
        ],
    );
    assert!(o.status.success(), "{}", text(&o));
    let past = dir.path().join("past");

    // CSV outputs: formula text gets an apostrophe in front (OWASP, "CSV
    // Injection"); other names are as they are.
    let (_, fc) = read_csv_file(&past.join("forecast.csv"));
    let written: std::collections::BTreeSet<&str> = fc.iter().map(|r| &r[0]).collect();
    assert_eq!(
        written.into_iter().collect::<Vec<_>>(),
        ["'+1", "'-2", "'=SUM(A1)", "'@x", "Plain name"]
    );

    // The workbook: every name is a string cell, and no cell is a formula.
    let xlsx = past.join("forecast.xlsx");
    let mut book: calamine::Xlsx<_> = calamine::open_workbook(&xlsx).unwrap();
    let sheet = book.worksheet_range("Forecast").unwrap();
    for n in names {
        assert!(
            sheet.rows().any(|r| r[0] == Data::String(n.to_string())),
            "{n} is not a string cell"
        );
    }
    for s in book.sheet_names() {
        let f = book.worksheet_formula(&s).unwrap();
        assert!(f.cells().all(|(_, _, x)| x.is_empty()), "{s} has a formula");
    }
    let mut zip = zip::ZipArchive::new(std::fs::File::open(&xlsx).unwrap()).unwrap();
    let mut sheets = 0;
    for i in 0..zip.len() {
        let mut part = zip.by_index(i).unwrap();
        if part.name().starts_with("xl/worksheets/") {
            let mut xml = String::new();
            std::io::Read::read_to_string(&mut part, &mut xml).unwrap();
            assert!(
                !xml.contains("<f>") && !xml.contains("<f "),
                "{}",
                part.name()
            );
            sheets += 1;
        }
    }
    // Forecast, Annual totals, Selection, Adjustments, Data quality,
    // Rejected rows, Run parameters.
    assert_eq!(sheets, 7);

    // provisio reads its own CSV outputs back exactly: the report, and a
    // review that matches every past product with its actuals.
    let o = run_in(dir.path(), &["report", "past"]);
    assert!(o.status.success(), "{}", text(&o));
    let html = std::fs::read_to_string(past.join("report.html")).unwrap();
    assert!(html.contains("=SUM(A1)") && !html.contains("&#39;=SUM(A1)"));
    let o = run_in(
        dir.path(),
        &["review", "past", "--actuals", "data.csv", "--out", "rev"],
    );
    let out = text(&o);
    assert!(o.status.success(), "{out}");
    assert!(!out.contains("not reviewed"), "{out}");
    let (h, rev) = read_csv_file(&dir.path().join("rev/review.csv"));
    let status = h.iter().position(|x| x == "status").unwrap();
    let reviewed: Vec<(String, &str)> = rev
        .iter()
        .map(|r| {
            (
                provisio::output::csv_text_read(&r[0]).to_string(),
                &r[status],
            )
        })
        .collect();
    for n in names {
        assert!(
            reviewed.iter().any(|(p, s)| p == n && *s == "reviewed"),
            "{n}: {reviewed:?}"
        );
    }

    // A pin file whose name was copied from selection.csv, apostrophe and
    // all, pins that product.
    std::fs::write(
        dir.path().join("pins.csv"),
        "product,model\n'=SUM(A1),moving-average-3\n",
    )
    .unwrap();
    let o = run_in(
        dir.path(),
        &[
            "forecast",
            "data.csv",
            "--out",
            "pinned",
            "--pin",
            "pins.csv",
            "--origins",
            "2",
            "--backtest-horizon",
            "3",
            "--horizon",
            "6",
            "--no-report",
            "--no-workbook",
        ],
    );
    assert!(o.status.success(), "{}", text(&o));
    let (h, sel) = read_csv_file(&dir.path().join("pinned/selection.csv"));
    let model = h.iter().position(|x| x == "chosen_model").unwrap();
    let row = sel.iter().find(|r| &r[0] == "'=SUM(A1)").unwrap();
    assert_eq!(&row[model], "moving-average-3", "{h:?} {row:?}");
}

#[test]
fn a_tab_at_the_start_of_a_name_is_text_in_the_workbook() {
    // Input names are trimmed, so a leading tab reaches the workbook writer
    // only from the library; it must still be a string cell.
    let content = provisio::output::WorkbookContent {
        forecasts: vec![provisio::output::WorkbookForecast {
            product: "\tx".into(),
            model: "naive".into(),
            months: vec![(
                provisio::calendar::YearMonth::new(2024, 1).unwrap(),
                5.0,
                Some((4.0, 6.0)),
                Some((3.0, 7.0)),
            )],
            bridged: 0,
            units: String::new(),
        }],
        tables: vec![],
        parameters: vec![("input".into(), "=cmd|' /C calc'!A0".into())],
        caution: "caution".into(),
    };
    let bytes = provisio::output::build_workbook(&content).unwrap();
    let mut book = calamine::Xlsx::new(std::io::Cursor::new(bytes)).unwrap();
    let f = book.worksheet_range("Forecast").unwrap();
    assert_eq!(f.get((3, 0)), Some(&Data::String("\tx".into())));
    assert_eq!(f.get((3, 3)), Some(&Data::Float(5.0)));
    assert_eq!(f.get((7, 3)), Some(&Data::Float(7.0)));
    let p = book.worksheet_range("Run parameters").unwrap();
    assert!(p
        .cells()
        .any(|(_, _, d)| *d == Data::String("=cmd|' /C calc'!A0".into())));
    assert!(book
        .worksheet_formula("Run parameters")
        .unwrap()
        .cells()
        .all(|(_, _, x)| x.is_empty()));
}

/// The Forecast sheet names a product's unit on its forecast row (a tester
/// found the unit only on the Annual totals sheet); a product without one
/// keeps the plain label.
#[test]
fn the_forecast_sheet_names_each_products_unit() {
    let one = |product: &str, units: &str| provisio::output::WorkbookForecast {
        product: product.into(),
        model: "naive".into(),
        months: vec![(
            provisio::calendar::YearMonth::new(2024, 1).unwrap(),
            5.0,
            Some((4.0, 6.0)),
            Some((3.0, 7.0)),
        )],
        bridged: 0,
        units: units.into(),
    };
    let content = provisio::output::WorkbookContent {
        forecasts: vec![one("Malaria test", "test"), one("Other", "")],
        tables: vec![],
        parameters: vec![],
        caution: "caution".into(),
    };
    let bytes = provisio::output::build_workbook(&content).unwrap();
    let mut book = calamine::Xlsx::new(std::io::Cursor::new(bytes)).unwrap();
    let f = book.worksheet_range("Forecast").unwrap();
    assert_eq!(
        f.get((3, 2)),
        Some(&Data::String("forecast (tests)".into()))
    );
    assert_eq!(f.get((4, 2)), Some(&Data::String("80% low".into())));
    assert_eq!(f.get((8, 2)), Some(&Data::String("forecast".into())));
}

/// Builds a small workbook with `fill` and returns its path.
fn workbook(dir: &Path, name: &str, fill: impl FnOnce(&mut Workbook)) -> String {
    let mut book = Workbook::new();
    fill(&mut book);
    let p = dir.join(name);
    book.save(&p).unwrap();
    p.display().to_string()
}

#[test]
fn bad_workbooks_get_clear_messages_and_never_panic() {
    let dir = tempfile::tempdir().unwrap();
    let d = dir.path();
    let refused = |file: &str, args: &[&str], want: &str| {
        let mut a = vec!["inspect", file];
        a.extend(args);
        let o = run_in(d, &a);
        let out = text(&o);
        assert_eq!(o.status.code(), Some(1), "{file}: {out}");
        assert!(out.contains(want), "{file}: {out}");
        assert!(!out.contains("panicked"), "{out}");
    };

    // An empty workbook: one sheet with no cells.
    let empty = workbook(d, "empty.xlsx", |b| {
        b.add_worksheet();
    });
    refused(
        &empty,
        &[],
        "sheet 'Sheet1': the sheet is empty; expected a header row",
    );

    // A sheet with no header: data from the first row.
    let headless = workbook(d, "headless.xlsx", |b| {
        let ws = b.add_worksheet();
        for r in 0..3u32 {
            ws.write_string(r, 0, "Amoxicillin").unwrap();
            ws.write_string(r, 1, format!("2024-0{}", r + 1)).unwrap();
            ws.write_number(r, 2, 10.0).unwrap();
        }
    });
    refused(
        &headless,
        &[],
        "sheet 'Sheet1', row 1: missing required columns 'product', 'month', 'consumed'; the header has: Amoxicillin, 2024-01, 10",
    );

    // Not a workbook at all, though named like one.
    let fake = d.join("fake.xlsx");
    std::fs::write(&fake, "product,month,consumed\nA,2024-01,5\n").unwrap();
    refused(fake.to_str().unwrap(), &[], "cannot be read as a workbook");

    // Merged product cells, blank cells, a boolean, error results and a
    // formula with its saved value, in one sheet.
    let mixed = workbook(d, "mixed.xlsx", |b| {
        let ws = b.add_worksheet();
        ws.set_name("Data").unwrap();
        for (c, h) in ["product", "month", "consumed"].iter().enumerate() {
            ws.write_string(0, c as u16, *h).unwrap();
        }
        ws.merge_range(1, 0, 3, 0, "Condoms", &Format::new())
            .unwrap();
        for r in 1..=12u32 {
            ws.write_string(r, 1, format!("2024-{r:02}")).unwrap();
        }
        ws.write_number(1, 2, 100.0).unwrap();
        ws.write_number(2, 2, 110.0).unwrap();
        ws.write_number(3, 2, 120.0).unwrap();
        for r in 4..=12u32 {
            ws.write_string(r, 0, "Condoms").unwrap();
        }
        ws.write_boolean(4, 2, true).unwrap();
        ws.write_formula(5, 2, Formula::new("=1/0").set_result("#DIV/0!"))
            .unwrap();
        ws.write_formula(6, 2, Formula::new("=10*13").set_result("130"))
            .unwrap();
        // Row 8 left without a quantity: not reported.
        ws.write_number(8, 2, 150.0).unwrap();
        ws.write_string(9, 2, "n/a").unwrap();
        ws.write_number(10, 2, -5.0).unwrap();
        ws.write_number(11, 2, 170.0).unwrap();
        ws.write_number(12, 2, 180.0).unwrap();
    });
    let o = run_in(d, &["inspect", &mixed, "--rejected", "rej.csv"]);
    let out = text(&o);
    assert!(o.status.success(), "{out}");
    // 12 data rows; refused: the two merged-away product cells (rows 3-4),
    // TRUE (row 5), #DIV/0! (row 6), "n/a" (row 10), -5 (row 11).
    assert_eq!(accounting(&out)[0], 12, "{out}");
    assert_eq!(accounting(&out)[3], 6, "{out}");
    let (h, rej) = read_csv_file(&d.join("rej.csv"));
    let col = |n: &str| h.iter().position(|x| x == n).unwrap();
    let at: Vec<(&str, &str)> = rej
        .iter()
        .map(|r| (&r[col("line")], &r[col("cell")]))
        .collect();
    assert_eq!(
        at,
        [
            ("3", "A3"),
            ("4", "A4"),
            ("5", "C5"),
            ("6", "C6"),
            ("10", "C10"),
            ("11", "C11")
        ]
    );
    assert!(rej[0][col("reason")].contains("merged cell"));
    assert!(rej[3][col("reason")].contains("#DIV/0!"));
    assert!(rej[5][col("reason")].contains("negative"));
    // The saved value of a formula is used (130, row 7).
    let o = run_in(d, &["clean", &mixed, "--out", "mixed"]);
    assert!(o.status.success(), "{}", text(&o));
    let (_, cleaned) = read_csv_file(&d.join("mixed/cleaned.csv"));
    assert!(
        cleaned.iter().any(|r| &r[1] == "2024-06" && &r[2] == "130"),
        "{cleaned:?}"
    );
}

#[test]
fn opendocument_sheet_made_by_odfpy_is_read() {
    let dir = tempfile::tempdir().unwrap();
    // Source: tests/reference/workbook_odfpy.py (odfpy 1.4.1).
    let book = repo("tests/data/sheets/odfpy.ods").display().to_string();
    let o = run_in(dir.path(), &["clean", &book, "--out", "out"]);
    let out = text(&o);
    assert!(o.status.success(), "{out}");
    // 7 data rows; the boolean in row 8 is refused.
    assert_eq!(accounting(&out)[0], 7, "{out}");
    assert_eq!(accounting(&out)[3], 1, "{out}");
    assert!(
        out.contains("sheet 'Consumption', row 8, column C (consumed): the cell holds the true/false value TRUE"),
        "{out}"
    );
    let (_, cleaned) = read_csv_file(&dir.path().join("out/cleaned.csv"));
    let reported: Vec<(&str, &str)> = cleaned.iter().map(|r| (&r[1], &r[2])).collect();
    // Date cells (the 10th of January-March) and text months; float cells.
    assert_eq!(
        reported,
        [
            ("2024-01", "200"),
            ("2024-02", "210"),
            ("2024-03", "190"),
            ("2024-04", "205.5"),
            ("2024-05", "220"),
            ("2024-06", "215")
        ]
    );
    // Percentage cells (0.8) and the text "100%" are rates: 200 / 0.8 = 250.
    let (h, log) = read_csv_file(&dir.path().join("out/adjustments.csv"));
    let col = |n: &str| h.iter().position(|x| x == n).unwrap();
    let jan = log
        .iter()
        .find(|r| &r[col("month")] == "2024-01" && &r[col("rule")] == "reporting-scaled")
        .unwrap();
    assert_eq!(&jan[col("after")], "250");
    assert!(!log
        .iter()
        .any(|r| &r[col("month")] == "2024-04" && &r[col("rule")] == "reporting-scaled"));
}

#[test]
fn review_rereads_the_sheet_the_past_run_read() {
    let dir = tempfile::tempdir().unwrap();
    let book = openpyxl_book();
    // Sheet "Other" (tests/reference/workbook_openpyxl.py): Paracetamol,
    // 2023-01 to 2023-12, consumed 100, 110, ..., 210.
    let o = run_in(
        dir.path(),
        &[
            "forecast",
            &book,
            "--sheet",
            "Other",
            "--until",
            "2023-08",
            "--out",
            "past",
            "--origins",
            "1",
            "--backtest-horizon",
            "2",
            "--horizon",
            "4",
        ],
    );
    assert!(o.status.success(), "{}", text(&o));
    let m: serde_json::Value =
        serde_json::from_slice(&std::fs::read(dir.path().join("past/manifest.json")).unwrap())
            .unwrap();
    assert_eq!(m["sheet"], "Other");
    // The actuals are the same workbook: without --sheet, review reads the
    // sheet the past run read, not the first one ("Data" has no Paracetamol).
    let o = run_in(
        dir.path(),
        &["review", "past", "--actuals", &book, "--out", "rev"],
    );
    let out = text(&o);
    assert!(o.status.success(), "{out}");
    let (h, rev) = read_csv_file(&dir.path().join("rev/review_months.csv"));
    let col = |n: &str| h.iter().position(|x| x == n).unwrap();
    let actual: Vec<(&str, &str)> = rev
        .iter()
        .map(|r| (&r[col("month")], &r[col("actual")]))
        .collect();
    assert_eq!(
        actual,
        [
            ("2023-09", "180"),
            ("2023-10", "190"),
            ("2023-11", "200"),
            ("2023-12", "210")
        ]
    );
    // Naming another sheet reads that one: no Paracetamol there.
    let o = run_in(
        dir.path(),
        &[
            "review",
            "past",
            "--actuals",
            &book,
            "--sheet",
            "Data",
            "--out",
            "rev2",
        ],
    );
    assert_eq!(o.status.code(), Some(1), "{}", text(&o));
    assert!(
        text(&o).contains("no actual month overlaps"),
        "{}",
        text(&o)
    );
}

#[test]
fn old_style_xls_made_by_xlwt_is_read() {
    let dir = tempfile::tempdir().unwrap();
    // Source: tests/reference/workbook_xlwt.py (xlwt 1.3.0).
    let book = repo("tests/data/sheets/xlwt.xls").display().to_string();
    let o = run_in(dir.path(), &["clean", &book, "--out", "out"]);
    let out = text(&o);
    assert!(o.status.success(), "{out}");
    // 6 rows: 4 as reported, May scaled for stockout, June's "n/a" refused.
    assert_eq!(accounting(&out), [6, 4, 1, 1], "{out}");
    assert!(
        out.contains("sheet 'Stock', row 7, column C (consumed): \"n/a\" is not a number"),
        "{out}"
    );
    let (_, cleaned) = read_csv_file(&dir.path().join("out/cleaned.csv"));
    let got: Vec<(&str, &str, &str)> = cleaned.iter().map(|r| (&r[1], &r[2], &r[3])).collect();
    // Date cells (the 5th of January-March) and text months; May: 15 of
    // 31 days out of stock, 530 × 31 ÷ 16 = 1026.875 (README, cleaning rule 1).
    assert_eq!(
        got,
        [
            ("2024-01", "500", "500"),
            ("2024-02", "520", "520"),
            ("2024-03", "480", "480"),
            ("2024-04", "510.5", "510.5"),
            ("2024-05", "530", "1026.875")
        ]
    );
}

/// The number format of every cell of `sheet` in the xlsx file `path` that
/// holds a number: (row, column) from zero → format code. Read from the
/// file's XML (the Office Open XML parts `xl/workbook.xml`, its
/// relationships, `xl/styles.xml` and the sheet), since calamine gives a
/// cell's value but not its format.
fn number_formats(path: &Path, sheet: &str) -> std::collections::HashMap<(usize, usize), String> {
    use quick_xml::events::Event;
    let mut zip = zip::ZipArchive::new(std::fs::File::open(path).unwrap()).unwrap();
    let mut part = |name: &str| {
        let mut s = String::new();
        std::io::Read::read_to_string(&mut zip.by_name(name).unwrap(), &mut s).unwrap();
        s
    };
    // Each start or empty element of `xml` as its name and attributes.
    fn elements(xml: &str) -> Vec<(String, Vec<(String, String)>)> {
        let mut r = quick_xml::Reader::from_str(xml);
        let mut out = Vec::new();
        loop {
            match r.read_event().unwrap() {
                Event::Start(e) | Event::Empty(e) => {
                    let attrs = e
                        .attributes()
                        .map(|a| {
                            let a = a.unwrap();
                            let k = String::from_utf8(a.key.as_ref().to_vec()).unwrap();
                            (
                                k,
                                a.decode_and_unescape_value(r.decoder())
                                    .unwrap()
                                    .into_owned(),
                            )
                        })
                        .collect();
                    out.push((
                        String::from_utf8(e.name().as_ref().to_vec()).unwrap(),
                        attrs,
                    ));
                }
                Event::End(e) if e.name().as_ref() == b"cellXfs" => {
                    out.push(("/cellXfs".to_string(), Vec::new()));
                }
                Event::Eof => break,
                _ => {}
            }
        }
        out
    }
    let attr =
        |a: &[(String, String)], k: &str| a.iter().find(|(n, _)| n == k).map(|(_, v)| v.clone());
    let rid = elements(&part("xl/workbook.xml"))
        .into_iter()
        .find(|(n, a)| n == "sheet" && attr(a, "name").as_deref() == Some(sheet))
        .and_then(|(_, a)| attr(&a, "r:id"))
        .unwrap_or_else(|| panic!("no sheet {sheet}"));
    let target = elements(&part("xl/_rels/workbook.xml.rels"))
        .into_iter()
        .find(|(_, a)| attr(a, "Id").as_deref() == Some(rid.as_str()))
        .and_then(|(_, a)| attr(&a, "Target"))
        .unwrap();
    // Built-in formats used here (ECMA-376 part 1, 18.8.30 numFmt).
    let mut codes: std::collections::HashMap<String, String> = [
        ("0", "General"),
        ("1", "0"),
        ("2", "0.00"),
        ("3", "#,##0"),
        ("4", "#,##0.00"),
    ]
    .iter()
    .map(|(k, v)| (k.to_string(), v.to_string()))
    .collect();
    let mut xfs: Vec<String> = Vec::new();
    let mut in_xfs = false;
    for (n, a) in elements(&part("xl/styles.xml")) {
        match n.as_str() {
            "numFmt" => {
                codes.insert(
                    attr(&a, "numFmtId").unwrap(),
                    attr(&a, "formatCode").unwrap(),
                );
            }
            "cellXfs" => in_xfs = true,
            "/cellXfs" => in_xfs = false,
            "xf" if in_xfs => xfs.push(attr(&a, "numFmtId").unwrap_or_else(|| "0".into())),
            _ => {}
        }
    }
    let mut out = std::collections::HashMap::new();
    for (n, a) in elements(&part(&format!("xl/{}", target.trim_start_matches("/xl/")))) {
        if n != "c" || attr(&a, "t").is_some_and(|t| t != "n") {
            continue;
        }
        let r = attr(&a, "r").unwrap();
        let letters: String = r.chars().take_while(char::is_ascii_uppercase).collect();
        let col = letters
            .bytes()
            .fold(0usize, |c, b| c * 26 + (b - b'A') as usize + 1)
            - 1;
        let row: usize = r[letters.len()..].parse::<usize>().unwrap() - 1;
        let xf: usize = attr(&a, "s").map_or(0, |s| s.parse().unwrap());
        out.insert((row, col), codes[&xfs[xf]].clone());
    }
    out
}

/// `v` as a number format with decimals shows it: rounded, as spreadsheet
/// programs round, on its decimal digits and half away from zero (1.3575
/// shows as 1.358 with three decimals, though the nearest double is a
/// little below), to as many decimals as the format has `0` and `#` after
/// its point, trailing zeros dropped down to its `0`s; no thousands
/// separators.
fn shown(v: f64, format: &str) -> String {
    let after = format.split_once('.').map_or("", |(_, d)| d);
    let (min, max) = (
        after.chars().filter(|&c| c == '0').count(),
        after.chars().filter(|&c| c == '0' || c == '#').count(),
    );
    // The shortest decimal text of `v` (Rust writes no exponent).
    let text = format!("{}", v.abs());
    let (int, frac) = text.split_once('.').unwrap_or((&text, ""));
    let mut digits: Vec<u8> = int
        .bytes()
        .chain(frac.bytes().chain(std::iter::repeat(b'0')).take(max))
        .collect();
    if frac.as_bytes().get(max).is_some_and(|&d| d >= b'5') {
        let mut i = digits.len();
        loop {
            if i == 0 {
                digits.insert(0, b'1');
                break;
            }
            i -= 1;
            if digits[i] == b'9' {
                digits[i] = b'0';
            } else {
                digits[i] += 1;
                break;
            }
        }
    }
    let split = digits.len() - max;
    let mut decimals = digits.split_off(split);
    while decimals.len() > min && decimals.last() == Some(&b'0') {
        decimals.pop();
    }
    let mut s = String::from_utf8(digits).unwrap();
    if !decimals.is_empty() {
        s.push('.');
        s.push_str(std::str::from_utf8(&decimals).unwrap());
    }
    if v < 0.0 {
        s.insert(0, '-');
    }
    s
}

/// Every number of the workbook's tables (on the demo with its known
/// changes and its supply plan, so every table sheet is there) is a number
/// cell with a number format that shows what matters in it: a spreadsheet
/// sums a number cell and not a number stored as text (common practice:
/// a planner totals columns), and a format that rounds away the digits that
/// tell two values apart hides them.
#[test]
fn every_number_in_the_workbook_tables_is_a_number_cell_with_a_fitting_format() {
    let dir = tempfile::tempdir().unwrap();
    let demo = |f: &str| repo(&format!("datasets/demo/{f}")).display().to_string();
    let o = run_in(
        dir.path(),
        &[
            "forecast",
            &demo("consumption.csv"),
            "--config",
            &demo("run.toml"),
            "--changes",
            &demo("changes.csv"),
            "--out",
            "out",
            "--no-report",
        ],
    );
    assert!(o.status.success(), "{}", text(&o));
    let o = run_in(
        dir.path(),
        &[
            "plan",
            "out",
            "--stock",
            &demo("stock.csv"),
            "--on-order",
            &demo("on_order.csv"),
            "--no-report",
        ],
    );
    assert!(o.status.success(), "{}", text(&o));
    let xlsx = dir.path().join("out/forecast.xlsx");
    let mut book = calamine::open_workbook_auto(&xlsx).unwrap();
    let names = book.sheet_names();
    // sheet → column → (each value below the header with its number format,
    // the one format of its number cells).
    type Column = (Vec<(Data, Option<String>)>, String);
    let mut tables: std::collections::HashMap<String, Vec<(String, Column)>> =
        std::collections::HashMap::new();
    for sheet in names
        .iter()
        .filter(|s| *s != "Forecast" && *s != "Run parameters")
    {
        let range = book.worksheet_range(sheet).unwrap();
        let (top, left) = range.start().unwrap();
        assert_eq!(left, 0, "{sheet}");
        let formats = number_formats(&xlsx, sheet);
        // The header: the first row with more than one cell (a note above
        // it is a single cell).
        let head = (0..range.height())
            .find(|&r| {
                (0..range.width())
                    .filter(|&c| range.get((r, c)).is_some_and(|d| *d != Data::Empty))
                    .count()
                    > 1
            })
            .unwrap_or_else(|| panic!("{sheet}: no header"));
        let mut columns = Vec::new();
        for c in 0..range.width() {
            let name = range.get((head, c)).unwrap().to_string();
            let mut cells = Vec::new();
            let mut format = String::new();
            for r in head + 1..range.height() {
                let v = range.get((r, c)).cloned().unwrap_or(Data::Empty);
                let f = formats.get(&(top as usize + r, c)).cloned();
                match &v {
                    Data::String(s) => assert!(
                        s.trim().parse::<f64>().is_err(),
                        "{sheet}, {name}, row {}: the number {s} is stored as text",
                        top as usize + r + 1
                    ),
                    Data::Float(_) | Data::Int(_) => {
                        let f = f.clone().expect("a number cell has a format");
                        // pack_size is the one column shown as written
                        // (General): a pack holds 100 or 2.5.
                        assert!(
                            f != "General" || name == "pack_size",
                            "{sheet}, {name}: General format"
                        );
                        assert!(
                            format.is_empty() || format == f,
                            "{sheet}, {name}: {format} and {f}"
                        );
                        format = f;
                    }
                    _ => {}
                }
                cells.push((v, f));
            }
            columns.push((name, (cells, format)));
        }
        tables.insert(sheet.to_string(), columns);
    }
    let col = |sheet: &str, name: &str| -> &Column {
        &tables[sheet]
            .iter()
            .find(|(n, _)| n == name)
            .unwrap_or_else(|| panic!("{sheet}: no column {name}"))
            .1
    };
    let number = |d: &Data| match d {
        Data::Float(x) => *x,
        Data::Int(x) => *x as f64,
        other => panic!("{other:?} is not a number"),
    };

    // Known changes: the totals are quantities, as in changes_summary.csv.
    let (_, summary) = read_csv_file(&dir.path().join("out/changes_summary.csv"));
    for name in [
        "change_months_1_12",
        "change_months_1_24",
        "statistical_months_1_12",
        "adjusted_months_1_12",
        "statistical_months_1_24",
        "adjusted_months_1_24",
    ] {
        let (cells, format) = col("Known changes", name);
        assert_eq!(format, "#,##0", "{name}");
        assert_eq!(cells.len(), summary.len());
    }
    assert_eq!(col("Known changes", "change_row").1, "0");

    // Orders: the unit cost as shown is the unit cost, so quantity × unit
    // cost as shown = cost (orders.csv rounds the cost to the cent).
    let (cells, format) = col("Orders", "unit_cost");
    let quantity = &col("Orders", "quantity").0;
    let cost = &col("Orders", "cost").0;
    let mut small = 0;
    for (k, (v, _)) in cells.iter().enumerate() {
        let price = number(v);
        let as_shown: f64 = shown(price, format).parse().unwrap();
        assert_eq!(as_shown, price, "{price} shows as {}", shown(price, format));
        let want = (number(&quantity[k].0) * as_shown * 100.0).round() / 100.0;
        assert!((number(&cost[k].0) - want).abs() < 1e-6, "row {k}");
        small += usize::from(price < 0.1);
    }
    // The demo's condoms cost 0.03 and oral rehydration salts 0.08.
    assert!(small > 0);

    // Selection: the scores as shown are the ones the reason quotes, so the
    // chosen model's MASE 0.655 and the runner-up's 0.677 show apart.
    let (h, sel) = read_csv_file(&dir.path().join("out/selection.csv"));
    let at = |n: &str| h.iter().position(|x| x == n).unwrap();
    let mut quoted = 0;
    for (k, r) in sel.iter().enumerate() {
        let reason = &r[at("reason")];
        if !reason.starts_with("the default") {
            continue;
        }
        let by = &r[at("selected_by")];
        let (cells, format) = col("Selection", &by.to_lowercase());
        let chosen = shown(number(&cells[k].0), format);
        assert!(
            reason.contains(&format!("{by} {chosen} ")),
            "{chosen}: {reason}"
        );
        let (cells, format) = col("Selection", "runner_up_score");
        let runner = shown(number(&cells[k].0), format);
        let other = format!("{} ({runner})", &r[at("runner_up")]);
        assert!(reason.contains(&other), "{other}: {reason}");
        quoted += 1;
    }
    assert!(quoted > 5, "{quoted}");
    assert_eq!(col("Selection", "rmsse").1, "#,##0.000");
    assert_eq!(col("Selection", "zero_actuals").1, "0");
    assert_eq!(col("Selection", "mape_pct").1, "#,##0.0");

    // Years are numbers; the all-years row of Order totals says `all`.
    let (years, format) = col("Annual totals", "year");
    assert_eq!(format, "0");
    assert!(years.iter().all(|(v, _)| number(v) >= 2026.0));
    let (years, format) = col("Order totals", "year");
    assert_eq!(format, "0");
    assert!(years.iter().any(|(v, _)| *v == Data::String("all".into())));
    assert!(years
        .iter()
        .any(|(v, _)| matches!(v, Data::Float(_) | Data::Int(_))));
}
