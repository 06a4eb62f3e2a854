//! The matrix solver's estimate of its own binning (angular discretisation) error.
//!
//! # What is estimated, and why it is conservative
//!
//! The matrix method replaces the radiance inside each angular bin by a uniform one (the
//! matrices' normalisation), so every result Q depends on the bin width h. The stack is solved
//! again on bins twice as wide, Q(2h), made from the *same* matrices merged pairwise
//! ([`crate::redistribution::InterfaceMatrices::merged`]: exactly what building them on the
//! coarse bins gives, from the same rays for traced interfaces), so no new tracing is needed.
//!
//! * **Smooth radiance.** Once the bins resolve the light's angular structure, the error
//!   behaves as Q(h) − Q(0) ≈ C hᵖ with p ≥ 1, and Richardson's deferred approach to the limit
//!   (L. F. Richardson, Phil. Trans. R. Soc. Lond. A 210, 307 (1911), from memory) gives the
//!   fine result's error as (Q(h) − Q(2h)) / (2ᵖ − 1) ≤ |Q(h) − Q(2h)| for every p ≥ 1.
//! * **A step inside a bin** (the critical angle of a planar interface, the edge of a
//!   specular cone) gives an error K h φ(1 − φ), φ the step's fractional position in its bin:
//!   first order, but with a coefficient that changes with the bins. Pairing (1, 2), (3, 4), …
//!   puts the step at φ/2 or (1 + φ)/2 of its coarse bin; the two pairings together, (k, k+1),
//!   … and (k+1, k+2), …, give differences of K h φ²/2 and K h (1 − φ)²/2, the larger of which
//!   is at least half the fine error for every φ.
//!
//! So the estimate is, per output, [`BINNING_SAFETY_FACTOR`] (2) × (the larger |Q(h) − Q(2h)|
//! of the two polar pairings + |Q(h) − Q(2h)| with azimuth bins merged pairwise, when their
//! count is even and above 1). Polar and azimuthal differences are added, not combined in
//! quadrature, so that errors of opposite sign cannot cancel. Cost: up to three solves on half
//! the bins, each about 1/8 of the fine solve for the dense LU, plus O(n²) merges.
//! Over a spectrum, errors add linearly (they are systematic, not random).
//!
//! # Limits of the estimate
//!
//! * Very coarse bins (≲ 8 polar bins, the step in the first regular bin) are pre-asymptotic
//!   and can be underestimated; check that the estimate shrinks as bins are refined
//!   (tests/matrix_vs_direct.rs and the test below do). It need not shrink at every single
//!   doubling (the step's position inside its bin changes), only over larger refinements.
//! * Azimuth bins are merged in one pairing only (the bins start at the fold's φ = 0), so a
//!   step in azimuth is fully covered only where the pairing happens to straddle it.
//! * Monte Carlo noise of traced matrices enters the differences too. Both solves use the same
//!   rays, so most of it cancels; what remains makes the estimate larger on average.
//! * A narrow leading polar bin standing for collimated normal incidence is kept as it is
//!   ([`BinningCheck::keep_polar`]): merging it would change the illumination, not the
//!   resolution.

use super::WaferError;
use super::stack::{SolverOptions, Stack, StackElement, StackResult};
use crate::redistribution::AngleBins;

/// How the coarse bins of the estimate are made from the stack's bins.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Default)]
pub struct BinningCheck {
    /// Leading polar bins (from the normal) kept unmerged: 1 when the first bin is a narrow
    /// one standing for collimated normal incidence, 0 for plain equal-étendue bins.
    pub keep_polar: usize,
}

/// Estimated binning error of a solve: for every output of [`StackResult`], the sum over the
/// coarse solves of |fine − coarse|. Non-negative fractions of the incident power.
#[derive(Clone, Debug, PartialEq, serde::Serialize)]
pub struct BinningError {
    /// (polar, azimuth) bin counts of each coarse solve, in the order they were added.
    pub coarse_bins: Vec<[usize; 2]>,
    pub reflectance: f64,
    /// Of the reflectance that never entered the wafer ("front reflection").
    pub reflectance_front: f64,
    pub escape: f64,
    pub transmittance: f64,
    /// One per thick layer, top to bottom.
    pub thick_absorptance: Vec<f64>,
    /// [interface][film layer], top to bottom.
    pub film_absorptance: Vec<Vec<f64>>,
    pub unaccounted: f64,
}

/// Safety factor on the largest difference per direction (module doc: ≥ 1 suffices for
/// smooth radiance, 2 covers a step inside a bin).
pub const BINNING_SAFETY_FACTOR: f64 = 2.0;

impl BinningError {
    /// |fine − coarse| for every output.
    fn difference(fine: &StackResult, coarse: &StackResult) -> Self {
        let d = |a: f64, b: f64| (a - b).abs();
        BinningError {
            coarse_bins: vec![[coarse.bins.n_polar(), coarse.bins.n_azimuth()]],
            reflectance: d(fine.reflectance, coarse.reflectance),
            reflectance_front: d(fine.reflectance_front, coarse.reflectance_front),
            escape: d(fine.escape, coarse.escape),
            transmittance: d(fine.transmittance, coarse.transmittance),
            thick_absorptance: fine
                .thick_absorptance
                .iter()
                .zip(&coarse.thick_absorptance)
                .map(|(a, b)| d(*a, *b))
                .collect(),
            film_absorptance: fine
                .film_absorptance
                .iter()
                .zip(&coarse.film_absorptance)
                .map(|(a, b)| a.iter().zip(b).map(|(u, v)| d(*u, *v)).collect())
                .collect(),
            unaccounted: d(fine.unaccounted, coarse.unaccounted),
        }
    }

    /// Element-wise `f(self, other)`; the coarse bin lists are joined.
    fn zip(&self, other: &Self, f: impl Fn(f64, f64) -> f64) -> Self {
        BinningError {
            coarse_bins: [self.coarse_bins.clone(), other.coarse_bins.clone()].concat(),
            reflectance: f(self.reflectance, other.reflectance),
            reflectance_front: f(self.reflectance_front, other.reflectance_front),
            escape: f(self.escape, other.escape),
            transmittance: f(self.transmittance, other.transmittance),
            thick_absorptance: self
                .thick_absorptance
                .iter()
                .zip(&other.thick_absorptance)
                .map(|(a, b)| f(*a, *b))
                .collect(),
            film_absorptance: self
                .film_absorptance
                .iter()
                .zip(&other.film_absorptance)
                .map(|(a, b)| a.iter().zip(b).map(|(u, v)| f(*u, *v)).collect())
                .collect(),
            unaccounted: f(self.unaccounted, other.unaccounted),
        }
    }
}

/// Which direction a coarse solve merges.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Merge {
    Polar,
    Azimuth,
}

impl Stack {
    /// The same stack on coarser bins that nest in the stack's bins (every interface's
    /// matrices merged, [`crate::redistribution::InterfaceMatrices::merged`]).
    pub fn coarsened(&self, coarse: &AngleBins) -> Result<Stack, WaferError> {
        let binning = |e: crate::redistribution::MatrixError| WaferError::Binning {
            problem: e.to_string(),
            fix: "make the coarse bins with AngleBins::merged_pairs of the stack's bins".into(),
        };
        let mut elements = vec![StackElement::Medium(self.top().clone())];
        let layers = self.thick_layers();
        for (k, itf) in self.interfaces().iter().enumerate() {
            elements.push(StackElement::Interface(Box::new(
                itf.merged(coarse).map_err(binning)?,
            )));
            if let Some(l) = layers.get(k) {
                elements.push(StackElement::Thick(l.clone()));
            }
        }
        elements.push(StackElement::Medium(self.bottom().clone()));
        Stack::new(self.wavelength_nm(), elements)?.with_wafer_layer(self.wafer_layer())
    }

    /// The coarse bins the estimate solves on: polar bins merged pairwise beyond the kept
    /// ones, in both pairings ((k, k+1), (k+2, k+3), … and (k+1, k+2), …, where they exist),
    /// and, when the azimuth count is even and above 1, azimuth bins merged pairwise.
    pub fn coarse_bins(&self, check: &BinningCheck) -> Vec<(Merge, AngleBins)> {
        let b = self.bins();
        let k = check.keep_polar;
        let mut out = Vec::new();
        for keep in [k, k + 1] {
            if let Ok(c) = b.merged_pairs(keep, true, false) {
                out.push((Merge::Polar, c));
            }
        }
        if let Ok(c) = b.merged_pairs(k, false, true) {
            out.push((Merge::Azimuth, c));
        }
        out
    }

    /// Binning error of `fine` (this stack solved for `incident`, see [`Stack::solve`]),
    /// estimated by solving again on each of [`Stack::coarse_bins`]: per output,
    /// [`BINNING_SAFETY_FACTOR`] × (largest |fine − coarse| over the polar pairings + the
    /// azimuthal |fine − coarse|) (module doc). Fails when no coarser bins can be made, or a
    /// coarse solve fails.
    pub fn binning_error(
        &self,
        incident: &[f64],
        fine: &StackResult,
        check: &BinningCheck,
        options: &SolverOptions,
    ) -> Result<BinningError, WaferError> {
        let coarse_sets = self.coarse_bins(check);
        if coarse_sets.is_empty() {
            let b = self.bins();
            return Err(WaferError::Binning {
                problem: format!(
                    "{} polar bin(s) ({} kept) × {} azimuth bin(s): nothing to merge for a binning error estimate",
                    b.n_polar(),
                    check.keep_polar,
                    b.n_azimuth()
                ),
                fix: "use at least two polar bins beyond the kept ones, or an even number of azimuth bins".into(),
            });
        }
        let mut per_direction: [Option<BinningError>; 2] = [None, None];
        for (merge, coarse) in &coarse_sets {
            let map = self
                .bins()
                .coarse_map(coarse)
                .expect("merged_pairs bins nest in the fine ones");
            let mut inc = vec![0.0; coarse.len()];
            for (x, &g) in incident.iter().zip(&map) {
                inc[g] += x;
            }
            let c = self.coarsened(coarse)?.solve(&inc, options)?;
            let d = BinningError::difference(fine, &c);
            let slot = &mut per_direction[*merge as usize];
            *slot = Some(match slot.take() {
                None => d,
                Some(prev) => prev.zip(&d, f64::max),
            });
        }
        let mut parts = per_direction.into_iter().flatten();
        let first = parts.next().expect("at least one coarse solve");
        let sum = parts.fold(first, |acc, d| acc.zip(&d, |a, b| a + b));
        let empty = BinningError {
            coarse_bins: vec![],
            ..sum.clone()
        };
        Ok(sum.zip(&empty, |a, _| BINNING_SAFETY_FACTOR * a))
    }

    /// [`Stack::solve`] and [`Stack::binning_error`] together.
    pub fn solve_with_binning_error(
        &self,
        incident: &[f64],
        check: &BinningCheck,
        options: &SolverOptions,
    ) -> Result<(StackResult, BinningError), WaferError> {
        let fine = self.solve(incident, options)?;
        let err = self.binning_error(incident, &fine, check, options)?;
        Ok((fine, err))
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::redistribution::{InterfaceMatrices, InterfaceResponse, InterfaceSetup, MediumInfo};
    use crate::texture::Symmetry;
    use crate::thinfilm::Side as FilmSide;
    use crate::tracer::{BareInterface, FacetResponse};
    use crate::wafer::{SemiInfinite, ThickLayer};
    use num_complex::Complex64;

    fn bins(p: usize) -> AngleBins {
        let mut edges = vec![0.0, 1e-12];
        edges.extend((1..=p).map(|i| i as f64 / p as f64));
        AngleBins::from_sin2_edges(&edges, 1, Symmetry::Isotropic).unwrap()
    }

    /// Lambertian front (Fresnel split averaged per bin) over a weakly absorbing slab with a
    /// planar bare rear into air: the bin-averaged attenuation e^{−αd/μ} is what the bins
    /// discretise.
    fn stack(b: &AngleBins, k: f64) -> Stack {
        let n = 3.6;
        let setup = |na: f64, nb: f64| InterfaceSetup {
            bins: b.clone(),
            wavelength_nm: 1000.0,
            above: MediumInfo::new("a", na),
            below: MediumInfo::new("b", nb),
            film_layers: vec![],
        };
        // Bare Fresnel split, unpolarised (the tracer's closed form).
        let split = move |na: f64, nb: f64| {
            let bare = BareInterface {
                n_above: na,
                n_below: nb,
            };
            move |c: f64, side: crate::redistribution::Side| {
                let from = match side {
                    crate::redistribution::Side::Above => FilmSide::Above,
                    crate::redistribution::Side::Below => FilmSide::Below,
                };
                let [rs, rp, ..] = bare.power(from, c, 1.0);
                let r = 0.5 * (rs + rp);
                InterfaceResponse::lossless(r, 1.0 - r)
            }
        };
        let front = InterfaceMatrices::lambertian(setup(1.0, n), split(1.0, n)).unwrap();
        let rear = InterfaceMatrices::planar(setup(n, 1.0), split(n, 1.0)).unwrap();
        let medium = |id: &str| {
            StackElement::Medium(SemiInfinite {
                id: id.into(),
                index: Complex64::new(1.0, 0.0),
            })
        };
        Stack::new(
            1000.0,
            vec![
                medium("air"),
                StackElement::Interface(Box::new(front)),
                StackElement::Thick(ThickLayer {
                    id: "si".into(),
                    index: Complex64::new(n, k),
                    thickness_um: 100.0,
                }),
                StackElement::Interface(Box::new(rear)),
                medium("air"),
            ],
        )
        .unwrap()
    }

    fn normal(b: &AngleBins) -> Vec<f64> {
        let mut v = vec![0.0; b.len()];
        v[0] = 1.0;
        v
    }

    /// The estimate bounds the actual error of the fine result and shrinks as the bins are
    /// refined. Reference: the same stack on 800 bins with an extra edge at the rear's
    /// critical angle (sin²θ_c = 1/n²), which removes the step inside a bin that dominates
    /// the coarse results' error; its own error is far below the checked estimates.
    #[test]
    fn estimate_bounds_the_error_and_shrinks_with_refinement() {
        let check = BinningCheck { keep_polar: 1 };
        let k = 3.5e-5; // α ≈ 4.4 cm⁻¹, αd ≈ 0.044: weak absorption, the angular spread matters
        let reference = {
            let s_c = 1.0 / 3.6f64.powi(2);
            let mut edges: Vec<f64> = bins(800).sin2_edges().to_vec();
            edges.push(s_c);
            edges.sort_by(f64::total_cmp);
            let b = AngleBins::from_sin2_edges(&edges, 1, Symmetry::Isotropic).unwrap();
            stack(&b, k)
                .solve(&normal(&b), &SolverOptions::default())
                .unwrap()
        };
        let mut estimates = Vec::new();
        for p in [8, 16, 24, 32, 48, 64, 128] {
            let b = bins(p);
            let (fine, e) = stack(&b, k)
                .solve_with_binning_error(&normal(&b), &check, &SolverOptions::default())
                .unwrap();
            // Two polar pairings, no azimuth merge (one isotropic azimuth bin).
            assert_eq!(e.coarse_bins.len(), 2, "{:?}", e.coarse_bins);
            for (what, f, r, est) in [
                (
                    "A",
                    fine.thick_absorptance[0],
                    reference.thick_absorptance[0],
                    e.thick_absorptance[0],
                ),
                ("R", fine.reflectance, reference.reflectance, e.reflectance),
                (
                    "T",
                    fine.transmittance,
                    reference.transmittance,
                    e.transmittance,
                ),
            ] {
                let actual = (f - r).abs();
                assert!(
                    actual <= est,
                    "{p} bins, {what}: actual error {actual:e} above the estimate {est:e}"
                );
            }
            estimates.push((p, e.thick_absorptance[0]));
        }
        // Refining by 4× shrinks the estimate (pairwise steps need not: the step's position
        // inside its bin changes with the bins).
        for w in [[0, 3], [3, 6]] {
            let (a, b) = (estimates[w[0]], estimates[w[1]]);
            assert!(
                b.1 < 0.5 * a.1,
                "{} bins: {:e}, {} bins: {:e}",
                a.0,
                a.1,
                b.0,
                b.1
            );
        }
    }

    #[test]
    fn nothing_to_merge_is_an_error() {
        let b = AngleBins::from_sin2_edges(&[0.0, 1e-12, 1.0], 1, Symmetry::Isotropic).unwrap();
        let s = stack(&b, 1e-4);
        let e = s
            .solve_with_binning_error(
                &normal(&b),
                &BinningCheck { keep_polar: 1 },
                &SolverOptions::default(),
            )
            .unwrap_err();
        assert!(matches!(e, WaferError::Binning { .. }), "{e}");
        assert!(e.to_string().contains("fix:"));
    }
}
