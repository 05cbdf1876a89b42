//! The README's examples of output are real: every block marked
//! `<!-- output: NAME -->` in README.md (a fenced block or a Markdown table
//! on the next line) is produced here by running the commands the README
//! shows, on the demo scenario, and compared with what the README holds.
//! Figures quoted in prose between `<!-- figures from: NAME -->` and
//! `<!-- end figures -->` must appear in that block's output (or in the
//! files it names, see [`Block::sources`]).
//!
//! After an intended change of output:
//!
//! ```sh
//! PROVISIO_UPDATE_README=1 cargo test --test readme
//! git diff README.md     # review; prose figures that no longer hold are listed, fix them by hand
//! ```
//!
//! Times ("in 2.3 s") are compared as "# s", so the check does not depend
//! on the machine; every run is in a temporary folder with relative paths,
//! so no temporary path reaches the output.

mod common;

use std::collections::BTreeSet;
use std::fs;
use std::path::{Path, PathBuf};
use std::process::{Command, Stdio};
use std::sync::Mutex;

/// Every marked block of the README, so a marker without a check (or a
/// check whose marker was deleted) fails.
const BLOCKS: &[&str] = &[
    "forecast-demo",
    "forecast-json",
    "config-refusal",
    "workbook-forecast",
    "workbook-rejections",
    "changes-demo",
    "changes-applied",
    "review-demo",
    "review-refusal",
    "review-vintages",
    "crosscheck-demo",
    "crosscheck-refusal",
    "plan-demo",
    "plan-orders-hiv",
    "plan-totals-hiv",
];

const UPDATE_VAR: &str = "PROVISIO_UPDATE_README";

/// One README rewrite at a time (the tests run in parallel).
static README_LOCK: Mutex<()> = Mutex::new(());

fn readme_path() -> PathBuf {
    common::repo("README.md")
}

/// A temporary folder holding a copy of the demo data under
/// `datasets/demo/`, so commands read exactly as in the README.
struct Sandbox {
    dir: tempfile::TempDir,
}

impl Sandbox {
    fn new() -> Sandbox {
        let dir = tempfile::tempdir().expect("temporary folder");
        let demo = dir.path().join("datasets/demo");
        fs::create_dir_all(&demo).expect("datasets/demo");
        for e in fs::read_dir(common::repo("datasets/demo")).expect("demo folder") {
            let e = e.expect("demo entry");
            if e.path().is_file() {
                fs::copy(e.path(), demo.join(e.file_name())).expect("copy demo file");
            }
        }
        Sandbox { dir }
    }

    fn path(&self, rel: &str) -> PathBuf {
        self.dir.path().join(rel)
    }

    /// Runs `provisio args` and returns what a terminal would show:
    /// standard output and standard error interleaved as written (both go
    /// to one file). Panics when the exit code is not `code`.
    fn run(&self, args: &[&str], code: i32) -> String {
        let log = self.path(".readme-run.log");
        let f = fs::File::create(&log).expect("log file");
        let status = Command::new(env!("CARGO_BIN_EXE_provisio"))
            .args(args)
            .current_dir(self.dir.path())
            .env("NO_COLOR", "1")
            .stdin(Stdio::null())
            .stdout(f.try_clone().expect("log file"))
            .stderr(f)
            .status()
            .expect("run provisio");
        let out = fs::read_to_string(&log).expect("read log");
        assert_eq!(
            status.code(),
            Some(code),
            "provisio {} exited {status}:\n{out}",
            args.join(" ")
        );
        out
    }

    fn read(&self, rel: &str) -> String {
        fs::read_to_string(self.path(rel)).unwrap_or_else(|e| panic!("{rel}: {e}"))
    }
}

/// Lines of `text` from the first line starting with `from` up to (not
/// including) the first later line starting with `to`.
fn lines_between(text: &str, from: &str, to: &str) -> String {
    let mut out = String::new();
    let mut on = false;
    for l in text.lines() {
        if !on && l.starts_with(from) {
            on = true;
        } else if on && l.starts_with(to) {
            break;
        }
        if on {
            out.push_str(l);
            out.push('\n');
        }
    }
    assert!(
        !out.is_empty(),
        "no line starting with {from:?} in:\n{text}"
    );
    out
}

/// The lines of `text` that start with one of `starts`, in order.
fn lines_starting(text: &str, starts: &[&str]) -> String {
    let mut out = String::new();
    for l in text.lines() {
        if starts.iter().any(|s| l.starts_with(s)) {
            out.push_str(l);
            out.push('\n');
        }
    }
    out
}

/// A quantity with thousands grouped by commas, rounded to a whole number.
fn grouped(v: f64) -> String {
    let r = v.round() as i64;
    let digits = r.unsigned_abs().to_string();
    let mut out = String::new();
    for (i, c) in digits.chars().enumerate() {
        if i > 0 && (digits.len() - i) % 3 == 0 {
            out.push(',');
        }
        out.push(c);
    }
    if r < 0 {
        format!("-{out}")
    } else {
        out
    }
}

/// Times ("in 0.078 s", "4.3 s") as "# s": they differ run to run.
fn normalise(text: &str) -> String {
    let mut out = String::new();
    for line in text.lines() {
        let line = line.trim_end();
        let b: Vec<char> = line.chars().collect();
        let mut i = 0;
        while i < b.len() {
            let start_ok = i == 0 || !b[i - 1].is_alphanumeric() && b[i - 1] != '.';
            if start_ok && b[i].is_ascii_digit() {
                let mut j = i;
                while j < b.len() && (b[j].is_ascii_digit() || b[j] == '.') {
                    j += 1;
                }
                let is_time = b.get(j) == Some(&' ')
                    && b.get(j + 1) == Some(&'s')
                    && b.get(j + 2).map_or(true, |c| !c.is_alphanumeric());
                if is_time {
                    out.push('#');
                } else {
                    out.extend(&b[i..j]);
                }
                i = j;
                continue;
            }
            out.push(b[i]);
            i += 1;
        }
        out.push('\n');
    }
    // The JSON summary's time taken.
    let mut lines: Vec<String> = out.lines().map(String::from).collect();
    for l in &mut lines {
        if let Some(p) = l.find("\"seconds\": ") {
            l.truncate(p + "\"seconds\": ".len());
            l.push('#');
        }
    }
    lines.join("\n")
}

/// Where a marked block sits: the line range of its content.
fn find_block(lines: &[&str], name: &str) -> Option<(usize, usize)> {
    let marker = format!("<!-- output: {name} -->");
    let at = lines.iter().position(|l| l.trim() == marker)?;
    let first = lines.get(at + 1)?;
    if first.starts_with("```") {
        let end = lines[at + 2..].iter().position(|l| l.starts_with("```"))?;
        Some((at + 2, at + 2 + end))
    } else if first.starts_with('|') {
        let n = lines[at + 1..]
            .iter()
            .take_while(|l| l.starts_with('|'))
            .count();
        Some((at + 1, at + 1 + n))
    } else {
        None
    }
}

/// The numbers a sentence quotes: tokens with a decimal point, a thousands
/// comma or a sign, without their sign (compared as magnitudes) and
/// percent sign. Plain integers ("12 months", "2026") are not figures.
fn figures(text: &str) -> BTreeSet<String> {
    let t = text.replace('−', "-");
    let b: Vec<char> = t.chars().collect();
    let mut out = BTreeSet::new();
    let mut i = 0;
    while i < b.len() {
        let prev = if i == 0 { ' ' } else { b[i - 1] };
        let signed = (b[i] == '+' || b[i] == '-')
            && !prev.is_alphanumeric()
            && b.get(i + 1).is_some_and(|c| c.is_ascii_digit());
        if (signed || b[i].is_ascii_digit()) && !prev.is_alphanumeric() && prev != '.' {
            let mut j = if signed { i + 1 } else { i };
            let digits_from = j;
            while j < b.len()
                && (b[j].is_ascii_digit()
                    || ((b[j] == '.' || b[j] == ',')
                        && b.get(j + 1).is_some_and(|c| c.is_ascii_digit())))
            {
                j += 1;
            }
            let tok: String = b[digits_from..j].iter().collect();
            let month_like =
                b.get(j) == Some(&'-') && b.get(j + 1).is_some_and(|c| c.is_ascii_digit());
            if (signed || tok.contains('.') || tok.contains(',')) && !month_like {
                out.insert(tok);
            }
            i = j.max(i + 1);
            continue;
        }
        i += 1;
    }
    out
}

/// The prose regions citing `name`, with their first line number.
fn figure_regions(lines: &[&str], name: &str) -> Vec<(usize, String)> {
    let marker = format!("<!-- figures from: {name} -->");
    let mut out = Vec::new();
    for (i, l) in lines.iter().enumerate() {
        if l.trim() == marker {
            let body: Vec<&str> = lines[i + 1..]
                .iter()
                .take_while(|l| {
                    let l = l.trim();
                    l != "<!-- end figures -->"
                        && !l.starts_with("<!-- figures from:")
                        && !l.starts_with("#")
                })
                .copied()
                .collect();
            let closed = lines
                .get(i + 1 + body.len())
                .is_some_and(|l| l.trim() == "<!-- end figures -->");
            assert!(
                closed,
                "README.md line {}: <!-- figures from: {name} --> has no <!-- end figures --> before the next heading or region",
                i + 1
            );
            out.push((i + 2, body.join("\n")));
        }
    }
    out
}

/// A block as the tool prints it now, and the text its prose may quote
/// (the block and any file it draws on).
struct Block {
    name: &'static str,
    shown: String,
    sources: String,
}

impl Block {
    fn new(name: &'static str, shown: String) -> Block {
        Block {
            name,
            sources: shown.clone(),
            shown,
        }
    }

    fn with_sources(mut self, extra: &str) -> Block {
        self.sources.push('\n');
        self.sources.push_str(extra);
        self
    }
}

/// Compares each block with the README (rewriting it under
/// [`UPDATE_VAR`]) and checks the prose figures that cite it.
fn check(blocks: Vec<Block>) {
    let _guard = README_LOCK.lock().unwrap_or_else(|e| e.into_inner());
    let path = readme_path();
    let mut readme = fs::read_to_string(&path).expect("README.md");
    let update = std::env::var_os(UPDATE_VAR).is_some();
    let mut failures = Vec::new();
    for b in &blocks {
        assert!(
            BLOCKS.contains(&b.name),
            "{} is not listed in BLOCKS",
            b.name
        );
        let lines: Vec<&str> = readme.lines().collect();
        let Some((from, to)) = find_block(&lines, b.name) else {
            failures.push(format!(
                "README.md has no block marked <!-- output: {} --> (the marker goes on the line before the ``` fence or the table)",
                b.name
            ));
            continue;
        };
        let held = lines[from..to].join("\n");
        if normalise(&held) != normalise(&b.shown) {
            if update {
                let mut new: Vec<String> = lines[..from].iter().map(|s| s.to_string()).collect();
                new.extend(b.shown.trim_end().lines().map(|l| l.trim_end().to_string()));
                new.extend(lines[to..].iter().map(|s| s.to_string()));
                readme = new.join("\n") + "\n";
            } else {
                failures.push(format!(
                    "README.md block '{}' (line {}) no longer matches the output.\n--- README\n{}\n--- output now\n{}\n",
                    b.name,
                    from + 1,
                    held,
                    b.shown.trim_end()
                ));
            }
        }
        let lines: Vec<&str> = readme.lines().collect();
        let have = figures(&b.sources);
        for (line, text) in figure_regions(&lines, b.name) {
            let missing: Vec<String> = figures(&text).difference(&have).cloned().collect();
            if !missing.is_empty() {
                failures.push(format!(
                    "README.md line {line}: the prose quotes {} which the output of '{}' does not hold now; correct the prose by hand",
                    missing.join(", "),
                    b.name
                ));
            }
        }
    }
    if update {
        fs::write(&path, &readme).expect("write README.md");
    }
    assert!(
        failures.is_empty(),
        "{}\nAfter an intended change: {UPDATE_VAR}=1 cargo test --test readme, then review git diff README.md",
        failures.join("\n")
    );
}

/// The chart image the README shows (`docs/NAME`) is the one the run drew:
/// the PNG files are deterministic (embedded font), so their bytes are
/// compared; [`UPDATE_VAR`] copies the new one over.
fn check_image(readme_name: &str, charts: &Path, prefix: &str) {
    let drawn = fs::read_dir(charts)
        .unwrap_or_else(|e| panic!("{}: {e}", charts.display()))
        .filter_map(|e| e.ok().map(|e| e.path()))
        .find(|p| {
            p.extension().is_some_and(|x| x == "png")
                && p.file_name()
                    .and_then(|n| n.to_str())
                    .is_some_and(|n| n.starts_with(prefix))
        })
        .unwrap_or_else(|| panic!("no chart {prefix}*.png in {}", charts.display()));
    let shown = common::repo(&format!("docs/{readme_name}"));
    let readme = fs::read_to_string(readme_path()).expect("README.md");
    assert!(
        readme.contains(&format!("](docs/{readme_name})")),
        "README.md no longer shows docs/{readme_name}"
    );
    let new = fs::read(&drawn).expect("chart");
    if fs::read(&shown).ok().as_deref() == Some(new.as_slice()) {
        return;
    }
    if std::env::var_os(UPDATE_VAR).is_some() {
        fs::write(&shown, &new).expect("write the README's chart");
        return;
    }
    panic!(
        "docs/{readme_name} is not the chart the README's commands draw now ({}); after an intended change: {UPDATE_VAR}=1 cargo test --test readme, and look at the new image",
        drawn.display()
    );
}

#[test]
fn every_marked_block_is_checked() {
    let readme = fs::read_to_string(readme_path()).expect("README.md");
    let marked: BTreeSet<&str> = readme
        .lines()
        .filter_map(|l| {
            l.trim()
                .strip_prefix("<!-- output: ")
                .and_then(|r| r.strip_suffix(" -->"))
        })
        .collect();
    let checked: BTreeSet<&str> = BLOCKS.iter().copied().collect();
    assert_eq!(
        marked, checked,
        "markers in README.md against BLOCKS in tests/readme.rs"
    );
    for l in readme.lines() {
        if let Some(r) = l.trim().strip_prefix("<!-- figures from: ") {
            let name = r.trim_end_matches(" -->");
            assert!(
                checked.contains(name),
                "figures cite an unknown block {name}"
            );
        }
    }
}

#[test]
fn figures_and_times_are_read_as_meant() {
    // The helpers themselves, on hand-made text.
    let f = figures("WAPE 7.9%, bias +1.1% (−8.4), 15,422 tests, 12 months, 2026-12, p = 0.019");
    let want: BTreeSet<String> = ["7.9", "1.1", "8.4", "15,422", "0.019"]
        .iter()
        .map(|s| s.to_string())
        .collect();
    assert_eq!(f, want);
    assert_eq!(
        normalise("forecast 12 product(s) in 4.3 s; wrote x\nin 0.078 s\n  \"seconds\": 1.25,"),
        "forecast 12 product(s) in # s; wrote x\nin # s\n  \"seconds\": #"
    );
    assert_eq!(grouped(1234567.4), "1,234,567");
    assert_eq!(grouped(999.5), "1,000");
}

/// `forecast` on the demo: the terminal output, and the JSON summary.
#[test]
fn forecast_on_the_demo() {
    let s = Sandbox::new();
    let out = s.run(
        &[
            "forecast",
            "datasets/demo/consumption.csv",
            "--out",
            "demo-output",
        ],
        0,
    );
    s.run(
        &[
            "report",
            "demo-output",
            "--chart-files",
            "Malaria rapid diagnostic test",
        ],
        0,
    );
    check_image(
        "chart-malaria-rdt.png",
        &s.path("demo-output/charts"),
        "malaria-rapid-diagnostic-test",
    );
    let json = s.run(
        &[
            "--json",
            "forecast",
            "datasets/demo/consumption.csv",
            "--out",
            "demo-output",
        ],
        0,
    );
    // The reporting-rate uplift the terminal summarises, recomputed from the
    // output files: Σ(after − before) of the reporting-scaled entries of
    // adjustments.csv ÷ Σ reported of cleaned.csv, per product.
    let mut added: std::collections::BTreeMap<String, f64> = Default::default();
    for r in csv_rows(&s.read("demo-output/adjustments.csv")) {
        if r["rule"] == "reporting-scaled" {
            *added.entry(r["product"].clone()).or_default() += num(&r, "after") - num(&r, "before");
        }
    }
    let mut reported: std::collections::BTreeMap<String, f64> = Default::default();
    for r in csv_rows(&s.read("demo-output/cleaned.csv")) {
        if let Ok(v) = r["reported"].parse::<f64>() {
            *reported.entry(r["product"].clone()).or_default() += v;
        }
    }
    let mut up: Vec<f64> = added.iter().map(|(p, a)| 100.0 * a / reported[p]).collect();
    up.sort_by(f64::total_cmp);
    let (lo, hi) = (up[0], up[up.len() - 1]);
    assert!(
        out.contains(&format!(
            "added {lo:.1}–{hi:.1}% to the reported volume ({} of 12 products",
            up.len()
        )),
        "{lo:.1}–{hi:.1}%:\n{out}"
    );
    // No sign on a figure that rounds to zero, anywhere a person reads it.
    for f in ["demo-output/selection.csv", "demo-output/report.html"] {
        let text = s.read(f);
        assert!(!text.contains("-0.0%") && !text.contains("+0.0%"), "{f}");
    }
    assert!(!out.contains("-0.0%") && !out.contains("+0.0%"), "{out}");
    check(vec![
        Block::new("forecast-demo", out),
        Block::new("forecast-json", abridged_json(&json)),
    ]);
}

/// A run configuration with a misspelt key, refused with its place.
#[test]
fn configuration_refusal() {
    let s = Sandbox::new();
    // As the README describes it: `horizn = 24` on the third line, under
    // [projection].
    fs::write(
        s.path("run.toml"),
        "[projection]\nhorizon = 12\nhorizn = 24\n",
    )
    .expect("run.toml");
    let out = s.run(&["forecast", "--config", "run.toml"], 1);
    check(vec![Block::new(
        "config-refusal",
        lines_starting(&out, &["error:"]),
    )]);
}

/// The JSON summary cut to one product (its reason to its first clause) and
/// the first and last of its files.
fn abridged_json(text: &str) -> String {
    let start = text.find('{').expect("a JSON object");
    let mut v: serde_json::Value = serde_json::from_str(&text[start..]).expect("JSON summary");
    if let Some(ps) = v.get_mut("products").and_then(|p| p.as_array_mut()) {
        ps.retain(|p| p["product"] == "Male condom");
        for p in ps.iter_mut() {
            if let Some(r) = p.get("reason").and_then(|r| r.as_str()) {
                let cut = r.split("; ").next().unwrap_or(r).to_string();
                p["reason"] = serde_json::Value::String(format!("{cut}; ..."));
            }
        }
    }
    if let Some(fs) = v.get_mut("files").and_then(|p| p.as_array_mut()) {
        if fs.len() > 2 {
            let last = fs[fs.len() - 1].clone();
            fs.truncate(1);
            fs.push(serde_json::Value::String("...".into()));
            fs.push(last);
        }
    }
    serde_json::to_string_pretty(&v).expect("JSON")
}

/// The demo as a workbook: generated, forecast, and a workbook with
/// problem cells read.
#[test]
fn workbooks_in_and_out() {
    let s = Sandbox::new();
    s.run(&["generate", "--demo", "--out", "consumption.xlsx"], 0);
    let out = s.run(&["forecast", "consumption.xlsx", "--out", "demo-output"], 0);
    let first = out.lines().next().unwrap_or("").to_string();
    let tail = lines_starting(&out, &["forecast ", "wrote forecast.xlsx"]);
    fs::copy(
        common::repo("tests/data/sheets/openpyxl.xlsx"),
        s.path("openpyxl.xlsx"),
    )
    .expect("copy openpyxl.xlsx");
    let inspect = s.run(&["inspect", "openpyxl.xlsx", "--sheet", "Data"], 0);
    let wrong_sheet = s.run(&["inspect", "consumption.xlsx", "--sheet", "Data"], 1);
    check(vec![
        Block::new("workbook-forecast", format!("{first}\n...\n{tail}")),
        Block::new(
            "workbook-rejections",
            lines_starting(&inspect, &["rejected:"]) + &lines_starting(&wrong_sheet, &["error:"]),
        ),
    ]);
}

/// Known changes on the demo: the terminal table and one line of
/// `changes_applied.csv`.
#[test]
fn known_changes_on_the_demo() {
    let s = Sandbox::new();
    let out = s.run(
        &[
            "forecast",
            "--config",
            "datasets/demo/run.toml",
            "--changes",
            "datasets/demo/changes.csv",
            "--out",
            "demo-changes",
        ],
        0,
    );
    let table = lines_between(&out, "applied ", "forecast ");
    s.run(
        &[
            "report",
            "demo-changes",
            "--chart-files",
            "HIV rapid test kit (newly scaled up)",
        ],
        0,
    );
    check_image(
        "changes-hiv-rapid-test.png",
        &s.path("demo-changes/charts"),
        "hiv-rapid-test-kit",
    );
    let applied = s.read("demo-changes/changes_applied.csv");
    let mut lines = applied.lines();
    let header = lines.next().unwrap_or("").to_string();
    let row = lines
        .find(|l| l.starts_with("HIV rapid test kit (newly scaled up),2027-01,"))
        .expect("the HIV kit's first month of the scale-up");
    // The note cut after its first words, as in the README.
    let row = match row.find("\"Invented for the demo: ") {
        Some(p) => format!("{}\"Invented for the demo: ...\"", &row[..p]),
        None => row.to_string(),
    };
    // The figures of the walk-through, formatted as the prose gives them.
    let cells: Vec<&str> = row.split(',').collect();
    let stat: f64 = cells
        .get(4)
        .and_then(|v| v.parse().ok())
        .expect("statistical");
    let after: f64 = cells.get(7).and_then(|v| v.parse().ok()).expect("adjusted");
    // The target the row moves towards, from the first of its six months:
    // after = stat + (target − stat) / 6.
    let target = stat + 6.0 * (after - stat);
    let worked = format!("{} {} {}", grouped(stat), grouped(after), grouped(target));
    // The switch: what the injectable loses and the implant gains over 24 months.
    let total = |name: &str, col: usize| -> f64 {
        table
            .lines()
            .find(|l| l.starts_with(name))
            .and_then(|l| l.split_whitespace().rev().nth(5 - col))
            .and_then(|v| v.parse().ok())
            .unwrap_or_else(|| panic!("{name} in the changes table:\n{table}"))
    };
    let lost = total("Injectable", 3) - total("Injectable", 4);
    let switch = format!(
        "{} {} {} {}",
        grouped(total("Injectable", 3)),
        grouped(total("Injectable", 4)),
        grouped(lost),
        grouped(0.25 * lost)
    );
    check(vec![
        Block::new("changes-demo", table.clone())
            .with_sources(&s.read("datasets/demo/changes.csv").replace(',', " "))
            .with_sources(&format!(
                "{} {} {} {switch}",
                grouped(total("Contraceptive", 3)),
                grouped(total("Contraceptive", 4)),
                grouped(total("Nevirapine", 4))
            )),
        Block::new("changes-applied", format!("{header}\n{row}\n")).with_sources(&worked),
    ]);
}

/// The review walk-through: a forecast as of 2025-10 reviewed against the
/// demo's later months, and a refusal.
#[test]
fn review_on_the_demo() {
    let s = Sandbox::new();
    s.run(
        &[
            "forecast",
            "datasets/demo/consumption.csv",
            "--until",
            "2025-10",
            "--out",
            "past-2025-10",
        ],
        0,
    );
    let out = s.run(
        &[
            "review",
            "past-2025-10",
            "--actuals",
            "datasets/demo/consumption.csv",
            "--out",
            "review-demo",
        ],
        0,
    );
    let shown = lines_starting(
        &out,
        &[
            "product ",
            "Contraceptive implant",
            "HIV rapid test kit",
            "Malaria rapid diagnostic test",
            "Snake antivenom vial",
            "Zinc 20 mg",
        ],
    );
    // The findings and audit the prose quotes.
    let review_csv = s.read("review-demo/review.csv");
    // Actuals that end before the forecast period: refused.
    let demo = s.read("datasets/demo/consumption.csv");
    let month_col = demo
        .lines()
        .next()
        .and_then(|h| h.split(',').position(|c| c == "month"))
        .expect("a month column in the demo data");
    let kept: Vec<&str> = demo
        .lines()
        .enumerate()
        .filter(|(i, l)| *i == 0 || l.split(',').nth(month_col).is_some_and(|m| m <= "2025-10"))
        .map(|(_, l)| l)
        .collect();
    fs::write(s.path("old.csv"), kept.join("\n") + "\n").expect("old.csv");
    let refusal = s.run(
        &[
            "review",
            "past-2025-10",
            "--actuals",
            "old.csv",
            "--out",
            "review-old",
        ],
        1,
    );
    // A second vintage, six months later, reviewed with the first.
    s.run(
        &[
            "forecast",
            "datasets/demo/consumption.csv",
            "--until",
            "2026-04",
            "--out",
            "past-2026-04",
        ],
        0,
    );
    s.run(
        &[
            "review",
            "past-2025-10",
            "past-2026-04",
            "--actuals",
            "datasets/demo/consumption.csv",
            "--out",
            "review-vintages",
        ],
        0,
    );
    let mut vintages = String::from(
        "| vintage | forecast from | months both forecast | WAPE on them | closest |\n|---|---|---|---|---|\n",
    );
    for r in csv_rows(&s.read("review-vintages/review.csv"))
        .iter()
        .filter(|r| r["product"] == "HIV rapid test kit (newly scaled up)")
    {
        let wape = num(r, "wape_common_pct");
        vintages.push_str(&format!(
            "| {} | {} | {} | {wape:.1}% | {} |\n",
            r["vintage"], r["forecast_start"], r["common_months"], r["closest_vintage"]
        ));
    }
    check(vec![
        Block::new("review-vintages", vintages),
        // CSV commas would join neighbouring numbers into one figure.
        Block::new("review-demo", shown).with_sources(&review_csv.replace(',', " ")),
        Block::new("review-refusal", lines_starting(&refusal, &["error:"])),
    ]);
}

/// `crosscheck` and `plan` on the demo forecast.
#[test]
fn crosscheck_and_plan_on_the_demo() {
    let s = Sandbox::new();
    s.run(
        &[
            "forecast",
            "datasets/demo/consumption.csv",
            "--out",
            "demo-output",
        ],
        0,
    );
    let cc = s.run(
        &[
            "crosscheck",
            "demo-output",
            "--services",
            "datasets/demo/services.csv",
            "--population",
            "datasets/demo/population.csv",
        ],
        0,
    );
    let cc_table = lines_between(
        &cc,
        "services rows read",
        "Artemether-lumefantrine 20/120 mg tablet x24:",
    );
    let cc_csv = s.read("demo-output/crosscheck.csv");
    check_image(
        "crosscheck-artemether-lumefantrine.png",
        &s.path("demo-output/charts"),
        "crosscheck-artemether-lumefantrine",
    );
    let cc_figures = crosscheck_figures(&cc_csv);
    // A population file with a bad rate on line 3: refused whole.
    let pop = s.read("datasets/demo/population.csv");
    let mut lines: Vec<String> = pop.lines().map(String::from).collect();
    if let Some(l) = lines.get_mut(2) {
        let mut cells: Vec<String> = l.split(',').map(String::from).collect();
        cells[5] = "abc".into();
        *l = cells.join(",");
    }
    fs::write(s.path("pop.csv"), lines.join("\n") + "\n").expect("pop.csv");
    let refusal = s.run(&["crosscheck", "demo-output", "--population", "pop.csv"], 1);
    let plan = s.run(
        &[
            "plan",
            "demo-output",
            "--stock",
            "datasets/demo/stock.csv",
            "--on-order",
            "datasets/demo/on_order.csv",
        ],
        0,
    );
    let plan_table = lines_between(&plan, "product ", "warning:");
    check_image(
        "plan-hiv-rapid-test.png",
        &s.path("demo-output/charts"),
        "plan-hiv-rapid-test-kit",
    );
    let orders = orders_table(
        &s.read("demo-output/orders.csv"),
        "HIV rapid test kit (newly scaled up)",
    );
    let totals = totals_table(
        &s.read("demo-output/order_totals.csv"),
        "HIV rapid test kit (newly scaled up)",
    );
    let plan_csv = plan_figures(&s.read("demo-output/plan.csv"));
    check(vec![
        Block::new("crosscheck-demo", cc_table).with_sources(&cc_figures),
        Block::new("crosscheck-refusal", lines_starting(&refusal, &["error:"])),
        Block::new("plan-demo", plan_table.clone()).with_sources(&plan_csv),
        Block::new("plan-orders-hiv", orders),
        Block::new("plan-totals-hiv", totals),
    ]);
}

/// One CSV file as header → cells maps.
fn csv_rows(text: &str) -> Vec<std::collections::BTreeMap<String, String>> {
    let mut r = csv::Reader::from_reader(text.as_bytes());
    let h: Vec<String> = r
        .headers()
        .expect("header")
        .iter()
        .map(String::from)
        .collect();
    r.records()
        .map(|x| {
            let x = x.expect("row");
            h.iter().cloned().zip(x.iter().map(String::from)).collect()
        })
        .collect()
}

fn num(row: &std::collections::BTreeMap<String, String>, col: &str) -> f64 {
    row.get(col)
        .and_then(|v| v.parse().ok())
        .unwrap_or_else(|| panic!("column {col} in {row:?}"))
}

/// A product's proposed orders as the README's Markdown table.
fn orders_table(csv: &str, product: &str) -> String {
    let mut t = String::from(
        "| order month | arrival | covers to | quantity | packs | cost |\n|---|---|---|---|---|---|\n",
    );
    for r in csv_rows(csv).iter().filter(|r| r["product"] == product) {
        let col = |k: &str| r.get(k).cloned().unwrap_or_default();
        t.push_str(&format!(
            "| {} | {} | {} | {} | {} | {} |\n",
            col("order_month"),
            col("arrival_month"),
            col("covers_to"),
            grouped(num(r, "quantity")),
            grouped(num(r, "packs")),
            grouped(num(r, "cost"))
        ));
    }
    t
}

/// A product's order totals per year as a Markdown table.
fn totals_table(csv: &str, product: &str) -> String {
    let rows = csv_rows(csv);
    let year_col = rows
        .first()
        .and_then(|r| r.keys().find(|k| k.contains("year")).cloned())
        .expect("a year column in order_totals.csv");
    let mut t = String::from(
        "| year of ordering | orders | quantity | packs | cost |\n|---|---|---|---|---|\n",
    );
    for r in rows.iter().filter(|r| r["product"] == product) {
        t.push_str(&format!(
            "| {} | {} | {} | {} | {} |\n",
            r[&year_col],
            r.get("orders").cloned().unwrap_or_default(),
            grouped(num(r, "quantity")),
            grouped(num(r, "packs")),
            grouped(num(r, "cost"))
        ));
    }
    t
}

/// Figures the plan prose quotes from `plan.csv`: months of stock at the
/// first month, per product.
fn plan_figures(csv: &str) -> String {
    let mut out = String::new();
    for r in csv_rows(csv) {
        if let Some(m) = r.get("months_of_stock").and_then(|v| v.parse::<f64>().ok()) {
            out.push_str(&format!("{m:.1} "));
        }
        for k in ["opening", "closing", "arrivals_on_order"] {
            if let Some(v) = r.get(k).and_then(|v| v.parse::<f64>().ok()) {
                out.push_str(&format!("{} ", grouped(v)));
            }
        }
    }
    out
}

/// Figures the cross-check prose quotes from `crosscheck.csv`: its
/// quantities grouped as the terminal shows them.
fn crosscheck_figures(csv: &str) -> String {
    let mut out = String::new();
    for r in csv_rows(csv) {
        for (k, v) in &r {
            if let Ok(x) = v.parse::<f64>() {
                if k != "ratio_to_consumption" {
                    out.push_str(&format!("{} ", grouped(x)));
                }
            }
        }
        if let Some(b) = r.get("basis") {
            out.push_str(b);
            out.push(' ');
            // Its numbers grouped as the prose writes them.
            for w in b.split_whitespace() {
                let w = w.trim_matches(|c: char| !c.is_ascii_digit());
                if let Ok(x) = w.parse::<f64>() {
                    out.push_str(&format!("{} ", grouped(x)));
                }
            }
        }
    }
    out
}
