//! The surface tracer: rays through one textured, coated interface between two half-spaces.
//!
//! Each ray starts just outside the texture's height range on its incidence side and is
//! followed facet by facet until it leaves the slab upward or downward. At every facet event
//! the coated interface's response at the local incidence angle (from `FacetResponse`) decides,
//! for the ray's Stokes state, how much power the films absorb (booked per layer) and whether
//! the ray reflects or refracts (probabilities ∝ the reflected and transmitted powers; the
//! weight is renormalised to R + T, an unbiased "implicit absorption" estimator).
//! Invariant: for every ray, reflected + transmitted + Σ film + abandoned = its initial weight.

use super::packet::LaneTexture;
use super::polarisation::{self, Polarised};
use super::response::{BareInterface, CoatedInterface, FacetResponse, FacetSample, Side, other};
use super::tally::{HIT_BINS, Tally, polar_bin};
use crate::geometry::{FacetId, Hit, Vec3, greater, lesser, orthonormal_basis};
use crate::sampling::Stream;
use crate::texture::{RandomPyramids, RegularPyramids, SurfaceKind, Texture};
use rayon::prelude::*;
use std::any::Any;

/// Rays per work chunk: fixed, never derived from the thread count.
pub const RAYS_PER_CHUNK: u64 = 4096;
/// Facet events after which a ray is given up (its weight is booked as abandoned).
pub const MAX_EVENTS: u32 = 10_000;

/// How polarisation is treated at each facet event.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Default)]
pub enum PolarisationMode {
    /// Full Stokes-vector tracking with the interface's Mueller matrices.
    #[default]
    Stokes,
    /// Mean of s and p at each event (the common approximation; for comparison).
    Unpolarised,
}

/// Polarisation of the incident light, relative to the macroscopic plane of incidence (the
/// plane through the incident direction and the z axis; for normal incidence the x-z plane).
#[derive(Clone, Copy, Debug, PartialEq, Default)]
pub enum InputPolarisation {
    #[default]
    Unpolarised,
    /// Electric field perpendicular to the plane of incidence.
    S,
    /// Electric field in the plane of incidence.
    P,
    /// Linear at an angle (radians) from the s direction towards p.
    Linear(f64),
}

/// Where rays come from.
#[derive(Clone, Copy, Debug, PartialEq)]
pub enum Incidence {
    /// From the upper medium, travelling at polar angle `theta` (radians, from −z) and
    /// azimuth `phi` (radians, of the propagation direction's horizontal component).
    Above {
        theta: f64,
        phi: f64,
        polarisation: InputPolarisation,
    },
    /// From the lower medium along `direction` (unit, z > 0), unpolarised.
    BelowDirection { direction: Vec3 },
    /// From the lower medium with isotropic radiance (cosine-weighted flux), unpolarised.
    BelowIsotropic,
}

impl Incidence {
    pub(super) fn side(&self) -> Side {
        match self {
            Incidence::Above { .. } => Side::Above,
            _ => Side::Below,
        }
    }
}

/// Receives every ray that leaves the surface (for redistribution matrices and the like).
pub trait ExitObserver: Send + Default {
    /// Whether [`Self::exit`] does anything: tracers may skip calling it when not.
    const WATCHES: bool = true;
    /// A ray leaves on `side` (the medium it ends in) with unit `dir` and power `weight`;
    /// `start_dir` is the direction it arrived with.
    fn exit(&mut self, start_dir: Vec3, side: Side, dir: Vec3, weight: f64);
    /// Adds another observer's counts (called in chunk order).
    fn merge(&mut self, other: Self);
}

/// Absorption in the thick media on either side of a surface, along each path segment
/// inside the texture's height range (the texture's own volume belongs to the medium it is
/// made of: light inside a silicon pyramid is absorbed there too).
pub trait BulkSink {
    /// A segment of `length` µm from `start` along `dir` in the medium on `side`, entered
    /// with power `weight`; returns the power that survives it (Beer–Lambert) and books the
    /// rest.
    fn segment(&mut self, side: Side, start: Vec3, dir: Vec3, length: f64, weight: f64) -> f64;
}

/// Non-absorbing media on both sides (the surface tracer between half-spaces).
pub struct Clear;

impl BulkSink for Clear {
    #[inline]
    fn segment(&mut self, _: Side, _: Vec3, _: Vec3, _: f64, weight: f64) -> f64 {
        weight
    }
}

impl ExitObserver for () {
    const WATCHES: bool = false;
    fn exit(&mut self, _: Vec3, _: Side, _: Vec3, _: f64) {}
    fn merge(&mut self, _: Self) {}
}

/// One textured, coated interface between two half-spaces with real indices.
///
/// Indices of thick media are their real parts: absorption in thick layers is taken along the
/// path by the wafer tracer, not at the interface (DESIGN §4).
pub struct Surface<'a> {
    pub texture: &'a dyn Texture,
    pub response: &'a dyn FacetResponse,
    pub n_above: f64,
    pub n_below: f64,
    pub polarisation: PolarisationMode,
}

/// A ray in flight.
#[derive(Clone, Copy, Debug)]
pub struct Ray {
    /// Start point, µm (inside `follow`, after an event: the hit point on the facet left).
    pub origin: Vec3,
    /// Unit direction.
    pub dir: Vec3,
    pub pol: Polarised,
    /// Facet just left, in the origin's cell frame.
    pub skip: Option<FacetId>,
}

/// How a ray left the surface.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Outcome {
    /// Left into the medium on `Side`; the ray holds the exit direction and weight.
    Left(Side),
    /// No power left: absorbed along the path or in the films (already booked there).
    Extinguished,
    /// Given up: lost to numerics (`lost`) or stopped at the event limit or a facet with
    /// R + T = 0. Its weight is booked as abandoned so the energy balance still closes.
    Abandoned { lost: bool },
}

impl<'a> Surface<'a> {
    fn index(&self, side: Side) -> f64 {
        match side {
            Side::Above => self.n_above,
            Side::Below => self.n_below,
        }
    }

    /// Follows `ray`, currently in the medium on `side`, until it leaves the texture slab;
    /// a ray that leaves is moved onto the slab's boundary plane (z_max above, z_min below).
    /// Film absorption is added to `film` (per layer), bulk absorption inside the slab goes
    /// to `bulk`; returns the outcome and the number of facet events. Works in the texture's
    /// unit-cell frame.
    ///
    /// The loop is compiled for the concrete texture and response types of the common cases
    /// (see `typed`).
    pub fn follow<B: BulkSink>(
        &self,
        ray: &mut Ray,
        side: Side,
        rng: &mut Stream,
        film: &mut [f64],
        sample: &mut FacetSample,
        bulk: &mut B,
    ) -> (Outcome, u32) {
        struct Follow<'r, B> {
            ray: &'r mut Ray,
            side: Side,
            rng: &'r mut Stream,
            film: &'r mut [f64],
            sample: &'r mut FacetSample,
            bulk: &'r mut B,
        }
        impl<B: BulkSink> Typed for Follow<'_, B> {
            type Out = (Outcome, u32);
            fn run<T: Texture + ?Sized, R: FacetResponse + ?Sized>(
                self,
                surface: &Surface,
                texture: &T,
                response: &R,
            ) -> Self::Out {
                let Follow {
                    ray,
                    side,
                    rng,
                    film,
                    sample,
                    bulk,
                } = self;
                surface.follow_in(texture, response, ray, side, rng, film, sample, bulk)
            }
        }
        self.typed(Follow {
            ray,
            side,
            rng,
            film,
            sample,
            bulk,
        })
    }

    /// Runs `job` with the texture and response as their concrete types for the common
    /// cases (regular and random pyramids; bare and coated facets), so that intersection
    /// and facet response are inlined into its loop, and as trait objects otherwise.
    fn typed<J: Typed>(&self, job: J) -> J::Out {
        let texture: &dyn Any = self.texture;
        let response: &dyn Any = self.response;
        macro_rules! with_response {
            ($run:ident, $tex:expr) => {
                if let Some(r) = response.downcast_ref::<BareInterface>() {
                    job.$run(self, $tex, r)
                } else if let Some(r) = response.downcast_ref::<CoatedInterface>() {
                    job.$run(self, $tex, r)
                } else {
                    job.$run(self, $tex, self.response)
                }
            };
        }
        if let Some(t) = texture.downcast_ref::<RegularPyramids>() {
            with_response!(run_lanes, t)
        } else if let Some(t) = texture.downcast_ref::<RandomPyramids>() {
            with_response!(run_lanes, t)
        } else {
            job.run(self, self.texture, self.response)
        }
    }

    /// [`Self::follow`] with `texture` and `response` (the surface's own) of known types.
    #[allow(clippy::too_many_arguments)]
    fn follow_in<T: Texture + ?Sized, R: FacetResponse + ?Sized, B: BulkSink>(
        &self,
        texture: &T,
        response: &R,
        ray: &mut Ray,
        mut side: Side,
        rng: &mut Stream,
        film: &mut [f64],
        sample: &mut FacetSample,
        bulk: &mut B,
    ) -> (Outcome, u32) {
        let kind = texture.kind();
        let [z_lo, z_hi] = texture.z_range_um();
        let mut events = 0u32;
        // The facet event the ray left last (its start point is that hit's point).
        let mut last: Option<Hit> = None;
        loop {
            if ray.pol.s[0] == 0.0 {
                return (Outcome::Extinguished, events);
            }
            let next = match &last {
                Some(from) => texture.intersect_after(from, ray.dir),
                None => texture.intersect(ray.origin, ray.dir, ray.skip),
            };
            let Some(hit) = next else {
                // Left the slab: must be travelling away from the surface on its own side.
                let ok = match side {
                    Side::Above => ray.dir.z > 0.0,
                    Side::Below => ray.dir.z < 0.0,
                };
                if !ok {
                    return (Outcome::Abandoned { lost: true }, events);
                }
                // Last segment inside the slab, to its boundary plane.
                let z_end = if side == Side::Above { z_hi } else { z_lo };
                let t = ((z_end - ray.origin.z) / ray.dir.z).max(0.0);
                ray.pol.s = scaled(
                    ray.pol.s,
                    bulk.segment(side, ray.origin, ray.dir, t, ray.pol.s[0]),
                );
                ray.origin += ray.dir * t;
                ray.origin.z = z_end;
                return (Outcome::Left(side), events);
            };
            ray.pol.s = scaled(
                ray.pol.s,
                bulk.segment(side, ray.origin, ray.dir, hit.t, ray.pol.s[0]),
            );
            events += 1;
            if events > MAX_EVENTS {
                return (Outcome::Abandoned { lost: false }, events);
            }
            let pol = &mut ray.pol;
            let (dir, to) = match self.facet_event(
                response, kind, side, ray.dir, hit.normal, pol, rng, film, sample,
            ) {
                Step::Go(dir, to) => (dir, to),
                Step::Extinguished => return (Outcome::Extinguished, events),
                Step::Lost => return (Outcome::Abandoned { lost: true }, events),
            };
            side = to;
            ray.origin = hit.point;
            ray.dir = dir;
            ray.skip = Some(hit.facet);
            last = Some(hit);
        }
    }

    /// One facet event for a ray in the medium on `side` travelling along `k`, meeting a
    /// facet with up normal `n`: the coated interface's response for the ray's polarisation,
    /// film absorption booked into `film` (per layer, as power), the reflect/refract choice
    /// and the new direction and side; `pol` is updated (weight renormalised to R + T).
    #[allow(clippy::too_many_arguments)]
    #[inline(always)]
    pub(super) fn facet_event<R: FacetResponse + ?Sized>(
        &self,
        response: &R,
        kind: SurfaceKind,
        side: Side,
        k: Vec3,
        n: Vec3,
        pol: &mut Polarised,
        rng: &mut Stream,
        film: &mut [f64],
        sample: &mut FacetSample,
    ) -> Step {
        let n_layers = response.n_layers();
        let k_dot_n = k.dot(n);
        // A ray in the upper medium meets the surface from above (k·n < 0) and vice versa;
        // anything else is a numerical inconsistency.
        let consistent = match side {
            Side::Above => k_dot_n < 0.0,
            Side::Below => k_dot_n > 0.0,
        };
        if !consistent {
            return Step::Lost;
        }
        let cos_i = lesser(k_dot_n.abs(), 1.0);
        let cos_tilt = n.z;
        let w = pol.s[0];

        // Facet response, film absorption and the reflect/refract choice
        let (c_r, c_t, reflect) = match self.polarisation {
            PolarisationMode::Unpolarised => {
                let (r, t) = if n_layers == 0 {
                    let [rs, rp, ts, tp] = response.power(side, cos_i, cos_tilt);
                    (0.5 * (rs + rp), 0.5 * (ts + tp))
                } else {
                    response.sample(side, cos_i, cos_tilt, sample);
                    let pairs = sample.a_s.iter().zip(&sample.a_p);
                    for (f, (a_s, a_p)) in film[..n_layers].iter_mut().zip(pairs) {
                        *f += w * 0.5 * (a_s + a_p);
                    }
                    (
                        0.5 * (sample.r_s + sample.r_p),
                        0.5 * (sample.t_s + sample.t_p),
                    )
                };
                let total = r + t;
                let reflect = rng.uniform() * total < r;
                pol.s = [w * total, 0.0, 0.0, 0.0];
                (r, t, reflect)
            }
            PolarisationMode::Stokes => {
                let s_hat = polarisation::s_axis(k, n, pol.e1);
                let s = polarisation::rotate_into(pol.s, pol.e1, k, s_hat);
                // The full sample even for bare facets: Stokes tracking needs the cross terms.
                response.sample(side, cos_i, cos_tilt, sample);
                let pairs = sample.a_s.iter().zip(&sample.a_p);
                for (f, (a_s, a_p)) in film[..n_layers].iter_mut().zip(pairs) {
                    *f += polarisation::power(&s, *a_s, *a_p);
                }
                let p_r = polarisation::power(&s, sample.r_s, sample.r_p);
                let p_t = polarisation::power(&s, sample.t_s, sample.t_p);
                let total = p_r + p_t;
                let reflect = rng.uniform() * total < p_r;
                let (out, p) = if reflect {
                    (
                        polarisation::apply(&s, sample.r_s, sample.r_p, sample.r_cross),
                        p_r,
                    )
                } else {
                    (
                        polarisation::apply(&s, sample.t_s, sample.t_p, sample.t_cross),
                        p_t,
                    )
                };
                let scale = if p > 0.0 { total / p } else { 0.0 };
                pol.s = out.map(|v| v * scale);
                pol.e1 = s_hat;
                (p_r, p_t, reflect)
            }
        };
        if c_r + c_t <= 0.0 {
            // Everything went into the films (booked above).
            return Step::Extinguished;
        }

        // New direction
        let facing = if k_dot_n < 0.0 { n } else { -n };
        let new_dir = if kind == SurfaceKind::IdealLambertian {
            let d = lambert(rng);
            let to_above = (side == Side::Above) == reflect;
            pol.s = [pol.s[0], 0.0, 0.0, 0.0];
            if to_above {
                d
            } else {
                Vec3::new(d.x, d.y, -d.z)
            }
        } else if reflect {
            reflected(k, n, k_dot_n)
        } else {
            let eta = self.index(side) / self.index(other(side));
            refracted(k, facing, eta, cos_i)
        };
        debug_assert!((new_dir.length() - 1.0).abs() < 1e-9);
        // The reference axis, now ŝ, is already perpendicular to a reflected or refracted
        // direction (both lie in the plane of incidence, and ŝ is normal to it); a
        // randomised ray (unpolarised) gets any axis perpendicular to its direction.
        // (Stokes only: an unpolarised ray needs none.)
        if self.polarisation == PolarisationMode::Stokes && kind == SurfaceKind::IdealLambertian {
            pol.e1 = orthonormal_basis(new_dir).0;
        }
        let to = if reflect { side } else { other(side) };
        Step::Go(new_dir, to)
    }

    /// Height just outside the texture's range on `side` (by 1e-6 of the feature size, so
    /// the first intersection is never at t = 0), µm.
    fn entry_height(&self, side: Side) -> f64 {
        let [px, py] = self.texture.period_um();
        let [z_lo, z_hi] = self.texture.z_range_um();
        let margin = 1e-6 * (1.0 + px.max(py) + (z_hi - z_lo));
        match side {
            Side::Above => z_hi + margin,
            Side::Below => z_lo - margin,
        }
    }

    /// A random point in the unit cell just outside the texture's height range on `side`
    /// (see [`Launcher`] for many rays).
    pub fn entry_point(&self, side: Side, rng: &mut Stream) -> Vec3 {
        entry_point(self.texture.lattice_um(), self.entry_height(side), rng)
    }

    /// Prepares `incidence` for launching many rays: directions, Stokes vectors and the
    /// entry plane are computed once here, not per ray.
    pub fn launcher(&self, incidence: &Incidence) -> Launcher {
        let unpolarised = |dir: Vec3| Polarised {
            s: [1.0, 0.0, 0.0, 0.0],
            e1: orthonormal_basis(dir).0,
        };
        let start = match *incidence {
            Incidence::Above {
                theta,
                phi,
                polarisation,
            } => {
                let dir = Vec3::new(
                    theta.sin() * phi.cos(),
                    theta.sin() * phi.sin(),
                    -theta.cos(),
                );
                // s axis: perpendicular to the plane through dir and z (x-z plane at normal).
                let s_hat = if theta.sin().abs() < 1e-12 {
                    Vec3::new(-phi.sin(), phi.cos(), 0.0)
                } else {
                    dir.cross(Vec3::Z).normalize()
                };
                let s = match polarisation {
                    InputPolarisation::Unpolarised => [1.0, 0.0, 0.0, 0.0],
                    InputPolarisation::S => [1.0, 1.0, 0.0, 0.0],
                    InputPolarisation::P => [1.0, -1.0, 0.0, 0.0],
                    InputPolarisation::Linear(a) => [1.0, (2.0 * a).cos(), (2.0 * a).sin(), 0.0],
                };
                Start::Fixed(dir, Polarised { s, e1: s_hat })
            }
            Incidence::BelowDirection { direction } => {
                let dir = direction.normalize();
                Start::Fixed(dir, unpolarised(dir))
            }
            Incidence::BelowIsotropic => Start::Isotropic,
        };
        Launcher {
            start,
            lattice: self.texture.lattice_um(),
            z: self.entry_height(incidence.side()),
        }
    }

    /// Starts a ray for `incidence` at a random position in the unit cell.
    pub fn launch(&self, incidence: &Incidence, rng: &mut Stream) -> Ray {
        self.launcher(incidence).ray(rng)
    }

    /// Traces one chunk of rays into a tally (and an exit observer).
    pub fn trace_chunk<O: ExitObserver>(
        &self,
        incidence: &Incidence,
        rays: u64,
        rng: &mut Stream,
    ) -> (Tally, O) {
        self.trace_chunk_with(incidence, rays, rng, true)
    }

    fn trace_chunk_with<O: ExitObserver>(
        &self,
        incidence: &Incidence,
        rays: u64,
        rng: &mut Stream,
        packets: bool,
    ) -> (Tally, O) {
        struct Chunk<'r, O> {
            incidence: &'r Incidence,
            rays: u64,
            rng: &'r mut Stream,
            packets: bool,
            observer: std::marker::PhantomData<O>,
        }
        impl<O: ExitObserver> Typed for Chunk<'_, O> {
            type Out = (Tally, O);
            fn run<T: Texture + ?Sized, R: FacetResponse + ?Sized>(
                self,
                surface: &Surface,
                texture: &T,
                response: &R,
            ) -> Self::Out {
                surface.trace_chunk_in(texture, response, self.incidence, self.rays, self.rng)
            }
            fn run_lanes<T: LaneTexture, R: FacetResponse + ?Sized>(
                self,
                surface: &Surface,
                texture: &T,
                response: &R,
            ) -> Self::Out {
                if self.packets && texture.has_lane_path() {
                    super::packet::trace_chunk(
                        surface,
                        texture,
                        response,
                        self.incidence,
                        self.rays,
                        self.rng,
                    )
                } else {
                    self.run(surface, texture, response)
                }
            }
        }
        self.typed(Chunk {
            incidence,
            rays,
            rng,
            packets,
            observer: std::marker::PhantomData,
        })
    }

    /// [`Self::trace_chunk`] with `texture` and `response` (the surface's own) of known types.
    fn trace_chunk_in<T: Texture + ?Sized, R: FacetResponse + ?Sized, O: ExitObserver>(
        &self,
        texture: &T,
        response: &R,
        incidence: &Incidence,
        rays: u64,
        rng: &mut Stream,
    ) -> (Tally, O) {
        let mut tally = Tally::default();
        let mut obs = O::default();
        let n_layers = response.n_layers();
        let mut film = [0.0; super::response::MAX_FILM_LAYERS];
        let mut sample = FacetSample::default();
        let side_in = incidence.side();
        let launcher = self.launcher(incidence);
        for _ in 0..rays {
            let mut ray = launcher.ray(rng);
            let start = ray.dir;
            film[..n_layers].iter_mut().for_each(|a| *a = 0.0);
            let (outcome, events) = self.follow_in(
                texture,
                response,
                &mut ray,
                side_in,
                rng,
                &mut film,
                &mut sample,
                &mut Clear,
            );
            book(
                &mut tally,
                &mut obs,
                side_in,
                start,
                ray.dir,
                ray.pol.s[0],
                outcome,
                events,
                &film[..n_layers],
            );
        }
        (tally, obs)
    }

    /// Traces `n_rays` rays in parallel chunks seeded from (seed, job_key, chunk): the result
    /// is bit-identical whatever the thread count.
    pub fn trace<O: ExitObserver>(
        &self,
        incidence: &Incidence,
        n_rays: u64,
        seed: u64,
        job_key: u64,
    ) -> (Tally, O) {
        let chunks = 0..n_rays.div_ceil(RAYS_PER_CHUNK);
        self.trace_chunks(incidence, chunks, n_rays, (seed, job_key), true)
    }

    /// [`Self::trace`] without the packet tracer of upright regular and random pyramids
    /// (`tracer::packet`): every ray followed on its own, seeded alike (the random numbers
    /// are drawn differently, so results agree statistically). For comparisons and
    /// benchmarks.
    pub fn trace_one_at_a_time<O: ExitObserver>(
        &self,
        incidence: &Incidence,
        n_rays: u64,
        seed: u64,
        job_key: u64,
    ) -> (Tally, O) {
        let chunks = 0..n_rays.div_ceil(RAYS_PER_CHUNK);
        self.trace_chunks(incidence, chunks, n_rays, (seed, job_key), false)
    }

    /// `chunks` of a job of `n_rays` in total (the last chunk may be short), seeded from
    /// (seed, job key, chunk); `packets`: as [`Self::trace_chunk`] (else one ray at a time).
    fn trace_chunks<O: ExitObserver>(
        &self,
        incidence: &Incidence,
        chunks: std::ops::Range<u64>,
        n_rays: u64,
        (seed, job_key): (u64, u64),
        packets: bool,
    ) -> (Tally, O) {
        let parts: Vec<(Tally, O)> = chunks
            .into_par_iter()
            .map(|chunk| {
                let mut rng = Stream::new(seed, job_key, chunk);
                let rays = RAYS_PER_CHUNK.min(n_rays - chunk * RAYS_PER_CHUNK);
                self.trace_chunk_with(incidence, rays, &mut rng, packets)
            })
            .collect(); // indexed collect keeps chunk order
        let mut tally = Tally::default();
        let mut obs = O::default();
        for (t, o) in parts {
            tally.merge(&t);
            obs.merge(o);
        }
        (tally, obs)
    }

    /// Traces until the standard error of reflectance and transmittance is at most
    /// `target_se`, or `max_rays` are spent. Rounds of whole chunks are planned from the
    /// results so far only, so the outcome is still independent of the thread count.
    pub fn trace_to_precision<O: ExitObserver>(
        &self,
        incidence: &Incidence,
        target_se: f64,
        max_rays: u64,
        seed: u64,
        job_key: u64,
    ) -> (Tally, O) {
        let max_chunks = max_rays.div_ceil(RAYS_PER_CHUNK).max(1);
        let budget = max_chunks * RAYS_PER_CHUNK;
        let mut done = 0u64;
        let mut next = 8u64.min(max_chunks);
        let mut tally = Tally::default();
        let mut obs = O::default();
        loop {
            let (t, o) = self.trace_chunks(incidence, done..next, budget, (seed, job_key), true);
            tally.merge(&t);
            obs.merge(o);
            done = next;
            let se = tally
                .reflectance()
                .std_error
                .max(tally.transmittance().std_error);
            if se <= target_se || done >= max_chunks {
                return (tally, obs);
            }
            // σ ∝ 1/√N: chunks needed for the target, plus 10 % headroom.
            let need = (done as f64 * (se / target_se).powi(2) * 1.1).ceil() as u64;
            next = need.clamp(done + 1, max_chunks);
        }
    }
}

/// A job run with a surface's texture and response as concrete types (see `Surface::typed`).
trait Typed: Sized {
    type Out;
    fn run<T: Texture + ?Sized, R: FacetResponse + ?Sized>(
        self,
        surface: &Surface,
        texture: &T,
        response: &R,
    ) -> Self::Out;
    /// [`Self::run`] for textures the packet tracer serves (jobs with a packet path
    /// override it).
    fn run_lanes<T: LaneTexture, R: FacetResponse + ?Sized>(
        self,
        surface: &Surface,
        texture: &T,
        response: &R,
    ) -> Self::Out {
        self.run(surface, texture, response)
    }
}

/// What a facet event did to a ray.
pub(super) enum Step {
    /// Reflected or refracted: the new direction and the medium it is now in.
    Go(Vec3, Side),
    /// All power went into the films.
    Extinguished,
    /// Met the facet from the wrong side: a numerical inconsistency.
    Lost,
}

/// Books one finished ray into `tally` and `obs`: it arrived from `side_in` along `start`,
/// ended as `outcome` after `events` facet events with `ray`'s direction and weight, and put
/// `film` into the film layers.
#[allow(clippy::too_many_arguments)]
#[inline]
pub(super) fn book<O: ExitObserver>(
    tally: &mut Tally,
    obs: &mut O,
    side_in: Side,
    start: Vec3,
    dir: Vec3,
    w: f64,
    outcome: Outcome,
    events: u32,
    film: &[f64],
) {
    tally.rays += 1;
    tally.hits[(events as usize).min(HIT_BINS - 1)] += 1;
    for (m, f) in tally.film.iter_mut().zip(film) {
        m.add(*f);
    }
    let (mut r, mut t, mut a) = (0.0, 0.0, 0.0);
    match outcome {
        Outcome::Left(side) => {
            let bin = polar_bin(dir.z.abs());
            if side == side_in {
                r = w;
                tally.reflected_polar[bin] += w;
            } else {
                t = w;
                tally.transmitted_polar[bin] += w;
                tally.transmitted_inv_cos += w / dir.z.abs().max(1e-12);
            }
            obs.exit(start, side, dir, w);
        }
        Outcome::Extinguished => {}
        Outcome::Abandoned { lost } => {
            a = w;
            if lost {
                tally.lost_rays += 1;
            } else {
                tally.event_limited_rays += 1;
            }
        }
    }
    tally.reflected.add(r);
    tally.transmitted.add(t);
    tally.abandoned.add(a);
}

/// Mirror image of the direction `k` in the plane with unit normal `n` (`k_dot_n` = k·n):
/// r = k − 2(k·n)n, the law of reflection (Born & Wolf 1999, §1.5.1).
#[inline(always)]
pub(super) fn reflected(k: Vec3, n: Vec3, k_dot_n: f64) -> Vec3 {
    k - 2.0 * k_dot_n * n
}

/// Direction of the ray `k` refracted by Snell's law through a plane with unit normal
/// `facing` (on the incidence side, k·facing = −`cos_i`), index ratio `eta` = n₁/n₂:
/// t = η k + (η cos θᵢ − cos θₜ) n, the vector form of the law of refraction (M. Born &
/// E. Wolf, *Principles of Optics*, 7th ed. (1999), §1.5.1; M. Pharr, W. Jakob &
/// G. Humphreys, *Physically Based Rendering*, 4th ed. (2023), §9.3.2).
/// Without a real refraction angle, −`facing`: that transmission happens only into an
/// absorbing far medium (a rear metal, whose complex index the film response keeps), where
/// the power is absorbed at once, so the ray is sent straight into it along the normal.
/// (No branches: it vectorises over rays.)
#[inline(always)]
pub(super) fn refracted(k: Vec3, facing: Vec3, eta: f64, cos_i: f64) -> Vec3 {
    let sin2_t = eta * eta * (1.0 - cos_i * cos_i);
    let cos_t = greater(1.0 - sin2_t, 0.0).sqrt();
    let d = unit_again(eta * k + (eta * cos_i - cos_t) * facing);
    if sin2_t >= 1.0 { -facing } else { d }
}

/// `v` of length 1 up to rounding (|t|² = sin²θₜ + cos²θₜ above) brought back to unit
/// length: one Newton step for y = 1/√x from y₀ = 1, y₁ = y₀(3 − x y₀²)/2 = (3 − x)/2
/// (Newton's method for f(y) = 1/y² − x; W. H. Press et al., *Numerical Recipes*, 3rd ed.
/// (2007), §9.4), whose error (3/8)(x − 1)² is far below rounding here; no square root or
/// division.
#[inline(always)]
pub(super) fn unit_again(v: Vec3) -> Vec3 {
    v * (1.5 - 0.5 * v.length_squared())
}

/// `s` rescaled so that its intensity is `w`.
#[inline]
fn scaled(s: [f64; 4], w: f64) -> [f64; 4] {
    if s[0] == w || s[0] == 0.0 {
        return s;
    }
    let f = w / s[0];
    s.map(|v| v * f)
}

/// Cosine-weighted direction around +z.
#[inline]
fn lambert(rng: &mut Stream) -> Vec3 {
    rng.cosine_hemisphere()
}

/// How rays of a prepared incidence start.
#[derive(Clone, Copy, Debug)]
enum Start {
    /// Along one direction with one polarisation state.
    Fixed(Vec3, Polarised),
    /// Cosine-weighted upward from below, unpolarised.
    Isotropic,
}

/// An incidence prepared for launching rays ([`Surface::launcher`]).
#[derive(Clone, Copy, Debug)]
pub struct Launcher {
    start: Start,
    lattice: [[f64; 2]; 2],
    z: f64,
}

impl Launcher {
    /// Direction and polarisation shared by all rays, if they are (not for isotropic
    /// incidence), and the height of the entry plane.
    pub(super) fn fixed(&self) -> (Option<(Vec3, Polarised)>, f64) {
        match self.start {
            Start::Fixed(dir, pol) => (Some((dir, pol)), self.z),
            Start::Isotropic => (None, self.z),
        }
    }

    /// A new ray at a uniformly random point of the unit cell on the entry plane.
    #[inline]
    pub fn ray(&self, rng: &mut Stream) -> Ray {
        let origin = entry_point(self.lattice, self.z, rng);
        let (dir, pol) = match self.start {
            Start::Fixed(dir, pol) => (dir, pol),
            Start::Isotropic => {
                let dir = lambert(rng);
                let pol = Polarised {
                    s: [1.0, 0.0, 0.0, 0.0],
                    e1: orthonormal_basis(dir).0,
                };
                (dir, pol)
            }
        };
        Ray {
            origin,
            dir,
            pol,
            skip: None,
        }
    }
}

/// Uniform point u·a + v·b of the unit cell spanned by `lattice` (rotated lattices too) at
/// height `z`.
#[inline]
fn entry_point(lattice: [[f64; 2]; 2], z: f64, rng: &mut Stream) -> Vec3 {
    let [a, b] = lattice;
    let (u, v) = (rng.uniform(), rng.uniform());
    Vec3::new(u * a[0] + v * b[0], u * a[1] + v * b[1], z)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn unit_again_matches_the_square_root_normalisation() {
        // Against glam's `normalize` (a general-purpose library: 1/√|v|² by the square
        // root): vectors off unit length by up to 10⁻¹² come out as unit vectors along the
        // same direction, to rounding.
        let mut rng = crate::sampling::Stream::new(4, 4, 4);
        for k in 0..10_000 {
            let dir = Vec3::new(
                rng.uniform() - 0.5,
                rng.uniform() - 0.5,
                rng.uniform() - 0.5,
            )
            .normalize();
            let off = (k as f64 / 10_000.0 - 0.5) * 2e-12;
            let v = dir * (1.0 + off).sqrt();
            let (got, want) = (unit_again(v), v.normalize());
            assert!((got - want).abs().max_element() < 4e-16, "{v:?}");
            assert!((got.length() - 1.0).abs() < 4e-16);
        }
    }
}
