//! Arbitrary bytes through the reader, validator and cleaner. The first
//! byte picks the read options (duplicates, number format, encoding, a
//! month limit), the rest is the file. A refusal must name the file; an
//! accepted file must keep every promise `Cleaned::verify` checks.

#![no_main]

use libfuzzer_sys::fuzz_target;
use provisio::clean::{read_and_clean, CleanSettings};
use provisio::data::ReadOptions;

fuzz_target!(|data: &[u8]| {
    let Some((&first, bytes)) = data.split_first() else {
        return;
    };
    let settings = CleanSettings::default().check().expect("default settings");
    match read_and_clean("in.csv", bytes, &ReadOptions::from_byte(first), &settings) {
        Ok((ds, cleaned)) => {
            if let Err(e) = cleaned.verify(&ds) {
                panic!("{e}");
            }
            let _ = provisio::quality::profile_all(&cleaned);
        }
        Err(e) => assert!(e.to_string().starts_with("in.csv")),
    }
});
