//! Ages and deferrals from calendar dates: the book's `birth_date` and `start_date` as at
//! `valuation.date`.
//!
//! Dates are ISO 8601 calendar dates (`YYYY-MM-DD`). A life born on 29 February has its
//! birthday on 1 March in a common year (common practice; some jurisdictions use
//! 28 February instead). Ages are whole years, by the config's `valuation.age_basis`.

use chrono::{Datelike, Months, NaiveDate};
use serde::{Deserialize, Serialize};

/// How a whole age is read from a date of birth.
#[derive(Debug, Clone, Copy, Default, Deserialize, Serialize, PartialEq, Eq)]
#[serde(rename_all = "kebab-case")]
pub enum AgeBasis {
    /// Completed years at the valuation date (the age last birthday).
    #[default]
    LastBirthday,
    /// The age at the birthday nearest the valuation date; a date exactly half-way
    /// between two birthdays takes the later (common practice).
    Nearest,
}

/// Parses an ISO 8601 calendar date `YYYY-MM-DD`, or says why it is not one.
pub fn parse_date(text: &str) -> Result<NaiveDate, String> {
    let well_formed = text.len() == 10
        && text.char_indices().all(|(i, c)| {
            if i == 4 || i == 7 {
                c == '-'
            } else {
                c.is_ascii_digit()
            }
        });
    if !well_formed {
        return Err(format!(
            "`{text}` is not a date: write dates as YYYY-MM-DD (ISO 8601), e.g. 1958-03-14"
        ));
    }
    NaiveDate::parse_from_str(text, "%Y-%m-%d")
        .map_err(|_| format!("`{text}` is not a date in the calendar (no such day)"))
}

/// The birthday of a life born on `birth` in calendar `year` (1 March for 29 February in
/// a common year).
pub fn birthday_in(birth: NaiveDate, year: i32) -> NaiveDate {
    NaiveDate::from_ymd_opt(year, birth.month(), birth.day())
        .or_else(|| NaiveDate::from_ymd_opt(year, 3, 1))
        .unwrap_or(birth)
}

/// Whole years of age on `on` of a life born on `birth` (not after `on`), by `basis`.
pub fn age_on(birth: NaiveDate, on: NaiveDate, basis: AgeBasis) -> i32 {
    let mut last = on.year() - birth.year();
    if birthday_in(birth, on.year()) > on {
        last -= 1;
    }
    match basis {
        AgeBasis::LastBirthday => last,
        AgeBasis::Nearest => {
            let previous = birthday_in(birth, birth.year() + last);
            let next = birthday_in(birth, birth.year() + last + 1);
            if (on - previous) >= (next - on) {
                last + 1
            } else {
                last
            }
        }
    }
}

/// Whole years from `valuation` to the first anniversary of `valuation` on or after
/// `start`: the deferral of an annuity whose payments start on `start`, on the book's
/// annual grid. A start on or before the valuation date is 0 (in payment).
pub fn deferral_years(valuation: NaiveDate, start: NaiveDate) -> i64 {
    if start <= valuation {
        return 0;
    }
    let anniversary = |years: i64| {
        u32::try_from(years * 12)
            .ok()
            .and_then(|m| valuation.checked_add_months(Months::new(m)))
    };
    let years = i64::from(start.year() - valuation.year());
    match anniversary(years) {
        Some(date) if date >= start => years,
        _ => years + 1,
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn d(text: &str) -> NaiveDate {
        parse_date(text).unwrap()
    }

    // Hand-worked cases (day counts checked with Python's datetime).
    #[test]
    fn age_last_birthday() {
        let on = d("2025-01-01");
        assert_eq!(age_on(d("1960-07-01"), on, AgeBasis::LastBirthday), 64);
        assert_eq!(age_on(d("1960-01-01"), on, AgeBasis::LastBirthday), 65);
        assert_eq!(age_on(d("1960-01-02"), on, AgeBasis::LastBirthday), 64);
        assert_eq!(age_on(d("2025-01-01"), on, AgeBasis::LastBirthday), 0);
    }

    #[test]
    fn age_nearest_birthday() {
        let on = d("2025-01-01");
        // Last birthday 2024-07-01 is 184 days back, the next 181 days ahead.
        assert_eq!(age_on(d("1960-07-01"), on, AgeBasis::Nearest), 65);
        // 2024-07-02: 183 days back, 182 ahead.
        assert_eq!(age_on(d("1960-07-02"), on, AgeBasis::Nearest), 65);
        // 2024-07-03: 182 days back, 183 ahead.
        assert_eq!(age_on(d("1960-07-03"), on, AgeBasis::Nearest), 64);
        assert_eq!(age_on(d("1960-01-01"), on, AgeBasis::Nearest), 65);
    }

    #[test]
    fn born_on_29_february() {
        let birth = d("1960-02-29");
        // In a common year the birthday is 1 March (common practice).
        assert_eq!(age_on(birth, d("2025-02-28"), AgeBasis::LastBirthday), 64);
        assert_eq!(age_on(birth, d("2025-03-01"), AgeBasis::LastBirthday), 65);
        assert_eq!(age_on(birth, d("2024-02-29"), AgeBasis::LastBirthday), 64);
        assert_eq!(age_on(birth, d("2024-02-28"), AgeBasis::LastBirthday), 63);
        // 2025-03-01 to 2025-08-30 is 182 days, to 2026-03-01 is 183 more.
        assert_eq!(age_on(birth, d("2025-08-30"), AgeBasis::Nearest), 65);
        assert_eq!(age_on(birth, d("2025-08-31"), AgeBasis::Nearest), 66);
    }

    #[test]
    fn deferral_to_the_next_anniversary() {
        let v = d("2025-01-01");
        assert_eq!(deferral_years(v, d("2024-05-01")), 0);
        assert_eq!(deferral_years(v, v), 0);
        assert_eq!(deferral_years(v, d("2030-01-01")), 5);
        assert_eq!(deferral_years(v, d("2030-01-02")), 6);
        assert_eq!(deferral_years(v, d("2029-12-31")), 5);
        assert_eq!(deferral_years(d("2024-02-29"), d("2025-02-28")), 1);
        assert_eq!(deferral_years(d("2024-02-29"), d("2025-03-01")), 2);
    }

    #[test]
    fn malformed_and_impossible_dates() {
        assert!(
            parse_date("2023-02-29")
                .unwrap_err()
                .contains("no such day")
        );
        assert!(
            parse_date("2023-13-01")
                .unwrap_err()
                .contains("no such day")
        );
        assert!(parse_date("14/03/1958").unwrap_err().contains("YYYY-MM-DD"));
        assert!(parse_date("1958-3-14").unwrap_err().contains("YYYY-MM-DD"));
        assert_eq!(d("2024-02-29").day(), 29);
    }
}
