//! The invented demo population and annuity book.
//!
//! The demo must exercise every part of the pipeline without any real data, so the
//! population is built from a known generating process: a Makeham base by sex, a
//! Lee–Carter-like improvement trend (a random walk with negative drift, loaded more on
//! younger ages) and a little cell noise, with deaths drawn Poisson from exposure × rate.
//! Because the generating rates are known, tests can check the data against them.
//!
//! The population also carries an invented cohort effect, as real populations show one:
//! the lives born in a band of years around 1935 (about 1925–1945) have lower mortality at
//! every age than their neighbours, by up to 12 % (log m lowered by
//! [`COHORT_DEPTH`] × exp(−((c − [`COHORT_PEAK_YEAR`]) / [`COHORT_WIDTH_YEARS`])²) for
//! birth year c = t − x), so while the band passes through an age its rates there improve
//! faster than the period trend alone. Cohort models (APC, Renshaw–Haberman, M6, M7) see it
//! in the demo; period-only models cannot.
//!
//! Every random draw comes from a ChaCha8 stream keyed by the seed and a fixed stream
//! number per purpose, so the files depend on the seed alone, and changing how many
//! policies are drawn does not move the population.

use std::path::Path;

use nalgebra::DMatrix;
use rand::{RngExt, SeedableRng};
use rand_chacha::ChaCha8Rng;
use rand_distr::{Distribution, Gamma, LogNormal, Poisson, StandardNormal};

use crate::data::{Book, Experience, Policy, Population, Sex, Span};
use crate::error::{Error, Result};
use crate::life::MortalityLaw;

/// Seed of the shipped demo files.
pub const DEFAULT_SEED: u64 = 20261202;

/// Policies in the default demo book.
pub const DEFAULT_POLICIES: usize = 20_000;

/// Most policies `synth` will write; beyond this a demo book is no longer a demo.
pub const MAX_POLICIES: usize = 10_000_000;

/// Ages of the invented population.
pub const AGES: Span = Span {
    first: 50,
    last: 100,
};

/// Calendar years of the invented population.
pub const YEARS: Span = Span {
    first: 1975,
    last: 2024,
};

/// Standard deviation of the cell-level noise on log m (small: real data has some
/// extra-Poisson variation, and models should not see a perfectly smooth surface).
pub const CELL_NOISE_SD: f64 = 0.02;

/// Correlation of the two sexes' yearly trend shocks.
pub const TREND_CORRELATION: f64 = 0.7;

/// Largest lowering of log m in the invented cohort band (at its peak birth year).
pub const COHORT_DEPTH: f64 = 0.12;

/// Birth year at the centre of the invented cohort band.
pub const COHORT_PEAK_YEAR: f64 = 1935.0;

/// Half-width scale of the cohort band in years (the effect is e^-1 of its peak this far
/// from the centre).
pub const COHORT_WIDTH_YEARS: f64 = 6.0;

/// The invented cohort effect on log m of the lives born in `birth_year` (zero far from
/// the band, −[`COHORT_DEPTH`] at its centre).
pub fn cohort_effect(birth_year: i32) -> f64 {
    let z = (birth_year as f64 - COHORT_PEAK_YEAR) / COHORT_WIDTH_YEARS;
    -COHORT_DEPTH * (-z * z).exp()
}

/// Share of the book deferred (ages 55–64, first payment at 65).
pub const DEFERRED_SHARE: f64 = 0.10;

/// Share of the book with a 5- or 10-year guarantee.
pub const GUARANTEED_SHARE: f64 = 0.30;

/// Share of the book escalating at 2–3 % a year.
pub const ESCALATING_SHARE: f64 = 0.20;

/// Share of immediate annuities under age 80 that are fixed-term.
pub const TERM_SHARE_UNDER_80: f64 = 0.04;

/// Independent random streams, one per purpose.
#[derive(Debug, Clone, Copy)]
enum Stream {
    Trend = 1,
    CellNoise = 2,
    Deaths = 3,
    Book = 4,
    BookSpread = 5,
    BookDeaths = 6,
    SecondIndex = 7,
    SecondDeaths = 8,
}

/// Stream numbers carry a tag in their high bits so they can never coincide with the
/// per-scenario streams of a projection run with the same seed.
const STREAM_TAG: u64 = 0x7379_6e74_6800_0000;

fn rng(seed: u64, stream: Stream) -> ChaCha8Rng {
    let mut rng = ChaCha8Rng::seed_from_u64(seed);
    rng.set_stream(STREAM_TAG | stream as u64);
    rng
}

/// The invented Makeham base (the 1975 level) for `sex`. Invented values, chosen so that
/// central rates at 70 are about 0.02 (F) and 0.04 (M).
pub fn base_law(sex: Sex) -> MortalityLaw {
    match sex {
        Sex::F => MortalityLaw::Makeham {
            a: 0.0003,
            b: 2.5e-5,
            c: 1.10,
        },
        Sex::M => MortalityLaw::Makeham {
            a: 0.0006,
            b: 7.0e-5,
            c: 1.095,
        },
    }
}

/// Base central rate for the cell of age `age` last birthday: the force at mid-year of
/// age (common practice approximation of m by μ(x + ½)).
pub fn base_rate(sex: Sex, age: i32) -> f64 {
    base_law(sex).force(age as f64 + 0.5)
}

/// Age loading b_x of the trend: 0.020 at 50 falling linearly to 0.005 at 100, so the
/// young old improve fastest.
pub fn age_loading(age: i32) -> f64 {
    let share = (age - AGES.first) as f64 / (AGES.last - AGES.first) as f64;
    0.020 - 0.015 * share
}

/// Yearly drift and volatility of k_t for `sex` (k falls by about 1 a year).
pub fn trend_parameters(sex: Sex) -> (f64, f64) {
    match sex {
        Sex::F => (-0.9, 0.5),
        Sex::M => (-1.1, 0.5),
    }
}

/// Lives at exact age 50 in a cohort of ordinary size.
fn lives_at_50(sex: Sex) -> f64 {
    match sex {
        Sex::F => 60_000.0,
        Sex::M => 59_000.0,
    }
}

/// Relative size of the cohort born in `year`: a post-war bulge peaking in 1955.
fn cohort_size(year: i32) -> f64 {
    let z = (year as f64 - 1955.0) / 8.0;
    1.0 + 0.25 * (-z * z).exp()
}

/// The invented population and the rates that generated it.
#[derive(Debug, Clone)]
pub struct SyntheticPopulation {
    /// Deaths and exposures, one population per sex (F, M), ages 50–100, years 1975–2024.
    pub experience: Experience,
    /// Generating central rates m(x, t) per sex, ages × years, including the cohort effect
    /// and the cell noise.
    pub central_rates: Vec<DMatrix<f64>>,
    /// Period index k_t per sex (k is 0 in 1975).
    pub trend: Vec<Vec<f64>>,
}

/// Generates the invented population for `seed`.
pub fn population(seed: u64) -> Result<SyntheticPopulation> {
    let (n_ages, n_years) = (AGES.len(), YEARS.len());

    // k_t for both sexes from correlated shocks.
    let mut trend_rng = rng(seed, Stream::Trend);
    let mut trend = vec![vec![0.0; n_years]; 2];
    for j in 1..n_years {
        let z1: f64 = StandardNormal.sample(&mut trend_rng);
        let z2: f64 = StandardNormal.sample(&mut trend_rng);
        let shocks = [
            z1,
            TREND_CORRELATION * z1 + (1.0 - TREND_CORRELATION.powi(2)).sqrt() * z2,
        ];
        for (s, sex) in Sex::ALL.into_iter().enumerate() {
            let (drift, volatility) = trend_parameters(sex);
            trend[s][j] = trend[s][j - 1] + drift + volatility * shocks[s];
        }
    }

    let mut noise_rng = rng(seed, Stream::CellNoise);
    let mut deaths_rng = rng(seed, Stream::Deaths);
    let mut populations = Vec::with_capacity(2);
    let mut central_rates = Vec::with_capacity(2);
    for (s, sex) in Sex::ALL.into_iter().enumerate() {
        let mut rates = DMatrix::zeros(n_ages, n_years);
        for j in 0..n_years {
            for (i, age) in AGES.iter().enumerate() {
                let noise: f64 = StandardNormal.sample(&mut noise_rng);
                let year = YEARS.first + j as i32;
                let log_m = base_rate(sex, age).ln()
                    + age_loading(age) * trend[s][j]
                    + cohort_effect(year - age)
                    + CELL_NOISE_SD * noise;
                rates[(i, j)] = log_m.exp();
            }
        }
        let mut exposure = DMatrix::zeros(n_ages, n_years);
        let mut deaths = DMatrix::zeros(n_ages, n_years);
        for (j, year) in YEARS.iter().enumerate() {
            // Survivors from 50 under the year's own rates, to mid-year of each age.
            let mut cumulative = 0.0;
            for (i, age) in AGES.iter().enumerate() {
                let m = rates[(i, j)];
                let lives =
                    lives_at_50(sex) * cohort_size(year - age) * (-cumulative - m / 2.0).exp();
                cumulative += m;
                let e = (lives * 10.0).round() / 10.0;
                let poisson = Poisson::new(e * m).map_err(|err| {
                    Error::Numerical(format!(
                        "synthetic deaths for sex {sex}, age {age}, year {year}: {err}"
                    ))
                })?;
                exposure[(i, j)] = e;
                deaths[(i, j)] = poisson.sample(&mut deaths_rng);
            }
        }
        populations.push(Population::new(sex, AGES, YEARS, deaths, exposure)?);
        central_rates.push(rates);
    }
    Ok(SyntheticPopulation {
        experience: Experience {
            source: Default::default(),
            populations,
        },
        central_rates,
        trend,
    })
}

/// Generates an invented annuity book of `policies` policies for `seed`.
///
/// Ages 55–95 peaking in the late 60s; women a growing share with age; amounts
/// lognormal (median 5 000 F, 7 000 M, in invented units); about 10 % deferred
/// (ages 55–64, deferral to 65), 30 % with a 5- or 10-year guarantee, 20 % escalating at
/// 2, 2.5 or 3 %, a few fixed-term annuities, a few rows standing for 2 or 3 lives.
pub fn book(seed: u64, policies: usize) -> Result<Book> {
    let mut rng = rng(seed, Stream::Book);
    let bad = |e: rand_distr::NormalError| Error::Numerical(e.to_string());
    // Immediate annuitants' ages: 55 + Gamma(4, 13/3), mode 68.
    let age_offset = Gamma::new(4.0, 13.0 / 3.0).map_err(|e| Error::Numerical(e.to_string()))?;
    let amount_f = LogNormal::new(5_000f64.ln(), 0.75).map_err(bad)?;
    let amount_m = LogNormal::new(7_000f64.ln(), 0.75).map_err(bad)?;
    let mut book = Vec::with_capacity(policies);
    for n in 1..=policies {
        let deferred = rng.random_bool(DEFERRED_SHARE);
        let age = if deferred {
            rng.random_range(55..=64)
        } else {
            loop {
                let offset: f64 = age_offset.sample(&mut rng);
                if offset < 41.0 {
                    break 55 + offset.floor() as i32;
                }
            }
        };
        let female_share = (0.42 + 0.01 * (age - 60) as f64).clamp(0.40, 0.75);
        let sex = if rng.random_bool(female_share) {
            Sex::F
        } else {
            Sex::M
        };
        let amount = match sex {
            Sex::F => amount_f.sample(&mut rng),
            Sex::M => amount_m.sample(&mut rng),
        }
        .round()
        .max(250.0);
        let term = (!deferred && age < 80 && rng.random_bool(TERM_SHARE_UNDER_80))
            .then(|| [10, 15, 20][rng.random_range(0..3)]);
        let guarantee = if rng.random_bool(GUARANTEED_SHARE) {
            [5, 10][rng.random_range(0..2)]
        } else {
            0
        };
        let escalation = if rng.random_bool(ESCALATING_SHARE) {
            [0.02, 0.025, 0.03][rng.random_range(0..3)]
        } else {
            0.0
        };
        let weight = if rng.random_bool(0.03) {
            rng.random_range(2..=3) as f64
        } else {
            1.0
        };
        book.push(Policy {
            id: format!("P{n:06}"),
            sex,
            age,
            amount,
            deferral: if deferred { (65 - age) as u32 } else { 0 },
            term,
            guarantee,
            escalation,
            weight,
            mortality_factor: 1.0,
        });
    }
    Ok(Book {
        source: Default::default(),
        policies: book,
    })
}

/// Calendar years of the invented book's own experience.
pub const BOOK_YEARS: Span = Span {
    first: 2015,
    last: 2024,
};

/// Ages of the invented book's own experience.
pub const BOOK_AGES: Span = Span {
    first: 60,
    last: 95,
};

/// The invented book's log-rate level against the population at [`BOOK_MEAN_AGE`]:
/// about 11 % lighter mortality.
pub const BOOK_LEVEL: f64 = -0.12;

/// Change of the book's log-rate gap per year of age: the gap narrows with age.
pub const BOOK_SLOPE: f64 = 0.006;

/// Age about which the book's slope turns (the mid-point of the demo's fitted ages).
pub const BOOK_MEAN_AGE: f64 = 77.5;

/// AR(1) coefficient of the invented book's yearly spread over the population.
pub const BOOK_SPREAD_PHI: f64 = 0.5;

/// Innovation standard deviation of the invented book's spread.
pub const BOOK_SPREAD_SIGMA: f64 = 0.05;

/// The invented book's own deaths and exposures, ages 60–95 in 2015–2024: the
/// population's generating rates of [`population`] times exp(level + slope (x − x̄) + κ_t),
/// with κ_t a mean-zero AR(1) started from its stationary distribution, deaths Poisson.
/// Exposure peaks near 70 (about 2,000 person-years a cell for women, 1,600 for men), for a
/// few thousand deaths a year.
pub fn book_experience(seed: u64, population: &SyntheticPopulation) -> Result<Experience> {
    let mut spread_rng = rng(seed, Stream::BookSpread);
    let stationary = BOOK_SPREAD_SIGMA / (1.0 - BOOK_SPREAD_PHI * BOOK_SPREAD_PHI).sqrt();
    let mut spread = Vec::with_capacity(BOOK_YEARS.len());
    let start: f64 = StandardNormal.sample(&mut spread_rng);
    let mut kappa = stationary * start;
    for _ in BOOK_YEARS.iter() {
        spread.push(kappa);
        let z: f64 = StandardNormal.sample(&mut spread_rng);
        kappa = BOOK_SPREAD_PHI * kappa + BOOK_SPREAD_SIGMA * z;
    }
    let mut deaths_rng = rng(seed, Stream::BookDeaths);
    let mut populations = Vec::with_capacity(2);
    for (s, sex) in Sex::ALL.into_iter().enumerate() {
        let size = if sex == Sex::F { 2000.0 } else { 1600.0 };
        let mut exposure = DMatrix::zeros(BOOK_AGES.len(), BOOK_YEARS.len());
        let mut deaths = DMatrix::zeros(BOOK_AGES.len(), BOOK_YEARS.len());
        for (j, year) in BOOK_YEARS.iter().enumerate() {
            for (i, age) in BOOK_AGES.iter().enumerate() {
                let (Some(pi), Some(pj)) = (AGES.index(age), YEARS.index(year)) else {
                    return Err(Error::Numerical(format!(
                        "the book's cell (age {age}, year {year}) lies outside the population"
                    )));
                };
                let m = population.central_rates[s][(pi, pj)]
                    * (BOOK_LEVEL + BOOK_SLOPE * (age as f64 - BOOK_MEAN_AGE) + spread[j]).exp();
                let z = (age as f64 - 70.0) / 12.0;
                let e = (size * (-z * z).exp() * 10.0).round() / 10.0;
                let poisson = Poisson::new(e * m).map_err(|err| {
                    Error::Numerical(format!(
                        "synthetic book deaths for sex {sex}, age {age}, year {year}: {err}"
                    ))
                })?;
                exposure[(i, j)] = e;
                deaths[(i, j)] = poisson.sample(&mut deaths_rng);
            }
        }
        populations.push(Population::new(
            sex, BOOK_AGES, BOOK_YEARS, deaths, exposure,
        )?);
    }
    Ok(Experience {
        source: Default::default(),
        populations,
    })
}

/// Calendar years of the invented second population (it starts later than the first).
pub const SECOND_YEARS: Span = Span {
    first: 1985,
    last: 2024,
};

/// The invented second population's log-rate gap to the first at [`BOOK_MEAN_AGE`].
pub const SECOND_LEVEL: f64 = -0.10;

/// Change of that gap per year of age (it narrows with age).
pub const SECOND_SLOPE: f64 = 0.004;

/// Constant, coefficient and innovation standard deviation of the second population's own
/// index ξ_t, an AR(1) with constant (stationary mean c / (1 − φ) = −1).
pub const SECOND_INDEX_AR1: (f64, f64, f64) = (-0.2, 0.8, 2.0);

/// Lives at 50 of the second population per life of the first.
pub const SECOND_SIZE: f64 = 0.2;

/// The second population's own age loading g_x (Σ g_x = 1 over the population's ages):
/// smallest at the youngest ages, rising linearly to three times that at the oldest.
pub fn second_loading(age: i32) -> f64 {
    let weight = |a: i32| 1.0 + 2.0 * (a - AGES.first) as f64 / (AGES.last - AGES.first) as f64;
    weight(age) / AGES.iter().map(weight).sum::<f64>()
}

/// An invented second large population on Li & Lee (2005)'s structure against the first:
/// log m₂(x, t) = log m₁(x, t) + level + slope (x − x̄) + g_x ξ_t, where m₁ are the first
/// population's generating rates (its common trend and its own deviations), and ξ_t is an
/// AR(1) with constant ([`SECOND_INDEX_AR1`]) started at its stationary distribution, so
/// the gap between the two is that of the model, (a₂ − a₁) + b₂ k₂ − b₁ k₁. Ages as the
/// first population, years [`SECOND_YEARS`], [`SECOND_SIZE`] times its lives (a few
/// hundred thousand person-years a sex each year); deaths Poisson.
pub fn second_population(seed: u64, population: &SyntheticPopulation) -> Result<Experience> {
    let (c, phi, sigma) = SECOND_INDEX_AR1;
    let mut index_rng = rng(seed, Stream::SecondIndex);
    let stationary_sd = sigma / (1.0 - phi * phi).sqrt();
    let z: f64 = StandardNormal.sample(&mut index_rng);
    let mut xi = c / (1.0 - phi) + stationary_sd * z;
    let mut index = Vec::with_capacity(SECOND_YEARS.len());
    for _ in SECOND_YEARS.iter() {
        index.push(xi);
        let z: f64 = StandardNormal.sample(&mut index_rng);
        xi = c + phi * xi + sigma * z;
    }
    let mut deaths_rng = rng(seed, Stream::SecondDeaths);
    let mut populations = Vec::with_capacity(2);
    for (s, sex) in Sex::ALL.into_iter().enumerate() {
        let first = &population.experience.populations[s];
        let mut exposure = DMatrix::zeros(AGES.len(), SECOND_YEARS.len());
        let mut deaths = DMatrix::zeros(AGES.len(), SECOND_YEARS.len());
        for (j, year) in SECOND_YEARS.iter().enumerate() {
            let Some(pj) = YEARS.index(year) else {
                return Err(Error::Numerical(format!(
                    "the second population's year {year} lies outside the first's"
                )));
            };
            for (i, age) in AGES.iter().enumerate() {
                let gap = SECOND_LEVEL
                    + SECOND_SLOPE * (age as f64 - BOOK_MEAN_AGE)
                    + second_loading(age) * index[j];
                let m = population.central_rates[s][(i, pj)] * gap.exp();
                let e = (first.exposure[(i, pj)] * SECOND_SIZE * 10.0).round() / 10.0;
                let poisson = Poisson::new(e * m).map_err(|err| {
                    Error::Numerical(format!(
                        "synthetic second-population deaths for sex {sex}, age {age}, year \
                         {year}: {err}"
                    ))
                })?;
                exposure[(i, j)] = e;
                deaths[(i, j)] = poisson.sample(&mut deaths_rng);
            }
        }
        populations.push(Population::new(sex, AGES, SECOND_YEARS, deaths, exposure)?);
    }
    Ok(Experience {
        source: Default::default(),
        populations,
    })
}

/// Writes `DIR/experience.csv`, `DIR/book.csv`, `DIR/book-experience.csv` and
/// `DIR/second-population.csv` for `seed`. Every file is fully written under a temporary
/// name before any is renamed into place, and a folder this call created is removed again
/// on failure.
pub fn write(dir: &Path, seed: u64, policies: usize) -> Result<()> {
    if policies == 0 || policies > MAX_POLICIES {
        return Err(Error::argument(
            "--policies",
            format!("must be between 1 and {MAX_POLICIES}, found {policies}"),
        ));
    }
    let population = population(seed)?;
    let book = book(seed, policies)?;
    let book_experience = book_experience(seed, &population)?;
    let second = second_population(seed, &population)?;
    let existed = dir.exists();
    let result = (|| {
        let experience = population
            .experience
            .write_unpublished(&dir.join("experience.csv"))?;
        let book = book.write_unpublished(&dir.join("book.csv"))?;
        let book_experience =
            book_experience.write_unpublished(&dir.join("book-experience.csv"))?;
        let second = second.write_unpublished(&dir.join("second-population.csv"))?;
        experience.commit()?;
        book.commit()?;
        book_experience.commit()?;
        second.commit()
    })();
    if result.is_err() && !existed {
        // Only removes the folder if it is empty, i.e. nothing was published.
        let _ = std::fs::remove_dir(dir);
    }
    result
}
