//! End-to-end: outlier flags do not depend on how many later months the
//! run sees (the demo cut with `--until`), and `generate` writes the true
//! demand, entry errors and campaigns that the readers take in their stride.

mod common;

use std::collections::BTreeSet;

use common::{repo, text, Workdir};

/// (product, month) of every month flagged in `dir/cleaned.csv`, up to `until`.
fn flags(w: &Workdir, dir: &str, until: &str) -> BTreeSet<(String, String)> {
    w.read_csv_maps(&format!("{dir}/cleaned.csv"))
        .into_iter()
        .filter(|r| r["outlier"] == "yes" && r["month"].as_str() <= until)
        .map(|r| (r["product"].clone(), r["month"].clone()))
        .collect()
}

#[test]
fn demo_flags_are_the_same_with_a_year_less() {
    let w = Workdir::new();
    let demo = repo("datasets/demo/consumption.csv");
    let demo = demo.to_str().unwrap();
    let common = ["--horizon", "1", "--no-report", "--no-workbook"];
    let o = w.run(&[&["forecast", demo, "--out", "full"][..], &common].concat());
    assert!(o.status.success(), "{}", text(&o));
    let o = w.run(
        &[
            &["forecast", demo, "--out", "cut", "--until", "2025-10"][..],
            &common,
        ]
        .concat(),
    );
    assert!(o.status.success(), "{}", text(&o));
    let full = flags(&w, "full", "2025-10");
    let cut = flags(&w, "cut", "2025-10");
    assert_eq!(full, cut);
    // The demo's known entry error (invented: amoxicillin, one district,
    // October 2023) is flagged, and amoxicillin's June peaks are not.
    let amox: Vec<&str> = full
        .iter()
        .filter(|(p, _)| p.starts_with("Amoxicillin"))
        .map(|(_, m)| m.as_str())
        .collect();
    assert_eq!(amox, ["2023-10"]);
}

#[test]
fn generate_writes_true_demand_and_readers_ignore_it() {
    let w = Workdir::new();
    let args = [
        "generate",
        "--products",
        "6",
        "--sites",
        "2",
        "--months",
        "36",
        "--seed",
        "4",
        "--true-demand",
        "--entry-errors",
        "0.02",
        "--campaigns",
        "0.03",
    ];
    let o = w.run(&[&args[..], &["--out", "a.csv"]].concat());
    assert!(o.status.success(), "{}", text(&o));
    let o = w.run(&[&args[..], &["--out", "b.csv"]].concat());
    assert!(o.status.success(), "{}", text(&o));
    assert_eq!(
        std::fs::read(w.path("a.csv")).unwrap(),
        std::fs::read(w.path("b.csv")).unwrap(),
        "same seed, same file"
    );
    let (h, rows) = w.read_csv_records("a.csv");
    assert_eq!(h.last().map(String::as_str), Some("true_demand"));
    assert!(rows
        .iter()
        .all(|r| r[6].parse::<f64>().is_ok_and(|v| v >= 0.0)));
    // Without the options, the file is the one generate always wrote.
    let o = w.run(&[
        "generate",
        "--products",
        "6",
        "--sites",
        "2",
        "--months",
        "36",
        "--seed",
        "4",
        "--out",
        "plain.csv",
    ]);
    assert!(o.status.success());
    let (ph, _) = w.read_csv_records("plain.csv");
    assert_eq!(ph.len(), 6);
    // The extra column is ignored by the readers: clean and forecast run.
    let o = w.run(&["clean", "a.csv", "--out", "c"]);
    assert!(o.status.success(), "{}", text(&o));
    let o = w.run(&[
        "forecast",
        "a.csv",
        "--out",
        "f",
        "--horizon",
        "3",
        "--no-report",
        "--no-workbook",
    ]);
    assert!(o.status.success(), "{}", text(&o));
    // A workbook cannot carry the truth column: refused, not dropped.
    let o = w.run(&[&args[..], &["--out", "a.xlsx"]].concat());
    assert!(!o.status.success());
    assert!(text(&o).contains("--true-demand"), "{}", text(&o));
}
