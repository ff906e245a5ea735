//! Payment schedules: the scenario-independent half of every annuity value.
//!
//! A policy's payments (timing, frequency, deferral, term, guarantee, escalation and
//! discounting) do not depend on the mortality scenario, so they are reduced once per
//! distinct policy shape to a few vectors over policy years. Each scenario then only
//! supplies survival probabilities, and the expected value of year k's payments is
//! `S_k (A_k − B_k q_k)`: under UDD a payment at k + f is received with probability
//! `S_k (1 − f q_k)`, so A_k sums the year's discounted contingent payments and B_k the same
//! weighted by f. The same shape gives prefix sums over payments for the simulation of
//! individual deaths, where a life dying at T receives exactly the payments due before T.

use crate::data::Policy;
use crate::interest::{DiscountCurve, Timing};

/// The valuation basis shared by every policy.
#[derive(Debug, Clone, PartialEq)]
pub struct Basis {
    /// Payments at the start or end of each 1/m period.
    pub timing: Timing,
    /// Payments a year, m.
    pub frequency: u32,
    /// Discounting.
    pub curve: DiscountCurve,
}

/// The parts of a policy that fix its payment times and amounts per unit of annual amount.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash, PartialOrd, Ord)]
pub struct PaymentShape {
    /// Whole years to the first payment.
    pub deferral: u32,
    /// Whole years of payment; `None` is whole life.
    pub term: Option<u32>,
    /// Whole years certain from the first payment.
    pub guarantee: u32,
    /// Escalation rate as its IEEE-754 bits (so shapes can be hashed and sorted).
    pub escalation_bits: u64,
}

impl PaymentShape {
    /// The shape of `policy`.
    pub fn of(policy: &Policy) -> Self {
        PaymentShape {
            deferral: policy.deferral,
            term: policy.term,
            guarantee: policy.guarantee,
            escalation_bits: policy.escalation.to_bits(),
        }
    }

    /// The escalation rate.
    pub fn escalation(&self) -> f64 {
        f64::from_bits(self.escalation_bits)
    }
}

/// A shape reduced to vectors over policy years `k = 0 .. years`, per unit annual amount.
#[derive(Debug, Clone, PartialEq)]
pub struct Schedule {
    /// Policy years covered (payments beyond are impossible: q = 1 at `max_age`).
    pub years: usize,
    /// Present value of the guaranteed payments (paid whatever happens).
    pub certain_pv: f64,
    /// A_k: discounted contingent payments falling in year k.
    pub pv_level: Vec<f64>,
    /// B_k: the same, each weighted by its fraction f of the year.
    pub pv_slope: Vec<f64>,
    /// Undiscounted guaranteed payments in year k.
    pub certain_cash: Vec<f64>,
    /// Undiscounted contingent payments in year k.
    pub cash_level: Vec<f64>,
    /// The same, each weighted by f.
    pub cash_slope: Vec<f64>,
    /// Payments a year.
    pub frequency: f64,
    /// 1 in arrears (the first payment of a year falls 1/m into it), 0 in advance.
    pub arrears_offset: i32,
    /// Prefix sums of discounted contingent payments: entry j covers payments 0..j.
    pub pv_prefix: Vec<f64>,
    /// Prefix sums of undiscounted contingent payments: entry j covers payments 0..j.
    pub cash_prefix: Vec<f64>,
    /// Index of the first payment of each policy year (length `years + 1`).
    pub year_start: Vec<u32>,
}

impl Schedule {
    /// Reduces `shape` on `basis` over `years` policy years.
    pub fn new(shape: &PaymentShape, basis: &Basis, years: usize) -> Self {
        let m = basis.frequency.max(1);
        let mf = f64::from(m);
        let escalation = shape.escalation();
        let d = f64::from(shape.deferral);
        let first_time = match basis.timing {
            Timing::Advance => d,
            Timing::Arrears => d + 1.0 / mf,
        };
        // Payments run to the end of the term, or to the end of the covered years.
        let payment_years = match shape.term {
            Some(n) => (n as usize).min(years.saturating_sub(shape.deferral as usize)),
            None => years.saturating_sub(shape.deferral as usize),
        };
        let n_payments = payment_years * m as usize;
        let guaranteed = (shape.guarantee as usize * m as usize).min(n_payments);

        let mut s = Schedule {
            years,
            certain_pv: 0.0,
            pv_level: vec![0.0; years],
            pv_slope: vec![0.0; years],
            certain_cash: vec![0.0; years],
            cash_level: vec![0.0; years],
            cash_slope: vec![0.0; years],
            frequency: mf,
            arrears_offset: i32::from(basis.timing == Timing::Arrears),
            pv_prefix: Vec::with_capacity(n_payments + 1),
            cash_prefix: Vec::with_capacity(n_payments + 1),
            year_start: vec![0; years + 1],
        };
        s.pv_prefix.push(0.0);
        s.cash_prefix.push(0.0);
        let (mut pv_sum, mut cash_sum) = (0.0, 0.0);
        for j in 0..n_payments {
            let t = first_time + j as f64 / mf;
            // Policy year k and fraction f: [k, k+1) in advance, (k, k+1] in arrears.
            let k = match basis.timing {
                Timing::Advance => t.floor(),
                Timing::Arrears => t.ceil() - 1.0,
            };
            let f = t - k;
            let k = k as usize;
            let cash = escalation_factor(escalation, t) / mf;
            let pv = cash * basis.curve.discount(t);
            if j < guaranteed {
                s.certain_pv += pv;
                s.certain_cash[k] += cash;
            } else {
                s.pv_level[k] += pv;
                s.pv_slope[k] += pv * f;
                s.cash_level[k] += cash;
                s.cash_slope[k] += cash * f;
                pv_sum += pv;
                cash_sum += cash;
            }
            s.pv_prefix.push(pv_sum);
            s.cash_prefix.push(cash_sum);
        }
        // year_start[k]: number of payments falling before policy year k.
        let mut j = 0usize;
        for k in 0..=years {
            while j < n_payments {
                let t = first_time + j as f64 / mf;
                let before = match basis.timing {
                    Timing::Advance => t < k as f64,
                    Timing::Arrears => t <= k as f64,
                };
                if !before {
                    break;
                }
                j += 1;
            }
            s.year_start[k] = j as u32;
        }
        s
    }

    /// Number of payments made to a life that dies at time k + f (0 < f < 1; f = 0 has
    /// probability zero and counts as just after k): those due strictly before death.
    ///
    /// Deferral and term are whole years, so policy year k holds either no payment or all m
    /// of them, at k + j/m in advance or k + (j+1)/m in arrears; the count within the year
    /// is then ⌈f m⌉ in advance and ⌈f m⌉ − 1 in arrears.
    pub fn payments_before(&self, k: usize, f: f64) -> usize {
        let x = f * self.frequency;
        let whole = x as i32;
        self.payments_in_year(k, whole + i32::from(f64::from(whole) < x))
    }

    /// Payments made to a life dying in year k after ⌈f m⌉ = `ceil` of the year's 1/m
    /// periods have begun (see [`Self::payments_before`]).
    fn payments_in_year(&self, k: usize, ceil: i32) -> usize {
        let start = self.year_start[k] as usize;
        let in_year = self.year_start[k + 1] as usize - start;
        start + ((ceil - self.arrears_offset).max(0) as usize).min(in_year)
    }

    /// What a life receives for each death time, by policy year k and ⌈f m⌉: the table the
    /// simulation of deaths reads.
    pub fn payouts(&self) -> PayoutTable {
        // A schedule's frequency is a whole m ≥ 1 (`Schedule::new`).
        let m = self.frequency as usize;
        let periods = m + 1;
        let mut entries = Vec::with_capacity(self.years * periods);
        for k in 0..self.years {
            let year_start = self.cash_prefix[self.year_start[k] as usize];
            for ceil in 0..periods {
                let paid = self.payments_in_year(k, ceil as i32);
                entries.push(Payout {
                    pv: self.pv_prefix[paid],
                    cash_in_year: self.cash_prefix[paid] - year_start,
                });
            }
        }
        PayoutTable {
            years: self.years,
            periods,
            frequency: m as f64,
            entries,
        }
    }

    /// Expected present value per unit amount given survival `survival[k] = k p x` and
    /// rates `q[k]`, k < `q.len()` (the cohort's remaining years).
    #[inline]
    pub fn expected_pv(&self, survival: &[f64], q: &[f64]) -> f64 {
        let n = q.len().min(self.years);
        let mut total = self.certain_pv;
        for k in 0..n {
            total += survival[k] * (self.pv_level[k] - self.pv_slope[k] * q[k]);
        }
        total
    }
}

/// What a life dying at one time receives, per unit of its amount.
#[derive(Debug, Clone, Copy, Default, PartialEq)]
pub struct Payout {
    /// Present value of the contingent payments made before death.
    pub pv: f64,
    /// Undiscounted contingent payments made in the year of death, before it.
    pub cash_in_year: f64,
}

/// A schedule's [`Payout`]s for every death time, by policy year k and c = ⌈f m⌉ in 0..=m:
/// one read per simulated life where the payment count, its clamps and three prefix-sum
/// reads were before.
///
/// Invariants (only [`Schedule::payouts`] builds one, and the simulation of deaths reads
/// it unchecked): `entries` holds `years × periods` entries and `frequency` is the whole
/// number `periods − 1`.
#[derive(Debug, Clone, PartialEq)]
pub struct PayoutTable {
    years: usize,
    periods: usize,
    frequency: f64,
    entries: Vec<Payout>,
}

impl PayoutTable {
    /// Policy years covered.
    pub fn years(&self) -> usize {
        self.years
    }

    /// Entries per policy year, m + 1.
    pub fn periods(&self) -> usize {
        self.periods
    }

    /// Payments a year, m.
    pub fn frequency(&self) -> f64 {
        self.frequency
    }

    /// Entry k × `periods` + c: the payout of a death in year k with ⌈f m⌉ = c.
    pub fn entries(&self) -> &[Payout] {
        &self.entries
    }
}

/// (1 + e)^⌊t⌋: escalation applies from each whole year after the valuation date.
fn escalation_factor(escalation: f64, t: f64) -> f64 {
    if escalation == 0.0 {
        1.0
    } else {
        (1.0 + escalation).powi(t.floor() as i32)
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn basis(timing: Timing, m: u32, rate: f64) -> Basis {
        Basis {
            timing,
            frequency: m,
            curve: DiscountCurve::Flat { rate_pa: rate },
        }
    }

    fn shape(deferral: u32, term: Option<u32>, guarantee: u32, esc: f64) -> PaymentShape {
        PaymentShape {
            deferral,
            term,
            guarantee,
            escalation_bits: esc.to_bits(),
        }
    }

    #[test]
    fn certain_annuity_due_matches_closed_form() {
        // ä_n at i: (1 − v^n)/d (closed form); a 10-year guarantee on a 10-year term is certain.
        let i: f64 = 0.04;
        let s = Schedule::new(
            &shape(0, Some(10), 10, 0.0),
            &basis(Timing::Advance, 1, i),
            40,
        );
        let v = 1.0 / (1.0 + i);
        let closed = (1.0 - v.powi(10)) / (i / (1.0 + i));
        assert!((s.certain_pv - closed).abs() < 1e-12);
        assert_eq!(s.pv_prefix.len(), 11);
        assert_eq!(*s.pv_prefix.last().unwrap(), 0.0);
    }

    #[test]
    fn payments_before_death_count_the_payment_times() {
        // Brute force: count the payment times strictly before death at k + f.
        for timing in [Timing::Advance, Timing::Arrears] {
            for (deferral, term) in [(0, None), (2, None), (1, Some(3))] {
                let b = basis(timing, 4, 0.0);
                let s = Schedule::new(&shape(deferral, term, 0, 0.0), &b, 10);
                let times: Vec<f64> = (0..s.pv_prefix.len() - 1)
                    .map(|j| {
                        let offset = if timing == Timing::Arrears { 1.0 } else { 0.0 };
                        f64::from(deferral) + (j as f64 + offset) / 4.0
                    })
                    .collect();
                for k in 0..10 {
                    for f in [1e-9, 0.1, 0.25, 0.3, 0.5, 0.74, 0.76, 0.99] {
                        let t = k as f64 + f;
                        let brute = times.iter().filter(|&&x| x < t).count();
                        assert_eq!(
                            s.payments_before(k, f),
                            brute,
                            "{timing:?} d={deferral} k={k} f={f}"
                        );
                    }
                }
            }
        }
    }

    #[test]
    fn payouts_are_the_prefix_sums_of_the_payments_before_death() {
        // Brute force: for deaths at k + f with ⌈f m⌉ = c, the entry holds the PV of the
        // payment times before death and the cash of those in year k, summed directly.
        for timing in [Timing::Advance, Timing::Arrears] {
            let b = basis(timing, 4, 0.03);
            let s = Schedule::new(&shape(2, Some(5), 1, 0.02), &b, 10);
            let table = s.payouts();
            assert_eq!(table.entries.len(), 10 * 5);
            let offset = if timing == Timing::Arrears { 1.0 } else { 0.0 };
            for k in 0..10 {
                for c in 0..=4 {
                    // Death at k + c/m receives the payments due before it; at f = 0
                    // (c = 0), those of the earlier policy years.
                    let death = k as f64 + c as f64 / 4.0;
                    let (mut pv, mut cash) = (0.0, 0.0);
                    for j in 0..s.pv_prefix.len() - 1 {
                        let t = 2.0 + (j as f64 + offset) / 4.0;
                        let year = (t - offset / 4.0).floor();
                        let before = if c == 0 { year < k as f64 } else { t < death };
                        // Guaranteed: the first year of payments (j < 4) is certain.
                        if before && j >= 4 {
                            let amount = 1.02f64.powi(t.floor() as i32) / 4.0;
                            pv += amount * 1.03f64.powf(-t);
                            if year == k as f64 {
                                cash += amount;
                            }
                        }
                    }
                    let e = table.entries[k * 5 + c];
                    assert!((e.pv - pv).abs() < 1e-12, "{timing:?} k={k} c={c}");
                    assert!(
                        (e.cash_in_year - cash).abs() < 1e-12,
                        "{timing:?} k={k} c={c}"
                    );
                }
            }
        }
    }

    #[test]
    fn year_start_counts_earlier_years() {
        let arr = Schedule::new(&shape(2, None, 0, 0.0), &basis(Timing::Arrears, 4, 0.0), 10);
        let adv = Schedule::new(&shape(2, None, 0, 0.0), &basis(Timing::Advance, 4, 0.0), 10);
        assert_eq!(arr.year_start[2], 0);
        assert_eq!(arr.year_start[3], 4);
        assert_eq!(adv.year_start[3], 4);
    }
}
