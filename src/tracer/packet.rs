//! The surface tracer with [`LANES`] rays in flight at once, for the textures that implement
//! [`LaneTexture`]: upright regular pyramids (lane-wise queries) and random pyramids (the
//! texture's one-ray query lane by lane).
//!
//! Same physics and bookkeeping as [`Surface::trace_chunk`] one ray at a time; only the order
//! of work differs. Every round asks the texture for the next crossing of all lanes together
//! ([`LaneTexture::cross_lanes`]; for regular pyramids [`RegularPyramids::cross_packet`],
//! laid out for SIMD, with the lanes it cannot decide handed to the robust one-ray walk),
//! applies the facet event of every lane that crossed (the
//! formulas of [`Surface::facet_event`] over the lanes: entirely for bare facets with
//! unpolarised light, [`bare_events`]; with the response's sample taken lane by lane
//! otherwise, [`sampled_events`]), asks at once which rays are certain to leave at their
//! next query ([`LaneTexture::leaves_lanes`]: a ray refracted into the wafer ends in
//! the round of its last event, not one round later), and refills the lane of a finished
//! ray with the next ray of the chunk — for rays of a fixed direction without a branch per
//! lane ([`Ends`], [`Refill`], [`LaneSums`]). Where a round of launches alone is much
//! cheaper than others ([`LaneTexture::cheap_launches`]: vertical launches onto touching
//! pyramids skip the cone), rays are sorted into rounds of launches and rounds of rays in
//! flight: after a round of launches the rays still in flight are parked ([`Parked`]) and
//! come back, four at a time, in rounds of their own. Lanes keep their rays in the
//! texture's lattice frame (directions, Stokes reference axes); rays are rotated into it at
//! launch and back when they leave.
//!
//! Invariant: the chunk's random streams are drawn in a fixed order (rounds, then lanes), so
//! a chunk's result depends only on its seed, never on the thread count or the instruction
//! set. The random numbers differ from the one-ray tracer's, so results agree with it
//! statistically, not bit for bit (tested).

use super::polarisation::{self, Polarised};
use super::response::{BareInterface, FacetResponse, FacetSample, MAX_FILM_LAYERS, Side};
use super::surface::{
    ExitObserver, Incidence, MAX_EVENTS, Outcome, PolarisationMode, Surface, book,
};
use super::tally::{HIT_BINS, Moments, Tally, polar_bin};
use crate::geometry::lanes::{F, LANES, M, and, and_not, any, every, lanes, mask, on, or, pick};
use crate::geometry::robust::offset_origin_lanes;
use crate::geometry::{FacetId, Hit, Vec3, greater, lesser};
use crate::sampling::{LaneStreams, Stream};
use crate::texture::pyramids::{Crossings, NO_FACET, Packet};
use crate::texture::{RandomPyramids, RegularPyramids, Texture};
use std::any::Any;

/// The rays in flight, lane by lane: geometry for the texture, Stokes vectors (S₀ is the
/// weight) with their reference axes (lattice frame; with the unpolarised switch only S₀ is
/// kept, nothing reads the rest), the medium, the event count (as f64,
/// exact), film absorption per layer, whether the lane holds a ray, and the incident
/// direction (lab frame, for the exit observer).
struct Flight {
    packet: Packet,
    stokes: [F; 4],
    e1: [F; 3],
    below: M,
    events: F,
    film: [F; MAX_FILM_LAYERS],
    active: M,
    start: [Vec3; LANES],
}

impl Flight {
    /// No rays in flight.
    fn empty() -> Flight {
        Flight {
            packet: Packet::default(),
            stokes: [[0.0; LANES]; 4],
            e1: [[0.0; LANES]; 3],
            below: [0; LANES],
            events: [0.0; LANES],
            film: [[0.0; LANES]; MAX_FILM_LAYERS],
            active: [0; LANES],
            start: [Vec3::Z; LANES],
        }
    }

    /// Unpolarised light after an event of the `go` lanes: weight × (R + T) = `total`.
    #[inline(always)]
    fn renormalise_unpolarised(&mut self, go: M, total: &F) {
        let w = self.stokes[0];
        self.stokes[0] = pick(go, lanes(|l| w[l] * total[l]), w);
    }
}

/// A texture the packet tracer serves: its queries over the lanes, and its lattice frame.
pub(super) trait LaneTexture: Texture {
    /// What the texture keeps per lane from one round to the next.
    type Memo: Default;
    /// Whether this texture (with its present parameters) has a lane path.
    fn has_lane_path(&self) -> bool;
    /// The next crossing of each `active` lane of `p`, or that it leaves the slab; every
    /// active lane is decided (crosses or leaves).
    fn cross_lanes(&self, p: &Packet, active: M, memo: &mut Self::Memo) -> Crossings;
    /// Which of the `moved` lanes (just sent on from their facet events, rays in the lanes'
    /// state after the event) leave the slab without meeting the surface again (or are
    /// certain to); other lanes may come out either way.
    fn leaves_lanes(&self, p: &Packet, moved: M, memo: &mut Self::Memo) -> M;
    /// Every ray of the chunk starts along `start`'s direction (lattice frame) from its
    /// height, or not (`None`); called once, before the first query.
    fn launches(&self, _memo: &mut Self::Memo, _start: Option<(Vec3, f64)>) {}
    /// Whether a round whose lanes all hold rays just launched costs much less than others
    /// (then the loop sorts rays into rounds of launches and rounds of rays in flight).
    fn cheap_launches(&self, _memo: &Self::Memo) -> bool {
        false
    }
    /// Up normals (lattice frame) of the facets `found` crossed.
    fn normal_lanes(&self, found: &Crossings, memo: &Self::Memo) -> [F; 3];
    /// Lab-frame vector → lattice frame.
    fn to_lattice(&self, v: Vec3) -> Vec3;
    /// Lattice-frame vector → lab frame.
    fn lattice_to_lab(&self, v: Vec3) -> Vec3;
    /// A lab-frame point of the unit cell in lattice coordinates, inside [0, p)².
    fn home(&self, lab: Vec3) -> Vec3;
    /// The last coordinate below the period (the far edge of the unit cell), µm.
    fn period_below(&self) -> f64;
}

/// Regular pyramids keep whether the chunk's rays start straight down from above the slab
/// onto touching pyramids: a packet of rays all just launched is then answered by
/// [`RegularPyramids::vertical_packet`].
impl LaneTexture for RegularPyramids {
    type Memo = VerticalStarts;

    fn has_lane_path(&self) -> bool {
        self.has_packet_path()
    }

    /// [`RegularPyramids::cross_packet`], with the lanes it cannot decide handed to the
    /// robust one-ray walk.
    #[inline(always)]
    fn cross_lanes(&self, p: &Packet, active: M, memo: &mut VerticalStarts) -> Crossings {
        let fresh = mask(|l| p.skip[l] == f64::from(NO_FACET));
        let mut found = if memo.0 && every(&fresh) {
            debug_assert!(self.all_vertical(p));
            self.vertical_packet(p)
        } else {
            self.cross_packet(p)
        };
        let undecided = and_not(and_not(active, found.crosses), found.leaves);
        if any(&undecided) {
            for l in 0..LANES {
                if on(&undecided, l) {
                    robust_crossing(self, p, l, &mut found);
                }
            }
        }
        found
    }

    /// [`RegularPyramids::leaves_packet`].
    #[inline(always)]
    fn leaves_lanes(&self, p: &Packet, _: M, _: &mut VerticalStarts) -> M {
        self.leaves_packet(p)
    }

    fn launches(&self, memo: &mut VerticalStarts, start: Option<(Vec3, f64)>) {
        memo.0 = start.is_some_and(|(d, z)| self.vertical_start(d, z));
    }

    fn cheap_launches(&self, memo: &VerticalStarts) -> bool {
        memo.0
    }

    #[inline(always)]
    fn normal_lanes(&self, found: &Crossings, _: &VerticalStarts) -> [F; 3] {
        self.lattice_normal_lanes(&found.face)
    }

    // (The inherent methods of the same names.)
    #[inline(always)]
    fn to_lattice(&self, v: Vec3) -> Vec3 {
        RegularPyramids::to_lattice(self, v)
    }

    #[inline(always)]
    fn lattice_to_lab(&self, v: Vec3) -> Vec3 {
        RegularPyramids::lattice_to_lab(self, v)
    }

    #[inline(always)]
    fn home(&self, lab: Vec3) -> Vec3 {
        RegularPyramids::home(self, lab)
    }

    #[inline(always)]
    fn period_below(&self) -> f64 {
        RegularPyramids::period_below(self)
    }
}

/// Whether every ray of the chunk starts straight down from above the slab onto touching
/// upright pyramids ([`RegularPyramids::vertical_start`]).
#[derive(Default)]
pub(super) struct VerticalStarts(bool);

/// Random pyramids in lanes: each lane's query is the texture's own one-ray query
/// ([`Texture::intersect`] for a ray entering the slab, [`Texture::intersect_after`] off
/// the facet of its last event, asked in [`LaneTexture::leaves_lanes`] right after the event
/// and kept for the next round); the facet events, booking and refills go over the lanes.
/// The tile is not rotated: the lattice frame is the lab frame.
impl LaneTexture for RandomPyramids {
    type Memo = HitMemo;

    fn has_lane_path(&self) -> bool {
        true
    }

    #[inline(always)]
    fn cross_lanes(&self, p: &Packet, active: M, memo: &mut HitMemo) -> Crossings {
        let fresh = and(active, mask(|l| p.skip[l] == f64::from(NO_FACET)));
        for l in 0..LANES {
            if on(&fresh, l) {
                let o = Vec3::new(p.ox[l], p.oy[l], p.oz[l]);
                self.prefetch_launch(o, Vec3::new(p.dx[l], p.dy[l], p.dz[l]));
            }
        }
        let mut leaves = [0; LANES];
        for (l, left) in leaves.iter_mut().enumerate() {
            if on(&fresh, l) {
                let o = Vec3::new(p.ox[l], p.oy[l], p.oz[l]);
                match self.intersect_entering(o, Vec3::new(p.dx[l], p.dy[l], p.dz[l])) {
                    Some(hit) => memo.hit[l] = hit,
                    None => *left = u64::MAX,
                }
            }
            // (other active lanes cross where `leaves_lanes` found after their last event)
        }
        let h = &memo.hit;
        Crossings {
            crosses: and_not(active, leaves),
            leaves,
            face: lanes(|l| f64::from(h[l].facet.0)),
            x: lanes(|l| h[l].point.x),
            y: lanes(|l| h[l].point.y),
            z: lanes(|l| h[l].point.z),
        }
    }

    /// The next crossing of each `moved` lane, kept in `memo` for the next round.
    #[inline(always)]
    fn leaves_lanes(&self, p: &Packet, moved: M, memo: &mut HitMemo) -> M {
        // The start points of `intersect_after`, over the lanes.
        let h = &memo.hit;
        let (mut point, mut err, mut normal) =
            ([[0.0; LANES]; 3], [[0.0; LANES]; 3], [[0.0; LANES]; 3]);
        for (l, h) in h.iter().enumerate() {
            for c in 0..3 {
                (point[c][l], err[c][l], normal[c][l]) = (h.point[c], h.p_err[c], h.normal[c]);
            }
        }
        let o = offset_origin_lanes(&point, &err, &normal, &[p.dx, p.dy, p.dz]);
        let mut leaves = [0; LANES];
        for (l, left) in leaves.iter_mut().enumerate() {
            if on(&moved, l) {
                let d = Vec3::new(p.dx[l], p.dy[l], p.dz[l]);
                let origin = Vec3::new(o[0][l], o[1][l], o[2][l]);
                match self.intersect_off(origin, d, memo.hit[l].facet) {
                    Some(hit) => memo.hit[l] = hit,
                    None => *left = u64::MAX,
                }
            }
        }
        leaves
    }

    #[inline(always)]
    fn normal_lanes(&self, _: &Crossings, memo: &HitMemo) -> [F; 3] {
        let h = &memo.hit;
        [
            lanes(|l| h[l].normal.x),
            lanes(|l| h[l].normal.y),
            lanes(|l| h[l].normal.z),
        ]
    }

    #[inline(always)]
    fn to_lattice(&self, v: Vec3) -> Vec3 {
        v
    }

    #[inline(always)]
    fn lattice_to_lab(&self, v: Vec3) -> Vec3 {
        v
    }

    #[inline(always)]
    fn home(&self, lab: Vec3) -> Vec3 {
        lab
    }

    #[inline(always)]
    fn period_below(&self) -> f64 {
        self.tile_below_um()
    }
}

/// Per lane: the hit of its present crossing (for the facet event and the query after it),
/// replaced right after the event by the next crossing (unless the ray leaves).
pub(super) struct HitMemo {
    hit: [Hit; LANES],
}

impl Default for HitMemo {
    fn default() -> Self {
        let hit = Hit {
            t: 0.0,
            point: Vec3::ZERO,
            p_err: Vec3::ZERO,
            normal: Vec3::Z,
            facet: FacetId(NO_FACET),
        };
        HitMemo { hit: [hit; LANES] }
    }
}

/// [`Surface::trace_chunk`] for a texture with a lane path (see the module doc), compiled for
/// AVX2 where the processor has it. (No FMA: the results are the same bits either way.)
pub(super) fn trace_chunk<T: LaneTexture, R: FacetResponse + ?Sized, O: ExitObserver>(
    surface: &Surface,
    tex: &T,
    response: &R,
    incidence: &Incidence,
    rays: u64,
    rng: &mut Stream,
) -> (Tally, O) {
    #[cfg(target_arch = "x86_64")]
    if avx2() {
        // SAFETY: the processor supports AVX2 (checked in `avx2`), the only requirement of a
        // `target_feature` function; the body is safe Rust.
        return unsafe { trace_chunk_avx2(surface, tex, response, incidence, rays, rng) };
    }
    trace_chunk_body(surface, tex, response, incidence, rays, rng)
}

/// Whether to run the AVX2 build of the packet tracer: the processor has AVX2 and the
/// environment variable `LIGHTFOLD_NO_AVX2` is not set (`scripts/bench` counts the baseline
/// build's instructions too, comparable from session to session).
#[cfg(target_arch = "x86_64")]
fn avx2() -> bool {
    static AVX2: std::sync::OnceLock<bool> = std::sync::OnceLock::new();
    *AVX2.get_or_init(|| {
        std::arch::is_x86_feature_detected!("avx2")
            && std::env::var_os("LIGHTFOLD_NO_AVX2").is_none()
    })
}

#[cfg(target_arch = "x86_64")]
#[target_feature(enable = "avx2")]
fn trace_chunk_avx2<T: LaneTexture, R: FacetResponse + ?Sized, O: ExitObserver>(
    surface: &Surface,
    tex: &T,
    response: &R,
    incidence: &Incidence,
    rays: u64,
    rng: &mut Stream,
) -> (Tally, O) {
    trace_chunk_body(surface, tex, response, incidence, rays, rng)
}

#[inline(always)]
fn trace_chunk_body<T: LaneTexture, R: FacetResponse + ?Sized, O: ExitObserver>(
    surface: &Surface,
    tex: &T,
    response: &R,
    incidence: &Incidence,
    rays: u64,
    rng: &mut Stream,
) -> (Tally, O) {
    debug_assert!(tex.has_lane_path());
    // (`response` is `surface.response` with its concrete type; the bare-facet path needs
    // to know whether that type is `BareInterface`.)
    let erased: &dyn Any = surface.response;
    let bare = erased.downcast_ref::<BareInterface>().filter(|b| {
        surface.polarisation == PolarisationMode::Unpolarised
            && (b.n_above, b.n_below) == (surface.n_above, surface.n_below)
    });
    let mut tally = Tally::default();
    let mut obs = O::default();
    let n_layers = response.n_layers();
    let side_in = incidence.side();
    let launcher = surface.launcher(incidence);
    // Rays of a fixed direction start at a uniform point of the unit cell in lattice
    // coordinates (u·p, v·p): the same distribution as `Launcher::ray`, without rotations.
    let (fixed, z_entry) = launcher.fixed();
    let fixed = fixed.map(|(dir, pol)| {
        let e1 = tex.to_lattice(pol.e1);
        (dir, tex.to_lattice(dir), Polarised { s: pol.s, e1 })
    });
    // Where rays of a fixed direction start, and the medium every ray starts in.
    let below_in = side_mask(side_in);
    let start = fixed.map(|(_, dir, pol)| Refill {
        z: z_entry,
        d: dir.to_array(),
        pol,
        below: below_in,
        period: tex.period_um()[0],
        edge: tex.period_below(),
        stokes: surface.polarisation == PolarisationMode::Stokes,
    });
    // Index ratios n₁/n₂ for refraction from above and from below.
    let ratios = (
        surface.n_above / surface.n_below,
        surface.n_below / surface.n_above,
    );
    let mut samples = [FacetSample::default(); LANES];
    let mut lane_rng = LaneStreams::from_stream(rng);
    let mut fl = Flight::empty();
    let mut memo = T::Memo::default();
    tex.launches(&mut memo, fixed.map(|(_, dir, _)| (dir, z_entry)));
    let mut launched = 0u64;
    // Starts the next ray of the chunk in lane `l`, or retires the lane.
    let launch = |fl: &mut Flight, l: usize, launched: &mut u64, rng: &mut Stream| {
        if *launched == rays {
            fl.active[l] = 0;
            return;
        }
        *launched += 1;
        let (start_dir, o, d, pol) = match (fixed, &start) {
            (Some((lab, dir, pol)), Some(start)) => {
                let (u, v) = (rng.uniform(), rng.uniform());
                (lab, Vec3::new(start.at(u), start.at(v), start.z), dir, pol)
            }
            _ => {
                let ray = launcher.ray(rng);
                let e1 = tex.to_lattice(ray.pol.e1);
                let pol = Polarised { s: ray.pol.s, e1 };
                (ray.dir, tex.home(ray.origin), tex.to_lattice(ray.dir), pol)
            }
        };
        let ray = Parked {
            o: o.to_array(),
            d: d.to_array(),
            skip: f64::from(NO_FACET),
            stokes: pol.s,
            e1: pol.e1.to_array(),
            below: below_in,
            events: 0.0,
            film: [0.0; MAX_FILM_LAYERS],
            start: start_dir,
        };
        ray.restore(fl, l, n_layers, true);
    };
    for l in 0..LANES {
        launch(&mut fl, l, &mut launched, rng);
    }
    // Rays of a fixed direction, not watched one by one: finished lanes are booked and
    // refilled over the lanes without a branch per lane (which lanes finish in a round is
    // unpredictable, and each mispredicted branch would wait for the whole round).
    let refill = start.as_ref().filter(|_| !O::WATCHES);
    // Where a round of launches alone is cheap, rays are sorted into such rounds and rounds
    // of rays in flight: the rays still in flight after a round of launches wait in `parked`
    // until there are enough of them to fill a round (`Parked`; never more than three wait,
    // since they are parked only while fewer than four are in flight).
    let sort = refill.is_some() && tex.cheap_launches(&memo);
    let mut parked: Vec<Parked> = Vec::with_capacity(if sort { LANES } else { 0 });
    let stokes = surface.polarisation == PolarisationMode::Stokes;
    let mut sums = LaneSums::default();
    let max_events = [f64::from(MAX_EVENTS); LANES];
    let mut film = [0.0; MAX_FILM_LAYERS];
    while any(&fl.active) {
        let active = fl.active;
        let found = tex.cross_lanes(&fl.packet, active, &mut memo);
        // Facet events of the lanes that cross, unless past the event limit.
        let crossing = and(active, found.crosses);
        fl.events = pick(crossing, lanes(|l| fl.events[l] + 1.0), fl.events);
        let limited = and(crossing, mask(|l| fl.events[l] > max_events[l]));
        let crossing = and_not(crossing, limited);
        let u = lane_rng.uniform();
        let n = || tex.normal_lanes(&found, &memo);
        let (lost, spent) = match bare {
            Some(bare) => bare_events(&n(), bare, ratios, &mut fl, &found, crossing, &u),
            None => sampled_events(
                surface,
                ratios,
                &n(),
                response,
                &mut samples,
                &mut fl,
                &found,
                crossing,
                &u,
            ),
        };
        // Rays that are done: left (or certain to leave at their next query, asked now so
        // that a ray refracted into the wafer ends in the round of its last event),
        // extinguished, lost or stopped.
        let gone = and(
            crossing,
            or(lost, or(spent, mask(|l| fl.stokes[0][l] == 0.0))),
        );
        let moved = and_not(crossing, gone);
        let leaving = and(moved, tex.leaves_lanes(&fl.packet, moved, &mut memo));
        let out = or(and(active, found.leaves), leaving);
        let done = or(or(out, gone), limited);
        if let Some(refill) = refill {
            let n_done = count(&done);
            // Sorting: the next round holds rays in flight only (the finished lanes take
            // parked rays) or launches only (the rays in flight are parked).
            let flying = and_not(active, done);
            let unpark = sort && count(&flying) as usize + parked.len() >= LANES;
            let fresh = if sort { LANES as u64 } else { n_done };
            if unpark || launched + fresh <= rays {
                let ends = Ends::new(side_in, &fl, done, out, limited, lost);
                ends.book(&mut tally, &mut sums, &fl, n_layers, n_done);
                let moving = if unpark { done } else { flying };
                if sort && any(&moving) {
                    for l in 0..LANES {
                        if unpark && on(&done, l) {
                            let ray = parked.pop().expect("enough parked rays");
                            ray.restore(&mut fl, l, n_layers, stokes);
                        } else if !unpark && on(&flying, l) {
                            parked.push(Parked::take(&fl, l, n_layers, stokes));
                        }
                    }
                }
                if !unpark {
                    let free = if sort { [u64::MAX; LANES] } else { done };
                    refill.fill(&mut fl, free, n_layers, &mut lane_rng);
                    launched += fresh;
                }
                continue;
            }
        }
        if !any(&done) {
            continue;
        }
        for l in 0..LANES {
            if !on(&done, l) {
                continue;
            }
            let outcome = outcome(&fl, l, out, limited, lost);
            let dir = Vec3::new(fl.packet.dx[l], fl.packet.dy[l], fl.packet.dz[l]);
            for (f, layer) in film.iter_mut().zip(&fl.film[..n_layers]) {
                *f = layer[l];
            }
            book(
                &mut tally,
                &mut obs,
                side_in,
                fl.start[l],
                tex.lattice_to_lab(dir),
                fl.stokes[0][l],
                outcome,
                fl.events[l] as u32,
                &film[..n_layers],
            );
            match parked.pop() {
                Some(ray) => ray.restore(&mut fl, l, n_layers, stokes),
                None => launch(&mut fl, l, &mut launched, rng),
            }
        }
    }
    debug_assert!(parked.is_empty());
    sums.add_to(&mut tally, n_layers);
    (tally, obs)
}

/// A ray out of its lane (in flight, or about to be launched): everything a lane holds for
/// it.
#[derive(Clone, Copy)]
struct Parked {
    o: [f64; 3],
    d: [f64; 3],
    skip: f64,
    stokes: [f64; 4],
    e1: [f64; 3],
    below: u64,
    events: f64,
    film: [f64; MAX_FILM_LAYERS],
    start: Vec3,
}

impl Parked {
    /// The ray of lane `l` (the lane keeps its values; the caller gives it another ray):
    /// `n_layers` film tallies, and the polarisation beyond S₀ only with Stokes tracking.
    #[inline(always)]
    fn take(fl: &Flight, l: usize, n_layers: usize, stokes: bool) -> Parked {
        let p = &fl.packet;
        let mut ray = Parked {
            o: [p.ox[l], p.oy[l], p.oz[l]],
            d: [p.dx[l], p.dy[l], p.dz[l]],
            skip: p.skip[l],
            stokes: [fl.stokes[0][l], 0.0, 0.0, 0.0],
            e1: [0.0; 3],
            below: fl.below[l],
            events: fl.events[l],
            film: [0.0; MAX_FILM_LAYERS],
            start: fl.start[l],
        };
        if stokes {
            ray.stokes = fl.stokes.map(|c| c[l]);
            ray.e1 = fl.e1.map(|c| c[l]);
        }
        for (f, layer) in ray.film.iter_mut().zip(&fl.film[..n_layers]) {
            *f = layer[l];
        }
        ray
    }

    /// Puts the ray into lane `l`, active (as [`Self::take`] took it; with `stokes`, the
    /// whole polarisation).
    #[inline(always)]
    fn restore(&self, fl: &mut Flight, l: usize, n_layers: usize, stokes: bool) {
        let p = &mut fl.packet;
        [p.ox[l], p.oy[l], p.oz[l]] = self.o;
        [p.dx[l], p.dy[l], p.dz[l]] = self.d;
        p.skip[l] = self.skip;
        fl.stokes[0][l] = self.stokes[0];
        if stokes {
            for (c, v) in fl.stokes.iter_mut().zip(self.stokes) {
                c[l] = v;
            }
            for (c, v) in fl.e1.iter_mut().zip(self.e1) {
                c[l] = v;
            }
        }
        fl.below[l] = self.below;
        fl.events[l] = self.events;
        for (layer, v) in fl.film[..n_layers].iter_mut().zip(self.film) {
            layer[l] = v;
        }
        fl.start[l] = self.start;
        fl.active[l] = u64::MAX;
    }
}

/// 2⁵²: adding it to a whole number below 2⁵² puts the number in the low mantissa bits.
const TWO_52: f64 = 4_503_599_627_370_496.0;
const _: () = assert!(HIT_BINS.is_power_of_two()); // the hit bin is masked out of the bits

/// Number of set lanes of `m`.
#[inline(always)]
fn count(m: &M) -> u64 {
    m.iter().map(|&b| b & 1).sum()
}

/// All lanes set (`side` = below) or none: the medium mask of a ray in `side`.
#[inline(always)]
fn side_mask(side: Side) -> u64 {
    u64::from(side == Side::Below).wrapping_neg()
}

/// What a lane holds at the start of a ray of a fixed direction (lattice frame): the
/// origin's height `z` (x and y drawn uniformly over the unit cell, [`Refill::at`]), the
/// direction, the polarisation, the medium mask.
struct Refill {
    z: f64,
    d: [f64; 3],
    pol: Polarised,
    below: u64,
    period: f64,
    edge: f64,
    /// Stokes tracking (else only S₀ is kept).
    stokes: bool,
}

impl Refill {
    /// The coordinate of a start point at `u` ∈ [0, 1) of the cell's side (`period` wide,
    /// kept below the far edge `edge` against rounding).
    #[inline(always)]
    fn at(&self, u: f64) -> f64 {
        lesser(u * self.period, self.edge)
    }

    /// Starts a new ray in every `done` lane (the starting points from `rng`, one draw split
    /// into two numbers per lane and call, used or not, so the streams' order never depends
    /// on the lanes).
    #[inline(always)]
    fn fill(&self, fl: &mut Flight, done: M, n_layers: usize, rng: &mut LaneStreams) {
        let (u, v) = rng.uniform_pair();
        let p = &mut fl.packet;
        p.ox = pick(done, lanes(|l| self.at(u[l])), p.ox);
        p.oy = pick(done, lanes(|l| self.at(v[l])), p.oy);
        p.oz = pick(done, [self.z; LANES], p.oz);
        p.dx = pick(done, [self.d[0]; LANES], p.dx);
        p.dy = pick(done, [self.d[1]; LANES], p.dy);
        p.dz = pick(done, [self.d[2]; LANES], p.dz);
        p.skip = pick(done, [f64::from(NO_FACET); LANES], p.skip);
        fl.stokes[0] = pick(done, [self.pol.s[0]; LANES], fl.stokes[0]);
        if self.stokes {
            for c in 1..4 {
                fl.stokes[c] = pick(done, [self.pol.s[c]; LANES], fl.stokes[c]);
            }
            for (c, e) in fl.e1.iter_mut().enumerate() {
                *e = pick(done, [self.pol.e1.to_array()[c]; LANES], *e);
            }
        }
        fl.below = or(and(done, [self.below; LANES]), and_not(fl.below, done));
        fl.events = pick(done, [0.0; LANES], fl.events);
        for layer in &mut fl.film[..n_layers] {
            *layer = pick(done, [0.0; LANES], *layer);
        }
    }
}

/// How the finished lanes of a round end, as disjoint masks: left on the incidence side
/// (reflected), left on the far side (transmitted), given up as lost, given up at the event
/// limit; a finished lane in none of them was extinguished in the films. The same cases,
/// in the same order of precedence, as [`outcome`] lane by lane.
struct Ends {
    done: M,
    reflected: M,
    transmitted: M,
    lost: M,
    limited: M,
}

impl Ends {
    /// `done` lanes of `fl`: `out` left the slab (or are certain to at their next query),
    /// `limited` reached the event limit, `lost` met a facet from the wrong side.
    #[inline(always)]
    fn new(side_in: Side, fl: &Flight, done: M, out: M, limited: M, lost: M) -> Ends {
        let dz = &fl.packet.dz;
        // Left the slab: must be travelling away from the surface on its side.
        let away = or(
            and(fl.below, mask(|l| dz[l] < 0.0)),
            and_not(mask(|l| dz[l] > 0.0), fl.below),
        );
        let left = and(and(done, out), away);
        let below_in = side_mask(side_in);
        let far = mask(|l| (fl.below[l] ^ below_in) != 0);
        let stopped = and_not(and(done, limited), out);
        Ends {
            done,
            reflected: and_not(left, far),
            transmitted: and(left, far),
            lost: or(
                and_not(and(done, out), away),
                and_not(and_not(and(done, lost), out), limited),
            ),
            limited: stopped,
        }
    }

    /// Books the `n_done` finished lanes as [`book`] books each: counts and histograms
    /// into `tally` (in lane order; unfinished lanes add zeros, which leave every sum's
    /// bits as they were), powers into the lane sums `sums`.
    #[inline(always)]
    fn book(
        &self,
        tally: &mut Tally,
        sums: &mut LaneSums,
        fl: &Flight,
        n_layers: usize,
        n_done: u64,
    ) {
        let zero = [0.0; LANES];
        let w = &fl.stokes[0];
        let r = pick(self.reflected, *w, zero);
        let t = pick(self.transmitted, *w, zero);
        let a = pick(or(self.lost, self.limited), *w, zero);
        let abs_cos = lanes(|l| fl.packet.dz[l].abs());
        let inv_cos = lanes(|l| t[l] / abs_cos[l].max(1e-12));
        tally.rays += n_done;
        tally.lost_rays += count(&self.lost);
        tally.event_limited_rays += count(&self.limited);
        for (j, layer) in fl.film[..n_layers].iter().enumerate() {
            sums.film[j].add(&pick(self.done, *layer, zero));
        }
        sums.reflected.add(&r);
        sums.transmitted.add(&t);
        sums.abandoned.add(&a);
        sums.transmitted_inv_cos = lanes(|l| sums.transmitted_inv_cos[l] + inv_cos[l]);
        // Event counts are whole numbers ≥ 0: read the capped count from the mantissa after
        // adding 2⁵² (cheaper than a float-to-integer cast per lane).
        let capped = lanes(|l| lesser(fl.events[l], (HIT_BINS - 1) as f64) + TWO_52);
        for l in 0..LANES {
            tally.hits[capped[l].to_bits() as usize & (HIT_BINS - 1)] += self.done[l] & 1;
            let bin = polar_bin(abs_cos[l]);
            tally.reflected_polar[bin] += r[l];
            tally.transmitted_polar[bin] += t[l];
        }
    }
}

/// Sums of per-ray values and of their squares, lane by lane.
#[derive(Clone, Copy, Default)]
struct LaneMoments {
    sum: F,
    sum_sq: F,
}

impl LaneMoments {
    #[inline(always)]
    fn add(&mut self, x: &F) {
        self.sum = lanes(|l| self.sum[l] + x[l]);
        self.sum_sq = lanes(|l| self.sum_sq[l] + x[l] * x[l]);
    }
}

/// The power sums of [`Tally`] kept lane by lane while a chunk runs (one vector addition
/// per round instead of one memory update per lane) and added into the tally, lane by
/// lane, at its end: the same sums to rounding, in a fixed order (so still bit-identical
/// on any thread count).
#[derive(Default)]
struct LaneSums {
    reflected: LaneMoments,
    transmitted: LaneMoments,
    abandoned: LaneMoments,
    film: [LaneMoments; MAX_FILM_LAYERS],
    transmitted_inv_cos: F,
}

impl LaneSums {
    /// Adds the sums into `tally` (lanes in order).
    fn add_to(&self, tally: &mut Tally, n_layers: usize) {
        let pairs = [
            (&mut tally.reflected, &self.reflected),
            (&mut tally.transmitted, &self.transmitted),
            (&mut tally.abandoned, &self.abandoned),
        ];
        let films = tally.film[..n_layers].iter_mut().zip(&self.film);
        for (m, lane) in pairs.into_iter().chain(films) {
            for l in 0..LANES {
                m.merge(&Moments {
                    sum: lane.sum[l],
                    sum_sq: lane.sum_sq[l],
                });
            }
        }
        for v in self.transmitted_inv_cos {
            tally.transmitted_inv_cos += v;
        }
    }
}

/// How the finished lane `l` of `fl` ends: `out` left the slab (or is certain to at its
/// next query), `limited` reached the event limit, `lost` met a facet from the wrong side;
/// otherwise it was extinguished in the films.
fn outcome(fl: &Flight, l: usize, out: M, limited: M, lost: M) -> Outcome {
    let below = on(&fl.below, l);
    let dz = fl.packet.dz[l];
    if on(&out, l) {
        // Left the slab: must be travelling away from the surface on its side.
        if (below && dz < 0.0) || (!below && dz > 0.0) {
            Outcome::Left(side(below))
        } else {
            Outcome::Abandoned { lost: true }
        }
    } else if on(&limited, l) {
        Outcome::Abandoned { lost: false }
    } else if on(&lost, l) {
        Outcome::Abandoned { lost: true }
    } else {
        Outcome::Extinguished
    }
}

/// The medium of a lane.
#[inline(always)]
fn side(below: bool) -> Side {
    if below { Side::Below } else { Side::Above }
}

/// Facet events of the `crossing` lanes on bare facets with unpolarised light: the
/// formulas of [`Surface::facet_event`] (Fresnel split of
/// [`fresnel_power`](super::response::fresnel_power)) written statement by statement over
/// the lanes: the split at the local angle, reflect or refract with probabilities ∝ R and T
/// (uniform numbers `u`), the weight renormalised to R + T. Returns the lanes that met
/// their facet from the wrong side, and those with R + T = 0 (none here).
#[inline(always)]
fn bare_events(
    n: &[F; 3],
    bare: &BareInterface,
    ratios: (f64, f64),
    fl: &mut Flight,
    found: &Crossings,
    crossing: M,
    u: &F,
) -> (M, M) {
    let hit = Meeting::new(n, fl);
    // (the surface's index ratios are the interface's, checked by the caller)
    let snell = hit.snell(fl, ratios);
    let (below, cos_i, cos_t) = (fl.below, hit.cos_i, snell.cos_t);
    let n1 = pick(below, [bare.n_below; LANES], [bare.n_above; LANES]);
    let n2 = pick(below, [bare.n_above; LANES], [bare.n_below; LANES]);
    // fresnel_power, lane by lane
    let (a, b) = (lanes(|l| n1[l] * cos_i[l]), lanes(|l| n2[l] * cos_t[l]));
    let (c, d) = (lanes(|l| n2[l] * cos_i[l]), lanes(|l| n1[l] * cos_t[l]));
    let (ab, cd) = (lanes(|l| a[l] + b[l]), lanes(|l| c[l] + d[l]));
    let inv = lanes(|l| 1.0 / (ab[l] * cd[l]));
    let rs = lanes(|l| (a[l] - b[l]) * cd[l] * inv[l]);
    let rp = lanes(|l| (c[l] - d[l]) * ab[l] * inv[l]);
    let (rs2, rp2) = (lanes(|l| rs[l] * rs[l]), lanes(|l| rp[l] * rp[l]));
    let tir = mask(|l| snell.sin2_t[l] >= 1.0);
    let r = pick(tir, [1.0; LANES], lanes(|l| 0.5 * (rs2[l] + rp2[l])));
    let t = pick(
        tir,
        [0.0; LANES],
        lanes(|l| 0.5 * ((1.0 - rs2[l]) + (1.0 - rp2[l]))),
    );
    let total = lanes(|l| r[l] + t[l]);
    let reflect = mask(|l| u[l] * total[l] < r[l]);
    fl.renormalise_unpolarised(crossing, &total);
    hit.turn(fl, found, crossing, reflect, &snell);
    (hit.lost, [0; LANES])
}

/// Facet events of the `crossing` lanes from the response's full sample (coated facets, or
/// Stokes tracking): [`Surface::facet_event`] with the sample taken lane by lane and the
/// film booking, the Stokes algebra (`polarisation::*_lanes`), the reflect/refract choice
/// and the new directions computed over the lanes. Returns the lanes that met their facet
/// from the wrong side, and those whose power all went into the films (R + T = 0).
#[allow(clippy::too_many_arguments)]
#[inline(always)]
fn sampled_events<R: FacetResponse + ?Sized>(
    surface: &Surface,
    ratios: (f64, f64),
    n: &[F; 3],
    response: &R,
    samples: &mut [FacetSample; LANES],
    fl: &mut Flight,
    found: &Crossings,
    crossing: M,
    u: &F,
) -> (M, M) {
    let hit = Meeting::new(n, fl);
    let n_layers = response.n_layers();
    for (l, sample) in samples.iter_mut().enumerate() {
        if on(&crossing, l) {
            let side = side(on(&fl.below, l));
            response.sample(side, hit.cos_i[l], hit.n[2][l], sample);
        }
    }
    let (r_s, r_p) = (field(samples, |x| x.r_s), field(samples, |x| x.r_p));
    let (t_s, t_p) = (field(samples, |x| x.t_s), field(samples, |x| x.t_p));
    let s_in = fl.stokes;
    let (p_r, p_t);
    match surface.polarisation {
        PolarisationMode::Unpolarised => {
            let w = s_in[0];
            for (j, layer) in fl.film[..n_layers].iter_mut().enumerate() {
                let (a_s, a_p) = (field(samples, |x| x.a_s[j]), field(samples, |x| x.a_p[j]));
                let add = lanes(|l| layer[l] + w[l] * 0.5 * (a_s[l] + a_p[l]));
                *layer = pick(crossing, add, *layer);
            }
            p_r = lanes(|l| 0.5 * (r_s[l] + r_p[l]));
            p_t = lanes(|l| 0.5 * (t_s[l] + t_p[l]));
            fl.renormalise_unpolarised(crossing, &lanes(|l| p_r[l] + p_t[l]));
        }
        PolarisationMode::Stokes => {
            let k = [fl.packet.dx, fl.packet.dy, fl.packet.dz];
            let s_hat = polarisation::s_axis_lanes(&k, &hit.n, &fl.e1);
            let s = polarisation::rotate_into_lanes(&s_in, &fl.e1, &k, &s_hat);
            for (j, layer) in fl.film[..n_layers].iter_mut().enumerate() {
                let (a_s, a_p) = (field(samples, |x| x.a_s[j]), field(samples, |x| x.a_p[j]));
                let a = polarisation::power_lanes(&s, &a_s, &a_p);
                *layer = pick(crossing, lanes(|l| layer[l] + a[l]), *layer);
            }
            p_r = polarisation::power_lanes(&s, &r_s, &r_p);
            p_t = polarisation::power_lanes(&s, &t_s, &t_p);
            let total = lanes(|l| p_r[l] + p_t[l]);
            let reflect = mask(|l| u[l] * total[l] < p_r[l]);
            let pk = |a: F, b: F| pick(reflect, a, b);
            let (x, y) = (
                pk(
                    field(samples, |x| x.r_cross.0),
                    field(samples, |x| x.t_cross.0),
                ),
                pk(
                    field(samples, |x| x.r_cross.1),
                    field(samples, |x| x.t_cross.1),
                ),
            );
            let out = polarisation::apply_lanes(&s, &pk(r_s, t_s), &pk(r_p, t_p), &x, &y);
            let p = pk(p_r, p_t);
            let scale = pick(
                mask(|l| p[l] > 0.0),
                lanes(|l| total[l] / p[l]),
                [0.0; LANES],
            );
            fl.stokes =
                std::array::from_fn(|c| pick(crossing, lanes(|l| out[c][l] * scale[l]), s_in[c]));
            fl.e1 = std::array::from_fn(|c| pick(crossing, s_hat[c], fl.e1[c]));
        }
    }
    let reflect = mask(|l| u[l] * (p_r[l] + p_t[l]) < p_r[l]);
    let spent = mask(|l| p_r[l] + p_t[l] <= 0.0);
    let snell = hit.snell(fl, ratios);
    hit.turn(fl, found, and_not(crossing, spent), reflect, &snell);
    (hit.lost, spent)
}

/// One field of the lanes' samples, as lanes.
#[inline(always)]
fn field(samples: &[FacetSample; LANES], f: impl Fn(&FacetSample) -> f64) -> F {
    lanes(|l| f(&samples[l]))
}

/// Where the lanes meet their facets: the facet normals (lattice frame), k·n, the cosine
/// of incidence, and the lanes that met the facet from the wrong side.
struct Meeting {
    n: [F; 3],
    k_dot_n: F,
    cos_i: F,
    lost: M,
}

impl Meeting {
    #[inline(always)]
    fn new(n: &[F; 3], fl: &Flight) -> Meeting {
        let n = *n;
        let p = &fl.packet;
        let kn = lanes(|l| (p.dx[l] * n[0][l] + p.dy[l] * n[1][l]) + p.dz[l] * n[2][l]);
        // A ray in the upper medium meets the surface from above (k·n < 0) and vice versa.
        let consistent = or(
            and(fl.below, mask(|l| kn[l] > 0.0)),
            and_not(mask(|l| kn[l] < 0.0), fl.below),
        );
        Meeting {
            n,
            k_dot_n: kn,
            cos_i: lanes(|l| lesser(kn[l].abs(), 1.0)),
            lost: and_not([u64::MAX; LANES], consistent),
        }
    }

    /// Snell's law at the lanes' facets: the index ratio n₁/n₂ of each lane's side
    /// (`ratios`: the surface's n_above/n_below and n_below/n_above), sin²θₜ and cos θₜ.
    #[inline(always)]
    fn snell(&self, fl: &Flight, ratios: (f64, f64)) -> Snell {
        let eta = pick(fl.below, [ratios.1; LANES], [ratios.0; LANES]);
        let cos_i = &self.cos_i;
        let sin2_t = lanes(|l| eta[l] * eta[l] * (1.0 - cos_i[l] * cos_i[l]));
        Snell {
            eta,
            sin2_t,
            cos_t: lanes(|l| greater(1.0 - sin2_t[l], 0.0).sqrt()),
        }
    }

    /// Sends the `go` lanes on from their crossing points: reflected where `reflect`,
    /// refracted elsewhere (`snell`), into the other medium — the formulas of
    /// `surface::reflected` and `surface::refracted`, lane by lane.
    #[inline(always)]
    fn turn(&self, fl: &mut Flight, found: &Crossings, go: M, reflect: M, snell: &Snell) {
        let (eta, sin2_t, cos_t) = (&snell.eta, &snell.sin2_t, &snell.cos_t);
        let (n, kn, cos_i) = (&self.n, &self.k_dot_n, &self.cos_i);
        let p = &mut fl.packet;
        let k = [p.dx, p.dy, p.dz];
        let two_kn = lanes(|l| 2.0 * kn[l]);
        let refl: [F; 3] = std::array::from_fn(|c| lanes(|l| k[c][l] - two_kn[l] * n[c][l]));
        let sign = pick(mask(|l| kn[l] < 0.0), [1.0; LANES], [-1.0; LANES]);
        let facing: [F; 3] = std::array::from_fn(|c| lanes(|l| sign[l] * n[c][l]));
        let along = lanes(|l| eta[l] * cos_i[l] - cos_t[l]);
        let raw: [F; 3] =
            std::array::from_fn(|c| lanes(|l| eta[l] * k[c][l] + along[l] * facing[c][l]));
        // (`surface::unit_again`)
        let again = lanes(|l| {
            1.5 - 0.5 * ((raw[0][l] * raw[0][l] + raw[1][l] * raw[1][l]) + raw[2][l] * raw[2][l])
        });
        let no_angle = mask(|l| sin2_t[l] >= 1.0);
        let refr: [F; 3] = std::array::from_fn(|c| {
            pick(
                no_angle,
                lanes(|l| -facing[c][l]),
                lanes(|l| raw[c][l] * again[l]),
            )
        });
        let dir: [F; 3] = std::array::from_fn(|c| pick(reflect, refl[c], refr[c]));
        fl.below = std::array::from_fn(|l| fl.below[l] ^ (go[l] & !reflect[l]));
        p.ox = pick(go, found.x, p.ox);
        p.oy = pick(go, found.y, p.oy);
        p.oz = pick(go, found.z, p.oz);
        p.dx = pick(go, dir[0], p.dx);
        p.dy = pick(go, dir[1], p.dy);
        p.dz = pick(go, dir[2], p.dz);
        p.skip = pick(go, found.face, p.skip);
    }
}

/// Snell's law over the lanes ([`Meeting::snell`]).
struct Snell {
    eta: F,
    sin2_t: F,
    cos_t: F,
}

/// The robust one-ray walk for lane `l`, written into `found`: its next crossing (lattice
/// frame, snapped onto the facet's plane) and facet, or that it leaves the slab.
#[cold]
#[inline(never)]
fn robust_crossing(tex: &RegularPyramids, packet: &Packet, l: usize, found: &mut Crossings) {
    let o = Vec3::new(packet.ox[l], packet.oy[l], packet.oz[l]);
    let d = tex.lattice_to_lab(Vec3::new(packet.dx[l], packet.dy[l], packet.dz[l]));
    let hit: Option<Hit> = if packet.skip[l] == f64::from(NO_FACET) {
        tex.intersect(tex.lattice_to_lab(o), d, None)
    } else {
        tex.intersect_after(&tex.cell_hit(o.x, o.y, packet.skip[l] as u32), d)
    };
    let Some(hit) = hit else {
        found.leaves[l] = u64::MAX;
        return;
    };
    let face = hit.facet.0;
    let p = tex.home(hit.point);
    found.crosses[l] = u64::MAX;
    found.face[l] = f64::from(face);
    found.x[l] = p.x;
    found.y[l] = p.y;
    found.z[l] = tex.snap(face, p.x, p.y);
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::texture::pyramids::RegularPyramidsSpec;
    use crate::texture::random::RandomPyramidsSpec;
    use crate::thinfilm::{FilmStack, Layer};
    use crate::tracer::{CoatedInterface, CoatingGeometry, InputPolarisation};
    use num_complex::Complex64;

    /// A bare and a coated interface (films `layers`, tabulated at 500 nm) from air onto a
    /// substrate of index 3.9.
    fn interfaces(layers: Vec<Layer>) -> (BareInterface, CoatedInterface) {
        let stack =
            FilmStack::new(Complex64::new(1.0, 0.0), layers, Complex64::new(3.9, 0.0)).unwrap();
        let coated = CoatedInterface::new(&stack, 500.0, CoatingGeometry::Conformal, &[]).unwrap();
        let bare = BareInterface {
            n_above: 1.0,
            n_below: 3.9,
        };
        (bare, coated)
    }

    /// `tex` between air and index 3.9 with each facet response and polarisation mode.
    fn surfaces<'a>(
        tex: &'a dyn Texture,
        bare: &'a BareInterface,
        coated: &'a CoatedInterface,
    ) -> Vec<Surface<'a>> {
        let responses: [&dyn FacetResponse; 2] = [bare, coated];
        let modes = [PolarisationMode::Unpolarised, PolarisationMode::Stokes];
        responses
            .into_iter()
            .flat_map(|response| {
                modes.map(|polarisation| Surface {
                    texture: tex,
                    response,
                    n_above: 1.0,
                    n_below: 3.9,
                    polarisation,
                })
            })
            .collect()
    }

    #[test]
    fn lane_events_equal_the_one_ray_facet_event_bit_for_bit() {
        // bare_events and sampled_events are Surface::facet_event written over lanes: fed the
        // same uniform number, every lane must come out with the same direction, medium,
        // Stokes vector, reference axis and film absorption, to the bit.
        use crate::texture::SurfaceKind;
        use crate::tracer::surface::Step;
        let tex = RegularPyramids::new(RegularPyramidsSpec::upright(5.0)).unwrap();
        let (bare, coated) = interfaces(vec![
            Layer::new(Complex64::new(2.05, 0.02), 75.0),
            Layer::new(Complex64::new(1.46, 0.001), 20.0),
        ]);
        let mut draw = Stream::new(1, 2, 3);
        for surface in surfaces(&tex, &bare, &coated) {
            let (response, polarisation) = (surface.response, surface.polarisation);
            let n_layers = response.n_layers();
            let ratios = (1.0 / 3.9, 3.9);
            let lanes_bare =
                (n_layers == 0 && polarisation == PolarisationMode::Unpolarised).then_some(&bare);
            for trial in 0..500u64 {
                let mut fl = Flight::empty();
                let mut found = Crossings {
                    crosses: [u64::MAX; LANES],
                    leaves: [0; LANES],
                    face: [0.0; LANES],
                    x: [1.0; LANES],
                    y: [2.0; LANES],
                    z: [0.5; LANES],
                };
                let mut scalar = Vec::new();
                let mut u = [0.0; LANES];
                for (l, u_l) in u.iter_mut().enumerate() {
                    let face = (draw.next_u64() % 4) as u32;
                    let n = tex.lattice_normal(face);
                    let below = draw.uniform() < 0.5;
                    let mut k = Vec3::new(
                        draw.uniform() - 0.5,
                        draw.uniform() - 0.5,
                        draw.uniform() - 0.5,
                    )
                    .normalize();
                    if (k.dot(n) > 0.0) != below {
                        k = -k;
                    }
                    let e1 = k.cross(Vec3::new(0.3, -0.2, 0.9)).normalize();
                    let st = [1.0, 0.3 * draw.uniform(), -0.4 * draw.uniform(), 0.5];
                    found.face[l] = f64::from(face);
                    fl.packet.set(l, Vec3::ZERO, k, face);
                    fl.below[l] = u64::from(below).wrapping_neg();
                    for (c, v) in st.iter().enumerate() {
                        fl.stokes[c][l] = *v;
                    }
                    for (c, v) in e1.to_array().into_iter().enumerate() {
                        fl.e1[c][l] = v;
                    }
                    // The one-ray event, drawing its uniform from a copy of the stream.
                    let mut rng = Stream::new(7, trial, l as u64);
                    *u_l = rng.clone().uniform();
                    let mut pol = Polarised { s: st, e1 };
                    let mut film = [0.0; MAX_FILM_LAYERS];
                    let mut sample = FacetSample::default();
                    let side = if below { Side::Below } else { Side::Above };
                    let step = surface.facet_event(
                        response,
                        SurfaceKind::Geometric,
                        side,
                        k,
                        n,
                        &mut pol,
                        &mut rng,
                        &mut film[..n_layers],
                        &mut sample,
                    );
                    let Step::Go(dir, to) = step else {
                        panic!("consistent rays and lossless films must go on")
                    };
                    scalar.push((dir, to, pol, film));
                }
                let all = [u64::MAX; LANES];
                let n = tex.lattice_normal_lanes(&found.face);
                if let Some(bare) = lanes_bare {
                    bare_events(&n, bare, ratios, &mut fl, &found, all, &u);
                } else {
                    let mut samples = [FacetSample::default(); LANES];
                    sampled_events(
                        &surface,
                        ratios,
                        &n,
                        response,
                        &mut samples,
                        &mut fl,
                        &found,
                        all,
                        &u,
                    );
                }
                for (l, (dir, to, pol, film)) in scalar.iter().enumerate() {
                    let p = &fl.packet;
                    assert_eq!([p.dx[l], p.dy[l], p.dz[l]], dir.to_array(), "lane {l}");
                    assert_eq!(side(on(&fl.below, l)), *to);
                    assert_eq!(fl.stokes[0][l], pol.s[0]);
                    // (with the unpolarised switch nothing reads the rest)
                    if polarisation == PolarisationMode::Stokes {
                        let s = [1, 2, 3].map(|c| fl.stokes[c][l]);
                        assert_eq!(s, [pol.s[1], pol.s[2], pol.s[3]]);
                        let e1 = [fl.e1[0][l], fl.e1[1][l], fl.e1[2][l]];
                        assert_eq!(e1, pol.e1.to_array());
                    }
                    for (layer, f) in fl.film.iter().zip(&film[..n_layers]) {
                        assert_eq!(layer[l], *f);
                    }
                }
            }
        }
    }

    #[test]
    fn lane_booking_equals_booking_ray_by_ray() {
        // Ends::book books every finished lane of a round at once (power sums lane by lane,
        // added up at the end); book() books one ray. On random rounds (lanes finished or
        // not, left upward or downward on either side, lost, event-limited, extinguished;
        // with film absorption) both must give the same counts and histograms to the bit and
        // the same power sums to rounding. Common practice, no source.
        let mut draw = Stream::new(3, 1, 4);
        let n_layers = 2;
        for side_in in [Side::Above, Side::Below] {
            let (mut by_lanes, mut by_rays) = (Tally::default(), Tally::default());
            let mut sums = LaneSums::default();
            for _ in 0..2000 {
                let mut fl = Flight::empty();
                let flag = |draw: &mut Stream, p: f64| -> M {
                    std::array::from_fn(|_| u64::from(draw.uniform() < p).wrapping_neg())
                };
                let done = flag(&mut draw, 0.6);
                let out = and(done, flag(&mut draw, 0.7));
                let limited = and(done, flag(&mut draw, 0.1));
                let lost = and(done, flag(&mut draw, 0.1));
                fl.below = flag(&mut draw, 0.5);
                for l in 0..LANES {
                    let d = Vec3::new(
                        draw.uniform() - 0.5,
                        draw.uniform() - 0.5,
                        draw.uniform() - 0.5,
                    );
                    fl.packet.set(l, Vec3::ZERO, d.normalize(), 0);
                    fl.stokes[0][l] = draw.uniform();
                    fl.events[l] = (draw.next_u64() % 20) as f64;
                    for layer in &mut fl.film[..n_layers] {
                        layer[l] = 0.01 * draw.uniform();
                    }
                }
                let n_done = count(&done);
                Ends::new(side_in, &fl, done, out, limited, lost).book(
                    &mut by_lanes,
                    &mut sums,
                    &fl,
                    n_layers,
                    n_done,
                );
                for l in (0..LANES).filter(|&l| on(&done, l)) {
                    let dir = Vec3::new(fl.packet.dx[l], fl.packet.dy[l], fl.packet.dz[l]);
                    let film: Vec<f64> = fl.film[..n_layers].iter().map(|f| f[l]).collect();
                    book(
                        &mut by_rays,
                        &mut (),
                        side_in,
                        Vec3::Z,
                        dir,
                        fl.stokes[0][l],
                        outcome(&fl, l, out, limited, lost),
                        fl.events[l] as u32,
                        &film,
                    );
                }
            }
            sums.add_to(&mut by_lanes, n_layers);
            let close = |a: &Moments, b: &Moments| {
                let near = |x: f64, y: f64| (x - y).abs() <= 1e-12 * y.abs();
                assert!(
                    near(a.sum, b.sum) && near(a.sum_sq, b.sum_sq),
                    "{a:?} {b:?}"
                );
            };
            close(&by_lanes.reflected, &by_rays.reflected);
            close(&by_lanes.transmitted, &by_rays.transmitted);
            close(&by_lanes.abandoned, &by_rays.abandoned);
            for (a, b) in by_lanes.film.iter().zip(&by_rays.film) {
                close(a, b);
            }
            let inv_cos = (by_lanes.transmitted_inv_cos, by_rays.transmitted_inv_cos);
            assert!((inv_cos.0 - inv_cos.1).abs() <= 1e-12 * inv_cos.1);
            // Everything else to the bit.
            by_lanes.reflected = by_rays.reflected;
            by_lanes.transmitted = by_rays.transmitted;
            by_lanes.abandoned = by_rays.abandoned;
            by_lanes.film = by_rays.film;
            by_lanes.transmitted_inv_cos = by_rays.transmitted_inv_cos;
            assert_eq!(by_lanes, by_rays);
            assert!(by_rays.lost_rays > 0 && by_rays.event_limited_rays > 0);
            assert!(by_rays.reflected.sum > 0.0 && by_rays.transmitted.sum > 0.0);
        }
    }

    /// Runs a chunk of `tex` through the AVX2 build (where the processor has it) and the
    /// baseline build for each facet response and polarisation mode: the same tally.
    fn same_bits_in_both_builds<T: LaneTexture>(tex: &T) {
        let (bare, coated) = interfaces(vec![Layer::new(Complex64::new(2.05, 0.01), 75.0)]);
        for surface in surfaces(tex, &bare, &coated) {
            let response = surface.response;
            let inc = Incidence::Above {
                theta: 0.4,
                phi: 0.3,
                polarisation: InputPolarisation::P,
            };
            let run = |simd: bool| {
                let mut rng = Stream::new(5, 6, 7);
                if simd {
                    trace_chunk::<_, _, ()>(&surface, tex, response, &inc, 3000, &mut rng).0
                } else {
                    trace_chunk_body::<_, _, ()>(&surface, tex, response, &inc, 3000, &mut rng).0
                }
            };
            let (a, b) = (run(true), run(false));
            assert_eq!(a, b);
            assert_eq!(a.lost_rays, 0);
            assert!(a.reflectance().value > 0.0 && a.transmittance().value > 0.5);
        }
    }

    #[test]
    fn simd_and_baseline_builds_give_the_same_bits() {
        // The AVX2 build (where the processor has it) and the baseline build run the same
        // IEEE operations lane by lane (no FMA), so a chunk's tally must not depend on which
        // one ran. Common practice, no source.
        same_bits_in_both_builds(
            &RegularPyramids::new(RegularPyramidsSpec {
                period_um: 5.5,
                ..RegularPyramidsSpec::upright(5.0)
            })
            .unwrap(),
        );
        same_bits_in_both_builds(
            &RandomPyramids::new(RandomPyramidsSpec::log_normal_height(2.0, 0.3, 4)).unwrap(),
        );
    }
}
