//! Property tests of the wide layout (a row per product, a column per
//! month): generated tables with blanks, bad values, totals rows, repeated
//! products and odd headers. Nothing panics; a refusal names the file; an
//! accepted table keeps every promise of cleaning (`Cleaned::verify`: the
//! accounting adds up, totals reconcile) and counts exactly the cells that
//! hold something, each rejected value named by a month column of the
//! header. Tables are invented test inputs.

use proptest::prelude::*;
use provisio::clean::{read_and_clean, CleanSettings};
use provisio::data::{DuplicatePolicy, ReadOptions};

/// A cell of the table: mostly numbers, with blanks and hostile text.
fn cell() -> impl Strategy<Value = String> {
    prop_oneof![
        6 => (0u32..5000).prop_map(|n| n.to_string()),
        3 => Just(String::new()),
        1 => Just("12a".to_string()),
        1 => Just("-4".to_string()),
        1 => Just("\"1,234\"".to_string()),
        1 => Just(" 7 ".to_string()),
        1 => Just("\"3\"".to_string()),
        1 => Just("1e400".to_string()),
    ]
}

/// A product name: a few real ones (so rows repeat), a totals row, an
/// empty name.
fn product() -> impl Strategy<Value = String> {
    prop_oneof![
        4 => prop::sample::select(vec!["ORS", "Zinc", "Implant", "Condom"]).prop_map(str::to_string),
        1 => Just("Grand total".to_string()),
        1 => Just(String::new()),
    ]
}

/// Month headers: consecutive months in one of the forms read, sometimes
/// with an extra named column or a repeated month.
fn header() -> impl Strategy<Value = (Vec<String>, bool)> {
    (1usize..15, 0usize..4, any::<bool>(), any::<bool>()).prop_map(|(n, form, extra, repeat)| {
        const NAMES: [&str; 12] = [
            "Jan", "Feb", "Mar", "Apr", "May", "Jun", "Jul", "Aug", "Sep", "Oct", "Nov", "Dec",
        ];
        let mut h: Vec<String> = (0..n)
            .map(|k| {
                let (y, m) = (2023 + k / 12, k % 12 + 1);
                match form {
                    0 => format!("{y}-{m:02}"),
                    1 => format!("{} {y}", NAMES[m - 1]),
                    2 => format!("{m:02}/{y}"),
                    _ => format!("{}-{}", NAMES[m - 1], y % 100),
                }
            })
            .collect();
        let repeated = repeat && n > 1;
        if repeated {
            h.push(h[0].clone());
        }
        if extra {
            h.push("Total".to_string());
        }
        (h, repeated)
    })
}

proptest! {
    #![proptest_config(ProptestConfig { cases: 200, ..ProptestConfig::default() })]

    #[test]
    fn wide_tables_are_read_or_refused_and_every_value_accounted(
        (months, repeated) in header(),
        rows in prop::collection::vec((product(), prop::collection::vec(cell(), 0..18)), 1..8),
        sum in any::<bool>(),
    ) {
        let mut text = format!("product,{}\n", months.join(","));
        for (p, cells) in &rows {
            text.push_str(p);
            for c in cells.iter().take(months.len()) {
                text.push(',');
                text.push_str(c);
            }
            text.push('\n');
        }
        let opts = ReadOptions {
            duplicates: if sum { DuplicatePolicy::Sum } else { DuplicatePolicy::Reject },
            ..ReadOptions::default()
        };
        let settings = CleanSettings::default().check().unwrap();
        match read_and_clean("w.csv", text.as_bytes(), &opts, &settings) {
            Ok((ds, cleaned)) => {
                prop_assert!(!repeated, "a repeated month header was accepted");
                prop_assert!(ds.layout.wide.is_some() || months.len() < 2);
                if let Err(e) = cleaned.verify(&ds) {
                    return Err(TestCaseError::fail(e));
                }
                if ds.layout.wide.is_some() {
                    // Values read = cells under a month header that hold
                    // something (the Total column's cells are not read).
                    let n_months = months.iter().filter(|h| *h != "Total").count();
                    let filled: usize = rows
                        .iter()
                        .filter(|(p, cells)| !p.is_empty() || cells.iter().any(|c| !c.trim().is_empty()))
                        .map(|(_, cells)| cells.iter().take(n_months).filter(|c| !c.trim().is_empty()).count())
                        .sum();
                    prop_assert_eq!(ds.rows_read, filled);
                    for r in &ds.rejected {
                        let col = r.column.as_deref().unwrap_or("");
                        prop_assert!(months.iter().any(|m| m == col), "{:?}", r);
                        prop_assert!(ds.place(r).starts_with("w.csv: line "), "{}", ds.place(r));
                    }
                }
            }
            Err(e) => {
                let m = e.to_string();
                prop_assert!(m.starts_with("w.csv"), "{}", m);
            }
        }
    }
}
