//! End-to-end test of `provisio models`: run the real binary in a temporary
//! directory and check its table and CSV against the library's candidate
//! list, `provisio::models::candidates()`.

mod common;

use common::run_in;

#[test]
fn models_lists_every_candidate_with_its_needs_in_order() {
    let dir = tempfile::tempdir().expect("temp dir");
    let o = run_in(dir.path(), &["models"]);
    let stdout = String::from_utf8_lossy(&o.stdout).to_string();
    let stderr = String::from_utf8_lossy(&o.stderr);
    assert!(o.status.success(), "{stdout}{stderr}");

    let models = provisio::models::candidates();
    assert!(!models.is_empty());
    let lines: Vec<&str> = stdout.lines().collect();
    // Header, then one line per candidate in candidate order.
    assert_eq!(lines.len(), models.len() + 1, "{stdout}");
    for (m, line) in models.iter().zip(&lines[1..]) {
        let name = m.name();
        let cells: Vec<&str> = line.split("  ").filter(|c| !c.is_empty()).collect();
        assert_eq!(
            cells.first().map(|c| c.trim()),
            Some(name.as_str()),
            "{line}"
        );
        let needs = m.needs().describe();
        assert!(
            line.contains(&needs),
            "{name}: needs '{needs}' not in '{line}'"
        );
        assert!(
            line.contains(&m.description()),
            "{name}: description missing from '{line}'"
        );
    }
    // A seasonal multiplicative model states both of its needs in words.
    let hw = lines
        .iter()
        .find(|l| l.starts_with("holt-winters-multiplicative "))
        .unwrap_or_else(|| panic!("no holt-winters-multiplicative line in:\n{stdout}"));
    assert!(hw.contains("at least 24 months"), "{hw}");
    assert!(hw.contains("all values above zero"), "{hw}");
}

#[test]
fn models_csv_has_one_row_per_candidate() {
    let dir = tempfile::tempdir().expect("temp dir");
    let o = run_in(dir.path(), &["models", "--csv", "models.csv"]);
    assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
    let mut r = csv::Reader::from_path(dir.path().join("models.csv")).expect("open models.csv");
    let header = r.headers().expect("header").clone();
    assert_eq!(
        header.iter().collect::<Vec<_>>(),
        ["name", "needs", "description"]
    );
    let rows: Vec<csv::StringRecord> = r.records().map(|x| x.expect("record")).collect();
    let models = provisio::models::candidates();
    assert_eq!(rows.len(), models.len());
    for (m, row) in models.iter().zip(&rows) {
        assert_eq!(&row[0], m.name());
        assert_eq!(&row[1], m.needs().describe());
        assert_eq!(&row[2], m.description());
    }
    // No temporary file is left beside the output.
    let leftovers: Vec<_> = std::fs::read_dir(dir.path())
        .expect("read dir")
        .map(|e| e.expect("entry").file_name())
        .filter(|n| n != "models.csv")
        .collect();
    assert!(leftovers.is_empty(), "{leftovers:?}");
}
