//! Writing a figure as PNG and SVG without ever leaving a partial file.

use std::ffi::OsString;
use std::fs;
use std::path::{Path, PathBuf};
use std::sync::atomic::{AtomicU64, Ordering};

use plotters::coord::Shift;
use plotters::prelude::{BitMapBackend, DrawingArea, DrawingBackend, IntoDrawingArea, SVGBackend};

use super::{font, PlotError};

/// Pixel size of every figure.
pub(crate) const SIZE: (u32, u32) = (1200, 900);

/// A figure that can draw itself on any plotters backend.
pub(crate) trait Figure {
    /// Draws the whole figure on `root` (which is already white).
    fn draw<DB: DrawingBackend>(&self, root: &DrawingArea<DB, Shift>) -> Result<(), String>;
}

/// Converts any displayable drawing error into the message type used by [`Figure`].
pub(crate) fn msg<E: std::fmt::Display>(e: E) -> String {
    e.to_string()
}

/// Renders `figure` and writes `<stem>.png` and `<stem>.svg`.
pub(crate) fn write_figure(stem: &Path, figure: &impl Figure) -> Result<(), PlotError> {
    font::ensure_registered().map_err(|m| PlotError::new(stem, m))?;
    let png_path = with_suffix(stem, ".png");
    let svg_path = with_suffix(stem, ".svg");
    // Render both in memory first: drawing errors never touch the disk.
    let pixels = render_rgb(figure).map_err(|m| PlotError::new(&png_path, m))?;
    let svg = render_svg(figure).map_err(|m| PlotError::new(&svg_path, m))?;
    ensure_parent(&png_path)?;
    save_png(&png_path, &pixels)?;
    save_bytes(&svg_path, svg.as_bytes())
}

/// Appends `suffix` to the full stem (a stem may itself contain dots).
fn with_suffix(stem: &Path, suffix: &str) -> PathBuf {
    let mut s: OsString = stem.as_os_str().to_owned();
    s.push(suffix);
    PathBuf::from(s)
}

fn render_rgb(figure: &impl Figure) -> Result<Vec<u8>, String> {
    let mut buffer = vec![255u8; (SIZE.0 * SIZE.1 * 3) as usize];
    {
        let root = BitMapBackend::with_buffer(&mut buffer, SIZE).into_drawing_area();
        root.fill(&plotters::style::WHITE).map_err(msg)?;
        figure.draw(&root)?;
        root.present().map_err(msg)?;
    }
    Ok(buffer)
}

fn render_svg(figure: &impl Figure) -> Result<String, String> {
    let mut text = String::new();
    {
        let root = SVGBackend::with_string(&mut text, SIZE).into_drawing_area();
        root.fill(&plotters::style::WHITE).map_err(msg)?;
        figure.draw(&root)?;
        root.present().map_err(msg)?;
    }
    Ok(text)
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
    /// Picks a hidden, unique temporary name in the target's directory.
    /// The name ends in `extension` because the PNG encoder infers the format from it.
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

/// Encodes the RGB buffer as PNG via a temporary file.
fn save_png(path: &Path, pixels: &[u8]) -> Result<(), PlotError> {
    let staged = Staged::new(path, "png");
    let fail = |e: String| PlotError::new(path, e);
    {
        let mut backend = BitMapBackend::new(&staged.temp, SIZE);
        backend
            .blit_bitmap((0, 0), SIZE, pixels)
            .map_err(|e| fail(e.to_string()))?;
        backend.present().map_err(|e| fail(e.to_string()))?;
    }
    staged.commit()
}

fn save_bytes(path: &Path, bytes: &[u8]) -> Result<(), PlotError> {
    let staged = Staged::new(path, "svg");
    fs::write(&staged.temp, bytes).map_err(|e| PlotError::new(path, e.to_string()))?;
    staged.commit()
}

#[cfg(test)]
mod tests {
    use super::*;

    struct Blank;
    impl Figure for Blank {
        fn draw<DB: DrawingBackend>(&self, _root: &DrawingArea<DB, Shift>) -> Result<(), String> {
            Ok(())
        }
    }

    struct Broken;
    impl Figure for Broken {
        fn draw<DB: DrawingBackend>(&self, _root: &DrawingArea<DB, Shift>) -> Result<(), String> {
            Err("deliberate failure".into())
        }
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
        assert_eq!(sorted, vec!["blank.png", "blank.svg"]);
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
