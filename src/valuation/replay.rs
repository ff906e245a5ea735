//! Each policy's value in one scenario, by valuing that scenario again on its own.
//!
//! Every random draw of a scenario comes from streams keyed by (seed, scenario), so a
//! scenario valued again alone gives the figures it gave in the run. Capital allocation
//! needs each policy's PV in the few tail scenarios, not in all of them: rather than keep
//! policies × scenarios numbers, it replays the tail. The replay goes through the book's
//! own valuation loop ([`PreparedBook::value_policies`]), which hands each policy's pieces
//! to a [`PolicySink`] where it adds them to the book's total: the draws and the products
//! are the book's, only the order of the final additions differs.

use crate::basis::BookBuffers;
use crate::data::Book;
use crate::error::{Error, Result};
use crate::projection::{Projector, ScenarioPaths};
use crate::valuation::driver::{DriverSettings, value_in_scenario};
use crate::valuation::portfolio::{PolicySink, PreparedBook, ScenarioValue, Workspace};

/// Each policy's PV in one scenario, in book order.
#[derive(Debug, Clone, Default, PartialEq)]
pub struct PolicyValues {
    /// Scenario number.
    pub scenario: u64,
    /// Expected PV given the scenario's path (trend risk only).
    pub expected: Vec<f64>,
    /// PV with each life's death simulated; empty when deaths are not simulated.
    pub simulated: Vec<f64>,
    /// The book's totals, as the run computed them.
    pub book: ScenarioValue,
}

/// What replays a book's scenarios policy by policy.
#[derive(Debug, Clone)]
pub struct PolicyReplay<'a> {
    projector: &'a Projector,
    prepared: &'a PreparedBook,
    settings: DriverSettings<'a>,
    /// Amount × weight of each policy, in book order.
    totals: Vec<f64>,
}

/// Buffers of one thread's replays.
pub struct ReplayBuffers {
    paths: ScenarioPaths,
    book: Workspace,
    book_rates: BookBuffers,
    block_pv: Vec<f64>,
}

/// The sink that spreads the book's pieces over its policies.
struct Spread<'a> {
    prepared: &'a PreparedBook,
    block_pv: &'a mut [f64],
    simulated: &'a mut [f64],
}

impl PolicySink for Spread<'_> {
    fn block(&mut self, block: usize, pv_per_amount: f64) {
        self.block_pv[block] = pv_per_amount;
    }

    fn life(&mut self, life: usize, pv: f64) {
        self.simulated[self.prepared.life_policies()[life] as usize] += pv;
    }

    fn certain(&mut self, lives: std::ops::Range<usize>, certain_pv: f64) {
        let policies = &self.prepared.life_policies()[lives.clone()];
        for (&p, &amount) in policies.iter().zip(&self.prepared.life_amounts()[lives]) {
            self.simulated[p as usize] += amount * certain_pv;
        }
    }
}

impl<'a> PolicyReplay<'a> {
    /// Replays of `book`, prepared as `prepared`, in `projector`'s scenarios as the run
    /// valued them (`settings`: its seed and whether deaths are simulated).
    pub fn new(
        book: &Book,
        prepared: &'a PreparedBook,
        projector: &'a Projector,
        settings: DriverSettings<'a>,
    ) -> Result<Self> {
        if book.policies.len() != prepared.policy_blocks().len() {
            return Err(Error::model(
                "allocation",
                format!(
                    "the book has {} policies but {} were prepared",
                    book.policies.len(),
                    prepared.policy_blocks().len()
                ),
            ));
        }
        Ok(PolicyReplay {
            projector,
            prepared,
            settings,
            totals: book.policies.iter().map(|p| p.amount * p.weight).collect(),
        })
    }

    /// Policies in the book.
    pub fn policies(&self) -> usize {
        self.totals.len()
    }

    /// Whether the run simulated each life's death.
    pub fn simulated(&self) -> bool {
        self.settings.idiosyncratic
    }

    /// Fresh buffers for one thread.
    pub fn buffers(&self) -> ReplayBuffers {
        ReplayBuffers {
            paths: self.projector.buffer(),
            book: Workspace::default(),
            book_rates: BookBuffers::default(),
            block_pv: vec![0.0; self.prepared.blocks()],
        }
    }

    /// Values scenario `scenario` again, policy by policy, into `out`.
    pub fn replay(
        &self,
        scenario: u64,
        buffers: &mut ReplayBuffers,
        out: &mut PolicyValues,
    ) -> Result<()> {
        let n = self.totals.len();
        out.scenario = scenario;
        out.simulated.clear();
        if self.settings.idiosyncratic {
            out.simulated.resize(n, 0.0);
        }
        let mut spread = Spread {
            prepared: self.prepared,
            block_pv: &mut buffers.block_pv,
            simulated: &mut out.simulated,
        };
        value_in_scenario(
            self.projector,
            self.prepared,
            self.settings,
            scenario,
            (
                &mut buffers.paths,
                &mut buffers.book,
                &mut buffers.book_rates,
            ),
            &mut out.book,
            &mut spread,
        )?;
        // The block's PV per unit amount times the policy's amount: the product the book
        // takes for the block's summed amount.
        let blocks = self.prepared.policy_blocks();
        out.expected.clear();
        out.expected.extend(
            self.totals
                .iter()
                .zip(blocks)
                .map(|(&total, &b)| total * buffers.block_pv[b as usize]),
        );
        Ok(())
    }
}
