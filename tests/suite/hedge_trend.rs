//! Hedges of a small book valued over mortality surfaces that differ by scenario (a random
//! walk in the log level of q) with individual deaths simulated: what each hedge removes
//! and what it leaves, against closed forms.
//!
//! The book pays annually in arrears, so each policy year's benefits fall exactly at the
//! year-end settlement date of the swaps and the legs discount the same cash at the same
//! times as the book.

use std::path::Path;
use std::sync::OnceLock;

use rand::SeedableRng;
use rand_chacha::ChaCha8Rng;
use rand_distr::{Distribution as _, StandardNormal};
use tailspan::data::{Book, Config, Policy, Sex};
use tailspan::hedge::{
    BookResults, ContractSummary, HedgeInputs, HedgeResults, ReferenceCells, ReferenceRates,
    evaluate, hedged_pv, rate_at,
};
use tailspan::interest::{DiscountCurve, Timing};
use tailspan::life::MortalityLaw;
use tailspan::projection::RateSurface;
use tailspan::risk::quantile::summarize;
use tailspan::valuation::{Basis, LevelAdjustment, PreparedBook, ScenarioValue, Workspace};

const FIRST_AGE: i32 = 60;
const MAX_AGE: i32 = 110;
const YEAR: i32 = 2025;
const YEARS: usize = 51;
const RATE: f64 = 0.03;
const SCENARIOS: u64 = 1000;
const TREND_SEED: u64 = 20261202;
const DEATH_SEED: u64 = 977;
/// Drift and volatility of the yearly change in log q (invented, of the size seen in
/// fitted Lee–Carter indices).
const DRIFT: f64 = -0.015;
const VOLATILITY: f64 = 0.04;
/// Male rates are this multiple of female rates.
const MALE_LOADING: f64 = 1.3;
/// (sex, age, lives, annual amount) of the book's cohorts.
const COHORTS: [(Sex, i32, f64, f64); 2] =
    [(Sex::F, 65, 150.0, 1000.0), (Sex::M, 72, 100.0, 1500.0)];

/// The Standard Ultimate Life Table's Makeham law (Society of Actuaries; A = 0.00022,
/// B = 2.7e-6, c = 1.124, from memory).
const LAW: MortalityLaw = MortalityLaw::Makeham {
    a: 0.00022,
    b: 2.7e-6,
    c: 1.124,
};

/// Rates of one sex: q(x, V + t) = min(1, loading × law q(x) × exp(κ_t)), 1 at MAX_AGE.
fn surface(kappa: &[f64], loading: f64) -> Vec<f64> {
    let mut q = Vec::with_capacity(YEARS * (MAX_AGE - FIRST_AGE + 1) as usize);
    for k in kappa {
        for age in FIRST_AGE..=MAX_AGE {
            q.push(if age == MAX_AGE {
                1.0
            } else {
                (loading * LAW.q(f64::from(age)) * k.exp()).min(1.0)
            });
        }
    }
    q
}

fn view(q: &[f64]) -> RateSurface<'_> {
    RateSurface {
        first_year: YEAR,
        first_age: FIRST_AGE,
        ages: (MAX_AGE - FIRST_AGE + 1) as usize,
        q,
    }
}

/// κ_t = Σ_{j≤t} (DRIFT + VOLATILITY Z_j), drawn from stream (TREND_SEED, scenario); the
/// central path has no noise.
fn kappa(scenario: Option<u64>) -> Vec<f64> {
    let mut rng = ChaCha8Rng::seed_from_u64(TREND_SEED);
    rng.set_stream(scenario.unwrap_or(0));
    let mut level = 0.0;
    (0..YEARS)
        .map(|_| {
            let z: f64 = match scenario {
                Some(_) => StandardNormal.sample(&mut rng),
                None => 0.0,
            };
            level += DRIFT + VOLATILITY * z;
            level
        })
        .collect()
}

/// The book valued in every scenario, with what the checks need.
struct Sample {
    central: ScenarioValue,
    scenarios: Vec<ScenarioValue>,
    /// Closed-form idiosyncratic variance of the PV given each scenario's path.
    conditional_variance: Vec<f64>,
    /// q(F, 75, 2035) on the central path and per scenario.
    reference: ReferenceRates,
}

/// Variance of the PV of an annual annuity in arrears to one life given its curve
/// S_0..S_n: a life dying in year k receives a_k = Σ_{j=1}^{k} v^j, with probability
/// S_k − S_{k+1}, so Var = Σ P_k a_k² − (Σ P_k a_k)² (standard actuarial result).
fn annuity_variance(survival: &[f64]) -> f64 {
    let v = 1.0 / (1.0 + RATE);
    let (mut a, mut m1, mut m2) = (0.0, 0.0, 0.0);
    for k in 0..survival.len() - 1 {
        let p = survival[k] - survival[k + 1];
        m1 += p * a;
        m2 += p * a * a;
        a += v.powi(k as i32 + 1);
    }
    m2 - m1 * m1
}

/// The sample with individual deaths, built once for all the tests that read it.
fn shared() -> &'static Sample {
    static SAMPLE: OnceLock<Sample> = OnceLock::new();
    SAMPLE.get_or_init(|| sample(true))
}

fn sample(idiosyncratic: bool) -> Sample {
    let book = Book {
        source: "".into(),
        policies: COHORTS
            .iter()
            .enumerate()
            .map(|(i, &(sex, age, lives, amount))| {
                let mut p = Policy::whole_life(format!("c{i}"), sex, age, amount);
                p.weight = lives;
                p
            })
            .collect(),
    };
    let basis = Basis {
        timing: Timing::Arrears,
        frequency: 1,
        curve: DiscountCurve::Flat { rate_pa: RATE },
    };
    let prepared = PreparedBook::new(
        &book,
        &basis,
        LevelAdjustment::none(FIRST_AGE, MAX_AGE),
        YEAR,
        FIRST_AGE,
        MAX_AGE,
        YEAR + YEARS as i32 - 1,
    )
    .unwrap();
    let cells = ReferenceCells::of(config().hedge.as_ref().unwrap());
    let mut ws = Workspace::default();
    let mut value = |k: &[f64], rng: Option<&mut ChaCha8Rng>| {
        let (f, m) = (surface(k, 1.0), surface(k, MALE_LOADING));
        prepared
            .build_curves(&[Some(view(&f)), Some(view(&m))], &mut ws)
            .unwrap();
        let mut out = ScenarioValue::default();
        prepared.value(&mut ws, rng, &mut out);
        let variance: f64 = prepared
            .cohorts()
            .iter()
            .enumerate()
            .map(|(c, cohort)| {
                let &(_, _, lives, amount) = COHORTS.iter().find(|x| x.1 == cohort.age).unwrap();
                lives * amount * amount * annuity_variance(prepared.survival(&ws, c))
            })
            .sum();
        let row = cells.read(&[Some(view(&f)), Some(view(&m))]).unwrap();
        assert_eq!(row, [rate_at(&view(&f), 75, 2035).unwrap()]);
        (out, variance, row)
    };
    let (central, _, central_row) = value(&kappa(None), None);
    let (mut scenarios, mut conditional_variance, mut rows) = (Vec::new(), Vec::new(), Vec::new());
    for scenario in 0..SCENARIOS {
        let mut rng = ChaCha8Rng::seed_from_u64(DEATH_SEED);
        rng.set_stream(scenario);
        let (out, variance, row) = value(&kappa(Some(scenario)), idiosyncratic.then_some(&mut rng));
        scenarios.push(out);
        conditional_variance.push(variance);
        rows.push(row);
    }
    let mut references = cells.assemble(&central_row, &rows).unwrap();
    Sample {
        central,
        scenarios,
        conditional_variance,
        reference: references.pop().unwrap(),
    }
}

const HEDGES: &str = r#"
[data]
experience = "e.csv"
book = "b.csv"
ages = [60, 100]
years = [2000, 2024]
sexes = ["F", "M"]

[model]
max_age = 110

[projection]
horizon = 60

[[hedge.swap]]
name = "indemnity"
premium = 0.01

[[hedge.swap]]
name = "parametric"
floating = "parametric"

[[hedge.swap]]
name = "ten-years"
term = 10

[[hedge.qforward]]
name = "f75"
sex = "F"
age = 75
maturity = 2035
premium = 0.03
"#;

fn config() -> Config {
    Config::parse(HEDGES, Path::new("c.toml")).unwrap()
}

fn run(s: &Sample) -> HedgeResults {
    let config = config();
    let curve = DiscountCurve::Flat { rate_pa: RATE };
    let hedges = config.hedge.as_ref().unwrap();
    let sample = BookResults {
        central: &s.central,
        scenarios: &s.scenarios,
    }
    .sample(hedges, &curve)
    .unwrap();
    evaluate(
        hedges,
        &HedgeInputs {
            book: &sample,
            curve: &curve,
            valuation_year: YEAR,
            references: std::slice::from_ref(&s.reference),
            levels: &[0.995],
        },
    )
    .unwrap()
}

fn pv(s: &Sample) -> Vec<f64> {
    s.scenarios.iter().map(|v| v.pv_simulated).collect()
}

fn variance(values: &[f64]) -> f64 {
    summarize(values).std_dev.powi(2)
}

#[test]
fn swaps_remove_trend_risk_and_leave_the_idiosyncratic_variance() {
    let s = shared();
    let results = run(s);
    let book_pv = pv(s);
    let unhedged = variance(&book_pv);
    let net = |i: usize| &results.values[i].1.net;

    // Indemnity swap to run-off: the floating leg is the book's own benefits, settled when
    // they are paid, so trend and individual deaths are both passed on and nothing is left
    // (follows from the definitions).
    let hedged = variance(&hedged_pv(&book_pv, net(0)));
    assert!(
        hedged < 1e-18 * unhedged,
        "indemnity leaves {hedged} of {unhedged}"
    );
    let ContractSummary::Swap(indemnity) = &results.summary.contracts[0] else {
        panic!("swap")
    };
    let relief = indemnity.effectiveness.tails[0]
        .capital_reduction_pct
        .unwrap();
    assert!((relief - 100.0).abs() < 1e-6, "{relief}");

    // Parametric swap to run-off: the floating leg is the expected benefits on the
    // realised path, E[PV | path], so the hedged PV is PV − E[PV | path] + constant and
    // its variance is E[Var(PV | path)], the idiosyncratic variance. Closed form: the mean
    // over scenarios of Σ lives × amount² × Var(a_K | path) (annuity_variance above).
    let residual = hedged_pv(&book_pv, net(1));
    let sample_variance = variance(&residual);
    let model_variance =
        s.conditional_variance.iter().sum::<f64>() / s.conditional_variance.len() as f64;
    // Standard error of a sample variance from the sample's fourth central moment,
    // se ≈ sqrt((m4 − s⁴) / n) (standard large-sample result); four of them is the bound.
    let n = residual.len() as f64;
    let mean = residual.iter().sum::<f64>() / n;
    let m4 = residual.iter().map(|x| (x - mean).powi(4)).sum::<f64>() / n;
    let se = ((m4 - sample_variance * sample_variance) / n).sqrt();
    assert!(
        (sample_variance - model_variance).abs() < 4.0 * se,
        "hedged variance {sample_variance} vs idiosyncratic {model_variance} (se {se})"
    );
    // The trend was real: it carried most of the book's variance.
    assert!(
        model_variance < 0.5 * unhedged,
        "{model_variance} vs {unhedged}"
    );
    // And the summary reports the same idiosyncratic spread.
    let reported = results.summary.idiosyncratic_sd.unwrap();
    assert!((reported.powi(2) / sample_variance - 1.0).abs() < 1e-9);

    // A ten-year swap removes some of the risk but not all.
    let partial = variance(&hedged_pv(&book_pv, net(2)));
    assert!(partial < unhedged && partial > sample_variance);
}

#[test]
fn swap_prices_are_positive_and_consistent() {
    let s = shared();
    let results = run(s);
    for c in &results.summary.contracts {
        let ContractSummary::Swap(swap) = c else {
            continue;
        };
        let coc = &swap.cost_of_capital;
        assert!(coc.premium.rate > 0.0 && coc.premium.rate < 0.2, "{coc:?}");
        assert!((coc.premium.amount / coc.charges_pv - 1.0).abs() < 1e-12);
        // Capital runs off with the remaining fixed leg and ends at nothing.
        assert!(coc.capital_by_year.windows(2).all(|w| w[1] <= w[0]));
        assert!((coc.capital_by_year[0] - coc.capital).abs() < 1e-9 * coc.capital);
        assert!(swap.sharpe.premium.rate > -0.2 && swap.sharpe.premium.rate < 0.2);
    }
    let ContractSummary::Swap(indemnity) = &results.summary.contracts[0] else {
        panic!("swap")
    };
    // The fixed leg at π = 0 is the book's best estimate: same cash, same dates.
    assert!((indemnity.fixed_leg_at_zero / s.central.pv_expected - 1.0).abs() < 1e-12);
}

#[test]
fn q_forward_hedges_part_of_the_trend_and_none_of_the_idiosyncratic_risk() {
    let s = shared();
    let results = run(s);
    let book_pv = pv(s);
    let unhedged = variance(&book_pv);
    let ContractSummary::QForward(qf) = &results.summary.contracts[3] else {
        panic!("q-forward")
    };
    let hedged = variance(&hedged_pv(&book_pv, &results.values[3].1.net));
    let idiosyncratic = results.summary.idiosyncratic_sd.unwrap().powi(2);
    assert!(hedged < 0.9 * unhedged, "{hedged} vs {unhedged}");
    // An index hedge cannot go below the book's own-deaths variance (up to the sampling
    // covariance of the two parts, bounded here by a tenth of it).
    assert!(hedged > 0.9 * idiosyncratic, "{hedged} vs {idiosyncratic}");
    assert_eq!(qf.unhedgeable_sd, results.summary.idiosyncratic_sd);
    // The hedge ratio is the least-squares notional: any other does worse in sample.
    let reference = &s.reference;
    let v = 1.03f64.powi(-11);
    for scale in [0.8, 1.2] {
        let notional = qf.notional * scale;
        let net: Vec<f64> = reference
            .realised
            .iter()
            .map(|q| notional * v * (qf.fixed_rate - q))
            .collect();
        assert!(variance(&hedged_pv(&book_pv, &net)) > hedged);
    }
}

#[test]
fn without_individual_deaths_the_indemnity_swap_hedges_the_trend_exactly() {
    let s = sample(false);
    assert!(s.scenarios.iter().all(|v| v.pv_simulated.is_nan()));
    let results = run(&s);
    assert_eq!(results.summary.idiosyncratic_sd, None);
    let book_pv: Vec<f64> = s.scenarios.iter().map(|v| v.pv_expected).collect();
    let unhedged = variance(&book_pv);
    for i in [0, 1] {
        let hedged = variance(&hedged_pv(&book_pv, &results.values[i].1.net));
        assert!(hedged < 1e-18 * unhedged, "contract {i}: {hedged}");
    }
}
