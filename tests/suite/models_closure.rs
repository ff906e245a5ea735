//! The Kannisto closure and the closed tables every fitted model hands the projection.

use crate::models_support;

use models_support::*;
use tailspan::life::closure::{Kannisto, KannistoClosure};
use tailspan::models::{FittedModel, LeeCarterMethod};

#[test]
fn pure_kannisto_rates_are_recovered_exactly() {
    // Closed form: logit μ(x) = ln a + b x is linear in x, so least squares on exact
    // Kannisto rates returns (ln a, b) and the closure reproduces the law above the data.
    let law = Kannisto::new(3e-5, 0.105);
    let (first, fitted, max_age) = (60, 36, 120); // data ages 60..=95
    let closure = KannistoClosure {
        fit_ages: 10,
        max_age,
    };
    let mut out = vec![0.0; (max_age - first + 1) as usize];
    for (i, m) in out[..fitted].iter_mut().enumerate() {
        *m = law.force(f64::from(first) + i as f64);
    }
    let top: Vec<f64> = out[fitted - 10..fitted].to_vec();
    let refit = Kannisto::fit(first + fitted as i32 - 10, &top).unwrap();
    assert!((refit.alpha - law.alpha).abs() < 1e-9);
    assert!((refit.beta - law.beta).abs() < 1e-11);

    closure.close(first, fitted, &mut out);
    let last = out.len() - 1;
    for (i, q) in out.iter().enumerate().take(last) {
        let exact = 1.0 - (-law.force(f64::from(first) + i as f64)).exp();
        assert!((q - exact).abs() < 1e-12, "age {}", first + i as i32);
    }
    assert_eq!(out[last], 1.0);
    assert!(out.windows(2).all(|w| w[0] < w[1]));
    assert!(out.iter().all(|q| *q > 0.0 && *q <= 1.0));
}

#[test]
fn fitted_models_give_closed_increasing_tables() {
    let population = load_population("small_experience.csv");
    let lc = lee_carter(LeeCarterMethod::Poisson, false)
        .fit_population(&population)
        .unwrap();
    let cbd = cbd().fit_population(&population).unwrap();
    let models: [&dyn FittedModel; 2] = [&lc, &cbd];
    for model in models {
        let (first, top) = (model.ages().first, model.ages().last);
        let mut out = vec![f64::NAN; (model.max_age() - first + 1) as usize];
        let last_year = model.factors().ncols() - 1;
        let factors: Vec<f64> = model.factors().column(last_year).iter().copied().collect();
        model.rates(&factors, &mut out);
        let above = (top - first + 1) as usize;
        assert!(
            out.iter().all(|q| *q > 0.0 && *q <= 1.0),
            "{}",
            model.name()
        );
        assert!(
            out[above - 1..].windows(2).all(|w| w[0] < w[1]),
            "{}: closed rates must rise with age",
            model.name()
        );
        assert_eq!(*out.last().unwrap(), 1.0);
        assert!(out[out.len() - 2] < 1.0);
    }
    // On the fitted ages the table is the model's own rate: q = 1 − exp(−m) for Lee–Carter,
    // logistic(k1 + (x − x̄) k2) for CBD.
    let mut out = vec![0.0; (120 - 60 + 1) as usize];
    lc.rates(&[lc.kt[(0, 5)]], &mut out);
    for (i, q) in out.iter().take(20).enumerate() {
        assert!((q - (1.0 - (-lc.central_rate(i, 5)).exp())).abs() < 1e-15);
    }
    cbd.rates(&[cbd.factors[(0, 7)], cbd.factors[(1, 7)]], &mut out);
    for (i, q) in out.iter().take(20).enumerate() {
        assert!((q - cbd.death_rate(i, 7)).abs() < 1e-14);
    }
}
