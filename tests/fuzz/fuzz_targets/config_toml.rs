//! `Config::parse` on arbitrary text: never a panic, errors that name the file and key, and
//! every checked rule on an accepted config. (Bytes that are not UTF-8 are refused by
//! `Config::load` before parsing.)
#![no_main]

use std::path::Path;

use libfuzzer_sys::fuzz_target;
use tailspan::data::Config;
use tailspan_fuzz::{CONFIG_NAME, assert_config, assert_config_error};

fuzz_target!(|text: &str| {
    let path = Path::new(CONFIG_NAME);
    match Config::parse(text, path) {
        Ok(config) => assert_config(&config, path),
        Err(err) => assert_config_error(&err, path),
    }
});
