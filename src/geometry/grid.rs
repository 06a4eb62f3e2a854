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

use super::{Vec3, floor_i64, greater, lesser};

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

/// Iterator over the cells along a ray segment [t_start, t_end]. Lean enough for the fast
/// paths (state in registers, one-instruction minima and maxima: no NaN can arise).
#[derive(Clone, Debug)]
pub struct GridWalk {
    cell: f64,
    ox: f64,
    oy: f64,
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
    /// Cells the walk may still visit.
    left: usize,
    /// The last cell (the one holding t_end) has been visited.
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
        let (inv_dx, inv_dy) = (1.0 / d.x, 1.0 / d.y);
        GridWalk {
            cell,
            ox: o.x,
            oy: o.y,
            inv_dx,
            inv_dy,
            i,
            j,
            step_i,
            step_j,
            t_next_i: boundary(i, step_i, cell, o.x, d.x, inv_dx),
            t_next_j: boundary(j, step_j, cell, o.y, d.y, inv_dy),
            t: t_start,
            t_end,
            left: max_cells,
            done: t_start > t_end,
        }
    }

    /// True when the walk stopped because it reached `max_cells` before `t_end`.
    pub fn exhausted(&self) -> bool {
        self.left == 0 && !self.done
    }
}

/// Parameter where the ray crosses the next wall of cell `i` along one axis (∞ for a ray
/// parallel to the walls, d = 0).
#[inline(always)]
fn boundary(i: i64, step: i64, cell: f64, o: f64, d: f64, inv_d: f64) -> f64 {
    if d == 0.0 {
        return f64::INFINITY;
    }
    let k = if step > 0 { i + 1 } else { i };
    (k as f64 * cell - o) * inv_d
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
        let t_next = lesser(self.t_next_i, self.t_next_j);
        let (i, j) = (self.i, self.j);
        if t_next >= self.t_end {
            self.done = true;
            return Some(GridCell {
                i,
                j,
                t0,
                t1: greater(self.t_end, t0),
            });
        }
        let t1 = greater(t_next, t0);
        // (A wall is crossed only along an axis the ray moves on: d ≠ 0 there, so the
        // boundary's zero test can be skipped by passing 1.)
        if self.t_next_i <= self.t_next_j {
            self.i += self.step_i;
            self.t_next_i = boundary(self.i, self.step_i, self.cell, self.ox, 1.0, self.inv_dx);
        } else {
            self.j += self.step_j;
            self.t_next_j = boundary(self.j, self.step_j, self.cell, self.oy, 1.0, self.inv_dy);
        }
        self.t = t1;
        Some(GridCell { i, j, t0, t1 })
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::sampling::Stream;

    /// The walk written plainly (Amanatides & Woo 1987, with `f64::min`/`max` and every
    /// boundary tested for d = 0), to check the lean one against.
    fn plain_walk(o: Vec3, d: Vec3, cell: f64, t0: f64, t_end: f64, max: usize) -> Vec<GridCell> {
        let p = o + t0 * d;
        let inv_cell = 1.0 / cell;
        let (mut i, mut j) = (
            (p.x * inv_cell).floor() as i64,
            (p.y * inv_cell).floor() as i64,
        );
        let next = |k: i64, step: f64, o: f64, dv: f64| {
            if dv == 0.0 {
                f64::INFINITY
            } else {
                ((if step > 0.0 { k + 1 } else { k }) as f64 * cell - o) * (1.0 / dv)
            }
        };
        let (si, sj) = (
            if d.x > 0.0 { 1.0 } else { -1.0 },
            if d.y > 0.0 { 1.0 } else { -1.0 },
        );
        let (mut ni, mut nj) = (next(i, si, o.x, d.x), next(j, sj, o.y, d.y));
        let (mut t, mut out) = (t0, Vec::new());
        while out.len() < max && t0 <= t_end {
            let tn = ni.min(nj);
            if tn >= t_end {
                out.push(GridCell {
                    i,
                    j,
                    t0: t,
                    t1: t_end.max(t),
                });
                break;
            }
            let t1 = tn.max(t);
            out.push(GridCell { i, j, t0: t, t1 });
            if ni <= nj {
                i += si as i64;
                ni = next(i, si, o.x, d.x);
            } else {
                j += sj as i64;
                nj = next(j, sj, o.y, d.y);
            }
            t = t1;
        }
        out
    }

    #[test]
    fn lean_walk_equals_the_plain_walk_bit_for_bit() {
        let mut rng = Stream::new(29, 0, 0);
        for k in 0..2000 {
            let mut d = if k % 3 == 0 {
                rng.cosine_hemisphere()
            } else {
                rng.uniform_hemisphere()
            };
            if k % 2 == 0 {
                d.z = -d.z;
            }
            if k % 7 == 0 {
                d = Vec3::new(d.x, 0.0, d.z).normalize();
            }
            let o = Vec3::new(rng.uniform() * 9.0 - 1.0, rng.uniform() * 9.0 - 1.0, 0.5);
            let (t0, t1) = (rng.uniform(), 2.0 + 30.0 * rng.uniform());
            let lean: Vec<GridCell> = GridWalk::new(o, d, 0.7, t0, t1, 500).collect();
            assert_eq!(lean, plain_walk(o, d, 0.7, t0, t1, 500), "ray {k}");
        }
    }

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
