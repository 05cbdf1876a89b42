//! Output files: every file is written to a temporary file in the target
//! directory and renamed into place, so a reader never sees half a file.

mod changes;
mod crosscheck;
mod forecast;
mod plan;
mod review;
mod staging;
mod tables;
mod workbook;

pub use forecast::{
    write_backtest, write_forecast, write_forecast_units, write_forecast_wide, write_json,
    write_scores, write_scores_by_horizon, write_selection, EvidenceRows, Units,
    FORECAST_FORMAT_VERSION,
};

pub use changes::{
    add_adjusted, changes_recorded, manifest_has_changes, ADJUSTED_COLUMNS, CHANGES_FILES,
    NEW_PRODUCT_MODEL,
};
pub use crosscheck::{write_crosscheck, write_crosscheck_services, CROSSCHECK_COLUMNS};
pub use plan::{
    write_order_totals, write_orders, write_plan, write_plan_log, ORDER_COLUMNS, PLAN_COLUMNS,
};

pub use staging::{FolderRun, LockHolder};

pub use review::{review_json, write_review, write_review_months};

pub use workbook::{
    build_workbook, write_workbook, ColumnKind, WorkbookContent, WorkbookForecast, WorkbookMonth,
    WorkbookTable, FORECAST_ROW_LABELS, MAX_TABLE_ROWS,
};

pub use tables::{
    quality_json, write_adjustments, write_clean_manifest, write_cleaned, write_quality,
    write_rejected, write_rejected_of, CleanManifest,
};

use std::fs::{File, OpenOptions};
use std::io::Write;
use std::path::{Path, PathBuf};
use std::sync::atomic::{AtomicU64, Ordering};

use crate::error::{Error, Result};

/// Prefix and suffix of temporary files: hidden (leading dot), and
/// recognisable, so that files left by a killed run can be removed.
const TMP_PREFIX: &str = ".provisio-";
const TMP_SUFFIX: &str = ".tmp";

/// A temporary file that is removed when dropped, unless it was moved into
/// place.
struct TempFile {
    path: PathBuf,
    file: Option<File>,
}

impl TempFile {
    /// Creates a new, empty temporary file in `dir`. Created like any other
    /// file (so it gets the usual permissions, after the umask), never
    /// replacing an existing one.
    fn create(dir: &Path) -> std::io::Result<Self> {
        static COUNTER: AtomicU64 = AtomicU64::new(0);
        let mut tries = 0;
        loop {
            let name = format!(
                "{TMP_PREFIX}{}-{}{TMP_SUFFIX}",
                std::process::id(),
                COUNTER.fetch_add(1, Ordering::Relaxed)
            );
            let path = dir.join(name);
            match OpenOptions::new().write(true).create_new(true).open(&path) {
                Ok(file) => {
                    return Ok(TempFile {
                        path,
                        file: Some(file),
                    })
                }
                Err(e) if e.kind() == std::io::ErrorKind::AlreadyExists && tries < 1000 => {
                    tries += 1;
                }
                Err(e) => return Err(e),
            }
        }
    }

    /// Moves the file to `target` (atomically, in the same directory).
    fn persist(mut self, target: &Path) -> std::io::Result<()> {
        drop(self.file.take());
        std::fs::rename(&self.path, target)?;
        self.path = PathBuf::new();
        Ok(())
    }
}

impl Drop for TempFile {
    fn drop(&mut self) {
        drop(self.file.take());
        if !self.path.as_os_str().is_empty() {
            let _ = std::fs::remove_file(&self.path);
        }
    }
}

/// Writes a file atomically: `fill` writes into a temporary file in the same
/// directory, which is flushed to disk and then renamed to `path`. A reader
/// (or a run killed half-way) sees the old file or the new one, never a part.
///
/// A symbolic link is followed: the file it points to is replaced and the
/// link kept. A path that is neither a regular file nor a folder (a named
/// pipe, `/dev/stdout`, a terminal) is written straight into: renaming over
/// it would replace the pipe or device with a regular file (a tester's
/// `--csv /dev/stdout` replaced the system's `/dev/stdout` link).
pub fn write_atomic<F>(path: &Path, fill: F) -> Result<()>
where
    F: FnOnce(&mut dyn Write) -> std::io::Result<()>,
{
    let io = |action: &'static str| {
        move |source| Error::Io {
            path: path.to_path_buf(),
            action,
            source,
        }
    };
    if let Ok(m) = std::fs::metadata(path) {
        if !m.is_file() && !m.is_dir() {
            let file = OpenOptions::new()
                .write(true)
                .open(path)
                .map_err(io("cannot open for writing"))?;
            let mut w = std::io::BufWriter::new(file);
            fill(&mut w).map_err(io("cannot write"))?;
            w.flush().map_err(io("cannot write"))?;
            return Ok(());
        }
    }
    let is_link = std::fs::symlink_metadata(path).is_ok_and(|m| m.file_type().is_symlink());
    if is_link {
        let target = link_target(path).map_err(io("cannot follow the link"))?;
        return write_atomic(&target, fill);
    }
    let dir = path
        .parent()
        .filter(|p| !p.as_os_str().is_empty())
        .unwrap_or_else(|| Path::new("."));
    let mut tmp = TempFile::create(dir).map_err(io("cannot create a temporary file beside"))?;
    if let Some(file) = tmp.file.as_mut() {
        let mut w = std::io::BufWriter::new(&mut *file);
        fill(&mut w).map_err(io("cannot write"))?;
        w.flush().map_err(io("cannot write"))?;
        drop(w);
        if simulated_failure(path) {
            return Err(io("cannot write")(std::io::Error::other(
                "no space left on device (simulated for a test)",
            )));
        }
        file.sync_all().map_err(io("cannot write"))?;
    }
    tmp.persist(path).map_err(io("cannot move into place"))?;
    Ok(())
}

/// Where the symbolic link `path` leads: its final target when that exists,
/// else the path it names (relative to the link's folder), followed through
/// at most 40 links (the usual system limit).
fn link_target(path: &Path) -> std::io::Result<PathBuf> {
    if let Ok(p) = std::fs::canonicalize(path) {
        return Ok(p);
    }
    let mut p = path.to_path_buf();
    for _ in 0..40 {
        match std::fs::read_link(&p) {
            Ok(next) => {
                p = match p.parent() {
                    Some(dir) if next.is_relative() => dir.join(next),
                    _ => next,
                };
            }
            Err(_) => return Ok(p),
        }
    }
    Err(std::io::Error::other("too many levels of symbolic links"))
}

/// File name whose writing fails, for tests of failures half-way through a
/// run (set once by the command line from `PROVISIO_TEST_FAIL_WRITE`).
static FAIL_WRITE: std::sync::OnceLock<String> = std::sync::OnceLock::new();

/// Makes every later write of a file named `name` fail after its bytes are
/// written, as a full disk would: a test hook, so that tests can check
/// what a run leaves when it fails half-way.
pub fn simulate_write_failure(name: &str) {
    let _ = FAIL_WRITE.set(name.to_string());
}

fn simulated_failure(path: &Path) -> bool {
    FAIL_WRITE
        .get()
        .is_some_and(|n| path.file_name().is_some_and(|f| f == n.as_str()))
}

/// Name of the small file that marks a folder as provisio's output folder.
pub const OUTPUT_MARKER: &str = ".provisio-output";

/// An output folder that provisio may write into. Check it with
/// [`OutputDir::check`] before the work starts (so a refusal comes at
/// once), and [`OutputDir::prepare`] it just before writing.
#[derive(Debug, Clone)]
pub struct OutputDir {
    path: PathBuf,
}

impl OutputDir {
    /// Checks, changing nothing, that provisio may write into `path`: it
    /// does not exist yet, is empty, was written by provisio before (holds
    /// the marker file, or a `manifest.json` written by provisio), or
    /// `overwrite` is set. Otherwise the error names a few of the files
    /// found and the way out.
    pub fn check(path: &Path, overwrite: bool) -> Result<OutputDir> {
        let refuse = |message: String| Error::Output {
            path: path.to_path_buf(),
            message,
        };
        let ok = OutputDir {
            path: path.to_path_buf(),
        };
        let entries = match std::fs::read_dir(path) {
            Ok(e) => e,
            Err(e) if e.kind() == std::io::ErrorKind::NotFound => return Ok(ok),
            Err(e) if path.is_file() => {
                let _ = e;
                return Err(refuse(
                    "a file of that name exists; --out needs a folder".to_string(),
                ));
            }
            Err(source) => {
                return Err(Error::Io {
                    path: path.to_path_buf(),
                    action: "cannot open the output folder",
                    source,
                })
            }
        };
        let mut found = Vec::new();
        for entry in entries.flatten() {
            let name = entry.file_name().to_string_lossy().into_owned();
            if name == OUTPUT_MARKER {
                return Ok(ok);
            }
            // A run writing in place keeps its lock inside the folder.
            if !is_temp_name(&name) && name != staging::INNER_LOCK {
                found.push(name);
            }
        }
        if found.is_empty() || overwrite || written_by_provisio(&path.join("manifest.json")) {
            return Ok(ok);
        }
        found.sort();
        let shown = if found.len() > 3 {
            format!("{} and {} more", found[..3].join(", "), found.len() - 3)
        } else {
            found.join(", ")
        };
        Err(refuse(format!(
            "the folder is not empty and provisio did not create it (it holds {shown}); \
             choose a new or empty folder, or add --overwrite to write into it anyway \
             (provisio's files there are replaced, other files are left alone)"
        )))
    }

    /// Creates the folder if needed, marks it as provisio's, and removes
    /// temporary files left by an interrupted earlier run.
    pub fn prepare(&self) -> Result<()> {
        let io = |action: &'static str| {
            move |source| Error::Io {
                path: self.path.clone(),
                action,
                source,
            }
        };
        std::fs::create_dir_all(&self.path).map_err(io("cannot create the output folder"))?;
        let entries = std::fs::read_dir(&self.path).map_err(io("cannot open the output folder"))?;
        for entry in entries.flatten() {
            let name = entry.file_name().to_string_lossy().into_owned();
            let Ok(kind) = entry.file_type() else {
                continue;
            };
            if is_temp_name(&name) && kind.is_file() {
                let _ = std::fs::remove_file(entry.path());
            } else if kind.is_symlink() && entry.path().is_dir() {
                // Writing charts/ through a link would write outside --out.
                return Err(Error::Output {
                    path: self.path.clone(),
                    message: format!(
                        "'{name}' in the output folder is a symbolic link to a folder; provisio writes only inside --out and does not follow it: remove the link or choose another folder"
                    ),
                });
            } else if kind.is_dir() {
                // Temporary files of a killed run in a subfolder (charts/).
                if let Ok(inner) = std::fs::read_dir(entry.path()) {
                    for e in inner.flatten() {
                        let n = e.file_name().to_string_lossy().into_owned();
                        if is_temp_name(&n) && e.file_type().is_ok_and(|t| t.is_file()) {
                            let _ = std::fs::remove_file(e.path());
                        }
                    }
                }
            }
        }
        let marker = self.path.join(OUTPUT_MARKER);
        if !marker.exists() {
            write_atomic(&marker, |w| {
                w.write_all(
                    b"This folder holds outputs written by provisio; provisio may replace its own files here.\n",
                )
            })?;
        }
        Ok(())
    }

    /// Takes the folder's lock for a run that writes it: see [`FolderRun`].
    pub fn start(&self) -> Result<FolderRun> {
        FolderRun::start(&self.path)
    }

    /// The folder.
    pub fn path(&self) -> &Path {
        &self.path
    }

    /// Refuses an input file that sits directly in the output folder:
    /// provisio replaces its own files there, and `--overwrite` would
    /// replace the input while it is the data of the run.
    pub fn refuse_input_inside(&self, input: &Path) -> Result<()> {
        let (Ok(out), Ok(file)) = (
            std::fs::canonicalize(&self.path),
            std::fs::canonicalize(input),
        ) else {
            return Ok(());
        };
        if file.parent() == Some(out.as_path()) {
            return Err(Error::Output {
                path: self.path.clone(),
                message: format!(
                    "the input file {} is in the output folder, where provisio writes and replaces files; move it out of the folder or choose another --out",
                    input.display()
                ),
            });
        }
        Ok(())
    }

    /// A file in the folder.
    pub fn join(&self, name: &str) -> PathBuf {
        self.path.join(name)
    }
}

fn is_temp_name(name: &str) -> bool {
    name.starts_with(TMP_PREFIX) && name.ends_with(TMP_SUFFIX)
}

/// Whether `path` is a run manifest written by provisio (outputs written
/// before folders were marked).
fn written_by_provisio(path: &Path) -> bool {
    let small = std::fs::metadata(path).is_ok_and(|m| m.is_file() && m.len() < 1 << 20);
    small
        && std::fs::read(path)
            .ok()
            .and_then(|b| serde_json::from_slice::<serde_json::Value>(&b).ok())
            .and_then(|v| v.get("tool")?.as_str().map(|t| t.starts_with("provisio ")))
            .unwrap_or(false)
}

/// First characters that make a spreadsheet program read a cell as a
/// formula (OWASP, "CSV Injection": `=`, `+`, `-`, `@`, tab, carriage return).
pub const FORMULA_STARTS: [char; 6] = ['=', '+', '-', '@', '\t', '\r'];

/// Text from the input data (product and site names, values as read) as
/// written to the CSV outputs: text that a spreadsheet would run as a
/// formula (starting with one of [`FORMULA_STARTS`], after any leading
/// apostrophes) gets one apostrophe in front, as OWASP advises, so
/// `=SUM(A1)` is written `'=SUM(A1)`. [`csv_text_read`] takes it off again,
/// so provisio reads its own outputs back exactly.
pub fn csv_text(s: &str) -> std::borrow::Cow<'_, str> {
    if s.trim_start_matches('\'').starts_with(FORMULA_STARTS) {
        std::borrow::Cow::Owned(format!("'{s}"))
    } else {
        std::borrow::Cow::Borrowed(s)
    }
}

/// The text [`csv_text`] was given: one leading apostrophe is removed
/// from text that is apostrophes and then a formula character.
pub fn csv_text_read(s: &str) -> &str {
    match s.strip_prefix('\'') {
        Some(rest) if rest.trim_start_matches('\'').starts_with(FORMULA_STARTS) => rest,
        _ => s,
    }
}

/// Files that `plan` and `crosscheck` derive from a forecast in its
/// output folder. [`retire_derived`] moves them aside when the forecast
/// they were made from is replaced.
pub const DERIVED_FILES: [&str; 9] = [
    "plan.csv",
    "orders.csv",
    "order_totals.csv",
    "plan_log.csv",
    "plan.json",
    "crosscheck.csv",
    "crosscheck_services.csv",
    "crosscheck_rejected.csv",
    "crosscheck.json",
];

/// Name of the subfolder that [`retire_derived`] and [`retire_changes`]
/// move outputs into.
pub const RETIRED_DIR: &str = "retired";

/// Moves the plan and cross-check outputs of an earlier forecast out of
/// `dir` into `dir/retired/` (their charts, `charts/plan-*` and
/// `charts/crosscheck-*`, into `retired/charts/`), replacing what an
/// earlier retirement left there. Returns the names moved, so the caller
/// can say so; nothing is deleted that was not retired before.
pub fn retire_derived(dir: &Path) -> Result<Vec<String>> {
    retire(dir, &DERIVED_FILES, &["plan-", "crosscheck-"])
}

/// Moves the known-changes files ([`CHANGES_FILES`]) of an earlier
/// forecast out of `dir` into `dir/retired/`, as [`retire_derived`] does:
/// for a run without a changes file, whose forecast they do not describe.
pub fn retire_changes(dir: &Path) -> Result<Vec<String>> {
    retire(dir, &CHANGES_FILES, &[])
}

/// Moves `files` of `dir`, and the files of `dir/charts` whose names start
/// with one of `chart_prefixes`, into `dir/retired/`; returns the names
/// moved, sorted.
fn retire(dir: &Path, files: &[&str], chart_prefixes: &[&str]) -> Result<Vec<String>> {
    let retired = dir.join(RETIRED_DIR);
    let mut moves: Vec<(PathBuf, PathBuf, String)> = files
        .iter()
        .map(|f| (dir.join(f), retired.join(f), (*f).to_string()))
        .filter(|(from, _, _)| from.is_file())
        .collect();
    if let Ok(entries) = std::fs::read_dir(dir.join("charts")) {
        for e in entries.flatten() {
            let name = e.file_name().to_string_lossy().into_owned();
            if chart_prefixes.iter().any(|p| name.starts_with(p))
                && e.file_type().is_ok_and(|t| t.is_file())
            {
                let shown = format!("charts/{name}");
                moves.push((e.path(), retired.join("charts").join(&name), shown));
            }
        }
    }
    moves.sort_by(|a, b| a.2.cmp(&b.2));
    let mut names = Vec::new();
    for (from, to, name) in moves {
        if let Some(parent) = to.parent() {
            std::fs::create_dir_all(parent).map_err(|source| Error::Io {
                path: parent.to_path_buf(),
                action: "cannot create the folder for retired outputs",
                source,
            })?;
        }
        std::fs::rename(&from, &to).map_err(|source| Error::Io {
            path: from.clone(),
            action: "cannot move the earlier output aside (to retired/)",
            source,
        })?;
        names.push(name);
    }
    Ok(names)
}

/// SHA-256 of a byte string, lowercase hex.
pub fn sha256_hex(bytes: &[u8]) -> String {
    use sha2::Digest;
    let digest = sha2::Sha256::digest(bytes);
    digest.iter().map(|b| format!("{b:02x}")).collect()
}

/// Formats a quantity for CSV: up to 4 decimals, no trailing zeros.
pub fn fmt_num(v: f64) -> String {
    if !v.is_finite() {
        return String::new();
    }
    // Rounded to 4 decimals, then the shortest text that reads back as the
    // same number: much faster than fixed-precision formatting, and the
    // same digits.
    let r = (v * 1e4).round() / 1e4;
    if r == 0.0 {
        return "0".to_string();
    }
    if r.abs() >= 1e15 {
        // Beyond exact 4-decimal rounding; plain integer digits.
        return format!("{r:.0}");
    }
    format!("{r}")
}

/// Formats an optional quantity; empty when missing.
pub fn fmt_opt(v: Option<f64>) -> String {
    v.map(fmt_num).unwrap_or_default()
}

/// Most rows a spreadsheet sheet holds (the Office Open XML limit, common
/// practice: 2^20).
pub const SHEET_MAX_ROWS: usize = 1_048_576;

/// Checks, before any work, that the Forecast sheet of `forecast.xlsx`
/// (three rows of titles, then five rows per product and per adjusted
/// product) fits in a sheet; the refusal names `--no-workbook`.
pub fn check_workbook_fits(products: usize) -> std::result::Result<(), String> {
    let rows = products
        .saturating_mul(workbook::FORECAST_ROW_LABELS.len())
        .saturating_add(3);
    if rows > SHEET_MAX_ROWS {
        return Err(format!(
            "the data has {products} products: the Forecast sheet of forecast.xlsx would need {rows} rows, more than the {SHEET_MAX_ROWS} a spreadsheet holds; give --no-workbook (the CSV files hold every value) or forecast the products in several runs"
        ));
    }
    Ok(())
}

#[cfg(test)]
mod tests {

    #[test]
    fn a_link_is_followed_and_kept() {
        // A tester's `--csv link` turned the link into a regular file and
        // left its target as it was.
        let d = tempfile::tempdir().unwrap();
        let real = d.path().join("real.csv");
        std::fs::write(&real, "old").unwrap();
        let link = d.path().join("link.csv");
        std::os::unix::fs::symlink("real.csv", &link).unwrap();
        write_atomic(&link, |w| w.write_all(b"new")).unwrap();
        assert!(std::fs::symlink_metadata(&link)
            .unwrap()
            .file_type()
            .is_symlink());
        assert_eq!(std::fs::read_to_string(&real).unwrap(), "new");
        // A link whose target does not exist yet: the target is created.
        let dangling = d.path().join("dangling.csv");
        std::os::unix::fs::symlink("later.csv", &dangling).unwrap();
        write_atomic(&dangling, |w| w.write_all(b"x")).unwrap();
        assert!(std::fs::symlink_metadata(&dangling)
            .unwrap()
            .file_type()
            .is_symlink());
        assert_eq!(
            std::fs::read_to_string(d.path().join("later.csv")).unwrap(),
            "x"
        );
    }

    #[test]
    fn a_device_or_a_pipe_is_written_into_not_replaced() {
        // (The old code, run as root, would have replaced a device such as
        // /dev/stdout's target; a pipe stands for every such path here.)
        use std::os::unix::fs::FileTypeExt;
        // A named pipe (mkfifo, POSIX) gets the bytes and stays a pipe.
        let d = tempfile::tempdir().unwrap();
        let fifo = d.path().join("pipe");
        let made = std::process::Command::new("mkfifo").arg(&fifo).status();
        if !made.is_ok_and(|s| s.success()) {
            return; // no mkfifo on this machine
        }
        let reader = {
            let fifo = fifo.clone();
            std::thread::spawn(move || std::fs::read_to_string(fifo).unwrap())
        };
        write_atomic(&fifo, |w| w.write_all(b"through the pipe")).unwrap();
        assert_eq!(reader.join().unwrap(), "through the pipe");
        assert!(std::fs::symlink_metadata(&fifo)
            .unwrap()
            .file_type()
            .is_fifo());
    }

    use super::*;

    #[test]
    fn atomic_write_replaces_whole_file() {
        let dir = tempfile::tempdir().unwrap();
        let p = dir.path().join("a.csv");
        write_atomic(&p, |w| w.write_all(b"one\n")).unwrap();
        write_atomic(&p, |w| w.write_all(b"two\n")).unwrap();
        assert_eq!(std::fs::read_to_string(&p).unwrap(), "two\n");
        let left: Vec<_> = std::fs::read_dir(dir.path()).unwrap().collect();
        assert_eq!(left.len(), 1, "no temporary file left behind");
    }

    #[test]
    fn failed_write_leaves_old_file() {
        let dir = tempfile::tempdir().unwrap();
        let p = dir.path().join("a.csv");
        write_atomic(&p, |w| w.write_all(b"old\n")).unwrap();
        let r = write_atomic(&p, |w| {
            w.write_all(b"partial")?;
            Err(std::io::Error::other("disk full"))
        });
        assert!(r.is_err());
        assert_eq!(std::fs::read_to_string(&p).unwrap(), "old\n");
    }

    #[test]
    fn temporary_file_is_removed_on_failure_and_gets_usual_permissions() {
        let dir = tempfile::tempdir().unwrap();
        let p = dir.path().join("a.csv");
        let _ = write_atomic(&p, |_| Err(std::io::Error::other("no space")));
        assert_eq!(std::fs::read_dir(dir.path()).unwrap().count(), 0);
        write_atomic(&p, |w| w.write_all(b"x")).unwrap();
        #[cfg(unix)]
        {
            // Same mode as a file created the ordinary way (0666 less the umask),
            // not the 0600 of a private temporary file.
            use std::os::unix::fs::PermissionsExt;
            let plain = dir.path().join("plain");
            std::fs::write(&plain, b"x").unwrap();
            let mode = |q: &Path| std::fs::metadata(q).unwrap().permissions().mode() & 0o777;
            assert_eq!(mode(&p), mode(&plain));
        }
    }

    #[test]
    fn output_folder_rules() {
        let dir = tempfile::tempdir().unwrap();
        // New, then empty: fine.
        let new = dir.path().join("new");
        OutputDir::check(&new, false).unwrap().prepare().unwrap();
        assert!(new.join(OUTPUT_MARKER).exists());
        // Ours (marked), with a temporary file left by a killed run.
        std::fs::write(new.join("cleaned.csv"), b"old").unwrap();
        std::fs::write(new.join(".provisio-99-1.tmp"), b"half").unwrap();
        let d = OutputDir::check(&new, false).unwrap();
        d.prepare().unwrap();
        assert!(!new.join(".provisio-99-1.tmp").exists());
        assert!(new.join("cleaned.csv").exists());
        // Someone else's folder: refused, named, unless overwrite.
        let theirs = dir.path().join("theirs");
        std::fs::create_dir(&theirs).unwrap();
        for f in ["a.txt", "b.txt", "c.txt", "d.txt"] {
            std::fs::write(theirs.join(f), b"mine").unwrap();
        }
        let e = OutputDir::check(&theirs, false).unwrap_err().to_string();
        assert!(e.contains("it holds a.txt, b.txt, c.txt and 1 more"), "{e}");
        assert!(e.contains("--overwrite"), "{e}");
        OutputDir::check(&theirs, true).unwrap().prepare().unwrap();
        assert_eq!(std::fs::read(theirs.join("a.txt")).unwrap(), b"mine");
        OutputDir::check(&theirs, false).unwrap();
        // A folder of outputs from before folders were marked.
        let old = dir.path().join("old");
        std::fs::create_dir(&old).unwrap();
        std::fs::write(old.join("manifest.json"), br#"{"tool": "provisio 0.1.0"}"#).unwrap();
        OutputDir::check(&old, false).unwrap();
        std::fs::write(old.join("manifest.json"), br#"{"tool": "other"}"#).unwrap();
        assert!(OutputDir::check(&old, false).is_err());
        // A file where a folder is wanted.
        let file = dir.path().join("file");
        std::fs::write(&file, b"x").unwrap();
        let e = OutputDir::check(&file, true).unwrap_err().to_string();
        assert!(e.contains("needs a folder"), "{e}");
    }

    #[test]
    fn formula_text_is_quoted_and_read_back_exactly() {
        // OWASP "CSV Injection": cells starting with = + - @ tab or CR are
        // prefixed with an apostrophe.
        for (raw, written) in [
            ("=SUM(A1)", "'=SUM(A1)"),
            ("+1", "'+1"),
            ("-2", "'-2"),
            ("@x", "'@x"),
            ("\tx", "'\tx"),
            ("\rx", "'\rx"),
            ("'=x", "''=x"),
            ("'x", "'x"),
            ("''", "''"),
            ("a=b", "a=b"),
            ("", ""),
            ("Amoxicillin 250 mg", "Amoxicillin 250 mg"),
        ] {
            assert_eq!(csv_text(raw), written, "{raw:?}");
            assert_eq!(csv_text_read(written), raw, "{raw:?}");
        }
    }

    #[test]
    fn sha256_known_value() {
        // FIPS 180-2 example: SHA-256("abc").
        assert_eq!(
            sha256_hex(b"abc"),
            "ba7816bf8f01cfea414140de5dae2223b00361a396177a9cb410ff61f20015ad"
        );
    }

    #[test]
    fn number_format() {
        assert_eq!(fmt_num(12.0), "12");
        assert_eq!(fmt_num(12.5), "12.5");
        assert_eq!(fmt_num(1.0 / 3.0), "0.3333");
        assert_eq!(fmt_num(-0.00001), "0");
        assert_eq!(fmt_num(123.456_700_000_000_01), "123.4567");
        assert_eq!(fmt_num(-2.5e-3), "-0.0025");
        assert_eq!(fmt_num(1234567.891_26), "1234567.8913");
        assert_eq!(fmt_num(f64::NAN), "");
    }
}
