//! The book's rates under Li–Lee: the population's q times the fitted gap between the two
//! populations (closed form 1 − (1 − q)^exp(gap)), own indices on their expected AR(1)
//! paths, and under a stochastic spread drawn with the fitted innovation correlation.

use nalgebra::DVector;
use tailspan::basis::li_lee::{CommonWalk, Components};
use tailspan::basis::{
    BookBuffers, BookCell, BookRates, LiLeeSex, RelativeFit, ScenarioBasis, Uncertainty,
};
use tailspan::data::{Sex, Span};
use tailspan::projection::RateSurface;
use tailspan::series::Ar1;

const FIRST_AGE: i32 = 60;
const AGES: usize = 4;
const YEARS: Span = Span {
    first: 2015,
    last: 2020,
};

fn ar1(constant: f64, phi: f64, sigma: f64, last: f64) -> Ar1 {
    Ar1 {
        constant,
        phi,
        sigma,
        constant_standard_error: 0.1,
        phi_standard_error: 0.1,
        log_likelihood: 0.0,
        last,
        steps: YEARS.len() - 1,
        residuals: Vec::new(),
    }
}

fn fit() -> LiLeeSex {
    let k1 = [0.1, -0.2, 0.05, 0.0, 0.15, -0.1];
    let k2 = [-0.3, 0.4, 0.1, -0.2, 0.25, 0.5];
    LiLeeSex {
        sex: Sex::F,
        ages: Span::new(FIRST_AGE, FIRST_AGE + AGES as i32 - 1).unwrap(),
        years: YEARS,
        components: Components {
            level: [
                DVector::from_vec(vec![-4.0, -3.9, -3.8, -3.7]),
                DVector::from_vec(vec![-4.2, -4.05, -3.9, -3.75]),
            ],
            common_loading: DVector::from_element(AGES, 0.25),
            common_index: DVector::from_vec(vec![2.5, 1.5, 0.5, -0.5, -1.5, -2.5]),
            own_loading: [
                DVector::from_vec(vec![0.4, 0.3, 0.2, 0.1]),
                DVector::from_vec(vec![0.1, 0.2, 0.3, 0.4]),
            ],
            own_index: [
                DVector::from_vec(k1.to_vec()),
                DVector::from_vec(k2.to_vec()),
            ],
        },
        common: CommonWalk {
            drift: -1.0,
            sigma: 0.1,
            drift_standard_error: 0.05,
        },
        own: [ar1(0.02, 0.5, 0.1, k1[5]), ar1(0.1, 0.8, 0.3, k2[5])],
        correlation: -0.6,
    }
}

fn rates(spread: bool) -> BookRates {
    // The relative fit is reported beside Li–Lee but does not move its rates.
    let cells: Vec<BookCell> = (0..5)
        .flat_map(|j| {
            (0..3).map(move |i| BookCell {
                sex: Sex::F,
                age: 60 + i,
                year: 2016 + j,
                deaths: 20.0 + (i * 3 + j) as f64,
                exposure: 1000.0,
                population_rate: 0.02,
            })
        })
        .collect();
    let relative = RelativeFit::fit(&cells, 61.0).unwrap();
    let uncertainty = Uncertainty {
        level: false,
        spread,
    };
    BookRates::li_lee(relative, vec![fit()], uncertainty, 7).unwrap()
}

#[test]
fn book_q_is_the_population_q_times_the_fitted_gap() {
    let fit = fit();
    let rates = rates(false);
    // Ages 58–65 (two below and two above the fitted ages), years 2019–2023.
    let (first_age, ages, first_year, years) = (58, 8, 2019, 5);
    let q: Vec<f64> = (0..ages * years)
        .map(|c| 0.01 + 0.002 * (c % ages) as f64 + 0.0005 * (c / ages) as f64)
        .collect();
    let surface = RateSurface {
        first_year,
        first_age,
        ages,
        q: &q,
    };
    let mut buffers = BookBuffers::default();
    let book = rates.apply(3, &[Some(surface), None], &mut buffers);
    let book = book[0].as_ref().unwrap();
    // Expected own indices after 2020: E k_{T+h} = c + φ E k_{T+h−1} (closed form).
    let mut k = [fit.own[0].last, fit.own[1].last];
    let mut path = Vec::new();
    for _ in 0..3 {
        k = [
            fit.own[0].constant + fit.own[0].phi * k[0],
            fit.own[1].constant + fit.own[1].phi * k[1],
        ];
        path.push(k);
    }
    let c = &fit.components;
    for y in 0..years {
        let year = first_year + y as i32;
        let k = if year <= 2020 {
            let j = (year - 2015) as usize;
            [c.own_index[0][j], c.own_index[1][j]]
        } else {
            path[(year - 2021) as usize]
        };
        for a in 0..ages {
            // Ages outside the fitted ones hold the end values.
            let r = (first_age + a as i32).clamp(60, 63) as usize - 60;
            let gap = c.level[1][r] - c.level[0][r] + c.own_loading[1][r] * k[1]
                - c.own_loading[0][r] * k[0];
            let expected = 1.0 - (1.0 - q[y * ages + a]).powf(gap.exp());
            let actual = book.q[y * ages + a];
            assert!(
                (actual - expected).abs() < 1e-14,
                "age {}, year {year}: {actual} against {expected}",
                first_age + a as i32
            );
        }
    }
}

#[test]
fn drawn_own_indices_have_the_fitted_mean_and_innovation_correlation() {
    let fit = fit();
    let rates = rates(true);
    let (mut draw, mut shocks) = (ScenarioBasis::default(), Vec::new());
    // Scenario 0 keeps the expected paths even when the spread is drawn.
    rates.draw(rates.uncertainty(), 0, 2060, &mut draw, &mut shocks);
    let central = draw.own[0].clone();
    let mut expected = [Vec::new(), Vec::new()];
    for (i, ar) in fit.own.iter().enumerate() {
        expected[i] = vec![0.0; 40];
        ar.central_into(&mut expected[i]);
    }
    assert_eq!(central, expected);

    let n = 4000;
    let (mut s11, mut s22, mut s12, mut late) = (0.0, 0.0, 0.0, 0.0);
    for scenario in 1..=n {
        rates.draw(rates.uncertainty(), scenario, 2060, &mut draw, &mut shocks);
        let [k1, k2] = &draw.own[0];
        // The first year's standardised innovations.
        let e1 = (k1[0] - fit.own[0].step(fit.own[0].last, 0.0)) / fit.own[0].sigma;
        let e2 = (k2[0] - fit.own[1].step(fit.own[1].last, 0.0)) / fit.own[1].sigma;
        s11 += e1 * e1;
        s22 += e2 * e2;
        s12 += e1 * e2;
        late += k2[39];
        // The report's fan reads the first sex's book-population index.
        assert_eq!(draw.spread, *k2);
    }
    let n = n as f64;
    let correlation = s12 / (s11 * s22).sqrt();
    // Sample correlation of n normal pairs: s.e. ≈ (1 − ρ²)/√n (closed form).
    let se = (1.0 - 0.36) / n.sqrt();
    assert!((correlation + 0.6).abs() < 4.0 * se, "{correlation}");
    assert!((s11 / n - 1.0).abs() < 4.0 * (2.0 / n).sqrt());
    // 40 years on, k is near its stationary law: mean c / (1 − φ), variance
    // σ² / (1 − φ²) (closed form), so the mean of n draws has that variance over n.
    let (c, phi, sigma) = (fit.own[1].constant, fit.own[1].phi, fit.own[1].sigma);
    let se = (sigma * sigma / (1.0 - phi * phi) / n).sqrt();
    assert!(
        (late / n - c / (1.0 - phi)).abs() < 4.0 * se,
        "{} against {}",
        late / n,
        c / (1.0 - phi)
    );
}
