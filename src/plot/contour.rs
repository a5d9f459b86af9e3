//! Marching squares: level lines of a field sampled on a rectangular grid.
//!
//! [`ContourTracer`] takes the field one value at a time in row-major
//! order and keeps only two grid rows, the segments found so far and their
//! crossing points, so a scan can trace its level lines while it reads
//! `points.csv` without holding the whole field. [`contour_lines`] is the
//! same tracer fed from a slice.

use std::collections::HashMap;

/// A grid edge a level line can cross: horizontal edges join `(ix, iy)` to
/// `(ix + 1, iy)`, vertical edges join `(ix, iy)` to `(ix, iy + 1)`.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash)]
enum Edge {
    H(usize, usize),
    V(usize, usize),
}

/// One row of cells: the grid rows `iy` (lower) and `iy + 1` (upper).
struct CellRow<'a> {
    xs: &'a [f64],
    ys: &'a [f64],
    lower: &'a [f64],
    upper: &'a [f64],
    iy: usize,
    level: f64,
}

impl CellRow<'_> {
    fn at(&self, ix: usize, iy: usize) -> f64 {
        if iy == self.iy {
            self.lower[ix]
        } else {
            self.upper[ix]
        }
    }

    fn above(&self, ix: usize, iy: usize) -> bool {
        self.at(ix, iy) >= self.level
    }

    /// Grid points at the two ends of `edge`.
    fn ends(edge: Edge) -> ((usize, usize), (usize, usize)) {
        match edge {
            Edge::H(ix, iy) => ((ix, iy), (ix + 1, iy)),
            Edge::V(ix, iy) => ((ix, iy), (ix, iy + 1)),
        }
    }

    fn crosses(&self, edge: Edge) -> bool {
        let (a, b) = Self::ends(edge);
        self.above(a.0, a.1) != self.above(b.0, b.1)
    }

    /// Where the level crosses `edge`, by linear interpolation.
    fn point(&self, edge: Edge) -> (f64, f64) {
        let ((ax, ay), (bx, by)) = Self::ends(edge);
        let (va, vb) = (self.at(ax, ay), self.at(bx, by));
        let t = (self.level - va) / (vb - va);
        let lerp = |p: f64, q: f64| p + (q - p) * t;
        (
            lerp(self.xs[ax], self.xs[bx]),
            lerp(self.ys[ay], self.ys[by]),
        )
    }

    /// Segments (as pairs of crossed edges) inside cell `(ix, iy)`.
    fn cell_segments(&self, ix: usize, out: &mut Vec<[Edge; 2]>) {
        let iy = self.iy;
        let corners = [(ix, iy), (ix + 1, iy), (ix + 1, iy + 1), (ix, iy + 1)];
        if corners.iter().any(|&(x, y)| !self.at(x, y).is_finite()) {
            return;
        }
        // Edges in counter-clockwise order: bottom, right, top, left.
        let edges = [
            Edge::H(ix, iy),
            Edge::V(ix + 1, iy),
            Edge::H(ix, iy + 1),
            Edge::V(ix, iy),
        ];
        let crossed: Vec<Edge> = edges.into_iter().filter(|&e| self.crosses(e)).collect();
        match crossed.len() {
            2 => out.push([crossed[0], crossed[1]]),
            4 => self.saddle(&corners, &edges, out),
            _ => {}
        }
    }

    /// Saddle cell: the cell centre (mean of the corners) decides which
    /// diagonal pair of corners is connected. Each corner on the other side
    /// is cut off by a segment joining its two edges.
    fn saddle(&self, corners: &[(usize, usize); 4], edges: &[Edge; 4], out: &mut Vec<[Edge; 2]>) {
        let centre = corners.iter().map(|&(x, y)| self.at(x, y)).sum::<f64>() / 4.0;
        let centre_above = centre >= self.level;
        for (k, &(x, y)) in corners.iter().enumerate() {
            if self.above(x, y) != centre_above {
                // Corner k touches edge k and edge k-1 (mod 4).
                out.push([edges[(k + 3) % 4], edges[k]]);
            }
        }
    }
}

/// Level lines of a field fed value by value in row-major order
/// (`values[iy * xs.len() + ix]`).
///
/// Each row of cells is traced as soon as its upper grid row is complete,
/// in the order a full-field pass would visit it, and the crossing point of
/// every crossed edge is computed then, so the lines are the same as from
/// the whole field.
pub struct ContourTracer {
    xs: Vec<f64>,
    ys: Vec<f64>,
    level: f64,
    /// The last complete grid row.
    lower: Vec<f64>,
    /// The grid row being filled.
    upper: Vec<f64>,
    /// Complete grid rows so far.
    rows: usize,
    /// Values fed beyond the grid (the result is then empty).
    overflow: bool,
    segments: Vec<[Edge; 2]>,
    points: HashMap<Edge, (f64, f64)>,
}

impl ContourTracer {
    /// A tracer of `values == level` on the grid `xs × ys`.
    pub fn new(xs: Vec<f64>, ys: Vec<f64>, level: f64) -> ContourTracer {
        ContourTracer {
            lower: Vec::with_capacity(xs.len()),
            upper: Vec::with_capacity(xs.len()),
            xs,
            ys,
            level,
            rows: 0,
            overflow: false,
            segments: Vec::new(),
            points: HashMap::new(),
        }
    }

    /// Feed the next value of the field.
    pub fn push(&mut self, value: f64) {
        if self.rows >= self.ys.len() || self.xs.is_empty() {
            self.overflow = true;
            return;
        }
        self.upper.push(value);
        if self.upper.len() == self.xs.len() {
            self.row_complete();
        }
    }

    fn row_complete(&mut self) {
        if self.rows > 0 && self.level.is_finite() {
            self.trace_row(self.rows - 1);
        }
        std::mem::swap(&mut self.lower, &mut self.upper);
        self.upper.clear();
        self.rows += 1;
    }

    /// Segments of the cells between grid rows `iy` and `iy + 1`, with the
    /// crossing points of their edges.
    fn trace_row(&mut self, iy: usize) {
        let row = CellRow {
            xs: &self.xs,
            ys: &self.ys,
            lower: &self.lower,
            upper: &self.upper,
            iy,
            level: self.level,
        };
        let first = self.segments.len();
        for ix in 0..self.xs.len().saturating_sub(1) {
            row.cell_segments(ix, &mut self.segments);
        }
        for seg in &self.segments[first..] {
            for &e in seg {
                self.points.entry(e).or_insert_with(|| row.point(e));
            }
        }
    }

    /// The level lines: segments joined into polylines; a closed line
    /// repeats its first point at the end. No lines unless exactly
    /// `xs.len() * ys.len()` values were fed, the grid is at least 2×2 and
    /// the level is finite.
    pub fn finish(self) -> Vec<Vec<(f64, f64)>> {
        let (nx, ny) = (self.xs.len(), self.ys.len());
        let complete = !self.overflow && self.rows == ny && self.upper.is_empty();
        if nx < 2 || ny < 2 || !complete || !self.level.is_finite() {
            return Vec::new();
        }
        join(&self.segments)
            .into_iter()
            .map(|chain| polyline(&self.points, &chain))
            .collect()
    }
}

/// Level lines `values == level` of a field sampled on the grid `xs × ys`.
///
/// `values` is row-major (`values[iy * xs.len() + ix]`); cells with a
/// non-finite corner are skipped. Segments are joined into polylines; a
/// closed line repeats its first point at the end. Returns no lines when the
/// sizes do not match, the grid is smaller than 2×2 or `level` is not finite.
pub fn contour_lines(xs: &[f64], ys: &[f64], values: &[f64], level: f64) -> Vec<Vec<(f64, f64)>> {
    let (nx, ny) = (xs.len(), ys.len());
    if nx < 2 || ny < 2 || values.len() != nx * ny || !level.is_finite() {
        return Vec::new();
    }
    let mut tracer = ContourTracer::new(xs.to_vec(), ys.to_vec(), level);
    for &v in values {
        tracer.push(v);
    }
    tracer.finish()
}

/// Turns a chain of edges into points, dropping repeated points (which
/// occur where the field equals the level exactly at a grid point).
fn polyline(at: &HashMap<Edge, (f64, f64)>, chain: &[Edge]) -> Vec<(f64, f64)> {
    let mut points: Vec<(f64, f64)> = Vec::with_capacity(chain.len());
    for edge in chain {
        let p = at[edge];
        if points.last() != Some(&p) {
            points.push(p);
        }
    }
    points
}

/// Joins segments sharing an edge into chains of edges. Open chains start at
/// an edge used by one segment only; the rest are loops, whose first edge
/// is repeated at the end.
fn join(segments: &[[Edge; 2]]) -> Vec<Vec<Edge>> {
    let mut at_edge: HashMap<Edge, Vec<usize>> = HashMap::new();
    for (i, seg) in segments.iter().enumerate() {
        for &e in seg {
            at_edge.entry(e).or_default().push(i);
        }
    }
    let degree = |e: &Edge| at_edge.get(e).map_or(0, Vec::len);
    let mut used = vec![false; segments.len()];
    let mut chains = Vec::new();
    for i in 0..segments.len() {
        if used[i] {
            continue;
        }
        if let Some(&start) = segments[i].iter().find(|e| degree(e) == 1) {
            chains.push(walk(segments, &at_edge, &mut used, i, start));
        }
    }
    for i in 0..segments.len() {
        if !used[i] {
            chains.push(walk(segments, &at_edge, &mut used, i, segments[i][0]));
        }
    }
    chains
}

/// Follows segments from `start` (an edge of segment `first`) until no
/// unused segment continues the chain.
fn walk(
    segments: &[[Edge; 2]],
    at_edge: &HashMap<Edge, Vec<usize>>,
    used: &mut [bool],
    first: usize,
    start: Edge,
) -> Vec<Edge> {
    let mut chain = vec![start];
    let (mut seg, mut from) = (first, start);
    loop {
        used[seg] = true;
        let [a, b] = segments[seg];
        let next = if a == from { b } else { a };
        chain.push(next);
        let continuation = at_edge[&next].iter().copied().find(|&s| !used[s]);
        match continuation {
            Some(s) => (seg, from) = (s, next),
            None => return chain,
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn linspace(a: f64, b: f64, n: usize) -> Vec<f64> {
        (0..n)
            .map(|i| a + (b - a) * i as f64 / (n - 1) as f64)
            .collect()
    }

    fn sample(xs: &[f64], ys: &[f64], f: impl Fn(f64, f64) -> f64) -> Vec<f64> {
        ys.iter()
            .flat_map(|&y| xs.iter().map(move |&x| (x, y)))
            .map(|(x, y)| f(x, y))
            .collect()
    }

    #[test]
    fn circle_is_one_closed_line_near_radius_one() {
        let g = linspace(-2.0, 2.0, 41);
        let step = g[1] - g[0];
        let v = sample(&g, &g, |x, y| x * x + y * y);
        let lines = contour_lines(&g, &g, &v, 1.0);
        assert_eq!(lines.len(), 1);
        let line = &lines[0];
        assert!(line.len() > 30, "only {} points", line.len());
        assert_eq!(line.first(), line.last(), "circle should be closed");
        for &(x, y) in line {
            let r = (x * x + y * y).sqrt();
            assert!((r - 1.0).abs() < step, "point at radius {r}");
        }
        // It goes all the way round: points in every quadrant.
        for (sx, sy) in [(1.0, 1.0), (-1.0, 1.0), (-1.0, -1.0), (1.0, -1.0)] {
            assert!(line.iter().any(|&(x, y)| x * sx > 0.3 && y * sy > 0.3));
        }
    }

    #[test]
    fn linear_field_gives_one_straight_open_line() {
        let xs = linspace(0.0, 3.0, 13);
        let ys = linspace(-1.0, 1.0, 9);
        let v = sample(&xs, &ys, |x, y| x + 2.0 * y);
        let lines = contour_lines(&xs, &ys, &v, 1.3);
        assert_eq!(lines.len(), 1);
        let line = &lines[0];
        assert_ne!(line.first(), line.last());
        for &(x, y) in line {
            assert!((x + 2.0 * y - 1.3).abs() < 1e-12);
        }
        // Both ends lie on the boundary of the grid.
        for &(x, y) in [line[0], line[line.len() - 1]].iter() {
            let on_edge = x.abs() < 1e-12
                || (x - 3.0).abs() < 1e-12
                || (y + 1.0).abs() < 1e-12
                || (y - 1.0).abs() < 1e-12;
            assert!(on_edge, "end ({x}, {y}) inside the grid");
        }
        // Ordered along the line: y decreases monotonically (or increases).
        let dy: Vec<f64> = line.windows(2).map(|w| w[1].1 - w[0].1).collect();
        assert!(dy.iter().all(|d| *d < 0.0) || dy.iter().all(|d| *d > 0.0));
    }

    #[test]
    fn nan_cells_are_skipped_and_split_the_line() {
        let g = linspace(0.0, 4.0, 5);
        let mut v = sample(&g, &g, |x, _| x);
        v[2 * 5] = f64::NAN; // grid point (ix = 0, iy = 2)
        let lines = contour_lines(&g, &g, &v, 0.5);
        assert_eq!(lines.len(), 2);
        for line in &lines {
            for &(x, y) in line {
                assert!((x - 0.5).abs() < 1e-12);
                assert!(y <= 1.0 || y >= 3.0, "point at y = {y} in a NaN cell");
            }
        }
    }

    #[test]
    fn saddle_cell_gives_two_separate_segments() {
        let g = [0.0, 1.0];
        // Corners (0,0) and (1,1) above 0.5, the other two below.
        let v = [1.0, 0.0, 0.0, 1.0];
        let mut lines = contour_lines(&g, &g, &v, 0.5);
        assert_eq!(lines.len(), 2);
        lines.sort_by(|a, b| a[0].partial_cmp(&b[0]).unwrap());
        for line in &lines {
            assert_eq!(line.len(), 2);
        }
        // Centre value 0.5 counts as above: the low corners are cut off.
        let mut ends: Vec<(f64, f64)> = lines.concat();
        ends.sort_by(|a, b| a.partial_cmp(b).unwrap());
        assert_eq!(ends, vec![(0.0, 0.5), (0.5, 0.0), (0.5, 1.0), (1.0, 0.5)]);
        let cuts_corner = |l: &Vec<(f64, f64)>, c: (f64, f64)| {
            l.iter()
                .all(|&(x, y)| (x - c.0).abs() <= 0.5 && (y - c.1).abs() <= 0.5)
        };
        assert!(lines.iter().any(|l| cuts_corner(l, (1.0, 0.0))));
        assert!(lines.iter().any(|l| cuts_corner(l, (0.0, 1.0))));
    }

    #[test]
    fn tracer_needs_exactly_the_whole_grid() {
        let g = linspace(0.0, 1.0, 3);
        let v = sample(&g, &g, |x, y| x + y);
        let feed = |values: &[f64]| {
            let mut t = ContourTracer::new(g.clone(), g.clone(), 1.0);
            values.iter().for_each(|&x| t.push(x));
            t.finish()
        };
        // x + y = 1 on a 3×3 grid: one straight line through (0.5, 0.5).
        let whole = feed(&v);
        assert_eq!(whole.len(), 1);
        assert!(whole[0].iter().all(|&(x, y)| (x + y - 1.0).abs() < 1e-12));
        assert!(feed(&v[..8]).is_empty(), "a row short");
        assert!(
            feed(&[&v[..], &[0.0]].concat()).is_empty(),
            "one value too many"
        );
    }

    #[test]
    fn degenerate_input_gives_no_lines() {
        let g = linspace(0.0, 1.0, 3);
        let v = sample(&g, &g, |x, y| x + y);
        assert!(contour_lines(&g, &g, &v, 5.0).is_empty());
        assert!(contour_lines(&g, &g, &v[..8], 1.0).is_empty());
        assert!(contour_lines(&g, &g, &v, f64::NAN).is_empty());
        assert!(contour_lines(&g[..1], &g, &v[..3], 0.5).is_empty());
    }
}
