//! Writes the invented example report, to look at it in a browser or with
//! `tests/tools/report-screenshot`:
//!
//! `cargo run --example report_example -- target/report-example.html`

use std::process::ExitCode;

fn main() -> ExitCode {
    let path = std::env::args_os()
        .nth(1)
        .unwrap_or_else(|| "target/report-example.html".into());
    match tailspan::report::write(&path, &tailspan::report::ReportData::example()) {
        Ok(()) => {
            println!("{}", std::path::Path::new(&path).display());
            ExitCode::SUCCESS
        }
        Err(err) => {
            eprintln!("report_example: {err}");
            ExitCode::from(2)
        }
    }
}
