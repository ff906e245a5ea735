//! `tailspan table` run as a user runs it: the CSV contract, checked values and errors.

use std::io::Read;
use std::process::{Command, Stdio};

const SULT_LAW: &str = "makeham:0.00022,2.7e-6,1.124";

fn tailspan(args: &[&str]) -> std::process::Output {
    Command::new(env!("CARGO_BIN_EXE_tailspan"))
        .args(args)
        .output()
        .expect("binary runs")
}

/// The table's rows as (header, rows of numbers).
fn table(args: &[&str]) -> (String, Vec<Vec<f64>>) {
    let out = tailspan(args);
    assert!(
        out.status.success(),
        "stderr: {}",
        String::from_utf8_lossy(&out.stderr)
    );
    let text = String::from_utf8(out.stdout).unwrap();
    let mut lines = text.lines();
    let header = lines.next().unwrap().to_string();
    let rows = lines
        .map(|line| line.split(',').map(|v| v.parse().unwrap()).collect())
        .collect();
    (header, rows)
}

#[test]
fn sult_table_header_and_row() {
    // Society of Actuaries, Standard Ultimate Life Table at 5 %; from memory:
    // l65 = 94,579.7 from l20 = 100,000, ä65 = 13.5498.
    let (header, rows) = table(&[
        "table",
        "--law",
        SULT_LAW,
        "--rate",
        "0.05",
        "--ages",
        "60,70",
        "--horizon",
        "10",
        "--radix-age",
        "20",
    ]);
    assert_eq!(
        header,
        "age,qx,px,lx,e_complete,e_curtate,e_complete_n,e_curtate_n,annuity_due"
    );
    assert_eq!(rows.len(), 11);
    let row = rows.iter().find(|r| r[0] == 65.0).expect("row for age 65");
    assert!((row[3] - 94_579.7).abs() < 0.05, "l65 = {}", row[3]);
    assert!((row[8] - 13.5498).abs() < 5e-5, "ä65 = {}", row[8]);
    // Columns agree with each other: p = 1 − q, e°x = e x + 1/2 under UDD (closed table),
    // e x:10 ≤ e°x:10 ≤ 10 (common practice).
    assert!((row[1] + row[2] - 1.0).abs() < 1e-15);
    assert!((row[4] - row[5] - 0.5).abs() < 1e-10);
    assert!(row[7] <= row[6] && row[6] <= 10.0);
}

#[test]
fn radix_defaults_to_the_first_age_shown() {
    let (_, rows) = table(&[
        "table",
        "--law",
        SULT_LAW,
        "--rate",
        "0.05",
        "--ages",
        "65",
        "--horizon",
        "5",
    ]);
    assert_eq!(rows.len(), 1);
    assert_eq!(rows[0][3], 100_000.0);
}

#[test]
fn de_moivre_and_constant_force_rows_are_closed_forms() {
    // De Moivre, ω = 100: e°x = (ω − x)/2 under UDD, e x = (ω − x − 1)/2 (closed forms).
    let (_, rows) = table(&[
        "table",
        "--law",
        "de-moivre:100",
        "--rate",
        "0.03",
        "--ages",
        "40,41",
        "--horizon",
        "10",
    ]);
    assert!((rows[0][4] - 30.0).abs() < 1e-10);
    assert!((rows[1][5] - 29.0).abs() < 1e-10);
    // Constant force μ = 0.05: e°x:n = (1 − e^(−μn))/μ (closed form).
    let (_, rows) = table(&[
        "table",
        "--law",
        "constant:0.05",
        "--rate",
        "0.03",
        "--ages",
        "30",
        "--horizon",
        "20",
        "--fractional",
        "constant-force",
    ]);
    let want = (1.0 - (-0.05f64 * 20.0).exp()) / 0.05;
    assert!(
        (rows[0][6] - want).abs() < 1e-11,
        "{} vs {want}",
        rows[0][6]
    );
}

#[test]
fn bad_arguments_exit_two_and_name_the_argument() {
    let cases: [(&[&str], &str); 6] = [
        (
            &[
                "--law",
                "weibull:1,2",
                "--rate",
                "0.05",
                "--ages",
                "60",
                "--horizon",
                "5",
            ],
            "--law",
        ),
        (
            &[
                "--law",
                "makeham:1,2",
                "--rate",
                "0.05",
                "--ages",
                "60",
                "--horizon",
                "5",
            ],
            "--law",
        ),
        (
            &[
                "--law",
                SULT_LAW,
                "--rate",
                "-1.5",
                "--ages",
                "60",
                "--horizon",
                "5",
            ],
            "--rate",
        ),
        (
            &[
                "--law",
                SULT_LAW,
                "--rate",
                "0.05",
                "--ages",
                "70,60",
                "--horizon",
                "5",
            ],
            "--ages",
        ),
        (
            &[
                "--law",
                SULT_LAW,
                "--rate",
                "0.05",
                "--ages",
                "60",
                "--horizon",
                "5",
                "--fractional",
                "linear",
            ],
            "--fractional",
        ),
        (
            &[
                "--law",
                "de-moivre:140",
                "--rate",
                "0.05",
                "--ages",
                "60",
                "--horizon",
                "5",
            ],
            "--max-age",
        ),
    ];
    for (args, named) in cases {
        let mut full = vec!["table"];
        full.extend_from_slice(args);
        let out = tailspan(&full);
        assert_eq!(out.status.code(), Some(2), "{args:?}");
        let stderr = String::from_utf8_lossy(&out.stderr);
        assert!(stderr.contains(named), "{args:?}: {stderr}");
        assert!(out.stdout.is_empty(), "partial output for {args:?}");
    }
}

#[test]
fn closed_pipe_is_a_normal_end() {
    let mut child = Command::new(env!("CARGO_BIN_EXE_tailspan"))
        .args([
            "table",
            "--law",
            SULT_LAW,
            "--rate",
            "0.05",
            "--ages",
            "0,120",
            "--horizon",
            "10",
            "--frequency",
            "12",
        ])
        .stdout(Stdio::piped())
        .stderr(Stdio::piped())
        .spawn()
        .expect("binary runs");
    drop(child.stdout.take());
    let status = child.wait().unwrap();
    let mut stderr = String::new();
    child
        .stderr
        .take()
        .unwrap()
        .read_to_string(&mut stderr)
        .unwrap();
    assert!(status.success(), "stderr: {stderr}");
    assert!(stderr.is_empty(), "stderr: {stderr}");
}
