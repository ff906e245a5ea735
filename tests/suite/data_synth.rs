//! The invented demo data against its own generating process (self-consistency tests:
//! the data are invented, so the reference is the stated process, not published data).

use std::path::Path;

use tailspan::data::{Sex, Span};
use tailspan::synth::{self, SyntheticPopulation};

fn population() -> SyntheticPopulation {
    synth::population(synth::DEFAULT_SEED).unwrap()
}

/// Mean over cells of the Pearson term (D − μ)² / v for the given expected deaths μ and
/// variance v, plus the largest |D − μ| / √v and the smallest μ.
fn pearson(
    pop: &SyntheticPopulation,
    expected: impl Fn(usize, usize, usize) -> (f64, f64),
) -> (f64, f64, f64, usize) {
    let (mut sum, mut worst, mut smallest, mut n) = (0.0, 0.0f64, f64::INFINITY, 0);
    for (s, p) in pop.experience.populations.iter().enumerate() {
        for i in 0..p.ages.len() {
            for j in 0..p.years.len() {
                let (mu, var) = expected(s, i, j);
                let z = (p.deaths[(i, j)] - mu) / var.sqrt();
                sum += z * z;
                worst = worst.max(z.abs());
                smallest = smallest.min(mu);
                n += 1;
            }
        }
    }
    (sum / n as f64, worst, smallest, n)
}

/// Bound for the mean Pearson term over `n` cells: for Poisson D with mean λ,
/// Var[(D − λ)²/λ] = μ4/λ² − 1 = 2 + 1/λ, using the central moment μ4 = λ(1 + 3λ)
/// (common practice). Five standard errors, so the test fails only on a real mismatch.
fn pearson_bound(n: usize, smallest_mean: f64) -> f64 {
    5.0 * ((2.0 + 1.0 / smallest_mean) / n as f64).sqrt()
}

#[test]
fn deaths_are_poisson_around_the_generating_rates() {
    let pop = population();
    let (mean, worst, smallest, n) = pearson(&pop, |s, i, j| {
        let p = &pop.experience.populations[s];
        let mu = p.exposure[(i, j)] * pop.central_rates[s][(i, j)];
        (mu, mu)
    });
    assert_eq!(n, 2 * 51 * 50);
    assert!(
        smallest > 10.0,
        "every cell should expect some deaths, smallest {smallest}"
    );
    assert!(
        (mean - 1.0).abs() < pearson_bound(n, smallest),
        "mean Pearson term {mean}"
    );
    assert!(worst < 5.5, "largest standardised residual {worst}");
}

#[test]
fn crude_rates_follow_makeham_times_trend_and_cohort() {
    // Against the noise-free surface m̃ = m_Makeham(x) · exp(b_x k_t + γ_{t−x}): D is Poisson with
    // a lognormally scattered mean λ = E m̃ e^{σε}, so Var D = E[λ] + Var[λ] with
    // E[λ] = E m̃ e^{σ²/2} and Var[λ] = (E m̃)² e^{σ²} (e^{σ²} − 1) (lognormal moments).
    let pop = population();
    let s2 = synth::CELL_NOISE_SD.powi(2);
    let (mean, worst, smallest, n) = pearson(&pop, |s, i, j| {
        let p = &pop.experience.populations[s];
        let age = p.ages.first + i as i32;
        let year = p.years.first + j as i32;
        let smooth = synth::base_rate(p.sex, age)
            * (synth::age_loading(age) * pop.trend[s][j] + synth::cohort_effect(year - age)).exp();
        let base = p.exposure[(i, j)] * smooth;
        let mu = base * (s2 / 2.0).exp();
        (mu, mu + base * base * s2.exp() * s2.exp_m1())
    });
    assert!(
        (mean - 1.0).abs() < pearson_bound(n, smallest),
        "mean Pearson term {mean}"
    );
    assert!(worst < 5.5, "largest standardised residual {worst}");
}

#[test]
fn generating_rates_are_makeham_times_trend_and_cohort_plus_small_noise() {
    let pop = population();
    let mut residuals = Vec::new();
    for (s, p) in pop.experience.populations.iter().enumerate() {
        for (i, age) in p.ages.iter().enumerate() {
            for j in 0..p.years.len() {
                let year = p.years.first + j as i32;
                let smooth = synth::base_rate(p.sex, age).ln()
                    + synth::age_loading(age) * pop.trend[s][j]
                    + synth::cohort_effect(year - age);
                residuals.push(pop.central_rates[s][(i, j)].ln() - smooth);
            }
        }
    }
    let n = residuals.len() as f64;
    let mean = residuals.iter().sum::<f64>() / n;
    let sd = (residuals.iter().map(|r| (r - mean).powi(2)).sum::<f64>() / (n - 1.0)).sqrt();
    assert!(
        mean.abs() < 5.0 * synth::CELL_NOISE_SD / n.sqrt(),
        "mean {mean}"
    );
    assert!((sd / synth::CELL_NOISE_SD - 1.0).abs() < 0.06, "sd {sd}");
}

#[test]
fn trend_is_a_random_walk_with_the_stated_drift() {
    let pop = population();
    let mut increments = Vec::new();
    for (s, sex) in Sex::ALL.into_iter().enumerate() {
        let k = &pop.trend[s];
        assert_eq!(k[0], 0.0);
        let steps: Vec<f64> = k.windows(2).map(|w| w[1] - w[0]).collect();
        let (drift, volatility) = synth::trend_parameters(sex);
        let mean = steps.iter().sum::<f64>() / steps.len() as f64;
        // The mean of 49 steps has standard error σ/7; allow four of them.
        assert!(
            (mean - drift).abs() < 4.0 * volatility / 7.0,
            "{sex}: drift {mean}"
        );
        increments.push(steps);
    }
    let (a, b) = (&increments[0], &increments[1]);
    let n = a.len() as f64;
    let (ma, mb) = (a.iter().sum::<f64>() / n, b.iter().sum::<f64>() / n);
    let cov: f64 = a.iter().zip(b).map(|(x, y)| (x - ma) * (y - mb)).sum();
    let va: f64 = a.iter().map(|x| (x - ma).powi(2)).sum();
    let vb: f64 = b.iter().map(|y| (y - mb).powi(2)).sum();
    let r = cov / (va * vb).sqrt();
    assert!(
        (0.4..0.9).contains(&r),
        "correlation of the sexes' shocks {r}"
    );
}

#[test]
fn population_shape_is_plausible() {
    let pop = population();
    for p in &pop.experience.populations {
        assert_eq!((p.ages, p.years), (synth::AGES, synth::YEARS));
        // About 60 000 lives at 50 in every year (cohort sizes vary by up to a quarter).
        for j in 0..p.years.len() {
            assert!((55_000.0..80_000.0).contains(&p.exposure[(0, j)]));
        }
        // Exposure falls with age within a year; mortality rises with age and improves.
        let rates = p.central_rates();
        let last = p.years.len() - 1;
        assert!(p.exposure[(50, 0)] < p.exposure[(30, 0)]);
        assert!(rates[(50, 0)] > 10.0 * rates[(10, 0)]);
        let early: f64 = (0..5).map(|j| rates[(10, j)]).sum();
        let late: f64 = (last - 4..=last).map(|j| rates[(10, j)]).sum();
        assert!(late < 0.7 * early, "{}: no improvement at 60", p.sex);
    }
    let (f, m) = (
        &pop.experience.populations[0],
        &pop.experience.populations[1],
    );
    assert!(m.central_rates()[(20, 0)] > 1.5 * f.central_rates()[(20, 0)]);
}

#[test]
fn book_mix_matches_the_stated_proportions() {
    let n = 20_000;
    let book = synth::book(synth::DEFAULT_SEED, n).unwrap();
    let p = &book.policies;
    assert_eq!(p.len(), n);
    let share = |f: &dyn Fn(&tailspan::data::Policy) -> bool| {
        p.iter().filter(|x| f(x)).count() as f64 / n as f64
    };
    // Binomial standard errors at n = 20 000 are at most 0.0035; allow about four.
    assert!((share(&|x| x.deferral > 0) - synth::DEFERRED_SHARE).abs() < 0.012);
    assert!((share(&|x| x.guarantee > 0) - synth::GUARANTEED_SHARE).abs() < 0.015);
    assert!((share(&|x| x.escalation > 0.0) - synth::ESCALATING_SHARE).abs() < 0.015);
    let term = share(&|x| x.term.is_some());
    assert!((0.005..0.05).contains(&term), "fixed-term share {term}");
    assert!(share(&|x| x.weight == 1.0) > 0.95);

    for x in p {
        assert!((55..=95).contains(&x.age), "{}", x.id);
        assert!(x.amount > 0.0 && x.mortality_factor == 1.0);
        if x.deferral > 0 {
            assert!((55..=64).contains(&x.age) && x.age + x.deferral as i32 == 65);
        }
        assert!([0, 5, 10].contains(&x.guarantee));
        assert!([0.0, 0.02, 0.025, 0.03].contains(&x.escalation));
        if let Some(t) = x.term {
            assert!(x.guarantee <= t);
        }
    }
    assert_eq!(p[0].id, "P000001");
    assert_eq!(p[n - 1].id, "P020000");

    // Peak in the late 60s: the 65–69 band is the most populous five-year band.
    let band = |lo: i32| p.iter().filter(|x| (lo..lo + 5).contains(&x.age)).count();
    let peak = (55..95).step_by(5).max_by_key(|&lo| band(lo)).unwrap();
    assert_eq!(peak, 65);

    // More women at older ages.
    let female = |ages: Span| {
        let in_band: Vec<_> = p.iter().filter(|x| ages.contains(x.age)).collect();
        in_band.iter().filter(|x| x.sex == Sex::F).count() as f64 / in_band.len() as f64
    };
    let (young, old) = (
        female(Span::new(55, 69).unwrap()),
        female(Span::new(80, 95).unwrap()),
    );
    assert!(
        old > young + 0.1,
        "female share {young} under 70, {old} over 80"
    );

    // Lognormal amounts: medians near the stated 5 000 (F) and 7 000 (M).
    for (sex, median) in [(Sex::F, 5_000.0), (Sex::M, 7_000.0)] {
        let mut amounts: Vec<f64> = p
            .iter()
            .filter(|x| x.sex == sex)
            .map(|x| x.amount)
            .collect();
        amounts.sort_by(f64::total_cmp);
        let m = amounts[amounts.len() / 2];
        assert!((m / median - 1.0).abs() < 0.06, "{sex}: median {m}");
    }
}

#[test]
fn same_seed_same_data_other_seed_other_data() {
    let a = synth::population(1).unwrap();
    let b = synth::population(1).unwrap();
    let c = synth::population(2).unwrap();
    assert_eq!(a.experience, b.experience);
    assert_ne!(a.experience, c.experience);
    assert_eq!(synth::book(1, 200).unwrap(), synth::book(1, 200).unwrap());
    assert_ne!(synth::book(1, 200).unwrap(), synth::book(2, 200).unwrap());
    // A longer book starts with the shorter one.
    assert_eq!(
        synth::book(1, 300).unwrap().policies[..200],
        synth::book(1, 200).unwrap().policies[..]
    );
}

#[test]
fn shipped_demo_files_are_the_default_synth_output() {
    let dir = tempfile::tempdir().unwrap();
    synth::write(dir.path(), synth::DEFAULT_SEED, synth::DEFAULT_POLICIES).unwrap();
    let demo = Path::new(env!("CARGO_MANIFEST_DIR")).join("configs/demo");
    for file in [
        "experience.csv",
        "book.csv",
        "book-experience.csv",
        "second-population.csv",
    ] {
        let fresh = std::fs::read(dir.path().join(file)).unwrap();
        let shipped = std::fs::read(demo.join(file)).unwrap();
        assert!(
            fresh == shipped,
            "configs/demo/{file} differs from `tailspan synth --out configs/demo`"
        );
    }
}

#[test]
fn the_invented_cohort_band_lowers_mortality_around_its_centre() {
    // The effect is a Gaussian dip in birth year (the module's documented shape).
    assert!((synth::cohort_effect(1935) + synth::COHORT_DEPTH).abs() < 1e-15);
    let e1 = synth::cohort_effect(1941);
    assert!((e1 + synth::COHORT_DEPTH * (-1.0f64).exp()).abs() < 1e-15);
    assert_eq!(synth::cohort_effect(1929), e1);
    assert!(synth::cohort_effect(1880).abs() < 1e-12);
}
