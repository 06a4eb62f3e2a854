//! Thin-film hot paths: angle-table lookup (the tracer's per-facet-event call) and the direct
//! transfer-matrix solution it replaces. Seeded inputs, no I/O in the loop.
//!
//! `cargo bench --bench thinfilm -- --warm-up-time 1 --measurement-time 3`

use criterion::{Criterion, Throughput, black_box, criterion_group, criterion_main};
use lightfold::thinfilm::{AngleTable, FilmResponse, FilmStack, FullSample, Layer};
use num_complex::Complex64;

const N_ANGLES: usize = 1 << 14;

/// Incidence cosines from SplitMix64 (Steele, Lea & Flood, OOPSLA 2014), seed 42.
fn angles() -> Vec<f64> {
    let mut state: u64 = 42;
    (0..N_ANGLES)
        .map(|_| {
            state = state.wrapping_add(0x9E37_79B9_7F4A_7C15);
            let mut z = state;
            z = (z ^ (z >> 30)).wrapping_mul(0xBF58_476D_1CE4_E5B9);
            z = (z ^ (z >> 27)).wrapping_mul(0x94D0_49BB_1331_11EB);
            ((z ^ (z >> 31)) >> 11) as f64 / (1u64 << 53) as f64
        })
        .collect()
}

fn c(re: f64, im: f64) -> Complex64 {
    Complex64::new(re, im)
}

/// Three films on silicon: ITO / SiO2 / SiNx, the passivated front of a heterojunction-like
/// stack, at 600 nm.
fn three_layer() -> FilmStack {
    let layers = vec![
        Layer::new(c(1.9, 0.025), 80.0),
        Layer::new(c(1.45, 0.0), 10.0),
        Layer::new(c(2.05, 0.001), 60.0),
    ];
    FilmStack::new(c(1.0, 0.0), layers, c(3.94, 0.02)).unwrap()
}

fn lookup(c: &mut Criterion) {
    let cos = angles();
    let front = three_layer();
    let inside = front.reversed(); // from the silicon: total internal reflection beyond ~15°
    let mut g = c.benchmark_group("angle_table");
    g.throughput(Throughput::Elements(cos.len() as u64));
    for (name, stack) in [
        ("lookup_front_3layer", &front),
        ("lookup_from_si_3layer", &inside),
    ] {
        let table = AngleTable::build(stack, 600.0);
        // Angles hidden from the optimiser as a whole, each result consumed: the loop times
        // the lookups, not a reduction over their results.
        g.bench_function(name, |b| {
            b.iter(|| {
                for &x in black_box(&cos[..]) {
                    black_box(table.lookup(x));
                }
            })
        });
    }
    let table = AngleTable::build(&front, 600.0);
    let mut sample = FullSample::new(front.n_layers());
    g.bench_function("lookup_full_3layer", |b| {
        b.iter(|| {
            let mut acc = 0.0;
            for &x in &cos {
                table.lookup_full(black_box(x), &mut sample);
                let s = &sample;
                acc += s.power.reflectance_unpolarised() + s.power.transmittance_unpolarised();
                acc += s.reflection_cross.re + s.transmission_cross.im;
                acc += s.absorptance_total_unpolarised();
            }
            acc
        })
    });
    // The tracer's path: straight into fixed-size arrays (as `FacetSample` holds them).
    let table = AngleTable::build(&inside, 600.0);
    let (mut a_s, mut a_p) = ([0.0; 12], [0.0; 12]);
    g.bench_function("lookup_into_from_si_3layer", |b| {
        b.iter(|| {
            let mut acc = 0.0;
            for &x in &cos {
                let n = table.n_layers();
                let (p, cross) = table.lookup_into(black_box(x), &mut a_s[..n], &mut a_p[..n]);
                acc += p.reflectance_unpolarised() + p.transmittance_unpolarised();
                acc += cross.reflection.re + cross.transmission.im;
                acc += a_s[..n].iter().sum::<f64>() + a_p[..n].iter().sum::<f64>();
            }
            acc
        })
    });
    g.finish();

    let mut g = c.benchmark_group("angle_table_build");
    g.sample_size(10);
    g.bench_function("build_3layer_from_si", |b| {
        b.iter(|| AngleTable::build(black_box(&inside), 600.0))
    });
    g.finish();
}

fn direct(c: &mut Criterion) {
    let cos = angles();
    let stack = three_layer();
    let mut out = FilmResponse::with_layers(stack.n_layers());
    let mut g = c.benchmark_group("tmm_direct");
    let n = 1024;
    g.throughput(Throughput::Elements(n as u64));
    g.bench_function("solve_3layer_s_and_p", |b| {
        b.iter(|| {
            let mut acc = 0.0;
            for &x in &cos[..n] {
                stack.solve_into(600.0, black_box(x), &mut out);
                acc += out.s.reflectance;
            }
            acc
        })
    });
    g.finish();
}

criterion_group!(benches, lookup, direct);
criterion_main!(benches);
