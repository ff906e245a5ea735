//! Quantile and TVaR code against numpy (fixtures made by tests/fixtures/quantiles.py).

use tailspan::risk::order::{HELD, Streamed};
use tailspan::risk::{CapitalSummary, quantile_sorted, tvar_sorted};

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

#[test]
fn streamed_quantiles_and_tvar_match_numpy_and_the_sorted_path() {
    // Source: the same numpy fixture. The streamed path (the one a run without a report
    // takes, re-reading the PVs instead of sorting a copy) is given the sample unsorted and
    // allowances far below its size, so every figure needs histogram passes; it must give
    // numpy's figures and the in-memory type-7 ones bit for bit.
    let sample: Vec<f64> = read("quantiles_sample.csv")
        .lines()
        .map(|l| l.trim().parse().unwrap())
        .collect();
    let mut sorted = sample.clone();
    sorted.sort_by(f64::total_cmp);
    let rows: Vec<Vec<f64>> = read("quantiles_numpy.csv")
        .lines()
        .skip(1)
        .map(|line| line.split(',').map(|x| x.parse().unwrap()).collect())
        .collect();
    let probabilities: Vec<f64> = rows.iter().map(|r| r[0]).collect();
    for held in [5, 64, 1_000, HELD] {
        let streamed = Streamed::new(&sample[..], held).unwrap();
        let quantiles = streamed.quantiles(&probabilities).unwrap();
        for (row, &q) in rows.iter().zip(&quantiles) {
            let (p, numpy_q, numpy_tvar) = (row[0], row[1], row[2]);
            assert!(
                (q - numpy_q).abs() <= 1e-9 * numpy_q.abs(),
                "held={held} p={p}: {q} vs numpy {numpy_q}"
            );
            assert_eq!(q.to_bits(), quantile_sorted(&sorted, p).to_bits());
            let tvar = streamed.tail_mean(q).unwrap();
            assert!(
                (tvar - numpy_tvar).abs() <= 1e-9 * numpy_tvar.abs(),
                "held={held} p={p}: tvar {tvar} vs numpy {numpy_tvar}"
            );
            assert_eq!(tvar.to_bits(), tvar_sorted(&sorted, p).to_bits());
        }
    }
    // The whole capital summary, levels as configured, equals the sorted path's.
    let levels = [0.9, 0.995];
    let best_estimate = sorted[500];
    let expected = CapitalSummary::new(&sample, best_estimate, &levels);
    let streamed = Streamed::new(&sample[..], 7).unwrap();
    let ours = CapitalSummary::streamed(&streamed, best_estimate, &levels).unwrap();
    assert_eq!(
        serde_json::to_string(&ours).unwrap(),
        serde_json::to_string(&expected).unwrap()
    );
}
