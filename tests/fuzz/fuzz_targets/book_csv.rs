//! `Book::from_reader` on arbitrary bytes: never a panic, errors that name the file, and
//! every documented rule on each accepted policy.
#![no_main]

use std::path::Path;

use libfuzzer_sys::fuzz_target;
use tailspan::data::Book;
use tailspan_fuzz::{CSV_NAME, assert_book, assert_csv_error};

fuzz_target!(|bytes: &[u8]| {
    let path = Path::new(CSV_NAME);
    match Book::from_reader(path, bytes) {
        Ok(book) => assert_book(&book, path),
        Err(err) => assert_csv_error(&err, path),
    }
});
