//! Surface tracer throughput: facet events per second (regular pyramids, bare and coated,
//! unpolarised and with Stokes tracking) and rays per second (random pyramids, front
//! surface), seeded, no I/O in the loop. One thread unless the group name says otherwise.

use criterion::{Criterion, Throughput, black_box, criterion_group, criterion_main};
use lightfold::sampling::Stream;
use lightfold::texture::pyramids::RegularPyramidsSpec;
use lightfold::texture::random::RandomPyramidsSpec;
use lightfold::texture::{RandomPyramids, RegularPyramids, Texture};
use lightfold::thinfilm::{FilmStack, Layer};
use lightfold::tracer::{
    BareInterface, CoatedInterface, CoatingGeometry, FacetResponse, Incidence, InputPolarisation,
    PolarisationMode, Surface,
};
use num_complex::Complex64;

const RAYS: u64 = 20_000;
const N_SI: f64 = 3.94;

fn surface<'a>(
    t: &'a dyn Texture,
    r: &'a dyn FacetResponse,
    mode: PolarisationMode,
) -> Surface<'a> {
    Surface {
        texture: t,
        response: r,
        n_above: 1.0,
        n_below: N_SI,
        polarisation: mode,
    }
}

/// Facet events in one traced batch (to turn rays/s into events/s).
fn events_per_ray(s: &Surface, inc: &Incidence) -> f64 {
    let (t, ()) = s.trace_chunk(inc, RAYS, &mut Stream::new(1, 0, 0));
    let n: u64 = t.hits.iter().sum();
    t.hits
        .iter()
        .enumerate()
        .map(|(k, &c)| k as f64 * c as f64)
        .sum::<f64>()
        / n as f64
}

fn tracer(c: &mut Criterion) {
    let pyramids = RegularPyramids::new(RegularPyramidsSpec::upright(5.0)).unwrap();
    let random = RandomPyramids::new(RandomPyramidsSpec::log_normal_height(3.0, 0.35, 1)).unwrap();
    let bare = BareInterface {
        n_above: 1.0,
        n_below: N_SI,
    };
    let stack = FilmStack::new(
        Complex64::new(1.0, 0.0),
        vec![Layer::new(Complex64::new(2.05, 0.001), 75.0)],
        Complex64::new(N_SI, 0.0),
    )
    .unwrap();
    let coated = CoatedInterface::new(&stack, 600.0, CoatingGeometry::Conformal, &[]).unwrap();
    let inc = Incidence::Above {
        theta: 0.0,
        phi: 0.0,
        polarisation: InputPolarisation::Unpolarised,
    };
    let pool1 = rayon::ThreadPoolBuilder::new()
        .num_threads(1)
        .build()
        .unwrap();

    let cases: [(&str, &dyn Texture, &dyn FacetResponse, PolarisationMode); 4] = [
        (
            "pyramids_bare_unpolarised",
            &pyramids,
            &bare,
            PolarisationMode::Unpolarised,
        ),
        (
            "pyramids_bare_stokes",
            &pyramids,
            &bare,
            PolarisationMode::Stokes,
        ),
        (
            "pyramids_coated_stokes",
            &pyramids,
            &coated,
            PolarisationMode::Stokes,
        ),
        (
            "random_pyramids_coated_stokes",
            &random,
            &coated,
            PolarisationMode::Stokes,
        ),
    ];
    let mut g = c.benchmark_group("facet_events");
    for (name, tex, resp, mode) in cases {
        let s = surface(tex, resp, mode);
        let events = (events_per_ray(&s, &inc) * RAYS as f64) as u64;
        g.throughput(Throughput::Elements(events));
        g.bench_function(name, |b| {
            b.iter(|| pool1.install(|| black_box(s.trace::<()>(&inc, RAYS, 7, 0))))
        });
    }
    // The same regular-pyramid case without ray packets (`tracer::packet`), for comparison.
    let s = surface(&pyramids, &bare, PolarisationMode::Unpolarised);
    let events = (events_per_ray(&s, &inc) * RAYS as f64) as u64;
    g.throughput(Throughput::Elements(events));
    g.bench_function("pyramids_bare_unpolarised_one_ray_at_a_time", |b| {
        b.iter(|| pool1.install(|| black_box(s.trace_one_at_a_time::<()>(&inc, RAYS, 7, 0))))
    });
    g.finish();

    // Many chunks, so that two threads share the work evenly (chunks are fixed at
    // RAYS_PER_CHUNK rays for determinism; a handful of chunks would measure the imbalance).
    let scaling_rays = 40 * lightfold::tracer::RAYS_PER_CHUNK;
    let mut g = c.benchmark_group("rays");
    g.sample_size(10);
    g.throughput(Throughput::Elements(scaling_rays));
    let s = surface(&random, &coated, PolarisationMode::Stokes);
    g.bench_function("random_pyramids_front_1_thread", |b| {
        b.iter(|| pool1.install(|| black_box(s.trace::<()>(&inc, scaling_rays, 7, 0))))
    });
    let pool2 = rayon::ThreadPoolBuilder::new()
        .num_threads(2)
        .build()
        .unwrap();
    g.bench_function("random_pyramids_front_2_threads", |b| {
        b.iter(|| pool2.install(|| black_box(s.trace::<()>(&inc, scaling_rays, 7, 0))))
    });
    g.finish();
}

criterion_group!(benches, tracer);
criterion_main!(benches);
