//! The direct wafer tracer: rays followed one by one through the whole stack of thick
//! incoherent layers and textured, coated interfaces; the reference the matrix solver must
//! agree with.
//!
//! Model and assumptions (stated in every output by the callers):
//! * Interface i separates medium i (above) from medium i + 1 (below); medium 0 is the
//!   incidence half-space, the last medium the exit half-space (its absorption, e.g. a rear
//!   metal, is what crosses the last interface).
//! * Thick layers are incoherent; their thickness is measured between the base planes
//!   (z = 0) of the interfaces above and below. Texture volume that protrudes into a layer
//!   belongs to it: absorption is taken along every segment inside the textures too.
//! * Lateral position is re-randomised over the next texture's unit cell when a ray crosses
//!   a thick layer: valid when the layer is much thicker than the texture periods, so that
//!   the positions where a ray leaves one surface and meets the next are uncorrelated.
//! * Bulk absorption is deposited as its expected value along each segment (Beer–Lambert,
//!   α = 4πk/λ); the generation profile books each segment's absorbed power at a depth drawn
//!   from the exponential distribution of absorption along it (an unbiased estimator).
//! * Interface responses seen from inside a weakly absorbing thick layer use the real part of
//!   its index; its absorption is taken along the path instead (DESIGN §4).

use super::response::{FacetSample, MAX_FILM_LAYERS, Side};
use super::surface::{BulkSink, MAX_EVENTS, Outcome, RAYS_PER_CHUNK, Surface};
use super::tally::{Estimate, Moments};
use crate::geometry::Vec3;
use crate::sampling::Stream;
use rayon::prelude::*;

/// A thick incoherent layer between two interfaces.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct ThickLayer {
    /// Distance between the base planes of the interfaces above and below, µm.
    pub thickness_um: f64,
    /// Absorption coefficient α = 4πk/λ, µm⁻¹.
    pub alpha_per_um: f64,
}

/// The whole stack for one wavelength.
pub struct WaferModel<'a> {
    /// Interfaces top to bottom; `interfaces[i]` has medium i above and i + 1 below.
    pub interfaces: Vec<Surface<'a>>,
    /// Thick layers, media 1 ..= interfaces.len() − 1.
    pub layers: Vec<ThickLayer>,
    /// Index (into `layers`) of the absorber whose escape loss and generation profile are
    /// reported (the silicon wafer).
    pub absorber: usize,
    /// Number of depth bins of the generation profile in the absorber.
    pub profile_bins: usize,
}

/// Errors in a wafer model (caught in `scenario` for user input; here as a guard).
#[derive(Debug, thiserror::Error, PartialEq)]
pub enum WaferModelError {
    #[error(
        "thick layer {layer} is {thickness_um} µm thick but the textures above and below \
         reach {reach_um} µm into it: make the layer thicker than the textures' depth"
    )]
    TexturesOverlap {
        layer: usize,
        thickness_um: f64,
        reach_um: f64,
    },
    #[error("a stack needs n interfaces and n − 1 thick layers (got {interfaces} and {layers})")]
    Shape { interfaces: usize, layers: usize },
    #[error("the absorber index {0} names no thick layer")]
    Absorber(usize),
}

/// Counts of one wafer trace. Fractions are of the incident power.
#[derive(Clone, Debug, Default, PartialEq)]
pub struct WaferTally {
    pub rays: u64,
    /// Reflected to the incidence medium (front reflection plus escape).
    pub reflected: Moments,
    /// The part of `reflected` carried by rays that had entered the absorber.
    pub escape: Moments,
    /// Crossed the last interface into the exit medium.
    pub transmitted: Moments,
    /// Absorbed in each thick layer.
    pub layers: Vec<Moments>,
    /// Absorbed in each film layer of each interface (`[interface][layer]`).
    pub films: Vec<[Moments; MAX_FILM_LAYERS]>,
    /// Power of rays given up (numerics or the event limit).
    pub abandoned: Moments,
    pub lost_rays: u64,
    pub event_limited_rays: u64,
    /// Absorbed power in the absorber per depth bin (sum over rays; see `profile_edges_um`).
    pub profile: Vec<f64>,
    /// Power entering the absorber for the first time, by polar (10°) × azimuth (15°) bin.
    pub entering: Vec<f64>,
    /// Σ w/|cos θ| of power entering the absorber for the first time.
    pub entering_inv_cos: f64,
    /// Σ w of power entering the absorber for the first time.
    pub entering_power: f64,
}

/// Polar × azimuth bins of the map of light entering the absorber.
pub const ENTER_POLAR_BINS: usize = 9;
pub const ENTER_AZIMUTH_BINS: usize = 24;

impl WaferTally {
    fn new(n_interfaces: usize, n_layers: usize, profile_bins: usize) -> Self {
        WaferTally {
            layers: vec![Moments::default(); n_layers],
            films: vec![[Moments::default(); MAX_FILM_LAYERS]; n_interfaces],
            profile: vec![0.0; profile_bins],
            entering: vec![0.0; ENTER_POLAR_BINS * ENTER_AZIMUTH_BINS],
            ..Default::default()
        }
    }

    /// Adds `o` into `self` (in chunk order).
    pub fn merge(&mut self, o: &WaferTally) {
        self.rays += o.rays;
        self.reflected.merge(&o.reflected);
        self.escape.merge(&o.escape);
        self.transmitted.merge(&o.transmitted);
        for (a, b) in self.layers.iter_mut().zip(&o.layers) {
            a.merge(b);
        }
        for (fa, fb) in self.films.iter_mut().zip(&o.films) {
            for (a, b) in fa.iter_mut().zip(fb) {
                a.merge(b);
            }
        }
        self.abandoned.merge(&o.abandoned);
        self.lost_rays += o.lost_rays;
        self.event_limited_rays += o.event_limited_rays;
        for (a, b) in self.profile.iter_mut().zip(&o.profile) {
            *a += b;
        }
        for (a, b) in self.entering.iter_mut().zip(&o.entering) {
            *a += b;
        }
        self.entering_inv_cos += o.entering_inv_cos;
        self.entering_power += o.entering_power;
    }

    /// Mean and standard error of a per-ray outcome.
    pub fn estimate(&self, m: &Moments) -> Estimate {
        Estimate {
            value: m.mean(self.rays),
            std_error: m.std_error(self.rays),
        }
    }

    /// |R + T + ΣA + abandoned − 1| in the accounting.
    pub fn energy_error(&self) -> f64 {
        if self.rays == 0 {
            return 0.0;
        }
        let films: f64 = self
            .films
            .iter()
            .flat_map(|f| f.iter())
            .map(|m| m.sum)
            .sum();
        let layers: f64 = self.layers.iter().map(|m| m.sum).sum();
        let total = self.reflected.sum + self.transmitted.sum + films + layers + self.abandoned.sum;
        (total / self.rays as f64 - 1.0).abs()
    }
}

impl<'a> WaferModel<'a> {
    /// Checks the shape and that textures fit inside their layers.
    pub fn validate(&self) -> Result<(), WaferModelError> {
        if self.interfaces.is_empty() || self.layers.len() + 1 != self.interfaces.len() {
            return Err(WaferModelError::Shape {
                interfaces: self.interfaces.len(),
                layers: self.layers.len(),
            });
        }
        if self.absorber >= self.layers.len() {
            return Err(WaferModelError::Absorber(self.absorber));
        }
        for (j, layer) in self.layers.iter().enumerate() {
            let reach = -self.z_range(j)[0] + self.z_range(j + 1)[1];
            if self.gap(j) < 0.0 {
                return Err(WaferModelError::TexturesOverlap {
                    layer: j + 1,
                    thickness_um: layer.thickness_um,
                    reach_um: reach,
                });
            }
        }
        Ok(())
    }

    fn z_range(&self, interface: usize) -> [f64; 2] {
        self.interfaces[interface].texture.z_range_um()
    }

    /// Straight vertical gap of layer j between the bottom of the texture above and the top of
    /// the texture below, µm.
    fn gap(&self, j: usize) -> f64 {
        self.layers[j].thickness_um + self.z_range(j)[0] - self.z_range(j + 1)[1]
    }

    /// Depth bin edges of the generation profile in the absorber, µm from the base plane of
    /// the interface above it (negative depths: inside texture peaks above that plane).
    pub fn profile_edges_um(&self) -> Vec<f64> {
        let (lo, hi) = self.profile_span();
        let n = self.profile_bins.max(1);
        (0..=n)
            .map(|i| lo + (hi - lo) * i as f64 / n as f64)
            .collect()
    }

    fn profile_span(&self) -> (f64, f64) {
        let j = self.absorber;
        let lo = -self.z_range(j)[1];
        let hi = self.layers[j].thickness_um - self.z_range(j + 1)[0];
        (lo, hi)
    }

    /// Traces `n_rays` at normal or oblique incidence from the top medium; chunks seeded from
    /// (seed, job_key, chunk), so results are independent of the thread count.
    pub fn trace(
        &self,
        incidence: &super::Incidence,
        n_rays: u64,
        seed: u64,
        job_key: u64,
    ) -> WaferTally {
        self.trace_chunks(
            incidence,
            0,
            n_rays.div_ceil(RAYS_PER_CHUNK),
            n_rays,
            seed,
            job_key,
        )
    }

    fn trace_chunks(
        &self,
        incidence: &super::Incidence,
        first: u64,
        last: u64,
        n_rays: u64,
        seed: u64,
        job_key: u64,
    ) -> WaferTally {
        let parts: Vec<WaferTally> = (first..last)
            .into_par_iter()
            .map(|chunk| {
                let rays = RAYS_PER_CHUNK.min(n_rays - chunk * RAYS_PER_CHUNK);
                self.trace_chunk(incidence, rays, seed, job_key, chunk)
            })
            .collect();
        let mut tally = self.empty_tally();
        for t in &parts {
            tally.merge(t);
        }
        tally
    }

    fn empty_tally(&self) -> WaferTally {
        WaferTally::new(self.interfaces.len(), self.layers.len(), self.profile_bins)
    }

    /// Traces until the standard errors of reflectance and absorber absorptance are at most
    /// `target_se` or `max_rays` are spent (rounds planned from results only: deterministic).
    pub fn trace_to_precision(
        &self,
        incidence: &super::Incidence,
        target_se: f64,
        max_rays: u64,
        seed: u64,
        job_key: u64,
    ) -> WaferTally {
        let max_chunks = max_rays.div_ceil(RAYS_PER_CHUNK).max(1);
        let budget = max_chunks * RAYS_PER_CHUNK;
        let (mut done, mut next) = (0u64, 4u64.min(max_chunks));
        let mut tally = self.empty_tally();
        loop {
            tally.merge(&self.trace_chunks(incidence, done, next, budget, seed, job_key));
            done = next;
            let se = tally
                .estimate(&tally.reflected)
                .std_error
                .max(tally.estimate(&tally.layers[self.absorber]).std_error);
            if se <= target_se || done >= max_chunks {
                return tally;
            }
            let need = (done as f64 * (se / target_se).powi(2) * 1.1).ceil() as u64;
            next = need.clamp(done + 1, max_chunks);
        }
    }

    fn trace_chunk(
        &self,
        incidence: &super::Incidence,
        rays: u64,
        seed: u64,
        job_key: u64,
        chunk: u64,
    ) -> WaferTally {
        let mut tally = self.empty_tally();
        let mut rng = Stream::new(seed, job_key, chunk);
        // The depth sampler gets its own stream so the ray paths do not depend on whether a
        // profile is recorded.
        let mut depth_rng = Stream::new(seed, job_key ^ 0x5EED_DE97_0000_0000, chunk);
        let n_if = self.interfaces.len();
        let n_layers = self.layers.len();
        let mut film = vec![[0.0f64; MAX_FILM_LAYERS]; n_if];
        let mut bulk = vec![0.0f64; n_layers];
        let mut sample = FacetSample::default();
        let (p_lo, p_hi) = self.profile_span();
        let bins = self.profile_bins;
        let bin_scale = if p_hi > p_lo {
            bins as f64 / (p_hi - p_lo)
        } else {
            0.0
        };
        let launcher = self.interfaces[0].launcher(incidence);
        for _ in 0..rays {
            film.iter_mut()
                .for_each(|f| f.iter_mut().for_each(|a| *a = 0.0));
            bulk.iter_mut().for_each(|a| *a = 0.0);
            let mut ray = launcher.ray(&mut rng);
            let mut interface = 0usize;
            let mut side = Side::Above;
            let mut events_total = 0u32;
            let mut entered = false;
            let (mut r, mut t, mut a) = (0.0, 0.0, 0.0);
            loop {
                let surf = &self.interfaces[interface];
                let mut sink = LayerSink {
                    model: self,
                    interface,
                    bulk: &mut bulk,
                    profile: &mut tally.profile,
                    rng: &mut depth_rng,
                    p_lo,
                    bin_scale,
                };
                let (outcome, events) = surf.follow(
                    &mut ray,
                    side,
                    &mut rng,
                    &mut film[interface],
                    &mut sample,
                    &mut sink,
                );
                events_total += events;
                match outcome {
                    Outcome::Extinguished => break,
                    Outcome::Abandoned { lost } => {
                        a = ray.pol.s[0];
                        if lost {
                            tally.lost_rays += 1;
                        } else {
                            tally.event_limited_rays += 1;
                        }
                        break;
                    }
                    Outcome::Left(Side::Above) if interface == 0 => {
                        r = ray.pol.s[0];
                        break;
                    }
                    Outcome::Left(Side::Below) if interface == n_if - 1 => {
                        t = ray.pol.s[0];
                        break;
                    }
                    Outcome::Left(exit) => {
                        if events_total > MAX_EVENTS {
                            a = ray.pol.s[0];
                            tally.event_limited_rays += 1;
                            break;
                        }
                        // Into thick layer j; cross it to the next interface.
                        let (j, next) = match exit {
                            Side::Below => (interface, interface + 1),
                            Side::Above => (interface - 1, interface - 1),
                        };
                        let w = ray.pol.s[0];
                        if exit == Side::Below && j == self.absorber && !entered {
                            entered = true;
                            record_entering(&mut tally, ray.dir, w);
                        }
                        let gap = self.gap(j);
                        let mu = ray.dir.z.abs().max(1e-300);
                        let length = gap / mu;
                        let alpha = self.layers[j].alpha_per_um;
                        let survive = w * (-alpha * length).exp();
                        let absorbed = w - survive;
                        bulk[j] += absorbed;
                        if j == self.absorber && absorbed > 0.0 && bins > 0 {
                            // Depth at the start of the gap, measured in the absorber's frame.
                            let d0 = match exit {
                                Side::Below => -self.z_range(j)[0],
                                Side::Above => self.layers[j].thickness_um - self.z_range(j + 1)[1],
                            };
                            let s = sample_exponential(&mut depth_rng, alpha, length);
                            let depth = d0 + s * (-ray.dir.z);
                            deposit(&mut tally.profile, depth, p_lo, bin_scale, absorbed);
                        }
                        ray.pol.s = ray
                            .pol
                            .s
                            .map(|v| v * if w > 0.0 { survive / w } else { 0.0 });
                        // Re-randomise the lateral position over the next texture's cell.
                        side = if exit == Side::Below {
                            Side::Above
                        } else {
                            Side::Below
                        };
                        ray.origin = self.interfaces[next].entry_point(side, &mut rng);
                        ray.skip = None;
                        interface = next;
                    }
                }
            }
            tally.rays += 1;
            tally.reflected.add(r);
            tally.escape.add(if entered { r } else { 0.0 });
            tally.transmitted.add(t);
            tally.abandoned.add(a);
            for (m, b) in tally.layers.iter_mut().zip(&bulk) {
                m.add(*b);
            }
            for (i, f) in film.iter().enumerate() {
                let n = self.interfaces[i].response.n_layers();
                for (m, a) in tally.films[i].iter_mut().zip(&f[..n]) {
                    m.add(*a);
                }
            }
        }
        tally
    }
}

fn record_entering(tally: &mut WaferTally, dir: Vec3, w: f64) {
    let mu = dir.z.abs();
    let pb = super::tally::polar_bin(mu);
    let phi = dir.y.atan2(dir.x).rem_euclid(std::f64::consts::TAU);
    let ab = ((phi / std::f64::consts::TAU * ENTER_AZIMUTH_BINS as f64) as usize)
        .min(ENTER_AZIMUTH_BINS - 1);
    tally.entering[pb * ENTER_AZIMUTH_BINS + ab] += w;
    tally.entering_inv_cos += w / mu.max(1e-12);
    tally.entering_power += w;
}

/// Path length s ∈ [0, L] at which absorption happens, drawn from the truncated exponential
/// density α e^{−αs}/(1 − e^{−αL}) by inversion.
#[inline]
fn sample_exponential(rng: &mut Stream, alpha: f64, length: f64) -> f64 {
    let u = rng.uniform();
    if alpha * length < 1e-9 {
        return u * length;
    }
    let s = -(-u * (-(-alpha * length).exp_m1())).ln_1p() / alpha;
    s.clamp(0.0, length)
}

#[inline]
fn deposit(profile: &mut [f64], depth: f64, lo: f64, scale: f64, w: f64) {
    if profile.is_empty() {
        return;
    }
    let b = ((depth - lo) * scale).floor();
    let b = (b.max(0.0) as usize).min(profile.len() - 1);
    profile[b] += w;
}

/// Bulk absorption inside the textures on either side of interface `interface`.
struct LayerSink<'m, 'r> {
    model: &'m WaferModel<'m>,
    interface: usize,
    bulk: &'r mut [f64],
    profile: &'r mut [f64],
    rng: &'r mut Stream,
    p_lo: f64,
    bin_scale: f64,
}

impl BulkSink for LayerSink<'_, '_> {
    #[inline]
    fn segment(&mut self, side: Side, start: Vec3, dir: Vec3, length: f64, weight: f64) -> f64 {
        // Medium above interface i is medium i (thick layer i − 1); below is layer i.
        let layer = match side {
            Side::Above if self.interface == 0 => return weight,
            Side::Above => self.interface - 1,
            Side::Below if self.interface == self.model.layers.len() => return weight,
            Side::Below => self.interface,
        };
        let alpha = self.model.layers[layer].alpha_per_um;
        if alpha == 0.0 || length <= 0.0 {
            return weight;
        }
        let survive = weight * (-alpha * length).exp();
        let absorbed = weight - survive;
        self.bulk[layer] += absorbed;
        if layer == self.model.absorber && !self.profile.is_empty() {
            // Depth below the absorber's top base plane at the segment start.
            let d0 = match side {
                Side::Below => -start.z,
                Side::Above => self.model.layers[layer].thickness_um - start.z,
            };
            let s = sample_exponential(self.rng, alpha, length);
            deposit(
                self.profile,
                d0 - s * dir.z,
                self.p_lo,
                self.bin_scale,
                absorbed,
            );
        }
        survive
    }
}
