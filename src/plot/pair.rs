//! Two figures written at once, their formats drawn as tasks taken in a
//! fixed order of priority by every thread of the pool: first the second
//! figure's vector formats (SVG then PDF: the heat map's, the longest
//! task, about 9 ms for a 1000-cell map), then both rasters, then the
//! first figure's vector formats; the PNG encoding of each raster is
//! queued when its pixels are ready. On two threads one thread takes the
//! heat map's PDF while the other draws the rasters and the phase map's
//! PDF, and the first thread encodes the rasters when it is free. The
//! files of a figure are written as soon as its last format is drawn (that
//! task goes to the head of the queue). The bytes of every file do not
//! depend on which thread drew it.

use std::collections::VecDeque;
use std::path::Path;
use std::sync::Mutex;

use super::output::{self, Figure};
use super::{font, style, PlotError};

/// One task: the formats of figure 0 or 1, or writing its files.
enum Task {
    Vector(usize),
    Raster(usize),
    Encode(usize, Vec<u8>),
    Save(usize),
}

/// What the tasks produced for one figure.
#[derive(Default)]
struct Parts {
    png: Option<Result<Vec<u8>, PlotError>>,
    vector: Option<Result<(String, Vec<u8>), PlotError>>,
    /// Its files written (or why not).
    saved: Option<Result<(), PlotError>>,
}

/// Writes figure `a` and figure `b` (each as [`output::write_figure`]
/// would), their formats drawn at once; each figure's files are written
/// as soon as all its formats are drawn. On failure, the first error of
/// `a`, else of `b`.
pub(crate) fn write_pair(
    a: (&Path, &(impl Figure + Sync)),
    b: (&Path, &(impl Figure + Sync)),
) -> Result<(), PlotError> {
    font::ensure_registered().map_err(|m| PlotError::new(a.0, m))?;
    let stems = [a.0, b.0];
    let queue = Mutex::new(VecDeque::from([
        Task::Vector(1),
        Task::Raster(0),
        Task::Raster(1),
        Task::Vector(0),
    ]));
    let parts = [Mutex::new(Parts::default()), Mutex::new(Parts::default())];
    let look = style::figure_style();
    let run = |task: Task| match task {
        Task::Vector(i) => {
            let v = if i == 0 {
                output::vector_formats(a.0, a.1)
            } else {
                output::vector_formats(b.0, b.1)
            };
            store(&parts[i], &queue, i, Part::Vector(v));
        }
        Task::Raster(i) => {
            let pixels = if i == 0 {
                output::raster_pixels(a.0, a.1)
            } else {
                output::raster_pixels(b.0, b.1)
            };
            match pixels {
                Ok(p) => lock(&queue).push_back(Task::Encode(i, p)),
                Err(e) => store(&parts[i], &queue, i, Part::Png(Err(e))),
            }
        }
        Task::Encode(i, pixels) => {
            let png = output::encode_canvas(stems[i], &pixels);
            store(&parts[i], &queue, i, Part::Png(png));
        }
        Task::Save(i) => {
            let (png, vector) = {
                let mut p = lock(&parts[i]);
                (p.png.take(), p.vector.take())
            };
            let saved = (|| {
                let (png, vector) = (finished(stems[i], png)?, finished(stems[i], vector)?);
                if i == 0 {
                    output::save_figure(a.0, a.1, png, vector)
                } else {
                    output::save_figure(b.0, b.1, png, vector)
                }
            })();
            lock(&parts[i]).saved = Some(saved);
        }
    };
    let work = || {
        style::styled(look, || {
            while let Some(t) = next(&queue) {
                run(t)
            }
        })
    };
    let threads = rayon::current_num_threads().clamp(1, 4);
    rayon::scope(|s| {
        for _ in 0..threads {
            s.spawn(|_| work());
        }
    });
    let [pa, pb] = parts.map(|p| p.into_inner().unwrap_or_else(|e| e.into_inner()));
    finished(a.0, pa.saved)?;
    finished(b.0, pb.saved)
}

/// A drawn format of one figure.
enum Part {
    Png(Result<Vec<u8>, PlotError>),
    Vector(Result<(String, Vec<u8>), PlotError>),
}

/// Stores a part of figure `i`; the part that completes the figure queues
/// the writing of its files first.
fn store(parts: &Mutex<Parts>, queue: &Mutex<VecDeque<Task>>, i: usize, part: Part) {
    let mut p = lock(parts);
    match part {
        Part::Png(png) => p.png = Some(png),
        Part::Vector(v) => p.vector = Some(v),
    }
    if p.png.is_some() && p.vector.is_some() {
        lock(queue).push_front(Task::Save(i));
    }
}

/// The next task, if any is left.
fn next(queue: &Mutex<VecDeque<Task>>) -> Option<Task> {
    lock(queue).pop_front()
}

fn lock<T>(m: &Mutex<T>) -> std::sync::MutexGuard<'_, T> {
    m.lock().unwrap_or_else(|e| e.into_inner())
}

/// A task's result (every task runs, so each part is there).
fn finished<T>(stem: &Path, part: Option<Result<T, PlotError>>) -> Result<T, PlotError> {
    part.unwrap_or_else(|| Err(PlotError::new(stem, "a format of the figure was not drawn")))
}
