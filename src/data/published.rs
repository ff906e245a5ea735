//! Population deaths and exposures as statistics offices publish them: two plain-text
//! tables, one of deaths and one of exposures, by calendar year and single age.
//!
//! Each file may open with a line or two of free text (a title, a source, a date); the
//! first line that reads `Year Age Female Male Total` starts the table, and every later
//! non-blank line is one year and age, the columns separated by spaces. The top age of a
//! year may be an open group such as `110+` (that age and above); it is kept apart and
//! cannot lie inside the fitted ages, since a model's cell is one age. A `.`, or a blank
//! where a right-aligned column has no value, marks a missing cell, an error only if the
//! cell lies in the fitted window. The `Total` column is not fitted (each sex is fitted on
//! its own) but checks the reading: where all three are given, Female + Male must equal
//! Total to within the tables' rounding (0.015, two decimals on each of three figures).
//! Errors name the file, its line, and the column as the header spells it.

use std::collections::HashMap;
use std::path::{Path, PathBuf};

use nalgebra::DMatrix;

use crate::data::csv_input::MAX_AGE;
use crate::data::experience::PLAUSIBLE_YEARS;
use crate::data::{Experience, Population, Sex, Span};
use crate::error::{Error, Result};

/// The columns of a published table, in order.
pub const PUBLISHED_COLUMNS: [&str; 5] = ["Year", "Age", "Female", "Male", "Total"];

/// Free-text lines allowed before the header line.
const MAX_PREAMBLE_LINES: usize = 10;

/// Largest |Female + Male − Total| accepted: three figures rounded to two decimals.
const TOTAL_TOLERANCE: f64 = 0.015;

/// One line of a published table.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct PublishedRow {
    /// 1-based line in the file.
    pub line: usize,
    /// Whether the age is an open group (`110+`).
    pub open: bool,
    /// Female figure (`None`: missing).
    pub female: Option<f64>,
    /// Male figure.
    pub male: Option<f64>,
    /// Total figure.
    pub total: Option<f64>,
}

impl PublishedRow {
    /// The figure of `sex`.
    pub fn value(&self, sex: Sex) -> Option<f64> {
        match sex {
            Sex::F => self.female,
            Sex::M => self.male,
        }
    }
}

/// A published deaths or exposures table as read.
#[derive(Debug, Clone)]
pub struct PublishedTable {
    /// The file.
    pub file: PathBuf,
    /// Rows by (year, age).
    pub rows: HashMap<(i32, i32), PublishedRow>,
    /// Years found.
    pub years: Option<Span>,
    /// Single ages found (open groups apart).
    pub ages: Option<Span>,
    /// Lowest open age group found (`110+` is 110).
    pub open_age: Option<i32>,
    /// Cells marked missing (`.` or blank), over the sexes and the total.
    pub missing: usize,
}

/// Column name of `sex` in a published table.
pub fn sex_column(sex: Sex) -> &'static str {
    match sex {
        Sex::F => "Female",
        Sex::M => "Male",
    }
}

impl PublishedTable {
    /// Reads and checks the table at `path`.
    pub fn load(path: &Path) -> Result<PublishedTable> {
        let bytes = std::fs::read(path).map_err(|e| Error::io(path, e))?;
        PublishedTable::parse(&bytes, path)
    }

    /// As [`PublishedTable::load`] on bytes in memory; `path` names the input in messages.
    pub fn parse(bytes: &[u8], path: &Path) -> Result<PublishedTable> {
        let file = path.to_path_buf();
        let row_error = |row: usize, rule: String| Error::Row {
            file: file.clone(),
            row,
            rule,
        };
        let cell_error = |row: usize, column: &str, rule: String| Error::Cell {
            file: file.clone(),
            row,
            column: column.to_string(),
            rule,
        };
        let text = std::str::from_utf8(bytes).map_err(|e| {
            let line = bytes[..e.valid_up_to()]
                .iter()
                .filter(|&&b| b == b'\n')
                .count()
                + 1;
            row_error(
                line,
                "not valid UTF-8; save the file as UTF-8 (or ASCII)".into(),
            )
        })?;
        let text = text.strip_prefix('\u{feff}').unwrap_or(text);
        let lines: Vec<&str> = text.lines().collect();
        let header_index = lines
            .iter()
            .take(MAX_PREAMBLE_LINES + 1)
            .position(|line| is_header(line));
        if header_index.is_none()
            && let Some((index, rule)) = lines
                .iter()
                .take(MAX_PREAMBLE_LINES + 1)
                .enumerate()
                .find_map(|(i, line)| near_header(line).map(|rule| (i, rule)))
        {
            return Err(row_error(index + 1, rule));
        }
        let header_index = header_index.ok_or_else(|| Error::File {
                file: file.clone(),
                rule: format!(
                    "no header line `{}` in the first {} lines: a published table opens with at most {MAX_PREAMBLE_LINES} lines of text, then that line",
                    PUBLISHED_COLUMNS.join(" "),
                    MAX_PREAMBLE_LINES + 1
                ),
            })?;
        let header = fields(lines[header_index]);
        let ends: Vec<usize> = header.iter().map(|&(_, end, _)| end).collect();

        let mut table = PublishedTable {
            file: file.clone(),
            rows: HashMap::new(),
            years: None,
            ages: None,
            open_age: None,
            missing: 0,
        };
        // Highest age seen per year, and whether it was an open group.
        let mut top: HashMap<i32, (i32, bool, usize)> = HashMap::new();
        for (index, line) in lines.iter().enumerate().skip(header_index + 1) {
            let number = index + 1;
            if line.trim().is_empty() {
                continue;
            }
            let cells = place(&fields(line), &ends).map_err(|rule| row_error(number, rule))?;
            let year_text = cells[0].ok_or_else(|| {
                cell_error(number, "Year", "is empty; a value is required".into())
            })?;
            let year = whole(year_text)
                .filter(|y| PLAUSIBLE_YEARS.contains(y))
                .ok_or_else(|| {
                    cell_error(
                        number,
                        "Year",
                        format!(
                            "`{year_text}` is not a calendar year ({} to {})",
                            PLAUSIBLE_YEARS.start(),
                            PLAUSIBLE_YEARS.end()
                        ),
                    )
                })?;
            let age_text = cells[1]
                .ok_or_else(|| cell_error(number, "Age", "is empty; a value is required".into()))?;
            let (age_digits, open) = match age_text.strip_suffix('+') {
                Some(digits) => (digits, true),
                None => (age_text, false),
            };
            let age = whole(age_digits)
                .filter(|a| (0..=MAX_AGE).contains(a))
                .ok_or_else(|| {
                    cell_error(
                        number,
                        "Age",
                        format!(
                            "`{age_text}` is not an age: a whole number from 0 to {MAX_AGE}, or an open group such as `110+`"
                        ),
                    )
                })?;
            if let Some(&(previous, previous_open, previous_line)) = top.get(&year) {
                if previous_open {
                    return Err(cell_error(
                        number,
                        "Age",
                        format!(
                            "age {age_text} of {year} follows the open group {previous}+ on line {previous_line}; the open group must be the year's last age"
                        ),
                    ));
                }
                if age <= previous {
                    return Err(row_error(
                        number,
                        format!(
                            "duplicate or out-of-order age {age_text} in {year}: age {previous} is on line {previous_line}"
                        ),
                    ));
                }
            }
            top.insert(year, (age, open, number));
            let mut figures = [None; 3];
            for (k, slot) in figures.iter_mut().enumerate() {
                let column = PUBLISHED_COLUMNS[k + 2];
                *slot = match cells[k + 2] {
                    None | Some(".") => {
                        table.missing += 1;
                        None
                    }
                    Some(t) => Some(figure(t).map_err(|rule| cell_error(number, column, rule))?),
                };
            }
            let [female, male, total] = figures;
            if let (Some(f), Some(m), Some(t)) = (female, male, total)
                && (f + m - t).abs() > TOTAL_TOLERANCE + 1e-12 * t
            {
                return Err(cell_error(
                    number,
                    "Total",
                    format!(
                        "{t} is not Female + Male = {} (columns out of place?)",
                        f + m
                    ),
                ));
            }
            table.years = Some(Span::widened(table.years, year));
            if open {
                table.open_age = Some(table.open_age.map_or(age, |a: i32| a.min(age)));
            } else {
                table.ages = Some(Span::widened(table.ages, age));
            }
            table.rows.insert(
                (year, age),
                PublishedRow {
                    line: number,
                    open,
                    female,
                    male,
                    total,
                },
            );
        }
        if table.rows.is_empty() {
            return Err(Error::File {
                file,
                rule: "no data lines after the header line".into(),
            });
        }
        Ok(table)
    }

    /// The row of `(year, age)` for a fitted cell: present, a single age, with a value for
    /// `sex`; an error naming the file, line and column otherwise.
    pub fn cell(&self, sex: Sex, age: i32, year: i32, window: &str) -> Result<(f64, usize)> {
        let row = self.rows.get(&(year, age)).ok_or_else(|| {
            // An open group at or below the age holds it, but not as a single age.
            let open = self
                .open_age
                .filter(|&o| o <= age)
                .and_then(|o| self.rows.get(&(year, o)));
            match open {
                Some(r) => Error::Cell {
                    file: self.file.clone(),
                    row: r.line,
                    column: "Age".into(),
                    rule: format!(
                        "age {age} of {year} lies in the open group `{}+` (that age and above), not a single age: {window}",
                        self.open_age.unwrap_or(age)
                    ),
                },
                None => Error::File {
                    file: self.file.clone(),
                    rule: format!("missing cell: no line for age {age}, year {year}; {window}"),
                },
            }
        })?;
        if row.open {
            return Err(Error::Cell {
                file: self.file.clone(),
                row: row.line,
                column: "Age".into(),
                rule: format!(
                    "`{age}+` is an open age group (that age and above), not a single age: {window}"
                ),
            });
        }
        let value = row.value(sex).ok_or_else(|| Error::Cell {
            file: self.file.clone(),
            row: row.line,
            column: sex_column(sex).into(),
            rule: format!("is missing (`.` or blank) for age {age}, year {year}; {window}"),
        })?;
        Ok((value, row.line))
    }

    /// One line saying what was read, for `check`.
    pub fn describe(&self) -> String {
        let span = |s: Option<Span>| s.map_or("none".into(), |s| format!("{}-{}", s.first, s.last));
        format!(
            "{} lines, years {}, ages {}{}, {} missing cell(s)",
            self.rows.len(),
            span(self.years),
            span(self.ages),
            self.open_age
                .map(|a| format!(" and {a}+"))
                .unwrap_or_default(),
            self.missing
        )
    }
}

/// The experience of `sexes` × `ages` × `years` from published deaths and exposures,
/// exactly as from a CSV with the same figures.
pub fn experience_from_published(
    deaths: &PublishedTable,
    exposures: &PublishedTable,
    ages: Span,
    years: Span,
    sexes: &[Sex],
) -> Result<Experience> {
    let window = format!(
        "every cell of the window set by config keys `data.ages` = [{}, {}] and `data.years` = [{}, {}] needs a value",
        ages.first, ages.last, years.first, years.last
    );
    let mut populations = Vec::with_capacity(sexes.len());
    for &sex in sexes {
        let mut d = DMatrix::zeros(ages.len(), years.len());
        let mut e = DMatrix::zeros(ages.len(), years.len());
        for (i, age) in ages.iter().enumerate() {
            for (j, year) in years.iter().enumerate() {
                let (dead, line) = deaths.cell(sex, age, year, &window)?;
                let (exposed, _) = exposures.cell(sex, age, year, &window)?;
                if dead > 0.0 && exposed == 0.0 {
                    return Err(Error::Cell {
                        file: deaths.file.clone(),
                        row: line,
                        column: sex_column(sex).into(),
                        rule: format!(
                            "{dead} deaths at age {age} in {year} where {} gives zero exposure",
                            exposures.file.display()
                        ),
                    });
                }
                d[(i, j)] = dead;
                e[(i, j)] = exposed;
            }
        }
        populations.push(Population::new(sex, ages, years, d, e)?);
    }
    Ok(Experience {
        source: deaths.file.clone(),
        populations,
    })
}

/// Whether `line` is the header line (names compared ignoring case).
fn is_header(line: &str) -> bool {
    let names: Vec<String> = line.split_whitespace().map(str::to_lowercase).collect();
    names.len() == PUBLISHED_COLUMNS.len()
        && names
            .iter()
            .zip(PUBLISHED_COLUMNS)
            .all(|(n, c)| *n == c.to_lowercase())
}

/// For a line that is nearly the header (five names, most of them right), what is wrong
/// with it and the names meant.
fn near_header(line: &str) -> Option<String> {
    let names: Vec<&str> = line.split_whitespace().collect();
    let right = names
        .iter()
        .zip(PUBLISHED_COLUMNS)
        .filter(|(n, c)| n.eq_ignore_ascii_case(c))
        .count();
    if names.len() != PUBLISHED_COLUMNS.len() || right < 3 {
        return None;
    }
    let wrong: Vec<String> = names
        .iter()
        .zip(PUBLISHED_COLUMNS)
        .filter(|(n, c)| !n.eq_ignore_ascii_case(c))
        .map(|(n, _)| format!("`{n}`{}", crate::data::suggest::hint(n, PUBLISHED_COLUMNS)))
        .collect();
    Some(format!(
        "the header line must read `{}`; unknown column {}",
        PUBLISHED_COLUMNS.join(" "),
        wrong.join(", ")
    ))
}

/// The whitespace-separated fields of `line` with their character span (start, end).
fn fields(line: &str) -> Vec<(usize, usize, &str)> {
    let mut out = Vec::new();
    let mut start = None;
    for (i, c) in line
        .char_indices()
        .chain(std::iter::once((line.len(), ' ')))
    {
        match (c.is_whitespace(), start) {
            (false, None) => start = Some(i),
            (true, Some(s)) => {
                out.push((s, i, &line[s..i]));
                start = None;
            }
            _ => {}
        }
    }
    out
}

/// Places a line's fields in the five columns. A full line is taken in order; a line with
/// fewer fields (blank cells) places each field under the header name whose right edge is
/// nearest the field's right edge, as published tables align figures to the right.
fn place<'a>(
    fields: &[(usize, usize, &'a str)],
    ends: &[usize],
) -> std::result::Result<[Option<&'a str>; 5], String> {
    let mut cells = [None; 5];
    if fields.len() > ends.len() {
        return Err(format!(
            "has {} fields but the header has {} columns `{}`",
            fields.len(),
            ends.len(),
            PUBLISHED_COLUMNS.join(" ")
        ));
    }
    if fields.len() == ends.len() {
        for (cell, field) in cells.iter_mut().zip(fields) {
            *cell = Some(field.2);
        }
        return Ok(cells);
    }
    for &(_, end, text) in fields {
        let column = (0..ends.len())
            .min_by_key(|&k| ends[k].abs_diff(end))
            .unwrap_or(0);
        if cells[column].is_some() {
            return Err(format!(
                "cannot tell which column `{text}` is in: with blank cells, figures must be aligned under the header names; write `.` for a missing value"
            ));
        }
        cells[column] = Some(text);
    }
    Ok(cells)
}

/// A whole number (`1990`, `110`), or `None`.
fn whole(text: &str) -> Option<i32> {
    if text.is_empty() || !text.bytes().all(|b| b.is_ascii_digit()) || text.len() > 4 {
        return None;
    }
    text.parse().ok()
}

/// A finite, non-negative figure.
fn figure(text: &str) -> std::result::Result<f64, String> {
    let value: f64 = text
        .parse()
        .map_err(|_| format!("`{text}` is not a number (write `.` for a missing value)"))?;
    if !value.is_finite() {
        return Err(format!("`{text}` is not a finite number"));
    }
    if value < 0.0 {
        return Err(format!("must not be negative, found {value}"));
    }
    Ok(value)
}

#[cfg(test)]
mod tests {
    use super::*;

    const TABLE: &str = "Deaths, invented country, by year and age\nLast modified: 2025\n\n  Year  Age  Female  Male  Total\n  2000   60   20.5   35   55.5\n  2000   61      .   40      .\n  2000   62+  26            \n";

    #[test]
    fn reads_header_missing_and_open_group() {
        let t = PublishedTable::parse(TABLE.as_bytes(), Path::new("d.txt")).unwrap();
        assert_eq!(t.rows.len(), 3);
        assert_eq!(t.open_age, Some(62));
        assert_eq!(
            t.ages,
            Some(Span {
                first: 60,
                last: 61
            })
        );
        let r = t.rows[&(2000, 61)];
        assert_eq!((r.female, r.male, r.line), (None, Some(40.0), 6));
        // Blank cells: 26 sits under Female by its right edge.
        let r = t.rows[&(2000, 62)];
        assert_eq!((r.female, r.male, r.total), (Some(26.0), None, None));
        assert_eq!(t.missing, 4);
        let window = "w";
        let err = t.cell(Sex::F, 61, 2000, window).unwrap_err().to_string();
        assert!(err.contains("row 6, column `Female`: is missing"), "{err}");
        let err = t.cell(Sex::F, 63, 2000, window).unwrap_err().to_string();
        assert!(
            err.contains("row 7, column `Age`") && err.contains("62+"),
            "{err}"
        );
    }

    #[test]
    fn total_must_match_the_sexes() {
        let text = TABLE.replace("55.5", "57.5");
        let err = PublishedTable::parse(text.as_bytes(), Path::new("d.txt"))
            .unwrap_err()
            .to_string();
        assert!(err.contains("row 5, column `Total`"), "{err}");
    }

    #[test]
    fn a_misspelt_header_is_named() {
        let text = TABLE.replace("Female", "Femal");
        let err = PublishedTable::parse(text.as_bytes(), Path::new("d.txt"))
            .unwrap_err()
            .to_string();
        assert!(
            err.contains("row 4") && err.contains("`Femal` (did you mean `Female`?)"),
            "{err}"
        );
    }

    #[test]
    fn a_file_without_the_header_is_refused() {
        let err = PublishedTable::parse(b"Year,Age,Female\n2000,60,1\n", Path::new("d.txt"))
            .unwrap_err()
            .to_string();
        assert!(
            err.contains("no header line `Year Age Female Male Total`"),
            "{err}"
        );
    }
}
