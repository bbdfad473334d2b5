//! Spreadsheets in: an XLSX, XLSM, XLS or ODS sheet (calamine, pure Rust) turned into delimited
//! text row by row — sheet row r becomes line r, so messages name the sheet's row numbers — and
//! then read like a CSV file, with the same detection of numeric and factor columns. Numbers
//! keep their shortest exact decimal form; dates appear as the sheet shows them in ISO form;
//! error cells (such as `#DIV/0!`) stay as text so the column shows them.
//!
//! Bounds, so that a small file cannot make a huge answer or exhaust memory: a zipped workbook
//! (XLSX, XLSM, ODS) is first inflated entry by entry into nothing, checking that no entry
//! inflates past what its header declares, that none declares more than [`MAX_ENTRY`] and that
//! all together declare at most [`MAX_INFLATED`]; XLSX and XLSM sheets are read cell by cell
//! (a sheet with one cell at A1 and one at XFD1048576 costs two cells, not the grid); an ODS
//! sheet's repeated rows and columns are counted before the grid is built; a cell holds at most
//! [`MAX_CELL_CHARS`] characters, as spreadsheet programs allow. XLS grids are bounded by that
//! format's own 65,536 × 256 cells.

use crate::error::{CellError, nearest};
use calamine::{Data, DataRef, Reader, Xlsx, open_workbook_auto_from_rs};
use std::io::{Cursor, Read};

/// The most one entry of a zipped workbook may inflate to.
pub const MAX_ENTRY: u64 = 512 << 20;
/// The most all entries of a zipped workbook may inflate to together.
pub const MAX_INFLATED: u64 = 1 << 30;
/// The most characters in one cell (the limit of common spreadsheet programs).
pub const MAX_CELL_CHARS: usize = 32_767;
/// The most cells (present or implied by repetition) read from one sheet.
pub const MAX_SHEET_CELLS: u64 = 50_000_000;

/// Whether `path` names a spreadsheet by its extension.
pub fn is_spreadsheet(path: &std::path::Path) -> bool {
    matches!(
        path.extension()
            .and_then(|e| e.to_str())
            .map(|e| e.to_ascii_lowercase())
            .as_deref(),
        Some("xlsx" | "xlsm" | "xls" | "ods")
    )
}

/// The sheet named `sheet` (the first when `None`) of the workbook in `bytes`, as CSV bytes,
/// with the sheet's name.
pub fn to_csv(
    bytes: &[u8],
    shown: &str,
    sheet: Option<(&str, crate::error::Span)>,
) -> Result<(Vec<u8>, String), CellError> {
    let zipped = bytes.starts_with(b"PK\x03\x04");
    let mut entries = Vec::new();
    if zipped {
        entries = check_zip(bytes, shown)?;
    }
    if entries.iter().any(|e| e == "xl/workbook.xml") {
        return xlsx_to_csv(bytes, shown, sheet);
    }
    if entries.iter().any(|e| e == "content.xml") {
        check_ods_repeats(bytes, shown)?;
    }
    let mut wb = open_workbook_auto_from_rs(Cursor::new(bytes.to_vec()))
        .map_err(|e| unreadable(shown, e))?;
    let names = wb.sheet_names().to_vec();
    let name = pick_sheet(&names, shown, sheet)?;
    let range = wb.worksheet_range(&name).map_err(|e| {
        CellError::data(format!(
            "sheet \"{name}\" of \"{shown}\" cannot be read: {e}"
        ))
    })?;
    let (r0, c0) = range.start().unwrap_or((0, 0));
    let mut out = SheetText::new(&name);
    for (i, row) in range.rows().enumerate() {
        for (j, c) in row.iter().enumerate() {
            if !matches!(c, Data::Empty) {
                out.cell(r0 + i as u32, c0 + j as u32, data_text(c))?;
            }
        }
    }
    Ok((out.finish()?, name))
}

fn unreadable(shown: &str, e: impl std::fmt::Display) -> CellError {
    CellError::data(format!("\"{shown}\" cannot be read as a spreadsheet: {e}"))
        .note("save it again from the spreadsheet program as .xlsx, or export the sheet as CSV")
}

fn pick_sheet(
    names: &[String],
    shown: &str,
    sheet: Option<(&str, crate::error::Span)>,
) -> Result<String, CellError> {
    match sheet {
        Some((s, span)) => names
            .iter()
            .find(|n| n.as_str() == s)
            .cloned()
            .ok_or_else(|| {
                CellError::input(format!(
                    "\"{shown}\" has no sheet \"{}\"",
                    crate::error::excerpt(s)
                ))
                .at(span)
                .suggest(nearest(s, names.iter().map(String::as_str)))
                .note(format!("sheets: {}", {
                    let quoted: Vec<String> = names.iter().map(|n| format!("\"{n}\"")).collect();
                    crate::error::listing(quoted.iter().map(String::as_str))
                }))
            }),
        None => names
            .first()
            .cloned()
            .ok_or_else(|| CellError::data(format!("\"{shown}\" has no sheets"))),
    }
}

/// XLSX and XLSM: the sheet read cell by cell, never as a grid.
fn xlsx_to_csv(
    bytes: &[u8],
    shown: &str,
    sheet: Option<(&str, crate::error::Span)>,
) -> Result<(Vec<u8>, String), CellError> {
    let mut wb: Xlsx<_> = Xlsx::new(Cursor::new(bytes)).map_err(|e| unreadable(shown, e))?;
    let names = wb.sheet_names().to_vec();
    let name = pick_sheet(&names, shown, sheet)?;
    let fail = |e: calamine::XlsxError| {
        CellError::data(format!(
            "sheet \"{name}\" of \"{shown}\" cannot be read: {e}"
        ))
    };
    let mut reader = wb.worksheet_cells_reader(&name).map_err(fail)?;
    let mut out = SheetText::new(&name);
    while let Some(cell) = reader.next_cell().map_err(fail)? {
        let (r, c) = cell.get_position();
        let v = cell.get_value();
        if !matches!(v, DataRef::Empty) {
            out.cell(r, c, text_of(v.clone()))?;
        }
    }
    Ok((out.finish()?, name))
}

/// A cell of a grid as text (as [`text_of`]).
fn data_text(c: &Data) -> String {
    match c {
        Data::Empty => String::new(),
        Data::Int(i) => i.to_string(),
        Data::Float(f) => format!("{f}"),
        Data::String(s) => s.trim().to_string(),
        Data::Bool(b) => if *b { "TRUE" } else { "FALSE" }.into(),
        Data::DateTime(d) => d.to_string(),
        Data::DateTimeIso(s) | Data::DurationIso(s) => s.clone(),
        Data::Error(e) => e.to_string(),
    }
}

/// A cell as text: numbers in their shortest exact form, text trimmed, errors as shown.
fn text_of(c: DataRef<'_>) -> String {
    match c {
        DataRef::Empty => String::new(),
        DataRef::Int(i) => i.to_string(),
        DataRef::Float(f) => format!("{f}"),
        DataRef::String(s) => s.trim().to_string(),
        DataRef::SharedString(s) => s.trim().to_string(),
        DataRef::Bool(b) => if b { "TRUE" } else { "FALSE" }.into(),
        DataRef::DateTime(d) => d.to_string(),
        DataRef::DateTimeIso(s) | DataRef::DurationIso(s) => s,
        DataRef::Error(e) => e.to_string(),
    }
}

/// The cells of a sheet turned into CSV lines as they arrive (in row order): sheet row r is
/// line r + 1, rows with no cell are empty lines, and each line stops at its last cell (the
/// reader takes the missing fields after it as empty: [`super::csv::ReadOptions::pad_short_rows`]).
struct SheetText<'a> {
    sheet: &'a str,
    w: csv::Writer<Vec<u8>>,
    /// The row being gathered (its number and its cells by column).
    row: Option<(u32, Vec<(u32, String)>)>,
    /// Lines written so far.
    lines: u32,
    /// Fields written so far (cells and the empty fields before them).
    fields: u64,
}

impl<'a> SheetText<'a> {
    fn new(sheet: &'a str) -> SheetText<'a> {
        SheetText {
            sheet,
            w: csv::WriterBuilder::new()
                .flexible(true)
                .from_writer(Vec::new()),
            row: None,
            lines: 0,
            fields: 0,
        }
    }

    fn cell(&mut self, r: u32, c: u32, text: String) -> Result<(), CellError> {
        if text.chars().count() > MAX_CELL_CHARS {
            return Err(CellError::data(format!(
                "cell {} of sheet \"{}\" holds {} characters; a cell holds at most {MAX_CELL_CHARS}",
                cell_name(r, c),
                self.sheet,
                text.chars().count()
            ))
            .note("a cell that long is not a measurement: check the sheet, or export the data as CSV"));
        }
        match &mut self.row {
            Some((row, cells)) if *row == r => cells.push((c, text)),
            _ => {
                self.flush()?;
                self.row = Some((r, vec![(c, text)]));
            }
        }
        Ok(())
    }

    fn flush(&mut self) -> Result<(), CellError> {
        let Some((r, mut cells)) = self.row.take() else {
            return Ok(());
        };
        cells.sort_by_key(|c| c.0);
        let width = cells.last().map(|c| c.0 as u64 + 1).unwrap_or(0);
        self.fields += width + u64::from(r.saturating_sub(self.lines));
        if self.fields > MAX_SHEET_CELLS {
            return Err(CellError::data(format!(
                "sheet \"{}\" spans more than {MAX_SHEET_CELLS} cells (up to {}); Partita reads sheets of at most that many",
                self.sheet,
                cell_name(r, width.saturating_sub(1) as u32)
            ))
            .note("export the data range as CSV, or delete the far-away cells"));
        }
        let fail = |e: csv::Error| CellError::data(format!("sheet could not be converted: {e}"));
        while self.lines < r {
            self.w.write_record([""]).map_err(fail)?;
            self.lines += 1;
        }
        let mut fields = vec![String::new(); width as usize];
        for (c, text) in cells {
            fields[c as usize] = text;
        }
        self.w.write_record(&fields).map_err(fail)?;
        self.lines += 1;
        Ok(())
    }

    fn finish(mut self) -> Result<Vec<u8>, CellError> {
        self.flush()?;
        self.w
            .into_inner()
            .map_err(|e| CellError::data(format!("sheet could not be converted: {e}")))
    }
}

/// A cell's name in the usual letters-and-number form (row and column from 0): `XFD1048576`.
pub fn cell_name(r: u32, c: u32) -> String {
    let mut letters = Vec::new();
    let mut n = c + 1;
    while n > 0 {
        let rem = (n - 1) % 26;
        letters.push(b'A' + rem as u8);
        n = (n - 1) / 26;
    }
    letters.reverse();
    format!("{}{}", String::from_utf8_lossy(&letters), r + 1)
}

/// Inflates every entry of a zip archive into nothing, refusing one that declares more than
/// [`MAX_ENTRY`], archives that declare more than [`MAX_INFLATED`] in all, and an entry that
/// inflates past what it declares (so calamine, which trusts the declarations, is bounded too).
/// Returns the entries' names.
fn check_zip(bytes: &[u8], shown: &str) -> Result<Vec<String>, CellError> {
    let bomb = |what: String| {
        CellError::data(format!("\"{shown}\" is refused: {what}"))
            .note("a workbook of lab data inflates to a few times its size; this one looks damaged or built to exhaust memory")
    };
    let mut zip = zip::ZipArchive::new(Cursor::new(bytes)).map_err(|e| unreadable(shown, e))?;
    let mut names = Vec::with_capacity(zip.len());
    let mut total = 0u64;
    for i in 0..zip.len() {
        let mut entry = zip.by_index(i).map_err(|e| unreadable(shown, e))?;
        let declared = entry.size();
        let name = entry.name().to_string();
        if declared > MAX_ENTRY {
            return Err(bomb(format!(
                "its part \"{}\" inflates to {declared} bytes (at most {MAX_ENTRY} are read)",
                crate::error::excerpt(&name)
            )));
        }
        total += declared;
        if total > MAX_INFLATED {
            return Err(bomb(format!(
                "its parts inflate to more than {MAX_INFLATED} bytes"
            )));
        }
        let mut sink = std::io::sink();
        let got = std::io::copy(&mut (&mut entry).take(declared + 1), &mut sink)
            .map_err(|e| unreadable(shown, e))?;
        if got > declared {
            return Err(bomb(format!(
                "its part \"{}\" inflates to more than the {declared} bytes it declares",
                crate::error::excerpt(&name)
            )));
        }
        names.push(name);
    }
    Ok(names)
}

/// ODS: the cells a sheet's repeated rows and columns would make, counted on the XML before
/// the grid is built (the ODS reader expands repetitions into a dense grid).
fn check_ods_repeats(bytes: &[u8], shown: &str) -> Result<(), CellError> {
    use quick_xml::events::Event;
    let mut zip = zip::ZipArchive::new(Cursor::new(bytes)).map_err(|e| unreadable(shown, e))?;
    let mut xml = String::new();
    zip.by_name("content.xml")
        .map_err(|e| unreadable(shown, e))?
        .read_to_string(&mut xml)
        .map_err(|e| unreadable(shown, e))?;
    let mut reader = quick_xml::Reader::from_str(&xml);
    let repeat = |e: &quick_xml::events::BytesStart<'_>, key: &[u8]| -> u64 {
        e.attributes()
            .flatten()
            .find(|a| a.key.as_ref() == key)
            .and_then(|a| std::str::from_utf8(&a.value).ok()?.parse().ok())
            .unwrap_or(1)
    };
    // Per table: rows up to the last row with content (with their repeats) × the widest row.
    let (mut rows, mut rows_pending, mut width) = (0u64, 0u64, 0u64);
    let (mut row_repeat, mut row_len, mut row_content, mut pending_cols) =
        (1u64, 0u64, false, 0u64);
    let mut worst = 0u64;
    loop {
        let ev = reader.read_event().map_err(|e| unreadable(shown, e))?;
        match &ev {
            Event::Start(e) | Event::Empty(e) => match e.local_name().as_ref() {
                b"table" => (rows, rows_pending, width) = (0, 0, 0),
                b"table-row" => {
                    (row_repeat, row_len, row_content, pending_cols) =
                        (repeat(e, b"table:number-rows-repeated"), 0, false, 0);
                }
                b"table-cell" | b"covered-table-cell" => {
                    let n = repeat(e, b"table:number-columns-repeated");
                    let valued = e
                        .attributes()
                        .flatten()
                        .any(|a| a.key.as_ref() == b"office:value-type");
                    if valued || matches!(ev, Event::Start(_)) {
                        row_len += pending_cols + n;
                        pending_cols = 0;
                        row_content = true;
                    } else {
                        pending_cols += n;
                    }
                }
                _ => {}
            },
            Event::End(e) if e.local_name().as_ref() == b"table-row" => {
                rows_pending = rows_pending.saturating_add(row_repeat);
                if row_content {
                    rows = rows.saturating_add(rows_pending);
                    rows_pending = 0;
                    width = width.max(row_len);
                }
                worst = worst.max(rows.saturating_mul(width));
                if worst > MAX_SHEET_CELLS {
                    return Err(CellError::data(format!(
                        "\"{shown}\" is refused: a sheet repeats its rows and columns into more than {MAX_SHEET_CELLS} cells"
                    ))
                    .note("export the data range as CSV, or save the workbook as .xlsx"));
                }
            }
            Event::Eof => return Ok(()),
            _ => {}
        }
    }
}
