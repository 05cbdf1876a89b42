//! End-to-end tests of what a user's walk through the tool found: settings
//! at the edge of their range, figures that must agree between outputs, and
//! messages that must point at the right file and line.

mod common;

use common::{read_csv_file, repo, run_in, text};

/// The row of `product` in a CSV file, as (header, row).
fn row_of(path: &std::path::Path, product: &str) -> (Vec<String>, Vec<String>) {
    let (h, rows) = read_csv_file(path);
    let r = rows
        .iter()
        .find(|r| &r[0] == product)
        .unwrap_or_else(|| panic!("{product} not in {}", path.display()));
    (h, r.iter().map(str::to_string).collect())
}

fn field(h: &[String], r: &[String], name: &str) -> String {
    let i = h.iter().position(|c| c == name).unwrap();
    r[i].clone()
}

/// Runs `forecast` on the bundled demo data in `dir` with `args` after it.
fn forecast_demo(dir: &std::path::Path, args: &[&str]) -> std::process::Output {
    let data = repo("datasets/demo/consumption.csv");
    let mut all = vec!["forecast", data.to_str().unwrap()];
    all.extend_from_slice(args);
    run_in(dir, &all)
}

/// The stock file's required columns, as its header.
const STOCK_HEADER: &str = "product,stock_on_hand,stock_date,lead_time_months,min_months,max_months,review_period_months,pack_size,unit_cost";

/// Writes `s.csv` in `dir` and runs `plan fc --stock s.csv`, which must
/// refuse it (exit 1); returns what it printed.
fn plan_refusal(dir: &std::path::Path, stock: &str) -> String {
    std::fs::write(dir.join("s.csv"), stock).unwrap();
    let o = run_in(dir, &["plan", "fc", "--stock", "s.csv", "--no-report"]);
    let t = text(&o);
    assert_eq!(o.status.code(), Some(1), "{t}");
    t
}

/// `--origins 60` is in range (1-60), but 60 months of history leave no
/// room for 60 origins with 12 months after each. The run must say how
/// many it used, and the intermittent product must keep a method for
/// intermittent demand rather than a projection of zero (common practice:
/// a product in use is not planned at zero without a programme decision).
#[test]
fn many_origins_on_a_short_history_are_cut_with_a_warning_and_no_zero_projection() {
    let dir = tempfile::tempdir().unwrap();
    let o = forecast_demo(
        dir.path(),
        &[
            "--origins",
            "60",
            "--out",
            "o",
            "--no-report",
            "--no-workbook",
        ],
    );
    let t = text(&o);
    assert!(o.status.success(), "{t}");
    // 60 months, 12 after each origin, 24 before those beyond the 12th:
    // origins at months 24..=48, 25 of them.
    assert!(
        t.contains("the backtest asked for 60 origins, but 12 of 12 products have no room for them: 12 product(s) ran at 25"),
        "{t}"
    );
    assert_eq!(t.matches("asked for 60 origins").count(), 1, "{t}");
    let manifest = std::fs::read_to_string(dir.path().join("o/manifest.json")).unwrap();
    assert!(manifest.contains("asked for 60 origins"), "{manifest}");
    let (h, r) = row_of(&dir.path().join("o/selection.csv"), "Snake antivenom vial");
    assert_eq!(field(&h, &r, "chosen_model"), "croston-sba");
    let total: f64 = field(&h, &r, "total_months_1_12").parse().unwrap();
    assert!(total > 0.0, "{total}");
    assert!(!t.contains("projected at zero"), "{t}");
    // The default count of origins never warns.
    let o = forecast_demo(dir.path(), &["--out", "d", "--no-report", "--no-workbook"]);
    assert!(o.status.success());
    assert!(!text(&o).contains("origins, but"), "{}", text(&o));
}

/// The JSON inside `<script type="application/json" id="ID">` of a report.
fn script_json(html: &str, id: &str) -> serde_json::Value {
    let start_tag = format!("id=\"{id}\">");
    let start = html.find(&start_tag).unwrap() + start_tag.len();
    let end = start + html[start..].find("</script>").unwrap();
    serde_json::from_str(&html[start..end]).unwrap()
}

/// One figure, one value: the report's product table, the product's card,
/// the workbook and the CSVs agree (common practice: a planner checks a
/// total in one place against another, and any difference is a question).
#[test]
fn figures_agree_between_csv_report_and_workbook() {
    let dir = tempfile::tempdir().unwrap();
    let config = repo("datasets/demo/run.toml");
    let o = run_in(
        dir.path(),
        &[
            "forecast",
            "--config",
            config.to_str().unwrap(),
            "--out",
            "o",
        ],
    );
    assert!(o.status.success(), "{}", text(&o));
    let out = dir.path().join("o");
    let html = std::fs::read_to_string(out.join("report.html")).unwrap();
    let (h, rows) = read_csv_file(&out.join("selection.csv"));
    let col = |name: &str| h.iter().position(|c| c == name).unwrap();
    // The run summary names the configuration file, and a product's own
    // stockout threshold as the file sets it (no option of that name).
    assert!(
        html.contains("<dt>Configuration file</dt><dd>"),
        "no config file named"
    );
    assert!(!html.contains("--stockout-days-by-product"));
    assert!(html.contains("max_stockout_days of [products] in the configuration file: Artemether"));
    // The product table: totals and AMC in whole units, as selection.csv.
    let index = script_json(&html, "index-data");
    let index = index.as_array().unwrap();
    assert_eq!(index.len(), rows.len());
    for r in &rows {
        let row = index.iter().find(|x| x[0] == r[0]).unwrap();
        for (k, name) in [
            (7, "total_months_1_12"),
            (8, "amc_last_12"),
            (9, "amc_next_12"),
        ] {
            let want: f64 = r[col(name)].parse().unwrap();
            let got = row[k].as_f64().unwrap();
            if want >= 1000.0 {
                assert_eq!(got, want.round(), "{} {name}", &r[0]);
            } else {
                assert!(
                    (got - want).abs() <= 0.0005 * want.max(1.0),
                    "{} {name}",
                    &r[0]
                );
            }
        }
    }
    // An intermittent product is chosen by RMSSE (M5 competition scaling):
    // the card shows the RMSSE, not another score under its name.
    let snake = rows
        .iter()
        .find(|r| &r[0] == "Snake antivenom vial")
        .unwrap();
    assert_eq!(&snake[col("selected_by")], "RMSSE");
    let rmsse: f64 = snake[col("rmsse")].parse().unwrap();
    let key = format!("[\"{rmsse:.2}\",\"backtest RMSSE (chosen by)\"]");
    assert!(html.contains(&key), "{key}");
    // The Annual totals sheet: total ÷ pack size = packs, to the tenth.
    use calamine::{Data, Reader};
    let mut book: calamine::Xlsx<_> = calamine::open_workbook(out.join("forecast.xlsx")).unwrap();
    let sheet = book.worksheet_range("Annual totals").unwrap();
    let head = (0..sheet.height())
        .find(|&i| sheet.get((i, 0)) == Some(&Data::String("product".into())))
        .unwrap();
    let num = |r: usize, c: usize| match sheet.get((r, c)) {
        Some(Data::Float(x)) => Some(*x),
        Some(Data::Int(x)) => Some(*x as f64),
        _ => None,
    };
    let mut checked = 0;
    for r in head + 1..sheet.height() {
        if let (Some(total), Some(pack), Some(packs)) = (num(r, 4), num(r, 6), num(r, 7)) {
            assert_eq!(total, total.round(), "row {r}");
            assert!(
                (total / pack - packs).abs() <= 0.05 + 1e-9,
                "row {r}: {total} / {pack} vs {packs}"
            );
            checked += 1;
        }
    }
    assert!(checked > 10, "{checked}");
}

/// A pin file given on the command line wins over a product's `model` in
/// the configuration; the file `--write-config` writes must read back to
/// the same run (README, "Configuration file").
#[test]
fn a_written_configuration_keeps_a_command_line_pin() {
    let dir = tempfile::tempdir().unwrap();
    let data = repo("datasets/demo/consumption.csv");
    std::fs::write(
        dir.path().join("run.toml"),
        format!(
            "[input]\ndata = {:?}\n\n[products.\"Male condom\"]\nmodel = \"ets-simple\"\n",
            data.to_str().unwrap()
        ),
    )
    .unwrap();
    std::fs::write(
        dir.path().join("pins.csv"),
        "product,model\nMale condom,naive\n",
    )
    .unwrap();
    let chosen = |out: &str| {
        let (h, r) = row_of(&dir.path().join(out).join("selection.csv"), "Male condom");
        (field(&h, &r, "chosen_model"), field(&h, &r, "runner_up"))
    };
    let base = [
        "forecast",
        "--config",
        "run.toml",
        "--pin",
        "pins.csv",
        "--no-report",
        "--no-workbook",
    ];
    let o = run_in(dir.path(), &[&base[..], &["--out", "a"]].concat());
    assert!(o.status.success(), "{}", text(&o));
    assert_eq!(chosen("a").0, "naive");
    // The runner-up is another model than the one pinned.
    assert_ne!(chosen("a").1, "naive");
    let o = run_in(
        dir.path(),
        &[&base[..], &["--write-config", "w.toml"]].concat(),
    );
    assert!(o.status.success(), "{}", text(&o));
    let o = run_in(
        dir.path(),
        &[
            "forecast",
            "--config",
            "w.toml",
            "--out",
            "b",
            "--no-report",
            "--no-workbook",
        ],
    );
    assert!(o.status.success(), "{}", text(&o));
    assert_eq!(chosen("b").0, "naive");
}

/// In the wide layout with a separate reporting-rate table, a rate refused
/// for mixing fractions and percentages is located in the rate table, not
/// in the consumption table the value never was in (common practice: an
/// error names the cell to correct).
#[test]
fn a_refused_rate_names_the_rate_table_cell() {
    let dir = tempfile::tempdir().unwrap();
    let w = |name: &str, text: &str| std::fs::write(dir.path().join(name), text).unwrap();
    w(
        "c.csv",
        "product,site,Jan 2025,Feb 2025,Mar 2025,Apr 2025\nORS sachet,North,410,385,390,402\n",
    );
    w(
        "r.csv",
        "product,site,Jan 2025,Feb 2025,Mar 2025,Apr 2025\nORS sachet,North,0.95,0.9,90,1\n",
    );
    let o = run_in(
        dir.path(),
        &["clean", "c.csv", "--rate-file", "r.csv", "--out", "o"],
    );
    let t = text(&o);
    assert!(o.status.success(), "{t}");
    assert!(
        t.contains("mix fractions 0-1 (r.csv: line 2, column C (Jan 2025); r.csv: line 2, column D (Feb 2025); r.csv: line 2, column F (Apr 2025)) and percentages above 1 (r.csv: line 2, column E (Mar 2025))"),
        "{t}"
    );
    assert!(t.contains("1 rate(s) refused"), "{t}");
    let rejected = std::fs::read_to_string(dir.path().join("o/rejected.csv")).unwrap();
    assert!(
        rejected.contains("reporting_rate 90 at r.csv: line 2, column E (Mar 2025)"),
        "{rejected}"
    );
}

/// Totals rows are written many ways in spreadsheet exports (common
/// practice): each is refused as a product, and a product whose name only
/// starts with "Total" is read.
#[test]
fn totals_rows_in_their_usual_spellings_are_not_products() {
    let dir = tempfile::tempdir().unwrap();
    let mut t = String::from("product,Jan 2025,Feb 2025,Mar 2025,Apr 2025\n");
    for p in [
        "ORS sachet",
        "Total parenteral nutrition bag",
        "Sub-total",
        "TOTAL:",
        "Total general",
        "Totals",
        "grand  total",
        "Sous-total",
    ] {
        t.push_str(&format!("{p},10,11,12,13\n"));
    }
    std::fs::write(dir.path().join("w.csv"), t).unwrap();
    let o = run_in(dir.path(), &["inspect", "w.csv", "--rejected", "rej.csv"]);
    let out = text(&o);
    let rejected = std::fs::read_to_string(dir.path().join("rej.csv")).unwrap();
    for p in [
        "Sub-total",
        "TOTAL:",
        "Total general",
        "Totals",
        "grand  total",
        "Sous-total",
    ] {
        assert!(
            rejected.contains(&format!("the row's product is '{p}', a totals row")),
            "{p}: {rejected}\n{out}"
        );
    }
    assert!(!rejected.contains("'ORS sachet'"), "{rejected}");
    assert!(!rejected.contains("'Total parenteral"), "{rejected}");
}

/// A pivot export with a subtotal line under each product's sites (common
/// practice): the subtotal is refused as a site in both layouts, so the
/// product is the sum of its sites once (11 = 10 + 1, by hand), not twice.
#[test]
fn site_subtotal_rows_are_not_sites() {
    let dir = tempfile::tempdir().unwrap();
    std::fs::write(
        dir.path().join("wide.csv"),
        "product,site,Jan 2025,Feb 2025,Mar 2025\nORS,North,10,20,30\nORS,South,1,2,3\nORS,Total,11,22,33\n",
    )
    .unwrap();
    std::fs::write(
        dir.path().join("long.csv"),
        "product,site,month,consumed\nORS,North,2025-01,10\nORS,South,2025-01,1\nORS,Sub-total,2025-01,11\nORS,All sites,2025-01,11\nORS,Totalville,2025-01,5\n",
    )
    .unwrap();
    for (file, want, expect) in [
        (
            "wide.csv",
            "the row's site is 'Total', a subtotal",
            [11.0, 22.0, 33.0].as_slice(),
        ),
        (
            "long.csv",
            "the row's site is 'All sites', a subtotal",
            [16.0].as_slice(),
        ),
    ] {
        let out = format!("out-{file}");
        let o = run_in(dir.path(), &["clean", file, "--out", &out]);
        let t = text(&o);
        assert!(o.status.success(), "{t}");
        assert!(t.contains(want), "{t}");
        let cleaned = std::fs::read_to_string(dir.path().join(&out).join("cleaned.csv")).unwrap();
        let got: Vec<f64> = cleaned
            .lines()
            .skip(1)
            .map(|l| l.split(',').nth(2).unwrap().parse().unwrap())
            .collect();
        // A site whose name only starts with "Total" is a site (5 more).
        assert_eq!(got, expect, "{cleaned}");
    }
}

/// Month headers saved as spreadsheet date serial numbers (days since
/// 1899-12-30 in the 1900 date system; 45658 is 2025-01-01, from memory of
/// the spreadsheet convention and checked with chrono here) are refused
/// with the date they stand for, not read as a long table with missing
/// columns or dropped as an extra column.
#[test]
fn month_headers_saved_as_serial_numbers_are_explained() {
    let dir = tempfile::tempdir().unwrap();
    let cases = [
        ("a.csv", "product,45658,45689,45717,45748\nORS,1,2,3,4\n", "column B (45658): the header 45658 looks like a date stored as a spreadsheet serial number (45658 is 2025-01-01)"),
        ("b.csv", "product,202501,202502,202503,45748\nORS,1,2,3,4\n", "column E (45748): the header 45748 looks like a date stored as a spreadsheet serial number (45748 is 2025-04-01); format the header cells as dates in the spreadsheet, or write the months as 2025-04"),
    ];
    for (name, body, want) in cases {
        std::fs::write(dir.path().join(name), body).unwrap();
        let o = run_in(dir.path(), &["inspect", name]);
        let t = text(&o);
        assert_eq!(o.status.code(), Some(1), "{t}");
        assert!(t.contains(want), "{t}");
    }
    // chrono's own count of days agrees with the serial used above.
    let d = chrono::NaiveDate::from_ymd_opt(2025, 1, 1).unwrap()
        - chrono::NaiveDate::from_ymd_opt(1899, 12, 30).unwrap();
    assert_eq!(d.num_days(), 45658);
}

/// A conflict between the configuration file and the command line names
/// the file's key, since the file's setting cannot be switched off on the
/// command line (common practice: say where a setting came from).
#[test]
fn conflicts_name_the_configuration_key_they_come_from() {
    let dir = tempfile::tempdir().unwrap();
    let data = repo("datasets/demo/consumption.csv");
    let d = data.to_str().unwrap();
    std::fs::write(
        dir.path().join("nr.toml"),
        format!("[input]\ndata = {d:?}\n[output]\nno_report = true\n"),
    )
    .unwrap();
    let o = run_in(
        dir.path(),
        &[
            "forecast",
            "--config",
            "nr.toml",
            "--chart-files",
            "all",
            "--out",
            "o",
        ],
    );
    let t = text(&o);
    assert_eq!(o.status.code(), Some(2), "{t}");
    assert!(
        t.contains("--chart-files draws the report's charts, and [output] no_report = true in nr.toml skips the report"),
        "{t}"
    );
    std::fs::write(
        dir.path().join("np.toml"),
        format!("[input]\ndata = {d:?}\n[output]\nchart_files = [\"Nope\"]\n"),
    )
    .unwrap();
    let o = run_in(
        dir.path(),
        &["forecast", "--config", "np.toml", "--out", "p"],
    );
    let t = text(&o);
    assert_eq!(o.status.code(), Some(1), "{t}");
    assert!(
        t.contains("no product 'Nope' for [output] chart_files of np.toml"),
        "{t}"
    );
}

/// Copies the report fixture's forecast folder (four products cut from the
/// invented demo scenario) to `fc` under `dir`.
fn fixture_forecast(dir: &std::path::Path) -> std::path::PathBuf {
    let to = dir.join("fc");
    std::fs::create_dir_all(&to).unwrap();
    for e in std::fs::read_dir(repo("tests/data/report/forecast-output")).unwrap() {
        let e = e.unwrap();
        std::fs::copy(e.path(), to.join(e.file_name())).unwrap();
    }
    to
}

/// An input kept in the forecast folder under the name of a file the
/// command writes there is refused before any work and left byte for byte
/// (common practice: a tool never replaces its own input).
#[test]
fn plan_and_crosscheck_never_replace_an_input_named_like_their_output() {
    let dir = tempfile::tempdir().unwrap();
    let fc = fixture_forecast(dir.path());
    let stock = "product,stock_on_hand\nsomething the user typed,1\n";
    std::fs::write(fc.join("orders.csv"), stock).unwrap();
    let o = run_in(dir.path(), &["plan", "fc", "--stock", "fc/orders.csv"]);
    let t = text(&o);
    assert_eq!(o.status.code(), Some(1), "{t}");
    assert!(
        t.contains("--stock fc/orders.csv is the file `provisio plan` writes as orders.csv in fc"),
        "{t}"
    );
    assert_eq!(
        std::fs::read_to_string(fc.join("orders.csv")).unwrap(),
        stock
    );
    let pop = std::fs::read(repo("datasets/demo/population.csv")).unwrap();
    std::fs::write(fc.join("crosscheck.csv"), &pop).unwrap();
    let o = run_in(
        dir.path(),
        &[
            "crosscheck",
            "fc",
            "--population",
            "fc/crosscheck.csv",
            "--no-report",
        ],
    );
    let t = text(&o);
    assert_eq!(o.status.code(), Some(1), "{t}");
    assert!(t.contains("--population fc/crosscheck.csv is the file `provisio crosscheck` writes as crosscheck.csv"), "{t}");
    assert_eq!(std::fs::read(fc.join("crosscheck.csv")).unwrap(), pop);
    // A population file elsewhere is read, and the threshold may be written
    // as a percentage, as the input files allow.
    let population = repo("datasets/demo/population.csv");
    let o = run_in(
        dir.path(),
        &[
            "crosscheck",
            "fc",
            "--population",
            population.to_str().unwrap(),
            "--threshold",
            "25%",
            "--no-report",
        ],
    );
    assert!(o.status.success(), "{}", text(&o));
    let json = std::fs::read_to_string(fc.join("crosscheck.json")).unwrap();
    assert!(json.contains("\"threshold\": 0.25"), "{json}");
}

/// Files saved by a spreadsheet on Windows end their lines with CR LF; an
/// error names the same line as in the LF file (common practice: line
/// numbers as a text editor shows them).
#[test]
fn errors_in_side_files_with_windows_line_ends_name_the_right_line() {
    let dir = tempfile::tempdir().unwrap();
    fixture_forecast(dir.path());
    let stock = "product,stock_on_hand,stock_date,lead_time_months,min_months,max_months,review_period_months,pack_size,unit_cost\r\n\
                 A,1,2026-10,3,4,7,3,100,0.28\r\n\
                 B,1,2026-10,3,4,7,3,100,0.28\r\n\
                 C,abc,2026-10,3,4,7,3,100,0.28\r\n";
    std::fs::write(dir.path().join("stock.csv"), stock).unwrap();
    let o = run_in(
        dir.path(),
        &["plan", "fc", "--stock", "stock.csv", "--no-report"],
    );
    let t = text(&o);
    assert_eq!(o.status.code(), Some(1), "{t}");
    assert!(
        t.contains("stock.csv:4: column 'stock_on_hand': \"abc\""),
        "{t}"
    );
    std::fs::write(
        dir.path().join("pins.csv"),
        "product,model\r\nA,naive\r\nB,naive\r\nC,\r\n",
    )
    .unwrap();
    let o = forecast_demo(
        dir.path(),
        &["--pin", "pins.csv", "--out", "o", "--no-report"],
    );
    let t = text(&o);
    assert!(
        t.contains("pins.csv:4") || t.contains("pins.csv line 4"),
        "{t}"
    );
}

/// A changes file saved with semicolons (spreadsheets set to a decimal
/// comma do so; common practice) is read as the stock, services and
/// population files are, not refused for an unknown column.
#[test]
fn a_changes_file_with_semicolons_is_read() {
    let dir = tempfile::tempdir().unwrap();
    std::fs::write(
        dir.path().join("c.csv"),
        "# a comment line first\nproduct;kind;first_month;last_month;value;start_value;other_product;factor;note\n\
         Amoxicillin 250 mg dispersible tablet x10;percent-change;2027-01;;10;;;;more clinics\n",
    )
    .unwrap();
    let o = forecast_demo(
        dir.path(),
        &[
            "--changes",
            "c.csv",
            "--out",
            "o",
            "--no-report",
            "--no-workbook",
        ],
    );
    let t = text(&o);
    assert!(o.status.success(), "{t}");
    assert!(t.contains("applied 1 change(s) from c.csv"), "{t}");
    let summary = std::fs::read_to_string(dir.path().join("o/changes_summary.csv")).unwrap();
    assert!(summary.contains("more clinics"), "{summary}");
}

/// A change of 1e308 units, or a switch factor of 1e300, would write `inf`
/// or 300-digit totals into the forecast; each is refused naming the line
/// and column, with the range that would work (10^15 units a month is the
/// bound of the data readers; common practice: no plausible change is near
/// it).
#[test]
fn changes_beyond_any_plausible_size_are_refused() {
    let dir = tempfile::tempdir().unwrap();
    let head = "product,kind,first_month,last_month,value,start_value,other_product,factor,note\n";
    for (row, want) in [
        ("Amoxicillin 250 mg dispersible tablet x10,quantity-per-month,2027-01,,1e308,,,,n\n", "c.csv:2: column 'value': 1e308 is beyond what a change can be; give a number between -1e15 and 1e15"),
        ("Zinc 20 mg dispersible tablet x10,switch,2027-01,,100,,Oral rehydration salts sachet,1e300,n\n", "c.csv:2: column 'factor': 1e300 is beyond what a change can be; give a number between -1e6 and 1e6"),
    ] {
        std::fs::write(dir.path().join("c.csv"), format!("{head}{row}")).unwrap();
        let o = forecast_demo(dir.path(), &["--changes", "c.csv", "--out", "o", "--no-report"]);
        let t = text(&o);
        assert_eq!(o.status.code(), Some(1), "{t}");
        assert!(t.contains(want), "{t}");
    }
}

/// Services rows dated after the current month are rejected like
/// consumption rows (a service cannot be delivered in a month that has not
/// come), and plain allowances above 1 are refused rather than read as
/// multiples (README, crosscheck: "a plain share is refused with a hint").
#[test]
fn crosscheck_refuses_future_services_and_ambiguous_plain_shares() {
    let dir = tempfile::tempdir().unwrap();
    fixture_forecast(dir.path());
    let (h, rows) = read_csv_file(&dir.path().join("fc/forecast.csv"));
    let product = rows[0][h.iter().position(|c| c == "product").unwrap()].to_string();
    let mut services = String::from("product,month,services,units_per_service,allowance\n");
    for m in 1..=12 {
        services.push_str(&format!("{product},2025-{m:02},100,1,0.1\n"));
    }
    services.push_str(&format!("{product},2099-01,100,1,0.1\n"));
    services.push_str(&format!("{product},2025-12,100,1,10\n"));
    std::fs::write(dir.path().join("s.csv"), services).unwrap();
    let o = run_in(
        dir.path(),
        &["crosscheck", "fc", "--services", "s.csv", "--no-report"],
    );
    let t = text(&o);
    assert!(o.status.success(), "{t}");
    assert!(
        t.contains("s.csv:14: column 'month': month 2099-01 is after the current month"),
        "{t}"
    );
    assert!(
        t.contains("s.csv:15: column 'allowance': allowance 10 is a plain number above 1, which could mean 10% or 1,000%"),
        "{t}"
    );
    let rejected = std::fs::read_to_string(dir.path().join("fc/crosscheck_rejected.csv")).unwrap();
    assert_eq!(rejected.lines().count(), 3, "{rejected}");
}

/// A CYP factor far outside those of any method (published factors run
/// from 1/120 CYP per condom to about 10 for a sterilisation; USAID CYP
/// table, from memory) is refused naming the line and column.
#[test]
fn cyp_factors_outside_any_method_are_refused() {
    let dir = tempfile::tempdir().unwrap();
    fixture_forecast(dir.path());
    let population = repo("datasets/demo/population.csv");
    for (body, want) in [
        ("method,cyp_per_unit\ncondom,1e-300\n", "cyp.csv:2: column 'cyp_per_unit': 1e-300 is outside the range of any method (0.0001 to 100)"),
        ("method,units_per_cyp\ncondom,1e308\n", "cyp.csv:2: column 'units_per_cyp': 1e308 is outside the range of any method (0.01 to 10000)"),
    ] {
        std::fs::write(dir.path().join("cyp.csv"), body).unwrap();
        let o = run_in(
            dir.path(),
            &["crosscheck", "fc", "--population", population.to_str().unwrap(), "--cyp", "cyp.csv", "--no-report"],
        );
        let t = text(&o);
        assert_eq!(o.status.code(), Some(1), "{t}");
        assert!(t.contains(want), "{t}");
    }
}

/// A damaged row is named as such: a population row with a value beyond
/// the header (the value would be dropped unread) and a stock row that ends
/// early (common practice: say the row is short, not that a cell is empty).
#[test]
fn rows_longer_or_shorter_than_the_header_are_named_as_such() {
    let dir = tempfile::tempdir().unwrap();
    fixture_forecast(dir.path());
    let pop = std::fs::read_to_string(repo("datasets/demo/population.csv")).unwrap();
    let mut lines: Vec<String> = pop.lines().map(str::to_string).collect();
    lines[1].push_str(",0.5");
    std::fs::write(dir.path().join("p.csv"), lines.join("\n") + "\n").unwrap();
    let o = run_in(
        dir.path(),
        &["crosscheck", "fc", "--population", "p.csv", "--no-report"],
    );
    let t = text(&o);
    assert_eq!(o.status.code(), Some(1), "{t}");
    let n = lines[0].split(',').count();
    assert!(
        t.contains(&format!(
            "p.csv:2: {} values but the header has {n} columns",
            n + 1
        )),
        "{t}"
    );
    let t = plan_refusal(dir.path(), &format!("{STOCK_HEADER}\nA,20000,2026-10\n"));
    assert!(
        t.contains("s.csv:2: column 'lead_time_months': the row ends before this column: 3 values but the header has 9 columns"),
        "{t}"
    );
}

/// provisio never forecasts below zero; a negative value in forecast.csv
/// was typed by hand and is refused by `plan`, naming the line, instead of
/// being planned as zero without a word (common practice: an edited input
/// is questioned, not corrected silently).
#[test]
fn plan_refuses_a_negative_forecast_typed_into_forecast_csv() {
    let dir = tempfile::tempdir().unwrap();
    let fc = fixture_forecast(dir.path());
    let text_of = std::fs::read_to_string(fc.join("forecast.csv")).unwrap();
    let mut lines: Vec<String> = text_of.lines().map(str::to_string).collect();
    let h: Vec<&str> = lines[0].split(',').collect();
    let c = h.iter().position(|x| *x == "forecast").unwrap();
    let mut cells: Vec<String> = lines[3].split(',').map(str::to_string).collect();
    cells[c] = "-500".into();
    lines[3] = cells.join(",");
    std::fs::write(fc.join("forecast.csv"), lines.join("\n") + "\n").unwrap();
    let t = plan_refusal(
        dir.path(),
        &format!("{STOCK_HEADER}\nA,1,2026-10,3,4,7,3,100,0.28\n"),
    );
    assert!(
        t.contains("forecast.csv:4: column 'forecast': -500 is not valid"),
        "{t}"
    );
}

/// A stock count dated in a month to come is refused (a count is of stock
/// that is there), and a maximum above the shelf life is warned about up
/// front (common practice: max months of stock never exceed the shelf life,
/// or ordered stock expires).
#[test]
fn plan_refuses_a_future_count_and_warns_of_a_maximum_beyond_shelf_life() {
    let dir = tempfile::tempdir().unwrap();
    let fc = fixture_forecast(dir.path());
    let (h, rows) = read_csv_file(&fc.join("forecast.csv"));
    let product = rows[0][h.iter().position(|c| c == "product").unwrap()].to_string();
    let head = format!("{STOCK_HEADER},shelf_life_months\n");
    std::fs::write(
        dir.path().join("future.csv"),
        format!("{head}\"{product}\",100,2099-01,3,4,7,3,1,1,24\n"),
    )
    .unwrap();
    let o = run_in(
        dir.path(),
        &["plan", "fc", "--stock", "future.csv", "--no-report"],
    );
    let t = text(&o);
    assert_eq!(o.status.code(), Some(1), "{t}");
    assert!(
        t.contains("future.csv:2: column 'stock_date': 2099-01 is after the current month"),
        "{t}"
    );
    std::fs::write(
        dir.path().join("life.csv"),
        format!("{head}\"{product}\",100,2026-10,3,4,7,3,1,1,2\n"),
    )
    .unwrap();
    let o = run_in(
        dir.path(),
        &["plan", "fc", "--stock", "life.csv", "--no-report"],
    );
    let t = text(&o);
    assert!(o.status.success(), "{t}");
    assert!(
        t.contains("max_months 7 is above shelf_life_months 2"),
        "{t}"
    );
}

/// Target groups of one product over one population whose shares add up
/// to more than 1 count people twice (a share is part of a whole; common
/// practice): a warning names the lines.
#[test]
fn group_shares_above_one_are_warned_about() {
    let dir = tempfile::tempdir().unwrap();
    fixture_forecast(dir.path());
    let head = "product,group,method,population,group_share,rate,care_seeking,treated,quantity_per_course,loss_allowance\n";
    std::fs::write(
        dir.path().join("p.csv"),
        format!("{head}P,a,morbidity,1500000,0.8,0.25,0.6,0.9,1,0.05\nP,b,morbidity,1500000,0.8,0.25,0.6,0.9,1,0.05\nP,c,morbidity,900000,0.8,0.25,0.6,0.9,1,0.05\n"),
    )
    .unwrap();
    let o = run_in(
        dir.path(),
        &["crosscheck", "fc", "--population", "p.csv", "--no-report"],
    );
    let t = text(&o);
    assert!(o.status.success(), "{t}");
    assert!(
        t.contains("the morbidity groups of 'P' over a population of 1,500,000 (lines 2, 3) have shares adding up to 1.6"),
        "{t}"
    );
    assert_eq!(t.matches("have shares adding up to").count(), 1, "{t}");
}

/// A change row typed twice is applied twice and named (common practice:
/// duplicates in a list of decisions are usually a slip).
#[test]
fn a_change_row_typed_twice_is_named() {
    let dir = tempfile::tempdir().unwrap();
    let row =
        "Amoxicillin 250 mg dispersible tablet x10,percent-change,2027-01,,10,,,,more clinics\n";
    std::fs::write(
        dir.path().join("c.csv"),
        format!("product,kind,first_month,last_month,value,start_value,other_product,factor,note\n{row}{row}"),
    )
    .unwrap();
    let o = forecast_demo(
        dir.path(),
        &[
            "--changes",
            "c.csv",
            "--out",
            "o",
            "--no-report",
            "--no-workbook",
        ],
    );
    let t = text(&o);
    assert!(o.status.success(), "{t}");
    assert!(
        t.contains("c.csv: line 3 repeats line 2 exactly; both are applied"),
        "{t}"
    );
}
