//! Output files: every file is written to a temporary file in the target
//! directory and renamed into place, so a reader never sees half a file.

mod forecast;
mod review;
mod tables;

pub use forecast::{
    write_backtest, write_forecast, write_json, write_scores, write_scores_by_horizon,
    write_selection, FORECAST_FORMAT_VERSION,
};

pub use review::{review_json, write_review, write_review_months};

pub use tables::{
    write_adjustments, write_clean_manifest, write_cleaned, write_quality, write_rejected,
    CleanManifest,
};

use std::io::Write;
use std::path::Path;

use crate::error::{Error, Result};

/// Writes a file atomically: `fill` writes into a temporary file in the same
/// directory, which is then renamed to `path`.
pub fn write_atomic<F>(path: &Path, fill: F) -> Result<()>
where
    F: FnOnce(&mut dyn Write) -> std::io::Result<()>,
{
    let dir = path
        .parent()
        .filter(|p| !p.as_os_str().is_empty())
        .unwrap_or_else(|| Path::new("."));
    let io = |action: &'static str| {
        move |source| Error::Io {
            path: path.to_path_buf(),
            action,
            source,
        }
    };
    let mut tmp = tempfile::Builder::new()
        .prefix(".provisio-")
        .suffix(".tmp")
        .tempfile_in(dir)
        .map_err(io("cannot create a temporary file beside"))?;
    {
        let mut w = std::io::BufWriter::new(tmp.as_file_mut());
        fill(&mut w).map_err(io("cannot write"))?;
        w.flush().map_err(io("cannot write"))?;
    }
    tmp.as_file().sync_all().map_err(io("cannot write"))?;
    tmp.persist(path).map_err(|e| Error::Io {
        path: path.to_path_buf(),
        action: "cannot move into place",
        source: e.error,
    })?;
    Ok(())
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

#[cfg(test)]
mod tests {
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
