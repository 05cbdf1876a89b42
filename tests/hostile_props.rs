//! Property tests of the whole path from bytes to cleaned series, through
//! the same entry point as the fuzz target in `fuzz/`
//! (`clean::read_and_clean`): arbitrary bytes, near-valid files with hostile
//! edits, and generated files whose correct accounting is known in advance.
//! Nothing may panic; a refusal must name the file; an accepted file must
//! keep every promise (`Cleaned::verify`) and match what was generated.

use std::collections::{BTreeMap, BTreeSet};

mod common;

use proptest::prelude::*;
use provisio::calendar::YearMonth;
use provisio::clean::{read_and_clean, CleanSettings};
use provisio::data::{NumberFormat, ReadOptions};

/// Runs the path; checks that a refusal names the file and an accepted file
/// keeps its promises, and that the quality profile can be made from it.
fn check(bytes: &[u8], opts: &ReadOptions) -> Result<(), TestCaseError> {
    check_named("in.csv", bytes, opts)
}

/// [`check`] for an input named `name` (its extension picks the reader).
fn check_named(name: &str, bytes: &[u8], opts: &ReadOptions) -> Result<(), TestCaseError> {
    let settings = CleanSettings::default().check().unwrap();
    match read_and_clean(name, bytes, opts, &settings) {
        Ok((ds, cleaned)) => {
            if let Err(e) = cleaned.verify(&ds) {
                return Err(TestCaseError::fail(e));
            }
            let profiles = provisio::quality::profile_all(&cleaned);
            prop_assert_eq!(profiles.len(), cleaned.inputs.len());
        }
        Err(e) => {
            let m = e.to_string();
            prop_assert!(m.starts_with(name), "{}", m);
        }
    }
    Ok(())
}

/// An input of the fuzz target `read_workbook` (fuzz/fuzz_targets/): the
/// first byte picks the read options and, by its top bit, whether the bytes
/// are named .xlsx or .ods; the limits are the target's low ones.
fn check_workbook(first: u8, bytes: &[u8]) -> Result<(), TestCaseError> {
    let name = if first & 0x80 == 0 {
        "in.xlsx"
    } else {
        "in.ods"
    };
    let options = ReadOptions {
        limits: provisio::data::SheetLimits {
            max_cells: 100_000,
            max_unpacked_bytes: 16 << 20,
        },
        ..ReadOptions::from_byte(first)
    };
    check_named(name, bytes, &options)
}

/// Pieces that break readers: quotes, delimiters, line ends, byte-order
/// marks, odd numbers and months, control and direction characters.
const HOSTILE: &[&str] = &[
    "\"",
    ",",
    ";",
    "\t",
    "\n",
    "\r\n",
    "\r",
    "\u{feff}",
    "NaN",
    "inf",
    "-1",
    "1e308",
    "1e15",
    "1e-320",
    "1,234",
    "1.234,5",
    "1 234",
    "2024/03",
    "Mar-2024",
    "1899-12",
    "2100-12",
    "1900-01",
    "9999999999999999999999",
    "%",
    "120%",
    "0",
    "\0",
    "\u{202e}",
    "💊",
    "é",
    "20é41",
    "..",
    "/",
    "<script>",
    "product,month,consumed",
    "site",
];

fn base_csv() -> impl Strategy<Value = String> {
    let row = (
        0..3usize,
        0..2usize,
        0..40i64,
        0..5000u32,
        0..32u32,
        0..=110u32,
    );
    prop::collection::vec(row, 1..40).prop_map(|rows| {
        let mut s = String::from("product,site,month,consumed,stockout_days,reporting_rate\n");
        for (p, site, t, c, sd, rr) in rows {
            let m = YearMonth::known(2020, 1).plus(t);
            s.push_str(&format!("P{p},S{site},{m},{c},{sd},{rr}%\n"));
        }
        s
    })
}

#[derive(Debug, Clone)]
enum Edit {
    Insert(usize),
    InsertByte(u8),
    Delete(usize),
    DuplicateLine,
}

fn edits() -> impl Strategy<Value = Vec<(f64, Edit)>> {
    let edit = prop_oneof![
        (0..HOSTILE.len()).prop_map(Edit::Insert),
        any::<u8>().prop_map(Edit::InsertByte),
        (1..20usize).prop_map(Edit::Delete),
        Just(Edit::DuplicateLine),
    ];
    prop::collection::vec((0.0..1.0f64, edit), 1..8)
}

fn apply(text: &str, edits: &[(f64, Edit)]) -> Vec<u8> {
    let mut b = text.as_bytes().to_vec();
    for (at, e) in edits {
        let i = ((b.len() as f64) * at) as usize;
        let i = i.min(b.len());
        match e {
            Edit::Insert(k) => {
                b.splice(i..i, HOSTILE[*k].bytes());
            }
            Edit::InsertByte(x) => b.insert(i, *x),
            Edit::Delete(n) => {
                b.drain(i..(i + n).min(b.len()));
            }
            Edit::DuplicateLine => common::duplicate_line_at(&mut b, i),
        }
    }
    b
}

/// Writes `v` (at most one decimal) in a number format, independently of
/// the reader's code.
fn write_number(v: f64, f: NumberFormat) -> String {
    let plain = format!("{v}");
    let (int, frac) = match plain.split_once('.') {
        Some((i, d)) => (i.to_string(), Some(d.to_string())),
        None => (plain.clone(), None),
    };
    let group = |sep: &str| {
        let digits: Vec<char> = int.chars().collect();
        let mut out = String::new();
        for (k, c) in digits.iter().enumerate() {
            if k > 0 && (digits.len() - k) % 3 == 0 {
                out.push_str(sep);
            }
            out.push(*c);
        }
        out
    };
    match f {
        NumberFormat::Plain => plain,
        NumberFormat::Grouped => {
            let i = group(",");
            frac.map_or(i.clone(), |d| format!("{i}.{d}"))
        }
        NumberFormat::DecimalComma => {
            let i = group(".");
            frac.map_or(i.clone(), |d| format!("{i},{d}"))
        }
    }
}

/// A generated file and what reading it must give.
#[derive(Debug)]
struct Generated {
    text: String,
    format: NumberFormat,
    rows: usize,
    bad: usize,
    /// Reported consumption of the good rows, per product.
    reported: BTreeMap<String, f64>,
}

fn generated() -> impl Strategy<Value = Generated> {
    let keys: Vec<(usize, usize, i64)> = (0..3)
        .flat_map(|p| (0..2).flat_map(move |s| (0..30).map(move |t| (p, s, t))))
        .collect();
    let value = (
        prop::option::weighted(0.9, (0..2_000_000u32).prop_map(|x| f64::from(x) / 10.0)),
        prop::option::of(0..31u32),
        prop::option::of(30..=100u32),
        prop::sample::select(vec!["", "", "", "", "", "", "x", "NaN", "-5", "2024/03"]),
    );
    (
        prop::sample::subsequence(keys, 1..90),
        prop::collection::vec(value, 90),
        0..3usize,
    )
        .prop_map(|(keys, values, f)| {
            let format = [
                NumberFormat::Plain,
                NumberFormat::Grouped,
                NumberFormat::DecimalComma,
            ][f];
            let d = if format == NumberFormat::DecimalComma {
                ";"
            } else {
                ","
            };
            let mut text =
                format!("product{d}site{d}month{d}consumed{d}stockout_days{d}reporting_rate\n");
            let mut reported = BTreeMap::new();
            let mut bad = 0;
            for ((p, s, t), (c, sd, rr, spoil)) in keys.iter().zip(values) {
                let m = YearMonth::known(2021, 1).plus(*t);
                let sd = sd.map(|x| x.min(m.days()).to_string()).unwrap_or_default();
                let rr = rr.map(|x| format!("{x}%")).unwrap_or_default();
                let consumed = if spoil.is_empty() {
                    *reported.entry(format!("P{p}")).or_insert(0.0) += c.unwrap_or(0.0);
                    c.map(|v| format!("\"{}\"", write_number(v, format)))
                        .unwrap_or_default()
                } else {
                    bad += 1;
                    spoil.to_string()
                };
                text.push_str(&format!("P{p}{d}S{s}{d}{m}{d}{consumed}{d}{sd}{d}{rr}\n"));
            }
            Generated {
                text,
                format,
                rows: keys.len(),
                bad,
                reported,
            }
        })
}

/// A few hundred cases in `cargo test` (set PROPTEST_CASES for a longer
/// search); failures are kept beside this file, to be committed.
fn config(quick: u32) -> ProptestConfig {
    ProptestConfig {
        cases: std::env::var("PROPTEST_CASES")
            .ok()
            .and_then(|v| v.parse().ok())
            .unwrap_or(quick),
        failure_persistence: Some(Box::new(
            proptest::test_runner::FileFailurePersistence::WithSource("proptest-regressions"),
        )),
        ..ProptestConfig::default()
    }
}

#[test]
fn inputs_found_by_fuzzing_now_pass() {
    let dir = std::path::Path::new(env!("CARGO_MANIFEST_DIR")).join("tests/data/fuzz");
    let mut n = 0;
    for entry in std::fs::read_dir(dir).unwrap() {
        let path = entry.unwrap().path();
        if path.extension().is_some_and(|e| e == "md") {
            continue;
        }
        let data = std::fs::read(&path).unwrap();
        let Some((&first, bytes)) = data.split_first() else {
            continue;
        };
        let found = if path
            .file_name()
            .and_then(|f| f.to_str())
            .is_some_and(|f| f.starts_with("workbook_"))
        {
            check_workbook(first, bytes)
        } else {
            check(bytes, &ReadOptions::from_byte(first))
        };
        if let Err(e) = found {
            panic!("{}: {e}", path.display());
        }
        n += 1;
    }
    assert!(n >= 1);
}

proptest! {
    #![proptest_config(config(256))]

    #[test]
    fn arbitrary_bytes_never_panic(opt in any::<u8>(), bytes in prop::collection::vec(any::<u8>(), 0..1024)) {
        check(&bytes, &ReadOptions::from_byte(opt))?;
    }

    #[test]
    fn near_valid_files_with_hostile_edits_never_panic(opt in any::<u8>(), text in base_csv(), edits in edits()) {
        check(&apply(&text, &edits), &ReadOptions::from_byte(opt))?;
    }
}

proptest! {
    #![proptest_config(config(128))]

    /// Rows read, used, adjusted and rejected, and the cleaned totals,
    /// against what the generator knows it wrote.
    #[test]
    fn generated_files_are_accounted_for(g in generated()) {
        let opts = ReadOptions { numbers: g.format, ..ReadOptions::default() };
        let settings = CleanSettings::default().check().unwrap();
        let result = read_and_clean("in.csv", g.text.as_bytes(), &opts, &settings);
        if g.bad == g.rows {
            prop_assert!(result.is_err());
            return Ok(());
        }
        let Ok((ds, cleaned)) = result else {
            // Only possible when no product has a usable month.
            prop_assert!(g.reported.values().all(|v| *v == 0.0) || g.reported.is_empty(), "{:?}", g);
            return Ok(());
        };
        let r = cleaned.rows;
        prop_assert_eq!(r.read, g.rows);
        prop_assert_eq!(r.rejected, g.bad);
        prop_assert_eq!(r.used + r.adjusted + r.rejected, r.read);
        let usable: BTreeSet<&str> = cleaned.series.iter().map(|s| s.product.as_str()).collect();
        let reported: f64 = g.reported.iter().filter(|(p, _)| usable.contains(p.as_str())).map(|(_, v)| v).sum();
        let logged: f64 = cleaned.log.iter().filter(|a| usable.contains(&*a.product)).map(|a| a.delta()).sum();
        let total: f64 = cleaned.series.iter().flat_map(|s| s.values.iter()).sum();
        prop_assert!((total - (reported + logged)).abs() <= 1e-6 * total.abs().max(1.0),
            "cleaned {} != reported {} + logged {}", total, reported, logged);
        if let Err(e) = cleaned.verify(&ds) {
            return Err(TestCaseError::fail(e));
        }
    }
}

/// One cell of a generated sheet.
#[derive(Debug, Clone)]
enum SheetCell {
    Blank,
    Text(usize),
    Number(f64),
    Date(u16, u8, u8),
    Bool(bool),
    /// A formula with a saved result (a number, or an error text).
    Formula(usize),
    /// A formula given no result (rust_xlsxwriter then saves 0).
    Uncalculated,
}

/// Texts a sheet may hold: valid names and months, and the hostile pieces.
fn sheet_text(i: usize) -> &'static str {
    const VALID: [&str; 8] = [
        "product",
        "month",
        "consumed",
        "site",
        "reporting_rate",
        "P1",
        "2024-03",
        "12",
    ];
    VALID
        .get(i)
        .copied()
        .unwrap_or_else(|| HOSTILE[(i - VALID.len()) % HOSTILE.len()])
}

fn sheet_cell() -> impl Strategy<Value = SheetCell> {
    prop_oneof![
        Just(SheetCell::Blank),
        (0..8 + HOSTILE.len()).prop_map(SheetCell::Text),
        prop_oneof![any::<f64>(), -10.0..5000.0f64, Just(f64::NAN), Just(1e300)]
            .prop_map(SheetCell::Number),
        (1899..2102u16, 1..13u8, 1..29u8).prop_map(|(y, m, d)| SheetCell::Date(y, m, d)),
        any::<bool>().prop_map(SheetCell::Bool),
        (0..3usize).prop_map(SheetCell::Formula),
        Just(SheetCell::Uncalculated),
    ]
}

/// A workbook: an optional valid header, then a grid of random cells.
fn workbook(header: bool, grid: &[Vec<SheetCell>]) -> Vec<u8> {
    use rust_xlsxwriter::{ExcelDateTime, Formula, Workbook};
    let mut book = Workbook::new();
    let ws = book.add_worksheet();
    let top = u32::from(header);
    if header {
        for (c, h) in ["product", "month", "consumed", "reporting_rate"]
            .iter()
            .enumerate()
        {
            let _ = ws.write_string(0, c as u16, *h);
        }
    }
    for (r, row) in grid.iter().enumerate() {
        for (c, cell) in row.iter().enumerate() {
            let (r, c) = (top + r as u32, c as u16);
            // Values the writer itself refuses (NaN, dates before 1900) are
            // left out: the reader only ever sees what a workbook can hold.
            let _ = match cell {
                SheetCell::Blank => continue,
                SheetCell::Text(i) => ws.write_string(r, c, sheet_text(*i)),
                SheetCell::Number(x) => ws.write_number(r, c, *x),
                SheetCell::Date(y, m, d) => match ExcelDateTime::from_ymd(*y, *m, *d) {
                    Ok(dt) => ws.write_datetime(r, c, dt),
                    Err(_) => continue,
                },
                SheetCell::Bool(b) => ws.write_boolean(r, c, *b),
                SheetCell::Formula(k) => {
                    let result = ["42", "#N/A", "-3"][*k];
                    ws.write_formula(r, c, Formula::new("=1+1").set_result(result))
                }
                SheetCell::Uncalculated => ws.write_formula(r, c, Formula::new("=A1*2")),
            };
        }
    }
    book.save_to_buffer().unwrap()
}

proptest! {
    #![proptest_config(config(48))]

    /// Random sheets of typed cells (text, numbers, dates, booleans,
    /// formulas with and without saved values) never panic the reader, and
    /// what is accepted keeps every promise.
    #[test]
    fn random_workbook_sheets_never_panic(
        opt in any::<u8>(),
        header in any::<bool>(),
        grid in prop::collection::vec(prop::collection::vec(sheet_cell(), 0..6), 0..12),
    ) {
        check_named("in.xlsx", &workbook(header, &grid), &ReadOptions::from_byte(opt))?;
    }
}

/// The committed workbooks, good and hostile, as mutation seeds.
fn seed_workbooks() -> Vec<(String, Vec<u8>)> {
    let root = std::path::Path::new(env!("CARGO_MANIFEST_DIR"));
    let mut out = Vec::new();
    for dir in ["tests/data/sheets", "tests/data/bad"] {
        for entry in std::fs::read_dir(root.join(dir)).unwrap() {
            let path = entry.unwrap().path();
            let ext = path.extension().and_then(|e| e.to_str()).unwrap_or("");
            // .xls too: its sizes are checked before calamine allocates
            // what a damaged field says (1.7 TB seen before the check).
            if ["xlsx", "ods", "xls"].contains(&ext) {
                out.push((format!("in.{ext}"), std::fs::read(&path).unwrap()));
            }
        }
    }
    out.sort();
    out
}

proptest! {
    #![proptest_config(config(64))]

    /// Damaged workbooks (bytes overwritten, the file cut short) never
    /// panic, and a refusal names the file; low limits keep each case fast
    /// and check that the limits hold on damaged files too.
    #[test]
    fn damaged_workbooks_never_panic(
        which in any::<prop::sample::Index>(),
        opt in any::<u8>(),
        flips in prop::collection::vec((any::<prop::sample::Index>(), any::<u8>()), 0..8),
        cut in any::<prop::sample::Index>(),
        do_cut in any::<bool>(),
    ) {
        let seeds = seed_workbooks();
        let (name, mut bytes) = seeds[which.index(seeds.len())].clone();
        for (at, b) in &flips {
            let i = at.index(bytes.len());
            bytes[i] = *b;
        }
        if do_cut {
            bytes.truncate(cut.index(bytes.len() + 1));
        }
        let opts = ReadOptions {
            limits: provisio::data::SheetLimits { max_cells: 100_000, max_unpacked_bytes: 16 << 20 },
            ..ReadOptions::from_byte(opt)
        };
        check_named(&name, &bytes, &opts)?;
    }
}
