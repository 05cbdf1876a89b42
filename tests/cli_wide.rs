//! The wide (pivot) layout end to end: one row per product (and site),
//! one column per month, from CSV and from a workbook with date cells as
//! headers; stockout days and reporting rates as tables of the same shape;
//! the same data in long and wide form give the same cleaned series and
//! forecast; refusals name the line and column. The tables are invented
//! test inputs (the demo scenario, itself invented, pivoted).

mod common;

use std::collections::BTreeMap;
use std::path::Path;

use rust_xlsxwriter::{ExcelDateTime, Format, Workbook};

use common::{accounting, read_csv_file, repo, text, Workdir};

/// The demo's long file as three wide tables (consumed, stockout days,
/// reporting rate): rows by product and site in file order, months in
/// order, each cell the long file's text (empty when the long file has no
/// value).
struct Pivot {
    keys: Vec<(String, String)>,
    months: Vec<String>,
    /// Field → (product, site) → month → text.
    values: BTreeMap<String, Table>,
}

/// (product, site) → month → text.
type Table = BTreeMap<(String, String), BTreeMap<String, String>>;

const FIELDS: [&str; 3] = ["consumed", "stockout_days", "reporting_rate"];

fn pivot(long: &Path) -> Pivot {
    let (h, rows) = read_csv_file(long);
    let at = |name: &str| h.iter().position(|x| x == name).unwrap();
    let (p, s, m) = (at("product"), at("site"), at("month"));
    let mut keys = Vec::new();
    let mut months = std::collections::BTreeSet::new();
    let mut values: BTreeMap<String, Table> = BTreeMap::new();
    for r in &rows {
        let key = (r[p].to_string(), r[s].to_string());
        if !keys.contains(&key) {
            keys.push(key.clone());
        }
        months.insert(r[m].to_string());
        for f in FIELDS {
            values
                .entry(f.to_string())
                .or_default()
                .entry(key.clone())
                .or_default()
                .insert(r[m].to_string(), r[at(f)].to_string());
        }
    }
    Pivot {
        keys,
        months: months.into_iter().collect(),
        values,
    }
}

/// `2024-03` as `Mar 2024`.
fn month_name(m: &str) -> String {
    const NAMES: [&str; 12] = [
        "Jan", "Feb", "Mar", "Apr", "May", "Jun", "Jul", "Aug", "Sep", "Oct", "Nov", "Dec",
    ];
    let k: usize = m[5..7].parse().unwrap();
    format!("{} {}", NAMES[k - 1], &m[..4])
}

impl Pivot {
    /// One field as a wide CSV, month headers written as `Mar 2024`.
    fn csv(&self, field: &str) -> String {
        let mut w = csv::Writer::from_writer(Vec::new());
        let mut header = vec!["product".to_string(), "site".to_string()];
        header.extend(self.months.iter().map(|m| month_name(m)));
        w.write_record(&header).unwrap();
        for key in &self.keys {
            let mut rec = vec![key.0.clone(), key.1.clone()];
            let by_month = &self.values[field][key];
            rec.extend(
                self.months
                    .iter()
                    .map(|m| by_month.get(m).cloned().unwrap_or_default()),
            );
            w.write_record(&rec).unwrap();
        }
        String::from_utf8(w.into_inner().unwrap()).unwrap()
    }

    /// The three fields as sheets of one workbook: a title row above the
    /// header, months as date cells, numbers as number cells (a rate of
    /// 90% as 0.9, as a spreadsheet holds it).
    fn xlsx(&self, path: &Path) {
        let mut book = Workbook::new();
        let date = Format::new().set_num_format("mmm yyyy");
        for (field, name) in [
            ("consumed", "Consumption"),
            ("stockout_days", "Stockout days"),
            ("reporting_rate", "Reporting rates"),
        ] {
            let ws = book.add_worksheet();
            ws.set_name(name).unwrap();
            ws.write_string(0, 0, "Invented test data").unwrap();
            ws.write_string(2, 0, "product").unwrap();
            ws.write_string(2, 1, "site").unwrap();
            for (k, m) in self.months.iter().enumerate() {
                let d =
                    ExcelDateTime::from_ymd(m[..4].parse().unwrap(), m[5..7].parse().unwrap(), 1)
                        .unwrap();
                ws.write_datetime_with_format(2, k as u16 + 2, &d, &date)
                    .unwrap();
            }
            for (i, key) in self.keys.iter().enumerate() {
                let row = i as u32 + 3;
                ws.write_string(row, 0, &key.0).unwrap();
                ws.write_string(row, 1, &key.1).unwrap();
                for (k, m) in self.months.iter().enumerate() {
                    let v = self.values[field][key].get(m).cloned().unwrap_or_default();
                    if v.is_empty() {
                        continue;
                    }
                    let x: f64 = match v.strip_suffix('%') {
                        Some(p) => p.parse::<f64>().unwrap() / 100.0,
                        None => v.parse().unwrap(),
                    };
                    ws.write_number(row, k as u16 + 2, x).unwrap();
                }
            }
        }
        book.save(path).unwrap();
    }
}

/// A short backtest keeps the test fast; every run uses the same settings.
const SHORT: [&str; 7] = [
    "--origins",
    "3",
    "--backtest-horizon",
    "6",
    "--horizon",
    "12",
    "--no-report",
];

fn same_file(w: &Workdir, a: &str, b: &str, f: &str) {
    let x = std::fs::read_to_string(w.path(a).join(f)).unwrap();
    let y = std::fs::read_to_string(w.path(b).join(f)).unwrap();
    assert!(x.lines().count() > 1, "{a}/{f} is empty");
    assert!(x == y, "{f} differs between {a} and {b}");
}

#[test]
fn the_demo_pivoted_gives_the_same_cleaned_series_and_forecast_as_in_long_form() {
    let w = Workdir::new();
    let long = repo("datasets/demo/consumption.csv");
    let p = pivot(&long);
    assert!(p.months.len() >= 24 && p.keys.len() > 10);
    w.write("wide.csv", p.csv("consumed"));
    w.write("stockout.csv", p.csv("stockout_days"));
    w.write("rate.csv", p.csv("reporting_rate"));
    p.xlsx(&w.path("wide.xlsx"));

    let runs: [(&str, Vec<&str>); 3] = [
        ("long", vec![long.to_str().unwrap()]),
        (
            "wide-csv",
            vec![
                "wide.csv",
                "--stockout-file",
                "stockout.csv",
                "--rate-file",
                "rate.csv",
            ],
        ),
        (
            "wide-xlsx",
            vec![
                "wide.xlsx",
                "--sheet",
                "Consumption",
                "--stockout-sheet",
                "Stockout days",
                "--rate-sheet",
                "Reporting rates",
            ],
        ),
    ];
    let mut outs = Vec::new();
    for (out, input) in &runs {
        let mut args = vec!["forecast"];
        args.extend(input.iter().copied());
        args.extend(["--out", out]);
        args.extend(SHORT);
        let o = w.run(&args);
        assert!(o.status.success(), "{out}: {}", text(&o));
        outs.push(text(&o));
    }
    // One value per product, site and month in the wide tables, one row
    // per product, site and month in the long file: the same accounting.
    assert_eq!(accounting(&outs[0]), accounting(&outs[1]));
    assert_eq!(accounting(&outs[0]), accounting(&outs[2]));
    assert!(
        outs[1].contains("(wide layout: each counted here is one value"),
        "{}",
        outs[1]
    );
    for f in [
        "cleaned.csv",
        "forecast.csv",
        "selection.csv",
        "quality.csv",
    ] {
        same_file(&w, "long", "wide-csv", f);
        same_file(&w, "long", "wide-xlsx", f);
    }
    // The adjustment log differs only in its line numbers.
    let strip = |dir: &str| -> Vec<Vec<String>> {
        let (h, rows) = w.read_csv_records(&format!("{dir}/adjustments.csv"));
        let line = h.iter().position(|x| x == "line").unwrap();
        rows.iter()
            .map(|r| {
                r.iter()
                    .enumerate()
                    .filter(|(i, _)| *i != line)
                    .map(|(_, v)| v.to_string())
                    .collect()
            })
            .collect()
    };
    assert_eq!(strip("long"), strip("wide-csv"));
    assert_eq!(strip("long"), strip("wide-xlsx"));
    // The workbook's title row is named as passed over.
    assert!(
        outs[2].contains("row(s) 1 above the header row 3 were not read"),
        "{}",
        outs[2]
    );

    // inspect says which layout was read.
    let o = w.run(&[
        "inspect",
        "wide.csv",
        "--stockout-file",
        "stockout.csv",
        "--rate-file",
        "rate.csv",
    ]);
    let out = text(&o);
    assert!(o.status.success(), "{out}");
    assert!(
        out.contains(&format!("layout: wide: one row per product and site, one column per month ({} month columns, columns C to ", p.months.len())),
        "{out}"
    );
    assert!(
        out.contains("stockout days from stockout.csv; reporting rates from rate.csv"),
        "{out}"
    );
    let o = w.run(&["inspect", long.to_str().unwrap()]);
    assert!(text(&o).contains("layout: long: one row per product (and site) and month"));
}

/// Spreadsheet and export conventions for month headers (common practice):
/// each form read as the same month gives the same cleaned series.
#[test]
fn month_header_forms_are_read_alike() {
    let w = Workdir::new();
    let forms: [[&str; 3]; 7] = [
        ["2024-01", "2024-02", "2024-03"],
        ["Jan 2024", "Feb 2024", "Mar 2024"],
        ["January 2024", "February 2024", "March 2024"],
        ["01/2024", "02/2024", "03/2024"],
        ["Jan-24", "Feb-24", "Mar-24"],
        ["2024-01-01", "2024-02-01", "2024-03-31"],
        ["202401", "202402", "202403"],
    ];
    let mut first: Option<String> = None;
    for (k, f) in forms.iter().enumerate() {
        let name = format!("f{k}.csv");
        w.write(
            &name,
            format!(
                "product,{},{},{}\nORS,100,,120\nZinc,7,0,9\n",
                f[0], f[1], f[2]
            ),
        );
        let out = format!("o{k}");
        let o = w.run(&["clean", &name, "--out", &out]);
        assert!(o.status.success(), "{f:?}: {}", text(&o));
        // Blank is a month not reported: 5 values, not 6.
        assert_eq!(accounting(&text(&o)), [5, 5, 0, 0], "{f:?}");
        let cleaned = std::fs::read_to_string(w.path(&out).join("cleaned.csv")).unwrap();
        match &first {
            None => first = Some(cleaned),
            Some(c) => assert_eq!(c, &cleaned, "{f:?}"),
        }
    }
    // The values themselves, as written in the table.
    let rows = w.read_csv_maps("o0/cleaned.csv");
    let got: Vec<(String, String, String)> = rows
        .iter()
        .map(|r| {
            (
                r["product"].clone(),
                r["month"].clone(),
                r["reported"].clone(),
            )
        })
        .collect();
    let want = [
        ("ORS", "2024-01", "100"),
        ("ORS", "2024-02", ""),
        ("ORS", "2024-03", "120"),
        ("Zinc", "2024-01", "7"),
        ("Zinc", "2024-02", "0"),
        ("Zinc", "2024-03", "9"),
    ];
    let want: Vec<(String, String, String)> = want
        .iter()
        .map(|(a, b, c)| (a.to_string(), b.to_string(), c.to_string()))
        .collect();
    assert_eq!(got, want);
}

#[test]
fn a_bad_value_is_rejected_by_line_and_column_in_csv_and_workbook() {
    let w = Workdir::new();
    w.write(
        "t.csv",
        "product,site,Jan 2024,Feb 2024,Mar 2024\nORS,North,10,12,-3\nORS,South,4,five,6\n",
    );
    let o = w.run(&["clean", "t.csv", "--out", "o"]);
    let out = text(&o);
    assert!(o.status.success(), "{out}");
    assert!(
        out.contains("rejected: t.csv: line 2, column E (Mar 2024): consumed -3 is negative"),
        "{out}"
    );
    assert!(
        out.contains("rejected: t.csv: line 3, column D (Feb 2024): \"five\" is not a number"),
        "{out}"
    );
    assert_eq!(accounting(&out), [6, 4, 0, 2]);
    let rej = w.read_csv_maps("o/rejected.csv");
    let cells: Vec<(&str, &str, &str, &str)> = rej
        .iter()
        .map(|r| {
            (
                r["line"].as_str(),
                r["column"].as_str(),
                r["value"].as_str(),
                r["cell"].as_str(),
            )
        })
        .collect();
    // A value starting with '-' is written with a leading ' so that a
    // spreadsheet does not run it as a formula (as for the long layout).
    assert_eq!(
        cells,
        [
            ("2", "Mar 2024", "'-3", "E2"),
            ("3", "Feb 2024", "five", "D3")
        ]
    );

    // The same in a workbook whose table starts at column B, with date headers.
    let mut book = Workbook::new();
    let ws = book.add_worksheet();
    ws.set_name("Data").unwrap();
    let date = Format::new().set_num_format("mmm-yy");
    ws.write_string(1, 1, "Product").unwrap();
    for k in 0..3u8 {
        let d = ExcelDateTime::from_ymd(2024, k + 1, 1).unwrap();
        ws.write_datetime_with_format(1, 2 + k as u16, &d, &date)
            .unwrap();
    }
    ws.write_string(2, 1, "ORS").unwrap();
    ws.write_number(2, 2, 10.0).unwrap();
    ws.write_string(2, 3, "n/a").unwrap();
    ws.write_number(2, 4, 11.0).unwrap();
    book.save(w.path("t.xlsx")).unwrap();
    let o = w.run(&["clean", "t.xlsx", "--out", "x"]);
    let out = text(&o);
    assert!(o.status.success(), "{out}");
    assert!(
        out.contains(
            "rejected: t.xlsx: sheet 'Data', row 3, column D (2024-02): \"n/a\" is not a number"
        ),
        "{out}"
    );
    let rej = w.read_csv_maps("x/rejected.csv");
    assert_eq!(rej[0]["cell"], "D3");
    assert_eq!(rej[0]["sheet"], "Data");
}

/// Stockout days and reporting rates from tables of the same shape, matched
/// by product and month. Expected values by the adjustment rules the README
/// states (common practice): a month with d stockout days of D is scaled by
/// D / (D - d); a total is divided by the reporting rate.
#[test]
fn stockout_and_rate_tables_adjust_their_months_and_mismatches_are_warned() {
    let w = Workdir::new();
    w.write(
        "c.csv",
        "product,2024-01,2024-02,2024-03,2024-04\nORS,100,100,100,100\nZinc,50,50,50,50\n",
    );
    // April has 30 days: 10 days out of stock → 100 × 30 / 20 = 150.
    // Zinc has no row here; "Cotrimoxazole" is in no consumption row.
    w.write(
        "s.csv",
        "product,2024-04,2024-05\nORS,10,3\nCotrimoxazole,0,0\n",
    );
    // March at 80% → 100 / 0.8 = 125 (ORS); Zinc at 50% in February → 100.
    w.write(
        "r.csv",
        "product,2024-02,2024-03\nORS,100%,80%\nZinc,50%,100%\n",
    );
    let o = w.run(&[
        "clean",
        "c.csv",
        "--stockout-file",
        "s.csv",
        "--rate-file",
        "r.csv",
        "--out",
        "o",
    ]);
    let out = text(&o);
    assert!(o.status.success(), "{out}");
    let cleaned = w.read_csv_maps("o/cleaned.csv");
    let value = |p: &str, m: &str| -> f64 {
        cleaned
            .iter()
            .find(|r| r["product"] == p && r["month"] == m)
            .unwrap_or_else(|| panic!("{p} {m}"))["cleaned"]
            .parse()
            .unwrap()
    };
    assert_eq!(value("ORS", "2024-01"), 100.0);
    assert_eq!(value("ORS", "2024-02"), 100.0);
    assert!((value("ORS", "2024-03") - 125.0).abs() < 1e-9);
    assert!((value("ORS", "2024-04") - 150.0).abs() < 1e-9);
    assert!((value("Zinc", "2024-02") - 100.0).abs() < 1e-9);
    assert_eq!(value("Zinc", "2024-04"), 50.0);
    // Mismatches are warnings, and go to the run's record (manifest).
    assert!(out.contains("1 row(s) of the consumption table have no row in s.csv (stockout days), and are read with no stockout days: 'Zinc' (line 3)"), "{out}");
    assert!(out.contains("s.csv: stockout days: 1 row(s) match no product of the consumption table, and their values are not used: 'Cotrimoxazole' (line 3)"), "{out}");
    assert!(out.contains("s.csv: stockout days: 1 month column(s) have no column in the consumption table, and their values are not used: C (2024-05)"), "{out}");
    let m = w.manifest("o");
    let warnings = m["warnings"].to_string();
    assert!(warnings.contains("Cotrimoxazole"), "{warnings}");
    // The tables read beside the consumption table are in the manifest, hashed.
    assert_eq!(m["wide"]["layout"], "wide");
    assert_eq!(m["wide"]["stockout_days_from"], "s.csv");
    assert_eq!(
        m["wide"]["stockout_days_sha256"],
        provisio::output::sha256_hex(&std::fs::read(w.path("s.csv")).unwrap())
    );
    assert_eq!(m["wide"]["reporting_rates_from"], "r.csv");

    // A bad stockout value rejects its month, naming both places.
    w.write("s2.csv", "product,2024-04\nORS,40\nZinc,0\n");
    let o = w.run(&["clean", "c.csv", "--stockout-file", "s2.csv", "--out", "o2"]);
    let out = text(&o);
    assert!(o.status.success(), "{out}");
    assert!(out.contains("rejected: c.csv: line 2, column E (2024-04): stockout days at s2.csv: line 2, column B (2024-04): stockout_days 40 is outside 0-30 (2024-04 has 30 days)"), "{out}");
    // In rejected.csv the row's file, line, column and cell place the
    // consumption value set aside, so its value is that cell's (100, not
    // the stockout table's 40, which the reason places): a reviewer who
    // opens c.csv at E2 finds the value the row names.
    let rejected = w.read_csv_maps("o2/rejected.csv");
    assert_eq!(rejected.len(), 1, "{rejected:?}");
    let r = &rejected[0];
    assert_eq!(
        (r["file"].as_str(), r["line"].as_str(), r["column"].as_str()),
        ("c.csv", "2", "2024-04")
    );
    assert_eq!((r["value"].as_str(), r["cell"].as_str()), ("100", "E2"));
    assert!(
        r["reason"]
            .starts_with("stockout days at s2.csv: line 2, column B (2024-04): stockout_days 40"),
        "{r:?}"
    );

    // Tables of the wide layout for a long file are refused, saying why.
    w.write("long.csv", "product,month,consumed\nORS,2024-01,5\n");
    let o = w.run(&["inspect", "long.csv", "--stockout-file", "s.csv"]);
    assert_eq!(o.status.code(), Some(1));
    assert!(text(&o).contains("and the table read is in the long layout; in the long layout they are the columns stockout_days and reporting_rate"), "{}", text(&o));
}

#[test]
fn a_workbook_with_its_data_on_another_sheet_lists_the_sheets() {
    let w = Workdir::new();
    let mut book = Workbook::new();
    let notes = book.add_worksheet();
    notes.set_name("Notes").unwrap();
    notes
        .write_string(0, 0, "Consumption report (invented)")
        .unwrap();
    notes
        .write_string(2, 0, "Prepared by the district team")
        .unwrap();
    let data = book.add_worksheet();
    data.set_name("Data").unwrap();
    data.write_string(0, 0, "product").unwrap();
    data.write_string(0, 1, "Jan 2024").unwrap();
    data.write_string(0, 2, "Feb 2024").unwrap();
    data.write_string(1, 0, "ORS").unwrap();
    data.write_number(1, 1, 5.0).unwrap();
    data.write_number(1, 2, 6.0).unwrap();
    book.save(w.path("book.xlsx")).unwrap();
    let o = w.run(&["inspect", "book.xlsx"]);
    let out = text(&o);
    assert_eq!(o.status.code(), Some(1), "{out}");
    assert!(
        out.contains("its first cells are \"Consumption report (invented)\""),
        "{out}"
    );
    assert!(
        out.contains("'Notes' (this one): \"Consumption report (invented)\""),
        "{out}"
    );
    assert!(out.contains("'Data': \"product\", \"Jan 2024\", \"Feb 2024\" (a header provisio reads, wide layout, row 1)"), "{out}");
    assert!(out.contains("with --sheet NAME"), "{out}");
    // No column-name hint built from the title.
    assert!(!out.contains("did you mean"), "{out}");
    let o = w.run(&["inspect", "book.xlsx", "--sheet", "Data"]);
    assert!(o.status.success(), "{}", text(&o));
}

/// The README's wide-table example is these files, and its output is what
/// the run prints (so the README cannot drift from the tool).
#[test]
fn the_readme_example_is_a_real_run() {
    let readme = std::fs::read_to_string(repo("README.md")).unwrap();
    let consumption = "product,site,Jan 2025,Feb 2025,Mar 2025,Apr 2025\nORS sachet,North,410,385,,402\nORS sachet,South,220,231,240,0\nZinc 20 mg tablet,North,96,,88,91\n";
    let stockout = "product,site,Jan 2025,Feb 2025,Mar 2025,Apr 2025\nORS sachet,North,0,0,0,0\nORS sachet,South,0,0,0,30\nZinc 20 mg tablet,North,0,7,0,0\n";
    assert!(readme.contains(&format!("```csv\n{consumption}```")));
    assert!(readme.contains(&format!("```csv\n{stockout}```")));
    let w = Workdir::new();
    w.write("consumption_wide.csv", consumption);
    w.write("stockout_wide.csv", stockout);
    let cmd = "provisio inspect consumption_wide.csv --stockout-file stockout_wide.csv";
    assert!(readme.contains(cmd));
    let args: Vec<&str> = cmd.split(' ').skip(1).collect();
    let o = w.run(&args);
    let out = text(&o);
    assert!(o.status.success(), "{out}");
    let at = readme.find(cmd).unwrap();
    let shown = readme[at..]
        .split("```\n")
        .nth(2)
        .expect("the output block after the command");
    for line in shown.lines() {
        assert!(
            out.contains(line),
            "README shows\n  {line}\nthe run printed\n{out}"
        );
    }
    assert_eq!(shown.lines().count(), 2, "{shown}");
}

/// The wide options go through the run configuration (paths relative to
/// its folder), and `--until` cuts values by month, not whole lines.
#[test]
fn wide_options_round_trip_through_the_configuration_and_until_cuts_by_month() {
    let w = Workdir::new();
    w.write(
        "c.csv",
        "product,2024-01,2024-02,2024-03\nORS,10,11,12\nZinc,5,6,7\n",
    );
    w.write(
        "s.csv",
        "product,2024-01,2024-02,2024-03\nORS,0,3,0\nZinc,0,0,0\n",
    );
    let o = w.run(&[
        "forecast",
        "c.csv",
        "--layout",
        "wide",
        "--stockout-file",
        "s.csv",
        "--write-config",
        "cfg/run.toml",
        "--out",
        "o",
    ]);
    assert!(o.status.success(), "{}", text(&o));
    let toml = std::fs::read_to_string(w.path("cfg/run.toml")).unwrap();
    assert!(toml.contains("layout = \"wide\""), "{toml}");
    assert!(toml.contains("stockout_file = \"../s.csv\""), "{toml}");
    let o = w.run(&["inspect", "c.csv", "--config", "cfg/run.toml"]);
    let out = text(&o);
    assert!(o.status.success(), "{out}");
    assert!(out.contains("stockout days from cfg/../s.csv"), "{out}");
    // Two lines, three months: --until 2024-02 keeps four values of six.
    let o = w.run(&[
        "forecast",
        "c.csv",
        "--until",
        "2024-02",
        "--out",
        "u",
        "--no-report",
    ]);
    let out = text(&o);
    assert!(o.status.success(), "{out}");
    assert!(
        out.contains("2 row(s) dated after 2024-02 left out as asked"),
        "{out}"
    );
    assert_eq!(accounting(&out), [4, 4, 0, 0]);
    let months: Vec<String> = w
        .read_csv_maps("u/cleaned.csv")
        .iter()
        .map(|r| format!("{} {}", r["product"], r["month"]))
        .collect();
    assert_eq!(
        months,
        ["ORS 2024-01", "ORS 2024-02", "Zinc 2024-01", "Zinc 2024-02"]
    );
}

/// `review --actuals` reads actuals in the wide layout, with their stockout
/// and rate tables, and scores the past forecast exactly as from the same
/// actuals in long form.
#[test]
fn review_reads_wide_actuals_as_it_reads_long_ones() {
    let w = Workdir::new();
    let long = repo("datasets/demo/consumption.csv");
    let p = pivot(&long);
    w.write("wide.csv", p.csv("consumed"));
    w.write("stockout.csv", p.csv("stockout_days"));
    w.write("rate.csv", p.csv("reporting_rate"));
    // A forecast made six months before the demo's last month.
    let last = p.months.last().unwrap().clone();
    let (y, m): (i32, i32) = (last[..4].parse().unwrap(), last[5..7].parse().unwrap());
    let k = y * 12 + m - 1 - 6;
    let until = format!("{}-{:02}", k / 12, k % 12 + 1);
    let mut args = vec![
        "forecast",
        long.to_str().unwrap(),
        "--until",
        &until,
        "--out",
        "past",
    ];
    args.extend(SHORT);
    let o = w.run(&args);
    assert!(o.status.success(), "{}", text(&o));
    let o = w.run(&[
        "review",
        "past",
        "--actuals",
        long.to_str().unwrap(),
        "--out",
        "r-long",
    ]);
    assert!(o.status.success(), "{}", text(&o));
    let o = w.run(&[
        "review",
        "past",
        "--actuals",
        "wide.csv",
        "--stockout-file",
        "stockout.csv",
        "--rate-file",
        "rate.csv",
        "--out",
        "r-wide",
    ]);
    assert!(o.status.success(), "{}", text(&o));
    for f in ["review.csv", "review_months.csv"] {
        same_file(&w, "r-long", "r-wide", f);
    }
}

/// Tables given beside the consumption table that cannot be matched with
/// it are refused, naming the file and what would be valid.
#[test]
fn tables_that_cannot_be_matched_are_refused() {
    let w = Workdir::new();
    w.write("c.csv", "product,site,Jan 2025,Feb 2025\nORS,North,4,5\n");
    w.write("r.csv", "product,Jan 2025,Feb 2025\nORS,90%,95%\n");
    w.write("empty.csv", "");
    let cases: [(&[&str], &str); 4] = [
        (
            &["--rate-file", "r.csv"],
            "r.csv: line 1: reporting rates (--rate-file / --rate-sheet): the table has no 'site' column and the consumption table has one",
        ),
        (
            &["--rate-file", "empty.csv"],
            "empty.csv: reporting rates (--rate-file / --rate-sheet): no header row with a 'product' column and month columns",
        ),
        (
            &["--stockout-sheet", "Stockouts"],
            "c.csv: stockout days: the sheet 'Stockouts' is named, and the input is a CSV file, not a workbook; give the file that holds the table with --stockout-file",
        ),
        (
            &["--rate-file", "r.csv", "--rate-sheet", "Rates"],
            "r.csv: a sheet ('Rates') is named for this file, and it is read as a CSV file",
        ),
    ];
    for (extra, message) in cases {
        let mut args = vec!["inspect", "c.csv"];
        args.extend(extra);
        let o = w.run(&args);
        assert_eq!(o.status.code(), Some(1), "{extra:?}: {}", text(&o));
        assert!(text(&o).contains(message), "{extra:?}: {}", text(&o));
    }
}

/// A wide table in an OpenDocument spreadsheet made by odfpy 1.4.1
/// (tests/reference/workbook_wide_odfpy.py): months as date cells, a title
/// row, stockout days on another sheet whose months are text.
#[test]
fn a_wide_ods_made_by_odfpy_is_read_with_its_stockout_sheet() {
    let w = Workdir::new();
    let book = repo("tests/data/sheets/wide_odfpy.ods");
    std::fs::copy(&book, w.path("wide.ods")).unwrap();
    let o = w.run(&[
        "clean",
        "wide.ods",
        "--sheet",
        "Consumption",
        "--stockout-sheet",
        "Stockout days",
        "--out",
        "o",
    ]);
    let out = text(&o);
    assert!(o.status.success(), "{out}");
    // Source: the script's docstring. 11 consumption cells and the stockout
    // 0 of ORS North in March (its consumption cell empty): 12 values; the
    // "n/a" is refused; ORS North April (stockout-scaled) and March (no
    // quantity, filled) are adjusted.
    assert_eq!(accounting(&out), [12, 9, 2, 1], "{out}");
    assert!(out.contains("rejected: wide.ods: sheet 'Consumption', row 5, column F (2024-04): \"n/a\" is not a number"), "{out}");
    assert!(
        out.contains("sheet 'Consumption': row(s) 1 above the header row 3 were not read"),
        "{out}"
    );
    assert!(out.contains("have no row in wide.ods, sheet 'Stockout days' (stockout days), and are read with no stockout days: 'Zinc', site 'North' (row 6)"), "{out}");
    // 10 of April's 30 days out of stock: 320 × 30 / 20 = 480 (the
    // stockout rule the README states; common practice).
    let adj = w.read_csv_maps("o/adjustments.csv");
    let april = adj
        .iter()
        .find(|a| a["site"] == "North" && a["month"] == "2024-04")
        .expect("April adjusted");
    assert_eq!(
        (april["before"].as_str(), april["after"].as_str()),
        ("320", "480")
    );
    assert_eq!(april["rule"], "stockout-scaled");
}

#[test]
fn a_side_table_row_with_no_product_is_named_as_merged_cells() {
    // Common practice in exported sheets: the product is written once over
    // its sites' rows (merged cells), so the rows below it have none. The
    // warning must say "no product", name the site and point at the cause,
    // not list products called ''.
    let w = Workdir::new();
    w.write(
        "c.csv",
        "product,site,2024-01,2024-02\nORS,North,100,100\nORS,South,50,50\nZinc,North,10,10\nZinc,South,5,5\n",
    );
    w.write(
        "s.csv",
        "product,site,2024-01,2024-02\nORS,North,0,0\n,South,0,0\nZinc,North,0,0\n,South,1,1\n",
    );
    let o = w.run(&["inspect", "c.csv", "--stockout-file", "s.csv"]);
    let out = text(&o);
    assert!(o.status.success(), "{out}");
    assert!(
        out.contains("1 pair(s) of rows name the same product and site")
            && out.contains("no product, site 'South' on lines 3 and 5")
            && out.contains("unmerge them and write the product on every row"),
        "{out}"
    );
    assert!(!out.contains("''"), "{out}");
}
