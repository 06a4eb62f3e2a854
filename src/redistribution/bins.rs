//! Angular bins over one hemisphere of directions, the same in every medium of a stack.
//!
//! # Conventions (also written into every exported sidecar)
//!
//! * A direction is the unit vector of **propagation** `d = (x, y, z)` in the frame of
//!   [`crate::geometry`] (z up). Its hemisphere is [`Hemisphere::Up`] if `z > 0`, else
//!   [`Hemisphere::Down`]; the hemisphere is carried beside the bin index, never inside it.
//! * Polar angle θ is measured from the z axis of the direction's own hemisphere:
//!   `cos θ = |z|`, `sin²θ = x² + y²`, in the medium the light travels in (each medium has the
//!   same bins in its own local angles; Snell's law maps bins of one medium onto the other).
//! * Polar bins are intervals of `s = sin²θ`: `0 = s₀ < s₁ < … < s_P = 1`. Bin `p` holds
//!   `s_p ≤ s < s_{p+1}` (the last bin also holds `s = 1`). The default is equal steps in
//!   `s`: equal étendue, so an isotropic radiance (Lambertian) puts equal power in each.
//! * Azimuth φ = atan2(y, x) of the propagation direction, folded by the texture's symmetry
//!   ([`Symmetry`]) into a fundamental domain `[0, φ_span)`, then cut into `A` equal bins:
//!   `None` → φ ∈ [0, 2π); `Mirror` (mirror planes x = 0 and y = 0) → (|x|, |y|), φ ∈ [0, π/2);
//!   `Square` (C4v) → (|x|, |y|) sorted so that y ≤ x, φ ∈ [0, π/4]; `Isotropic` → one bin.
//!   Specular reflection and refraction keep (x, y) direction, so they keep the azimuth bin.
//! * Bin index `i = p · A + a` (polar-major), `0 ≤ i < P · A`.
//! * A folded bin stands for its whole orbit under the symmetry group: its solid angle and
//!   étendue are those of the orbit, `Ω_i = 2π (cos θ_p − cos θ_{p+1}) / A` and
//!   `ε_i = ∫ cos θ dΩ = π (s_{p+1} − s_p) / A` (sr). Σ ε_i = π over the hemisphere.
//! * The centre of a bin is at the mid-point in `s` (the étendue median) and the mid azimuth.
//!
//! Source for étendue and its n²-invariance: W. T. Welford & R. Winston, *High Collection
//! Nonimaging Optics*, Academic Press (1989), ch. 2 (from memory).

use crate::geometry::Vec3;
use crate::texture::Symmetry;
use std::f64::consts::{FRAC_PI_2, FRAC_PI_4, PI, TAU};

/// Which way a direction propagates along z.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Hash, serde::Serialize, serde::Deserialize)]
#[serde(rename_all = "lowercase")]
pub enum Hemisphere {
    /// z > 0, towards the medium above.
    Up,
    /// z ≤ 0, towards the medium below.
    Down,
}

impl Hemisphere {
    /// Hemisphere of a propagation direction (z = 0 counts as `Down`).
    #[inline]
    pub fn of(dir: Vec3) -> Self {
        if dir.z > 0.0 {
            Hemisphere::Up
        } else {
            Hemisphere::Down
        }
    }
    /// Sign of z for this hemisphere (+1 up, −1 down).
    #[inline]
    pub fn sign(self) -> f64 {
        match self {
            Hemisphere::Up => 1.0,
            Hemisphere::Down => -1.0,
        }
    }
}

/// Why a set of bins cannot be built.
#[derive(Debug, thiserror::Error, PartialEq)]
pub enum BinError {
    #[error("angle bins: {problem}\n  expected: {expected}\n  fix: {fix}")]
    Invalid {
        problem: String,
        expected: String,
        fix: String,
    },
}

fn invalid(problem: impl Into<String>, expected: &str, fix: &str) -> BinError {
    BinError::Invalid {
        problem: problem.into(),
        expected: expected.into(),
        fix: fix.into(),
    }
}

/// Polar × azimuthal bins over one hemisphere. Construct with [`AngleBins::equal_etendue`],
/// [`AngleBins::from_sin2_edges`] or [`AngleBins::from_polar_edges_deg`].
#[derive(Clone, Debug, PartialEq)]
pub struct AngleBins {
    sin2_edges: Vec<f64>,
    n_azimuth: usize,
    symmetry: Symmetry,
    /// `Some(P)` when edges are exactly `p / P`: O(1) polar lookup.
    uniform: Option<usize>,
}

/// Largest number of bins per hemisphere accepted by the constructors (a dense n × n matrix
/// of this size is 8 GB; the wafer solver applies its own, smaller memory budget).
pub const MAX_BINS: usize = 32_768;

impl AngleBins {
    /// `n_polar` bins of equal étendue (equal steps in sin²θ) × `n_azimuth` azimuthal bins
    /// over the domain folded by `symmetry`. `Isotropic` requires `n_azimuth == 1`.
    pub fn equal_etendue(
        n_polar: usize,
        n_azimuth: usize,
        symmetry: Symmetry,
    ) -> Result<Self, BinError> {
        if n_polar == 0 {
            return Err(invalid(
                "0 polar bins",
                "n_polar ≥ 1",
                "ask for at least one polar bin",
            ));
        }
        let edges: Vec<f64> = (0..=n_polar).map(|p| p as f64 / n_polar as f64).collect();
        Self::from_sin2_edges(&edges, n_azimuth, symmetry)
    }

    /// Explicit polar edges in s = sin²θ: strictly increasing, first 0, last 1.
    pub fn from_sin2_edges(
        sin2_edges: &[f64],
        n_azimuth: usize,
        symmetry: Symmetry,
    ) -> Result<Self, BinError> {
        let expected = "strictly increasing sin²θ edges from 0 to 1, at least two";
        if sin2_edges.len() < 2 {
            return Err(invalid(
                format!("{} polar edge(s)", sin2_edges.len()),
                expected,
                "give the edges 0 … 1",
            ));
        }
        if sin2_edges[0] != 0.0 || sin2_edges[sin2_edges.len() - 1] != 1.0 {
            return Err(invalid(
                format!(
                    "polar edges run from {} to {} in sin²θ",
                    sin2_edges[0],
                    sin2_edges[sin2_edges.len() - 1]
                ),
                expected,
                "start at 0 (normal) and end at 1 (grazing)",
            ));
        }
        if let Some(w) = sin2_edges
            .windows(2)
            .position(|w| w[1] <= w[0] || w[1].is_nan() || w[0].is_nan())
        {
            return Err(invalid(
                format!(
                    "polar edges {} and {} (positions {w}, {}) are not increasing",
                    sin2_edges[w],
                    sin2_edges[w + 1],
                    w + 1
                ),
                expected,
                "sort the edges and remove duplicates",
            ));
        }
        if n_azimuth == 0 {
            return Err(invalid(
                "0 azimuthal bins",
                "n_azimuth ≥ 1",
                "use 1 for isotropic",
            ));
        }
        if symmetry == Symmetry::Isotropic && n_azimuth != 1 {
            return Err(invalid(
                format!("{n_azimuth} azimuthal bins with isotropic symmetry"),
                "exactly 1 azimuthal bin when the distribution does not depend on azimuth",
                "set n_azimuth = 1 or choose another symmetry",
            ));
        }
        let n = (sin2_edges.len() - 1).saturating_mul(n_azimuth);
        if n > MAX_BINS {
            return Err(invalid(
                format!("{n} bins per hemisphere"),
                &format!("at most {MAX_BINS}"),
                "use fewer polar or azimuthal bins, or a symmetry reduction",
            ));
        }
        let np = sin2_edges.len() - 1;
        let uniform = sin2_edges
            .iter()
            .enumerate()
            .all(|(p, e)| *e == p as f64 / np as f64)
            .then_some(np);
        Ok(AngleBins {
            sin2_edges: sin2_edges.to_vec(),
            n_azimuth,
            symmetry,
            uniform,
        })
    }

    /// Explicit polar edges in degrees (0 … 90, strictly increasing).
    pub fn from_polar_edges_deg(
        edges_deg: &[f64],
        n_azimuth: usize,
        symmetry: Symmetry,
    ) -> Result<Self, BinError> {
        if let Some(bad) = edges_deg.iter().find(|e| !(**e >= 0.0 && **e <= 90.0)) {
            return Err(invalid(
                format!("polar edge {bad}°"),
                "edges within 0° … 90°",
                "give polar angles from the surface normal in degrees",
            ));
        }
        let s: Vec<f64> = edges_deg
            .iter()
            .map(|e| {
                if *e == 90.0 {
                    1.0
                } else {
                    e.to_radians().sin().powi(2)
                }
            })
            .collect();
        Self::from_sin2_edges(&s, n_azimuth, symmetry)
    }

    /// Number of bins per hemisphere, `n_polar · n_azimuth`.
    #[inline]
    pub fn len(&self) -> usize {
        self.n_polar() * self.n_azimuth
    }
    /// Never true for a constructed value (kept for the `len`/`is_empty` convention).
    pub fn is_empty(&self) -> bool {
        self.len() == 0
    }
    pub fn n_polar(&self) -> usize {
        self.sin2_edges.len() - 1
    }
    pub fn n_azimuth(&self) -> usize {
        self.n_azimuth
    }
    pub fn symmetry(&self) -> Symmetry {
        self.symmetry
    }
    /// Polar edges in sin²θ (length `n_polar + 1`).
    pub fn sin2_edges(&self) -> &[f64] {
        &self.sin2_edges
    }
    /// Polar edges in degrees.
    pub fn polar_edges_deg(&self) -> Vec<f64> {
        self.sin2_edges
            .iter()
            .map(|s| s.sqrt().min(1.0).asin().to_degrees())
            .collect()
    }
    /// Width of the folded azimuth domain, rad: 2π, π/2, π/4, or 2π for isotropic.
    pub fn azimuth_span(&self) -> f64 {
        match self.symmetry {
            Symmetry::None | Symmetry::Isotropic => TAU,
            Symmetry::Mirror => FRAC_PI_2,
            Symmetry::Square => FRAC_PI_4,
        }
    }
    /// Azimuth edges of the folded domain in degrees (length `n_azimuth + 1`).
    pub fn azimuth_edges_deg(&self) -> Vec<f64> {
        let span = self.azimuth_span();
        (0..=self.n_azimuth)
            .map(|a| (span * a as f64 / self.n_azimuth as f64).to_degrees())
            .collect()
    }
    /// (polar, azimuth) indices of bin `i`.
    #[inline]
    pub fn split(&self, i: usize) -> (usize, usize) {
        (i / self.n_azimuth, i % self.n_azimuth)
    }
    /// [s_lo, s_hi] in sin²θ of polar bin `p`.
    #[inline]
    pub fn sin2_range(&self, p: usize) -> (f64, f64) {
        (self.sin2_edges[p], self.sin2_edges[p + 1])
    }
    /// [μ_lo, μ_hi] = [cos θ_{p+1}, cos θ_p] of polar bin `p`.
    #[inline]
    pub fn cos_range(&self, p: usize) -> (f64, f64) {
        let (s0, s1) = self.sin2_range(p);
        ((1.0 - s1).max(0.0).sqrt(), (1.0 - s0).max(0.0).sqrt())
    }
    /// Polar bin of s = sin²θ ∈ [0, 1] (values outside are clamped).
    #[inline]
    pub fn polar_index_sin2(&self, s: f64) -> usize {
        let np = self.n_polar();
        match self.uniform {
            Some(p) => ((s * p as f64) as usize).min(np - 1),
            // First edge strictly greater than s, minus one.
            None => self.sin2_edges[1..np].partition_point(|e| *e <= s),
        }
    }
    /// Azimuthal bin of a direction's (x, y) after folding.
    #[inline]
    pub fn azimuth_index(&self, x: f64, y: f64) -> usize {
        let na = self.n_azimuth;
        if na == 1 {
            return 0;
        }
        let phi = match self.symmetry {
            Symmetry::Isotropic => 0.0,
            Symmetry::None => {
                let p = y.atan2(x);
                if p < 0.0 { p + TAU } else { p }
            }
            Symmetry::Mirror => y.abs().atan2(x.abs()),
            Symmetry::Square => {
                let (ax, ay) = (x.abs(), y.abs());
                if ay > ax { ax.atan2(ay) } else { ay.atan2(ax) }
            }
        };
        ((phi / self.azimuth_span() * na as f64) as usize).min(na - 1)
    }
    /// Bin of a propagation direction (unit vector; its hemisphere is the caller's business).
    /// Uses `sin²θ = x² + y²`, clamped to [0, 1].
    #[inline]
    pub fn index(&self, dir: Vec3) -> usize {
        let s = (dir.x * dir.x + dir.y * dir.y).min(1.0);
        self.polar_index_sin2(s) * self.n_azimuth + self.azimuth_index(dir.x, dir.y)
    }
    /// Étendue ∫cos θ dΩ of bin `i` (its whole orbit under the symmetry), sr.
    #[inline]
    pub fn etendue(&self, i: usize) -> f64 {
        let (s0, s1) = self.sin2_range(i / self.n_azimuth);
        PI * (s1 - s0) / self.n_azimuth as f64
    }
    /// Solid angle of bin `i` (its whole orbit), sr.
    pub fn solid_angle_sr(&self, i: usize) -> f64 {
        let (m0, m1) = self.cos_range(i / self.n_azimuth);
        TAU * (m1 - m0) / self.n_azimuth as f64
    }
    /// Centre of bin `i` in its hemisphere: s at the mid-point of the bin, mid azimuth of the
    /// folded domain. Returns (θ, φ) in radians.
    pub fn centre_angles(&self, i: usize) -> (f64, f64) {
        let (p, a) = self.split(i);
        let (s0, s1) = self.sin2_range(p);
        let theta = (0.5 * (s0 + s1)).sqrt().asin();
        let phi = if self.symmetry == Symmetry::Isotropic {
            0.0
        } else {
            self.azimuth_span() * (a as f64 + 0.5) / self.n_azimuth as f64
        };
        (theta, phi)
    }
    /// Unit propagation direction at the centre of bin `i` in hemisphere `h`.
    pub fn centre(&self, i: usize, h: Hemisphere) -> Vec3 {
        let (t, p) = self.centre_angles(i);
        Vec3::new(t.sin() * p.cos(), t.sin() * p.sin(), h.sign() * t.cos())
    }
    /// A direction in bin `i`, hemisphere `h`, from two uniform numbers in [0, 1): uniform in
    /// sin²θ and in φ over the bin, i.e. the power distribution of a uniform radiance within
    /// the bin (what a matrix column means). Only the fundamental domain is sampled; the
    /// symmetry of the surface makes the rest of the orbit equivalent.
    pub fn sample(&self, i: usize, h: Hemisphere, u1: f64, u2: f64) -> Vec3 {
        let (p, a) = self.split(i);
        let (s0, s1) = self.sin2_range(p);
        let s = (s0 + u1 * (s1 - s0)).clamp(0.0, 1.0);
        let phi = self.azimuth_span() * (a as f64 + u2) / self.n_azimuth as f64;
        let st = s.sqrt();
        Vec3::new(st * phi.cos(), st * phi.sin(), h.sign() * (1.0 - s).sqrt())
    }
    /// Bin holding the reversed azimuth (φ + π) of bin `i`, used by the reciprocity audit.
    /// Every folded symmetry contains the rotation by π, so there it is `i` itself; without
    /// symmetry it exists when `n_azimuth` is even, else `None`.
    pub fn reversed(&self, i: usize) -> Option<usize> {
        match self.symmetry {
            Symmetry::None => {
                let na = self.n_azimuth;
                if na % 2 == 1 && na > 1 {
                    return None;
                }
                let (p, a) = self.split(i);
                Some(p * na + (a + na / 2) % na)
            }
            _ => Some(i),
        }
    }
    /// Lower-case name of the symmetry (sidecar files).
    pub fn symmetry_name(&self) -> &'static str {
        symmetry_name(self.symmetry)
    }

    /// Coarser bins made by merging neighbours, for estimating the binning error.
    ///
    /// * `keep_polar` – leading polar bins (from the normal) kept as they are, e.g. 1 for a
    ///   narrow bin that stands for collimated normal incidence;
    /// * `merge_polar` – merge the following polar bins in pairs, from the normal towards
    ///   grazing (an odd last bin stays alone);
    /// * `merge_azimuth` – merge azimuth bins in pairs (needs an even count).
    ///
    /// Every bin of `self` lies inside one bin of the result ([`Self::coarse_map`]). Fails when
    /// nothing can be merged the way asked.
    pub fn merged_pairs(
        &self,
        keep_polar: usize,
        merge_polar: bool,
        merge_azimuth: bool,
    ) -> Result<AngleBins, BinError> {
        let np = self.n_polar();
        let mut edges = self.sin2_edges.clone();
        if merge_polar {
            if np < keep_polar + 2 {
                return Err(invalid(
                    format!("{np} polar bins with {keep_polar} kept: nothing to merge in pairs"),
                    "at least two polar bins beyond the kept ones",
                    "use more polar bins",
                ));
            }
            // Keep edges 0..=keep_polar, then every second edge, and always the last (s = 1).
            edges = (0..=np)
                .filter(|&e| e <= keep_polar || (e - keep_polar).is_multiple_of(2) || e == np)
                .map(|e| self.sin2_edges[e])
                .collect();
        }
        let mut na = self.n_azimuth;
        if merge_azimuth {
            if na < 2 || !na.is_multiple_of(2) {
                return Err(invalid(
                    format!("{na} azimuth bin(s) cannot be merged in pairs"),
                    "an even number of azimuth bins",
                    "use an even number of azimuth bins or merge polar bins only",
                ));
            }
            na /= 2;
        }
        AngleBins::from_sin2_edges(&edges, na, self.symmetry)
    }

    /// For every bin of `self`, the bin of `coarse` that contains it; `None` when the two do
    /// not nest (a polar bin of `self` straddles an edge of `coarse`, the symmetries differ,
    /// or `coarse`'s azimuth count does not divide `self`'s).
    pub fn coarse_map(&self, coarse: &AngleBins) -> Option<Vec<usize>> {
        if coarse.symmetry != self.symmetry
            || coarse.n_azimuth == 0
            || !self.n_azimuth.is_multiple_of(coarse.n_azimuth)
        {
            return None;
        }
        let tol = 1e-14;
        let mut polar = Vec::with_capacity(self.n_polar());
        for p in 0..self.n_polar() {
            let (s0, s1) = self.sin2_range(p);
            let q = coarse.polar_index_sin2(0.5 * (s0 + s1));
            let (c0, c1) = coarse.sin2_range(q);
            if s0 < c0 - tol || s1 > c1 + tol {
                return None;
            }
            polar.push(q);
        }
        let f = self.n_azimuth / coarse.n_azimuth;
        Some(
            (0..self.len())
                .map(|i| {
                    let (p, a) = self.split(i);
                    polar[p] * coarse.n_azimuth + a / f
                })
                .collect(),
        )
    }
}

/// Lower-case name of a symmetry, as written in sidecar files.
pub fn symmetry_name(s: Symmetry) -> &'static str {
    match s {
        Symmetry::Isotropic => "isotropic",
        Symmetry::Square => "square",
        Symmetry::Mirror => "mirror",
        Symmetry::None => "none",
    }
}

/// Inverse of [`symmetry_name`].
pub fn symmetry_from_name(name: &str) -> Option<Symmetry> {
    Some(match name {
        "isotropic" => Symmetry::Isotropic,
        "square" => Symmetry::Square,
        "mirror" => Symmetry::Mirror,
        "none" => Symmetry::None,
        _ => return None,
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    fn dir(theta: f64, phi: f64, h: Hemisphere) -> Vec3 {
        Vec3::new(
            theta.sin() * phi.cos(),
            theta.sin() * phi.sin(),
            h.sign() * theta.cos(),
        )
    }

    #[test]
    fn etendue_sums_to_pi_and_solid_angle_to_two_pi() {
        for sym in [Symmetry::None, Symmetry::Square, Symmetry::Mirror] {
            let b = AngleBins::equal_etendue(7, 5, sym).unwrap();
            let e: f64 = (0..b.len()).map(|i| b.etendue(i)).sum();
            let o: f64 = (0..b.len()).map(|i| b.solid_angle_sr(i)).sum();
            assert!((e - PI).abs() < 1e-13, "Σε = {e}");
            assert!((o - TAU).abs() < 1e-13, "ΣΩ = {o}");
        }
    }

    #[test]
    fn sampled_directions_land_in_their_bin() {
        for sym in [
            Symmetry::None,
            Symmetry::Square,
            Symmetry::Mirror,
            Symmetry::Isotropic,
        ] {
            let na = if sym == Symmetry::Isotropic { 1 } else { 6 };
            let b = AngleBins::from_polar_edges_deg(&[0.0, 10.0, 30.0, 31.0, 60.0, 90.0], na, sym)
                .unwrap();
            for i in 0..b.len() {
                for (u1, u2) in [(0.01, 0.02), (0.5, 0.5), (0.98, 0.97)] {
                    for h in [Hemisphere::Up, Hemisphere::Down] {
                        let d = b.sample(i, h, u1, u2);
                        assert_eq!(b.index(d), i, "{sym:?} bin {i}");
                        assert_eq!(Hemisphere::of(d), h);
                    }
                }
            }
        }
    }

    #[test]
    fn square_fold_maps_all_eight_images_to_one_bin() {
        let b = AngleBins::equal_etendue(4, 5, Symmetry::Square).unwrap();
        let (t, p) = (0.7, 0.3); // φ = 0.3 rad < π/4
        let i = b.index(dir(t, p, Hemisphere::Down));
        for k in 0..4 {
            let q = k as f64 * FRAC_PI_2;
            assert_eq!(b.index(dir(t, q + p, Hemisphere::Down)), i);
            assert_eq!(b.index(dir(t, q - p, Hemisphere::Up)), i);
        }
    }

    #[test]
    fn equal_etendue_bins_fill_evenly_under_isotropic_radiance() {
        // Quasi-random cosine-weighted directions (uniform in s and φ) over the hemisphere.
        let b = AngleBins::equal_etendue(10, 4, Symmetry::None).unwrap();
        let mut count = vec![0usize; b.len()];
        let n = 400;
        for k in 0..n {
            for l in 0..n {
                let s = (k as f64 + 0.5) / n as f64;
                let phi = TAU * (l as f64 + 0.5) / n as f64;
                let d = Vec3::new(s.sqrt() * phi.cos(), s.sqrt() * phi.sin(), (1.0 - s).sqrt());
                count[b.index(d)] += 1;
            }
        }
        assert!(count.iter().all(|c| *c == n * n / b.len()), "{count:?}");
    }

    #[test]
    fn reversed_azimuth() {
        let b = AngleBins::equal_etendue(2, 4, Symmetry::None).unwrap();
        assert_eq!(b.reversed(1), Some(3));
        assert_eq!(b.reversed(6), Some(4));
        let odd = AngleBins::equal_etendue(2, 3, Symmetry::None).unwrap();
        assert_eq!(odd.reversed(0), None);
    }

    #[test]
    fn merged_pairs_nest_in_the_fine_bins() {
        // Narrow normal bin kept, 5 equal-étendue bins merged in pairs (the last stays alone).
        let mut edges = vec![0.0, 1e-4];
        edges.extend((1..=5).map(|i| i as f64 / 5.0));
        let fine = AngleBins::from_sin2_edges(&edges, 4, Symmetry::None).unwrap();
        let c = fine.merged_pairs(1, true, false).unwrap();
        assert_eq!(c.sin2_edges(), &[0.0, 1e-4, 0.4, 0.8, 1.0]);
        assert_eq!(c.n_azimuth(), 4);
        let map = fine.coarse_map(&c).unwrap();
        assert_eq!(map[0], 0);
        // Fine polar bin 2 ([0.2, 0.4]) lies in coarse polar bin 1; azimuth kept.
        assert_eq!(map[2 * 4 + 3], 4 + 3);
        assert_eq!(map[5 * 4], 3 * 4);
        // Étendue is conserved by the merge: coarse = Σ fine over its members.
        let mut e = vec![0.0; c.len()];
        for (i, &g) in map.iter().enumerate() {
            e[g] += fine.etendue(i);
        }
        for (g, x) in e.iter().enumerate() {
            assert!((x - c.etendue(g)).abs() < 1e-14, "bin {g}");
        }
        let a = fine.merged_pairs(1, false, true).unwrap();
        assert_eq!((a.n_polar(), a.n_azimuth()), (6, 2));
        assert_eq!(fine.coarse_map(&a).unwrap()[3], 1);
        // What cannot be merged is refused; bins that do not nest have no map.
        let odd = AngleBins::equal_etendue(4, 3, Symmetry::None).unwrap();
        assert!(odd.merged_pairs(0, false, true).is_err());
        assert!(odd.merged_pairs(3, true, false).is_err());
        let other = AngleBins::equal_etendue(3, 4, Symmetry::None).unwrap();
        assert!(fine.coarse_map(&other).is_none());
    }

    #[test]
    fn bad_edges_are_rejected_with_a_fix() {
        let e = AngleBins::from_sin2_edges(&[0.0, 0.5, 0.5, 1.0], 1, Symmetry::Isotropic);
        assert!(matches!(e, Err(BinError::Invalid { .. })));
        assert!(AngleBins::from_sin2_edges(&[0.1, 1.0], 1, Symmetry::Isotropic).is_err());
        assert!(AngleBins::equal_etendue(3, 2, Symmetry::Isotropic).is_err());
        assert!(AngleBins::from_polar_edges_deg(&[0.0, 95.0], 1, Symmetry::None).is_err());
    }
}
