//! `Experience::from_reader` on arbitrary bytes, in three fitting windows: never a panic,
//! errors that name the file, and full grids of finite non-negative cells when accepted.
#![no_main]

use std::path::Path;

use libfuzzer_sys::fuzz_target;
use tailspan::data::Experience;
use tailspan_fuzz::{CSV_NAME, assert_csv_error, assert_experience, experience_windows};

fuzz_target!(|bytes: &[u8]| {
    let path = Path::new(CSV_NAME);
    for (ages, years, sexes) in experience_windows() {
        match Experience::from_reader(path, bytes, ages, years, sexes) {
            Ok(e) => assert_experience(&e, path, ages, years, sexes),
            Err(err) => assert_csv_error(&err, path),
        }
    }
});
