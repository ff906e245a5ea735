//! Computing only the cells a reader takes: each planned cell equals, bit for bit, the
//! whole grid's value in every model kind, every other cell is NaN, and a book valued on
//! its cells gives the figures it gives on whole grids.

use crate::models_support;

use models_support::*;
use rand::{RngExt, SeedableRng};
use rand_chacha::ChaCha8Rng;
use tailspan::data::config::CohortLoading;
use tailspan::data::{Book, Policy, Sex};
use tailspan::interest::{DiscountCurve, Timing};
use tailspan::life::Fractional;
use tailspan::models::{CbdCohortVariant, FittedModel, LeeCarterMethod, MortalityModel};
use tailspan::projection::{CellPlan, Projector, Settings, Uncertainty};
use tailspan::valuation::driver::{DriverSettings, Extracts, value_in_scenario};
use tailspan::valuation::portfolio::NoPolicies;
use tailspan::valuation::{
    Basis, LevelAdjustment, LifetimeTable, LifetimeWorkspace, PreparedBook, ScenarioValue,
    Workspace, value_scenarios,
};

fn projector(fit: Box<dyn FittedModel>, horizon: usize) -> Projector {
    let settings = Settings {
        seed: 11,
        horizon,
        noise: true,
        uncertainty: Uncertainty::Drift,
    };
    Projector::new(vec![(Sex::F, fit)], settings, None).unwrap()
}

fn fits() -> Vec<(&'static str, Box<dyn FittedModel>)> {
    let cohort = load_population("cohort_experience.csv");
    let period = load_population("small_experience.csv");
    let specs: Vec<(&str, Box<dyn MortalityModel>, bool)> = vec![
        (
            "lee-carter",
            Box::new(lee_carter(LeeCarterMethod::Poisson, false)),
            false,
        ),
        ("cbd", Box::new(cbd()), false),
        ("apc", Box::new(apc()), true),
        (
            "renshaw-haberman",
            Box::new(renshaw_haberman(CohortLoading::Unit)),
            true,
        ),
        ("m6", Box::new(cbd_cohort(CbdCohortVariant::M6)), true),
        ("m7", Box::new(cbd_cohort(CbdCohortVariant::M7)), true),
    ];
    specs
        .into_iter()
        .map(|(name, spec, cohort_data)| {
            let data = if cohort_data { &cohort } else { &period };
            (name, spec.fit(data).unwrap())
        })
        .collect()
}

/// Plans a reader might make: cohort diagonals, a lone cell, period rows, mixtures.
fn plans(p: &Projector) -> Vec<CellPlan> {
    let (ages, years) = (p.ages(), p.years());
    let mut out = Vec::new();
    let mut rng = ChaCha8Rng::seed_from_u64(5);
    for _ in 0..6 {
        let mut plan = p.no_cells();
        for _ in 0..rng.random_range(1..6) {
            let age = rng.random_range(ages.first..=ages.last);
            let year = rng.random_range(years.first..=years.last);
            match rng.random_range(0..3) {
                0 => plan.add_cohort(Sex::F, age, year),
                1 => plan.add_cell(Sex::F, age, year),
                _ => plan.add_ages_from(age),
            }
        }
        out.push(plan);
    }
    let mut band = p.no_cells();
    for age in ages.first..ages.first + 20 {
        band.add_cohort(Sex::F, age, years.first + 1);
    }
    out.push(band);
    out.push(p.no_cells());
    out
}

#[test]
fn every_kind_computes_each_planned_cell_as_the_whole_grid_does() {
    for (name, fit) in fits() {
        let p = projector(fit, 40);
        let mut whole = p.buffer();
        let mut some = p.buffer();
        for plan in plans(&p) {
            some.set_cells(&plan);
            for scenario in [0, 1, 7] {
                p.generate(scenario, &mut whole).unwrap();
                p.generate(scenario, &mut some).unwrap();
                let n = p.ages().len();
                for (h, (a, b)) in whole
                    .rates(0)
                    .chunks(n)
                    .zip(some.rates(0).chunks(n))
                    .enumerate()
                {
                    let cells = plan.cells(0, h);
                    for i in 0..n {
                        if cells.contains(&i) {
                            assert_eq!(a[i].to_bits(), b[i].to_bits(), "{name}: row {h}, age {i}");
                        } else {
                            assert!(b[i].is_nan(), "{name}: row {h}, age {i} outside the plan");
                        }
                    }
                }
            }
        }
        assert!(!plans(&p).iter().any(CellPlan::is_full));
    }
}

/// A small book of every age 60–90 with some multipliers, guarantees and escalation.
fn book() -> Book {
    let policies = (0..62)
        .map(|i| {
            let mut p = Policy::whole_life(format!("P{i}"), Sex::F, 60 + (i % 31), 1_000.0);
            p.mortality_factor = [1.0, 0.8][i as usize / 31];
            p.guarantee = [0, 5][i as usize % 2];
            p.escalation = [0.0, 0.02][i as usize % 3 / 2];
            p.weight = 3.0;
            p
        })
        .collect();
    Book {
        source: "cells".into(),
        policies,
    }
}

#[test]
fn a_book_valued_on_its_cells_gives_the_whole_grids_figures() {
    let fit = lee_carter(LeeCarterMethod::Poisson, false)
        .fit(&load_population("small_experience.csv"))
        .unwrap();
    // Long enough for the youngest life (60 in the second projected year) to reach 120.
    let p = projector(fit, 62);
    let (ages, years) = (p.ages(), p.years());
    let year = years.first + 1;
    let basis = Basis {
        timing: Timing::Advance,
        frequency: 12,
        curve: DiscountCurve::Flat { rate_pa: 0.03 },
    };
    let book = book();
    let level = LevelAdjustment::none(ages.first, ages.last);
    let prepared = PreparedBook::new(
        &book,
        &basis,
        level.clone(),
        year,
        ages.first,
        ages.last,
        years.last,
    )
    .unwrap();
    let lifetimes = LifetimeTable::new(
        &book,
        &[10, 20],
        &basis,
        level,
        Fractional::Udd,
        year,
        ages.last,
    );
    let settings = DriverSettings {
        seed: 11,
        idiosyncratic: true,
        book_rates: None,
        index_cash: false,
    };
    let extracts = Extracts {
        probes: vec![(Sex::F, 70, year + 3), (Sex::F, ages.first, years.last)],
        every_scenario: 1,
        period: true,
        charts_end: 3,
    };
    let mut results = Vec::new();
    value_scenarios(
        &p,
        &prepared,
        Some(&lifetimes),
        0..6,
        settings,
        &extracts,
        |chunk| {
            results.extend_from_slice(chunk);
            Ok(())
        },
    )
    .unwrap();
    assert_eq!(results.len(), 6);
    // The reference: every scenario's whole grid, valued and read directly.
    let mut paths = p.buffer();
    let (mut ws, mut book_buffers) = (Workspace::default(), Default::default());
    let mut lifetime_ws = LifetimeWorkspace::default();
    for r in &results {
        let mut value = ScenarioValue::default();
        value_in_scenario(
            &p,
            &prepared,
            settings,
            r.scenario,
            (&mut paths, &mut ws, &mut book_buffers),
            &mut value,
            &mut NoPolicies,
        )
        .unwrap();
        assert!(paths.cells().is_full());
        assert_eq!(r.value.pv_expected.to_bits(), value.pv_expected.to_bits());
        assert_eq!(r.value.pv_simulated.to_bits(), value.pv_simulated.to_bits());
        assert_eq!(r.value.cash_expected, value.cash_expected);
        assert_eq!(r.value.cash_simulated, value.cash_simulated);
        let mut rows = Vec::new();
        lifetimes
            .compute(&paths.surfaces(), None, &mut lifetime_ws, &mut rows)
            .unwrap();
        assert_eq!(r.lifetimes, rows);
        let charted = r.scenario < 3;
        let probes: Vec<f64> = extracts.probes[..if charted { 2 } else { 1 }]
            .iter()
            .map(|&(_, age, y)| paths.q(0, y, age).unwrap())
            .collect();
        assert_eq!(r.probes, probes);
        assert_eq!(r.period.len(), if charted { years.len() } else { 0 });
        for (e, y) in r.period.iter().zip(years.iter()) {
            let row = paths.year_rates(0, y).unwrap();
            let from = ages.index(65).unwrap();
            let expected = tailspan::projection::period::complete_expectancy(&row[from..]);
            assert_eq!(e.to_bits(), expected.to_bits());
        }
    }
}
