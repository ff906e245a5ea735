//! Swap and q-forward pricing against hand-computed closed forms and the identities that
//! follow from the contracts' definitions.

use std::path::Path;

use tailspan::data::{Config, Sex};
use tailspan::hedge::{
    BookResults, ContractSummary, FloatingBasis, HEDGE_COLUMNS, HedgeInputs, QForwardTerms,
    ReferenceCells, ReferenceRates, Side, SwapTerms, cost_of_capital, effectiveness, evaluate,
    hedge_ratio, sharpe,
};
use tailspan::interest::DiscountCurve;
use tailspan::projection::RateSurface;
use tailspan::risk::quantile::summarize;
use tailspan::valuation::ScenarioValue;

/// A scenario whose benefits are `cash` (trend only: no simulated deaths).
fn scenario(cash: &[f64], pv: f64) -> ScenarioValue {
    ScenarioValue {
        pv_expected: pv,
        pv_simulated: f64::NAN,
        cash_expected: cash.to_vec(),
        cash_simulated: Vec::new(),
    }
}

fn flat(rate_pa: f64) -> DiscountCurve {
    DiscountCurve::Flat { rate_pa }
}

fn swap(term_years: Option<usize>, share: f64, side: Side) -> SwapTerms {
    SwapTerms {
        name: "s".into(),
        term_years,
        share,
        floating: FloatingBasis::Indemnity,
        side,
    }
}

fn close(a: f64, b: f64, rel: f64) -> bool {
    (a - b).abs() <= rel * b.abs().max(1e-300)
}

#[test]
fn cost_of_capital_one_year_two_scenarios_by_hand() {
    // Hand computation (Solvency II risk-margin form, Delegated Regulation (EU) 2015/35
    // Art. 37 and 39): best-estimate benefit 100 in year 0, realised 98 or 104, settled at
    // t = 1, v = 1/1.03. Provider loss L = F − X₀ = −2v or 4v; type-7 VaR at 0.995 of two
    // values is −2v + 0.995 · 6v = 3.97v, the mean is v, so C₀ = 2.97v. One year of capital
    // costs 0.06 · 2.97v, paid at t = 1: π · 100v = 0.06 · 2.97v · v, π = 0.001782 v.
    let central = scenario(&[100.0, 80.0], 0.0);
    let scenarios = [scenario(&[98.0, 70.0], 0.0), scenario(&[104.0, 90.0], 0.0)];
    let book = BookResults {
        central: &central,
        scenarios: &scenarios,
    };
    let legs = swap(Some(1), 1.0, Side::Hedger)
        .legs(&book, &flat(0.03))
        .unwrap();
    let v = 1.0 / 1.03;
    assert!(close(legs.fixed_at_zero, 100.0 * v, 1e-15));
    let price = cost_of_capital(&legs, 1.0, 0.06, 0.995);
    assert!(close(price.premium.rate, 0.001782 * v, 1e-13), "{price:?}");
    assert!(close(price.capital, 2.97 * v, 1e-13));
    assert!(close(price.premium.amount, price.charges_pv, 1e-13));
    assert!(close(price.premium.amount, 0.06 * 2.97 * v * v, 1e-13));
    // A share scales the amounts, not the rate.
    let half = cost_of_capital(&legs, 0.5, 0.06, 0.995);
    assert_eq!(half.premium.rate, price.premium.rate);
    assert!(close(
        half.premium.amount,
        0.5 * price.premium.amount,
        1e-15
    ));
}

#[test]
fn cost_of_capital_two_years_by_hand() {
    // Hand computation with exact fractions: v₁ = 10/11, v₂ = 100/121 (10 % a year).
    // BE benefits (100, 50): X₀ = 100 v₁ + 50 v₂. Scenarios (98, 49) and (104, 53):
    // L₁ = −2 v₁ − v₂, L₂ = 4 v₁ + 3 v₂; C₀ = L₁ + 0.995 (L₂ − L₁) − (L₁ + L₂)/2
    // = 4.3363636…; the value at t = 1 of what is still due is 50 v₁, so
    // C₁ = C₀ · 50 v₁ / X₀ = 1.490625; charges 0.06 (C₀ v₁ + C₁ v₂) and
    // π = charges / X₀ = 30051/12800000 exactly.
    let central = scenario(&[100.0, 50.0], 0.0);
    let scenarios = [scenario(&[98.0, 49.0], 0.0), scenario(&[104.0, 53.0], 0.0)];
    let book = BookResults {
        central: &central,
        scenarios: &scenarios,
    };
    let legs = swap(None, 1.0, Side::Hedger)
        .legs(&book, &flat(0.10))
        .unwrap();
    let price = cost_of_capital(&legs, 1.0, 0.06, 0.995);
    assert!(
        close(price.premium.rate, 30051.0 / 12800000.0, 1e-12),
        "{price:?}"
    );
    assert_eq!(price.capital_by_year.len(), 2);
    assert!(close(price.capital_by_year[0], 4.336363636363636, 1e-12));
    assert!(close(price.capital_by_year[1], 1.490625, 1e-12));
}

#[test]
fn sharpe_premium_by_hand() {
    // Hand computation: F = 98v or 104v, mean 101v, sample sd 6v/√2; the provider's net
    // (1 + π)·100v − F has mean (1 + π)·100v − 101v and sd 6v/√2, so a target of 0.25 gives
    // π = 0.01 + 0.25 · 6/(100 √2) = 0.0206066017…
    let central = scenario(&[100.0], 0.0);
    let scenarios = [scenario(&[98.0], 0.0), scenario(&[104.0], 0.0)];
    let book = BookResults {
        central: &central,
        scenarios: &scenarios,
    };
    let legs = swap(Some(1), 1.0, Side::Hedger)
        .legs(&book, &flat(0.03))
        .unwrap();
    let price = sharpe(&legs, 1.0, 0.25);
    let expected = 0.01 + 0.25 * 6.0 / (100.0 * 2f64.sqrt());
    assert!(close(price.premium.rate, expected, 1e-12), "{price:?}");
    // At that loading the provider's net has the target Sharpe ratio.
    let provider = swap(Some(1), 1.0, Side::Provider).values(&legs, price.premium.rate);
    let s = summarize(&provider.net);
    assert!(close(s.mean / s.std_dev, 0.25, 1e-10));
}

#[test]
fn without_noise_the_swap_is_worth_minus_its_loading() {
    // Follows from the definitions: with every scenario on the central path and no
    // individual deaths, floating = X₀ and the hedger's net is X₀ − (1 + π) X₀ = −π X₀.
    let cash = [50.0, 48.0, 45.0, 41.0, 36.0, 30.0];
    let central = scenario(&cash, 230.0);
    // Half the scenarios carry simulated deaths equal to the expected ones.
    let scenarios: Vec<ScenarioValue> = (0..7)
        .map(|s| {
            let mut v = central.clone();
            if s % 2 == 0 {
                v.cash_simulated = cash.to_vec();
                v.pv_simulated = v.pv_expected;
            }
            v
        })
        .collect();
    let book = BookResults {
        central: &central,
        scenarios: &scenarios,
    };
    let curve = flat(0.025);
    for (term, share, premium) in [
        (Some(3), 1.0, 0.015),
        (None, 0.6, 0.04),
        (Some(6), 0.25, -0.01),
    ] {
        let terms = swap(term, share, Side::Hedger);
        let legs = terms.legs(&book, &curve).unwrap();
        let v = terms.values(&legs, premium);
        for net in &v.net {
            assert!(
                close(*net, -premium * share * legs.fixed_at_zero, 1e-12),
                "{net} vs {}",
                -premium * share * legs.fixed_at_zero
            );
        }
        assert_eq!(v.net_central, v.net[0]);
        // No spread: no capital, and the Sharpe price is the fair price.
        assert_eq!(cost_of_capital(&legs, share, 0.06, 0.995).premium.rate, 0.0);
        assert!(sharpe(&legs, share, 0.25).premium.rate.abs() < 1e-15);
    }
    // A q-forward struck at the central rate with no premium pays nothing.
    let q = QForwardTerms {
        name: "q".into(),
        sex: Sex::M,
        age: 75,
        maturity: 2030,
        premium: 0.0,
        side: Side::Hedger,
    };
    let reference = ReferenceRates {
        central: 0.0312,
        realised: vec![0.0312; 7],
    };
    let v = q.values(1.0e6, &reference, 0.9);
    assert!(v.net.iter().all(|&n| n == 0.0));
    assert_eq!(v.net_central, 0.0);
}

#[test]
fn hedger_and_provider_sides_sum_to_zero() {
    // Parity (common practice): two opposite positions at the same fixed rate cancel in
    // every scenario.
    let central = scenario(&[10.0, 9.0, 8.0], 0.0);
    let scenarios: Vec<ScenarioValue> = (0..20)
        .map(|s| {
            let bump = 1.0 + 0.01 * (s as f64 - 9.5);
            scenario(&[10.0 * bump, 9.0 * bump * bump, 8.0 * bump.powi(3)], 0.0)
        })
        .collect();
    let book = BookResults {
        central: &central,
        scenarios: &scenarios,
    };
    let curve = flat(0.02);
    let hedger = swap(Some(2), 0.7, Side::Hedger);
    let provider = swap(Some(2), 0.7, Side::Provider);
    let legs = hedger.legs(&book, &curve).unwrap();
    let (a, b) = (hedger.values(&legs, 0.013), provider.values(&legs, 0.013));
    for (x, y) in a.net.iter().zip(&b.net) {
        assert_eq!(x + y, 0.0);
    }
    assert_eq!(a.net_central + b.net_central, 0.0);

    let reference = ReferenceRates {
        central: 0.02,
        realised: (0..20).map(|s| 0.017 + 0.0003 * s as f64).collect(),
    };
    let mut q = QForwardTerms {
        name: "q".into(),
        sex: Sex::F,
        age: 70,
        maturity: 2030,
        premium: 0.04,
        side: Side::Hedger,
    };
    let a = q.values(5.0e5, &reference, 0.88);
    q.side = Side::Provider;
    let b = q.values(5.0e5, &reference, 0.88);
    for (x, y) in a.net.iter().zip(&b.net) {
        assert_eq!(x + y, 0.0);
    }
}

#[test]
fn q_forward_payoff_by_hand() {
    // Definition: payoff N (q_fixed − q), q_fixed = q_central (1 − premium), paid at the end
    // of the maturity year. 2030 from 2026 settles at t = 5.
    let q = QForwardTerms {
        name: "q".into(),
        sex: Sex::F,
        age: 70,
        maturity: 2030,
        premium: 0.05,
        side: Side::Hedger,
    };
    assert_eq!(q.settlement_years(2026), 5.0);
    let v = q.settlement_discount(&flat(0.04), 2026);
    assert!(close(v, 1.04f64.powi(-5), 1e-15));
    let reference = ReferenceRates {
        central: 0.02,
        realised: vec![0.018, 0.021],
    };
    let values = q.values(1000.0, &reference, v);
    // q_fixed = 0.019: payoffs 1000 · 0.001 v and 1000 · (−0.002) v.
    assert!(close(values.net[0], 1.0 * v, 1e-12));
    assert!(close(values.net[1], -2.0 * v, 1e-12));
    assert!(close(values.fixed_leg, 19.0 * v, 1e-12));
}

#[test]
fn hedge_ratio_recovers_a_linear_exposure() {
    // Closed form: if PV = a − b q exactly, Cov(PV, q) = −b Var(q) and the minimum-variance
    // notional of a payoff paid at v is b / v, which leaves no variance at all.
    let realised: Vec<f64> = (0..50)
        .map(|s| 0.03 + 0.002 * ((s * 37 % 50) as f64 / 50.0 - 0.5))
        .collect();
    let (a, b, v) = (1.0e6, 4.0e6, 0.8);
    let pv: Vec<f64> = realised.iter().map(|q| a - b * q).collect();
    let n = hedge_ratio(&pv, &realised, v).unwrap();
    assert!(close(n, b / v, 1e-9), "{n}");
    let q = QForwardTerms {
        name: "q".into(),
        sex: Sex::M,
        age: 80,
        maturity: 2030,
        premium: 0.0,
        side: Side::Hedger,
    };
    let reference = ReferenceRates {
        central: 0.03,
        realised,
    };
    let values = q.values(n, &reference, v);
    let e = effectiveness(&pv, a - b * 0.03, &values.net, values.net_central, &[0.995]);
    assert!(e.sd_hedged < 1e-9 * e.sd_unhedged, "{e:?}");
    assert!(e.variance_reduction_pct.unwrap() > 99.999);
    // No variation in the rate: no ratio.
    assert_eq!(hedge_ratio(&pv, &[0.03; 50], v), None);
}

#[test]
fn effectiveness_by_hand_count() {
    // PVs 1..=100 with BE 50: type-7 VaR at 0.99 is 1 + 99 · 0.99 = 99.01, TVaR the mean of
    // {100} (hand count). A hedge paying PV − 50 leaves 50 everywhere: no capital.
    let pv: Vec<f64> = (1..=100).map(f64::from).collect();
    let net: Vec<f64> = pv.iter().map(|p| p - 50.0).collect();
    let e = effectiveness(&pv, 50.0, &net, 0.0, &[0.99]);
    let t = &e.tails[0];
    assert!(close(t.var_unhedged, 99.01, 1e-14));
    assert_eq!(t.tvar_unhedged, 100.0);
    assert!(close(t.capital_unhedged, 49.01, 1e-14));
    assert_eq!(t.var_hedged, 50.0);
    assert_eq!(t.capital_hedged, 0.0);
    assert_eq!(t.capital_reduction_pct, Some(100.0));
    // A hedge costing 2 on the central path raises the hedged BE by 2.
    let shifted: Vec<f64> = net.iter().map(|n| n - 2.0).collect();
    let e = effectiveness(&pv, 50.0, &shifted, -2.0, &[0.99]);
    assert_eq!(e.best_estimate_hedged, 52.0);
    assert_eq!(e.tails[0].capital_hedged, 0.0);
}

const CONFIG: &str = r#"
[data]
experience = "e.csv"
book = "b.csv"
ages = [60, 100]
years = [2000, 2024]

[projection]
horizon = 60

[hedge]
cost_of_capital = 0.06

[[hedge.swap]]
name = "given"
term = 2
premium = 0.02
share = 0.5

[[hedge.swap]]
name = "priced"

[[hedge.swap]]
name = "sharpe"
premium = "sharpe"
side = "provider"

[[hedge.qforward]]
sex = "F"
age = 70
maturity = 2027
premium = 0.1

[[hedge.qforward]]
name = "fixed-notional"
sex = "F"
age = 70
maturity = 2027
notional = 1000
"#;

#[test]
fn evaluate_prices_every_contract_and_lays_out_rows() {
    let config = Config::parse(CONFIG, Path::new("c.toml")).unwrap();
    let hedge = config.hedge.clone().unwrap();
    assert_eq!(hedge.reference_cells(), vec![(Sex::F, 70, 2027); 2]);
    let central = scenario(&[100.0, 90.0, 75.0], 250.0);
    let scenarios: Vec<ScenarioValue> = (0..40)
        .map(|s| {
            let x = (s as f64 - 19.5) / 20.0;
            scenario(
                &[100.0 + x, 90.0 + 2.0 * x, 75.0 + 3.0 * x],
                250.0 + 5.0 * x,
            )
        })
        .collect();
    let references = vec![
        ReferenceRates {
            central: 0.02,
            realised: (0..40).map(|s| 0.02 - 0.0001 * (s as f64 - 19.5)).collect(),
        };
        2
    ];
    let curve = flat(0.03);
    let sample = BookResults {
        central: &central,
        scenarios: &scenarios,
    }
    .sample(&hedge, &curve)
    .unwrap();
    let inputs = HedgeInputs {
        book: &sample,
        curve: &curve,
        valuation_year: config.valuation_year(),
        references: &references,
        levels: &config.capital.levels,
    };
    let results = evaluate(&hedge, &inputs).unwrap();
    let names: Vec<&str> = results.values.iter().map(|(n, _)| n.as_str()).collect();
    assert_eq!(
        names,
        ["given", "priced", "sharpe", "qforward-1", "fixed-notional"]
    );
    let ContractSummary::Swap(given) = &results.summary.contracts[0] else {
        panic!("a swap first")
    };
    assert_eq!(given.covered_years, 2);
    assert_eq!(given.applied.rate, 0.02);
    assert!(close(
        given.applied.amount,
        0.02 * given.fixed_leg_at_zero,
        1e-12
    ));
    let ContractSummary::Swap(priced) = &results.summary.contracts[1] else {
        panic!("a swap second")
    };
    assert_eq!(priced.applied, priced.cost_of_capital.premium);
    assert!(priced.cost_of_capital.premium.rate > 0.0);
    let ContractSummary::QForward(qf) = &results.summary.contracts[3] else {
        panic!("a q-forward fourth")
    };
    // PV falls as q rises (5 per 1/20 of the range): the ratio is positive.
    assert!(qf.hedge_ratio.unwrap() > 0.0);
    assert_eq!(Some(qf.notional), qf.hedge_ratio);
    assert!(close(qf.fixed_rate, 0.018, 1e-12));
    assert_eq!(qf.settlement_years, 3.0);

    let table = results.table(&(100..140).collect::<Vec<u64>>()).unwrap();
    assert_eq!(table.scenario.len(), 5 * 40);
    assert_eq!(table.contract[40], "priced");
    assert_eq!(table.scenario[41], 101);
    assert_eq!(table.net[41], results.values[1].1.net[1]);
    assert!(results.table(&[0, 1]).is_err());
    assert_eq!(
        HEDGE_COLUMNS,
        ["scenario", "contract", "fixed_leg", "floating_leg", "net"]
    );

    let json = serde_json::to_value(&results.summary).unwrap();
    assert_eq!(json["contracts"][0]["kind"], "swap");
    assert_eq!(json["contracts"][3]["kind"], "qforward");
    assert_eq!(json["contracts"][2]["side"], "provider");
    assert_eq!(json["contracts"][1]["term_years"], serde_json::Value::Null);

    // Reference rates must line up with the configured q-forwards.
    let short = HedgeInputs {
        references: &references[..1],
        ..inputs
    };
    assert!(evaluate(&hedge, &short).is_err());
}

#[test]
fn hedge_ratio_notional_needs_a_varying_rate() {
    let config = Config::parse(CONFIG, Path::new("c.toml")).unwrap();
    let hedge = config.hedge.unwrap();
    let central = scenario(&[100.0, 90.0, 75.0], 250.0);
    let scenarios = vec![central.clone(); 4];
    let references = vec![
        ReferenceRates {
            central: 0.02,
            realised: vec![0.02; 4],
        };
        2
    ];
    let curve = flat(0.03);
    let sample = BookResults {
        central: &central,
        scenarios: &scenarios,
    }
    .sample(&hedge, &curve)
    .unwrap();
    let err = evaluate(
        &hedge,
        &HedgeInputs {
            book: &sample,
            curve: &curve,
            valuation_year: 2025,
            references: &references,
            levels: &[0.995],
        },
    )
    .unwrap_err()
    .to_string();
    assert!(err.contains("hedge.qforward[0].notional"), "{err}");
}

#[test]
fn reference_cells_are_read_from_each_scenario_or_refused() {
    let config = Config::parse(CONFIG, Path::new("c.toml")).unwrap();
    let cells = ReferenceCells::of(config.hedge.as_ref().unwrap());
    // Ages 60–62, years 2026–2027, row-major by year.
    let q = [0.01, 0.02, 0.03, 0.011, 0.021, 0.031];
    let surface = |first_age| RateSurface {
        first_year: 2026,
        first_age,
        ages: 3,
        q: &q,
    };
    // The config's q-forwards settle on q(70, 2027) for F: age 70 is column 1 from 69.
    let row = cells.read(&[Some(surface(69)), None]).unwrap();
    assert_eq!(row, [0.021, 0.021]);
    let err = cells
        .read(&[Some(surface(60)), None])
        .unwrap_err()
        .to_string();
    assert!(err.contains("q(70, 2027)"), "{err}");
    assert!(cells.read(&[None, Some(surface(69))]).is_err());
    let refs = cells
        .assemble(&[0.02, 0.02], &[vec![0.019, 0.019], vec![0.022, 0.022]])
        .unwrap();
    assert_eq!(refs[1].realised, [0.019, 0.022]);
    assert!(cells.assemble(&[0.02], &[]).is_err());
}
