//! Redistribution matrices of a textured, coated interface by Monte Carlo with the surface
//! tracer: every incoming bin of both sides is lit with a uniform radiance within the bin and
//! the rays are followed through the texture (`tracer::Surface::follow`) to their exit bin.
//!
//! Invariant: for every column Σ R + Σ T + Σ A_film + lost = 1 exactly per batch (the
//! tracer's per-ray energy balance); lost weight shows in the matrices' energy audit.
//! Results are bit-identical for a given (seed, key) whatever the thread count.
//!
//! Assumptions (state them with the results):
//! * **Unpolarised between interfaces.** Rays start unpolarised. An angle-binned, incoherent
//!   radiance carries no polarisation state, so matrices describe unpolarised light arriving
//!   in each bin; within the interface the Stokes vector is still tracked facet by facet when
//!   the surface's [`PolarisationMode`](crate::tracer::PolarisationMode) is `Stokes`. The
//!   direct wafer tracer keeps the state across thick layers; the difference is a model
//!   error of the matrix method, not a statistical one.
//! * **No bulk absorption inside the texture slab** (`tracer::Clear`): the thick media on
//!   either side are transparent between the slab's boundary planes. The wafer solver
//!   measures a thick layer between the interfaces' base planes (z = 0), so the texture's own
//!   volume is absorbed only if the layer thickness given to the solver is the
//!   volume-equivalent one: `d + ⟨h_above⟩ − ⟨h_below⟩` for a layer of base-plane distance
//!   `d` between an interface whose surface height is h_above (the layer below it) and one
//!   whose height is h_below (the layer above it), ⟨·⟩ the mean over the unit cell. Exact for
//!   planar interfaces; for textures the error is second order in (texture depth / layer
//!   thickness) when the radiance inside the texture resembles the bulk's.
//! * Positions are uniform over the unit cell, entering just outside the slab
//!   ([`Surface::entry_point`]); this is the lateral randomisation of the wafer model.
//!
//! Statistics: one batch = [`RAYS_PER_BATCH`] rays of one column; standard errors from the
//! batch ratio estimator of [`MatrixTally`].

use super::MatrixError;
use super::bins::{AngleBins, Hemisphere};
use super::matrix::{InterfaceMatrices, InterfaceSetup, Side};
use super::tally::{ColumnBatch, MatrixTally};
use crate::geometry::orthonormal_basis;
use crate::sampling::{Stream, splitmix64};
use crate::texture::Symmetry;
use crate::tracer::polarisation::Polarised;
use crate::tracer::response::{FacetSample, MAX_FILM_LAYERS};
use crate::tracer::surface::{Outcome, Ray};
use crate::tracer::{Clear, Surface};
use rayon::prelude::*;

/// Rays per batch (work chunk) of one matrix column: fixed, never derived from the thread
/// count. Small enough that a few 10⁴ rays per bin give ≳ 10 batches for the standard error.
pub const RAYS_PER_BATCH: u64 = 1024;

/// Relative tolerance between the setup's real indices and the surface's.
const INDEX_TOL_REL: f64 = 1e-9;

fn tracer_side(side: Side) -> crate::tracer::Side {
    match side {
        Side::Above => crate::tracer::Side::Above,
        Side::Below => crate::tracer::Side::Below,
    }
}

fn matrix_side(side: crate::tracer::Side) -> Side {
    match side {
        crate::tracer::Side::Above => Side::Above,
        crate::tracer::Side::Below => Side::Below,
    }
}

/// Whether bins folded by `bins` may be sampled for a texture of symmetry `texture`: the
/// texture must be at least as symmetric as the fold (full-circle bins always may).
fn fold_allowed(bins: &AngleBins, texture: Symmetry) -> bool {
    let rank = |s: Symmetry| match s {
        Symmetry::None => 0,
        Symmetry::Mirror => 1,
        Symmetry::Square => 2,
        Symmetry::Isotropic => 3,
    };
    match bins.symmetry() {
        Symmetry::Isotropic | Symmetry::None => true,
        Symmetry::Mirror => rank(texture) >= 1,
        Symmetry::Square => rank(texture) >= 2 && texture != Symmetry::Mirror,
    }
}

/// Redistribution matrices of `surface` traced by Monte Carlo.
///
/// * `setup` – bins, wavelength, media and film-layer names; `setup.above.n` and
///   `setup.below.n` must equal the surface's `n_above` and `n_below`, and there must be one
///   film name per layer of `surface.response`.
/// * `rays_per_bin` – rays per incoming bin and side (≥ 2 · [`RAYS_PER_BATCH`] so that every
///   column has a standard error).
/// * `seed`, `key` – the master seed and the job key (e.g. packing the wavelength index);
///   batch b of column (side s, bin j) draws from `Stream::new(seed, key ^ mix(s, j), b)`,
///   with `mix` a SplitMix64 hash of the column index.
///
/// Each ray starts unpolarised in bin j with a direction uniform in sin²θ and φ over the bin
/// ([`AngleBins::sample`]: uniform radiance within the bin, the matrices' normalisation),
/// at a uniform position just outside the slab; it is followed with film absorption booked
/// per layer and no bulk absorption. Its exit direction is binned in the medium it ends in;
/// rays given up by the tracer (numerics, event limit) are booked as lost.
/// Parallel over (side, bin, batch); batches are folded in that fixed order.
pub fn textured_matrices(
    surface: &Surface,
    setup: InterfaceSetup,
    rays_per_bin: u64,
    seed: u64,
    key: u64,
) -> Result<InterfaceMatrices, MatrixError> {
    Ok(textured_matrices_with_replicas(surface, setup, rays_per_bin, seed, key, 0)?.pooled)
}

/// Most replicas [`textured_matrices_with_replicas`] splits a trace into in matrix mode.
pub const MAX_REPLICAS: usize = 4;

/// Replicas a trace of `rays_per_bin` rays per bin splits into: one batch of
/// [`RAYS_PER_BATCH`] rays at least per replica, at most `max_replicas`; 0 when fewer than
/// two would fit (no replica estimate).
pub fn replica_count(rays_per_bin: u64, max_replicas: usize) -> usize {
    let batches = rays_per_bin.div_ceil(RAYS_PER_BATCH);
    let r = (max_replicas as u64).min(batches) as usize;
    if r >= 2 { r } else { 0 }
}

/// Pooled redistribution matrices of a traced interface and the independent replicas they
/// are made of.
#[derive(Clone, Debug)]
pub struct ReplicatedMatrices {
    /// All rays: the matrices (with batch standard errors) of [`textured_matrices`].
    pub pooled: InterfaceMatrices,
    /// Disjoint parts of the same rays, each an independent estimate of the matrices
    /// (without standard errors: `std_error` is `None`); empty when no replicas were asked
    /// for or fewer than two fit.
    pub replicas: Vec<InterfaceMatrices>,
    /// Rays per incoming bin and side of each replica (their statistical weights).
    pub replica_rays_per_bin: Vec<u64>,
}

/// [`textured_matrices`] together with up to `max_replicas` independent replicas.
///
/// The rays are exactly those of [`textured_matrices`] (same streams, same batches, and
/// `pooled` is bitwise the same); replica r holds the batches b with b mod R = r of every
/// column, R = [`replica_count`]`(rays_per_bin, max_replicas)`. Batches draw from disjoint
/// random streams, so replicas are independent, and together they hold every ray once:
/// the pooled matrices are their ray-weighted mean. A replica needs no standard error of
/// its own (its spread against the other replicas is what a caller uses), so one batch per
/// column is enough. Replicas are built one after another: memory is that of two tallies.
pub fn textured_matrices_with_replicas(
    surface: &Surface,
    setup: InterfaceSetup,
    rays_per_bin: u64,
    seed: u64,
    key: u64,
    max_replicas: usize,
) -> Result<ReplicatedMatrices, MatrixError> {
    // Check the set-up against the surface
    let n_layers = surface.response.n_layers();
    let same = |a: f64, b: f64| (a - b).abs() <= INDEX_TOL_REL * a.abs().max(b.abs());
    if !same(setup.above.n, surface.n_above) || !same(setup.below.n, surface.n_below) {
        return Err(MatrixError::setup(
            format!(
                "media {} (n = {}) above and {} (n = {}) below, surface traced between n = {} and n = {}",
                setup.above.id,
                setup.above.n,
                setup.below.id,
                setup.below.n,
                surface.n_above,
                surface.n_below
            ),
            "the setup's real indices equal to the surface's n_above and n_below",
            "build the InterfaceSetup with the real parts of the same media as the Surface",
        ));
    }
    if setup.film_layers.len() != n_layers || n_layers > MAX_FILM_LAYERS {
        return Err(MatrixError::setup(
            format!(
                "{} film layer name(s) for a coating of {} layer(s)",
                setup.film_layers.len(),
                n_layers
            ),
            "one name per film layer of the surface's response (top to bottom)",
            "name every film layer of the coating in InterfaceSetup::film_layers",
        ));
    }
    if rays_per_bin < 2 * RAYS_PER_BATCH {
        return Err(MatrixError::setup(
            format!("{rays_per_bin} rays per bin"),
            &format!("at least {} rays per bin (two batches)", 2 * RAYS_PER_BATCH),
            "ask for more rays per bin",
        ));
    }
    let texture_symmetry = surface.texture.symmetry();
    if !fold_allowed(&setup.bins, texture_symmetry) {
        return Err(MatrixError::setup(
            format!(
                "bins folded by `{}` symmetry for a texture of symmetry {:?}",
                setup.bins.symmetry_name(),
                texture_symmetry
            ),
            "a bin symmetry the texture has (or isotropic / none)",
            "use bins with the texture's symmetry, `none`, or one isotropic azimuth bin",
        ));
    }

    // Trace every (side, bin, batch) in parallel
    let n = setup.bins.len();
    let mut tally = MatrixTally::new(setup)?;
    let n_batches = rays_per_bin.div_ceil(RAYS_PER_BATCH);
    let jobs: Vec<(Side, usize, u64)> = [Side::Above, Side::Below]
        .into_iter()
        .flat_map(|side| (0..n).flat_map(move |j| (0..n_batches).map(move |b| (side, j, b))))
        .collect();
    let bins = &tally.setup().bins;
    let batches: Vec<ColumnBatch> = jobs
        .par_iter()
        .map(|&(side, j, b)| {
            let column = match side {
                Side::Above => j,
                Side::Below => n + j,
            } as u64;
            let mut rng = Stream::new(seed, key ^ splitmix64(column), b);
            let rays = RAYS_PER_BATCH.min(rays_per_bin - b * RAYS_PER_BATCH);
            let mut batch = tally.batch(side, j);
            trace_batch(surface, bins, side, j, rays, &mut rng, &mut batch);
            batch
        })
        .collect(); // indexed collect keeps (side, bin, batch) order
    for batch in &batches {
        tally.add_batch(batch)?;
    }
    let mut m = tally.finish()?;
    m.provenance = format!(
        "monte carlo surface tracer: {} rays ({rays_per_bin} per bin and side, batches of {RAYS_PER_BATCH}), seed {seed}, key {key:#x}, polarisation {:?} within the interface, unpolarised between interfaces; no bulk absorption inside the texture slab; texture: {}",
        tally.total_rays(),
        surface.polarisation,
        surface.texture.describe()
    );

    // Replicas: batch b of every column goes to replica b mod R (jobs are in (side, bin,
    // batch) order, so `jobs[k].2` is the batch index of `batches[k]`).
    let n_rep = replica_count(rays_per_bin, max_replicas);
    let mut replicas = Vec::with_capacity(n_rep);
    let mut replica_rays_per_bin = Vec::with_capacity(n_rep);
    for r in 0..n_rep as u64 {
        let mut part = MatrixTally::new(tally.setup().clone())?;
        for (batch, &(_, _, b)) in batches.iter().zip(&jobs) {
            if b % n_rep as u64 == r {
                part.add_batch(batch)?;
            }
        }
        replica_rays_per_bin.push(part.rays(Side::Above, 0));
        let mut rep = part.finish()?;
        rep.std_error = None;
        rep.audit = rep.compute_audit();
        rep.provenance = format!(
            "replica {} of {n_rep}: batches b with b mod {n_rep} = {r}; {}",
            r + 1,
            m.provenance
        );
        replicas.push(rep);
    }
    Ok(ReplicatedMatrices {
        pooled: m,
        replicas,
        replica_rays_per_bin,
    })
}

/// Traces `rays` rays of column (`side`, `in_bin`) into `batch`.
fn trace_batch(
    surface: &Surface,
    bins: &AngleBins,
    side: Side,
    in_bin: usize,
    rays: u64,
    rng: &mut Stream,
    batch: &mut ColumnBatch,
) {
    let n_layers = surface.response.n_layers();
    let mut film = [0.0; MAX_FILM_LAYERS];
    let mut sample = FacetSample::default();
    // Light from above travels down, light from below travels up.
    let hemisphere = match side {
        Side::Above => Hemisphere::Down,
        Side::Below => Hemisphere::Up,
    };
    let t_side = tracer_side(side);
    for _ in 0..rays {
        let (u1, u2) = (rng.uniform(), rng.uniform());
        let dir = bins.sample(in_bin, hemisphere, u1, u2);
        let origin = surface.entry_point(t_side, rng);
        let mut ray = Ray {
            origin,
            dir,
            pol: Polarised {
                s: [1.0, 0.0, 0.0, 0.0],
                e1: orthonormal_basis(dir).0,
            },
            skip: None,
        };
        film[..n_layers].iter_mut().for_each(|a| *a = 0.0);
        batch.launch(1.0);
        let (outcome, _) =
            surface.follow(&mut ray, t_side, rng, &mut film, &mut sample, &mut Clear);
        for (l, a) in film[..n_layers].iter().enumerate() {
            if *a != 0.0 {
                batch.absorb(l, *a);
            }
        }
        let w = ray.pol.s[0];
        match outcome {
            Outcome::Left(out) => batch.add(matrix_side(out), bins.index(ray.dir), w),
            Outcome::Abandoned { .. } => batch.lose(w),
            // All power went into the films (booked there).
            Outcome::Extinguished => {}
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::redistribution::MediumInfo;
    use crate::texture::pyramids::RegularPyramidsSpec;
    use crate::texture::{Planar, RegularPyramids};
    use crate::tracer::{BareInterface, FacetResponse, PolarisationMode};

    /// Upright 2 µm pyramids, bare, between n = 1 and 3.5.
    fn bare_pyramids() -> (RegularPyramids, BareInterface) {
        let tex = RegularPyramids::new(RegularPyramidsSpec::upright(2.0)).unwrap();
        let resp = BareInterface {
            n_above: 1.0,
            n_below: 3.5,
        };
        (tex, resp)
    }

    fn stokes_surface<'a>(tex: &'a RegularPyramids, resp: &'a BareInterface) -> Surface<'a> {
        Surface {
            texture: tex,
            response: resp,
            n_above: resp.n_above,
            n_below: resp.n_below,
            polarisation: PolarisationMode::Stokes,
        }
    }

    fn setup(bins: AngleBins, na: f64, nb: f64) -> InterfaceSetup {
        InterfaceSetup {
            bins,
            wavelength_nm: 1000.0,
            above: MediumInfo::new("air", na),
            below: MediumInfo::new("si", nb),
            film_layers: vec![],
        }
    }

    /// A planar bare interface traced by Monte Carlo equals the analytic planar matrices
    /// (Fresnel, Born & Wolf 1999 §1.5.2) within 4σ plus nothing else: the planar kernel maps
    /// bins exactly in both methods.
    #[test]
    fn traced_planar_interface_matches_analytic_fresnel_matrices() {
        let bins = AngleBins::equal_etendue(6, 1, Symmetry::Isotropic).unwrap();
        let (na, nb) = (1.0, 3.5);
        let resp = BareInterface {
            n_above: na,
            n_below: nb,
        };
        let tex = Planar::new();
        let surf = Surface {
            texture: &tex,
            response: &resp,
            n_above: na,
            n_below: nb,
            polarisation: PolarisationMode::Stokes,
        };
        let mc = textured_matrices(&surf, setup(bins.clone(), na, nb), 8192, 3, 0).unwrap();
        let exact = InterfaceMatrices::planar(setup(bins.clone(), na, nb), |c, side| {
            let (n1, n2) = if side == Side::Above {
                (na, nb)
            } else {
                (nb, na)
            };
            let p = BareInterface {
                n_above: n1,
                n_below: n2,
            }
            .power(crate::tracer::Side::Above, c, 1.0);
            let r = 0.5 * (p[0] + p[1]);
            super::super::InterfaceResponse::lossless(r, 1.0 - r)
        })
        .unwrap();
        let (ea, eb) = mc.std_error.clone().unwrap();
        for (m, x, e) in [
            (&mc.from_above, &exact.from_above, &ea),
            (&mc.from_below, &exact.from_below, &eb),
        ] {
            for i in 0..bins.len() {
                for j in 0..bins.len() {
                    for (a, b, s) in [
                        (&m.reflection, &x.reflection, &e.reflection),
                        (&m.transmission, &x.transmission, &e.transmission),
                    ] {
                        let d = (a.get(i, j) - b.get(i, j)).abs();
                        assert!(
                            d <= 4.0 * s.get(i, j) + 1e-12,
                            "({i},{j}): {} vs {} ± {}",
                            a.get(i, j),
                            b.get(i, j),
                            s.get(i, j)
                        );
                    }
                }
            }
        }
        assert!(mc.audit.energy_max_abs < 1e-12, "{:?}", mc.audit);
    }

    /// Replicas partition the pooled rays: the pooled matrices are those of
    /// `textured_matrices` bit for bit, and their ray-weighted mean is the pooled estimate
    /// (each column is a ratio Σs/Σn over batches of equal launched weight per ray).
    #[test]
    fn replicas_partition_the_pooled_rays() {
        assert_eq!(replica_count(2048, MAX_REPLICAS), 2);
        assert_eq!(replica_count(5000, MAX_REPLICAS), 4);
        assert_eq!(replica_count(5000, 1), 0);
        let bins = AngleBins::equal_etendue(3, 1, Symmetry::Isotropic).unwrap();
        let (tex, resp) = bare_pyramids();
        let surf = stokes_surface(&tex, &resp);
        let s = || setup(bins.clone(), 1.0, 3.5);
        let plain = textured_matrices(&surf, s(), 5000, 4, 7).unwrap();
        let rep = textured_matrices_with_replicas(&surf, s(), 5000, 4, 7, MAX_REPLICAS).unwrap();
        assert_eq!(rep.pooled, plain);
        // 5 batches (4 of 1024, one of 904): replica 0 holds batches 0 and 4.
        assert_eq!(rep.replica_rays_per_bin, vec![1928, 1024, 1024, 1024]);
        let w: Vec<f64> = rep.replica_rays_per_bin.iter().map(|&x| x as f64).collect();
        for i in 0..bins.len() {
            for j in 0..bins.len() {
                let mean: f64 = rep
                    .replicas
                    .iter()
                    .zip(&w)
                    .map(|(m, w)| w * m.from_above.reflection.get(i, j))
                    .sum::<f64>()
                    / 5000.0;
                let p = plain.from_above.reflection.get(i, j);
                assert!((mean - p).abs() < 1e-14, "({i},{j}): {mean} vs {p}");
            }
        }
        assert!(rep.replicas.iter().all(|m| m.std_error.is_none()));
        // Replicas differ from each other (independent rays).
        assert_ne!(
            rep.replicas[0].from_above.reflection,
            rep.replicas[1].from_above.reflection
        );
    }

    #[test]
    fn results_do_not_depend_on_thread_count_and_bad_setups_are_refused() {
        let bins = AngleBins::equal_etendue(3, 2, Symmetry::Square).unwrap();
        let (tex, resp) = bare_pyramids();
        let surf = stokes_surface(&tex, &resp);
        let run = |threads: usize| {
            rayon::ThreadPoolBuilder::new()
                .num_threads(threads)
                .build()
                .unwrap()
                .install(|| textured_matrices(&surf, setup(bins.clone(), 1.0, 3.5), 2048, 9, 5))
                .unwrap()
        };
        let (a, b) = (run(1), run(3));
        assert_eq!(a.from_above.reflection, b.from_above.reflection);
        assert_eq!(a.from_below.transmission, b.from_below.transmission);
        assert!(a.audit.energy_max_abs < 1e-12);
        // Wrong medium index, too few rays.
        assert!(textured_matrices(&surf, setup(bins.clone(), 1.0, 3.6), 2048, 9, 5).is_err());
        assert!(textured_matrices(&surf, setup(bins.clone(), 1.0, 3.5), 100, 9, 5).is_err());
    }
}
