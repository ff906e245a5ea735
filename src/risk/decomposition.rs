//! Run-off capital taken apart by source when the book has its own basis: the population's
//! trend, the book's level (α0, α1 estimation error), its spread κ_t and individual deaths.
//!
//! Every figure comes from the same scenarios (common random numbers): scenario s takes
//! the same population path, the same level draw and the same spread path in each measure
//! that includes them, so the differences between measures are the added risks, not
//! sampling noise. Cumulative measures add one source at a time: trend; trend + level;
//! trend + level + spread; all with idiosyncratic risk. Standalone measures take one
//! source on the central population path (scenario 0's rates): level alone, spread alone,
//! idiosyncratic alone (trend alone is the first cumulative one). The diversification is
//! the sum of the standalone capitals less the capital with every source together.

use std::ops::Range;

use rayon::prelude::*;
use serde::Serialize;

use crate::basis::{BookBuffers, BookRates, Uncertainty};
use crate::error::{Error, Result};
use crate::projection::{Projector, Purpose, ScenarioPaths, stream};
use crate::risk::CapitalSummary;
use crate::valuation::{Extracts, PreparedBook, ScenarioCells, ScenarioValue, Workspace};

/// Measures valued per scenario, in this order.
const MEASURES: [&str; 7] = [
    "trend",
    "trend_level",
    "trend_level_spread",
    "all",
    "level",
    "spread",
    "idiosyncratic",
];

/// Run-off capital of one measure at one level.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct MeasureCapital {
    /// Which sources the measure includes (`trend`, `trend_level`, …).
    pub measure: &'static str,
    /// Run-off capital VaR − BE at each configured level, in the levels' order.
    pub capital: Vec<f64>,
}

/// `summary.json` → `decomposition`.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Decomposition {
    /// Confidence levels of the capitals.
    pub levels: Vec<f64>,
    /// Stochastic scenarios the figures rest on (common to every measure).
    pub scenarios: usize,
    /// Best estimate all capitals are measured from (the book's own rates, central path).
    pub best_estimate: f64,
    /// Trend; trend + level; trend + level + spread; all with idiosyncratic risk.
    pub cumulative: Vec<MeasureCapital>,
    /// Level, spread and idiosyncratic risk each alone on the central population path.
    pub standalone: Vec<MeasureCapital>,
    /// Σ standalone capitals (trend among them) − capital of all together, per level.
    pub diversification: Vec<f64>,
    /// Whether the basis draws a level at all: false under Li–Lee, whose level is estimated
    /// from a large population and not drawn, so `trend_level` equals `trend` and `level`
    /// is zero by construction.
    pub level_modelled: bool,
}

/// Values the book under every measure in scenarios `ids` (stochastic, > 0) and returns
/// the decomposition at `levels` around `best_estimate`.
pub fn decompose(
    projector: &Projector,
    book: &PreparedBook,
    rates: &BookRates,
    seed: u64,
    ids: Range<u64>,
    best_estimate: f64,
    levels: &[f64],
) -> Result<Decomposition> {
    if ids.start == 0 || ids.is_empty() {
        return Err(Error::model(
            "decomposition",
            "needs stochastic scenarios (numbered from 1)",
        ));
    }
    let with = |level, spread| rates.with_uncertainty(Uncertainty { level, spread });
    let variants = [
        with(false, false),
        with(true, false),
        with(true, true),
        with(true, false),
        with(false, true),
    ];
    // Each measure reads the book's diagonals only (of the population's rates, then of
    // the book's made from them).
    let cells = ScenarioCells::new(projector, book, None, &Extracts::default());
    let mut central = projector.buffer();
    central.set_cells(cells.every());
    projector.generate(0, &mut central)?;
    let central = &central;
    let values = ids
        .clone()
        .into_par_iter()
        .map_init(
            || {
                let mut paths = projector.buffer();
                paths.set_cells(cells.every());
                (
                    paths,
                    Workspace::default(),
                    BookBuffers::default(),
                    ScenarioValue::default(),
                )
            },
            |(paths, ws, buffers, value), scenario| -> Result<[f64; 7]> {
                projector.generate(scenario, paths)?;
                let mut out = [0.0; 7];
                let mut measure =
                    |paths: &ScenarioPaths, rates: &BookRates, deaths: bool| -> Result<f64> {
                        let surfaces = rates.apply(scenario, &paths.surfaces(), buffers);
                        book.build_curves(&surfaces, ws)?;
                        if deaths {
                            let mut rng = stream(seed, scenario, Purpose::Deaths);
                            book.value(ws, Some(&mut rng), value);
                            Ok(value.pv_simulated)
                        } else {
                            book.value::<rand_chacha::ChaCha8Rng>(ws, None, value);
                            Ok(value.pv_expected)
                        }
                    };
                out[0] = measure(paths, &variants[0], false)?;
                out[1] = measure(paths, &variants[1], false)?;
                out[2] = measure(paths, &variants[2], false)?;
                out[3] = measure(paths, &variants[2], true)?;
                out[4] = measure(central, &variants[3], false)?;
                out[5] = measure(central, &variants[4], false)?;
                out[6] = measure(central, &variants[0], true)?;
                Ok(out)
            },
        )
        .collect::<Result<Vec<_>>>()?;
    let capitals: Vec<Vec<f64>> = (0..MEASURES.len())
        .map(|m| {
            let column: Vec<f64> = values.iter().map(|v| v[m]).collect();
            CapitalSummary::new(&column, best_estimate, levels)
                .tails
                .iter()
                .map(|t| t.capital)
                .collect()
        })
        .collect();
    let record = |m: usize| MeasureCapital {
        measure: MEASURES[m],
        capital: capitals[m].clone(),
    };
    let diversification = (0..levels.len())
        .map(|l| capitals[0][l] + capitals[4][l] + capitals[5][l] + capitals[6][l] - capitals[3][l])
        .collect();
    Ok(Decomposition {
        levels: levels.to_vec(),
        scenarios: values.len(),
        best_estimate,
        cumulative: (0..4).map(record).collect(),
        standalone: (4..7).map(record).collect(),
        diversification,
        level_modelled: rates.li_lee_fits().is_none(),
    })
}
