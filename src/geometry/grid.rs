//! Walk along a ray through the cells of a square 2D grid (a digital differential analyser).
//!
//! Cells are squares of side `cell` in the xy plane, indexed by integers (i, j) with cell
//! (i, j) = [i·cell, (i+1)·cell) × [j·cell, (j+1)·cell). The walk yields, in order of t, each
//! cell the ray's xy projection passes through with its parameter interval [t0, t1].
//! Invariant: consecutive intervals share their boundary value bit for bit (t1 of one cell is
//! t0 of the next), and every boundary time is computed from its integer index alone, never
//! accumulated, so rounding does not drift over many cells. After J. Amanatides & A. Woo,
//! "A fast voxel traversal algorithm for ray tracing", Eurographics '87, 3 (1987).
//! Limits: at most `max_cells` cells are visited (the caller decides what that means).

use super::{Vec3, floor_i64};

/// One visited cell.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct GridCell {
    /// Cell index along x.
    pub i: i64,
    /// Cell index along y.
    pub j: i64,
    /// Ray parameter where the ray enters this cell (or the start of the walk).
    pub t0: f64,
    /// Ray parameter where the ray leaves this cell (or the end of the walk), ≥ t0.
    pub t1: f64,
}

/// Iterator over the cells along a ray segment [t_start, t_end].
#[derive(Clone, Debug)]
pub struct GridWalk {
    cell: f64,
    ox: f64,
    oy: f64,
    dx: f64,
    dy: f64,
    inv_dx: f64,
    inv_dy: f64,
    i: i64,
    j: i64,
    step_i: i64,
    step_j: i64,
    t_next_i: f64,
    t_next_j: f64,
    t: f64,
    t_end: f64,
    left: usize,
    done: bool,
}

impl GridWalk {
    /// Walk of the ray `o + t·d` over t ∈ [t_start, t_end] through cells of side `cell`.
    #[inline(always)]
    pub fn new(o: Vec3, d: Vec3, cell: f64, t_start: f64, t_end: f64, max_cells: usize) -> Self {
        let p = o + t_start * d;
        let inv_cell = 1.0 / cell;
        let i = floor_i64(p.x * inv_cell);
        let j = floor_i64(p.y * inv_cell);
        let step_i = if d.x > 0.0 { 1 } else { -1 };
        let step_j = if d.y > 0.0 { 1 } else { -1 };
        let mut w = GridWalk {
            cell,
            ox: o.x,
            oy: o.y,
            dx: d.x,
            dy: d.y,
            inv_dx: 1.0 / d.x,
            inv_dy: 1.0 / d.y,
            i,
            j,
            step_i,
            step_j,
            t_next_i: 0.0,
            t_next_j: 0.0,
            t: t_start,
            t_end,
            left: max_cells,
            done: t_start > t_end,
        };
        w.t_next_i = w.boundary_i();
        w.t_next_j = w.boundary_j();
        w
    }

    /// Parameter where the ray crosses the next x boundary of the current cell.
    #[inline(always)]
    fn boundary_i(&self) -> f64 {
        if self.dx == 0.0 {
            return f64::INFINITY;
        }
        let k = if self.step_i > 0 { self.i + 1 } else { self.i };
        (k as f64 * self.cell - self.ox) * self.inv_dx
    }

    #[inline(always)]
    fn boundary_j(&self) -> f64 {
        if self.dy == 0.0 {
            return f64::INFINITY;
        }
        let k = if self.step_j > 0 { self.j + 1 } else { self.j };
        (k as f64 * self.cell - self.oy) * self.inv_dy
    }

    /// True when the walk stopped because it reached `max_cells` before `t_end`.
    pub fn exhausted(&self) -> bool {
        self.left == 0 && !self.done
    }
}

impl Iterator for GridWalk {
    type Item = GridCell;

    #[inline(always)]
    fn next(&mut self) -> Option<GridCell> {
        if self.done || self.left == 0 {
            return None;
        }
        self.left -= 1;
        let t0 = self.t;
        let t_next = self.t_next_i.min(self.t_next_j);
        let (i, j) = (self.i, self.j);
        if t_next >= self.t_end {
            self.done = true;
            return Some(GridCell {
                i,
                j,
                t0,
                t1: self.t_end.max(t0),
            });
        }
        let t1 = t_next.max(t0);
        if self.t_next_i <= self.t_next_j {
            self.i += self.step_i;
            self.t_next_i = self.boundary_i();
        } else {
            self.j += self.step_j;
            self.t_next_j = self.boundary_j();
        }
        self.t = t1;
        Some(GridCell { i, j, t0, t1 })
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn intervals_tile_the_segment_and_cells_are_adjacent() {
        let o = Vec3::new(0.3, 0.7, 0.0);
        let d = Vec3::new(0.8, -0.36, 0.48).normalize();
        let cells: Vec<_> = GridWalk::new(o, d, 0.25, 0.0, 10.0, 10_000).collect();
        assert_eq!(cells[0].t0, 0.0);
        assert_eq!(cells.last().unwrap().t1, 10.0);
        for w in cells.windows(2) {
            assert_eq!(w[0].t1, w[1].t0);
            assert_eq!((w[0].i - w[1].i).abs() + (w[0].j - w[1].j).abs(), 1);
        }
        // Each midpoint lies in its cell.
        for c in &cells {
            if c.t1 > c.t0 {
                let p = o + 0.5 * (c.t0 + c.t1) * d;
                assert_eq!((p.x / 0.25).floor() as i64, c.i);
                assert_eq!((p.y / 0.25).floor() as i64, c.j);
            }
        }
    }

    #[test]
    fn vertical_ray_visits_one_cell_and_limit_stops_walk() {
        let v: Vec<_> =
            GridWalk::new(Vec3::new(1.1, 2.2, 5.0), Vec3::NEG_Z, 1.0, 0.0, 7.0, 10).collect();
        assert_eq!(
            v,
            vec![GridCell {
                i: 1,
                j: 2,
                t0: 0.0,
                t1: 7.0
            }]
        );
        let mut w = GridWalk::new(Vec3::ZERO, Vec3::X, 1.0, 0.0, 100.0, 5);
        assert_eq!(w.by_ref().count(), 5);
        assert!(w.exhausted());
    }
}
