//! Quantile and TVaR code against numpy (fixtures made by tests/fixtures/quantiles.py).

use tailspan::risk::{quantile_sorted, tvar_sorted};

fn read(path: &str) -> String {
    std::fs::read_to_string(format!(
        "{}/tests/fixtures/{path}",
        env!("CARGO_MANIFEST_DIR")
    ))
    .unwrap()
}

#[test]
fn quantiles_and_tvar_match_numpy() {
    // Source: numpy.quantile, default method "linear" (Hyndman–Fan type 7); TVaR as the
    // numpy mean of the sample at or above that quantile.
    let mut sample: Vec<f64> = read("quantiles_sample.csv")
        .lines()
        .map(|l| l.trim().parse().unwrap())
        .collect();
    sample.sort_by(f64::total_cmp);
    let mut checked = 0;
    for line in read("quantiles_numpy.csv").lines().skip(1) {
        let f: Vec<f64> = line.split(',').map(|x| x.parse().unwrap()).collect();
        let (p, q, tvar) = (f[0], f[1], f[2]);
        let ours = quantile_sorted(&sample, p);
        assert!(
            (ours - q).abs() <= 1e-9 * q.abs(),
            "p={p}: {ours} vs numpy {q}"
        );
        let ours = tvar_sorted(&sample, p);
        assert!(
            (ours - tvar).abs() <= 1e-9 * tvar.abs(),
            "p={p}: tvar {ours} vs {tvar}"
        );
        checked += 1;
    }
    assert_eq!(checked, 13);
}
