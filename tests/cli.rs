//! End-to-end tests: run the real binary in a temporary directory, feed it
//! CSV, read back its output files.

mod common;

use common::{accounting, repo, run_in, text, Workdir};

#[test]
fn clean_demo_writes_outputs_that_reconcile() {
    let w = Workdir::new();
    let data = repo("datasets/demo/consumption.csv").display().to_string();
    let o = w.run(&["clean", &data, "--out", "out"]);
    let out = text(&o);
    assert!(o.status.success(), "{out}");
    let [read, used, adjusted, rejected] = accounting(&out);
    assert_eq!(used + adjusted + rejected, read, "{out}");
    let input_rows = std::fs::read_to_string(&data).unwrap().lines().count() - 1;
    assert_eq!(read, input_rows);

    let cleaned = w.read_csv_records("out/cleaned.csv").1;
    let products: std::collections::BTreeSet<&str> =
        cleaned.iter().map(|r| r.get(0).unwrap()).collect();
    assert_eq!(products.len(), 12);
    assert_eq!(cleaned.len(), 12 * 60);
    // Cleaned total = reported total + the sum of logged changes: the
    // adjustment log explains every unit that cleaning added or removed.
    let cleaned_total: f64 = cleaned.iter().map(|r| r[3].parse::<f64>().unwrap()).sum();
    let mut input = csv::Reader::from_path(&data).unwrap();
    let reported_total: f64 = input
        .records()
        .map(|r| r.unwrap())
        .filter_map(|r| r[3].parse::<f64>().ok())
        .sum();
    let log = w.read_csv_records("out/adjustments.csv").1;
    let num = |s: &str| {
        if s.is_empty() {
            0.0
        } else {
            s.parse::<f64>().unwrap()
        }
    };
    let delta: f64 = log.iter().map(|r| num(&r[5]) - num(&r[4])).sum();
    let gap = (cleaned_total - (reported_total + delta)).abs();
    // Output numbers carry 4 decimals; allow their rounding.
    assert!(gap < 0.0001 * log.len() as f64 + 1e-6, "gap {gap}");
    let rules: std::collections::BTreeSet<&str> = log.iter().map(|r| r.get(6).unwrap()).collect();
    for r in [
        "stockout-scaled",
        "stockout-missing",
        "reporting-scaled",
        "site-filled",
    ] {
        assert!(
            rules.contains(r),
            "demo data should exercise {r}: {rules:?}"
        );
    }
    let manifest: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(w.path("out/manifest.json")).unwrap())
            .unwrap();
    assert_eq!(manifest["rows"]["read"].as_u64().unwrap() as usize, read);
    assert_eq!(manifest["input_sha256"].as_str().unwrap().len(), 64);
    assert_eq!(w.read_csv_records("out/quality.csv").1.len(), 12);
}

#[test]
fn inspect_demo_prints_a_verdict_per_product_and_csv() {
    let w = Workdir::new();
    let o = w.run(&[
        "inspect",
        &repo("datasets/demo/consumption.csv").display().to_string(),
        "--csv",
        "q.csv",
    ]);
    let out = text(&o);
    assert!(o.status.success(), "{out}");
    assert!(out.contains("Snake antivenom vial: fit with care"), "{out}");
    assert!(out.contains("intermittent"), "{out}");
    assert!(out.contains("affected by stockouts"), "{out}");
    let q = w.read_csv_records("q.csv").1;
    assert_eq!(q.len(), 12);
    assert!(
        q.iter().all(|r| !r[15].is_empty()),
        "every product has a verdict"
    );
}

#[test]
fn semicolon_bom_and_percent_rates_are_read() {
    let w = Workdir::new();
    let f = w.write(
        "in.csv",
        "\u{feff}Product;Month;Consumed;Reporting_Rate\nORS;2024-01;800;80%\nORS;2024-02-01;900;90%\nORS;2024-03;1000;100%\n".as_bytes(),
    );
    let o = w.run(&["clean", f.to_str().unwrap(), "--out", "o"]);
    assert!(o.status.success(), "{}", text(&o));
    let c = w.read_csv_records("o/cleaned.csv").1;
    let vals: Vec<f64> = c.iter().map(|r| r[3].parse().unwrap()).collect();
    // Common practice: reported ÷ reporting rate.
    assert_eq!(vals, vec![1000.0, 1000.0, 1000.0]);
}

#[test]
fn bad_setting_is_refused_with_the_value() {
    let w = Workdir::new();
    let o = w.run(&[
        "clean",
        &repo("datasets/demo/consumption.csv").display().to_string(),
        "--out",
        "o",
        "--reporting-floor",
        "1.5",
    ]);
    assert_eq!(o.status.code(), Some(1));
    assert!(
        text(&o).contains("reporting-floor: must be above 0 and at most 1 (a fraction), got 1.5"),
        "{}",
        text(&o)
    );
}

#[test]
fn missing_file_is_refused_not_panicked() {
    let w = Workdir::new();
    let o = w.run(&["inspect", "no-such-file.csv"]);
    assert_eq!(o.status.code(), Some(1));
    assert!(
        text(&o).contains("no-such-file.csv: cannot read input"),
        "{}",
        text(&o)
    );
}

/// What the tool does with a catalogue file.
#[derive(Clone, Copy, PartialEq, Debug)]
enum Outcome {
    /// The whole file is refused (exit 1, no output).
    Refused,
    /// The file is used; at least one row is rejected, with the reason.
    RowRejected,
    /// The file is used with no row rejected.
    Accepted,
}
use Outcome::*;

/// The hostile- and malformed-input catalogue: each file, the options it is
/// read with, the outcome, and the message expected (see
/// tests/data/bad/README.md). `inspect` and `clean` both run on each.
const CATALOGUE: &[(&str, &[&str], Outcome, &str)] = &[
    ("empty.csv", &[], Refused, "empty.csv: the file is empty; expected a header line naming at least the columns product, month, consumed"),
    ("header_only.csv", &[], Refused, "header_only.csv: the file has a header but no data rows"),
    ("missing_column.csv", &[], Refused, "missing_column.csv:1: missing required column 'consumed'; the header has: product, month, quantity"),
    ("duplicate_column.csv", &[], Refused, "duplicate_column.csv:1: column 'product' appears twice (fields 1 and 4); keep one"),
    ("not_utf8.csv", &[], Refused, "not_utf8.csv:3: the file is not UTF-8 text (byte 0xE9 is not valid UTF-8 here); it is probably a Latin-1 / Windows-1252 export: save it again as \"CSV UTF-8\", or read it with --encoding windows-1252 (or --encoding latin1)"),
    ("not_utf8.csv", &["--encoding", "windows-1252"], Accepted, "Café sachets: not fit: only 1 month(s) reported"),
    ("latin1.csv", &[], Refused, "latin1.csv:2: the file is not UTF-8 text (byte 0xE9 is not valid UTF-8 here)"),
    ("latin1.csv", &["--encoding", "latin1"], Accepted, "Café sachets: not fit: only 2 month(s) reported"),
    ("utf16.csv", &[], Refused, "utf16.csv: the file is UTF-16 text (it starts with a UTF-16 byte-order mark), as spreadsheets write \"Unicode text\"; save it as \"CSV UTF-8\" instead"),
    ("zip_not_csv.csv", &[], Refused, "zip_not_csv.csv: the file is a zip archive, probably an .xlsx workbook, not a CSV"),
    ("all_rows_rejected.csv", &[], Refused, "no usable rows: all 2 data rows were rejected; first problem, line 2: \"abc\" is not a number"),
    ("nothing_reported.csv", &[], Refused, "no product has a usable month of consumption; product 'ORS': no month has a usable quantity"),
    ("bom.csv", &[], Accepted, "rows read: 3 = 3 used as reported + 0 corrected by cleaning + 0 rejected"),
    ("semicolon.csv", &[], Accepted, "rows read: 3 = 3 used as reported + 0 corrected by cleaning + 0 rejected"),
    ("tab.csv", &[], Accepted, "rows read: 3 = 3 used as reported + 0 corrected by cleaning + 0 rejected"),
    ("quoted_fields.csv", &[], Accepted, "Zinc 20 mg tablet, blister: not fit: only 1 month(s) reported"),
    ("extra_columns.csv", &[], Accepted, "warning: extra columns kept in the file but not used: notes, district code"),
    ("unclosed_quote.csv", &[], RowRejected, "unclosed_quote.csv:3: a quoted value runs over 3 lines (lines 3-5) and holds delimiters: a quote (\") is probably opened and never closed"),
    ("crlf_blank_lines.csv", &[], RowRejected, "crlf_blank_lines.csv:5: column 'consumed': \"x\" is not a number"),
    ("bad_number.csv", &[], RowRejected, "bad_number.csv:3: column 'consumed': \"12a\" is not a number; expected a number such as 1250 or 1250.5 (point as decimal mark, no thousands separator), or empty for not reported"),
    ("nan.csv", &[], RowRejected, "nan.csv:3: column 'consumed': \"NaN\" is not a number"),
    ("infinity.csv", &[], RowRejected, "infinity.csv:3: column 'consumed': \"inf\" is not a number"),
    ("huge_quantity.csv", &[], RowRejected, "huge_quantity.csv:3: column 'consumed': consumed 1e300 is over 10^15 units in a month, more than any real quantity (and large enough to break the arithmetic); check the value"),
    ("negative_quantity.csv", &[], RowRejected, "negative_quantity.csv:3: column 'consumed': consumed -40 is negative; expected a quantity of 0 or more"),
    ("decimal_comma.csv", &[], RowRejected, "decimal_comma.csv:2: column 'consumed': \"1234,5\" has a comma (decimal comma or thousands separator); expected a number such as 1250 or 1250.5 (point as decimal mark, no thousands separator), or empty for not reported; for a decimal comma use --numbers decimal-comma, for thousands separators --numbers grouped"),
    ("decimal_comma.csv", &["--numbers", "decimal-comma"], Accepted, "rows read: 2 = 2 used as reported + 0 corrected by cleaning + 0 rejected"),
    ("decimal_comma_grouped.csv", &[], RowRejected, "decimal_comma_grouped.csv:2: column 'consumed': \"1.234,5\" has a comma"),
    ("decimal_comma_grouped.csv", &["--numbers", "decimal-comma"], Accepted, "rows read: 2 = 2 used as reported + 0 corrected by cleaning + 0 rejected"),
    ("thousands_separator.csv", &[], RowRejected, "thousands_separator.csv:2: the row has 4 fields but the header has 3; check for an unquoted delimiter inside a value (a thousands separator as in 1,234"),
    ("thousands_separator_quoted.csv", &[], RowRejected, "thousands_separator_quoted.csv:2: column 'consumed': \"1,234\" has a comma (decimal comma or thousands separator)"),
    ("thousands_separator_quoted.csv", &["--numbers", "grouped"], Accepted, "rows read: 2 = 2 used as reported + 0 corrected by cleaning + 0 rejected"),
    ("thousands_space.csv", &[], RowRejected, "thousands_space.csv:2: column 'consumed': \"1 234\" has a space inside (thousands separator?); expected a number such as 1250 or 1250.5 (point as decimal mark, no thousands separator), or empty for not reported; to read spaces between digit groups use --numbers grouped"),
    ("thousands_space.csv", &["--numbers", "grouped"], Accepted, "rows read: 2 = 2 used as reported + 0 corrected by cleaning + 0 rejected"),
    ("bad_month.csv", &[], RowRejected, "bad_month.csv:3: column 'month': month \"Mar-2024\" is not a valid month; expected YYYY-MM (e.g. 2024-03) or YYYY-MM-DD (e.g. 2024-03-01); if \"Mar-2024\" means 2024-03, write 2024-03"),
    ("month_slash.csv", &[], RowRejected, "month_slash.csv:3: column 'month': month \"2024/02\" is not a valid month; expected YYYY-MM (e.g. 2024-03) or YYYY-MM-DD (e.g. 2024-03-01); if \"2024/02\" means 2024-02, write 2024-02"),
    ("month_mm_yyyy.csv", &[], RowRejected, "month_mm_yyyy.csv:3: column 'month': month \"02/2024\" is not a valid month; expected YYYY-MM (e.g. 2024-03) or YYYY-MM-DD (e.g. 2024-03-01); if \"02/2024\" means 2024-02, write 2024-02"),
    ("month_day_first.csv", &[], RowRejected, "month_day_first.csv:3: column 'month': month \"03/02/2024\" is not a valid month; expected YYYY-MM (e.g. 2024-03) or YYYY-MM-DD (e.g. 2024-03-01)\n"),
    ("month_before_1900.csv", &[], RowRejected, "month_before_1900.csv:3: column 'month': month \"1899-12\": year 1899 is outside 1900-2100"),
    ("month_after_2100.csv", &[], RowRejected, "month_after_2100.csv:3: column 'month': month \"2204-02\": year 2204 is outside 1900-2100"),
    ("month_in_the_future.csv", &[], RowRejected, "month_in_the_future.csv:3: column 'month': month 2099-02 is after the current month ("),
    ("stockout_days_over_month.csv", &[], RowRejected, "stockout_days_over_month.csv:3: column 'stockout_days': stockout_days 30 is outside 0-28 (2023-02 has 28 days)"),
    ("reporting_rate_over_100.csv", &[], RowRejected, "reporting_rate_over_100.csv:3: column 'reporting_rate': reporting_rate 120% is outside 0-100%"),
    // One 95 among thirty-five 0.9s is refused; the 0.9s are not reread as 0.9%.
    ("reporting_rate_mixed_scale.csv", &[], RowRejected, "reporting_rate_mixed_scale.csv:22: column 'reporting_rate': reporting_rate 95: the plain reporting rates of ORS mix fractions 0-1 (lines 2, 3, 4, 5, 6, 7, 8, 9, 10, 11, and 25 more) and percentages above 1 (lines 22)"),
    ("reporting_rate_negative.csv", &[], RowRejected, "reporting_rate_negative.csv:3: column 'reporting_rate': reporting_rate -0.2 is outside 0-100%"),
    ("reporting_rate_zero.csv", &[], RowRejected, "reporting_rate_zero.csv:3: column 'reporting_rate': reporting_rate is 0 but consumed is 120: a month with no reports cannot have consumption; leave consumed empty or correct the rate"),
    ("duplicate_rows.csv", &[], RowRejected, "duplicate_rows.csv:4: duplicate of line 3 (product 'ORS', site 'North', month 2024-02) with different values; both rejected, the month is treated as missing (use --duplicates sum to add them)"),
    ("duplicate_rows.csv", &["--duplicates", "sum"], Accepted, "rows read: 4 = 2 used as reported + 2 corrected by cleaning + 0 rejected"),
    ("exact_duplicate_rows.csv", &[], RowRejected, "exact_duplicate_rows.csv:4: exact duplicate of line 3 (product 'ORS', month 2024-02); the first copy is used"),
    // Told its delimiter, not to rename its header.
    ("pipe_delimited.csv", &[], Refused, "pipe_delimited.csv:1: the header is one column holding '|' between names: the file seems to be delimited by '|', and provisio reads commas, semicolons and tabs; save it as CSV with commas"),
    // Not blamed on an empty month.
    ("rows_other_delimiter.csv", &[], RowRejected, "rows_other_delimiter.csv:3: the row is one field holding ';' between values, but the header is delimited by ',': the rows and the header use different delimiters; save the file with one delimiter throughout"),
    ("header_invisible_character.csv", &[], Refused, "header_invisible_character.csv:1: missing required column 'consumed'; the header has: product, month, con<U+200B>sumed; required: product, month, consumed (optional: stockout_days, reporting_rate, site); the header's 'consumed' holds the invisible character(s) U+200B (shown as <U+...>): delete that name and type it again"),
    // The value quoted as written, with both signs and the space.
    ("reporting_rate_double_percent.csv", &[], RowRejected, "reporting_rate_double_percent.csv:3: column 'reporting_rate': \"85%%\" has more than one % sign; write one, as in 85%"),
    ("reporting_rate_space_inside.csv", &[], RowRejected, "reporting_rate_space_inside.csv:3: column 'reporting_rate': \"8 5%\" has a space between its digits; a reporting rate has no digit groups: write it without the space (85%, if that is the rate), as in 85%"),
    ("too_many_fields.csv", &[], RowRejected, "too_many_fields.csv:3: the row has 4 fields but the header has 3"),
    ("single_month_product.csv", &[], Accepted, "Zinc: not fit: only 1 month(s) reported; at least 12 are needed to forecast"),
    ("all_zeros_product.csv", &[], Accepted, "Condoms: fit with care: 12 months reported: fewer than 24, so seasonality cannot be estimated; intermittent: 100% of reported months are zero"),
    ("odd_product_names.csv", &[], Accepted, "<script>alert(1)</script>: not fit"),
    ("long_product_name.csv", &[], Accepted, "rows read: 3 = 3 used as reported + 0 corrected by cleaning + 0 rejected"),
    // The wide layout: a row per product, a column per month; values counted one by one.
    ("wide_duplicate_month.csv", &[], Refused, "wide_duplicate_month.csv:1: column D (2024-01): the month 2024-01 has two columns, column B (Jan 2024) and column D (2024-01); each month must have one column"),
    ("wide_unreadable_month.csv", &[], Refused, "wide_unreadable_month.csv:1: column C (Febuary 2024): the header \"Febuary 2024\" looks like a month but cannot be read as one; month columns are headed like 2024-03"),
    ("wide_no_product.csv", &[], Refused, "wide_no_product.csv:1: the header has 3 month columns (the wide layout: one row per product, one column per month) but no column named 'product'"),
    ("wide_bad_number.csv", &[], RowRejected, "wide_bad_number.csv: line 3, column D (Mar 2024): \"12a\" is not a number"),
    ("wide_totals_row.csv", &[], RowRejected, "wide_totals_row.csv: line 4, column B (Jan 2024): the row's product is 'Grand total', a totals row of the table, not a product"),
    // Blank cells are months not reported: 4 values, not 8 (and no zeros).
    ("wide_blank_cells.csv", &[], Accepted, "rows read: 4 = 4 used as reported + 0 corrected by cleaning + 0 rejected (wide layout"),
    ("wide_blank_cells.csv", &["--layout", "long"], Refused, "wide_blank_cells.csv:1: missing required columns 'month', 'consumed'"),
];

#[test]
fn hostile_catalogue_gives_the_expected_messages() {
    let dir = repo("tests/data/bad");
    let listed: std::collections::BTreeSet<&str> = CATALOGUE.iter().map(|b| b.0).collect();
    for entry in std::fs::read_dir(&dir).unwrap() {
        let name = entry.unwrap().file_name().into_string().unwrap();
        if name.ends_with(".csv") {
            assert!(listed.contains(name.as_str()), "{name} has no expectation");
        }
    }
    let readme = std::fs::read_to_string(dir.join("README.md")).unwrap();
    for (file, options, outcome, message) in CATALOGUE {
        assert!(
            readme.contains(file),
            "{file} is not described in the README"
        );
        let w = Workdir::new();
        w.write(file, std::fs::read(dir.join(file)).unwrap());
        // Run from the temp dir with a bare file name so messages are stable.
        for cmd in ["inspect", "clean"] {
            let mut args = vec![cmd, *file];
            if cmd == "clean" {
                args.extend(["--out", "o"]);
            }
            args.extend(options.iter());
            let o = w.run(&args);
            let out = text(&o);
            let what = format!("{cmd} {file} {options:?}");
            assert_ne!(o.status.code(), Some(101), "{what} panicked:\n{out}");
            match outcome {
                Refused => {
                    assert_eq!(o.status.code(), Some(1), "{what} should be refused:\n{out}");
                    assert!(!w.path("o").exists(), "{what}: no output on refusal");
                }
                RowRejected | Accepted => {
                    assert!(o.status.success(), "{what} should go on:\n{out}");
                    let [read, used, adjusted, rejected] = accounting(&out);
                    assert_eq!(used + adjusted + rejected, read, "{what}");
                    assert_eq!(rejected > 0, *outcome == RowRejected, "{what}:\n{out}");
                    if cmd == "clean" {
                        // The rejected-rows file lists each rejected row with its reason.
                        assert_eq!(
                            w.read_csv_records("o/rejected.csv").1.len(),
                            rejected,
                            "{what}"
                        );
                    }
                }
            }
            // Verdicts are printed by inspect only; everything else by both.
            if cmd == "inspect" || !message.contains(": not fit") && !message.contains(": fit") {
                let shown = format!("{out}\n");
                assert!(
                    shown.contains(message),
                    "{what}: expected\n  {message}\ngot\n{out}"
                );
            }
        }
    }
}

/// A start after the current month cannot be fixed by fewer months: the
/// message asks for an earlier start only (common practice: suggest only
/// values that would be accepted).
#[test]
fn generate_with_a_future_start_suggests_only_an_earlier_start() {
    let dir = tempfile::tempdir().unwrap();
    let o = run_in(
        dir.path(),
        &[
            "generate",
            "--products",
            "5",
            "--start",
            "2099-01",
            "--out",
            "x.csv",
        ],
    );
    let t = text(&o);
    assert_eq!(o.status.code(), Some(1), "{t}");
    assert!(
        t.contains("give a --start of") && t.contains("or earlier"),
        "{t}"
    );
    assert!(!t.contains("--months 0"), "{t}");
}
