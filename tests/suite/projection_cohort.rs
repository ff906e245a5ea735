//! The cohort index drawn per scenario: Monte Carlo moments of the projected γ against the
//! closed forms of its time series, the cohort diagonal of the rates, the central path,
//! unchanged period paths, and bytes independent of threads and shards.
//!
//! Closed forms (standard time-series results; Box & Jenkins, Time Series Analysis, and
//! Hamilton, Time Series Analysis, 1994, ch. 4 — from memory), for a series whose last
//! observed value γ_n sits at position n:
//!
//! - AR(1) about a linear trend, γ_c = μ0 + μ1 τ_c + φ γ_{c−1} + ε_c: writing
//!   γ_c = α + β τ_c + u_c with β = μ1/(1 − φ), α = (μ0 − φ β)/(1 − φ) and u an AR(1),
//!   E[γ_{n+h}] = α + β (n + h) + φ^h (γ_n − α − β n) and
//!   Var[γ_{n+h}] = σ² (1 − φ^{2h})/(1 − φ²).
//! - ARIMA(1,1,0) with drift, Δγ_c = μ0 + φ Δγ_{c−1} + ε_c: with δ = μ0/(1 − φ),
//!   E[γ_{n+h}] = γ_n + h δ + (Δγ_n − δ) φ (1 − φ^h)/(1 − φ), and from the ψ-weights of the
//!   integrated AR(1), ψ_j = Σ_{i≤j} φ^i, Var[γ_{n+h}] = σ² Σ_{j<h} ψ_j².
//! - With the deterministic terms drawn from N(μ̂, V) independently of the innovations,
//!   the variance gains aᵀ V a, a the derivative of the mean in the terms (law of total
//!   variance); V = σ² (X_AᵀX_A)⁻¹ is the ordinary least-squares covariance of the
//!   intercept (and trend) with φ held.
//!
//! Tolerances are four Monte Carlo standard errors: σ/√N for a mean, σ² √(2/(N − 1)) for a
//! normal variance, (1 − ρ²)/√N for a correlation (Fisher's large-sample result).

use crate::models_support;
use crate::projection_support;

use std::path::Path;

use tailspan::data::Sex;
use tailspan::data::config::{CohortSeriesKind, Compression};
use tailspan::models::{CohortEffects, FittedModel};
use tailspan::projection::{
    OutputOptions, Projector, Settings, Shard, Uncertainty, scenario_ids, write_projection,
};
use tailspan::series::CohortSeries;

use projection_support::{
    AGES, COHORTS, ESTIMATED, FakeLogRate, LEFT_OUT, YEARS, basis, cohort_pair, histories,
    invented_gamma,
};

const N: u64 = 3000;
const HORIZON: usize = 12;

fn settings(noise: bool, uncertainty: Uncertainty, horizon: usize) -> Settings {
    Settings {
        seed: 20261202,
        horizon,
        noise,
        uncertainty,
    }
}

fn assert_within(what: &str, estimate: f64, expected: f64, se: f64) {
    assert!(
        (estimate - expected).abs() <= 4.0 * se,
        "{what}: Monte Carlo {estimate} vs closed form {expected} (4 s.e. = {})",
        4.0 * se
    );
}

/// Closed-form mean, process variance and terms-derivative of γ h steps after the last
/// estimated value, for the series fitted to `gamma` (see the module notes).
struct Forecast {
    mean: f64,
    variance: f64,
    /// ∂ mean / ∂ (μ0, μ1).
    gradient: [f64; 2],
}

fn forecast(series: &CohortSeries, gamma: &[f64], h: usize) -> Forecast {
    let (phi, s2) = (series.phi, series.sigma2);
    let n = gamma.len();
    let last = gamma[n - 1];
    let hf = h as f64;
    match series.kind {
        CohortSeriesKind::Ar1Trend => {
            // Trend-stationary AR(1) forecast (Hamilton 1994, ch. 4 — from memory).
            let beta = series.trend / (1.0 - phi);
            let alpha = (series.intercept - phi * beta) / (1.0 - phi);
            let nf = n as f64;
            let mean = alpha + beta * (nf + hf) + phi.powi(h as i32) * (last - alpha - beta * nf);
            let variance = s2 * (1.0 - phi.powi(2 * h as i32)) / (1.0 - phi * phi);
            let a0: f64 = (0..h).map(|j| phi.powi(j as i32)).sum();
            let a1: f64 = (0..h)
                .map(|j| phi.powi(j as i32) * (nf + hf - j as f64))
                .sum();
            Forecast {
                mean,
                variance,
                gradient: [a0, a1],
            }
        }
        CohortSeriesKind::Arima110Drift => {
            // Integrated AR(1) forecast through its ψ-weights (Box & Jenkins — from memory).
            let delta = series.intercept / (1.0 - phi);
            let diff = last - gamma[n - 2];
            let mean =
                last + hf * delta + (diff - delta) * phi * (1.0 - phi.powi(h as i32)) / (1.0 - phi);
            let psi = |j: usize| (1.0 - phi.powi(j as i32 + 1)) / (1.0 - phi);
            let variance = s2 * (0..h).map(|j| psi(j).powi(2)).sum::<f64>();
            let a0: f64 = (1..=h)
                .map(|j| (1.0 - phi.powi(j as i32)) / (1.0 - phi))
                .sum();
            Forecast {
                mean,
                variance,
                gradient: [a0, 0.0],
            }
        }
    }
}

/// OLS covariance of the intercept (and trend) given φ: σ² (X_AᵀX_A)⁻¹ (the standard
/// least-squares result, e.g. Greene, Econometric Analysis — from memory).
fn terms_covariance(series: &CohortSeries, n: usize) -> [[f64; 2]; 2] {
    let s2 = series.sigma2;
    match series.kind {
        CohortSeriesKind::Arima110Drift => [[s2 / (n - 2) as f64, 0.0], [0.0, 0.0]],
        CohortSeriesKind::Ar1Trend => {
            // Rows (1, τ) for τ = 2..=n, the positions of γ_2..γ_n.
            let m = (n - 1) as f64;
            let s1: f64 = (2..=n).map(|t| t as f64).sum();
            let sq: f64 = (2..=n).map(|t| (t * t) as f64).sum();
            let det = m * sq - s1 * s1;
            [
                [s2 * sq / det, -s2 * s1 / det],
                [-s2 * s1 / det, s2 * m / det],
            ]
        }
    }
}

/// The drawn γ of both sexes for scenarios 1..=N.
fn sample(projector: &Projector) -> Vec<[Vec<f64>; 2]> {
    let mut buf = projector.buffer();
    (1..=N)
        .map(|s| {
            projector.generate(s, &mut buf).unwrap();
            [0, 1].map(|i| buf.cohort(i).unwrap().gamma().to_vec())
        })
        .collect()
}

fn moments(xs: impl Iterator<Item = f64> + Clone) -> (f64, f64) {
    let n = xs.clone().count() as f64;
    let mean = xs.clone().sum::<f64>() / n;
    let var = xs.map(|x| (x - mean).powi(2)).sum::<f64>() / (n - 1.0);
    (mean, var)
}

fn check_moments(kind: CohortSeriesKind, uncertainty: Uncertainty) {
    let fits = cohort_pair(kind);
    let gammas = invented_gamma(kind);
    let series: Vec<CohortSeries> = fits
        .iter()
        .map(|(_, m)| m.cohort_effects().unwrap().series)
        .collect();
    let p = Projector::new(fits, settings(true, uncertainty, HORIZON), None).unwrap();
    let draws = sample(&p);
    assert_eq!(draws[0][0].len(), LEFT_OUT + HORIZON);
    for sex in 0..2 {
        let v = terms_covariance(&series[sex], ESTIMATED);
        for h in [1, 2, 5, LEFT_OUT + HORIZON] {
            let f = forecast(&series[sex], &gammas[sex], h);
            let a = f.gradient;
            let extra = match uncertainty {
                Uncertainty::Drift => {
                    a[0] * a[0] * v[0][0] + 2.0 * a[0] * a[1] * v[0][1] + a[1] * a[1] * v[1][1]
                }
                _ => 0.0,
            };
            let var = f.variance + extra;
            let (mean, sample_var) = moments(draws.iter().map(|d| d[sex][h - 1]));
            let what = format!("{kind:?} {uncertainty:?} sex {sex} h = {h}");
            assert_within(
                &format!("mean γ, {what}"),
                mean,
                f.mean,
                (var / N as f64).sqrt(),
            );
            assert_within(
                &format!("variance γ, {what}"),
                sample_var,
                var,
                var * (2.0 / (N - 1) as f64).sqrt(),
            );
        }
    }
}

#[test]
fn ar1_trend_moments_match_closed_forms() {
    check_moments(CohortSeriesKind::Ar1Trend, Uncertainty::None);
}

#[test]
fn arima110_drift_moments_match_closed_forms() {
    check_moments(CohortSeriesKind::Arima110Drift, Uncertainty::None);
}

#[test]
fn drawn_terms_add_their_estimation_variance() {
    check_moments(CohortSeriesKind::Ar1Trend, Uncertainty::Drift);
    check_moments(CohortSeriesKind::Arima110Drift, Uncertainty::Drift);
}

#[test]
fn sexes_innovations_are_correlated_as_their_residuals() {
    let kind = CohortSeriesKind::Ar1Trend;
    let fits = cohort_pair(kind);
    // Residuals written out from the fitted coefficients (τ_i = i + 1).
    let residuals: Vec<Vec<f64>> = fits
        .iter()
        .zip(invented_gamma(kind))
        .map(|((_, m), g)| {
            let s = m.cohort_effects().unwrap().series;
            (1..g.len())
                .map(|i| g[i] - s.intercept - s.phi * g[i - 1] - s.trend * (i + 1) as f64)
                .collect()
        })
        .collect();
    let dot = |a: &[f64], b: &[f64]| a.iter().zip(b).map(|(x, y)| x * y).sum::<f64>();
    let rho = dot(&residuals[0], &residuals[1])
        / (dot(&residuals[0], &residuals[0]) * dot(&residuals[1], &residuals[1])).sqrt();
    assert!(rho > 0.3, "the invented sexes share innovations: {rho}");
    let p = Projector::new(fits, settings(true, Uncertainty::None, HORIZON), None).unwrap();
    assert!((p.basis().cohorts().correlation() - rho).abs() < 1e-12);
    // One step ahead, γ is its mean plus σ ε: the sexes' draws correlate as ε does.
    let draws = sample(&p);
    let (mf, vf) = moments(draws.iter().map(|d| d[0][0]));
    let (mm, vm) = moments(draws.iter().map(|d| d[1][0]));
    let cov = draws
        .iter()
        .map(|d| (d[0][0] - mf) * (d[1][0] - mm))
        .sum::<f64>()
        / (N - 1) as f64;
    let r = cov / (vf * vm).sqrt();
    assert_within(
        "cross-sex correlation",
        r,
        rho,
        (1.0 - rho * rho) / (N as f64).sqrt(),
    );
}

#[test]
fn rates_follow_the_cohort_diagonal() {
    let fits = cohort_pair(CohortSeriesKind::Arima110Drift);
    let effects: Vec<CohortEffects> = fits
        .iter()
        .map(|(_, m)| m.cohort_effects().unwrap())
        .collect();
    let p = Projector::new(fits, settings(true, Uncertainty::Drift, HORIZON), None).unwrap();
    let mut buf = p.buffer();
    let first_drawn = LEFT_OUT + ESTIMATED;
    for scenario in [0, 3] {
        p.generate(scenario, &mut buf).unwrap();
        for (i, e) in effects.iter().enumerate() {
            let c = buf.cohort(i).unwrap();
            assert_eq!(c.first_cohort(), e.first_cohort + first_drawn as i32);
            assert_eq!(c.first_cohort(), YEARS.last - AGES.first - 1);
            let model = p.basis().model(i);
            let mut expected = vec![0.0; p.ages().len()];
            for (h, year) in p.years().iter().enumerate() {
                // Age x in year t takes γ of the cohort born in t − x: fitted where the
                // cohort was estimated (or is in the old corner), drawn otherwise.
                let gamma_by_age: Vec<f64> = AGES
                    .iter()
                    .map(|x| {
                        let k = (year - x - e.first_cohort) as usize;
                        if k < first_drawn {
                            e.values[k]
                        } else {
                            c.gamma()[k - first_drawn]
                        }
                    })
                    .collect();
                model.cohort_rates(buf.factors(i, h + 1), &gamma_by_age, &mut expected);
                assert_eq!(buf.year_rates(i, year).unwrap(), &expected[..]);
            }
        }
    }
}

#[test]
fn central_path_is_the_conditional_mean_and_extends_the_fit() {
    for kind in [CohortSeriesKind::Ar1Trend, CohortSeriesKind::Arima110Drift] {
        let fits = cohort_pair(kind);
        let gammas = invented_gamma(kind);
        let effects: Vec<CohortEffects> = fits
            .iter()
            .map(|(_, m)| m.cohort_effects().unwrap())
            .collect();
        let p = Projector::new(fits, settings(false, Uncertainty::Drift, HORIZON), None).unwrap();
        let mut buf = p.buffer();
        p.generate(0, &mut buf).unwrap();
        for (i, e) in effects.iter().enumerate() {
            let gamma = buf.cohort(i).unwrap().gamma();
            // The grid's young corner takes exactly the values the fit filled in.
            assert_eq!(gamma[..LEFT_OUT], e.values[COHORTS - LEFT_OUT..]);
            for (h, g) in gamma.iter().enumerate() {
                let f = forecast(&e.series, &gammas[i], h + 1);
                assert!(
                    (g - f.mean).abs() <= 1e-12 * (1.0 + f.mean.abs()),
                    "{kind:?} sex {i} h = {}: {g} vs {}",
                    h + 1,
                    f.mean
                );
            }
        }
    }
}

#[test]
fn period_paths_are_those_of_a_period_model() {
    // The same period histories with and without a cohort effect: the cohort draws come
    // from streams of their own, so the period indices are bit-identical.
    let [kf, km] = histories(11, YEARS.len(), &[5.0], &[-1.2], &[0.9], 0.8);
    let n = AGES.len();
    let period: Vec<(Sex, Box<dyn FittedModel>)> = [(Sex::F, kf), (Sex::M, km)]
        .into_iter()
        .map(|(sex, k)| {
            let m: Box<dyn FittedModel> = Box::new(FakeLogRate {
                basis: basis(sex, AGES, YEARS, 120),
                ax: vec![-4.0; n],
                bx: vec![1.0; n],
                kt: k / n as f64,
            });
            (sex, m)
        })
        .collect();
    let s = settings(true, Uncertainty::Drift, HORIZON);
    let a = Projector::new(period, s, None).unwrap();
    let b = Projector::new(cohort_pair(CohortSeriesKind::Ar1Trend), s, None).unwrap();
    let (mut pa, mut pb) = (a.buffer(), b.buffer());
    for scenario in 0..5 {
        a.generate(scenario, &mut pa).unwrap();
        b.generate(scenario, &mut pb).unwrap();
        assert!(pa.cohort(0).is_none() && pb.cohort(0).is_some());
        for h in 1..=HORIZON {
            assert_eq!(pa.stacked(h), pb.stacked(h), "scenario {scenario}, h = {h}");
        }
    }
}

fn options(folder: &Path, shard: Option<Shard>) -> OutputOptions {
    OutputOptions {
        folder: folder.to_path_buf(),
        paths: tailspan::data::PathsOutput::All,
        compression: Compression::Zstd,
        shard,
        row_group_rows: 4000,
        provenance: tailspan::io::Provenance::new(20261202, 24, Vec::new()),
    }
}

fn in_pool<T: Send>(threads: usize, f: impl FnOnce() -> T + Send) -> T {
    rayon::ThreadPoolBuilder::new()
        .num_threads(threads)
        .build()
        .unwrap()
        .install(f)
}

/// Every row of a Parquet file, via the parquet crate's record reader.
fn rows(path: &Path) -> Vec<String> {
    use parquet::file::reader::{FileReader, SerializedFileReader};
    let reader = SerializedFileReader::new(std::fs::File::open(path).unwrap()).unwrap();
    reader
        .get_row_iter(None)
        .unwrap()
        .map(|r| r.unwrap().to_string())
        .collect()
}

#[test]
fn cohort_files_do_not_depend_on_threads_or_shards() {
    let dir = tempfile::tempdir().unwrap();
    let run = |threads: usize, folder: &Path, shard: Option<Shard>| {
        in_pool(threads, || {
            let mut p = Projector::new(
                cohort_pair(CohortSeriesKind::Arima110Drift),
                settings(true, Uncertainty::Drift, 6),
                None,
            )
            .unwrap();
            write_projection(
                &mut p,
                scenario_ids(24, true),
                &options(folder, shard),
                &|_| {},
            )
            .unwrap()
        })
    };
    let (one, two) = (dir.path().join("one"), dir.path().join("two"));
    run(1, &one, None);
    run(2, &two, None);
    for stem in ["paths", "factors", "period"] {
        let file = format!("{stem}.parquet");
        assert!(
            std::fs::read(one.join(&file)).unwrap() == std::fs::read(two.join(&file)).unwrap(),
            "{stem}: 1 and 2 threads wrote different bytes"
        );
    }
    let factors = rows(&one.join("factors.parquet"));
    let gamma_rows = factors.iter().filter(|r| r.contains("\"gamma\"")).count();
    // Per scenario and sex: the two left-out young cohorts and one per projected year.
    assert_eq!(gamma_rows, 25 * 2 * (LEFT_OUT + 6));
    let shards = dir.path().join("shards");
    let mut joined = Vec::new();
    for k in 1..=3 {
        run(2, &shards, Some(Shard { index: k, count: 3 }));
        joined.extend(rows(&shards.join(format!("factors.part-{k}-of-3.parquet"))));
    }
    assert!(joined == factors, "shards differ from the single run");
}

#[test]
fn bootstrap_expected_deaths_use_each_cells_own_cohort() {
    // The fitted APC central rate of cell (x, t) is exp(a_x + k_t + γ_{t−x}); the bootstrap
    // resamples deaths around E · m from that cell's own cohort, not the last fitted year's.
    let population = models_support::load_population("cohort_experience.csv");
    let fit = models_support::apc().fit_population(&population).unwrap();
    let expected = tailspan::projection::uncertainty::fitted_deaths(&fit, &population).unwrap();
    let mut frozen_differs = false;
    for j in 0..population.years.len() {
        for i in 0..population.ages.len() {
            let want = population.exposure[(i, j)] * fit.central_rate(i, j);
            let got = expected[(i, j)];
            assert!(
                (got - want).abs() <= 1e-9 * want,
                "age row {i}, year column {j}: {got} vs {want}"
            );
            let last = population.years.len() - 1;
            let c = fit.grid.cohort(i, j);
            frozen_differs |= fit.cohorts.values[c] != fit.cohorts.values[fit.grid.cohort(i, last)];
        }
    }
    assert!(frozen_differs);
}
