//! `DiscountCurve::from_reader` on arbitrary bytes: never a panic, errors that name the
//! file, and strictly increasing terms with plausible rates when accepted.
#![no_main]

use std::path::Path;

use libfuzzer_sys::fuzz_target;
use tailspan::interest::DiscountCurve;
use tailspan_fuzz::{CSV_NAME, assert_csv_error, assert_curve};

fuzz_target!(|bytes: &[u8]| {
    let path = Path::new(CSV_NAME);
    match DiscountCurve::from_reader(path, bytes) {
        Ok(curve) => assert_curve(&curve, path),
        Err(err) => assert_csv_error(&err, path),
    }
});
