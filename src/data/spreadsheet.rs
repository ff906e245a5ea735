//! Spreadsheet inputs: a book or an experience kept as `.xlsx`, `.xlsm`, `.xls` or `.ods`.
//!
//! A sheet is read into the same rows of text a CSV file gives, so the loaders keep one
//! set of rules whatever the file's format. The sheet is the first one, or the one named
//! after `#` (`book.xlsx#Policies`). Messages name the file and sheet as
//! `book.xlsx#Policies`, and rows by the sheet's own row numbers (1 is the top row).
//! Numbers are written back in Rust's shortest round-trip form, so a number typed into a
//! sheet is read exactly as the same number typed into a CSV file. Cells formatted as
//! dates become `YYYY-MM-DD`.

use std::path::{Path, PathBuf};

use calamine::{Data, Reader, open_workbook_auto};

use crate::data::suggest;
use crate::error::{Error, Result};

/// File endings read as spreadsheets (compared ignoring case).
pub const SPREADSHEET_EXTENSIONS: [&str; 4] = ["xlsx", "xlsm", "xls", "ods"];

/// One sheet's non-empty rows as text, each with its 1-based row number in the sheet.
#[derive(Debug)]
pub struct SheetRows {
    /// `file#sheet`, for messages.
    pub label: PathBuf,
    /// Rows in sheet order; empty rows are left out.
    pub rows: Vec<(usize, Vec<String>)>,
}

/// Splits `book.xlsx#Policies` into the file and the sheet name; a path that is not a
/// spreadsheet, or has no `#`, is returned whole.
pub fn split_sheet(path: &Path) -> (PathBuf, Option<String>) {
    let text = path.to_string_lossy();
    if let Some((file, sheet)) = text.rsplit_once('#')
        && has_spreadsheet_extension(Path::new(file))
    {
        return (PathBuf::from(file), Some(sheet.to_string()));
    }
    (path.to_path_buf(), None)
}

/// Whether `path` (with or without a `#sheet`) names a spreadsheet.
pub fn is_spreadsheet(path: &Path) -> bool {
    has_spreadsheet_extension(&split_sheet(path).0)
}

fn has_spreadsheet_extension(path: &Path) -> bool {
    path.extension()
        .and_then(|e| e.to_str())
        .is_some_and(|e| SPREADSHEET_EXTENSIONS.contains(&e.to_ascii_lowercase().as_str()))
}

/// Reads the sheet `path` names (the first sheet without `#sheet`).
pub fn read_sheet(path: &Path) -> Result<SheetRows> {
    let (file, sheet) = split_sheet(path);
    let open_error = |rule: String| Error::File {
        file: file.clone(),
        rule,
    };
    if !file.exists() {
        return Err(Error::io(
            &file,
            std::io::Error::from(std::io::ErrorKind::NotFound),
        ));
    }
    let mut workbook = open_workbook_auto(&file)
        .map_err(|e| open_error(format!("cannot be read as a spreadsheet: {e}")))?;
    let names = workbook.sheet_names();
    let name = match sheet {
        Some(name) => {
            if !names.contains(&name) {
                return Err(open_error(format!(
                    "has no sheet `{name}`{}; its sheets are {}",
                    suggest::hint(&name, names.iter().map(String::as_str)),
                    names
                        .iter()
                        .map(|n| format!("`{n}`"))
                        .collect::<Vec<_>>()
                        .join(", ")
                )));
            }
            name
        }
        None => names
            .first()
            .cloned()
            .ok_or_else(|| open_error("has no sheets".into()))?,
    };
    let label = PathBuf::from(format!("{}#{name}", file.display()));
    let range = workbook
        .worksheet_range(&name)
        .map_err(|e| open_error(format!("sheet `{name}` cannot be read: {e}")))?;
    let first_row = range.start().map_or(0, |(r, _)| r as usize);
    let first_column = range.start().map_or(0, |(_, c)| c as usize);
    let mut rows = Vec::new();
    for (i, cells) in range.rows().enumerate() {
        let line = first_row + i + 1;
        // Columns left of the used range are empty: keep positions as in the sheet.
        let mut texts = vec![String::new(); first_column];
        for (j, cell) in cells.iter().enumerate() {
            let text = cell_text(cell).map_err(|rule| Error::Row {
                file: label.clone(),
                row: line,
                rule: format!("cell {}{line}: {rule}", column_letters(first_column + j)),
            })?;
            texts.push(text);
        }
        while texts.last().is_some_and(String::is_empty) {
            texts.pop();
        }
        if !texts.is_empty() {
            rows.push((line, texts));
        }
    }
    Ok(SheetRows { label, rows })
}

/// The text of one cell as a CSV field would hold it.
fn cell_text(cell: &Data) -> std::result::Result<String, String> {
    Ok(match cell {
        Data::Empty => String::new(),
        Data::String(s) => s.trim().to_string(),
        Data::Int(i) => i.to_string(),
        Data::Float(f) => f.to_string(),
        Data::Bool(b) => b.to_string(),
        Data::DateTime(d) if d.is_datetime() => {
            let (year, month, day, ..) = d.to_ymd_hms_milli();
            format!("{year:04}-{month:02}-{day:02}")
        }
        Data::DateTime(d) => d.as_f64().to_string(),
        Data::DateTimeIso(s) => s.split('T').next().unwrap_or(s).to_string(),
        Data::DurationIso(s) => s.clone(),
        Data::Error(e) => return Err(format!("holds the spreadsheet error {e}")),
    })
}

/// Spreadsheet column letters of a 0-based column index: 0 is `A`, 26 is `AA`.
fn column_letters(index: usize) -> String {
    let mut n = index + 1;
    let mut letters = Vec::new();
    while n > 0 {
        let r = (n - 1) % 26;
        letters.push(b'A' + r as u8);
        n = (n - 1) / 26;
    }
    letters.reverse();
    String::from_utf8(letters).unwrap_or_default()
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn sheet_names_split_only_for_spreadsheets() {
        assert_eq!(
            split_sheet(Path::new("d/book.xlsx#Policies")),
            (PathBuf::from("d/book.xlsx"), Some("Policies".into()))
        );
        assert_eq!(
            split_sheet(Path::new("d/book.ODS")),
            (PathBuf::from("d/book.ODS"), None)
        );
        assert_eq!(
            split_sheet(Path::new("d/a#b.csv")),
            (PathBuf::from("d/a#b.csv"), None)
        );
        assert!(is_spreadsheet(Path::new("x.xlsx#S")));
        assert!(!is_spreadsheet(Path::new("x.csv")));
    }

    #[test]
    fn column_letters_run_past_z() {
        assert_eq!(column_letters(0), "A");
        assert_eq!(column_letters(25), "Z");
        assert_eq!(column_letters(26), "AA");
        assert_eq!(column_letters(27), "AB");
    }

    #[test]
    fn numbers_keep_every_bit() {
        let x = 0.1 + 0.2;
        assert_eq!(
            cell_text(&Data::Float(x)).unwrap().parse::<f64>().unwrap(),
            x
        );
    }
}
