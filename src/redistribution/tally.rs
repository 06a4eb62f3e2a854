//! Accumulator of Monte Carlo events into redistribution matrices with batch standard errors.
//!
//! How the surface tracer fills it (one work chunk = one batch of one incoming column):
//!
//! ```text
//! let mut tally = MatrixTally::new(setup)?;
//! for (side, in_bin) in every incoming column, for chunk in 0..n_chunks (fixed order):
//!     let mut batch = tally.batch(side, in_bin);      // a ColumnBatch, small
//!     for each ray: dir = bins.sample(in_bin, hemisphere, u1, u2); batch.launch(weight);
//!         … trace …; then exactly one of, per unit of weight that leaves:
//!         batch.add(out_side, bins.index(dir_out), w)   // left into the medium on out_side
//!         batch.absorb(layer, w)                          // absorbed in film layer
//!         batch.lose(w)                                   // lost to numerics (counted)
//!     tally.add_batch(&batch)?;                           // in chunk order: deterministic
//! let matrices = tally.finish()?;
//! ```
//!
//! `out_side` is the medium the ray ends in: `Side::Above` = it leaves upwards into the
//! medium above, `Side::Below` = downwards into the medium below. With the batch's incoming
//! side this decides R (same side) or T (other side). Chunks computed in parallel each fill
//! their own `ColumnBatch`; the caller adds them in a fixed order (or merges whole tallies
//! with [`MatrixTally::merge`], also in a fixed order).
//!
//! Estimator: per column, the pooled ratio r = Σ_b s_b / Σ_b n_b over batches b (s_b weight
//! into an outcome, n_b weight launched), with the ratio-estimator variance
//! SE² = B/(B−1) · Σ_b (s_b − r n_b)² / (Σ_b n_b)² (W. G. Cochran, *Sampling Techniques*,
//! 3rd ed., Wiley (1977), §6.4, from memory). Fewer than two batches give SE = NaN.
//!
//! Memory: 3 · 2n · (2n + L + 1) · 8 bytes for n bins and L film layers (≈ 0.55 GB at
//! n = 2400); [`MatrixTally::memory_bytes`] gives it before allocating.

use super::MatrixError;
use super::dense::Matrix;
use super::matrix::{InterfaceMatrices, InterfaceSetup, Side, SideMatrices};

/// Raw sums of one batch for one incoming column.
#[derive(Clone, Debug, PartialEq)]
pub struct ColumnBatch {
    side: Side,
    in_bin: usize,
    n: usize,
    layers: usize,
    launched: f64,
    rays: u64,
    /// [R bins (n) | T bins (n) | film layers (L) | lost (1)].
    sums: Vec<f64>,
}

impl ColumnBatch {
    /// A ray of `weight` arrives in the incoming bin.
    #[inline]
    pub fn launch(&mut self, weight: f64) {
        self.launched += weight;
        self.rays += 1;
    }
    /// Weight leaving into the medium on `out_side` in bin `out_bin` (its propagation
    /// direction binned with [`super::AngleBins::index`]).
    #[inline]
    pub fn add(&mut self, out_side: Side, out_bin: usize, weight: f64) {
        debug_assert!(out_bin < self.n);
        let base = if out_side == self.side { 0 } else { self.n };
        self.sums[base + out_bin.min(self.n - 1)] += weight;
    }
    /// Weight absorbed in film layer `layer` (0 = top).
    #[inline]
    pub fn absorb(&mut self, layer: usize, weight: f64) {
        debug_assert!(layer < self.layers);
        self.sums[2 * self.n + layer.min(self.layers.saturating_sub(1))] += weight;
    }
    /// Weight lost to numerics (bounce limit, no hit found): kept out of R, T, A and visible
    /// in the energy audit.
    #[inline]
    pub fn lose(&mut self, weight: f64) {
        let k = self.sums.len() - 1;
        self.sums[k] += weight;
    }
    /// Incoming side and bin of this batch.
    pub fn column(&self) -> (Side, usize) {
        (self.side, self.in_bin)
    }
}

/// Batch statistics of every column of an interface (both sides).
#[derive(Clone, Debug)]
pub struct MatrixTally {
    setup: InterfaceSetup,
    n: usize,
    k: usize,
    /// Per column (side · n + j): Σ n_b, Σ n_b², batch count, ray count.
    launched: Vec<f64>,
    launched2: Vec<f64>,
    batches: Vec<u64>,
    rays: Vec<u64>,
    /// Per column and outcome: Σ s_b, Σ s_b², Σ s_b n_b.
    s: Vec<f64>,
    q: Vec<f64>,
    x: Vec<f64>,
}

fn col_index(side: Side, j: usize, n: usize) -> usize {
    match side {
        Side::Above => j,
        Side::Below => n + j,
    }
}

impl MatrixTally {
    /// Bytes the statistics take for this setup.
    pub fn memory_bytes(setup: &InterfaceSetup) -> usize {
        let n = setup.bins.len();
        3 * 2 * n * (2 * n + setup.film_layers.len() + 1) * 8
    }

    /// Empty tally for an interface.
    pub fn new(setup: InterfaceSetup) -> Result<Self, MatrixError> {
        let n = setup.bins.len();
        let k = 2 * n + setup.film_layers.len() + 1;
        let cols = 2 * n;
        Ok(MatrixTally {
            setup,
            n,
            k,
            launched: vec![0.0; cols],
            launched2: vec![0.0; cols],
            batches: vec![0; cols],
            rays: vec![0; cols],
            s: vec![0.0; cols * k],
            q: vec![0.0; cols * k],
            x: vec![0.0; cols * k],
        })
    }

    pub fn setup(&self) -> &InterfaceSetup {
        &self.setup
    }

    /// A fresh batch for incoming column (`side`, `in_bin`).
    pub fn batch(&self, side: Side, in_bin: usize) -> ColumnBatch {
        ColumnBatch {
            side,
            in_bin: in_bin.min(self.n - 1),
            n: self.n,
            layers: self.setup.film_layers.len(),
            launched: 0.0,
            rays: 0,
            sums: vec![0.0; self.k],
        }
    }

    /// Folds one batch into the statistics. A batch with no launched weight is ignored.
    pub fn add_batch(&mut self, b: &ColumnBatch) -> Result<(), MatrixError> {
        if b.n != self.n || b.sums.len() != self.k {
            return Err(MatrixError::Tally {
                problem: format!(
                    "batch for {} bins and {} outcomes added to a tally for {} bins and {}",
                    b.n,
                    b.sums.len(),
                    self.n,
                    self.k
                ),
                fix: "make batches with `MatrixTally::batch` of the same tally".into(),
            });
        }
        if b.launched <= 0.0 {
            return Ok(());
        }
        let c = col_index(b.side, b.in_bin, self.n);
        self.launched[c] += b.launched;
        self.launched2[c] += b.launched * b.launched;
        self.batches[c] += 1;
        self.rays[c] += b.rays;
        let base = c * self.k;
        for (o, v) in b.sums.iter().enumerate() {
            self.s[base + o] += v;
            self.q[base + o] += v * v;
            self.x[base + o] += v * b.launched;
        }
        Ok(())
    }

    /// Adds another tally's statistics (same setup) — batches stay batches.
    pub fn merge(&mut self, other: &MatrixTally) -> Result<(), MatrixError> {
        if other.setup != self.setup {
            return Err(MatrixError::Tally {
                problem: "merging tallies of different interfaces, bins or wavelengths".into(),
                fix: "merge only tallies made from the same InterfaceSetup".into(),
            });
        }
        for (a, b) in [
            (&mut self.launched, &other.launched),
            (&mut self.launched2, &other.launched2),
            (&mut self.s, &other.s),
            (&mut self.q, &other.q),
            (&mut self.x, &other.x),
        ] {
            a.iter_mut().zip(b).for_each(|(x, y)| *x += y);
        }
        self.batches
            .iter_mut()
            .zip(&other.batches)
            .for_each(|(x, y)| *x += y);
        self.rays
            .iter_mut()
            .zip(&other.rays)
            .for_each(|(x, y)| *x += y);
        Ok(())
    }

    /// Rays launched so far into column (`side`, `in_bin`).
    pub fn rays(&self, side: Side, in_bin: usize) -> u64 {
        self.rays[col_index(side, in_bin, self.n)]
    }
    /// Batches folded so far into column (`side`, `in_bin`).
    pub fn batches(&self, side: Side, in_bin: usize) -> u64 {
        self.batches[col_index(side, in_bin, self.n)]
    }
    /// Total rays over all columns.
    pub fn total_rays(&self) -> u64 {
        self.rays.iter().sum()
    }

    /// Estimated matrices with standard errors and audits. Every column must have rays.
    pub fn finish(&self) -> Result<InterfaceMatrices, MatrixError> {
        let (n, l) = (self.n, self.setup.film_layers.len());
        let mut est = [SideMatrices::zeros(n, l), SideMatrices::zeros(n, l)];
        let mut err = [SideMatrices::zeros(n, l), SideMatrices::zeros(n, l)];
        for (si, side) in [Side::Above, Side::Below].into_iter().enumerate() {
            for j in 0..n {
                let c = col_index(side, j, n);
                let nn = self.launched[c];
                if nn <= 0.0 {
                    return Err(MatrixError::Tally {
                        problem: format!(
                            "incoming bin {j} from {} has no rays",
                            if side == Side::Above {
                                "above"
                            } else {
                                "below"
                            }
                        ),
                        fix: "trace every incoming bin of both sides before finishing".into(),
                    });
                }
                let b = self.batches[c] as f64;
                for o in 0..self.k - 1 {
                    let idx = c * self.k + o;
                    let r = self.s[idx] / nn;
                    let se = if b >= 2.0 {
                        let ss = self.q[idx] - 2.0 * r * self.x[idx] + r * r * self.launched2[c];
                        (b / (b - 1.0) * ss.max(0.0)).sqrt() / nn
                    } else {
                        f64::NAN
                    };
                    let (m, e): (&mut Matrix, &mut Matrix) = if o < n {
                        (&mut est[si].reflection, &mut err[si].reflection)
                    } else if o < 2 * n {
                        (&mut est[si].transmission, &mut err[si].transmission)
                    } else {
                        (&mut est[si].absorption, &mut err[si].absorption)
                    };
                    let row = if o < n {
                        o
                    } else if o < 2 * n {
                        o - n
                    } else {
                        o - 2 * n
                    };
                    m.set(row, j, r);
                    e.set(row, j, se);
                }
            }
        }
        let [ea, eb] = err;
        let [a, b] = est;
        InterfaceMatrices::new(
            self.setup.clone(),
            a,
            b,
            Some((ea, eb)),
            format!("monte carlo: {} rays", self.total_rays()),
        )
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::redistribution::{AngleBins, MediumInfo};
    use crate::texture::Symmetry;

    fn setup() -> InterfaceSetup {
        InterfaceSetup {
            bins: AngleBins::equal_etendue(2, 1, Symmetry::Isotropic).unwrap(),
            wavelength_nm: 800.0,
            above: MediumInfo::new("air", 1.0),
            below: MediumInfo::new("glass", 1.5),
            film_layers: vec!["film".into()],
        }
    }

    #[test]
    fn batch_means_and_errors_match_hand_computation() {
        let mut t = MatrixTally::new(setup()).unwrap();
        // Column (above, 0): batches with R-fractions 0.2, 0.4 of 10 rays each.
        for r_count in [2, 4] {
            let mut b = t.batch(Side::Above, 0);
            for k in 0..10 {
                b.launch(1.0);
                if k < r_count {
                    b.add(Side::Above, 1, 1.0)
                } else {
                    b.add(Side::Below, 0, 1.0)
                }
            }
            t.add_batch(&b).unwrap();
        }
        for side in [Side::Above, Side::Below] {
            for j in 0..2 {
                if (side, j) != (Side::Above, 0) {
                    let mut b = t.batch(side, j);
                    b.launch(1.0);
                    b.absorb(0, 0.5);
                    b.lose(0.5);
                    t.add_batch(&b).unwrap();
                }
            }
        }
        let m = t.finish().unwrap();
        assert!((m.from_above.reflection.get(1, 0) - 0.3).abs() < 1e-15);
        // Two batch fractions 0.2, 0.4: SE of the mean = |0.4 − 0.2| / 2 = 0.1.
        let se = m.std_error.as_ref().unwrap().0.reflection.get(1, 0);
        assert!((se - 0.1).abs() < 1e-15, "se = {se}");
        assert!(
            (m.audit.energy_max_abs - 0.5).abs() < 1e-15,
            "lost weight shows in the audit"
        );
        assert_eq!(t.rays(Side::Above, 0), 20);
    }

    #[test]
    fn missing_column_is_an_error() {
        let t = MatrixTally::new(setup()).unwrap();
        assert!(matches!(t.finish(), Err(MatrixError::Tally { .. })));
    }
}

#[cfg(test)]
mod reciprocity_tests {
    use super::*;
    use crate::redistribution::{AngleBins, Hemisphere, MediumInfo};
    use crate::sampling::Stream;
    use crate::texture::Symmetry;

    /// Synthetic Monte Carlo of an ideal Lambertian randomiser between n = 1 and n = 2:
    /// from above everything enters (T = 1), from below 1/n² escapes, the rest is reflected;
    /// outgoing directions cosine-distributed. This kernel is reciprocal, so the audit's
    /// largest residual/σ must stay within the Gaussian extreme-value tolerance.
    #[test]
    fn lambertian_randomiser_tally_is_reciprocal_within_its_errors() {
        let n = 2.0;
        let bins = AngleBins::equal_etendue(4, 4, Symmetry::None).unwrap();
        let setup = InterfaceSetup {
            bins: bins.clone(),
            wavelength_nm: 1000.0,
            above: MediumInfo::new("air", 1.0),
            below: MediumInfo::new("x", n),
            film_layers: vec![],
        };
        let mut tally = MatrixTally::new(setup).unwrap();
        for (si, side) in [Side::Above, Side::Below].into_iter().enumerate() {
            for j in 0..bins.len() {
                for chunk in 0..8u64 {
                    let mut rng = Stream::new(7, (si * 1000 + j) as u64, chunk);
                    let mut b = tally.batch(side, j);
                    for _ in 0..2000 {
                        b.launch(1.0);
                        let escape = side == Side::Above || rng.uniform() < 1.0 / (n * n);
                        let out_side = match (side, escape) {
                            (Side::Above, _) | (Side::Below, false) => Side::Below,
                            (Side::Below, true) => Side::Above,
                        };
                        let h = if out_side == Side::Above {
                            Hemisphere::Up
                        } else {
                            Hemisphere::Down
                        };
                        // Cosine-weighted direction: uniform in sin²θ and φ.
                        let (u1, u2) = (rng.uniform(), rng.uniform());
                        let phi = std::f64::consts::TAU * u2;
                        let dir = crate::geometry::Vec3::new(
                            u1.sqrt() * phi.cos(),
                            u1.sqrt() * phi.sin(),
                            h.sign() * (1.0 - u1).sqrt(),
                        );
                        b.add(out_side, bins.index(dir), 1.0);
                    }
                    tally.add_batch(&b).unwrap();
                }
            }
        }
        let m = tally.finish().unwrap();
        let a = &m.audit;
        assert!(a.energy_max_abs < 1e-12, "{a:?}");
        let tol = (2.0 * (2.0 * a.reciprocity_pairs as f64).ln()).sqrt() + 1.0;
        let z = a.reciprocity_max_sigma.unwrap();
        assert!(
            z < tol,
            "max residual {z:.2} σ over {} pairs, tolerance {tol:.2} σ",
            a.reciprocity_pairs
        );
        // And it must detect a broken kernel: double one transmission element.
        let mut broken = m.clone();
        let v = broken.from_above.transmission.get(3, 5);
        broken.from_above.transmission.set(3, 5, 2.0 * v);
        assert!(broken.compute_audit().reciprocity_max_sigma.unwrap() > tol);
    }
}
