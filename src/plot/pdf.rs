//! SVG to PDF: the figure's SVG is parsed by usvg and written by svg2pdf
//! (pure Rust), with the embedded DejaVu Sans as the only font, so the PDF
//! is vector and embeds (a subset of) that font. Raster cells of a large
//! map stay rasters, as in the SVG.

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
    svg2pdf::to_pdf(&tree, svg2pdf::ConversionOptions::default(), page)
        .map_err(|e| format!("PDF: {e}"))
}
