//! The harness shared by the end-to-end tests: run the real `provisio`
//! binary in a temporary directory, write its inputs there and read back
//! its outputs. Each test file includes it with `mod common;`.

// Every test file is compiled as its own crate and uses only part of this
// harness; without this, each of them would warn about the parts it leaves
// unused.
#![allow(dead_code)]

use std::collections::BTreeMap;
use std::path::{Path, PathBuf};
use std::process::{Command, Output};

/// The binary under test, to run in `dir`. `NO_COLOR` is removed so that
/// the shell running the tests does not decide what the runs see; a test
/// that needs it sets it again (see [`Workdir::run_env`]).
pub fn command(dir: &Path) -> Command {
    let mut c = Command::new(env!("CARGO_BIN_EXE_provisio"));
    c.current_dir(dir).env_remove("NO_COLOR");
    c
}

/// Runs the binary in `dir` with `args` and waits for it.
pub fn run_in(dir: &Path, args: &[&str]) -> Output {
    command(dir).args(args).output().expect("run provisio")
}

/// Standard output followed by standard error, as text.
pub fn text(o: &Output) -> String {
    format!(
        "{}{}",
        String::from_utf8_lossy(&o.stdout),
        String::from_utf8_lossy(&o.stderr)
    )
}

/// A path inside the repository (test data, demo data).
pub fn repo(rel: &str) -> PathBuf {
    Path::new(env!("CARGO_MANIFEST_DIR")).join(rel)
}

/// Header and rows of a CSV file.
pub fn read_csv_file(path: &Path) -> (Vec<String>, Vec<csv::StringRecord>) {
    let mut r = csv::Reader::from_path(path).unwrap_or_else(|e| panic!("{}: {e}", path.display()));
    let h = r
        .headers()
        .expect("header")
        .iter()
        .map(String::from)
        .collect();
    let rows = r
        .records()
        .map(|x| x.unwrap_or_else(|e| panic!("{}: {e}", path.display())))
        .collect();
    (h, rows)
}

/// The counts of the line "rows read: N = U used as reported + A corrected by cleaning +
/// R rejected" that `clean` and `inspect` print: [N, U, A, R].
pub fn accounting(out: &str) -> [usize; 4] {
    let line = out
        .lines()
        .find(|l| l.starts_with("rows read:"))
        .unwrap_or_else(|| panic!("no accounting line in:\n{out}"));
    let nums: Vec<usize> = line
        .split(|c: char| !c.is_ascii_digit())
        .filter(|s| !s.is_empty())
        .map(|s| s.parse().unwrap())
        .collect();
    [nums[0], nums[1], nums[2], nums[3]]
}

/// A temporary working directory with helpers to run `provisio` in it.
pub struct Workdir {
    dir: tempfile::TempDir,
}

impl Workdir {
    pub fn new() -> Self {
        Workdir {
            dir: tempfile::tempdir().expect("temp dir"),
        }
    }

    /// `name` inside the directory (which need not exist yet).
    pub fn path(&self, name: &str) -> PathBuf {
        self.dir.path().join(name)
    }

    /// Writes `contents` to `name`, making missing parent folders, and
    /// returns its full path.
    pub fn write(&self, name: &str, contents: impl AsRef<[u8]>) -> PathBuf {
        let p = self.path(name);
        if let Some(parent) = p.parent() {
            std::fs::create_dir_all(parent).expect("make fixture folder");
        }
        std::fs::write(&p, contents).expect("write fixture");
        p
    }

    /// Runs the binary here with `args`.
    pub fn run(&self, args: &[&str]) -> Output {
        run_in(self.dir.path(), args)
    }

    /// Runs the binary here with `args` and the environment variables `env`
    /// added.
    pub fn run_env(&self, args: &[&str], env: &[(&str, &str)]) -> Output {
        let mut c = command(self.dir.path());
        c.args(args);
        for (k, v) in env {
            c.env(k, v);
        }
        c.output().expect("run provisio")
    }

    /// Header and rows of the output CSV `name`.
    pub fn read_csv_records(&self, name: &str) -> (Vec<String>, Vec<csv::StringRecord>) {
        read_csv_file(&self.path(name))
    }

    /// Rows of the output CSV `name`, each as a map from column name to
    /// value.
    pub fn read_csv_maps(&self, name: &str) -> Vec<BTreeMap<String, String>> {
        let (h, rows) = self.read_csv_records(name);
        rows.iter()
            .map(|r| h.iter().cloned().zip(r.iter().map(String::from)).collect())
            .collect()
    }

    /// The `manifest.json` of the output folder `dir`.
    pub fn manifest(&self, dir: &str) -> serde_json::Value {
        let p = self.path(dir).join("manifest.json");
        let t = std::fs::read_to_string(&p).unwrap_or_else(|e| panic!("{}: {e}", p.display()));
        serde_json::from_str(&t).unwrap_or_else(|e| panic!("{}: {e}", p.display()))
    }
}

/// Copies the fixture's output folder with every product repeated `times`
/// under a numbered name ("NAME #007"), as a large run's folder.
pub fn large_folder(dir: &Path, times: usize) -> Vec<String> {
    let fixture = Path::new(env!("CARGO_MANIFEST_DIR")).join("tests/data/report/forecast-output");
    std::fs::create_dir_all(dir).unwrap();
    let mut names = Vec::new();
    for e in std::fs::read_dir(&fixture).unwrap() {
        let e = e.unwrap();
        let name = e.file_name().to_string_lossy().into_owned();
        if name == "manifest.json" {
            // The fixture predates `format_version`, which `review` needs.
            let mut m: serde_json::Value =
                serde_json::from_str(&std::fs::read_to_string(e.path()).unwrap()).unwrap();
            m["format_version"] = provisio::output::FORECAST_FORMAT_VERSION.into();
            std::fs::write(dir.join(&name), m.to_string()).unwrap();
            continue;
        }
        if !name.ends_with(".csv") || name == "rejected.csv" {
            std::fs::copy(e.path(), dir.join(&name)).unwrap();
            continue;
        }
        let mut r = csv::Reader::from_path(e.path()).unwrap();
        let header = r.headers().unwrap().clone();
        let col = header.iter().position(|h| h == "product").unwrap();
        let rows: Vec<csv::StringRecord> = r.records().map(|x| x.unwrap()).collect();
        let mut w = csv::Writer::from_path(dir.join(&name)).unwrap();
        w.write_record(&header).unwrap();
        for k in 0..times {
            for row in &rows {
                let mut out: Vec<String> = row.iter().map(str::to_string).collect();
                out[col] = format!("{} #{k:03}", out[col]);
                if name == "selection.csv" {
                    names.push(out[col].clone());
                }
                w.write_record(&out).unwrap();
            }
        }
        w.flush().unwrap();
    }
    names
}

/// Repeats the line of `b` that holds byte position `at` (a hostile edit
/// of the property tests: a row pasted twice).
pub fn duplicate_line_at(b: &mut Vec<u8>, at: usize) {
    let at = at.min(b.len());
    let start = b[..at]
        .iter()
        .rposition(|&c| c == b'\n')
        .map_or(0, |p| p + 1);
    let end = b[at..]
        .iter()
        .position(|&c| c == b'\n')
        .map_or(b.len(), |p| at + p + 1);
    let line = b[start..end].to_vec();
    b.splice(end..end, line);
}
