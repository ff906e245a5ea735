//! `PublishedTable::parse` on arbitrary bytes, then the experience it gives for the corpus
//! window against itself as exposures: never a panic, errors that name the file, and
//! accepted tables whose rows keep the documented rules.
#![no_main]

use std::path::Path;

use libfuzzer_sys::fuzz_target;
use tailspan::data::Sex;
use tailspan::data::published::{PublishedTable, experience_from_published};
use tailspan_fuzz::{CSV_NAME, assert_csv_error, assert_experience, experience_windows};

fuzz_target!(|bytes: &[u8]| {
    let path = Path::new(CSV_NAME);
    let table = match PublishedTable::parse(bytes, path) {
        Ok(table) => table,
        Err(err) => return assert_csv_error(&err, path),
    };
    for row in table.rows.values() {
        for sex in Sex::ALL {
            if let Some(v) = row.value(sex) {
                assert!(v.is_finite() && v >= 0.0, "{v}");
            }
        }
    }
    for (ages, years, sexes) in experience_windows() {
        match experience_from_published(&table, &table, ages, years, sexes) {
            Ok(e) => assert_experience(&e, path, ages, years, sexes),
            Err(err) => assert_csv_error(&err, path),
        }
    }
});
