//! Reading delimited text (CSV, TSV, semicolon-separated) as it comes off an instrument.
//!
//! The header is line 1 unless `header N` says otherwise (lines before it are skipped, as
//! instrument preambles are). The separator is the one of `,` `;` tab that occurs most often in
//! the header line, unless given. UTF-8 with or without a byte-order mark; CRLF or LF. Missing
//! markers are the empty cell, `NA` and `.`, plus any given with `missing`. A column whose every
//! present value is a finite number is numeric; others are factors; `factor C…` forces numeric
//! codes (doses, blocks) to be factors. The file is only read, never written.
//!
//! Refused, each with the line or column: a missing, unreadable or non-UTF-8 file; an empty file
//! or a header without data rows; a row with more or fewer fields than the header; a blank or
//! repeated column name; NaN or infinite values in an otherwise numeric column.

use super::decimal::{integer_part, parse_decimal, shifted};
use super::{Column, ColumnData, Dataset, FactorColumn, NumericColumn};
use crate::error::CellError;
use sha2::{Digest, Sha256};

/// Options of `read … with …`.
#[derive(Debug, Clone, Default)]
pub struct ReadOptions {
    /// Columns forced to be factors.
    pub factors: Vec<String>,
    /// Extra missing-value markers.
    pub missing: Vec<String>,
    /// The separator, if given.
    pub delimiter: Option<u8>,
    /// Numbers use a decimal comma.
    pub decimal_comma: bool,
    /// The header's line number (1-based); 0 means no header.
    pub header: usize,
    /// A row with fewer fields than the header is completed with empty (missing) fields:
    /// rows converted from a sheet stop at their last cell.
    pub pad_short_rows: bool,
}

impl ReadOptions {
    /// The defaults: header on line 1, separator detected.
    pub fn new() -> ReadOptions {
        ReadOptions {
            header: 1,
            ..Default::default()
        }
    }
}

/// Reads `path` into a dataset named `name`.
pub fn read_file(
    path: &std::path::Path,
    shown: &str,
    name: &str,
    opts: &ReadOptions,
) -> Result<Dataset, CellError> {
    if path.is_dir() {
        return Err(CellError::data(format!(
            "\"{shown}\" is a folder, not a file; give the path of a .csv or .tsv file"
        )));
    }
    let bytes = read_bytes(path, shown)?;
    parse_bytes(&bytes, shown, name, opts)
}

/// The bytes of the file at `path` (`shown` as the user wrote it), with the same messages as
/// [`read_file`].
pub fn read_bytes(path: &std::path::Path, shown: &str) -> Result<Vec<u8>, CellError> {
    use std::io::Read;
    // Only a regular file is read, and that is checked before it is opened: a FIFO would block
    // the kernel waiting for a writer, a device such as /dev/zero would read without end.
    let refuse = |what: &str| {
        CellError::data(format!(
            "\"{shown}\" is {what}, not a regular file; give the path of a .csv, .tsv or spreadsheet file"
        ))
    };
    match std::fs::metadata(path) {
        Ok(m) if m.is_dir() => return Err(refuse("a folder")),
        Ok(m) if !m.is_file() => return Err(refuse(special_kind(&m))),
        _ => {}
    }
    let opened = std::fs::File::open(path).and_then(|f| {
        let m = f.metadata()?;
        Ok((f, m))
    });
    let read = opened.and_then(|(mut f, m)| {
        if !m.is_file() {
            return Ok(Err(refuse(special_kind(&m))));
        }
        let mut bytes = Vec::with_capacity(m.len() as usize);
        f.read_to_end(&mut bytes)?;
        Ok(Ok(bytes))
    });
    read.map_err(|e| {
        let what = match e.kind() {
            std::io::ErrorKind::NotFound => "there is no such file".to_string(),
            std::io::ErrorKind::PermissionDenied => "permission to read it was refused".to_string(),
            _ => e.to_string(),
        };
        // The full path looked for: a relative path starts from the notebook's folder.
        let looked = std::path::absolute(path).unwrap_or_else(|_| path.to_path_buf());
        CellError::data(format!("cannot read \"{shown}\": {what}"))
            .note(format!("looked for {}", looked.display()))
    })?
}

/// What a path that is not a regular file is, for the message.
fn special_kind(m: &std::fs::Metadata) -> &'static str {
    use std::os::unix::fs::FileTypeExt;
    let t = m.file_type();
    if t.is_fifo() {
        "a named pipe (FIFO)"
    } else if t.is_char_device() || t.is_block_device() {
        "a device"
    } else if t.is_socket() {
        "a socket"
    } else {
        "not a file"
    }
}

/// Parses file contents (used by [`read_file`] and by tests).
pub fn parse_bytes(
    bytes: &[u8],
    shown: &str,
    name: &str,
    opts: &ReadOptions,
) -> Result<Dataset, CellError> {
    let sha256 = hex::encode(Sha256::digest(bytes));
    let text = std::str::from_utf8(bytes).map_err(|e| {
        let at = e.valid_up_to();
        let line = bytes[..at].iter().filter(|&&b| b == b'\n').count() + 1;
        CellError::data(format!(
            "\"{shown}\" is not UTF-8 text (byte {} on line {line} is not valid UTF-8)",
            at + 1
        ))
        .note("export or save the sheet as CSV UTF-8")
    })?;
    let text = text.strip_prefix('\u{feff}').unwrap_or(text);
    if text.trim().is_empty() {
        return Err(CellError::data(format!(
            "\"{shown}\" is empty: there is no header and no data"
        )));
    }
    // Skip the lines before the header (1-based line numbers throughout).
    let skip = opts.header.saturating_sub(1);
    let mut offset = 0;
    for _ in 0..skip {
        match text[offset..].find('\n') {
            Some(i) => offset += i + 1,
            None => {
                return Err(CellError::data(format!(
                    "\"{shown}\" has fewer than {} lines, so line {} cannot be the header",
                    opts.header, opts.header
                )));
            }
        }
    }
    let body = &text[offset..];
    let first_line = body.lines().find(|l| !l.trim().is_empty()).unwrap_or("");
    let delimiter = opts
        .delimiter
        .unwrap_or_else(|| detect_delimiter(first_line));
    let mut reader = ::csv::ReaderBuilder::new()
        .has_headers(false)
        .flexible(true)
        .delimiter(delimiter)
        .trim(::csv::Trim::All)
        .from_reader(body.as_bytes());
    let mut header: Option<Vec<String>> = None;
    let mut rows: Vec<Vec<String>> = Vec::new();
    let mut lines: Vec<usize> = Vec::new();
    let mut counter = LineCounter::default();
    for rec in reader.records() {
        let rec = rec.map_err(|e| {
            let line = e
                .position()
                .map(|p| line_of(body, p.byte() as usize) + skip)
                .unwrap_or(0);
            CellError::data(format!(
                "\"{shown}\" line {line} cannot be read as delimited text: {e}"
            ))
        })?;
        let line = rec
            .position()
            .map(|p| counter.line_at(body, p.byte() as usize))
            .unwrap_or(0)
            + skip;
        let mut fields: Vec<String> = rec.iter().map(str::to_string).collect();
        if fields.iter().all(|f| f.is_empty()) {
            continue;
        }
        match &header {
            None if opts.header == 0 => {
                header = Some((1..=fields.len()).map(|i| format!("col{i}")).collect());
            }
            None => {
                while fields.len() > 1 && fields.last().is_some_and(String::is_empty) {
                    fields.pop();
                }
                header = Some(fields);
                continue;
            }
            Some(_) => {}
        }
        let width = header.as_ref().map(Vec::len).unwrap_or(0);
        // A trailing separator leaves empty extra fields: accept those.
        while fields.len() > width && fields.last().is_some_and(String::is_empty) {
            fields.pop();
        }
        if opts.pad_short_rows && fields.len() < width {
            fields.resize(width, String::new());
        }
        if fields.len() != width {
            return Err(CellError::data(format!(
                "\"{shown}\" line {line} has {} fields but the header has {width}",
                fields.len()
            ))
            .note(format!(
                "check that line for a missing or extra `{}`, or a value containing it without quotes",
                delimiter as char
            )));
        }
        rows.push(fields);
        lines.push(line);
    }
    let names = header.unwrap_or_default();
    if rows.is_empty() {
        return Err(CellError::data(format!(
            "\"{shown}\" has a header ({}) but no data rows",
            crate::error::excerpt(&crate::error::listing(names.iter().map(String::as_str)))
        )));
    }
    let mut seen = std::collections::HashSet::with_capacity(names.len());
    for (i, n) in names.iter().enumerate() {
        if n.is_empty() {
            return Err(CellError::data(format!(
                "column {} of \"{shown}\" has no name in the header (line {})",
                i + 1,
                opts.header.max(1)
            ))
            .note("give every column a name in the header row"));
        }
        if !seen.insert(n.as_str()) {
            return Err(CellError::data(format!(
                "\"{shown}\" has two columns named \"{}\"; rename one in the header",
                crate::error::excerpt(n)
            )));
        }
    }
    for f in &opts.factors {
        if !names.contains(f) {
            return Err(CellError::input(format!(
                "`factor {0}`: \"{shown}\" has no column \"{0}\"",
                crate::error::excerpt(f)
            ))
            .suggest(crate::error::nearest(f, names.iter().map(String::as_str)))
            .note(format!(
                "columns: {}",
                crate::error::listing(names.iter().map(String::as_str))
            )));
        }
    }
    let mut columns = Vec::with_capacity(names.len());
    for (j, name) in names.iter().enumerate() {
        let cells: Vec<Option<String>> = rows
            .iter()
            .map(|r| {
                let v = &r[j];
                let missing =
                    v.is_empty() || v == "NA" || v == "." || opts.missing.iter().any(|m| m == v);
                (!missing).then(|| v.clone())
            })
            .collect();
        let data = if opts.factors.contains(name) {
            ColumnData::Factor(FactorColumn::from_texts(&cells))
        } else {
            match numeric(&cells, opts.decimal_comma) {
                Numeric::Yes(col) => ColumnData::Numeric(col),
                Numeric::NotFinite(i) => {
                    return Err(CellError::data(format!(
                        "column \"{}\" line {}: the value \"{}\" is not a finite number",
                        crate::error::excerpt(name),
                        lines[i],
                        crate::error::excerpt(cells[i].as_deref().unwrap_or(""))
                    ))
                    .note("mark missing values as an empty cell, NA or ."));
                }
                Numeric::No => ColumnData::Factor(FactorColumn::from_texts(&cells)),
            }
        };
        columns.push(Column {
            name: name.clone(),
            label: None,
            data,
        });
    }
    Ok(Dataset {
        name: name.to_string(),
        source: shown.to_string(),
        sha256,
        read_at: chrono::Utc::now().to_rfc3339_opts(chrono::SecondsFormat::Secs, true),
        delimiter,
        columns,
        lines,
    })
}

/// The 1-based line of byte `at` in `text`.
fn line_of(text: &str, at: usize) -> usize {
    // After a CRLF the reader's position can point at the LF that ends the previous line.
    let at = if text.as_bytes().get(at) == Some(&b'\n') {
        at + 1
    } else {
        at
    };
    text.as_bytes()[..at.min(text.len())]
        .iter()
        .filter(|&&b| b == b'\n')
        .count()
        + 1
}

/// Line numbers of increasing byte offsets, counted incrementally (linear in the file size).
#[derive(Default)]
struct LineCounter {
    at: usize,
    newlines: usize,
}

impl LineCounter {
    fn line_at(&mut self, text: &str, at: usize) -> usize {
        let b = text.as_bytes();
        let at = if b.get(at) == Some(&b'\n') {
            at + 1
        } else {
            at
        }
        .min(b.len());
        if at < self.at {
            return line_of(text, at);
        }
        self.newlines += b[self.at..at].iter().filter(|&&c| c == b'\n').count();
        self.at = at;
        self.newlines + 1
    }
}

enum Numeric {
    Yes(NumericColumn),
    NotFinite(usize),
    No,
}

/// A numeric column from cell texts (`None` missing), or `None` if a text is not a finite number.
pub(crate) fn numeric_column(
    cells: &[Option<String>],
    decimal_comma: bool,
) -> Option<NumericColumn> {
    match numeric(cells, decimal_comma) {
        Numeric::Yes(c) => Some(c),
        _ => None,
    }
}

fn numeric(cells: &[Option<String>], decimal_comma: bool) -> Numeric {
    let norm = |s: &str| {
        if decimal_comma {
            s.replace(',', ".")
        } else {
            s.to_string()
        }
    };
    let mut values = Vec::with_capacity(cells.len());
    let mut not_finite = None;
    let mut any = false;
    for (i, c) in cells.iter().enumerate() {
        match c {
            None => values.push(f64::NAN),
            Some(s) => match norm(s).parse::<f64>() {
                Ok(v) if v.is_finite() => {
                    any = true;
                    values.push(v)
                }
                Ok(_) => {
                    not_finite.get_or_insert(i);
                    values.push(f64::NAN)
                }
                Err(_) => return Numeric::No,
            },
        }
    }
    if let Some(i) = not_finite {
        return if any {
            Numeric::NotFinite(i)
        } else {
            Numeric::No
        };
    }
    if !any {
        return Numeric::No;
    }
    // The offset: the integer part of the first present value, subtracted on the digits.
    let first = cells.iter().flatten().next().map(|s| norm(s));
    let offset_dec = first.as_deref().and_then(parse_decimal).map(integer_part);
    let offset = match offset_dec {
        Some(o) => o as f64,
        None => values
            .iter()
            .copied()
            .find(|v| !v.is_nan())
            .unwrap_or(0.0)
            .trunc(),
    };
    let shifted_vals = cells
        .iter()
        .zip(&values)
        .map(|(c, &v)| match c {
            None => f64::NAN,
            Some(s) => match (offset_dec, parse_decimal(&norm(s))) {
                (Some(o), Some(d)) => shifted(d, o).unwrap_or(v - offset),
                _ => v - offset,
            },
        })
        .collect();
    let raw = cells
        .iter()
        .map(|c| c.clone().unwrap_or_default())
        .collect();
    Numeric::Yes(NumericColumn {
        values,
        offset,
        shifted: shifted_vals,
        raw,
    })
}

/// The separator among `,` `;` tab that occurs most often outside quotes in `line`.
pub fn detect_delimiter(line: &str) -> u8 {
    let mut counts = [0usize; 3];
    let mut quoted = false;
    for c in line.chars() {
        match c {
            '"' => quoted = !quoted,
            ',' if !quoted => counts[0] += 1,
            ';' if !quoted => counts[1] += 1,
            '\t' if !quoted => counts[2] += 1,
            _ => {}
        }
    }
    let best = (0..3).max_by_key(|&i| (counts[i], 3 - i)).unwrap_or(0);
    [b',', b';', b'\t'][best]
}

#[cfg(test)]
mod tests {
    use super::*;

    fn parse(text: &str) -> Result<Dataset, CellError> {
        parse_bytes(text.as_bytes(), "t.csv", "t", &ReadOptions::new())
    }

    #[test]
    fn bom_crlf_semicolons_and_missing_markers() {
        let d = parse("\u{feff}g;y\r\na;1.5\r\nb;NA\r\nb;.\r\na;2\r\n").unwrap();
        assert_eq!(d.delimiter, b';');
        assert_eq!(d.n_rows(), 4);
        let y = d.column("y").unwrap();
        assert_eq!(y.missing(), 2);
        assert_eq!(y.type_name(), "numeric");
        assert_eq!(d.column("g").unwrap().type_name(), "factor");
        assert_eq!(d.lines, [2, 3, 4, 5]);
    }

    #[test]
    fn tabs_and_quoted_commas() {
        let d = parse("name\tv\n\"a, b\"\t3\n").unwrap();
        assert_eq!(d.delimiter, b'\t');
        assert_eq!(d.column("name").unwrap().text(0), "a, b");
    }

    #[test]
    fn ragged_row_names_its_line() {
        let e = parse("a,b\n1,2\n3\n").unwrap_err();
        assert_eq!(
            e.message,
            "\"t.csv\" line 3 has 1 fields but the header has 2"
        );
    }

    #[test]
    fn trailing_separator_is_accepted() {
        let d = parse("a,b,\n1,2,\n").unwrap();
        assert_eq!(d.columns.len(), 2);
    }

    #[test]
    fn empty_and_header_only_files() {
        assert!(parse("  \n").unwrap_err().message.contains("is empty"));
        assert!(parse("a,b\n").unwrap_err().message.contains("no data rows"));
    }

    #[test]
    fn not_utf8_names_the_line() {
        let e = parse_bytes(b"a\n1\n\xff\n", "t.csv", "t", &ReadOptions::new()).unwrap_err();
        assert!(e.message.contains("line 3"), "{}", e.message);
    }

    #[test]
    fn nan_and_inf_are_refused_with_line() {
        let e = parse("y\n1\nNaN\n").unwrap_err();
        assert_eq!(
            e.message,
            "column \"y\" line 3: the value \"NaN\" is not a finite number"
        );
        assert!(parse("y\n1\ninf\n").is_err());
    }

    #[test]
    fn forced_factor_and_unknown_forced_column() {
        let mut o = ReadOptions::new();
        o.factors = vec!["dose".into()];
        let d = parse_bytes(b"dose,y\n10,1\n20,2\n", "t.csv", "t", &o).unwrap();
        assert_eq!(d.column("dose").unwrap().type_name(), "factor");
        o.factors = vec!["dos".into()];
        let e = parse_bytes(b"dose,y\n10,1\n", "t.csv", "t", &o).unwrap_err();
        assert_eq!(e.suggestion.as_deref(), Some("dose"));
    }

    #[test]
    fn header_line_option_skips_a_preamble() {
        let mut o = ReadOptions::new();
        o.header = 3;
        let d = parse_bytes(
            b"Plate reader v2\nrun 7\nwell,od\nA1,0.5\n",
            "t.csv",
            "t",
            &o,
        )
        .unwrap();
        assert_eq!(d.column_names().collect::<Vec<_>>(), ["well", "od"]);
        assert_eq!(d.lines, [4]);
    }

    #[test]
    fn decimal_comma() {
        let mut o = ReadOptions::new();
        o.decimal_comma = true;
        o.delimiter = Some(b';');
        let d = parse_bytes(b"y;g\n1,5;a\n2,25;b\n", "t.csv", "t", &o).unwrap();
        let ColumnData::Numeric(n) = &d.column("y").unwrap().data else {
            panic!()
        };
        assert_eq!(n.values, [1.5, 2.25]);
    }

    #[test]
    fn blank_and_duplicate_names() {
        assert!(
            parse("a,,b\n1,2,3\n")
                .unwrap_err()
                .message
                .contains("column 2")
        );
        assert!(
            parse("a,a\n1,2\n")
                .unwrap_err()
                .message
                .contains("two columns named")
        );
    }
}
