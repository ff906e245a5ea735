//! Number formatting for the report: thousands separators and fixed decimals.
//!
//! A committee reads amounts in the millions beside rates in the thousandths, so each kind
//! of figure has one format used everywhere (tables, legends and tick labels alike).

/// Shown for a value that is missing or not finite.
pub const NOT_AVAILABLE: &str = "n/a";

/// `value` with `decimals` decimals and a comma every three digits: `1,234,567.89`.
pub fn fixed(value: f64, decimals: usize) -> String {
    if !value.is_finite() {
        return NOT_AVAILABLE.to_string();
    }
    let text = format!("{:.*}", decimals, value.abs());
    let (whole, fraction) = match text.split_once('.') {
        Some((w, f)) => (w, Some(f)),
        None => (text.as_str(), None),
    };
    let mut out = String::with_capacity(text.len() + whole.len() / 3 + 1);
    // Rounding can turn a tiny negative into zero; "-0" would read as a sign error.
    let is_zero = text.bytes().all(|b| b == b'0' || b == b'.');
    if value < 0.0 && !is_zero {
        out.push('-');
    }
    for (i, digit) in whole.chars().enumerate() {
        if i > 0 && (whole.len() - i).is_multiple_of(3) {
            out.push(',');
        }
        out.push(digit);
    }
    if let Some(f) = fraction {
        out.push('.');
        out.push_str(f);
    }
    out
}

/// A currency amount: whole units from 1,000 up, cents below.
pub fn amount(value: f64) -> String {
    if value.abs() >= 1000.0 {
        fixed(value, 0)
    } else {
        fixed(value, 2)
    }
}

/// A fraction as a percentage with `decimals` decimals: `0.1234` → `12.34 %`.
pub fn percent(fraction: f64, decimals: usize) -> String {
    if !fraction.is_finite() {
        return NOT_AVAILABLE.to_string();
    }
    format!("{} %", fixed(100.0 * fraction, decimals))
}

/// A probability level as a percentage without trailing zeros: `0.995` → `99.5 %`.
pub fn level(probability: f64) -> String {
    if !probability.is_finite() {
        return NOT_AVAILABLE.to_string();
    }
    let text = format!("{:.4}", 100.0 * probability);
    let text = text.trim_end_matches('0').trim_end_matches('.');
    format!("{text} %")
}

/// A tick label for an axis whose ticks are `step` apart: as few decimals as the step needs.
pub fn tick(value: f64, step: f64) -> String {
    fixed(value, decimals_for_step(step))
}

/// Decimals needed to tell apart ticks `step` apart (0 for steps of 1 or more).
pub fn decimals_for_step(step: f64) -> usize {
    if !step.is_finite() || step <= 0.0 || step >= 1.0 {
        return 0;
    }
    // 0.25 needs 2 decimals, 0.1 needs 1, 0.05 needs 2: the first decimal place at which
    // the step rounds to itself.
    (1..=8)
        .find(|&d| {
            let scaled = step * 10f64.powi(d as i32);
            (scaled - scaled.round()).abs() < 1e-6 * scaled.max(1.0)
        })
        .unwrap_or(8)
}

/// A probability on a log axis: `0.001`, `0.02`, `0.5`, with as many decimals as it needs.
pub fn probability(value: f64) -> String {
    if !value.is_finite() || value <= 0.0 {
        return fixed(value, 0);
    }
    let decimals = (-value.log10().floor()).max(0.0) as usize;
    let text = fixed(value, decimals.min(8));
    if text.contains('.') {
        text.trim_end_matches('0').trim_end_matches('.').to_string()
    } else {
        text
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn thousands_and_decimals() {
        assert_eq!(fixed(1234567.891, 2), "1,234,567.89");
        assert_eq!(fixed(999.5, 0), "1,000");
        assert_eq!(fixed(-1234.5, 1), "-1,234.5");
        assert_eq!(fixed(-0.0004, 2), "0.00");
        assert_eq!(fixed(12.0, 0), "12");
        assert_eq!(fixed(123456.0, 0), "123,456");
        assert_eq!(fixed(f64::NAN, 2), "n/a");
        assert_eq!(amount(12_345_678.4), "12,345,678");
        assert_eq!(amount(12.345), "12.35");
    }

    #[test]
    fn percentages_and_levels() {
        assert_eq!(percent(0.123456, 2), "12.35 %");
        assert_eq!(level(0.995), "99.5 %");
        assert_eq!(level(0.5), "50 %");
        assert_eq!(level(0.9), "90 %");
    }

    #[test]
    fn tick_decimals_follow_the_step() {
        assert_eq!(decimals_for_step(10.0), 0);
        assert_eq!(decimals_for_step(0.5), 1);
        assert_eq!(decimals_for_step(0.25), 2);
        assert_eq!(decimals_for_step(0.05), 2);
        assert_eq!(tick(2.5, 0.5), "2.5");
        assert_eq!(probability(0.001), "0.001");
        assert_eq!(probability(0.02), "0.02");
        assert_eq!(probability(0.5), "0.5");
        assert_eq!(probability(1.0), "1");
    }
}
