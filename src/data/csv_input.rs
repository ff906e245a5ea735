//! Shared reading and writing of the CSV inputs.
//!
//! Every loader needs the same guards before any value is looked at (UTF-8, a header,
//! sane line lengths, one field per column) and the same way of naming the row and
//! column at fault, so those live here once. Columns are found by header name, in any
//! order; a column the loader does not know is an error, never silently ignored, so a
//! misspelt optional column cannot fall back to its default.

use std::collections::HashMap;
use std::io::Read;
use std::path::{Path, PathBuf};

use crate::data::spreadsheet::{self, SheetRows};
use crate::error::{Error, Result};
use crate::io::AtomicFile;

/// Oldest age accepted in any input (ages last birthday).
pub const MAX_AGE: i32 = 130;

/// Longest line accepted, in bytes. Real rows are well under 200 bytes; anything this long
/// is a binary file or a broken export, and refusing it keeps the message readable.
pub const MAX_LINE_BYTES: usize = 4096;

/// A parsed CSV input: header and rows, each row with its 1-based line number.
#[derive(Debug)]
pub struct Table {
    /// The file, for messages.
    pub file: PathBuf,
    /// 1-based line (or sheet row) of the header.
    pub header_line: usize,
    /// Column name → position in each row.
    columns: HashMap<String, usize>,
    /// Rows after the header, with their line numbers.
    rows: Vec<(usize, csv::StringRecord)>,
}

/// One data row of a [`Table`], with typed accessors that name the row and column on error.
#[derive(Debug, Clone, Copy)]
pub struct Row<'a> {
    table: &'a Table,
    /// 1-based line number of the row in the file.
    pub line: usize,
    record: &'a csv::StringRecord,
}

impl Table {
    /// Reads `path`, checks it is UTF-8 with a header naming every `required` column and
    /// only columns from `required` and `optional` (names compared ignoring case), and that
    /// each row has one field per column.
    /// A spreadsheet (`.xlsx`, `.ods`, ..., with an optional `#sheet`) is read from its
    /// sheet under the same rules ([`crate::data::spreadsheet`]).
    pub fn read(path: &Path, required: &[&str], optional: &[&str]) -> Result<Table> {
        if spreadsheet::is_spreadsheet(path) {
            return Table::from_sheet(spreadsheet::read_sheet(path)?, required, optional);
        }
        let file = std::fs::File::open(path).map_err(|e| Error::io(path, e))?;
        Table::from_reader(file, path, required, optional)
    }

    /// The table of one spreadsheet sheet: its first non-empty row is the header.
    pub fn from_sheet(sheet: SheetRows, required: &[&str], optional: &[&str]) -> Result<Table> {
        let file = sheet.label;
        let mut rows = sheet.rows.into_iter();
        let Some((header_line, header)) = rows.next() else {
            return Err(Error::File {
                file,
                rule: format!(
                    "empty sheet: expected a header row `{}` and data rows",
                    required.join(",")
                ),
            });
        };
        let header = csv::StringRecord::from(header);
        let columns = header_columns(&file, header_line, &header, required, optional)?;
        let mut records = Vec::new();
        for (line, mut cells) in rows {
            if cells.len() > header.len() {
                return Err(Error::Row {
                    file,
                    row: line,
                    rule: format!("has a value beyond the header's {} columns", header.len()),
                });
            }
            cells.resize(header.len(), String::new());
            records.push((line, csv::StringRecord::from(cells)));
        }
        Ok(Table {
            file,
            header_line,
            columns,
            rows: records,
        })
    }

    /// As [`Table::read`] on any reader (a file, a buffer); `path` is used for messages.
    pub fn from_reader(
        mut reader: impl Read,
        path: &Path,
        required: &[&str],
        optional: &[&str],
    ) -> Result<Table> {
        let mut bytes = Vec::new();
        reader
            .read_to_end(&mut bytes)
            .map_err(|e| Error::io(path, e))?;
        Table::parse(&bytes, path, required, optional)
    }

    /// As [`Table::read`] on bytes already in memory; `path` is used for messages.
    pub fn parse(bytes: &[u8], path: &Path, required: &[&str], optional: &[&str]) -> Result<Table> {
        let file = path.to_path_buf();
        let expected = required.join(",");
        let text = std::str::from_utf8(bytes).map_err(|e| {
            let good = &bytes[..e.valid_up_to()];
            let line = good.iter().filter(|&&b| b == b'\n').count() + 1;
            let line_start = good.iter().rposition(|&b| b == b'\n').map_or(0, |p| p + 1);
            Error::Row {
                file: file.clone(),
                row: line,
                rule: format!(
                    "not valid UTF-8 (byte {} of the line is not part of a UTF-8 character); save the file as UTF-8",
                    e.valid_up_to() - line_start + 1
                ),
            }
        })?;
        let text = text.strip_prefix('\u{feff}').unwrap_or(text);
        if text.trim().is_empty() {
            return Err(Error::File {
                file,
                rule: format!("empty file: expected a header line `{expected}` and data rows"),
            });
        }
        for (i, line) in text.lines().enumerate() {
            if line.len() > MAX_LINE_BYTES {
                return Err(Error::Row {
                    file,
                    row: i + 1,
                    rule: format!(
                        "line is {} bytes long; lines are limited to {MAX_LINE_BYTES} bytes",
                        line.len()
                    ),
                });
            }
        }

        let mut reader = csv::ReaderBuilder::new()
            .has_headers(false)
            .flexible(true)
            .trim(csv::Trim::All)
            .from_reader(text.as_bytes());
        let mut records = reader.records();
        let header = match records.next() {
            Some(record) => record.map_err(|e| csv_error(&file, e))?,
            None => {
                return Err(Error::File {
                    file,
                    rule: format!("empty file: expected a header line `{expected}` and data rows"),
                });
            }
        };
        let header_line = line_of(&header);
        let columns = header_columns(&file, header_line, &header, required, optional)?;

        let mut rows = Vec::new();
        for record in records {
            let record = record.map_err(|e| csv_error(&file, e))?;
            let line = line_of(&record);
            if record.len() != header.len() {
                return Err(Error::Row {
                    file,
                    row: line,
                    rule: format!(
                        "has {} field(s) but the header has {} columns (truncated row or stray comma?)",
                        record.len(),
                        header.len()
                    ),
                });
            }
            rows.push((line, record));
        }
        Ok(Table {
            file,
            header_line,
            columns,
            rows,
        })
    }

    /// Whether the header has `column`.
    pub fn has(&self, column: &str) -> bool {
        self.columns.contains_key(column)
    }

    /// Number of data rows.
    pub fn len(&self) -> usize {
        self.rows.len()
    }

    /// Whether there are no data rows.
    pub fn is_empty(&self) -> bool {
        self.rows.is_empty()
    }

    /// The data rows in file order.
    pub fn rows(&self) -> impl Iterator<Item = Row<'_>> {
        self.rows.iter().map(|(line, record)| Row {
            table: self,
            line: *line,
            record,
        })
    }

    /// An error about the header line.
    pub fn header_error(&self, rule: impl Into<String>) -> Error {
        Error::Row {
            file: self.file.clone(),
            row: self.header_line,
            rule: rule.into(),
        }
    }

    /// An error about the file as a whole.
    pub fn file_error(&self, rule: impl Into<String>) -> Error {
        Error::File {
            file: self.file.clone(),
            rule: rule.into(),
        }
    }
}

impl<'a> Row<'a> {
    /// An error about `column` of this row.
    pub fn error(&self, column: &str, rule: impl Into<String>) -> Error {
        Error::Cell {
            file: self.table.file.clone(),
            row: self.line,
            column: column.to_string(),
            rule: rule.into(),
        }
    }

    /// An error about this row as a whole.
    pub fn row_error(&self, rule: impl Into<String>) -> Error {
        Error::Row {
            file: self.table.file.clone(),
            row: self.line,
            rule: rule.into(),
        }
    }

    /// Whether the table has `column`.
    pub fn has(&self, column: &str) -> bool {
        self.table.has(column)
    }

    /// The trimmed text of `column`; `None` if the header lacks it or the field is empty.
    pub fn text(&self, column: &str) -> Option<&'a str> {
        let i = *self.table.columns.get(column)?;
        let field = self.record.get(i)?;
        (!field.is_empty()).then_some(field)
    }

    /// The text of a required `column`; an empty field is an error.
    pub fn required(&self, column: &str) -> Result<&'a str> {
        self.text(column)
            .ok_or_else(|| self.error(column, "is empty; a value is required"))
    }

    /// A finite number from a required `column`.
    pub fn number(&self, column: &str) -> Result<f64> {
        let text = self.required(column)?;
        self.parse_number(column, text)
    }

    /// A finite number from an optional `column`; `None` when absent or empty.
    pub fn optional_number(&self, column: &str) -> Result<Option<f64>> {
        self.text(column)
            .map(|text| self.parse_number(column, text))
            .transpose()
    }

    /// A whole number from a required `column` (`55` or `55.0`, not `55.5`).
    pub fn whole(&self, column: &str) -> Result<i64> {
        let text = self.required(column)?;
        self.parse_whole(column, text)
    }

    /// A whole number from an optional `column`; `None` when absent or empty.
    pub fn optional_whole(&self, column: &str) -> Result<Option<i64>> {
        self.text(column)
            .map(|text| self.parse_whole(column, text))
            .transpose()
    }

    fn parse_number(&self, column: &str, text: &str) -> Result<f64> {
        let value: f64 = text
            .parse()
            .map_err(|_| self.error(column, format!("`{text}` is not a number")))?;
        if !value.is_finite() {
            return Err(self.error(
                column,
                format!("`{text}` is not a finite number (NaN and infinity are not allowed)"),
            ));
        }
        Ok(value)
    }

    fn parse_whole(&self, column: &str, text: &str) -> Result<i64> {
        if let Ok(value) = text.parse::<i64>() {
            return Ok(value);
        }
        let value = self.parse_number(column, text)?;
        if value.fract() != 0.0 || value.abs() > 1e15 {
            return Err(self.error(column, format!("must be a whole number, found `{text}`")));
        }
        Ok(value as i64)
    }
}

/// Maps the header to column positions, enforcing the required and allowed names.
fn header_columns(
    file: &Path,
    line: usize,
    header: &csv::StringRecord,
    required: &[&str],
    optional: &[&str],
) -> Result<HashMap<String, usize>> {
    let row_error = |rule: String| Error::Row {
        file: file.to_path_buf(),
        row: line,
        rule,
    };
    let expected = required.join(",");
    let names: Vec<String> = header.iter().map(str::to_lowercase).collect();
    let allowed: Vec<&str> = required.iter().chain(optional).copied().collect();
    // A first line that starts with a number or names no known column is a data row.
    let numeric_first = names.first().is_some_and(|n| n.parse::<f64>().is_ok());
    if numeric_first || !names.iter().any(|n| allowed.contains(&n.as_str())) {
        let shown = header.iter().take(6).collect::<Vec<_>>().join(",");
        let separator = [';', '\t', '|']
            .into_iter()
            .find(|&c| header.len() == 1 && shown.contains(c));
        let rule = match separator {
            Some(c) => format!(
                "the header `{}` seems to be separated by {c:?}; columns must be separated by commas, e.g. `{expected}`",
                shown.escape_debug()
            ),
            None => format!(
                "missing header: the first line must name the columns, e.g. `{expected}`, found `{shown}`"
            ),
        };
        return Err(row_error(rule));
    }
    let mut columns = HashMap::new();
    for (i, name) in names.iter().map(String::as_str).enumerate() {
        if name.is_empty() {
            return Err(row_error(format!("header column {} has no name", i + 1)));
        }
        if !allowed.contains(&name) {
            let hint = crate::data::suggest::hint(name, allowed.iter().copied());
            return Err(row_error(format!(
                "unknown column `{name}`{hint}; the columns are {}",
                allowed
                    .iter()
                    .map(|a| format!("`{a}`"))
                    .collect::<Vec<_>>()
                    .join(", ")
            )));
        }
        if columns.insert(name.to_string(), i).is_some() {
            return Err(row_error(format!(
                "column `{name}` appears twice in the header"
            )));
        }
    }
    for name in required {
        if !columns.contains_key(*name) {
            return Err(row_error(format!(
                "missing column `{name}`; the header must name `{expected}`"
            )));
        }
    }
    Ok(columns)
}

fn line_of(record: &csv::StringRecord) -> usize {
    record.position().map_or(0, |p| p.line() as usize)
}

fn csv_error(file: &Path, err: csv::Error) -> Error {
    match err.position() {
        Some(p) => Error::Row {
            file: file.to_path_buf(),
            row: p.line() as usize,
            rule: format!("cannot be read as CSV: {err}"),
        },
        None => Error::File {
            file: file.to_path_buf(),
            rule: format!("cannot be read as CSV: {err}"),
        },
    }
}

/// Writes `rows` under `header` to `path` atomically: the file appears whole or not at all.
pub fn write_atomic<I, R>(path: &Path, header: &[&str], rows: I) -> Result<()>
where
    I: IntoIterator<Item = R>,
    R: IntoIterator<Item = String>,
{
    let file = write_unpublished(path, header, rows)?;
    file.commit()
}

/// Writes `rows` under `header` to a temporary file that becomes `path` on
/// [`AtomicFile::commit`]; dropped uncommitted, it leaves nothing behind.
pub fn write_unpublished<I, R>(path: &Path, header: &[&str], rows: I) -> Result<AtomicFile>
where
    I: IntoIterator<Item = R>,
    R: IntoIterator<Item = String>,
{
    let io_error = |e: csv::Error| Error::io(path, std::io::Error::other(e));
    let mut writer = csv::Writer::from_writer(AtomicFile::create(path)?);
    writer.write_record(header).map_err(io_error)?;
    for row in rows {
        writer.write_record(row).map_err(io_error)?;
    }
    writer
        .into_inner()
        .map_err(|e| Error::io(path, std::io::Error::other(e.to_string())))
}
