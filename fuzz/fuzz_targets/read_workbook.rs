//! Arbitrary bytes read as a workbook, through the same entry point as
//! `read_clean`. The first byte picks the read options and, by its top bit,
//! whether the bytes are named .xlsx or .ods (calamine picks the reader by
//! content either way, so an .xls seed is read as .xls); the limits are set low so that a small input that
//! unpacks or lays out large is refused quickly, as it must be. Seed the
//! corpus with the workbooks of tests/data/bad/ and tests/data/sheets/,
//! the .xls ones too.

#![no_main]

use libfuzzer_sys::fuzz_target;
use provisio::clean::{read_and_clean, CleanSettings};
use provisio::data::{ReadOptions, SheetLimits};

fuzz_target!(|data: &[u8]| {
    let Some((&first, bytes)) = data.split_first() else {
        return;
    };
    let name = if first & 0x80 == 0 { "in.xlsx" } else { "in.ods" };
    let options = ReadOptions {
        limits: SheetLimits {
            max_cells: 100_000,
            max_unpacked_bytes: 16 << 20,
        },
        ..ReadOptions::from_byte(first)
    };
    let settings = CleanSettings::default().check().expect("default settings");
    match read_and_clean(name, bytes, &options, &settings) {
        Ok((ds, cleaned)) => {
            if let Err(e) = cleaned.verify(&ds) {
                panic!("{e}");
            }
        }
        Err(e) => assert!(e.to_string().starts_with(name)),
    }
});
