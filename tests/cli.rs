//! End-to-end tests: run the real binary in a temporary directory, feed it
//! CSV, read back its output files.

use std::path::{Path, PathBuf};
use std::process::{Command, Output};

/// A temporary working directory with helpers to run `provisio` in it.
struct Workdir {
    dir: tempfile::TempDir,
}

impl Workdir {
    fn new() -> Self {
        Workdir {
            dir: tempfile::tempdir().expect("temp dir"),
        }
    }

    fn path(&self, name: &str) -> PathBuf {
        self.dir.path().join(name)
    }

    fn write(&self, name: &str, bytes: &[u8]) -> PathBuf {
        let p = self.path(name);
        std::fs::write(&p, bytes).expect("write fixture");
        p
    }

    fn run(&self, args: &[&str]) -> Output {
        Command::new(env!("CARGO_BIN_EXE_provisio"))
            .args(args)
            .current_dir(self.dir.path())
            .output()
            .expect("run provisio")
    }

    fn read_csv(&self, name: &str) -> Vec<csv::StringRecord> {
        let mut r = csv::Reader::from_path(self.path(name)).expect("open output");
        r.records().map(|x| x.expect("record")).collect()
    }
}

fn text(o: &Output) -> String {
    format!(
        "{}{}",
        String::from_utf8_lossy(&o.stdout),
        String::from_utf8_lossy(&o.stderr)
    )
}

fn repo(rel: &str) -> String {
    Path::new(env!("CARGO_MANIFEST_DIR"))
        .join(rel)
        .display()
        .to_string()
}

/// Parses "rows read: N = U used as reported + A adjusted + R rejected".
fn accounting(out: &str) -> (usize, usize, usize, usize) {
    let line = out
        .lines()
        .find(|l| l.starts_with("rows read:"))
        .unwrap_or_else(|| panic!("no accounting line in:\n{out}"));
    let nums: Vec<usize> = line
        .split(|c: char| !c.is_ascii_digit())
        .filter(|s| !s.is_empty())
        .map(|s| s.parse().unwrap())
        .collect();
    (nums[0], nums[1], nums[2], nums[3])
}

#[test]
fn clean_demo_writes_outputs_that_reconcile() {
    let w = Workdir::new();
    let data = repo("datasets/demo/consumption.csv");
    let o = w.run(&["clean", &data, "--out", "out"]);
    let out = text(&o);
    assert!(o.status.success(), "{out}");
    let (read, used, adjusted, rejected) = accounting(&out);
    assert_eq!(used + adjusted + rejected, read, "{out}");
    let input_rows = std::fs::read_to_string(&data).unwrap().lines().count() - 1;
    assert_eq!(read, input_rows);

    let cleaned = w.read_csv("out/cleaned.csv");
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
    let log = w.read_csv("out/adjustments.csv");
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
    assert_eq!(w.read_csv("out/quality.csv").len(), 12);
}

#[test]
fn inspect_demo_prints_a_verdict_per_product_and_csv() {
    let w = Workdir::new();
    let o = w.run(&[
        "inspect",
        &repo("datasets/demo/consumption.csv"),
        "--csv",
        "q.csv",
    ]);
    let out = text(&o);
    assert!(o.status.success(), "{out}");
    assert!(out.contains("Snake antivenom vial: fit with care"), "{out}");
    assert!(out.contains("intermittent"), "{out}");
    assert!(out.contains("affected by stockouts"), "{out}");
    let q = w.read_csv("q.csv");
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
    let c = w.read_csv("o/cleaned.csv");
    let vals: Vec<f64> = c.iter().map(|r| r[3].parse().unwrap()).collect();
    // Common practice: reported ÷ reporting rate.
    assert_eq!(vals, vec![1000.0, 1000.0, 1000.0]);
}

#[test]
fn bad_setting_is_refused_with_the_value() {
    let w = Workdir::new();
    let o = w.run(&[
        "clean",
        &repo("datasets/demo/consumption.csv"),
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

/// The malformed-input catalogue: each file, whether it is refused, and the
/// message expected (see tests/data/bad/README.md).
const BAD: &[(&str, bool, &str)] = &[
    ("empty.csv", true, "empty.csv: the file is empty; expected a header line naming at least the columns product, month, consumed"),
    ("header_only.csv", true, "header_only.csv: the file has a header but no data rows"),
    ("missing_column.csv", true, "missing_column.csv:1: missing required column 'consumed'; the header has: product, month, quantity"),
    ("duplicate_column.csv", true, "duplicate_column.csv:1: column 'product' appears twice (fields 1 and 4); keep one"),
    ("not_utf8.csv", true, "not_utf8.csv:3: the file is not UTF-8 text (byte 0xE9 cannot start a UTF-8 character); it is probably a Latin-1 / Windows-1252 export"),
    ("all_rows_rejected.csv", true, "no usable rows: all 2 data rows were rejected; first problem, line 2: \"abc\" is not a number"),
    ("nothing_reported.csv", true, "no product has a usable month of consumption; product 'ORS': no month has a usable quantity"),
    ("bad_number.csv", false, "bad_number.csv:3: column 'consumed': \"12a\" is not a number; expected a plain number such as 1250 or 1250.5"),
    ("bad_month.csv", false, "bad_month.csv:3: column 'month': month \"Mar-2024\" is not a valid month; expected YYYY-MM (e.g. 2024-03) or YYYY-MM-DD (e.g. 2024-03-01)"),
    ("negative_quantity.csv", false, "negative_quantity.csv:3: column 'consumed': consumed -40 is negative; expected a quantity of 0 or more"),
    ("stockout_days_over_month.csv", false, "stockout_days_over_month.csv:3: column 'stockout_days': stockout_days 30 is outside 0-28 (2023-02 has 28 days)"),
    ("reporting_rate_over_100.csv", false, "reporting_rate_over_100.csv:3: column 'reporting_rate': reporting_rate 120% is outside 0-100%"),
    ("reporting_rate_negative.csv", false, "reporting_rate_negative.csv:3: column 'reporting_rate': reporting_rate -0.2 is outside 0-100%"),
    ("duplicate_rows.csv", false, "duplicate_rows.csv:4: duplicate of line 3 (product 'ORS', site 'North', month 2024-02) with different values; both rejected"),
    ("exact_duplicate_rows.csv", false, "exact_duplicate_rows.csv:4: exact duplicate of line 3 (product 'ORS', month 2024-02); the first copy is used"),
    ("too_many_fields.csv", false, "too_many_fields.csv:3: the row has 4 fields but the header has 3"),
    ("thousands_separator.csv", false, "thousands_separator.csv:2: the row has 4 fields but the header has 3"),
    ("decimal_comma.csv", false, "decimal_comma.csv:2: column 'consumed': \"1234,5\" has a comma (decimal comma or thousands separator)"),
];

#[test]
fn malformed_catalogue_gives_the_expected_messages() {
    let dir = Path::new(env!("CARGO_MANIFEST_DIR")).join("tests/data/bad");
    let listed: std::collections::BTreeSet<&str> = BAD.iter().map(|b| b.0).collect();
    for entry in std::fs::read_dir(&dir).unwrap() {
        let name = entry.unwrap().file_name().into_string().unwrap();
        if name.ends_with(".csv") {
            assert!(listed.contains(name.as_str()), "{name} has no expectation");
        }
    }
    for (file, refused, message) in BAD {
        let w = Workdir::new();
        let src = std::fs::read(dir.join(file)).unwrap();
        let path = w.write(file, &src);
        // Run from the temp dir with a bare file name so messages are stable.
        let _ = path;
        for cmd in ["inspect", "clean"] {
            let mut args = vec![cmd, file];
            if cmd == "clean" {
                args.extend(["--out", "o"]);
            }
            let o = w.run(&args);
            let out = text(&o);
            assert_ne!(o.status.code(), Some(101), "{cmd} {file} panicked:\n{out}");
            if *refused {
                assert_eq!(
                    o.status.code(),
                    Some(1),
                    "{cmd} {file} should be refused:\n{out}"
                );
                assert!(
                    !w.path("o/cleaned.csv").exists(),
                    "{cmd} {file}: no output on refusal"
                );
            } else {
                assert!(
                    o.status.success(),
                    "{cmd} {file} should go on with the row rejected:\n{out}"
                );
                let (read, used, adjusted, rejected) = accounting(&out);
                assert_eq!(used + adjusted + rejected, read, "{cmd} {file}");
                assert!(rejected >= 1, "{cmd} {file}");
            }
            let shown = if *refused {
                out.clone()
            } else if cmd == "clean" {
                // The rejected-rows file carries the reason too.
                let rej = w.read_csv("o/rejected.csv");
                assert!(!rej.is_empty(), "{file}: rejected.csv lists the row");
                out.clone()
            } else {
                out.clone()
            };
            assert!(
                shown.contains(message),
                "{cmd} {file}: expected\n  {message}\ngot\n{shown}"
            );
        }
    }
}
