//! `save LAST to "PATH" [with table N, dpi D]`: the last result's table as CSV or its figure as
//! SVG or PNG, written atomically (a temporary file in the same folder, then a rename). A file the
//! session read as data is never overwritten. PNG: the SVG rasterised by resvg (pure Rust) at
//! D dots per inch (default 300, for journals), the SVG's pixel unit taken as 1/96 inch, text in
//! the DejaVu Sans font embedded in the engine (`engine/fonts/`).

use crate::error::CellError;
use crate::lang::ast::{Name, Opt, Spanned};
use crate::render::Answer;
use std::path::{Path, PathBuf};

fn same_file(a: &Path, b: &Path) -> bool {
    match (a.canonicalize(), b.canonicalize()) {
        (Ok(x), Ok(y)) => x == y,
        _ => a == b,
    }
}

/// Writes `bytes` to `path` through a temporary file in the same folder, then a rename, so the
/// file is whole or untouched. The temporary file has an unpredictable name and is created
/// exclusively (an existing file or link at that name is refused, never followed), and it is
/// removed on every failure.
pub fn write_atomic(path: &Path, bytes: &[u8]) -> std::io::Result<()> {
    use rand::Rng;
    use std::io::Write;
    let dir = path
        .parent()
        .filter(|p| !p.as_os_str().is_empty())
        .unwrap_or(Path::new("."));
    let name = path.file_name().and_then(|n| n.to_str()).unwrap_or("out");
    let mut rng = rand::rng();
    let (tmp, mut file) = loop {
        let tag: u64 = rng.random();
        let tmp = dir.join(format!(".{name}.partita-{tag:016x}.tmp"));
        match std::fs::OpenOptions::new()
            .write(true)
            .create_new(true)
            .open(&tmp)
        {
            Ok(f) => break (tmp, f),
            Err(e) if e.kind() == std::io::ErrorKind::AlreadyExists => continue,
            Err(e) => return Err(e),
        }
    };
    let written = file
        .write_all(bytes)
        .and_then(|_| file.sync_all())
        .and_then(|_| {
            drop(file);
            std::fs::rename(&tmp, path)
        });
    if written.is_err() {
        let _ = std::fs::remove_file(&tmp);
    }
    written
}

/// The embedded font for rasterised text.
const FONT: &[u8] = include_bytes!("../fonts/DejaVuSans.ttf");

/// Rasterises `svg` at `dpi`: PNG bytes, width and height in pixels.
pub fn rasterise(svg: &str, dpi: f64) -> Result<(Vec<u8>, u32, u32), String> {
    use resvg::{tiny_skia, usvg};
    let mut opt = usvg::Options::default();
    {
        let db = std::sync::Arc::make_mut(&mut opt.fontdb);
        db.load_font_data(FONT.to_vec());
        db.set_sans_serif_family("DejaVu Sans");
        db.set_serif_family("DejaVu Sans");
    }
    opt.font_family = "DejaVu Sans".into();
    opt.dpi = dpi as f32;
    let tree = usvg::Tree::from_str(svg, &opt).map_err(|e| e.to_string())?;
    let scale = (dpi / 96.0) as f32;
    let size = tree.size();
    let (w, h) = (
        (size.width() * scale).ceil() as u32,
        (size.height() * scale).ceil() as u32,
    );
    let mut pixmap = tiny_skia::Pixmap::new(w.max(1), h.max(1)).ok_or("the figure has no size")?;
    pixmap.fill(tiny_skia::Color::WHITE);
    resvg::render(
        &tree,
        tiny_skia::Transform::from_scale(scale, scale),
        &mut pixmap.as_mut(),
    );
    let png = pixmap.encode_png().map_err(|e| e.to_string())?;
    Ok((png, w, h))
}

/// Saves part of `last`.
pub(crate) fn save(
    last: Option<&Answer>,
    what: &Name,
    path: &Spanned<String>,
    full: &Path,
    options: &[Opt],
    inputs: &[PathBuf],
) -> Result<Answer, CellError> {
    crate::session::check_options(options, "save", &["table", "dpi"])?;
    let last = last.ok_or_else(|| {
        CellError::input("there is no result to save yet")
            .at(what.span)
            .note("run an analysis first, then `save LAST to \"results/table.csv\"`")
    })?;
    if inputs.iter().any(|p| same_file(p, full)) {
        return Err(CellError::input(format!(
            "\"{}\" was read as data in this session; saving over it is refused",
            path.value
        ))
        .at(path.span)
        .note("choose another file name"));
    }
    let dir = full
        .parent()
        .filter(|p| !p.as_os_str().is_empty())
        .unwrap_or(Path::new("."));
    if !dir.is_dir() {
        return Err(
            CellError::input(format!("the folder \"{}\" does not exist", dir.display()))
                .at(path.span)
                .note("create it first, or save into an existing folder"),
        );
    }
    if full.is_dir() {
        return Err(CellError::input(format!(
            "\"{}\" is a folder; give a file name ending in .csv or .svg",
            path.value
        ))
        .at(path.span));
    }
    let ext = full
        .extension()
        .and_then(|e| e.to_str())
        .unwrap_or("")
        .to_ascii_lowercase();
    let mut table_no = 1usize;
    let mut dpi = 300.0;
    for o in options {
        let v = crate::session::one_number(o)?;
        match o.name.value.as_str() {
            "dpi" => {
                if !(36.0..=1200.0).contains(&v) {
                    return Err(CellError::input(
                        "`dpi` is between 36 and 1200 (300 is usual for journals)",
                    )
                    .at(o.span));
                }
                dpi = v;
            }
            _ => table_no = v as usize,
        }
    }
    let (bytes, said) = match ext.as_str() {
        "csv" => {
            if last.tables.is_empty() {
                return Err(
                    CellError::input("the last result has no table to save as CSV").at(path.span),
                );
            }
            let t = last.tables.get(table_no.wrapping_sub(1)).ok_or_else(|| {
                CellError::input(format!(
                    "the last result has {} table{}; `table {table_no}` does not exist",
                    last.tables.len(),
                    if last.tables.len() == 1 { "" } else { "s" }
                ))
                .note(
                    last.tables
                        .iter()
                        .enumerate()
                        .map(|(i, t)| format!("table {}: {}", i + 1, t.caption))
                        .collect::<Vec<_>>()
                        .join("; "),
                )
            })?;
            let mut w = csv::Writer::from_writer(Vec::new());
            let header: Vec<&str> = t.columns.iter().map(|c| c.0.as_str()).collect();
            let write = |w: &mut csv::Writer<Vec<u8>>, r: &[&str]| {
                w.write_record(r)
                    .map_err(|e| CellError::input(format!("cannot write the table: {e}")))
            };
            write(&mut w, &header)?;
            for r in &t.rows {
                write(&mut w, &r.iter().map(String::as_str).collect::<Vec<_>>())?;
            }
            let bytes = w
                .into_inner()
                .map_err(|e| CellError::input(format!("cannot write the table: {e}")))?;
            (
                bytes,
                format!(
                    "table {table_no} (\"{}\"), {} rows",
                    t.caption,
                    t.rows.len()
                ),
            )
        }
        "svg" => {
            let svg = last.figure.as_ref().ok_or_else(|| {
                CellError::input("the last result has no figure to save").at(path.span)
            })?;
            (svg.clone().into_bytes(), "the figure (SVG)".to_string())
        }
        "png" => {
            let svg = last.figure.as_ref().ok_or_else(|| {
                CellError::input("the last result has no figure to save").at(path.span)
            })?;
            let (png, w, h) = rasterise(svg, dpi).map_err(|e| {
                CellError::input(format!("the figure could not be rasterised: {e}")).at(path.span)
            })?;
            (
                png,
                format!("the figure (PNG, {w} × {h} pixels at {dpi} dpi)"),
            )
        }
        other => {
            return Err(CellError::input(format!(
                "`save` writes .csv (a table), .svg or .png (the figure), not \"{}\"",
                if other.is_empty() {
                    "a name without an extension"
                } else {
                    other
                }
            ))
            .at(path.span));
        }
    };
    write_atomic(full, &bytes).map_err(|e| {
        CellError::input(format!("cannot write \"{}\": {e}", path.value)).at(path.span)
    })?;
    Ok(Answer {
        command: "save".into(),
        plain: Some(format!(
            "saved {said} of the last result ({}) to {}",
            last.command, path.value
        )),
        ..Default::default()
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn png_has_the_size_the_dpi_gives() {
        let svg = r#"<svg xmlns="http://www.w3.org/2000/svg" width="200" height="100"><text x="10" y="50" font-family="sans-serif" font-size="20">feed</text></svg>"#;
        let (png, w, h) = rasterise(svg, 192.0).unwrap();
        assert_eq!((w, h), (400, 200));
        assert_eq!(&png[..8], b"\x89PNG\r\n\x1a\n");
        // IHDR: width and height, big-endian, at bytes 16..24.
        assert_eq!(u32::from_be_bytes(png[16..20].try_into().unwrap()), 400);
        assert_eq!(u32::from_be_bytes(png[20..24].try_into().unwrap()), 200);
    }
}
