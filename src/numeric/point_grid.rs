//! Points of the plane binned into a uniform grid of square cells, for searches among
//! neighbours that look at a few cells instead of descending a tree.

use super::Grouped;

/// Points binned into square cells (a counting sort by cell): the nearest two of a query
/// ([`PointGrid::nearest_two`], for the motion estimate) and the points within a cell's
/// reach of one ([`PointGrid::for_each_near`], for the pair correlation).
pub(crate) struct PointGrid<'a> {
    points: &'a [[f64; 2]],
    origin: [f64; 2],
    cell: f64,
    columns: usize,
    rows: usize,
    /// The points of each cell (row-major), ascending index.
    by_cell: Grouped<u32>,
}

impl<'a> PointGrid<'a> {
    /// About one point per cell over the points' box (two or four per cell were slower for
    /// [`PointGrid::nearest_two`]), and never more cells along a side than half the points (a
    /// box as thin as a line).
    pub(crate) fn new(points: &'a [[f64; 2]]) -> Self {
        let (lo, span) = bounds(points);
        let n = points.len().max(1) as f64;
        let cell = (span[0] * span[1] / n).sqrt().max(2.0 * span[0].max(span[1]) / n);
        let cell = if cell.is_finite() && cell > 0.0 { cell } else { 1.0 };
        Self::over_box(points, (lo, span), cell)
    }

    /// Cells `cell` wide (finite and positive), at most 4096 along a side: beyond that the
    /// last column (or row) holds the rest. Clamping keeps neighbours neighbours: two points
    /// less than a cell apart along an axis (less by more than the division's rounding) lie
    /// in the same or neighbouring columns (rows).
    pub(crate) fn with_cell(points: &'a [[f64; 2]], cell: f64) -> Self {
        Self::over_box(points, bounds(points), cell)
    }

    /// [`PointGrid::with_cell`] with the points' box ([`bounds`]) already found.
    fn over_box(points: &'a [[f64; 2]], (lo, span): ([f64; 2], [f64; 2]), cell: f64) -> Self {
        // Saturating: a box wider than the largest float (points near ±1e308) has an
        // infinite extent, whose cell count converts to the largest integer.
        let count = |extent: f64| ((extent / cell) as usize).saturating_add(1).min(1 << 12);
        let (columns, rows) = (count(span[0]), count(span[1]));
        let mut grid = PointGrid {
            points,
            origin: lo,
            cell,
            columns,
            rows,
            // Filled below: a point's cell needs the grid's geometry above.
            by_cell: Grouped::default(),
        };
        let cells: Vec<usize> = points.iter().map(|p| grid.cell_of(p)).collect();
        let indexed = cells.iter().enumerate().map(|(i, &c)| (c, i as u32));
        grid.by_cell = Grouped::of(columns * rows, indexed);
        grid
    }

    /// The (column, row) of the cell holding `p`, clamped to the grid.
    fn column_row(&self, p: &[f64; 2]) -> (usize, usize) {
        let at = |v: f64, lo: f64, n: usize| (((v - lo) / self.cell).max(0.0) as usize).min(n - 1);
        (
            at(p[0], self.origin[0], self.columns),
            at(p[1], self.origin[1], self.rows),
        )
    }

    fn cell_of(&self, p: &[f64; 2]) -> usize {
        let (x, y) = self.column_row(p);
        y * self.columns + x
    }

    /// For one query: the index of its nearest point, and the squared distances to the
    /// nearest and the second nearest (ties for the nearest go to the lower index). Ring `r`
    /// holds the cells `r` steps away (Chebyshev) from the query's cell (or the nearest cell,
    /// for a query outside the grid); a point in ring `r` or beyond lies outside the square of
    /// rings `0..r`, at least the query's distance to the edge of its own cell plus `r − 1`
    /// cells away along one axis, so once that bound squared exceeds the second nearest
    /// squared distance, no unseen point can come nearer or tie.
    pub(crate) fn nearest_two(&self, q: &[f64; 2]) -> (usize, f64, f64) {
        let (cx, cy) = self.column_row(q);
        let mut best = (usize::MAX, f64::INFINITY, f64::INFINITY);
        let reach = self.columns.max(self.rows);
        // The query's distance to the edges of its own cell (negative outside it).
        let (left, top) = (
            q[0] - (self.origin[0] + cx as f64 * self.cell),
            q[1] - (self.origin[1] + cy as f64 * self.cell),
        );
        let inside = left.min(top).min(self.cell - left).min(self.cell - top);
        for r in 0..=reach {
            // Every point of ring r or beyond lies outside the square of rings 0..r.
            let bound = inside + r.saturating_sub(1) as f64 * self.cell;
            if r > 0 && bound > 0.0 && bound * bound > best.2 {
                break;
            }
            self.for_each_in_ring(cx, cy, r, |i| {
                let d = super::squared_distance(q, &self.points[i]);
                // Without branches: which way a comparison goes is not predictable.
                let nearer = d < best.1 || (d == best.1 && i < best.0);
                best.2 = if nearer { best.1 } else { best.2.min(d) };
                best.1 = if nearer { d } else { best.1 };
                best.0 = if nearer { i } else { best.0 };
            });
        }
        best
    }

    /// Calls `f` with the index of every point in the cells of ring `r` around `(cx, cy)`.
    fn for_each_in_ring(&self, cx: usize, cy: usize, r: usize, mut f: impl FnMut(usize)) {
        let mut cell = |x: usize, y: usize| {
            for &i in self.by_cell.group(y * self.columns + x) {
                f(i as usize);
            }
        };
        let (x0, x1) = (cx.saturating_sub(r), (cx + r).min(self.columns - 1));
        let (y0, y1) = (cy.saturating_sub(r), (cy + r).min(self.rows - 1));
        for y in y0..=y1 {
            if r == 0 || y + r == cy || y == cy + r {
                // The ring's top or bottom row: all of it within the grid.
                (x0..=x1).for_each(|x| cell(x, y));
            } else {
                // A row between them: its left and right cells, where the grid has them.
                if cx >= r {
                    cell(cx - r, y);
                }
                if cx + r < self.columns {
                    cell(cx + r, y);
                }
            }
        }
    }

    /// Calls `f` with the index of every point in the cell of `p` and the eight around it
    /// (each cell's in ascending index): among them every point nearer to `p` than a cell's
    /// width along both axes, when the cell is a little wider than that distance (a
    /// millionth covers the rounding of the cells' arithmetic).
    pub(crate) fn for_each_near(&self, p: &[f64; 2], mut f: impl FnMut(usize)) {
        let (cx, cy) = self.column_row(p);
        self.for_each_in_ring(cx, cy, 0, &mut f);
        self.for_each_in_ring(cx, cy, 1, &mut f);
    }
}

/// The lower corner of the points' box and its width and height (0 for no points).
fn bounds(points: &[[f64; 2]]) -> ([f64; 2], [f64; 2]) {
    let (mut lo, mut hi) = ([f64::INFINITY; 2], [f64::NEG_INFINITY; 2]);
    for p in points {
        for a in 0..2 {
            lo[a] = lo[a].min(p[a]);
            hi[a] = hi[a].max(p[a]);
        }
    }
    (lo, [(hi[0] - lo[0]).max(0.0), (hi[1] - lo[1]).max(0.0)])
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn a_box_wider_than_the_largest_float_keeps_neighbours_neighbours() {
        // Source: IEEE 754 (a difference of finite numbers can overflow to infinity, and a
        // float converts to an integer saturating): points near ±1e308 span an infinite width,
        // the grid clamps to its largest size, and two points within a cell of each other are
        // still found from either; no index runs past the grid.
        let points = [[-1e308, 0.0], [1e308, 0.0], [1e308, 0.5], [0.0, 0.0]];
        let grid = PointGrid::with_cell(&points, 1.0);
        let near = |i: usize| {
            let mut found = Vec::new();
            grid.for_each_near(&points[i], |j| found.push(j));
            found
        };
        assert!(near(1).contains(&2) && near(2).contains(&1));
        assert!(near(0).contains(&0) && !near(0).contains(&1));
    }
}
