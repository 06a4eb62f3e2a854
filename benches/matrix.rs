//! Matrix build (analytic planar interface) and stack solve per wavelength, in bins/s, and the
//! solve with the solver's binning error estimate (three extra solves on half the bins).
//! Run: `cargo bench --bench matrix`. Seeded inputs only, no I/O in the loops.

use criterion::{BenchmarkId, Criterion, Throughput, black_box, criterion_group, criterion_main};
use lightfold::redistribution::{
    AngleBins, InterfaceMatrices, InterfaceResponse, InterfaceSetup, MediumInfo, Side,
};
use lightfold::texture::Symmetry;
use lightfold::thinfilm::Side as FilmSide;
use lightfold::tracer::{BareInterface, FacetResponse};
use lightfold::wafer::{
    BinningCheck, SemiInfinite, SolverOptions, Stack, StackElement, ThickLayer,
};
use num_complex::Complex64;

/// Bare interface between `na` above and `nb` below, unpolarised Fresnel split (the
/// tracer's closed form).
fn fresnel_split(na: f64, nb: f64) -> impl Fn(f64, Side) -> InterfaceResponse {
    let bare = BareInterface {
        n_above: na,
        n_below: nb,
    };
    move |c, side| {
        let from = match side {
            Side::Above => FilmSide::Above,
            Side::Below => FilmSide::Below,
        };
        let [rs, rp, ..] = bare.power(from, c, 1.0);
        let r = 0.5 * (rs + rp);
        InterfaceResponse::lossless(r, 1.0 - r)
    }
}

fn bins(np: usize, na: usize) -> AngleBins {
    let sym = if na == 1 {
        Symmetry::Isotropic
    } else {
        Symmetry::Square
    };
    AngleBins::equal_etendue(np, na, sym).unwrap()
}

fn setup(b: &AngleBins, na: f64, nb: f64) -> InterfaceSetup {
    InterfaceSetup {
        bins: b.clone(),
        wavelength_nm: 1000.0,
        above: MediumInfo::new("a", na),
        below: MediumInfo::new("b", nb),
        film_layers: vec![],
    }
}

fn planar(b: &AngleBins, na: f64, nb: f64) -> InterfaceMatrices {
    InterfaceMatrices::planar(setup(b, na, nb), fresnel_split(na, nb)).unwrap()
}

/// Dense front (ideal Lambertian with Fresnel split) over 160 µm silicon and a planar rear
/// into air: the dense case a textured front produces.
fn stack(b: &AngleBins) -> Stack {
    let n = 3.6;
    let front = InterfaceMatrices::lambertian(setup(b, 1.0, n), fresnel_split(1.0, n)).unwrap();
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
                index: Complex64::new(n, 1e-4),
                thickness_um: 160.0,
            }),
            StackElement::Interface(Box::new(planar(b, n, 1.0))),
            medium("air"),
        ],
    )
    .unwrap()
}

fn matrix(c: &mut Criterion) {
    let mut g = c.benchmark_group("matrix_build_planar");
    for (np, na) in [(30, 1), (50, 8), (100, 24)] {
        let b = bins(np, na);
        g.throughput(Throughput::Elements(b.len() as u64));
        g.bench_with_input(
            BenchmarkId::from_parameter(format!("{np}x{na}")),
            &b,
            |bch, b| bch.iter(|| planar(black_box(b), 1.0, 3.6)),
        );
    }
    g.finish();

    let mut g = c.benchmark_group("stack_solve");
    g.sample_size(10);
    for (np, na) in [(30, 1), (50, 8), (100, 24)] {
        let b = bins(np, na);
        let s = stack(&b);
        eprintln!(
            "stack_solve {np}x{na}: {} bins, dense matrices ≈ {:.1} MB",
            b.len(),
            s.memory_estimate_bytes() as f64 / 1e6
        );
        let inc: Vec<f64> = (0..b.len())
            .map(|i| if i < na { 1.0 } else { 0.0 })
            .collect();
        g.throughput(Throughput::Elements(b.len() as u64));
        g.bench_with_input(
            BenchmarkId::from_parameter(format!("{np}x{na}")),
            &s,
            |bch, s| bch.iter(|| s.solve(black_box(&inc), &SolverOptions::default()).unwrap()),
        );
    }
    g.finish();

    let mut g = c.benchmark_group("stack_solve_with_binning_error");
    g.sample_size(10);
    for (np, na) in [(30, 1), (50, 8)] {
        let b = bins(np, na);
        let s = stack(&b);
        let inc: Vec<f64> = (0..b.len())
            .map(|i| if i < na { 1.0 } else { 0.0 })
            .collect();
        let check = BinningCheck { keep_polar: 0 };
        g.throughput(Throughput::Elements(b.len() as u64));
        g.bench_with_input(
            BenchmarkId::from_parameter(format!("{np}x{na}")),
            &s,
            |bch, s| {
                bch.iter(|| {
                    s.solve_with_binning_error(black_box(&inc), &check, &SolverOptions::default())
                        .unwrap()
                })
            },
        );
    }
    g.finish();
}

criterion_group!(benches, matrix);
criterion_main!(benches);
