//! SVG to PDF: the figure's SVG is parsed by usvg and written by svg2pdf
//! (pure Rust), with the embedded DejaVu Sans as the only font, so the PDF
//! is vector and embeds (a subset of) that font. Raster cells of a large
//! map stay rasters, as in the SVG. svg2pdf writes the streams
//! uncompressed and [`super::pdf_streams`] deflates them at a faster level
//! than svg2pdf's own (the same page, drawn from the same content).

use std::sync::{Arc, OnceLock};

use super::font;

/// A font database holding only the embedded font, as every family.
fn fonts() -> Arc<usvg::fontdb::Database> {
    static DB: OnceLock<Arc<usvg::fontdb::Database>> = OnceLock::new();
    DB.get_or_init(|| {
        let mut db = usvg::fontdb::Database::new();
        db.load_font_data(font::DEJAVU_SANS.to_vec());
        let family = "DejaVu Sans";
        db.set_sans_serif_family(family);
        db.set_serif_family(family);
        db.set_monospace_family(family);
        Arc::new(db)
    })
    .clone()
}

/// PDF bytes of an SVG document drawn at `dpi` pixels per inch.
pub(crate) fn from_svg(svg: &str, dpi: f32) -> Result<Vec<u8>, String> {
    let options = usvg::Options {
        fontdb: fonts(),
        font_family: "DejaVu Sans".to_string(),
        ..Default::default()
    };
    let tree = usvg::Tree::from_str(svg, &options).map_err(|e| format!("SVG for PDF: {e}"))?;
    let page = svg2pdf::PageOptions { dpi };
    let plain = svg2pdf::ConversionOptions {
        compress: false,
        ..Default::default()
    };
    let pdf = svg2pdf::to_pdf(&tree, plain, page).map_err(|e| format!("PDF: {e}"))?;
    // Sorted once deflated: the content streams are then a few binary
    // lines instead of one line per drawing operation.
    Ok(sorted_references(super::pdf_streams::deflate_streams(pdf)))
}

/// svg2pdf writes the entries of a resource dictionary (`/xo0 8 0 R`, one
/// per line) in hash-map order, which changes from run to run. Sorting each
/// run of such lines outside streams makes the bytes deterministic; it only
/// permutes lines, so every byte offset of the cross-reference table stays
/// right.
fn sorted_references(pdf: Vec<u8>) -> Vec<u8> {
    let mut lines: Vec<&[u8]> = pdf.split(|&b| b == b'\n').collect();
    let mut in_stream = false;
    let mut i = 0;
    while i < lines.len() {
        if in_stream {
            in_stream = !lines[i].ends_with(b"endstream");
            i += 1;
            continue;
        }
        if lines[i] == b"stream" {
            in_stream = true;
            i += 1;
            continue;
        }
        let start = i;
        while i < lines.len() && is_reference_entry(lines[i]) {
            i += 1;
        }
        if i > start {
            lines[start..i].sort();
        } else {
            i += 1;
        }
    }
    lines.join(&b'\n')
}

/// `<spaces>/<name> <number> 0 R`.
fn is_reference_entry(line: &[u8]) -> bool {
    let Ok(text) = std::str::from_utf8(line) else {
        return false;
    };
    let t = text.trim_start_matches(' ');
    let parts: Vec<&str> = t.split(' ').collect();
    t.len() < text.len()
        && parts.len() == 4
        && parts[0].starts_with('/')
        && parts[1].chars().all(|c| c.is_ascii_digit())
        && parts[2] == "0"
        && parts[3] == "R"
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn reference_runs_are_sorted_and_streams_untouched() {
        let pdf =
            b"<<\n  /xo2 12 0 R\n  /xo0 8 0 R\n>>\nstream\n  /b 2 0 R\n  /a 1 0 R\nendstream\n";
        let out = sorted_references(pdf.to_vec());
        let want =
            b"<<\n  /xo0 8 0 R\n  /xo2 12 0 R\n>>\nstream\n  /b 2 0 R\n  /a 1 0 R\nendstream\n";
        assert_eq!(String::from_utf8_lossy(&out), String::from_utf8_lossy(want));
        assert_eq!(out.len(), pdf.len());
    }
}
