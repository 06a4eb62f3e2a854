//! The surface tracer for regular upright pyramids with [`LANES`] rays in flight at once.
//!
//! Same physics and bookkeeping as [`Surface::trace_chunk`] one ray at a time; only the order
//! of work differs. Every round asks the texture for the next crossing of all lanes together
//! ([`RegularPyramids::cross_packet`], laid out for SIMD), hands lanes it cannot decide to
//! the robust one-ray walk, applies the facet event of every lane that crossed — bare facets
//! with unpolarised light lane by lane without branches ([`bare_events`]), anything else
//! through [`Surface::facet_event`] — and refills the lane of a finished ray with the next
//! ray of the chunk. Lanes keep their rays in the texture's lattice frame (directions,
//! Stokes reference axes); rays are rotated into it at launch and back when they leave.
//!
//! Invariant: the chunk's random streams are drawn in a fixed order (rounds, then lanes), so
//! a chunk's result depends only on its seed, never on the thread count or the instruction
//! set. The random numbers differ from the one-ray tracer's, so results agree with it
//! statistically, not bit for bit (tested).

use super::polarisation::Polarised;
use super::response::{BareInterface, FacetResponse, FacetSample, MAX_FILM_LAYERS, Side};
use super::surface::{
    ExitObserver, Incidence, MAX_EVENTS, Outcome, PolarisationMode, Step, Surface, book,
};
use super::tally::Tally;
use crate::geometry::lanes::{F, LANES, M, and, and_not, any, lanes, mask, on, or, pick};
use crate::geometry::{Hit, Vec3, greater, lesser};
use crate::sampling::{Lanes4, Stream};
use crate::texture::pyramids::{Crossings, NO_FACET, Packet};
use crate::texture::{RegularPyramids, Texture};
use std::any::Any;

/// The rays in flight: geometry for the texture, and per lane the weight, the medium,
/// the event count (as f64, exact), whether the lane holds a ray, and what only the general
/// event path ([`Surface::facet_event`]) and the booking need.
struct Flight {
    packet: Packet,
    weight: F,
    below: M,
    events: F,
    active: [bool; LANES],
    /// Stokes vector (intensity kept equal to the weight) and reference axis (lattice frame).
    pol: [Polarised; LANES],
    /// Incident direction (lab frame), for the exit observer.
    start: [Vec3; LANES],
    film: [[f64; MAX_FILM_LAYERS]; LANES],
}

/// [`Surface::trace_chunk`] for upright regular pyramids (see the module doc), compiled for
/// AVX2 where the processor has it. (No FMA: the results are the same bits either way.)
pub(super) fn trace_chunk<R: FacetResponse + ?Sized, O: ExitObserver>(
    surface: &Surface,
    tex: &RegularPyramids,
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
/// environment variable `LIGHTFOLD_NO_AVX2` is not set (valgrind, which the instruction
/// counts of `scripts/bench` use, cannot decode all AVX2 instructions).
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
fn trace_chunk_avx2<R: FacetResponse + ?Sized, O: ExitObserver>(
    surface: &Surface,
    tex: &RegularPyramids,
    response: &R,
    incidence: &Incidence,
    rays: u64,
    rng: &mut Stream,
) -> (Tally, O) {
    trace_chunk_body(surface, tex, response, incidence, rays, rng)
}

#[inline(always)]
fn trace_chunk_body<R: FacetResponse + ?Sized, O: ExitObserver>(
    surface: &Surface,
    tex: &RegularPyramids,
    response: &R,
    incidence: &Incidence,
    rays: u64,
    rng: &mut Stream,
) -> (Tally, O) {
    debug_assert!(tex.has_packet_path());
    let erased: &dyn Any = surface.response;
    let bare = erased
        .downcast_ref::<BareInterface>()
        .filter(|_| surface.polarisation == PolarisationMode::Unpolarised);
    let mut tally = Tally::default();
    let mut obs = O::default();
    let n_layers = response.n_layers();
    let kind = tex.kind();
    let side_in = incidence.side();
    let launcher = surface.launcher(incidence);
    // Rays of a fixed direction start at a uniform point of the unit cell in lattice
    // coordinates (u·p, v·p): the same distribution as `Launcher::ray`, without rotations.
    let (fixed, z_entry) = launcher.fixed();
    let fixed = fixed.map(|(dir, pol)| {
        let e1 = tex.lab_to_lattice(pol.e1);
        (dir, tex.lab_to_lattice(dir), Polarised { s: pol.s, e1 })
    });
    let period = tex.period_um()[0];
    let mut sample = FacetSample::default();
    let mut lane_rng = Lanes4::from_stream(rng);
    let mut fl = Flight {
        packet: Packet::default(),
        weight: [0.0; LANES],
        below: [0; LANES],
        events: [0.0; LANES],
        active: [false; LANES],
        pol: [Polarised {
            s: [0.0; 4],
            e1: Vec3::X,
        }; LANES],
        start: [Vec3::Z; LANES],
        film: [[0.0; MAX_FILM_LAYERS]; LANES],
    };
    let mut launched = 0u64;
    // Starts the next ray of the chunk in lane `l`, or retires the lane.
    let mut launch = |fl: &mut Flight, l: usize, rng: &mut Stream| {
        if launched == rays {
            fl.active[l] = false;
            return;
        }
        launched += 1;
        let (start, o, d, pol) = match fixed {
            Some((lab, dir, pol)) => {
                let (u, v) = (rng.uniform(), rng.uniform());
                let o = Vec3::new(
                    lesser(u * period, tex.period_below()),
                    lesser(v * period, tex.period_below()),
                    z_entry,
                );
                (lab, o, dir, pol)
            }
            None => {
                let ray = launcher.ray(rng);
                let e1 = tex.lab_to_lattice(ray.pol.e1);
                let pol = Polarised { s: ray.pol.s, e1 };
                (
                    ray.dir,
                    tex.home(ray.origin),
                    tex.lab_to_lattice(ray.dir),
                    pol,
                )
            }
        };
        set_ray(&mut fl.packet, l, o, d, NO_FACET);
        fl.weight[l] = pol.s[0];
        fl.below[l] = u64::from(side_in == Side::Below).wrapping_neg();
        fl.events[l] = 0.0;
        fl.active[l] = true;
        fl.pol[l] = pol;
        fl.start[l] = start;
        fl.film[l][..n_layers].fill(0.0);
    };
    for l in 0..LANES {
        launch(&mut fl, l, rng);
    }
    let max_events = [f64::from(MAX_EVENTS); LANES];
    while fl.active.contains(&true) {
        let active = mask(|l| fl.active[l]);
        let mut found = tex.cross_packet(&fl.packet);
        let undecided = and_not(and_not(active, found.crosses), found.leaves);
        if any(&undecided) {
            for l in 0..LANES {
                if on(&undecided, l) {
                    robust_crossing(tex, &fl.packet, l, &mut found);
                }
            }
        }
        // Facet events of the lanes that cross, unless past the event limit.
        let crossing = and(active, found.crosses);
        fl.events = pick(crossing, lanes(|l| fl.events[l] + 1.0), fl.events);
        let limited = and(crossing, mask(|l| fl.events[l] > max_events[l]));
        let crossing = and_not(crossing, limited);
        let lost = if let Some(bare) = bare {
            let u = lane_rng.uniform();
            bare_events(tex, bare, &mut fl, &found, crossing, &u)
        } else {
            let mut lost = [0; LANES];
            for (l, lost) in lost.iter_mut().enumerate() {
                if !on(&crossing, l) {
                    continue;
                }
                let face = found.face[l];
                let dir = Vec3::new(fl.packet.dx[l], fl.packet.dy[l], fl.packet.dz[l]);
                let step = surface.facet_event(
                    response,
                    kind,
                    side(on(&fl.below, l)),
                    dir,
                    tex.lattice_normal(face),
                    &mut fl.pol[l],
                    rng,
                    &mut fl.film[l][..n_layers],
                    &mut sample,
                );
                fl.weight[l] = fl.pol[l].s[0];
                match step {
                    Step::Go(new_dir, to) => {
                        fl.below[l] = u64::from(to == Side::Below).wrapping_neg();
                        let point = Vec3::new(found.x[l], found.y[l], found.z[l]);
                        set_ray(&mut fl.packet, l, point, new_dir, face);
                    }
                    Step::Extinguished => fl.weight[l] = 0.0,
                    Step::Lost => *lost = u64::MAX,
                }
            }
            lost
        };
        // Rays that are done: left, extinguished, lost or stopped.
        let out = and(active, found.leaves);
        let gone = and(crossing, or(lost, mask(|l| fl.weight[l] == 0.0)));
        let done = or(or(out, gone), limited);
        if !any(&done) {
            continue;
        }
        for l in 0..LANES {
            if !on(&done, l) {
                continue;
            }
            let below = on(&fl.below, l);
            let dz = fl.packet.dz[l];
            let outcome = if on(&out, l) {
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
            };
            let dir = Vec3::new(fl.packet.dx[l], fl.packet.dy[l], dz);
            book(
                &mut tally,
                &mut obs,
                side_in,
                fl.start[l],
                tex.lattice_to_lab(dir),
                fl.weight[l],
                outcome,
                fl.events[l] as u32,
                &fl.film[l][..n_layers],
            );
            launch(&mut fl, l, rng);
        }
    }
    (tally, obs)
}

/// The medium of a lane.
#[inline(always)]
fn side(below: bool) -> Side {
    if below { Side::Below } else { Side::Above }
}

/// Facet events of the `crossing` lanes on bare facets with unpolarised light: the
/// formulas of [`Surface::facet_event`] (Fresnel split of
/// [`fresnel_power`](super::response::fresnel_power), `surface::reflected`,
/// `surface::refracted`) written statement by statement over the lanes: the split at the local
/// angle, reflect or refract with probabilities ∝ R and T (uniform numbers `u`), the weight
/// renormalised to R + T. Returns the lanes that met their facet from the wrong side.
#[inline(always)]
fn bare_events(
    tex: &RegularPyramids,
    bare: &BareInterface,
    fl: &mut Flight,
    found: &Crossings,
    crossing: M,
    u: &F,
) -> M {
    let p = &mut fl.packet;
    let normals: [Vec3; LANES] = std::array::from_fn(|l| tex.lattice_normal(found.face[l].min(4)));
    let (nx, ny, nz) = (
        lanes(|l| normals[l].x),
        lanes(|l| normals[l].y),
        lanes(|l| normals[l].z),
    );
    let (kx, ky, kz) = (p.dx, p.dy, p.dz);
    let kn = lanes(|l| kx[l] * nx[l] + ky[l] * ny[l] + kz[l] * nz[l]);
    let below = fl.below;
    // A ray in the upper medium meets the surface from above (k·n < 0) and vice versa.
    let consistent = or(
        and(below, mask(|l| kn[l] > 0.0)),
        and_not(mask(|l| kn[l] < 0.0), below),
    );
    let lost = and_not([u64::MAX; LANES], consistent);
    let cos_i = lanes(|l| lesser(kn[l].abs(), 1.0));
    let n1 = pick(below, [bare.n_below; LANES], [bare.n_above; LANES]);
    let n2 = pick(below, [bare.n_above; LANES], [bare.n_below; LANES]);
    // fresnel_power, lane by lane
    let eta = lanes(|l| n1[l] / n2[l]);
    let sin2_t = lanes(|l| eta[l] * eta[l] * (1.0 - cos_i[l] * cos_i[l]));
    let cos_t = lanes(|l| greater(1.0 - sin2_t[l], 0.0).sqrt());
    let rs = lanes(|l| {
        let (a, b) = (n1[l] * cos_i[l], n2[l] * cos_t[l]);
        (a - b) / (a + b)
    });
    let rp = lanes(|l| {
        let (c, d) = (n2[l] * cos_i[l], n1[l] * cos_t[l]);
        (c - d) / (c + d)
    });
    let (rs2, rp2) = (lanes(|l| rs[l] * rs[l]), lanes(|l| rp[l] * rp[l]));
    let tir = mask(|l| sin2_t[l] >= 1.0);
    let r = pick(tir, [1.0; LANES], lanes(|l| 0.5 * (rs2[l] + rp2[l])));
    let t = pick(
        tir,
        [0.0; LANES],
        lanes(|l| 0.5 * ((1.0 - rs2[l]) + (1.0 - rp2[l]))),
    );
    let total = lanes(|l| r[l] + t[l]);
    let reflect = mask(|l| u[l] * total[l] < r[l]);
    // reflected and refracted, lane by lane
    let two_kn = lanes(|l| 2.0 * kn[l]);
    let refl = [
        lanes(|l| kx[l] - two_kn[l] * nx[l]),
        lanes(|l| ky[l] - two_kn[l] * ny[l]),
        lanes(|l| kz[l] - two_kn[l] * nz[l]),
    ];
    let sign = pick(mask(|l| kn[l] < 0.0), [1.0; LANES], [-1.0; LANES]);
    let facing = [
        lanes(|l| sign[l] * nx[l]),
        lanes(|l| sign[l] * ny[l]),
        lanes(|l| sign[l] * nz[l]),
    ];
    let along = lanes(|l| eta[l] * cos_i[l] - cos_t[l]);
    let k = [kx, ky, kz];
    let raw: [F; 3] =
        std::array::from_fn(|c| lanes(|l| eta[l] * k[c][l] + along[l] * facing[c][l]));
    let inv_len = lanes(|l| {
        1.0 / (raw[0][l] * raw[0][l] + raw[1][l] * raw[1][l] + raw[2][l] * raw[2][l]).sqrt()
    });
    let refr: [F; 3] = std::array::from_fn(|c| {
        pick(
            tir,
            lanes(|l| -facing[c][l]),
            lanes(|l| raw[c][l] * inv_len[l]),
        )
    });
    let go = crossing;
    fl.weight = pick(go, lanes(|l| fl.weight[l] * total[l]), fl.weight);
    fl.below = std::array::from_fn(|l| below[l] ^ (go[l] & !reflect[l]));
    let dir: [F; 3] = std::array::from_fn(|c| pick(reflect, refl[c], refr[c]));
    p.ox = pick(go, found.x, p.ox);
    p.oy = pick(go, found.y, p.oy);
    p.oz = pick(go, found.z, p.oz);
    p.dx = pick(go, dir[0], p.dx);
    p.dy = pick(go, dir[1], p.dy);
    p.dz = pick(go, dir[2], p.dz);
    p.skip = std::array::from_fn(|l| if on(&go, l) { found.face[l] } else { p.skip[l] });
    lost
}

/// Puts a ray into lane `l` of `packet`.
#[inline(always)]
fn set_ray(packet: &mut Packet, l: usize, o: Vec3, d: Vec3, skip: u32) {
    packet.ox[l] = o.x;
    packet.oy[l] = o.y;
    packet.oz[l] = o.z;
    packet.dx[l] = d.x;
    packet.dy[l] = d.y;
    packet.dz[l] = d.z;
    packet.skip[l] = skip;
}

/// The robust one-ray walk for lane `l`, written into `found`: its next crossing (lattice
/// frame, snapped onto the facet's plane) and facet, or that it leaves the slab.
#[cold]
#[inline(never)]
fn robust_crossing(tex: &RegularPyramids, packet: &Packet, l: usize, found: &mut Crossings) {
    let o = Vec3::new(packet.ox[l], packet.oy[l], packet.oz[l]);
    let d = tex.lattice_to_lab(Vec3::new(packet.dx[l], packet.dy[l], packet.dz[l]));
    let hit: Option<Hit> = if packet.skip[l] == NO_FACET {
        tex.intersect(tex.lattice_to_lab(o), d, None)
    } else {
        tex.intersect_after(&tex.cell_hit(o.x, o.y, packet.skip[l]), d)
    };
    let Some(hit) = hit else {
        found.leaves[l] = u64::MAX;
        return;
    };
    let face = hit.facet.0;
    let p = tex.home(hit.point);
    found.crosses[l] = u64::MAX;
    found.face[l] = face;
    found.x[l] = p.x;
    found.y[l] = p.y;
    found.z[l] = tex.snap(face, p.x, p.y);
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::texture::pyramids::RegularPyramidsSpec;
    use crate::thinfilm::{FilmStack, Layer};
    use crate::tracer::{CoatedInterface, CoatingGeometry, InputPolarisation};
    use num_complex::Complex64;

    #[test]
    fn simd_and_baseline_builds_give_the_same_bits() {
        // The AVX2 build (where the processor has it) and the baseline build run the same
        // IEEE operations lane by lane (no FMA), so a chunk's tally must not depend on which
        // one ran. Common practice, no source.
        let tex = RegularPyramids::new(RegularPyramidsSpec {
            period_um: 5.5,
            ..RegularPyramidsSpec::upright(5.0)
        })
        .unwrap();
        let stack = FilmStack::new(
            Complex64::new(1.0, 0.0),
            vec![Layer::new(Complex64::new(2.05, 0.01), 75.0)],
            Complex64::new(3.9, 0.0),
        )
        .unwrap();
        let coated = CoatedInterface::new(&stack, 500.0, CoatingGeometry::Conformal, &[]).unwrap();
        let bare = BareInterface {
            n_above: 1.0,
            n_below: 3.9,
        };
        let responses: [&dyn FacetResponse; 2] = [&bare, &coated];
        for response in responses {
            for polarisation in [PolarisationMode::Unpolarised, PolarisationMode::Stokes] {
                let surface = Surface {
                    texture: &tex,
                    response,
                    n_above: 1.0,
                    n_below: 3.9,
                    polarisation,
                };
                let inc = Incidence::Above {
                    theta: 0.4,
                    phi: 0.3,
                    polarisation: InputPolarisation::P,
                };
                let run = |simd: bool| {
                    let mut rng = Stream::new(5, 6, 7);
                    if simd {
                        trace_chunk::<_, ()>(&surface, &tex, response, &inc, 3000, &mut rng).0
                    } else {
                        trace_chunk_body::<_, ()>(&surface, &tex, response, &inc, 3000, &mut rng).0
                    }
                };
                let (a, b) = (run(true), run(false));
                assert_eq!(a, b);
                assert_eq!(a.lost_rays, 0);
                assert!(a.reflectance().value > 0.0 && a.transmittance().value > 0.5);
            }
        }
    }
}
