//! The demo's inputs in every layout the loaders read besides CSV (`synth --formats`):
//! a book with dates of birth and start dates, published deaths and exposures tables,
//! and spreadsheets of the book and the experience.
//!
//! Each layout carries the same figures as the CSV files, so a run on any of them fits
//! and values exactly as on the CSV: numbers are written in their shortest round-trip
//! form, and dates of birth are chosen so that the age last birthday at the valuation
//! date is the CSV's age.

use std::io::Write as _;
use std::path::Path;

use chrono::{Days, Months, NaiveDate};

use crate::data::published::PUBLISHED_COLUMNS;
use crate::data::{Book, Experience, Policy, Sex};
use crate::error::{Error, Result};
use crate::io::AtomicFile;

/// The valuation date the dated book is written for: the start of the demo's valuation
/// year.
pub const DEMO_VALUATION_DATE: &str = "2025-01-01";

/// Files `write_layouts` adds beside the CSV files.
pub const LAYOUT_FILES: [&str; 7] = [
    "book-dates.csv",
    "deaths.txt",
    "exposures.txt",
    "book.xlsx",
    "experience.xlsx",
    "book.ods",
    "experience.ods",
];

/// Writes every layout of `experience` and `book` into `dir`, all under temporary names
/// until the last is complete.
pub fn write_layouts(dir: &Path, experience: &Experience, book: &Book) -> Result<Vec<AtomicFile>> {
    let valuation = crate::data::dates::parse_date(DEMO_VALUATION_DATE)
        .map_err(|rule| Error::argument("--formats", rule))?;
    Ok(vec![
        dated_book(&dir.join(LAYOUT_FILES[0]), book, valuation)?,
        published(&dir.join(LAYOUT_FILES[1]), experience, Figure::Deaths)?,
        published(&dir.join(LAYOUT_FILES[2]), experience, Figure::Exposures)?,
        book_sheet(&dir.join(LAYOUT_FILES[3]), book)?,
        experience_sheet(&dir.join(LAYOUT_FILES[4]), experience)?,
        book_sheet(&dir.join(LAYOUT_FILES[5]), book)?,
        experience_sheet(&dir.join(LAYOUT_FILES[6]), experience)?,
    ])
}

/// Writes the layouts of the demo that `synth::write` writes for `seed` and `policies`
/// into `dir`; nothing appears unless every file is complete.
pub fn write_demo(dir: &Path, seed: u64, policies: usize) -> Result<()> {
    let population = crate::synth::population(seed)?;
    let book = crate::synth::book(seed, policies)?;
    for file in write_layouts(dir, &population.experience, &book)? {
        file.commit()?;
    }
    Ok(())
}

/// A date of birth whose age last birthday on `valuation` is `age`, some days before the
/// birthday `age` years back (spread over the year by `index`).
pub fn birth_date_for(valuation: NaiveDate, age: i32, index: usize) -> Option<NaiveDate> {
    let birthday = valuation.checked_sub_months(Months::new(12 * age as u32))?;
    // Fewer days back than the shortest year, so the age is unchanged.
    birthday.checked_sub_days(Days::new((index * 53 % 365) as u64))
}

fn dated_book(path: &Path, book: &Book, valuation: NaiveDate) -> Result<AtomicFile> {
    let header = [
        "id",
        "sex",
        "birth_date",
        "amount",
        "start_date",
        "term",
        "guarantee",
        "escalation",
        "weight",
        "mortality_factor",
    ];
    let mut rows = Vec::with_capacity(book.policies.len());
    for (i, p) in book.policies.iter().enumerate() {
        let birth = birth_date_for(valuation, p.age, i)
            .ok_or_else(|| Error::Numerical(format!("no date of birth for age {}", p.age)))?;
        let start = (p.deferral > 0)
            .then(|| valuation.checked_add_months(Months::new(12 * p.deferral)))
            .flatten();
        rows.push(vec![
            p.id.clone(),
            p.sex.code().to_string(),
            birth.format("%Y-%m-%d").to_string(),
            p.amount.to_string(),
            start
                .map(|d| d.format("%Y-%m-%d").to_string())
                .unwrap_or_default(),
            p.term.map(|t| t.to_string()).unwrap_or_default(),
            p.guarantee.to_string(),
            p.escalation.to_string(),
            p.weight.to_string(),
            p.mortality_factor.to_string(),
        ]);
    }
    crate::data::csv_input::write_unpublished(path, &header, rows)
}

/// Which figure a published table holds.
#[derive(Debug, Clone, Copy)]
enum Figure {
    Deaths,
    Exposures,
}

/// A published table: two lines of text, the header, then one line per year and age,
/// right-aligned; the top line of each year is an open group with missing figures (`.`),
/// since the demo has no figures beyond its top age.
fn published(path: &Path, experience: &Experience, figure: Figure) -> Result<AtomicFile> {
    let io = |e| Error::io(path, e);
    let (Some(f), Some(m)) = (experience.population(Sex::F), experience.population(Sex::M)) else {
        return Err(Error::Numerical(
            "a published table needs both sexes".into(),
        ));
    };
    let title = match figure {
        Figure::Deaths => "Deaths",
        Figure::Exposures => "Exposure to risk (person-years)",
    };
    let mut text = format!(
        "{title} by calendar year and age, invented demo population\nWritten by tailspan synth; every figure is invented.\n\n"
    );
    let line = |cells: [&str; 5]| {
        format!(
            "{:>6} {:>5} {:>22} {:>22} {:>22}\n",
            cells[0], cells[1], cells[2], cells[3], cells[4]
        )
    };
    text.push_str(&line(PUBLISHED_COLUMNS));
    for (j, year) in f.years.iter().enumerate() {
        for (i, age) in f.ages.iter().enumerate() {
            let pick = |p: &crate::data::Population| match figure {
                Figure::Deaths => p.deaths[(i, j)],
                Figure::Exposures => p.exposure[(i, j)],
            };
            let (female, male) = (pick(f), pick(m));
            text.push_str(&line([
                &year.to_string(),
                &age.to_string(),
                &female.to_string(),
                &male.to_string(),
                &(female + male).to_string(),
            ]));
        }
        let open = format!("{}+", f.ages.last + 1);
        text.push_str(&line([&year.to_string(), &open, ".", ".", "."]));
    }
    let mut file = AtomicFile::create(path)?;
    file.write_all(text.as_bytes()).map_err(io)?;
    Ok(file)
}

/// A workbook with one sheet `name` of `header` and `rows`, as `.xlsx` or `.ods` by the
/// path's ending; cells that parse as numbers are written as numbers, the others as text.
fn sheet(path: &Path, name: &str, header: &[&str], rows: &[Vec<String>]) -> Result<AtomicFile> {
    let bytes = if path.extension().is_some_and(|e| e == "ods") {
        ods_bytes(name, header, rows).map_err(|e| Error::io(path, e))?
    } else {
        xlsx_bytes(path, name, header, rows)?
    };
    let mut file = AtomicFile::create(path)?;
    file.write_all(&bytes).map_err(|e| Error::io(path, e))?;
    Ok(file)
}

/// An OpenDocument spreadsheet: the `mimetype` entry first and uncompressed, a manifest,
/// and the sheet in `content.xml` (OpenDocument 1.2, part 3, section 3.3).
fn ods_bytes(name: &str, header: &[&str], rows: &[Vec<String>]) -> std::io::Result<Vec<u8>> {
    use zip::write::SimpleFileOptions;
    let escape = |text: &str| {
        text.replace('&', "&amp;")
            .replace('<', "&lt;")
            .replace('>', "&gt;")
            .replace('"', "&quot;")
    };
    let mut content = format!(
        "<?xml version=\"1.0\" encoding=\"UTF-8\"?>\n<office:document-content \
         xmlns:office=\"urn:oasis:names:tc:opendocument:xmlns:office:1.0\" \
         xmlns:table=\"urn:oasis:names:tc:opendocument:xmlns:table:1.0\" \
         xmlns:text=\"urn:oasis:names:tc:opendocument:xmlns:text:1.0\" office:version=\"1.2\">\
         <office:body><office:spreadsheet><table:table table:name=\"{}\">",
        escape(name)
    );
    let header: Vec<String> = header.iter().map(|h| h.to_string()).collect();
    for row in std::iter::once(&header).chain(rows) {
        content.push_str("<table:table-row>");
        for cell in row {
            match cell.parse::<f64>() {
                _ if cell.is_empty() => content.push_str("<table:table-cell/>"),
                Ok(x) if x.is_finite() => content.push_str(&format!(
                    "<table:table-cell office:value-type=\"float\" office:value=\"{x}\"><text:p>{x}</text:p></table:table-cell>"
                )),
                _ => content.push_str(&format!(
                    "<table:table-cell office:value-type=\"string\"><text:p>{}</text:p></table:table-cell>",
                    escape(cell)
                )),
            }
        }
        content.push_str("</table:table-row>");
    }
    content
        .push_str("</table:table></office:spreadsheet></office:body></office:document-content>\n");
    let manifest = "<?xml version=\"1.0\" encoding=\"UTF-8\"?>\n<manifest:manifest \
        xmlns:manifest=\"urn:oasis:names:tc:opendocument:xmlns:manifest:1.0\" manifest:version=\"1.2\">\
        <manifest:file-entry manifest:full-path=\"/\" \
        manifest:media-type=\"application/vnd.oasis.opendocument.spreadsheet\"/>\
        <manifest:file-entry manifest:full-path=\"content.xml\" manifest:media-type=\"text/xml\"/>\
        </manifest:manifest>\n";
    let mut zip = zip::ZipWriter::new(std::io::Cursor::new(Vec::new()));
    let stored = SimpleFileOptions::default().compression_method(zip::CompressionMethod::Stored);
    let deflated =
        SimpleFileOptions::default().compression_method(zip::CompressionMethod::Deflated);
    let parts: [(&str, &str, SimpleFileOptions); 3] = [
        (
            "mimetype",
            "application/vnd.oasis.opendocument.spreadsheet",
            stored,
        ),
        ("META-INF/manifest.xml", manifest, deflated),
        ("content.xml", &content, deflated),
    ];
    for (part, text, options) in parts {
        zip.start_file(part, options)
            .map_err(std::io::Error::other)?;
        zip.write_all(text.as_bytes())?;
    }
    Ok(zip.finish().map_err(std::io::Error::other)?.into_inner())
}

/// An Office Open XML workbook (`.xlsx`) by rust_xlsxwriter.
fn xlsx_bytes(path: &Path, name: &str, header: &[&str], rows: &[Vec<String>]) -> Result<Vec<u8>> {
    let fail = |e: rust_xlsxwriter::XlsxError| Error::io(path, std::io::Error::other(e));
    let mut workbook = rust_xlsxwriter::Workbook::new();
    // A fixed creation time (the demo's valuation date) keeps the file the same for a seed.
    let created = rust_xlsxwriter::ExcelDateTime::from_ymd(2025, 1, 1).map_err(fail)?;
    workbook.set_properties(&rust_xlsxwriter::DocProperties::new().set_creation_datetime(&created));
    let sheet = workbook.add_worksheet();
    sheet.set_name(name).map_err(fail)?;
    for (c, h) in header.iter().enumerate() {
        sheet.write_string(0, c as u16, *h).map_err(fail)?;
    }
    for (r, row) in rows.iter().enumerate() {
        for (c, cell) in row.iter().enumerate() {
            let (r, c) = (r as u32 + 1, c as u16);
            match cell.parse::<f64>() {
                _ if cell.is_empty() => {}
                Ok(x) if x.is_finite() => {
                    sheet.write_number(r, c, x).map_err(fail)?;
                }
                _ => {
                    sheet.write_string(r, c, cell).map_err(fail)?;
                }
            }
        }
    }
    workbook.save_to_buffer().map_err(fail)
}

fn book_sheet(path: &Path, book: &Book) -> Result<AtomicFile> {
    let rows: Vec<Vec<String>> = book.policies.iter().map(Policy::fields).collect();
    sheet(path, "Policies", &Policy::columns(), &rows)
}

fn experience_sheet(path: &Path, experience: &Experience) -> Result<AtomicFile> {
    let mut rows = Vec::new();
    for p in &experience.populations {
        for (j, year) in p.years.iter().enumerate() {
            for (i, age) in p.ages.iter().enumerate() {
                rows.push(vec![
                    year.to_string(),
                    age.to_string(),
                    p.sex.code().to_string(),
                    p.deaths[(i, j)].to_string(),
                    p.exposure[(i, j)].to_string(),
                ]);
            }
        }
    }
    sheet(
        path,
        "Experience",
        &crate::data::experience::EXPERIENCE_COLUMNS,
        &rows,
    )
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::data::dates::{AgeBasis, age_on};

    #[test]
    fn dates_of_birth_give_back_the_age() {
        let v = NaiveDate::from_ymd_opt(2025, 1, 1).unwrap();
        for age in [0, 1, 55, 64, 100, 119] {
            for index in 0..400 {
                let birth = birth_date_for(v, age, index).unwrap();
                assert_eq!(age_on(birth, v, AgeBasis::LastBirthday), age);
            }
        }
    }
}
