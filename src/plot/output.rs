//! Writing a figure as PNG, SVG and PDF (and, in the paper style, its
//! title and caption as `<stem>.txt`) without ever leaving a partial file.
//!
//! A figure draws itself on a [`Surface`]. On the SVG surface a map whose
//! cells would take too many rectangles draws them as one raster image
//! instead (see `map::draw_cells`): it hands the pixels to the surface and
//! leaves a marker rectangle in their place, and [`render_svg`] swaps each
//! marker for an `<image>` element holding the pixels as an embedded PNG.

use std::cell::RefCell;
use std::ffi::OsString;
use std::fs;
use std::path::{Path, PathBuf};
use std::sync::atomic::{AtomicU64, Ordering};

use plotters::coord::Shift;
use plotters::prelude::{BitMapBackend, DrawingArea, DrawingBackend, IntoDrawingArea, SVGBackend};
use plotters::style::RGBAColor;

use super::{font, style, PlotError};

/// A figure that can draw itself on any plotters backend.
pub(crate) trait Figure {
    /// Draws the whole figure on `root` (which is already white).
    fn draw<DB: DrawingBackend>(
        &self,
        root: &DrawingArea<DB, Shift>,
        surface: &Surface,
    ) -> Result<(), String>;

    /// Title and caption, for the `.txt` of the paper style.
    fn words(&self) -> (String, String) {
        (String::new(), String::new())
    }
}

/// What a figure is being drawn for.
pub(crate) enum Surface {
    /// The PNG: everything is drawn with the backend.
    Bitmap,
    /// The SVG: rasters handed over here replace their marker rectangles.
    Svg(RefCell<Vec<Raster>>),
}

/// Pixels to embed in an SVG at a position of the page.
#[derive(Debug, Clone, PartialEq)]
pub(crate) struct Raster {
    /// Top left corner, in page pixels.
    pub x: i32,
    /// Top left corner, in page pixels.
    pub y: i32,
    /// Width in pixels.
    pub width: u32,
    /// Height in pixels.
    pub height: u32,
    /// RGB bytes, row by row.
    pub rgb: Vec<u8>,
}

/// Colour of the marker rectangle that stands for a raster in the SVG. The
/// opacity is used by no other element of any figure, and text cannot
/// produce a `<rect` tag (the backend escapes `<`), so the marker is found
/// without ambiguity.
pub(crate) const MARKER: RGBAColor = RGBAColor(255, 0, 255, 0.123456789);

impl Surface {
    /// Hands over a raster; the caller draws a [`MARKER`] rectangle next.
    pub(crate) fn embed(&self, raster: Raster) {
        if let Surface::Svg(list) = self {
            list.borrow_mut().push(raster);
        }
    }
}

/// Converts any displayable drawing error into the message type used by [`Figure`].
pub(crate) fn msg<E: std::fmt::Display>(e: E) -> String {
    e.to_string()
}

/// Renders `figure` and writes `<stem>.png`, `<stem>.svg` and
/// `<stem>.pdf`; in the paper style also `<stem>.txt` (title, blank line,
/// caption), since neither is drawn in.
pub(crate) fn write_figure(stem: &Path, figure: &(impl Figure + Sync)) -> Result<(), PlotError> {
    font::ensure_registered().map_err(|m| PlotError::new(stem, m))?;
    // Render and encode all in memory first: drawing errors never touch the
    // disk. The raster and the vector formats at once (each thread with the
    // caller's thread-local style); the bytes do not depend on the thread.
    let look = style::figure_style();
    let (png, vector) = rayon::join(
        || style::styled(look, || raster_png(stem, figure)),
        || style::styled(look, || vector_formats(stem, figure)),
    );
    save_figure(stem, figure, png?, vector?)
}

/// The PNG bytes of `figure` (the file `<stem>.png` names its errors).
fn raster_png(stem: &Path, figure: &impl Figure) -> Result<Vec<u8>, PlotError> {
    encode_canvas(stem, &raster_pixels(stem, figure)?)
}

/// The pixels of `figure`, for [`encode_canvas`] (two steps, so that the
/// encoding can run on another thread).
pub(crate) fn raster_pixels(stem: &Path, figure: &impl Figure) -> Result<Vec<u8>, PlotError> {
    render_rgb(figure).map_err(|m| PlotError::new(&with_suffix(stem, ".png"), m))
}

/// The PNG bytes of pixels from [`raster_pixels`].
pub(crate) fn encode_canvas(stem: &Path, pixels: &[u8]) -> Result<Vec<u8>, PlotError> {
    encode_canvas_png(pixels).map_err(|m| PlotError::new(&with_suffix(stem, ".png"), m))
}

/// The SVG text and PDF bytes of `figure`.
pub(crate) fn vector_formats(
    stem: &Path,
    figure: &impl Figure,
) -> Result<(String, Vec<u8>), PlotError> {
    let svg = render_svg(figure).map_err(|m| PlotError::new(&with_suffix(stem, ".svg"), m))?;
    let pdf = super::pdf::from_svg(&svg, style::pdf_dpi())
        .map_err(|m| PlotError::new(&with_suffix(stem, ".pdf"), m))?;
    Ok((svg, pdf))
}

/// Writes the rendered formats of `figure`, and in the paper style its
/// `<stem>.txt`.
pub(crate) fn save_figure(
    stem: &Path,
    figure: &impl Figure,
    png: Vec<u8>,
    (svg, pdf): (String, Vec<u8>),
) -> Result<(), PlotError> {
    let png_path = with_suffix(stem, ".png");
    ensure_parent(&png_path)?;
    save_bytes(&png_path, &png)?;
    save_bytes(&with_suffix(stem, ".svg"), svg.as_bytes())?;
    save_bytes(&with_suffix(stem, ".pdf"), &pdf)?;
    if style::figure_style() == style::FigureStyle::Paper {
        let (title, caption) = figure.words();
        let txt = format!("{title}\n\n{caption}\n");
        save_bytes(&with_suffix(stem, ".txt"), txt.as_bytes())?;
    }
    Ok(())
}

/// Appends `suffix` to the full stem (a stem may itself contain dots).
fn with_suffix(stem: &Path, suffix: &str) -> PathBuf {
    let mut s: OsString = stem.as_os_str().to_owned();
    s.push(suffix);
    PathBuf::from(s)
}

fn render_rgb(figure: &impl Figure) -> Result<Vec<u8>, String> {
    let size = style::canvas();
    let mut buffer = vec![255u8; (size.0 * size.1 * 3) as usize];
    {
        let root = BitMapBackend::with_buffer(&mut buffer, size).into_drawing_area();
        root.fill(&plotters::style::WHITE).map_err(msg)?;
        figure.draw(&root, &Surface::Bitmap)?;
        root.present().map_err(msg)?;
    }
    Ok(buffer)
}

fn render_svg(figure: &impl Figure) -> Result<String, String> {
    let mut text = String::new();
    let surface = Surface::Svg(RefCell::new(Vec::new()));
    {
        let root = SVGBackend::with_string(&mut text, style::canvas()).into_drawing_area();
        root.fill(&plotters::style::WHITE).map_err(msg)?;
        figure.draw(&root, &surface)?;
        root.present().map_err(msg)?;
    }
    match surface {
        Surface::Svg(rasters) => embed_rasters(text, rasters.into_inner()),
        Surface::Bitmap => Ok(text),
    }
}

/// Replaces the k-th marker rectangle with the k-th raster.
fn embed_rasters(mut text: String, rasters: Vec<Raster>) -> Result<String, String> {
    let marker = format!(
        "opacity=\"{}\" fill=\"#{:02X}{:02X}{:02X}\"",
        MARKER.3, MARKER.0, MARKER.1, MARKER.2
    );
    let mut from = 0;
    for raster in &rasters {
        let at = text[from..]
            .find(&marker)
            .map(|i| from + i)
            .ok_or("a raster lost its place in the SVG")?;
        let start = text[..at]
            .rfind("<rect")
            .ok_or("marker outside a rectangle")?;
        let end = at + text[at..].find("/>").ok_or("unclosed marker")? + 2;
        let image = image_element(raster)?;
        text.replace_range(start..end, &image);
        from = start + image.len();
    }
    Ok(text)
}

/// An `<image>` element showing `raster` pixel for pixel.
fn image_element(r: &Raster) -> Result<String, String> {
    Ok(format!(
        "<image x=\"{}\" y=\"{}\" width=\"{}\" height=\"{}\" preserveAspectRatio=\"none\" \
         image-rendering=\"optimizeSpeed\" style=\"image-rendering:pixelated\" \
         href=\"data:image/png;base64,{}\"/>",
        r.x,
        r.y,
        r.width,
        r.height,
        base64(&encode_png(r)?)
    ))
}

/// PNG bytes of a raster embedded in an SVG (smallest file).
fn encode_png(r: &Raster) -> Result<Vec<u8>, String> {
    png_bytes(&r.rgb, (r.width, r.height), png::Compression::Best, None)
}

/// PNG bytes of the whole canvas (`pixels`: RGB rows of the figure style's
/// canvas size; fast compression, the file is written once per figure).
/// Every row Paeth-filtered: on our figures the file is about 5 % larger
/// than with the filter chosen per row, and encoded in half the time.
fn encode_canvas_png(pixels: &[u8]) -> Result<Vec<u8>, String> {
    let paeth = Some(png::FilterType::Paeth);
    png_bytes(pixels, style::canvas(), png::Compression::Fast, paeth)
}

/// PNG bytes of RGB rows of `size` (fixed settings: the same pixels give
/// the same bytes), every row with `filter`, or None: the filter chosen
/// per row.
fn png_bytes(
    rgb: &[u8],
    size: (u32, u32),
    level: png::Compression,
    filter: Option<png::FilterType>,
) -> Result<Vec<u8>, String> {
    let mut bytes = Vec::new();
    {
        let mut encoder = png::Encoder::new(&mut bytes, size.0, size.1);
        encoder.set_color(png::ColorType::Rgb);
        encoder.set_depth(png::BitDepth::Eight);
        encoder.set_compression(level);
        match filter {
            Some(f) => encoder.set_filter(f),
            None => encoder.set_adaptive_filter(png::AdaptiveFilterType::Adaptive),
        }
        let mut writer = encoder.write_header().map_err(msg)?;
        writer.write_image_data(rgb).map_err(msg)?;
        writer.finish().map_err(msg)?;
    }
    Ok(bytes)
}

/// Standard base64 with padding.
fn base64(bytes: &[u8]) -> String {
    const DIGITS: &[u8; 64] = b"ABCDEFGHIJKLMNOPQRSTUVWXYZabcdefghijklmnopqrstuvwxyz0123456789+/";
    let mut out = String::with_capacity(bytes.len().div_ceil(3) * 4);
    for chunk in bytes.chunks(3) {
        let b = [
            chunk[0],
            *chunk.get(1).unwrap_or(&0),
            *chunk.get(2).unwrap_or(&0),
        ];
        let n = (u32::from(b[0]) << 16) | (u32::from(b[1]) << 8) | u32::from(b[2]);
        for k in 0..4 {
            if k <= chunk.len() {
                out.push(DIGITS[(n >> (18 - 6 * k)) as usize & 63] as char);
            } else {
                out.push('=');
            }
        }
    }
    out
}

fn ensure_parent(path: &Path) -> Result<(), PlotError> {
    match path.parent() {
        Some(dir) if !dir.as_os_str().is_empty() => fs::create_dir_all(dir)
            .map_err(|e| PlotError::new(path, format!("cannot create directory: {e}"))),
        _ => Ok(()),
    }
}

/// A temporary file next to its destination, removed unless renamed into place.
struct Staged {
    temp: PathBuf,
    target: PathBuf,
    done: bool,
}

impl Staged {
    /// Picks a hidden, unique temporary name in the target's directory,
    /// ending in `extension`.
    fn new(target: &Path, extension: &str) -> Self {
        static COUNTER: AtomicU64 = AtomicU64::new(0);
        let n = COUNTER.fetch_add(1, Ordering::Relaxed);
        let name = target.file_name().map(|s| s.to_string_lossy().into_owned());
        let temp_name = format!(
            ".{}.{}-{}.tmp.{}",
            name.unwrap_or_default(),
            std::process::id(),
            n,
            extension
        );
        Staged {
            temp: target.with_file_name(temp_name),
            target: target.to_path_buf(),
            done: false,
        }
    }

    fn commit(mut self) -> Result<(), PlotError> {
        fs::rename(&self.temp, &self.target)
            .map_err(|e| PlotError::new(&self.target, format!("cannot move into place: {e}")))?;
        self.done = true;
        Ok(())
    }
}

impl Drop for Staged {
    fn drop(&mut self) {
        if !self.done {
            let _ = fs::remove_file(&self.temp);
        }
    }
}

/// Encodes the RGB buffer as PNG via a temporary file (fixed settings:
/// the same pixels give the same bytes; fast deflate, as the figure's flat
/// colours compress well anyway).
fn save_bytes(path: &Path, bytes: &[u8]) -> Result<(), PlotError> {
    let ext = path
        .extension()
        .map_or("tmp".into(), |e| e.to_string_lossy());
    let staged = Staged::new(path, &ext);
    fs::write(&staged.temp, bytes).map_err(|e| PlotError::new(path, e.to_string()))?;
    staged.commit()
}

#[cfg(test)]
mod tests {
    use super::*;

    struct Blank;
    impl Figure for Blank {
        fn draw<DB: DrawingBackend>(
            &self,
            _root: &DrawingArea<DB, Shift>,
            _surface: &Surface,
        ) -> Result<(), String> {
            Ok(())
        }
    }

    struct Broken;
    impl Figure for Broken {
        fn draw<DB: DrawingBackend>(
            &self,
            _root: &DrawingArea<DB, Shift>,
            _surface: &Surface,
        ) -> Result<(), String> {
            Err("deliberate failure".into())
        }
    }

    #[test]
    fn base64_matches_the_rfc_4648_examples() {
        // RFC 4648, section 10 (test vectors).
        for (plain, coded) in [
            ("", ""),
            ("f", "Zg=="),
            ("fo", "Zm8="),
            ("foo", "Zm9v"),
            ("foob", "Zm9vYg=="),
            ("fooba", "Zm9vYmE="),
            ("foobar", "Zm9vYmFy"),
        ] {
            assert_eq!(base64(plain.as_bytes()), coded, "{plain}");
        }
    }

    #[test]
    fn markers_are_replaced_in_order_and_a_missing_one_is_an_error() {
        let raster = |x: i32| Raster {
            x,
            y: 5,
            width: 2,
            height: 1,
            rgb: vec![0, 0, 0, 255, 255, 255],
        };
        let marker = format!(
            "<rect x=\"7\" y=\"5\" width=\"2\" height=\"1\" opacity=\"{}\" fill=\"#FF00FF\" stroke=\"none\"/>\n",
            MARKER.3
        );
        let svg =
            format!("<svg>\n<rect fill=\"#FFFFFF\"/>\n{marker}<text>a</text>\n{marker}</svg>\n");
        let out = embed_rasters(svg.clone(), vec![raster(7), raster(9)]).unwrap();
        assert!(!out.contains("#FF00FF"), "{out}");
        let first = out
            .find("<image x=\"7\" y=\"5\" width=\"2\" height=\"1\"")
            .unwrap();
        let second = out.find("<image x=\"9\"").unwrap();
        assert!(first < out.find("<text>a</text>").unwrap());
        assert!(second > out.find("<text>a</text>").unwrap());
        assert!(out.contains("href=\"data:image/png;base64,iVBORw0KGgo"));
        assert!(embed_rasters(svg, vec![raster(1); 3]).is_err());
    }

    #[test]
    fn stem_with_dots_keeps_every_part() {
        let p = with_suffix(Path::new("out/flow_g0.5"), ".png");
        assert_eq!(p, PathBuf::from("out/flow_g0.5.png"));
    }

    #[test]
    fn writes_both_files_and_no_temporaries() {
        let dir = tempfile::tempdir().unwrap();
        let stem = dir.path().join("sub").join("blank");
        write_figure(&stem, &Blank).unwrap();
        let names: Vec<String> = fs::read_dir(dir.path().join("sub"))
            .unwrap()
            .map(|e| e.unwrap().file_name().to_string_lossy().into_owned())
            .collect();
        let mut sorted = names.clone();
        sorted.sort();
        assert_eq!(sorted, vec!["blank.pdf", "blank.png", "blank.svg"]);
    }

    #[test]
    fn failed_drawing_leaves_no_file_and_names_the_path() {
        let dir = tempfile::tempdir().unwrap();
        let stem = dir.path().join("broken");
        let err = write_figure(&stem, &Broken).unwrap_err();
        assert!(err.message.contains("deliberate failure"));
        assert_eq!(err.path, dir.path().join("broken.png"));
        assert_eq!(fs::read_dir(dir.path()).unwrap().count(), 0);
    }

    #[test]
    fn unwritable_destination_is_an_error_not_a_panic() {
        let dir = tempfile::tempdir().unwrap();
        // A regular file where a directory is needed.
        let blocker = dir.path().join("file");
        fs::write(&blocker, b"x").unwrap();
        let err = write_figure(&blocker.join("fig"), &Blank).unwrap_err();
        assert!(err.path.starts_with(&blocker));
        assert_eq!(fs::read_dir(dir.path()).unwrap().count(), 1);
    }
}
