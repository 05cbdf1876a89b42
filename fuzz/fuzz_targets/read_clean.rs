//! Arbitrary bytes through the reader, validator and cleaner. The first
//! byte picks the read options (duplicates, number format, encoding, a
//! month limit), the rest is the file. A refusal must name the file; an
//! accepted file must keep every promise `Cleaned::verify` checks.

#![no_main]

use libfuzzer_sys::fuzz_target;
use provisio::calendar::YearMonth;
use provisio::clean::{read_and_clean, CleanSettings};
use provisio::data::{DuplicatePolicy, Encoding, NumberFormat, ReadOptions};

fn options(b: u8) -> ReadOptions {
    ReadOptions {
        duplicates: if b & 1 == 0 {
            DuplicatePolicy::Reject
        } else {
            DuplicatePolicy::Sum
        },
        numbers: match (b >> 1) % 3 {
            0 => NumberFormat::Plain,
            1 => NumberFormat::Grouped,
            _ => NumberFormat::DecimalComma,
        },
        encoding: match (b >> 3) % 3 {
            0 => Encoding::Utf8,
            1 => Encoding::Latin1,
            _ => Encoding::Windows1252,
        },
        latest_month: if b & 0x40 == 0 {
            None
        } else {
            YearMonth::new(2024, 6)
        },
    }
}

fuzz_target!(|data: &[u8]| {
    let Some((&first, bytes)) = data.split_first() else {
        return;
    };
    let settings = CleanSettings::default().check().expect("default settings");
    match read_and_clean("in.csv", bytes, &options(first), &settings) {
        Ok((ds, cleaned)) => {
            if let Err(e) = cleaned.verify(&ds) {
                panic!("{e}");
            }
            let _ = provisio::quality::profile_all(&cleaned);
        }
        Err(e) => assert!(e.to_string().starts_with("in.csv")),
    }
});
