//! Spreadsheets in: an XLSX, XLSM, XLS or ODS sheet (calamine, pure Rust) turned into delimited
//! text row by row — sheet row r becomes line r, so messages name the sheet's row numbers — and
//! then read like a CSV file, with the same detection of numeric and factor columns. Numbers
//! keep their shortest exact decimal form; dates appear as the sheet shows them in ISO form;
//! error cells (such as `#DIV/0!`) stay as text so the column shows them.

use crate::error::{CellError, nearest};
use calamine::{Data, Reader, open_workbook_auto_from_rs};

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
    let mut wb = open_workbook_auto_from_rs(std::io::Cursor::new(bytes.to_vec())).map_err(|e| {
        CellError::data(format!("\"{shown}\" cannot be read as a spreadsheet: {e}"))
            .note("save it again from the spreadsheet program as .xlsx, or export the sheet as CSV")
    })?;
    let names = wb.sheet_names().to_vec();
    let name = match sheet {
        Some((s, span)) => names
            .iter()
            .find(|n| n.as_str() == s)
            .cloned()
            .ok_or_else(|| {
                CellError::input(format!("\"{shown}\" has no sheet \"{s}\""))
                    .at(span)
                    .suggest(nearest(s, names.iter().map(String::as_str)))
                    .note(format!(
                        "sheets: {}",
                        names
                            .iter()
                            .map(|n| format!("\"{n}\""))
                            .collect::<Vec<_>>()
                            .join(", ")
                    ))
            })?,
        None => names
            .first()
            .cloned()
            .ok_or_else(|| CellError::data(format!("\"{shown}\" has no sheets")))?,
    };
    let range = wb.worksheet_range(&name).map_err(|e| {
        CellError::data(format!(
            "sheet \"{name}\" of \"{shown}\" cannot be read: {e}"
        ))
    })?;
    let mut w = csv::WriterBuilder::new()
        .flexible(true)
        .from_writer(Vec::new());
    let fail =
        |e: csv::Error| CellError::data(format!("sheet \"{name}\" could not be converted: {e}"));
    if let Some((r0, _)) = range.start() {
        for _ in 0..r0 {
            w.write_record([""]).map_err(fail)?;
        }
    }
    for row in range.rows() {
        let fields: Vec<String> = row
            .iter()
            .map(|c| match c {
                Data::Empty => String::new(),
                Data::Int(i) => i.to_string(),
                Data::Float(f) => format!("{f}"),
                Data::String(s) => s.trim().to_string(),
                Data::Bool(b) => {
                    if *b {
                        "TRUE".into()
                    } else {
                        "FALSE".into()
                    }
                }
                Data::DateTime(d) => d.to_string(),
                Data::DateTimeIso(s) | Data::DurationIso(s) => s.clone(),
                Data::Error(e) => e.to_string(),
            })
            .collect();
        w.write_record(&fields).map_err(fail)?;
    }
    let out = w
        .into_inner()
        .map_err(|e| CellError::data(format!("sheet \"{name}\" could not be converted: {e}")))?;
    Ok((out, name))
}
