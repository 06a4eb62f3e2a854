//! Monte Carlo tallies: per-ray first and second moments of every outcome, so each figure
//! carries its standard error; merged in a fixed order for bit-reproducible results.

use super::response::MAX_FILM_LAYERS;

/// Sum and sum of squares of per-ray contributions to one outcome.
#[derive(Clone, Copy, Debug, Default, PartialEq)]
pub struct Moments {
    pub sum: f64,
    pub sum_sq: f64,
}

impl Moments {
    /// Adds one ray's contribution.
    #[inline]
    pub fn add(&mut self, x: f64) {
        self.sum += x;
        self.sum_sq += x * x;
    }
    /// Adds another tally's moments.
    #[inline]
    pub fn merge(&mut self, o: &Moments) {
        self.sum += o.sum;
        self.sum_sq += o.sum_sq;
    }
    /// Mean per ray over `n` rays.
    pub fn mean(&self, n: u64) -> f64 {
        if n == 0 { 0.0 } else { self.sum / n as f64 }
    }
    /// Standard error of the mean over `n` independent rays:
    /// √((⟨x²⟩ − ⟨x⟩²)/(n − 1)). Zero for n < 2.
    pub fn std_error(&self, n: u64) -> f64 {
        if n < 2 {
            return 0.0;
        }
        let nf = n as f64;
        let m = self.sum / nf;
        ((self.sum_sq / nf - m * m).max(0.0) / (nf - 1.0)).sqrt()
    }
}

/// A value with its standard error.
#[derive(Clone, Copy, Debug, Default, PartialEq, serde::Serialize)]
pub struct Estimate {
    pub value: f64,
    pub std_error: f64,
}

/// Facet-hit histogram length; the last bin collects rays with that many hits or more.
pub const HIT_BINS: usize = 16;
/// Polar-angle histogram of exiting light: bins of 10° in the exit medium, 0–90°.
pub const POLAR_BINS: usize = 9;

/// Everything a surface trace counts. Fractions are of the incident power.
#[derive(Clone, Debug, Default, PartialEq)]
pub struct Tally {
    /// Rays traced.
    pub rays: u64,
    /// Power leaving on the incidence side (reflected).
    pub reflected: Moments,
    /// Power leaving on the far side (transmitted).
    pub transmitted: Moments,
    /// Power absorbed in each film layer, top to bottom.
    pub film: [Moments; MAX_FILM_LAYERS],
    /// Power of rays given up (numerical loss or the event limit): kept so energy balances.
    pub abandoned: Moments,
    /// Rays lost to numerics (no hit where one must be, or a hit from the wrong side).
    pub lost_rays: u64,
    /// Rays stopped at the event limit.
    pub event_limited_rays: u64,
    /// Rays by number of facet events.
    pub hits: [u64; HIT_BINS],
    /// Reflected power by polar exit angle (10° bins).
    pub reflected_polar: [f64; POLAR_BINS],
    /// Transmitted power by polar exit angle (10° bins).
    pub transmitted_polar: [f64; POLAR_BINS],
    /// Σ w/|cos θ| of transmitted power: its ratio to the transmitted power is the mean
    /// path-length factor ⟨1/cos θ⟩ of light sent into the far medium.
    pub transmitted_inv_cos: f64,
}

impl Tally {
    /// Adds `o` into `self` (called in chunk order, so sums are reproducible).
    pub fn merge(&mut self, o: &Tally) {
        self.rays += o.rays;
        self.reflected.merge(&o.reflected);
        self.transmitted.merge(&o.transmitted);
        for (a, b) in self.film.iter_mut().zip(&o.film) {
            a.merge(b);
        }
        self.abandoned.merge(&o.abandoned);
        self.lost_rays += o.lost_rays;
        self.event_limited_rays += o.event_limited_rays;
        for (a, b) in self.hits.iter_mut().zip(&o.hits) {
            *a += b;
        }
        for (a, b) in self.reflected_polar.iter_mut().zip(&o.reflected_polar) {
            *a += b;
        }
        for (a, b) in self.transmitted_polar.iter_mut().zip(&o.transmitted_polar) {
            *a += b;
        }
        self.transmitted_inv_cos += o.transmitted_inv_cos;
    }

    fn estimate(&self, m: &Moments) -> Estimate {
        Estimate {
            value: m.mean(self.rays),
            std_error: m.std_error(self.rays),
        }
    }
    /// Reflectance with its standard error.
    pub fn reflectance(&self) -> Estimate {
        self.estimate(&self.reflected)
    }
    /// Transmittance with its standard error.
    pub fn transmittance(&self) -> Estimate {
        self.estimate(&self.transmitted)
    }
    /// Absorptance of film layer `j` with its standard error.
    pub fn film_absorptance(&self, j: usize) -> Estimate {
        self.estimate(&self.film[j])
    }
    /// Fraction of power in abandoned rays (should be 0).
    pub fn abandoned_fraction(&self) -> Estimate {
        self.estimate(&self.abandoned)
    }
    /// Mean ⟨1/cos θ⟩ of transmitted light (1 for normal transmission).
    pub fn transmitted_path_factor(&self) -> f64 {
        if self.transmitted.sum > 0.0 {
            self.transmitted_inv_cos / self.transmitted.sum
        } else {
            0.0
        }
    }
    /// Mean number of facet events per ray (the last histogram bin counted at its floor).
    pub fn mean_hits(&self) -> f64 {
        let n: u64 = self.hits.iter().sum();
        if n == 0 {
            return 0.0;
        }
        self.hits
            .iter()
            .enumerate()
            .map(|(k, &c)| k as f64 * c as f64)
            .sum::<f64>()
            / n as f64
    }
    /// Largest |R + T + ΣA + abandoned − 1| in the accounting, as a fraction of incident power.
    pub fn energy_error(&self) -> f64 {
        if self.rays == 0 {
            return 0.0;
        }
        let total = self.reflected.sum
            + self.transmitted.sum
            + self.film.iter().map(|m| m.sum).sum::<f64>()
            + self.abandoned.sum;
        (total / self.rays as f64 - 1.0).abs()
    }
}

/// Polar bin (10° wide) of a direction with |cos θ| = `abs_cos`.
#[inline]
pub fn polar_bin(abs_cos: f64) -> usize {
    // θ ≥ 10°·k ⇔ |cos θ| ≤ cos(10°·k): count the bin edges the direction is past (all of
    // them, without an early exit: the edges decrease, so it is the same count, and no
    // branch to mispredict).
    POLAR_EDGE_COS
        .iter()
        .map(|&c| usize::from(abs_cos <= c))
        .sum()
}

/// cos(10°·k), k = 1..8: the inner edges of the polar histogram bins.
const POLAR_EDGE_COS: [f64; POLAR_BINS - 1] = [
    0.984_807_753_012_208,
    0.939_692_620_785_908_4,
    0.866_025_403_784_438_7,
    0.766_044_443_118_978,
    0.642_787_609_686_539_3,
    0.5,
    0.342_020_143_325_668_8,
    0.173_648_177_666_930_4,
];

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn bernoulli_standard_error_matches_formula() {
        // 1000 rays, 300 reflected with weight 1: SE = √(p(1−p)/(n−1)).
        let mut m = Moments::default();
        for i in 0..1000 {
            m.add(if i < 300 { 1.0 } else { 0.0 });
        }
        let se = m.std_error(1000);
        assert!((se - (0.3f64 * 0.7 / 999.0).sqrt()).abs() < 1e-15);
        assert!((m.mean(1000) - 0.3).abs() < 1e-15);
    }

    #[test]
    fn polar_bin_edges_are_cosines_of_ten_degree_steps() {
        for (k, c) in POLAR_EDGE_COS.iter().enumerate() {
            let exact = (10.0 * (k + 1) as f64).to_radians().cos();
            assert!((c - exact).abs() < 1e-15, "edge {k}");
        }
        // Same bins as ⌊θ/10°⌋ away from the edges.
        for i in 0..900 {
            let theta_deg = i as f64 * 0.1 + 0.05;
            let want = ((theta_deg / 10.0) as usize).min(POLAR_BINS - 1);
            assert_eq!(
                polar_bin(theta_deg.to_radians().cos()),
                want,
                "{theta_deg}°"
            );
        }
    }

    #[test]
    fn polar_bins_cover_the_hemisphere() {
        assert_eq!(polar_bin(1.0), 0);
        assert_eq!(polar_bin(0.0), POLAR_BINS - 1);
        assert_eq!(polar_bin(45f64.to_radians().cos() - 1e-9), 4);
    }
}
