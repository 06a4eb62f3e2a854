//! Surface-tracer throughput (one thread unless asked), for the `scripts/bench` recipe: wall-clock rates
//! and, under `valgrind --tool=callgrind`, instruction counts per facet event that do not
//! depend on how busy the machine is.
//!
//! `cargo run --release --example trace_throughput -- CASE RAYS [THETA_DEG [THREADS]]`
//! (incidence from above at polar angle THETA_DEG, default 0: normal incidence; THREADS
//! worker threads, default 1; the one-ray tracer instead of ray packets if the environment
//! variable `LIGHTFOLD_ONE_RAY` is set) with CASE one of
//! `pyramids-bare` (regular {111} pyramids, bare Si, unpolarised), `pyramids-coated`
//! (75 nm SiNx table, Stokes), `random-coated` (random pyramids, 3 µm mean height, SiNx,
//! Stokes: the front surface of the demo).

use lightfold::texture::pyramids::RegularPyramidsSpec;
use lightfold::texture::random::RandomPyramidsSpec;
use lightfold::texture::{RandomPyramids, RegularPyramids, Texture};
use lightfold::thinfilm::{FilmStack, Layer};
use lightfold::tracer::{
    BareInterface, CoatedInterface, CoatingGeometry, FacetResponse, Incidence, InputPolarisation,
    PolarisationMode, Surface,
};
use num_complex::Complex64;
use std::process::ExitCode;

const N_SI: f64 = 3.94;

fn main() -> ExitCode {
    let args: Vec<String> = std::env::args().collect();
    let case = args.get(1).map_or("pyramids-bare", String::as_str);
    let Some(rays) = args.get(2).map_or(Some(200_000), |s| s.parse::<u64>().ok()) else {
        eprintln!("error: RAYS must be a whole number, e.g. 200000");
        return ExitCode::FAILURE;
    };
    let stack = FilmStack::new(
        Complex64::new(1.0, 0.0),
        vec![Layer::new(Complex64::new(2.05, 0.001), 75.0)],
        Complex64::new(N_SI, 0.0),
    )
    .expect("valid stack");
    let bare = BareInterface {
        n_above: 1.0,
        n_below: N_SI,
    };
    let coated = CoatedInterface::new(&stack, 600.0, CoatingGeometry::Conformal, &[])
        .expect("valid coating");
    let texture: Box<dyn Texture> = match case {
        "pyramids-bare" | "pyramids-coated" => {
            Box::new(RegularPyramids::new(RegularPyramidsSpec::upright(5.0)).expect("valid"))
        }
        "random-coated" => Box::new(
            RandomPyramids::new(RandomPyramidsSpec::log_normal_height(3.0, 0.35, 1))
                .expect("valid"),
        ),
        other => {
            eprintln!(
                "error: unknown case {other:?}; expected pyramids-bare, pyramids-coated or \
                 random-coated"
            );
            return ExitCode::FAILURE;
        }
    };
    let (response, mode): (&dyn FacetResponse, _) = if case == "pyramids-bare" {
        (&bare, PolarisationMode::Unpolarised)
    } else {
        (&coated, PolarisationMode::Stokes)
    };
    let surface = Surface {
        texture: &*texture,
        response,
        n_above: 1.0,
        n_below: N_SI,
        polarisation: mode,
    };
    let Some(theta_deg) = args.get(3).map_or(Some(0.0), |s| s.parse::<f64>().ok()) else {
        eprintln!("error: THETA_DEG must be a number of degrees, e.g. 30");
        return ExitCode::FAILURE;
    };
    let inc = Incidence::Above {
        theta: theta_deg.to_radians(),
        phi: 0.0,
        polarisation: InputPolarisation::Unpolarised,
    };
    let Some(threads) = args.get(4).map_or(Some(1), |s| s.parse::<usize>().ok()) else {
        eprintln!("error: THREADS must be a whole number, e.g. 2");
        return ExitCode::FAILURE;
    };
    let pool = rayon::ThreadPoolBuilder::new()
        .num_threads(threads)
        .build()
        .expect("thread pool");
    let start = std::time::Instant::now();
    // LIGHTFOLD_ONE_RAY=1: the one-ray tracer (`Surface::trace_one_at_a_time`), the
    // reference that criterion's runs compare the packet tracer with.
    let one_ray = std::env::var_os("LIGHTFOLD_ONE_RAY").is_some();
    let (tally, ()) = pool.install(|| {
        if one_ray {
            surface.trace_one_at_a_time::<()>(&inc, rays, 7, 0)
        } else {
            surface.trace::<()>(&inc, rays, 7, 0)
        }
    });
    let secs = start.elapsed().as_secs_f64();
    let events: f64 = tally
        .hits
        .iter()
        .enumerate()
        .map(|(k, &c)| k as f64 * c as f64)
        .sum();
    println!(
        "{case}: {rays} rays, {events} facet events, {secs:.3} s, {:.2} M events/s, {:.2} M rays/s, R = {:.5}",
        events / secs / 1e6,
        rays as f64 / secs / 1e6,
        tally.reflectance().value
    );
    ExitCode::SUCCESS
}
